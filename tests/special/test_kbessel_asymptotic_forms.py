"""The asymptotic forms of Kt(R, x) = exp(pi R/2) K_{iR}(x) stated in docs/theory.md §3.1-3.2.

Sources of the formulas: the leading term of the Airy-type uniform expansion for imaginary
order (T. M. Dunster, SIAM J. Math. Anal. 21 (1990) 995-1018; recalled, not re-read, and
written in the variables of DLMF §10.20); the Liouville--Green (WKB) forms on either side of
the turning point x = R (their amplitudes and phases are derived in docs/theory.md §3.2).
Reference values: ``maasscomp.special.ktilde``, itself checked against python-flint (arb)
to 1e-13 in test_kbessel_accuracy.py.  Airy function: scipy.special.airy.

What the checks can detect: a wrong constant (pi sqrt(2), 2^{-1/6}), a wrong power of R, a
wrong branch of zeta, a phase error of pi/4 or a sign error in an exponent all change the
value by far more than the O(1/R) (uniform) and O(R^{-1/3})-near-the-turning-point (WKB)
errors allowed here.  They cannot tell the higher-order terms of the expansions.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.special import airy

from maasscomp.special import ktilde


def _zeta(z: np.ndarray) -> np.ndarray:
    """zeta(z) of the uniform expansion: >= 0 on 0 < z <= 1, <= 0 for z >= 1."""
    out = np.empty_like(z)
    a = z <= 1.0
    s = np.sqrt(1.0 - z[a] ** 2)
    out[a] = (1.5 * (np.log((1.0 + s) / z[a]) - s)) ** (2.0 / 3.0)
    s = np.sqrt(z[~a] ** 2 - 1.0)
    out[~a] = -((1.5 * (s - np.arccos(1.0 / z[~a]))) ** (2.0 / 3.0))
    return out


def _uniform_leading(R: float, x: np.ndarray) -> np.ndarray:
    """pi sqrt(2) R^{-1/3} (zeta/(1 - z^2))^{1/4} Ai(-R^{2/3} zeta), z = x/R (theory §3.1)."""
    z = x / R
    ze = _zeta(z)
    near = np.abs(1.0 - z) < 1e-6
    pre = np.where(near, 2.0 ** (-1.0 / 6.0), np.abs(ze / np.where(near, 1.0, 1.0 - z**2)) ** 0.25)
    return math.pi * math.sqrt(2.0) * R ** (-1.0 / 3.0) * pre * airy(-(R ** (2.0 / 3.0)) * ze)[0]


@pytest.mark.parametrize("R", [100.0, 1000.0, 3000.0])
def test_uniform_airy_leading_term(R):
    """|leading term - Kt| <= 0.15/R * max|Kt| for x/R in [0.05, 3] (error O(1/R))."""
    x = R * np.concatenate([np.linspace(0.05, 0.95, 91), 1.0 + np.linspace(-6, 6, 49) * R ** (-2 / 3),
                            np.linspace(1.05, 3.0, 40)])
    k = ktilde(R, x)
    u = _uniform_leading(R, x)
    assert np.max(np.abs(u - k)) <= 0.15 / R * np.max(np.abs(k))


def test_turning_point_value():
    """Kt(R, R) R^{1/3} -> pi 2^{1/3} Ai(0) = 1.40525738537... (theory §3.1), error O(R^{-2/3})."""
    c = math.pi * 2 ** (1 / 3) * airy(0.0)[0]
    for R in (100.0, 1000.0, 10000.0):
        v = float(ktilde(R, R)) * R ** (1 / 3)
        assert abs(v / c - 1) <= 0.01 * R ** (-2 / 3)


@pytest.mark.parametrize("R", [300.0, 3000.0])
def test_liouville_green_forms_away_from_the_turning_point(R):
    """x < R: Kt ~ sqrt(2 pi) (R^2-x^2)^{-1/4} sin(R arccosh(R/x) - sqrt(R^2-x^2) + pi/4);
    x > R: Kt ~ sqrt(pi/2) (x^2-R^2)^{-1/4} exp(-(sqrt(x^2-R^2) - R arccos(R/x))) (theory §3.2).

    Checked at x/R in [0.05, 0.5] and [1.1, 1.4], away from the turning point (R^{1/3} wide):
    the error there is O(1/(R |1 - (x/R)^2|^{3/2})), measured below 0.16/R and 2.5/R."""
    x = R * np.linspace(0.05, 0.5, 40)
    S = np.sqrt(R * R - x * x)
    osc = math.sqrt(2 * math.pi) / np.sqrt(S) * np.sin(R * np.arccosh(R / x) - S + math.pi / 4)
    # absolute error relative to the amplitude sqrt(2 pi) S^{-1/2}
    assert np.max(np.abs(ktilde(R, x) - osc) * np.sqrt(S) / math.sqrt(2 * math.pi)) <= 0.25 / R
    x = R * np.linspace(1.1, 1.4, 40)
    S = np.sqrt(x * x - R * R)
    dec = math.sqrt(math.pi / 2) / np.sqrt(S) * np.exp(-(S - R * np.arccos(R / x)))
    ok = dec > 1e-290
    assert ok.sum() >= 5
    assert np.max(np.abs(ktilde(R, x[ok]) / dec[ok] - 1)) <= 3.0 / R
