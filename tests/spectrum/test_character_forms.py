"""Maass forms with a Dirichlet character, found by the one search (search_forms with
``character=``; docs/theory.md §12).

* dihedral forms of level D, character chi_D: R and a(n) against the exact values of
  data/reference/dihedral_forms.csv (computed here with tests/spectrum/make_dihedral.py from
  the Hecke characters of Q(sqrt D); H. Maass, Math. Ann. 121 (1949) 141-183; D. Bump,
  *Automorphic Forms and Representations* (1997), §1.9);
* automorphy f(gamma z) = chi(d) f(z) at random gamma in Gamma0(9) and z, with the left
  side from the pullback (every cusp's expansion and the character factors) and the right
  side from the expansion at infinity alone;
* Hecke relations with chi, and the relation lambda(p) = chi(p) conj(lambda(p)) (the
  adjoint of T_p is conj(chi(p)) T_p; Iwaniec, *Spectral Methods of Automorphic Forms*,
  2nd ed. 2002, §8.5, recalled);
* conjugation: the forms of conj(chi) found by a search are the derived forms
  conj(f(-conj z)) of those of chi, at every cusp;
* the store keeps the character and the negative-frequency coefficients.
"""

from __future__ import annotations

import csv
import math
from pathlib import Path

import mpmath
import numpy as np
import pytest

from maasscomp.errors import InputError
from maasscomp.groups import DirichletCharacter, gamma0
from maasscomp.groups import characters as C
from maasscomp.spectrum import charforms as CF
from maasscomp.spectrum.search import search_forms

def _ri(z: complex) -> tuple[float, float]:
    z = complex(z)
    return z.real, z.imag


REF = Path(__file__).resolve().parents[2] / "data" / "reference" / "dihedral_forms.csv"


def _dihedral(D: int, lo: float, hi: float):
    rows = list(csv.reader(line for line in REF.read_text().splitlines() if not line.startswith("#")))
    head, body = rows[0], rows[1:]
    out = []
    for r in body:
        if int(r[0]) == D and lo <= float(r[3]) <= hi:
            out.append((r[1], float(r[3]), np.array([float(x) for x in r[4:]])))
    assert head[4] == "a1"
    return out


def _check_dihedral(D: int, lo: float, hi: float, n_max: int = 30):
    """Every exact dihedral form of the window is found in its parity class, R to 1e-10 and
    a(1..n_max) to 1e-8 (the table has 20 digits)."""
    exact = _dihedral(D, lo, hi)
    assert exact, "window without a dihedral form"
    res = search_forms(gamma0(D), lo, hi, character=C.kronecker_character(D))
    for parity, R, a in exact:
        near = [f for f in res.forms if f.symmetry.parity == parity and abs(f.R - R) < 1e-6]
        assert len(near) == 1, (D, parity, R, [(f.symmetry.label, f.R) for f in res.forms])
        f = near[0]
        assert abs(f.R - R) < 1e-10, (D, R, f.R)
        assert f.multiplicity == 1 and f.character == C.kronecker_character(D)
        err = np.max(np.abs(f.coeffs[0, :n_max] - a[:n_max]))
        assert err < 1e-8, (D, R, err)
        # the stored error estimate is of the right size (within a factor 100 above 1e-13)
        assert err <= 100 * max(np.max(f.coeff_errors[0, :n_max]), 1e-13)
    return res


@pytest.mark.parametrize("D,lo,hi", [(5, 3.2, 3.3), (5, 6.5, 6.56), (8, 1.75, 1.8)])
def test_dihedral_forms_found_exactly(D, lo, hi):
    _check_dihedral(D, lo, hi)


@pytest.mark.slow
@pytest.mark.parametrize("D,lo,hi", [(12, 2.3, 2.45), (12, 4.7, 4.85), (5, 1.0, 10.0), (8, 1.0, 10.0),
                                     (13, 1.0, 10.0), (13, 1.3, 1.33)])
def test_dihedral_forms_found_exactly_slow(D, lo, hi):
    """Level 12 (six cusps, two of them non-singular for chi_12; N(eps) = +1 gives an even
    and an odd form at each R) and every dihedral form with R <= 10 at D = 5, 8, 13."""
    _check_dihedral(D, lo, hi)


# ----------------------------------------------------------------------------------------
# a complex character with non-singular cusps: level 9, chi of order 3
# ----------------------------------------------------------------------------------------

WINDOW = (3.8, 4.3)


@pytest.fixture(scope="module")
def level9():
    G = gamma0(9)
    chi = DirichletCharacter.from_label("X9.2")
    res = search_forms(G, *WINDOW, character=chi)
    resb = search_forms(G, *WINDOW, character=C.conjugate(chi))
    return G, chi, res, resb


def test_level9_forms_and_singular_cusps(level9):
    G, chi, res, _ = level9
    assert chi.order == 3 and chi.conductor == 9
    assert len(res.forms) >= 2
    assert res.stats["singular_cusps"] == ["inf", "0"] and res.stats["character"] == "X9.2"
    assert res.system == "character"
    for f in res.forms:
        # cusps 1/3 and 2/3 are not singular for chi (kappa = 2/3, 1/3)
        assert f.extra["singular_cusps"] == ["inf", "0"]
        assert sorted(f.extra["cusp_shifts"]) == ["0", "0", "1/3", "2/3"]
        assert f.hecke_residual < 1e-8 and f.is_new is True


def test_automorphy_with_character(level9):
    """f(gamma z) = chi(d) f(z) to 1e-9 relative, gamma random in Gamma0(9) with c up to 36,
    z random with 0.6 <= Im z <= 1.2 (f(z) from the expansion at infinity, f(gamma z) through
    the pullback, which lands at every cusp). The same check with chi replaced by its
    conjugate fails (power)."""
    G, chi, res, _ = level9
    rng = np.random.default_rng(2024)
    for f in res.forms:
        worst = wrong = 0.0
        for _ in range(12):
            x, y = rng.uniform(-0.5, 0.5), rng.uniform(0.6, 1.2)
            while True:
                c, d = 9 * int(rng.integers(1, 5)), int(rng.integers(-20, 21))
                if math.gcd(c, d) == 1 and C.complex_value(chi, d) != 1:
                    break
            a = pow(d, -1, c)
            b = (a * d - 1) // c
            z = complex(x, y)
            w = (a * z + b) / (c * z + d)
            fz = CF.evaluate_at_infinity(f, x, y)[0]
            fw = CF.evaluate_character_form(G, f, w.real, w.imag)[0]
            scale = max(abs(fz), 1e-2)
            worst = max(worst, abs(fw - C.complex_value(chi, d) * fz) / scale)
            wrong = max(wrong, abs(fw - np.conj(C.complex_value(chi, d)) * fz) / scale)
        assert worst < 1e-9, (f.R, worst)
        assert wrong > 1e-2


def test_hecke_relations_with_character(level9):
    """a(m) a(n) = sum_{d | (m, n)} chi(d) a(mn/d^2) to 1e-8 for mn <= 30; with the trivial
    character in its place the relation fails (at m = n = 2: chi(2) != 1); and
    a(p) = chi(p) conj(a(p)) for p not dividing 9."""
    G, chi, res, _ = level9
    for f in res.forms:
        a = f.coeffs[0]
        assert CF.hecke_residual_chi(a, chi, 30) < 1e-8
        assert CF.hecke_residual_chi(a, DirichletCharacter.trivial(9), 30) > 1e-3
        for p in (2, 5, 7, 11):
            assert abs(a[p - 1] - C.complex_value(chi, p) * np.conj(a[p - 1])) < 1e-8


def test_conjugate_character_is_the_reflected_conjugate(level9):
    """The forms found for conj(chi) are conj(f(-conj z)) of the forms of chi: same R (1e-10),
    same parity, coefficients at all four cusps (the cusps 1/3 and 2/3 exchanged by the
    reflection) equal to 1e-8 for n <= 12."""
    G, chi, res, resb = level9
    assert len(res.forms) == len(resb.forms)
    for f in res.forms:
        g = CF.conjugate_form(G, f)
        assert g.character == C.conjugate(chi)
        match = [h for h in resb.forms if abs(h.R - f.R) < 1e-8 and h.symmetry == f.symmetry]
        assert len(match) == 1
        h = match[0]
        assert abs(h.R - g.R) < 1e-10
        assert h.extra["cusp_shifts"] == g.extra["cusp_shifts"]
        A, B = CF.two_sided(h)[:, :, :12], CF.two_sided(g)[:, :, :12]
        assert np.max(np.abs(A - B)) < 1e-8, np.max(np.abs(A - B))
        # the plain conjugate (without the reflection's cusp exchange) is not it
        assert np.max(np.abs(A[2:] - np.conj(CF.two_sided(f)[2:, :, :12]))) > 1e-3


def test_store_keeps_the_character(level9, tmp_path):
    from maasscomp.store import Store

    G, chi, res, _ = level9
    f = res.forms[0]
    with Store.open(tmp_path / "c.h5", "a", create=True) as st:
        keys = st.add_forms([f, CF.conjugate_form(G, f)])
    assert "X9.2" in keys[0] and "X9.4" in keys[1]
    with Store.open(tmp_path / "c.h5", "r") as st:
        back = st.get(keys[0])
        assert st.select(level=9, character="X9.4") == [keys[1]]
    assert back.character == chi
    assert np.array_equal(CF.two_sided(back), CF.two_sided(f))
    assert back.extra["singular_cusps"] == f.extra["singular_cusps"]


def test_search_refuses_bad_characters():
    G = gamma0(7)
    with pytest.raises(InputError, match=r"X7\.1.*odd"):
        search_forms(G, 3.0, 3.5, character=DirichletCharacter(7, (1,)))
    with pytest.raises(InputError, match="modulus 5"):
        search_forms(G, 3.0, 3.5, character=DirichletCharacter(5, (2,)))
    with pytest.raises(InputError, match="system='character'"):
        search_forms(G, 3.0, 3.5, character=DirichletCharacter(7, (2,)), system="multi-cusp")


@pytest.mark.slow
def test_trivial_character_through_the_character_system():
    """At level 9 the complex character system with the trivial character finds the same
    eigenvalues as the real multi-cusp system (an independent construction: reflection used
    at every cusp there, at infinity only here)."""
    G = gamma0(9)
    a = search_forms(G, 3.0, 6.0, system="multi-cusp")
    b = search_forms(G, 3.0, 6.0, system="character", character=DirichletCharacter.trivial(9))
    ra = sorted((f.symmetry.parity, round(f.R, 9)) for f in a.forms)
    rb = sorted((f.symmetry.parity, round(f.R, 9)) for f in b.forms)
    assert ra == rb


# ----------------------------------------------------------------------------------------
# twists of a level-1 form by complex characters
# ----------------------------------------------------------------------------------------


@pytest.mark.slow
@pytest.mark.parametrize("q,k", [(5, 1), (7, 1)])
def test_twist_of_level_one_form(q, k):
    """The twists f (x) psi of the first level-1 form (R = 9.5337, odd) by the primitive
    characters psi mod q with psi^2 = chi^2 (chi = X<q>.<k>, odd, of order 4 mod 5 and 6 mod 7)
    are forms on Gamma0(q^2) with character chi^2, coefficients psi(n) a(n) and parity
    psi(-1) times that of f (twisting, Iwaniec, *Topics in Classical Automorphic Forms* (1997)
    §7.3, recalled; the parity rule derived in docs/theory.md §12.4). Mod 5 both (chi, conj chi) are
    odd: two even forms; mod 7 chi is odd and chi times the quadratic character even: one even
    and one odd form. The search at level q^2 with chi^2 finds R to 1e-10 and, in the
    predicted parity, a member with a(n) = psi(n) a_f(n), n <= 30, to 1e-8."""
    chi = DirichletCharacter(q, (k,))
    assert not chi.is_even and chi.conductor == q and chi.order > 2
    sq = DirichletCharacter(q, ((2 * k) % (q - 1),))
    twists = [psi for psi in C.primitive_characters(q)
              if DirichletCharacter(q, ((2 * psi.exponents[0]) % (q - 1),)) == sq]
    assert chi in twists and len(twists) == 2
    f = search_forms(gamma0(1), 9.52, 9.545).forms[0]
    assert f.symmetry.parity == "odd"
    res = search_forms(gamma0(q * q), 9.52, 9.545, character=C.induce(sq, q * q))
    near = [g for g in res.forms if abs(g.R - f.R) < 1e-8]
    parities = []
    for psi in twists:
        parity = "odd" if psi.is_even else "even"
        parities.append(parity)
        tw = np.array([C.complex_value(psi, n) * f.coeffs[0, n - 1] for n in range(1, 31)])
        cand = [g for g in near if g.symmetry.parity == parity]
        assert cand, (psi.label, parity, [(g.symmetry.label, g.R) for g in near])
        assert min(abs(g.R - f.R) for g in cand) < 1e-10
        assert min(np.max(np.abs(g.coeffs[0, :30] - tw)) for g in cand) < 1e-8, psi.label
        # root number of the twist: eps_f psi(-1) tau(psi)^2 / q (docs/theory.md §12.8, derived
        # there; the Gauss sum computed here with mpmath), eps_f = -1 for the odd form f
        g = min(cand, key=lambda g: np.max(np.abs(g.coeffs[0, :30] - tw)))
        assert g.is_new is True, g.extra["newness"]
        tau = complex(mpmath.fsum(mpmath.mpc(*_ri(C.complex_value(psi, u))) * mpmath.expjpi(2 * mpmath.mpf(u) / q)
                                  for u in range(1, q)))
        want = -1 * (1 if psi.is_even else -1) * tau * tau / q
        lf = g.extra["lfunction"]
        assert lf["passed"], lf
        eps = complex(*lf["root_number"])
        assert abs(eps - want) < 1e-8, (psi.label, eps, want)
    assert sorted(parities) == (["even", "even"] if q == 5 else ["even", "odd"])
