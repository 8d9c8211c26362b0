"""Oldform coordinates and quadratic twists on given coefficients (no search).

Outside facts and their sources:
* Oldforms (Atkin & Lehner, Math. Ann. 185 (1970) 134-160; the Maass case is common
  practice; docs/theory.md §1.1): g(dz) has the coefficient sqrt(d) a_g(n/d) at n.
* Twists (A. O. L. Atkin and W.-C. W. Li, Invent. Math. 48 (1978) 221-243, holomorphic case,
  recalled; the Maass case is common practice): g (x) chi_D has coefficients chi_D(n) a_g(n),
  level dividing lcm(M, D^2), parity flipped for D < 0.
* Kronecker symbol and Euler's criterion (D/p) = D^((p-1)/2) mod p for odd primes p not
  dividing D; (D/2) = +1 for D = +-1 mod 8, -1 for D = +-3 mod 8; fundamental discriminants:
  common practice (H. Cohen, A Course in Computational Algebraic Number Theory (1993) §1.4,
  §5.1, recalled).
* a(n) of the PSL(2,Z) forms: data/reference/psl2z_coeffs_computed.csv (project computation;
  its outside checks are named in its header).
"""

from __future__ import annotations

import numpy as np
import pytest

from maasscomp.errors import InputError
from maasscomp.groups import gamma0
from maasscomp.spectrum.oldforms import ParentForm, describe_old, label_old, lift_columns
from maasscomp.spectrum.twists import (
    find_twist,
    fundamental_discriminants,
    is_fundamental_discriminant,
    kronecker,
    label_twist,
    twist_coefficients,
)

from .levels_helpers import level1_parents, synthetic_form

M = 120


def _primes(n):
    return [p for p in range(2, n) if all(p % q for q in range(2, int(p**0.5) + 1))]


def test_kronecker_symbol_against_euler_criterion_and_the_rule_at_2():
    Ds = [D for D in range(-60, 61) if is_fundamental_discriminant(D)]
    assert Ds[:6] == [-59, -56, -55, -52, -51, -47] and 5 in Ds and 8 in Ds and 12 in Ds
    for D in Ds:
        for p in _primes(200)[1:]:
            if D % p == 0:
                assert kronecker(D, p) == 0
            else:
                e = pow(D % p, (p - 1) // 2, p)
                assert kronecker(D, p) == (1 if e == 1 else -1), (D, p)
        expected2 = 0 if D % 2 == 0 else (1 if D % 8 in (1, 7) else -1)
        assert kronecker(D, 2) == expected2
        # complete multiplicativity in n
        for m, n in ((3, 10), (4, 9), (12, 35), (8, 27)):
            assert kronecker(D, m * n) == kronecker(D, m) * kronecker(D, n)
    with pytest.raises(InputError):
        kronecker(5, 0)


def test_fundamental_discriminants_of_a_level():
    assert fundamental_discriminants(9) == (-3,)
    assert fundamental_discriminants(16) == (-4, -8, 8)
    assert fundamental_discriminants(25) == (5,)
    assert fundamental_discriminants(64) == (-4, -8, 8)
    assert fundamental_discriminants(12) == (-3, -4, 12)
    assert fundamental_discriminants(1) == ()


def _g(k=0):
    return level1_parents()[k]


def test_describe_old_recovers_the_coordinates_of_a_combination():
    g = _g()
    for N, coords in ((4, {1: 0.3, 2: -1.2, 4: 0.5}), (12, {6: 1.0}), (9, {1: 1.0, 3: 0.25, 9: -2.0})):
        ds, B = lift_columns(g, N, M)
        c = sum(coords.get(d, 0.0) * B[:, i] for i, d in enumerate(ds))
        f = synthetic_form(N, g.parity, g.R, c[None, :] / c[np.nonzero(c)[0][0]])
        desc = describe_old(gamma0(N), f, level1_parents())
        assert desc is not None and len(desc.components) == 1
        comp = desc.components[0]
        assert comp.parent is g and sorted(comp.coordinates) == ds
        scale = c[np.nonzero(c)[0][0]]
        for d in ds:
            assert abs(comp.coordinates[d] - coords.get(d, 0.0) / scale) < 1e-12
        assert desc.residual < 1e-12
        extra = label_old(gamma0(N), f, level1_parents()).as_extra()
        assert f.extra["old_parents"][0]["level"] == 1 and f.extra["old_fit_residual"] == extra["old_fit_residual"]
        assert set(f.extra["old_parents"][0]["coordinates"]) == {str(d) for d in ds}


def test_describe_old_rejects_what_is_not_old():
    g = _g()
    # the twist by chi_{-3} is a newform of level 9 (even): not in any oldspace of level-1 forms
    tw = twist_coefficients(g.coeffs[:M], -3)
    f = synthetic_form(9, "even", g.R, tw[None, :])
    assert describe_old(gamma0(9), f, level1_parents()) is None
    # right coefficients but the wrong R, or the wrong parity, or a level that g does not divide
    f_old = synthetic_form(9, g.parity, g.R + 1e-3, g.coeffs[None, :M])
    assert describe_old(gamma0(9), f_old, level1_parents()) is None
    f_par = synthetic_form(9, "even", g.R, g.coeffs[None, :M])
    assert describe_old(gamma0(9), f_par, level1_parents()) is None
    # a perturbed oldform fails the fit
    bad = g.coeffs[:M].copy()
    bad[6] += 1e-4
    assert describe_old(gamma0(9), synthetic_form(9, g.parity, g.R, bad[None, :]), level1_parents()) is None
    with pytest.raises(InputError, match="no oldforms"):
        lift_columns(ParentForm(4, 1.0, "odd", np.array([1.0, 0.5])), 6, 2)


@pytest.mark.parametrize("N,D", [(9, -3), (16, -4), (64, 8), (64, -8), (25, 5)])
def test_find_twist_names_the_character_and_its_conductor(N, D):
    g = _g()
    parity = g.parity if D > 0 else ("even" if g.parity == "odd" else "odd")
    f = synthetic_form(N, parity, g.R, twist_coefficients(g.coeffs[:M], D)[None, :])
    f.extra["hecke_eigenform"] = True
    t = label_twist(gamma0(N), f, level1_parents())
    assert t is not None and t.parent is g
    assert t.discriminant == D and t.conductor == abs(D)
    assert t.character_parity == ("odd" if D < 0 else "even")
    assert f.extra["twist_character"] == {"discriminant": D, "conductor": abs(D), "parity": t.character_parity}
    assert f.extra["twist_of"]["level"] == 1 and f.extra["twist_residual"] < 1e-12
    # with the parity not matching the character nothing is found
    other = "odd" if parity == "even" else "even"
    f2 = synthetic_form(N, other, g.R, f.coeffs)
    assert find_twist(gamma0(N), f2, level1_parents()) is None


def test_find_twist_ignores_untwisted_forms_and_wrong_levels():
    g = _g()
    # g itself at level 9: coefficients equal the parent's, no twist is reported
    f = synthetic_form(9, g.parity, g.R, g.coeffs[None, :M])
    assert find_twist(gamma0(9), f, level1_parents()) is None
    # the chi_{-3} twist offered at level 18: 18 does not divide lcm(1, 9)
    tw = synthetic_form(18, "even", g.R, twist_coefficients(g.coeffs[:M], -3)[None, :])
    assert find_twist(gamma0(18), tw, level1_parents()) is None
    with pytest.raises(InputError, match="fundamental"):
        tw9 = synthetic_form(9, "even", g.R, tw.coeffs)
        find_twist(gamma0(9), tw9, level1_parents(), discriminants=[-12])


def test_labels_survive_the_store_encoding():
    """The entries written into Form.extra are plain JSON (str keys) that the store keeps."""
    from maasscomp.spectrum.operators import label_atkin_lehner
    from maasscomp.store._codec import decode_tree, encode_extra

    from .levels_helpers import lift_at_cusps

    g = _g()
    f = synthetic_form(9, g.parity, g.R, lift_at_cusps(g.coeffs, 1, 9, g.parity, 60))
    assert label_old(gamma0(9), f, level1_parents()) is not None
    label_atkin_lehner(gamma0(9), f)
    t = synthetic_form(9, "even", g.R, twist_coefficients(g.coeffs[:M], -3)[None, :])
    assert label_twist(gamma0(9), t, level1_parents()) is not None
    for form in (f, t):
        doc, arrays = encode_extra(form.extra)
        assert not arrays
        assert decode_tree(doc, arrays) == form.extra


def test_label_form_writes_every_level_label():
    from maasscomp.spectrum.levels import label_form

    from .levels_helpers import lift_at_cusps

    g = _g()
    G = gamma0(9)
    old = synthetic_form(9, g.parity, g.R, lift_at_cusps(g.coeffs, 3, 9, g.parity, 60))
    lab = label_form(G, old, level1_parents())
    assert lab.old is not None and lab.twist is None
    assert abs(lab.old.components[0].coordinates[3] - 1.0) < 1e-12
    assert set(old.extra) >= {"atkin_lehner", "old_parents", "old_fit_residual", "old_fit_n"}
    # g(3z) is fixed by W_9 (d = 3 -> 9 * 1 / 3 = 3, docs/theory-additions/levels.md §L.2)
    assert old.extra["atkin_lehner"]["9"]["sign"] == 1
    tw = synthetic_form(9, "even", g.R, twist_coefficients(g.coeffs[:M], -3)[None, :])
    lab = label_form(G, tw, level1_parents())
    assert lab.old is None and lab.twist is not None and lab.twist.discriminant == -3
    assert "twist_character" in tw.extra and "old_parents" not in tw.extra
