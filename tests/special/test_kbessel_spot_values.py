"""Spot values and input validation for maasscomp.special.ktilde.

Spot values: data/reference/kbessel_spot_values.csv, computed here with python-flint (arb)
by tests/special/make_kbessel_peak_values.py; each value is checked to the number of
significant digits printed in the file.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from maasscomp.errors import InputError
from maasscomp.special import R_MAX, ktilde, ktilde_dx, ktilde_many, ktilde_nodes

from .kbessel_refdata import load_csv

_SPOT = load_csv("kbessel_spot_values.csv")
SPOT_VALUES = list(zip(_SPOT["R"], _SPOT["x"], _SPOT["value"], _SPOT["digits"].astype(int)))


@pytest.mark.parametrize("R, x, value, digits", SPOT_VALUES)
def test_spot_values_from_arb(R, x, value, digits):
    got = float(ktilde(R, x))
    # half a unit in the last printed significant digit, relative to the value
    tol = 0.5 * 10.0 ** (1 - digits) * 10 ** (math.floor(math.log10(abs(value))) - math.log10(abs(value)))
    assert abs(got - value) <= (tol + 1e-14) * abs(value)


def test_shape_and_dtype_follow_x():
    x = np.linspace(0.5, 40.0, 12).reshape(3, 4)
    out = ktilde(20.0, x)
    assert out.shape == (3, 4) and out.dtype == np.float64
    assert np.shape(ktilde(20.0, 3.0)) == ()
    np.testing.assert_array_equal(out.ravel(), ktilde(20.0, x.ravel()))
    assert ktilde(20.0, np.array([])).shape == (0,)


def test_many_matches_fixed_R():
    R = np.array([[5.0], [50.0], [500.0]])
    x = np.array([1.0, 10.0, 100.0, 499.0])
    got = ktilde_many(R, x)
    assert got.shape == (3, 4)
    for i in range(3):
        np.testing.assert_array_equal(got[i], ktilde(float(R[i, 0]), x))
    # scalar R and elementwise pairs
    np.testing.assert_array_equal(ktilde_many(50.0, x), ktilde(50.0, x))
    pairs = ktilde_many([5.0, 500.0], [1.0, 499.0])
    assert pairs[0] == ktilde(5.0, 1.0) and pairs[1] == ktilde(500.0, 499.0)


@pytest.mark.parametrize("R", [0.0, -1.0, math.nan, math.inf, math.nextafter(R_MAX, math.inf), 1e6, "abc"])
def test_bad_R_is_input_error(R):
    with pytest.raises(InputError, match=r"R = .*\(0, 100000\]"):
        ktilde(R, 1.0)
    with pytest.raises(InputError, match=r"R = "):
        ktilde_dx(R, 1.0)


@pytest.mark.parametrize("x", [0.0, -2.0, math.nan, math.inf, -math.inf, [1.0, 2.0, -0.5]])
def test_bad_x_is_input_error(x):
    with pytest.raises(InputError, match="x = .*finite and > 0"):
        ktilde(10.0, x)
    with pytest.raises(InputError, match="x = "):
        ktilde_many(10.0, x)


def test_bad_R_in_many_is_input_error():
    with pytest.raises(InputError, match="R = -3"):
        ktilde_many([1.0, -3.0], [1.0, 2.0])


def test_far_tail_is_zero_or_tiny():
    # Kt(R, x) ~ sqrt(pi/(2x)) exp(-x + pi R/2) for x >> R (DLMF 10.40.2): far below 1e-300 here
    v = ktilde(10.0, [800.0, 5000.0, 1e300])
    assert np.all(v >= 0.0) and np.all(v < 1e-300)


@pytest.mark.parametrize("R0, spread", [(3.0, 0.01), (40.0, 0.5), (1000.0, 1e-3), (40000.0, 3e-4), (99999.0, 1e-6)])
def test_nodes_match_separate_evaluations(R0, spread):
    """ktilde_nodes (shared phase, Taylor-moved in R) equals ktilde per R in every zone."""
    Rs = R0 + spread * np.cos(np.pi * (2 * np.arange(5) + 1) / 10)
    x = np.concatenate([np.geomspace(1e-3, R0, 4000), np.linspace(R0, 1.2 * R0 + 800, 4000)]).reshape(2, -1)
    got = ktilde_nodes(Rs, x)
    assert got.shape == (5, 2, 4000)
    for j, R in enumerate(Rs):
        ref = ktilde(R, x)
        osc = x < R
        assert np.all(np.abs(got[j] - ref)[osc] <= 1e-15 * np.maximum(1.0, np.abs(ref[osc])))
        assert np.all(np.abs(got[j] - ref)[~osc] <= 1e-15 * np.abs(ref[~osc]))


def test_nodes_far_apart_and_bad_input():
    Rs = [500.0, 900.0, 2000.0]  # too far apart to share the phase: each R on its own
    x = np.linspace(1.0, 2500.0, 1001)
    got = ktilde_nodes(Rs, x)
    for j, R in enumerate(Rs):
        np.testing.assert_array_equal(got[j], ktilde(R, x))
    with pytest.raises(InputError, match="R = "):
        ktilde_nodes([1.0, -2.0], x)
    with pytest.raises(InputError, match="boolean"):
        ktilde_nodes([True], x)
    with pytest.raises(InputError, match="x = "):
        ktilde_nodes([1.0], [0.0])
