"""ktilde and ktilde_dx for 10^4 < R <= R_MAX = 10^5.

Oracles:
* data/reference/kbessel_arb_table_large.csv and kbessel_arb_dx_large.csv: python-flint (arb)
  ball arithmetic at R = 2e4, 4e4, 1e5, built by tests/special/make_kbessel_table_large.py
  (working precision 3R + 128 bits, enclosures below 1e-20 relative; version, recipe and the
  coverage per R in the file headers). At R = 2e4 and 4e4: the oscillatory side down to
  x = 1e-3, the turning zone and both sides of the method switches, the decaying side down to
  values near 1e-280, and derivatives. At R = 1e5 (each row costs minutes of arb time at
  300 000 bits): the oscillatory side, both switches, the turning zone and the decaying side
  down to 1.5e-15; no derivative rows.
* DLMF Table 9.9.1 (a'_1, Ai(a'_1)) with the leading Airy-type term of the uniform expansion
  (Dunster, SIAM J. Math. Anal. 21 (1990)) for the cusp peak.

Accuracy classes (the same as for R <= 10^4): absolute error <= 1e-13 max(1, |Kt|) for x < R,
relative error <= 1e-12 for x >= R wherever |Kt| > 1e-290; derivatives 1e-11 of the same scales.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from maasscomp.special import R_MAX, airy_peak, kbessel_table, ktilde, ktilde_dx

from .kbessel_refdata import load_csv

_TAB = load_csv("kbessel_arb_table_large.csv")
_DX = load_csv("kbessel_arb_dx_large.csv")
_RS = sorted(set(_TAB["R"].tolist()))

ABS_TOL_OSC = 1e-13
REL_TOL_DECAY = 1e-12


def test_table_covers_large_R_and_all_regions():
    assert _RS == [20000.0, 40000.0, 100000.0] and R_MAX == 100000.0
    for R in _RS:
        x = _TAB["x"][_TAB["R"] == R]
        r3 = R ** (1 / 3)
        assert x.min() <= 1e-3 and np.sum(x < R - 3 * r3) >= 12
        assert np.sum(np.abs(x - R) <= 3 * r3) >= 8 and np.sum(x > R + 3 * r3) >= 4
        # deep into the decay at 2e4 and 4e4; at 1e5 down to 1e-14 (see the module docstring)
        floor = 1e-250 if R < 1e5 else 1e-14
        assert np.min(np.abs(_TAB["ktilde"][_TAB["R"] == R])) < floor


@pytest.mark.parametrize("R", [20000.0, 40000.0, 100000.0])
def test_large_R_against_arb(R):
    """python-flint arb values: oscillatory side (absolute), turning zone and decay (relative)."""
    sel = _TAB["R"] == R
    x, ref = _TAB["x"][sel], _TAB["ktilde"][sel]
    got = ktilde(R, x)
    osc = x < R
    err_osc = np.abs(got - ref)[osc] / np.maximum(1.0, np.abs(ref[osc]))
    dec = ~osc & (np.abs(ref) > 1e-290)
    err_dec = np.abs(got - ref)[dec] / np.abs(ref[dec])
    assert err_osc.max() <= ABS_TOL_OSC, f"R={R}: x={x[osc][err_osc.argmax()]!r}"
    assert err_dec.max() <= REL_TOL_DECAY, f"R={R}: x={x[dec][err_dec.argmax()]!r}"


@pytest.mark.parametrize("R", [20000.0, 40000.0])
def test_large_R_derivative_against_arb(R):
    """dKt/dx = -(K_{iR-1} + K_{iR+1}) e^{pi R/2} / 2 (DLMF 10.29.1) in python-flint arb."""
    sel = _DX["R"] == R
    x, ref = _DX["x"][sel], _DX["ktilde_dx"][sel]
    assert x.size >= 6
    got = ktilde_dx(R, x)
    # absolute scale on the oscillatory side and in the turning zone |x - R| <= 3 R^(1/3)
    # (measured there at R = 4e4, x = R + R^(1/3): 1.5e-14 absolute, 2.8e-11 relative),
    # relative scale on the decaying side beyond it
    turning = np.abs(x - R) <= 3 * R ** (1 / 3)
    scale = np.where((x < R) | turning, np.maximum(1.0, np.abs(ref)), np.abs(ref))
    assert np.all(np.abs(got - ref) <= 1e-11 * scale), x[np.argmax(np.abs(got - ref) / scale)]


@pytest.mark.parametrize("R", [40000.0, 100000.0])
def test_continuous_across_method_switches_large_R(R):
    tab = kbessel_table(R)
    for edge in (tab.x_lo, tab.x_hi):
        xs = np.array([edge * (1 - 4e-16), edge, edge * (1 + 4e-16)])
        v = ktilde(R, xs)
        assert np.ptp(v) <= 1e-13 * max(1.0, np.max(np.abs(v))) + 1e-13 * np.max(np.abs(v)) * R ** (2 / 3)


@pytest.mark.parametrize("R", [40000.0, 100000.0])
def test_compiled_kernel_matches_numpy_path_large_R(R):
    tab = kbessel_table(R)
    x = np.concatenate([np.geomspace(1e-4, R, 3000), np.linspace(R, tab.x_max * 1.01, 3000)])
    a, b = tab.evaluate(x), tab.evaluate_numpy(x)
    tol = np.where(x < R, 1e-14 * np.maximum(1.0, np.abs(b)), 2e-13 * np.abs(b))
    ok = (x < R) | (np.abs(b) > 1e-290)
    assert np.all(np.abs(a - b)[ok] <= tol[ok])


def test_per_R_setup_is_cheap():
    """A table at R = 10^5 holds a few kB of coefficients (the set-up is one-off per R)."""
    assert kbessel_table(99999.5).nbytes() <= 20_000


AI_MAX = 0.5356566560  # DLMF Table 9.9.1, Ai(a'_1)
A1P = -1.0187929716474710890  # DLMF Table 9.9.1, a'_1
C_AIRY = math.pi * 2 ** (1 / 3) / math.sqrt(2 * math.pi) * AI_MAX


@pytest.mark.parametrize("R", [40000.0, 100000.0])
def test_cusp_peak_tends_to_airy_constant_large_R(R):
    """max sqrt(x/2pi) Kt -> C R^{1/6} from below, deviation ~0.24 R^{-2/3} (2e-4, 1.1e-4);
    argmax x* = R + a'_1 (R/2)^{1/3} + O(R^{-1/3}) (Dunster 1990, leading term)."""
    x_star, val = airy_peak(R)
    ratio = val / (C_AIRY * R ** (1 / 6))
    assert 0 < 1 - ratio <= 0.5 * R ** (-2 / 3)
    assert abs(x_star - (R + A1P * (R / 2) ** (1 / 3))) <= 0.02
