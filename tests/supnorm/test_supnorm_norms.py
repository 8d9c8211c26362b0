"""L2 norms: quadrature over a fundamental domain against Rankin--Selberg.

Rankin--Selberg in the cos/sin normalisation with a(1) = 1 (docs/theory.md §5.1, from
Iwaniec, *Spectral Methods of Automorphic Forms* §8 and R. A. Smith, Proc. AMS 82 (1981)
179-182, both cited there from memory): ||f||^2 = L(1, sym^2 f) / (8 cosh(pi R)) for level 1.
The two norms are computed independently (quadrature from the coefficients at every cusp;
L(1, sym^2 f) from the Hecke eigenvalues by maasscomp.spectrum.lfunction).
"""

from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest

from maasscomp.supnorm import FormEvaluator, compact_quadrature, kt2_tail, l2_norm
from maasscomp.supnorm.norm import NormResult


def test_level1_norms_agree(forms_by_level):
    """All PSL(2,Z) forms with R < 20: quadrature = Rankin--Selberg to 1e-6 relative."""
    forms = [f for f in forms_by_level[1] if f.R < 20]
    # Booker-Strombergsson-Venkatesh (IMRN 2006) certify exactly ten forms with R < 20
    # (statement as printed there): the test store must hold all of them
    assert len(forms) == 10
    for f in forms:
        res = l2_norm(f)
        assert res.rs_norm2 is not None, res.notes
        assert abs(res.rs_rel_diff) < 1e-6, (f.R, res.rs_rel_diff)
        assert res.rel_error < 1e-9
        assert math.isclose(res.scale, 1 / math.sqrt(res.norm2))
        assert math.isclose(res.log_norm_physical, 0.5 * math.log(res.norm2) - math.pi * f.R / 2)


def test_squarefree_level_formula(rs_forms):
    """||f||^2 = N L(1, sym^2 f) / (8 cosh pi R) for newforms of levels 2, 5, 11.

    docs/theory.md §5.2 derives this and names this test as its check: the project's
    quadrature confirms it (no outside source: both sides are the project's own computations).
    """
    levels = set()
    for f in rs_forms.values():
        assert f.is_new
        res = l2_norm(f)
        assert res.rs_formula.startswith("squarefree newform")
        assert abs(res.rs_rel_diff) < 1e-6, (f.level, f.R, res.rs_rel_diff)
        levels.add(f.level)
    assert levels == {2, 5, 11}


def test_kt2_tail_against_mpmath():
    """G(T) = int_T^inf Kt_R(t)^2 dt/t against mpmath quadrature of mpmath.besselk (complex order)."""
    R = 9.5
    T = np.array([2 * math.pi, 2.5 * math.pi])
    got = kt2_tail(R, T)
    with mpmath.workdps(20):
        f = lambda t: (mpmath.exp(mpmath.pi * R / 2) * mpmath.besselk(1j * R, t)).real ** 2 / t  # noqa: E731
        ref = mpmath.quad(f, [2 * mpmath.pi, 2.5 * mpmath.pi, R, R + 20, R + 60])
        # the rest beyond R + 60 is below exp(-2 * 45): negligible
        part = mpmath.quad(f, [2 * mpmath.pi, 2.5 * mpmath.pi])
    assert abs(got[0] - float(ref)) <= 1e-11 * float(ref)
    assert abs((got[0] - got[1]) - float(part)) <= 1e-11 * float(ref)


def test_compact_quadrature_closes_the_norm(forms_by_level, general_forms):
    """int_Omega |F|^2 + Parseval over the cusp regions above Y_omega = ||F||^2 (levels 1, 11, 9)."""
    level9 = [f for f in general_forms.values() if f.level == 9]
    for f in (forms_by_level[1][2], forms_by_level[11][5], level9[0]):
        ev = FormEvaluator(f)
        norm = l2_norm(f, evaluator=ev, rankin_selberg=False)
        for Yc in (1.0, 1.5):
            v, w = compact_quadrature(ev, Yc)
            G = ev.group
            assert abs(w.sum() - (G.area - G.n_cusps / Yc)) < 1e-10 * G.area
            from maasscomp.supnorm.norm import strip_mass

            above = sum(strip_mass(ev, j, Yc)[0] for j in range(G.n_cusps))
            assert abs(np.dot(w, v * v) + above - norm.norm2) < 1e-9 * norm.norm2


def test_norm_scales_quadratically(level1_form):
    from dataclasses import replace

    f = level1_form(13.78)
    g = replace(f, coeffs=3.0 * f.coeffs, hecke_residual=math.inf)
    a = l2_norm(f, rankin_selberg=False)
    b = l2_norm(g, rankin_selberg=False)
    assert math.isclose(b.norm2, 9.0 * a.norm2, rel_tol=1e-12)


def test_norm_result_round_trip(level1_form):
    res = l2_norm(level1_form(9.53))
    back = NormResult.from_dict(res.as_dict())
    assert back == res


def test_rankin_selberg_skipped_with_few_coefficients(level1_form):
    from dataclasses import replace

    f = level1_form(19.4)
    g = replace(f, coeffs=f.coeffs[:, :40].copy(), coeff_errors=f.coeff_errors[:, :40].copy())
    res = l2_norm(g)
    assert res.rs_norm2 is None
    assert any("Rankin-Selberg check skipped" in n for n in res.notes)
    full = l2_norm(f, rankin_selberg=False)
    assert abs(res.norm2 - full.norm2) < 1e-10 * full.norm2
