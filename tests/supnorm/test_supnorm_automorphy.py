"""Automorphy of evaluated forms: F(gamma z) = F(z) for gamma in Gamma0(N).

The forms come from the project's own search (tests/supnorm/make_supnorm_forms.py), all
forms with R <= 10 at levels 1, 2, 5, 6, 11 (157 forms, a few seconds in all). Two checks per
form, both at 1e-9 relative to the largest |F| among the sample points:

* F(gamma z) from the pullback of gamma z equals F(z) from the pullback of z;
* F(z) from the pullback equals the direct expansion of every cusp k at sigma_k^{-1} z wherever
  that point is high enough for the expansion to converge (this compares different cusp
  expansions, i.e. checks the stored coefficients of every cusp, not just the pullback).
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest

from maasscomp.errors import AccuracyWarning, InputError
from maasscomp.supnorm import FormEvaluator, evaluate


def _random_gamma(rng: np.random.Generator, N: int) -> tuple[int, int, int, int]:
    """A random element [[a, b], [c, d]] of Gamma0(N) with c != 0."""
    while True:
        c = N * int(rng.integers(1, 7)) * int(rng.choice([-1, 1]))
        d = int(rng.integers(-40, 41))
        if math.gcd(c, d) != 1:
            continue
        # a d - b c = 1 via the extended Euclidean algorithm
        r0, r1, s0, s1, t0, t1 = d, c, 1, 0, 0, 1
        while r1:
            q = r0 // r1
            r0, r1, s0, s1, t0, t1 = r1, r0 - q * r1, s1, s0 - q * s1, t1, t0 - q * t1
        a, b = s0 * r0, -t0 * r0  # r0 = +-1
        m = int(rng.integers(-4, 5))
        a, b = a + m * c, b + m * d
        assert a * d - b * c == 1 and c % N == 0
        return a, b, c, d


def _check_form(form, rng: np.random.Generator, n_gamma: int = 3) -> None:
    ev = FormEvaluator(form)
    G = ev.group
    x = rng.uniform(-0.5, 0.5, 40)
    y = np.exp(rng.uniform(math.log(0.02), math.log(2.0), 40))
    base = ev(x, y)
    v1 = base.values
    scale = float(np.max(np.abs(v1)))
    assert scale > 0
    z = x + 1j * y
    for _ in range(n_gamma):
        a, b, c, d = _random_gamma(rng, form.level)
        w = (a * z + b) / (c * z + d)
        v2 = ev(w.real, w.imag).values
        assert np.max(np.abs(v2 - v1)) <= 1e-9 * scale, (form.level, form.R, (a, b, c, d))
    checked = 0
    for k, cusp in enumerate(G.cusps):
        X, Y = cusp.apply_inverse_scaling(x, y)
        sel = Y > 0.7 * G.fundamental_domain_height
        if sel.any():
            v3, err = ev.expansion(k, X[sel], Y[sel])
            assert np.max(np.abs(v3 - v1[sel])) <= 1e-9 * scale, (form.level, form.R, k)
            checked += int(sel.sum())
    assert checked > 0


@pytest.mark.parametrize("level", [1, 2])
def test_automorphy_small_levels(forms_by_level, level):
    forms = [f for f in forms_by_level[level] if f.R <= 10.0]
    assert forms, f"no forms of level {level} with R <= 10 in the test store"
    rng = np.random.default_rng(1000 + level)
    for f in forms:
        _check_form(f, rng)


@pytest.mark.parametrize("level", [5, 6, 11])
def test_automorphy_more_levels(forms_by_level, level):
    forms = [f for f in forms_by_level[level] if f.R <= 10.0]
    assert forms
    rng = np.random.default_rng(2000 + level)
    for f in forms:
        _check_form(f, rng)


def test_automorphy_non_squarefree_levels(general_forms):
    """Levels 4 and 9: coefficient rows of every cusp from the multi-cusp search."""
    levels = set()
    rng = np.random.default_rng(49)
    for f in general_forms.values():
        assert f.coeffs.shape[0] == FormEvaluator(f).group.n_cusps > 2
        _check_form(f, rng)
        levels.add(f.level)
    assert levels == {4, 9}


def test_hecke_extension_matches_stored(level1_form):
    """Coefficients filled in by Hecke multiplicativity reproduce the stored ones."""
    from dataclasses import replace

    full = level1_form(9.5337)
    short = replace(full, coeffs=full.coeffs[:, :30].copy(), coeff_errors=full.coeff_errors[:, :30].copy())
    x = np.linspace(-0.5, 0.5, 17)
    y = np.full_like(x, 0.9)
    ref = evaluate(full, x, y)
    ev = FormEvaluator(short)
    # force many terms so that indices beyond 30 are used
    vals, _ = ev.expansion(0, x, np.full_like(x, 0.05))
    vref, _ = FormEvaluator(full).expansion(0, x, np.full_like(x, 0.05))
    assert ev.extended
    # every index up to the needed range has prime factors <= 29 except the primes 31, 37, ...
    tab = ev.table
    assert not tab.known[0, 30]  # 31 is prime: not obtainable
    assert tab.known[0, 31]  # 32 = 2^5
    np.testing.assert_allclose(tab.rows[0, 31], full.coeffs[0, 31], atol=1e-10)
    assert ref.extended is False and ref.complete
    del vals, vref


def test_unknown_coefficients_warn_and_bound(level1_form):
    from dataclasses import replace

    full = level1_form(9.5337)
    short = replace(full, coeffs=full.coeffs[:, :5].copy(), coeff_errors=full.coeff_errors[:, :5].copy())
    # points at the bottom of the standard domain need 7 terms; c(7) is beyond the 5 stored
    # coefficients and cannot be obtained from them
    x = np.array([-0.49, -0.45, 0.45, 0.49])
    y = np.full_like(x, 0.9)
    with pytest.warns(AccuracyWarning):
        res = evaluate(short, x, y)
    # the pulled-back heights are high, the bound must cover the true error
    ref = evaluate(full, x, y)
    assert np.all(np.abs(res.values - ref.values) <= res.error_bound + 1e-12)
    assert not res.complete
    assert any("accuracy" in n for n in res.notes)


def test_evaluate_rejects_bad_points(level1_form):
    f = level1_form(9.5337)
    with pytest.raises(InputError):
        evaluate(f, [0.1], [-1.0])
    with pytest.raises(InputError):
        evaluate(f, [0.1], [0.2], tol=0.0)


def test_evaluate_is_vectorised_over_shapes(level1_form):
    f = level1_form(13.78)
    x = np.linspace(-1, 1, 12).reshape(3, 4)
    y = np.full((3, 4), 0.7)
    with warnings.catch_warnings():
        warnings.simplefilter("error", AccuracyWarning)
        res = evaluate(f, x, y)
    assert res.values.shape == (3, 4)
    flat = evaluate(f, x.ravel(), y.ravel())
    np.testing.assert_array_equal(res.values.ravel(), flat.values)
