"""Evaluation numerics: non-finite coefficients are refused; the error bound includes the
conditioning of the pullback near the real axis (project-internal checks: F is invariant
under z -> -1/z for level 1, so two evaluations of one point must agree within their bounds)."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from maasscomp.errors import InputError
from maasscomp.supnorm import FormEvaluator, evaluate, scan_form


@pytest.mark.parametrize("bad", [np.nan, np.inf])
def test_non_finite_coefficients_are_refused(level1_form, bad):
    f = level1_form(13.78)
    c = f.coeffs.copy()
    c[0, 6] = bad
    g = replace(f, coeffs=c)
    with pytest.raises(InputError, match=r"c_0\(7\)"):
        evaluate(g, [0.1], [1.0])
    with pytest.raises(InputError, match="finite"):
        scan_form(g)


@pytest.mark.parametrize("y", [1e-3, 1e-6, 1e-9])
def test_bound_covers_the_pullback_at_small_y(level1_form, y):
    """F(z) and F(-1/z) at points near the real axis: their difference stays within the sum of
    the two bounds, which grow like 1/y (without the conditioning term the bound was 1e-12 while
    the values differed by up to ~1e-6 at y = 1e-9)."""
    f = level1_form(19.42)
    ev = FormEvaluator(f)
    rng = np.random.default_rng(5)
    x = rng.uniform(-0.5, 0.5, 200)
    z = x + 1j * y
    w = -1.0 / z
    a = ev(z.real, z.imag)
    b = ev(w.real, w.imag)
    assert np.all(np.abs(a.values - b.values) <= a.error_bound + b.error_bound)
    if y <= 1e-6:
        assert np.max(a.error_bound) > 100 * ev.tol
        assert any("conditioning" in n for n in a.notes)
    # the term is left out on request (callers that use the values only)
    c = ev(z.real, z.imag, conditioning=False)
    assert np.array_equal(c.values, a.values) and np.all(c.error_bound <= a.error_bound)
