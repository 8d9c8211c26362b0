"""New/old structure, twists and Atkin--Lehner eigenvalues of searched forms at non-squarefree levels.

Forms come from tests/spectrum/levels_helpers.search_forms (the general-level search).
Outside facts and their sources:
* The ten PSL(2,Z) forms with R < 20 and a(n), n <= 1000: data/reference/psl2z_forms_computed.csv
  and psl2z_coeffs_computed.csv (project computation in arb; R1 agrees with the 34 decimals of
  Booker-Strombergsson-Venkatesh, IMRN 2006, see the file header).
* Oldforms (Atkin & Lehner, Math. Ann. 185 (1970) 134-160, holomorphic case; the Maass case is
  common practice): a newform g of level M gives the sigma_0(N/M) forms g(dz), d | N/M, at
  level N, with the same R and parity.
* Twists (A. O. L. Atkin and W.-C. W. Li, Invent. Math. 48 (1978) 221-243, holomorphic case,
  recalled; the Maass case is common practice): for a level-1 newform g and a primitive
  quadratic character chi of conductor q, g (x) chi is a newform of level q^2 with Hecke
  eigenvalues chi(p) a_g(p), the same R, the parity flipped when chi(-1) = -1, and Fricke
  eigenvalue chi(-1) (the W-pseudo-eigenvalue of a twist, same paper, recalled; here it is
  also checked independently through the root number of the L-function).
* The characters are written out from their textbook definitions (common practice):
  chi_{-3}(n) = (n/3); chi_{-4}(n) = (-1)^((n-1)/2) for odd n; chi_8(n) = +1 for n = +-1 mod 8
  and -1 for n = +-3 mod 8; chi_{-8}(n) = +1 for n = 1, 3 mod 8 and -1 for n = 5, 7 mod 8.
* Newforms with trivial character are eigenforms of every W_Q with eigenvalue +-1, and for
  p || N, a(p) = -eta_p/sqrt(p) (Atkin & Lehner 1970, Thm 3, holomorphic analogue; the Maass
  case is common practice; docs/theory.md §1.1).
* The root number of L(s, f) is (-1)^delta eta_N (derived in maasscomp.spectrum.lfunction).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from maasscomp.groups import divisors, gamma0
from maasscomp.spectrum.extend import lfunction_label
from maasscomp.spectrum.oldforms import ParentForm, describe_old, label_old
from maasscomp.spectrum.operators import (
    atkin_lehner_eigenvalues,
    atkin_lehner_matrix,
    hecke_matrix,
    label_atkin_lehner,
)
from maasscomp.spectrum.twists import label_twist

from .levels_helpers import forms_at, level1_parents, level1_table, lift_at_cusps, search_forms

WINDOW = (9.4, 9.7)  # holds the first PSL(2,Z) form R1 = 9.5337... and no other level-1 form


def _R1() -> float:
    return float(level1_table()[0][2])


def _a1() -> np.ndarray:
    return level1_table()[0][3]


def _old_members(N: int):
    G = gamma0(N)
    at = forms_at(search_forms(N, "odd", *WINDOW), _R1())
    descs = [describe_old(G, f, level1_parents()) for f in at]
    return G, at, descs


def _check_oldforms(N: int) -> None:
    G, at, descs = _old_members(N)
    old = [(f, d) for f, d in zip(at, descs) if d is not None]
    ds = divisors(N)
    print(f"level {N}: {len(at)} forms at R1, {len(old)} old")
    assert len(old) == len(ds)  # sigma_0(N) copies (Atkin & Lehner 1970)
    X = np.zeros((len(ds), len(old)))
    for i, (f, d) in enumerate(old):
        assert f.is_new is False
        assert len(d.components) == 1
        comp = d.components[0]
        assert comp.parent.level == 1 and comp.parent.label == "PSL(2,Z) form 1"
        assert abs(comp.parent.R - f.R) <= 1e-10
        assert sorted(comp.coordinates) == ds
        assert d.residual <= 1e-9, d.residual
        X[:, i] = [comp.coordinates[k] for k in ds]
        label_old(G, f, level1_parents())
        assert f.extra["old_parents"][0]["level"] == 1
        assert set(f.extra["old_parents"][0]["coordinates"]) == {str(k) for k in ds}
        # the search's expansions at every cusp agree with the independent construction of
        # sum_d x_d g(dz) from the level-1 coefficients
        M = f.coeffs.shape[1]
        lift = sum(comp.coordinates[k] * lift_at_cusps(_a1(), k, N, "odd", M) for k in ds)
        good = f.coeff_errors <= 1e-9
        assert good[:, :10].all()
        assert np.max(np.abs(f.coeffs - lift)[good]) <= 1e-8
        coords = {k: round(v, 12) for k, v in comp.coordinates.items()}
        print(f"  basis member {f.basis_index}: coordinates in (g(dz))_d {coords}, fit residual {d.residual:.1e}")
    sv = np.linalg.svd(X, compute_uv=False)
    assert sv[-1] > 1e-3 * sv[0]  # the members span the whole oldspace
    # whatever else shares R1 and the parity is a newform, here always a twist of g
    for f, d in zip(at, descs):
        if d is None:
            t = label_twist(G, f, level1_parents())
            assert t is not None and f.is_new is True, (N, f.basis_index)


@pytest.mark.parametrize("N", [4, 9])
def test_level1_form_is_old_sigma0_times_with_coordinates(N):
    _check_oldforms(N)


@pytest.mark.slow
@pytest.mark.parametrize("N", [8, 12, 16, 25, 27])
def test_level1_form_is_old_sigma0_times_with_coordinates_slow(N):
    _check_oldforms(N)


def test_w4_and_hecke_on_the_searched_oldspace_of_level_4():
    """W_4 on (g(z), g(2z), g(4z)) is the permutation d -> 4/d (docs/theory.md §9.2);
    U_2 is [[a(2), sqrt 2, 0], [-1/sqrt 2, 0, sqrt 2], [0, 0, 0]] and T_3 = a(3) I
    (§9.3), all from the searched forms' own coefficients."""
    G, at, descs = _old_members(4)
    ds = [1, 2, 4]
    X = np.array([[d.components[0].coordinates[k] for k in ds] for d in descs]).T
    Xi = np.linalg.inv(X)
    W = atkin_lehner_matrix(G, at, 4)
    Wg = X @ W.matrix @ Xi
    print("W_4 on (g(z), g(2z), g(4z)) from the searched level-4 forms (raw):\n", Wg, "\nfit residual", W.residual)
    assert np.max(np.abs(Wg - np.array([[0, 0, 1], [0, 1, 0], [1, 0, 0]]))) <= 1e-10
    a = _a1()
    U = X @ hecke_matrix(at, 2).matrix @ Xi
    s = math.sqrt(2)
    assert np.max(np.abs(U - np.array([[a[1], s, 0], [-1 / s, 0, s], [0, 0, 0]]))) <= 1e-9, U
    T = X @ hecke_matrix(at, 3).matrix @ Xi
    assert np.max(np.abs(T - a[2] * np.eye(3))) <= 1e-9


_CHI = {
    -3: lambda n: (0, 1, -1)[n % 3],
    -4: lambda n: 0 if n % 2 == 0 else (1 if n % 4 == 1 else -1),
    8: lambda n: 0 if n % 2 == 0 else (1 if n % 8 in (1, 7) else -1),
    -8: lambda n: 0 if n % 2 == 0 else (1 if n % 8 in (1, 3) else -1),
}


def _check_twist(N: int, parity: str, D: int, window, n_coeffs: int = 60) -> None:
    G = gamma0(N)
    at = forms_at(search_forms(N, parity, *window, n_coeffs), _R1())
    new = [f for f in at if f.is_new]
    assert len(new) == 1, [(f.R, f.is_new) for f in at]
    f = new[0]
    t = label_twist(G, f, level1_parents())
    assert t is not None and t.parent.label == "PSL(2,Z) form 1"
    assert t.discriminant == D and t.conductor == abs(D) and f.extra["twist_character"]["conductor"] == abs(D)
    # predicted parity: flipped by an odd character
    chi = _CHI[D]
    odd_char = chi(abs(D) - 1) == -1  # chi(-1) = chi(q - 1)
    assert (f.parity != t.parent.parity) == odd_char
    # predicted coefficients c(p) = chi(p) a(p)
    a = _a1()
    c = f.coeffs[0].real
    K = int(np.sum(np.cumprod(f.coeff_errors[0] <= 1e-9)))
    ps = [p for p in range(2, K + 1) if all(p % q for q in range(2, int(p**0.5) + 1))]
    worst = max(abs(c[p - 1] - chi(p) * a[p - 1]) for p in ps)
    print(f"level {N} {parity}: twist by D={D}, max_p<={ps[-1]} |c(p) - chi(p) a(p)| = {worst:.1e}")
    # the c(p) used have estimated errors <= 1e-9; a wrong character is off by 0.1 or more
    assert worst <= 1e-8 and len(ps) >= 8
    # Fricke eigenvalue chi(-1) (Atkin & Li 1978, recalled) and the root number of L(s, f)
    al = label_atkin_lehner(G, f)
    eta = al[str(N)]["eigenvalue"]
    assert abs(eta - (-1 if odd_char else 1)) <= 1e-10, eta
    lab = lfunction_label(G, f)
    assert "skipped" not in lab, lab
    assert lab["passed"] and lab["sign"] == lab["predicted_sign"], lab


@pytest.mark.parametrize("N,D", [(9, -3), (16, -4)])
def test_twists_by_conductor_3_and_4(N, D):
    _check_twist(N, "even", D, (9.50, 9.56))


_MISSED_AT_64 = (
    "the present search rejects R1 at level 64 (odd): its eigenspace of dimension 8 holds "
    "g(64z), which vanishes below n = 64, so the T_p fit on the stored coefficients at "
    "infinity does not determine the span ('no Hecke operator T_p could be fitted'); "
    "expected to pass with the redesigned search"
)


@pytest.mark.slow
@pytest.mark.parametrize(
    "parity,D",
    [pytest.param("odd", 8, marks=pytest.mark.xfail(strict=True, reason=_MISSED_AT_64)), ("even", -8)],
)
def test_twists_by_conductor_8_at_level_64(parity, D):
    # 80 stored coefficients: the L-function check extends them from the truncation at Y0 (68)
    _check_twist(64, parity, D, (9.50, 9.56), n_coeffs=80)


@pytest.mark.slow
def test_level64_even_oldforms_come_from_the_level16_twist():
    """At R1 the even class of level 64 holds, besides the chi_{-8} twist, the sigma_0(64/16) = 3
    oldforms of the level-16 newform g (x) chi_{-4} (Atkin & Lehner 1970): a parent of level
    16 found by the search itself."""
    G = gamma0(64)
    parent_form = [f for f in forms_at(search_forms(16, "even", 9.50, 9.56), _R1()) if f.is_new]
    assert len(parent_form) == 1
    parent = ParentForm.from_form(parent_form[0], "level-16 twist of R1")
    at = forms_at(search_forms(64, "even", 9.50, 9.56, 80), _R1())
    descs = [describe_old(G, f, [parent] + list(level1_parents())) for f in at]
    old = [d for d in descs if d is not None]
    assert len(at) == 4 and len(old) == 3
    X = np.array([[d.components[0].coordinates[k] for k in (1, 2, 4)] for d in old])
    for d in old:
        assert len(d.components) == 1 and d.components[0].parent is parent and d.residual <= 1e-9
    assert np.linalg.svd(X, compute_uv=False)[-1] > 1e-3


@pytest.mark.parametrize(
    "N,parity,window,R",
    [
        (4, "even", (5.85, 5.91), 5.879354157758599),  # found by our own scan of level 4
        (9, "even", (9.50, 9.56), None),  # the chi_{-3} twist of R1
        (12, "even", (9.42, 9.46), 9.439362078444958),  # found by our own scan of level 12
    ],
)
def test_atkin_lehner_eigenvalues_of_newforms(N, parity, window, R):
    G = gamma0(N)
    R = _R1() if R is None else R
    new = [f for f in forms_at(search_forms(N, parity, *window), R, 1e-6) if f.is_new]
    assert len(new) == 1
    f = new[0]
    al = atkin_lehner_eigenvalues(G, f)
    print(f"level {N} {parity} R={f.R!r}: raw W_Q eigenvalues",
          {Q: (repr(v.value), f"residual {v.residual:.1e}") for Q, v in al.items()})
    for Q, fit in al.items():
        assert min(abs(fit.value - 1), abs(fit.value + 1)) <= 1e-10, (Q, fit)
        assert fit.residual <= 1e-9 and abs(fit.imag) <= 1e-12
    if N == 12:
        # p = 3 divides 12 exactly: eta_3 = -sqrt(3) a(3) (Atkin & Lehner 1970, Thm 3)
        assert abs(al[3].value + math.sqrt(3) * f.coeffs[0, 2].real) <= 1e-10
        assert abs(al[12].value - al[3].value * al[4].value) <= 1e-10
    lab = lfunction_label(G, f)
    assert lab["passed"] and lab["sign"] == lab["predicted_sign"]
    assert lab["predicted_sign"] == (1 if parity == "even" else -1) * round(al[N].value)


def _new_and_old_counts(N: int, window) -> tuple[dict[int, int], int, int]:
    """Newforms per divisor level M | N found in ``window`` (both parities), bottom-up: a form
    of level M is old when describe_old explains it by the newforms already found below M;
    the others are new and become parents. Returns (new_M, forms at N, old forms at N)."""
    parents = []
    new: dict[int, int] = {}
    total_N = old_N = 0
    for M in divisors(N):
        G = gamma0(M)
        new[M] = 0
        for parity in ("even", "odd"):
            found = search_forms(M, parity, *window)
            for f in found:
                is_old = M > 1 and describe_old(G, f, parents) is not None
                if not is_old:
                    new[M] += 1
                    parents.append(ParentForm.from_form(f, f"level {M} R={f.R:.10f}"))
                if M == N:
                    total_N += 1
                    old_N += int(is_old)
    return new, total_N, old_N


@pytest.mark.slow
@pytest.mark.parametrize("N", [4, 8, 9, 12, 16, 18])
def test_count_identity_in_a_window(N):
    """N_N = sum_{M | N} sigma_0(N/M) N_M^new on [9.4, 9.7] (Atkin & Lehner 1970), with the new
    counts found level by level from the coefficients (not from the search's own labels):
    every newform of a lower level must show up sigma_0(N/M) times at level N."""
    new, total, old = _new_and_old_counts(N, WINDOW)
    predicted_old = sum(n * len(divisors(N // M)) for M, n in new.items() if M < N)
    print(f"level {N}: newforms per divisor level {new}; {total} forms, {old} old, predicted old {predicted_old}")
    # equivalently total == sum_M sigma_0(N/M) new_M, since total = old + new_N
    assert old == predicted_old
    assert new[1] == 1  # R1 is the only PSL(2,Z) form in the window
