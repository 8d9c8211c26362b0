"""High-precision refinement at squarefree levels (Atkin--Lehner classes), with the digits reached.

Each claim of D digits is verified independently of the refinement's own error estimate:
* oldforms of the first PSL(2,Z) form: R equals the level-1 value of
  data/reference/psl2z_forms_computed.csv (project computation to 32 decimals whose first 34
  digits of R1 agree with Booker-Strombergsson-Venkatesh, IMRN 2006, see the file header);
  c(p) = a_g(p) + eps_p sqrt(p) for p | N (docs/theory.md §1.1, derived there), checked
  through the difference of two classes (2 eps sqrt(p), an exact algebraic number) and the
  agreement of c(n), n prime to N, between classes (both equal a_g(n));
* newforms: c(p) = -eps_p/sqrt(p) for p | N (Atkin & Lehner, Math. Ann. 185 (1970), Thm 3,
  holomorphic analogue; the Maass case is common practice), the Hecke relations c(mn) =
  c(m)c(n), c(p^2) = c(p)^2 - 1 (p not dividing N) (common practice), and in the slow run the
  agreement of two independent refinements at different precisions (20 and 30 digits: other
  truncations, systems and working precisions).
Digits reached: 16 at level 2 (default run); 30 at levels 2, 3, 5, 6 for an oldform pair and
a newform each, 16 with the multi-cusp system at levels 2, 4, 9 (slow run).
The start values of the newforms are eigenvalues found by our own double-precision search.
"""

from __future__ import annotations

import math

import pytest
from flint import arb, ctx

from maasscomp.spectrum.highprec import refine_high_precision

from .levels_helpers import level1_table


def _arb(s: str) -> arb:
    with ctx.workprec(400):
        return arb(s)


def _diff(x, y) -> float:
    with ctx.workprec(400):
        return abs(float((_arb(x) if isinstance(x, str) else x) - (_arb(y) if isinstance(y, str) else y)))


def _sqrt(p: int) -> arb:
    with ctx.workprec(400):
        return arb(p).sqrt()


R1 = level1_table()[0][2]  # the 32-decimal string


def _check_oldform_pair(N: int, p: int, signs_plus: dict, signs_minus: dict, digits: int) -> tuple:
    """R1 at level N in two classes that differ in eps_p only."""
    fp = refine_high_precision(N, float(R1), "odd", digits, al_signs=signs_plus)
    fm = refine_high_precision(N, float(R1), "odd", digits, al_signs=signs_minus)
    tol = 10.0 ** (-digits)
    for f in (fp, fm):
        assert f.digits == digits and f.R_error < tol
        assert _diff(f.R, R1) < tol, (N, f.al_signs, f.R)
    with ctx.workprec(400):
        d = _arb(fp.coeffs[p - 1]) - _arb(fm.coeffs[p - 1]) - 2 * _sqrt(p) * signs_plus[p]
    assert abs(float(d)) < 10 * tol
    q = next(n for n in (2, 3, 5, 7) if N % n)
    assert _diff(fp.coeffs[q - 1], fm.coeffs[q - 1]) < 10 * tol
    print(f"level {N} R1 classes {fp.al_signs} / {fm.al_signs}: {digits} digits claimed; "
          f"|R - R1(level 1)| = {_diff(fp.R, R1):.1e}, {_diff(fm.R, R1):.1e}; c({p}) difference - 2 sqrt({p}) = "
          f"{abs(float(d)):.1e}")
    return fp, fm


def _check_newform(N: int, R0: float, parity: str, signs: dict, digits: int):
    f = refine_high_precision(N, R0, parity, digits, al_signs=signs)
    tol = 10.0 ** (-digits)
    assert f.digits == digits and f.R_error < tol
    with ctx.workprec(400):
        c = [_arb(s) for s in f.coeffs]
        worst_al = max(abs(float(c[p - 1] + signs[p] / _sqrt(p))) for p in signs)
        # low indices only: about the first half of the M0 coefficients are accurate
        rel = [c[5] - c[1] * c[2], c[9] - c[1] * c[4]]
        rel += [c[p * p - 1] - c[p - 1] ** 2 + 1 for p in (2, 3) if N % p]
        rel += [c[p * p - 1] - c[p - 1] ** 2 for p in signs if p < 5]  # a(p^2) = a(p)^2, p | N
        worst_hecke = max(abs(float(x)) for x in rel)
    print(f"level {N} {parity} {f.al_signs} R = {f.R[:digits + 4]}: {digits} digits claimed "
          f"(error estimate {f.R_error:.1e}); |c(p) + eps_p/sqrt p| = {worst_al:.1e}, Hecke {worst_hecke:.1e}")
    assert worst_al < 10 * tol
    assert worst_hecke < 100 * tol
    return f


def test_level2_oldforms_of_R1_to_16_digits():
    _check_oldform_pair(2, 2, {2: 1}, {2: -1}, 16)


@pytest.mark.slow
@pytest.mark.parametrize(
    "N,p,plus,minus",
    [
        (3, 3, {3: 1}, {3: -1}),
        (5, 5, {5: 1}, {5: -1}),
        (6, 2, {2: 1, 3: -1}, {2: -1, 3: -1}),
    ],
)
def test_oldforms_of_R1_to_30_digits(N, p, plus, minus):
    _check_oldform_pair(N, p, plus, minus, 30)


@pytest.mark.slow
@pytest.mark.parametrize(
    "N,R0,parity,signs",
    [
        (2, 5.41733481, "odd", {2: -1}),
        (3, 4.38805356, "odd", {3: -1}),
        (5, 4.13240422, "even", {5: 1}),
        (6, 4.54845492, "odd", {2: 1, 3: 1}),
    ],
)
def test_newforms_to_30_digits_agree_with_20_digits(N, R0, parity, signs):
    f30 = _check_newform(N, R0, parity, signs, 30)
    f20 = refine_high_precision(N, R0, parity, 20, al_signs=signs)
    assert _diff(f30.R, f20.R) < 1e-20
    assert max(_diff(f30.coeffs[n], f20.coeffs[n]) for n in range(1, 8)) < 1e-18
    assert math.isclose(float(f30.R), R0, abs_tol=1e-7)


# ----------------------------------------------------------------------------------------
# the multi-cusp system in ball arithmetic (parity classes, any level)


@pytest.mark.slow
def test_multicusp_system_agrees_with_the_one_cusp_system_at_level_2():
    """Level 2 in the odd parity class without Atkin-Lehner signs: the multi-cusp system (two
    cusps) refines the newform of the class eps_2 = -1 to the one-cusp value, and reads off
    eta_2 = -1 from its own cusp expansions."""
    one = refine_high_precision(2, 5.41733481, "odd", 20, al_signs={2: -1})
    multi = refine_high_precision(2, 5.41733481, "odd", 16)
    assert multi.al_signs == () and len(multi.cusp_coeffs) == 2
    assert _diff(multi.R, one.R) < 1e-16
    assert max(_diff(multi.coeffs[n], one.coeffs[n]) for n in range(1, 8)) < 1e-15
    (Q, eta, res), = multi.al_eigenvalues
    print(f"level 2 multi-cusp: R = {multi.R[:22]}, eta_2 = {eta[:22]} (residual {res:.1e})")
    assert Q == 2 and _diff(eta, "-1") < 1e-16 and res < 1e-15


@pytest.mark.slow
def test_multicusp_level9_twist_of_R1_to_16_digits():
    """The chi_{-3} twist of R1 is the only even form of level 9 at R1 (simple eigenvalue):
    its R is R1 (level-1 table, 32 decimals), c(p) = chi_{-3}(p) a(p) with a(p) from a level-1
    refinement at the same precision, and eta_9 = chi_{-3}(-1) = -1 (Atkin & Li 1978, recalled)."""
    f = refine_high_precision(9, float(R1), "even", 16)
    g = refine_high_precision(1, float(R1), "odd", 16)
    assert len(f.cusp_coeffs) == 4
    print(f"level 9 even (multi-cusp): R = {f.R[:22]}, |R - R1| = {_diff(f.R, R1):.1e}, "
          f"eta = {f.al_eigenvalues}")
    assert _diff(f.R, R1) < 1e-16
    chi = {2: -1, 3: 0, 5: -1, 7: 1}
    for p, x in chi.items():
        with ctx.workprec(400):
            d = _arb(f.coeffs[p - 1]) - x * _arb(g.coeffs[p - 1])
        assert abs(float(d)) < 1e-15, (p, float(d))
    (Q, eta, res), = f.al_eigenvalues
    assert Q == 9 and _diff(eta, "-1") < 1e-16 and res < 1e-15


@pytest.mark.slow
def test_multicusp_level4_newform_two_precisions():
    """The even newform R = 5.8793541577586 of level 4 (found by our own search; simple in its
    parity class): 12- and 16-digit refinements agree, eta_4 = -1 to the digits claimed, and
    the Hecke relations hold (common practice)."""
    f16 = refine_high_precision(4, 5.879354157758599, "even", 16)
    f12 = refine_high_precision(4, 5.879354157758599, "even", 12)
    assert _diff(f16.R, f12.R) < 1e-12
    (Q, eta, res), = f16.al_eigenvalues
    print(f"level 4 even (multi-cusp): R = {f16.R[:22]}, eta_4 = {eta[:22]} (residual {res:.1e})")
    assert Q == 4 and _diff(eta, "-1") < 1e-16
    with ctx.workprec(400):
        c = [_arb(s) for s in f16.coeffs]
        # a(2) = a(4) = a(8) = 0 (4 | N, newform), a(9) = a(3)^2 - 1; low indices only
        rel = [c[1], c[3], c[7], c[8] - c[2] ** 2 + 1]
        assert max(abs(float(x)) for x in rel) < 1e-14
