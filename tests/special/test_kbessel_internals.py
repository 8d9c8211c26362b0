"""Internal consistency of the K-Bessel building blocks (compiled vs numpy, dd arithmetic).

External references used: mpmath (50-digit logarithms and cosines for the double-double
helpers).
"""

from __future__ import annotations

import mpmath
import numpy as np
import pytest

from maasscomp.special import _dd
from maasscomp.special import _kbessel_fast as fast
from maasscomp.special._kbessel_quad import decay_amplitude, osc_amplitude


@pytest.mark.parametrize("R", [10.5, 60.0, 2500.0, 10000.0])
def test_compiled_oscillatory_amplitude_matches_numpy(R):
    x = np.linspace(0.0, R - 3 * R ** (1 / 3), 40)
    out = np.empty(x.shape, dtype=np.complex128)
    assert fast.osc_amplitude_kernel(R, x, 0.3, 6.3, 2, out)
    ref = osc_amplitude(R, x)
    assert np.max(np.abs(out - ref) / np.abs(ref)) <= 2e-15


@pytest.mark.parametrize("R", [0.1, 3.0, 60.0, 10000.0])
def test_compiled_decay_amplitude_matches_numpy(R):
    x = np.linspace(R + 3 * R ** (1 / 3), R + 900.0, 40)
    out = np.empty(x.shape)
    fast.decay_amplitude_kernel(R, x, 1.0, out)
    ref = decay_amplitude(R, x)
    assert np.max(np.abs(out / ref - 1)) <= 2e-15
    # step halving changes nothing at double precision (trapezoidal rule converged)
    assert np.max(np.abs(decay_amplitude(R, x, nodes_per_width=2.0) / ref - 1)) <= 2e-15


def test_dd_log_against_mpmath():
    rng = np.random.default_rng(3)
    y = np.concatenate([np.exp(rng.uniform(-700, 700, 300)), [5e-324, 1.0, 0.5, 0.75, 2.0, 1e4]])
    hi, lo = _dd.dd_log(y)
    with mpmath.workdps(50):
        for a, h, l in zip(y, hi, lo):
            ref = mpmath.log(mpmath.mpf(float(a)))
            err = abs(ref - mpmath.mpf(float(h)) - mpmath.mpf(float(l)))
            assert err <= 1e-22 * (1 + abs(ref))


def test_dd_phase_reduction_against_mpmath():
    rng = np.random.default_rng(4)
    th = rng.uniform(-1e6, 1e6, 200)
    tl = rng.uniform(-1e-11, 1e-11, 200)
    c, s = _dd.dd_cos_sin(th, tl)
    with mpmath.workdps(50):
        for a, b, cc, ss in zip(th, tl, c, s):
            t = mpmath.mpf(float(a)) + mpmath.mpf(float(b))
            assert abs(mpmath.cos(t) - cc) <= 3e-16 and abs(mpmath.sin(t) - ss) <= 3e-16
