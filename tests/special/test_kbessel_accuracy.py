"""Accuracy of ktilde(R, x) = exp(pi R/2) K_{iR}(x) against arb and mpmath.

Oracles:
* data/reference/kbessel_arb_table.csv: python-flint (arb) ball arithmetic, built by
  tests/special/make_kbessel_table.py (precision and radius recorded per row; the radii are
  below 1e-20 relative, so the table is exact at double precision).
* mpmath.besselk with complex order (live, a few points, mp.dps = 30).

Targets (project requirement): absolute error <= 1e-13 * max(1, |Kt|) for x < R; relative
error <= 1e-12 for x >= R wherever |Kt| > 1e-290.
"""

from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest

from maasscomp.special import kbessel_table, ktilde, ktilde_dx, ktilde_many

from .kbessel_refdata import arb_ktilde_re, load_csv

_TAB = load_csv("kbessel_arb_table.csv")
_R_ALL = sorted(set(_TAB["R"].tolist()))
_R_DEFAULT = [R for R in _R_ALL if R <= 2000.0]
_R_LARGE = [R for R in _R_ALL if R > 2000.0]

ABS_TOL_OSC = 1e-13
REL_TOL_DECAY = 1e-12


def _check_against_table(R: float) -> None:
    sel = _TAB["R"] == R
    x = _TAB["x"][sel]
    ref = _TAB["ktilde"][sel]
    assert x.size >= 50
    got = ktilde(R, x)
    osc = x < R
    err_osc = np.abs(got - ref)[osc] / np.maximum(1.0, np.abs(ref[osc]))
    dec = ~osc & (np.abs(ref) > 1e-290)
    err_dec = np.abs(got - ref)[dec] / np.abs(ref[dec])
    assert osc.sum() >= 15 and dec.sum() >= 10
    assert err_osc.max() <= ABS_TOL_OSC, f"R={R}: x={x[osc][err_osc.argmax()]!r}"
    assert err_dec.max() <= REL_TOL_DECAY, f"R={R}: x={x[dec][err_dec.argmax()]!r}"


@pytest.mark.parametrize("R", _R_DEFAULT)
def test_against_arb_table(R):
    """arb reference (python-flint acb.bessel_k), R from 0.1 to 2000."""
    _check_against_table(R)


@pytest.mark.parametrize("R", _R_LARGE)
def test_against_arb_table_large_R(R):
    """arb reference (python-flint acb.bessel_k), R = 3000, 5000, 10000."""
    _check_against_table(R)


def test_table_covers_the_regimes():
    # the oracle grid reaches deep into x << R, the turning point and x >> R for every R
    for R in _R_ALL:
        x = _TAB["x"][_TAB["R"] == R]
        assert x.min() <= 1e-3 and x.max() >= R + 5 * R ** (1 / 3)
        assert np.any(np.abs(x - R) <= R ** (1 / 3))


def _mp_ktilde(R: float, x: float) -> float:
    with mpmath.workdps(30):
        return float(mpmath.re(mpmath.exp(mpmath.pi * R / 2) * mpmath.besselk(mpmath.mpc(0, R), x)))


@pytest.mark.parametrize(
    "R, x",
    [(0.3, 0.05), (3.7, 2.9), (12.25, 0.0628), (47.5, 30.0), (47.5, 49.0), (47.5, 60.0), (333.0, 321.0), (333.0, 350.0)],
)
def test_live_against_mpmath(R, x):
    """mpmath.besselk with complex order (mp.dps = 30) at a few points not in the table."""
    ref = _mp_ktilde(R, x)
    got = float(ktilde(R, x))
    if x < R:
        assert abs(got - ref) <= ABS_TOL_OSC * max(1.0, abs(ref))
    else:
        assert abs(got - ref) <= REL_TOL_DECAY * abs(ref)


@pytest.mark.parametrize("R, x", [(0.3, 0.7), (3.7, 2.9), (25.0, 3.0), (25.0, 24.0), (25.0, 31.0), (250.0, 100.0), (250.0, 262.0)])
def test_derivative_against_mpmath(R, x):
    """dK_nu/dx = -(K_{nu-1} + K_{nu+1})/2 (DLMF 10.29.1) with mpmath.besselk at nu = iR."""
    with mpmath.workdps(30):
        nu = mpmath.mpc(0, R)
        ref = float(mpmath.re(-mpmath.exp(mpmath.pi * R / 2) * (mpmath.besselk(nu - 1, x) + mpmath.besselk(nu + 1, x)) / 2))
    got = float(ktilde_dx(R, x))
    scale = max(1.0, abs(ref)) if x < R else abs(ref)
    assert abs(got - ref) <= 1e-11 * scale


def test_bessel_equation_residual():
    """x^2 w'' + x w' + (R^2 - x^2) w = 0 (DLMF 10.25.1, nu = iR); w'' by a 4th-order
    central difference of ktilde_dx on the local oscillation scale."""
    for R in (0.5, 7.0, 80.0, 900.0):
        x = np.linspace(0.3, R + 4 * R ** (1 / 3) + 3, 400)
        freq = (np.sqrt(np.abs(R**2 - x**2)) + 1.0) / x + 1.0
        h = 0.01 / freq
        w = ktilde(R, x)
        d1 = ktilde_dx(R, x)
        d2 = (-ktilde_dx(R, x + 2 * h) + 8 * ktilde_dx(R, x + h) - 8 * ktilde_dx(R, x - h) + ktilde_dx(R, x - 2 * h)) / (12 * h)
        res = x**2 * d2 + x * d1 + (R**2 - x**2) * w
        scale = (R**2 + x**2) * np.max(np.abs(w)) + 1.0
        assert np.max(np.abs(res) / scale) <= 1e-8


def test_continuous_across_method_switches():
    """No jumps where the implementation changes method (values from both sides agree)."""
    for R in (0.1, 1.0, 9.9, 10.5, 100.0, 2000.0, 10000.0):
        tab = kbessel_table(R)
        for edge in (tab.x_lo, tab.x_hi):
            xs = np.array([edge * (1 - 4e-16), edge, edge * (1 + 4e-16)])
            v = ktilde(R, xs)
            assert np.ptp(v) <= 1e-13 * max(1.0, np.max(np.abs(v))) + 1e-13 * np.max(np.abs(v)) * R ** (2 / 3)


def test_small_x_phase_large_R():
    """x << R at R = 10^4: the phase R log(2R/x) ~ 1e5 must not cost digits (arb rows)."""
    sel = (_TAB["R"] == 10000.0) & (_TAB["x"] < 1.0)
    assert sel.sum() >= 3
    got = ktilde(10000.0, _TAB["x"][sel])
    assert np.max(np.abs(got - _TAB["ktilde"][sel])) <= 1e-14


def test_many_over_R_grid_matches_table():
    sel = np.isin(_TAB["R"], [1.0, 100.0, 1500.0])
    got = ktilde_many(_TAB["R"][sel], _TAB["x"][sel])
    ref = _TAB["ktilde"][sel]
    ok = np.abs(ref) > 1e-290
    assert np.all(np.abs(got - ref)[ok] <= 1e-12 * np.maximum(1.0, np.abs(ref[ok])))


def test_far_field_asymptotics():
    """x >> R: Kt ~ sqrt(pi/(2x)) e^{-x + pi R/2} (1 + a1/x + a2/x^2), nu = iR,
    a1 = (4 nu^2 - 1)/8, a2 = (4 nu^2 - 1)(4 nu^2 - 9)/128 (DLMF 10.40.2, 10.17.1)."""
    R = 3.0
    x = np.array([400.0, 500.0, 600.0])
    nu2 = -(R**2)
    a1 = (4 * nu2 - 1) / 8
    a2 = (4 * nu2 - 1) * (4 * nu2 - 9) / 128
    lead = np.sqrt(math.pi / (2 * x)) * np.exp(-x + math.pi * R / 2) * (1 + a1 / x + a2 / x**2)
    # the next term, a3/x^3, is below 6e-7 here
    assert np.all(np.abs(ktilde(R, x) / lead - 1) <= 1e-6)


@pytest.mark.parametrize("R", [0.5, 5.0, 10.5, 300.0, 7000.0])
def test_compiled_kernel_matches_numpy_path(R):
    """The numba kernel and the pure-numpy evaluation of the same table agree in all zones."""
    tab = kbessel_table(R)
    x = np.concatenate([np.geomspace(1e-4, R, 3000), np.linspace(R, tab.x_max * 1.01, 3000)])
    a = tab.evaluate(x)
    b = tab.evaluate_numpy(x)
    # x >= R: exp(-Psi) with Psi up to 700 turns one-ulp differences of Psi (libm atan vs
    # numpy arctan) into relative differences of ~1e-13
    tol = np.where(x < R, 1e-14 * np.maximum(1.0, np.abs(b)), 2e-13 * np.abs(b))
    ok = (x < R) | (np.abs(b) > 1e-290)
    assert np.all(np.abs(a - b)[ok] <= tol[ok])
    assert np.all(a[x > tab.x_max] == 0.0)




@pytest.mark.parametrize("R", [1e-8, 0.1, 5.0, 10000.0])
@pytest.mark.parametrize("x", [5e-324, 2.5e-308, 1e-300])
def test_extremely_small_x_against_arb(R, x):
    """Subnormal and tiny x (phase R log(x/2) up to -7.4e6) against python-flint arb."""
    ref = arb_ktilde_re(R, x)
    assert abs(float(ktilde(R, x)) - ref) <= ABS_TOL_OSC * max(1.0, abs(ref))


@pytest.mark.parametrize("R", [2000.0, 10000.0])
def test_derivative_large_R_against_arb(R):
    """dK_nu/dx = -(K_{nu-1} + K_{nu+1})/2 (DLMF 10.29.1) in python-flint arb, nu = iR."""
    r3 = R ** (1 / 3)
    for x in (1e-3, R / 3, R - r3, R, R + r3, R + 10 * r3):
        ref = -(arb_ktilde_re(R, x, -1) + arb_ktilde_re(R, x, 1)) / 2
        got = float(ktilde_dx(R, x))
        scale = max(1.0, abs(ref)) if x < R else abs(ref)
        assert abs(got - ref) <= 1e-11 * scale, x
