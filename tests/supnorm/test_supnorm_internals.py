"""Internal consistency of the evaluation building blocks (no outside source needed).

A coefficient vector with random complex entries is not a Maass form, but every identity
checked here (FFT horocycles = direct sums, analytic derivatives = finite differences,
closed-form horocycle integrals = quadrature, Hecke extension = multiplicativity) holds for
any coefficients.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from maasscomp.hejhal.types import SolverParams, SymmetryClass
from maasscomp.spectrum.form import Form
from maasscomp.supnorm import FormEvaluator
from maasscomp.supnorm._coeffs import divisor_count, smallest_prime_factor


def _random_form(parity: str, R: float = 11.0, M: int = 40, seed: int = 0) -> Form:
    rng = np.random.default_rng(seed)
    c = rng.normal(size=M) + 1j * rng.normal(size=M)
    c[0] = 1.0
    return Form(level=1, R=R, symmetry=SymmetryClass(parity), coeffs=c[None, :], coeff_errors=np.zeros((1, M)),
                R_error=0.0, hecke_residual=math.inf, params=SolverParams(Y=0.1, M0=10, Q=20))


@pytest.mark.parametrize("parity", ["even", "odd"])
def test_horocycle_fft_equals_direct_sum(parity):
    ev = FormEvaluator(_random_form(parity))
    for y in (0.9, 1.7):
        x, v = ev.horocycle(0, y, 64)
        w, _ = ev.expansion(0, x, np.full_like(x, y))
        np.testing.assert_allclose(v, w, atol=1e-13 * np.abs(w).max())


@pytest.mark.parametrize("parity", ["even", "odd"])
def test_derivatives_match_finite_differences(parity):
    ev = FormEvaluator(_random_form(parity, seed=1))
    x0, y0, h = 0.137, 1.21, 1e-5
    F, Fx, Fy, Fxx, Fxy, Fyy = (float(t[0]) for t in ev.derivatives(0, [x0], [y0]))

    def f(x, y):
        return float(ev.expansion(0, [x], [y])[0][0])

    assert math.isclose(F, f(x0, y0), rel_tol=1e-13)
    scale = max(abs(Fx), abs(Fy), 1.0)
    assert abs(Fx - (f(x0 + h, y0) - f(x0 - h, y0)) / (2 * h)) < 1e-7 * scale
    assert abs(Fy - (f(x0, y0 + h) - f(x0, y0 - h)) / (2 * h)) < 1e-7 * scale
    h2 = 1e-4
    scale2 = max(abs(Fxx), abs(Fyy), 1.0)
    assert abs(Fxx - (f(x0 + h2, y0) - 2 * F + f(x0 - h2, y0)) / h2**2) < 1e-5 * scale2
    assert abs(Fyy - (f(x0, y0 + h2) - 2 * F + f(x0, y0 - h2)) / h2**2) < 1e-5 * scale2
    fxy = (f(x0 + h2, y0 + h2) - f(x0 + h2, y0 - h2) - f(x0 - h2, y0 + h2) + f(x0 - h2, y0 - h2)) / (4 * h2**2)
    assert abs(Fxy - fxy) < 1e-5 * scale2


def test_arithmetic_tables():
    spf = smallest_prime_factor(50)
    assert [int(spf[k]) for k in (2, 9, 35, 49, 47)] == [2, 3, 5, 7, 47]
    d = divisor_count(36)
    assert [int(d[k]) for k in (1, 12, 36, 17)] == [1, 6, 9, 2]
