"""Vectorised double-double ("dd") helpers for large phases.

The oscillatory part of the scaled K-Bessel function has phases up to about
``R log(2R/x)`` (around 10^5 for R = 10^4), so a phase computed in plain double precision
carries an absolute error of 10^-11 and more.  The few operations that build the phase are
therefore done in double-double arithmetic (an unevaluated sum ``hi + lo`` of two doubles,
about 32 significant digits).

Algorithms: error-free transformations of Knuth (TwoSum) and Dekker (TwoProduct with
Veltkamp splitting), T. J. Dekker, "A floating-point technique for extending the available
precision", Numer. Math. 18 (1971) 224-242; the logarithm uses a table-driven argument
reduction ``m = c_j (1 + delta)`` with ``log(c_j)`` tabulated to 32 digits by mpmath
(common practice in libm implementations).

All functions operate elementwise on numpy arrays (or floats) and must not be compiled
with value-changing optimisations: they rely on IEEE round-to-nearest.
"""

from __future__ import annotations

import mpmath
import numpy as np

_SPLIT = 134217729.0  # 2^27 + 1 (Veltkamp splitting constant)


def _dd_const(v: mpmath.mpf) -> tuple[float, float]:
    hi = float(v)
    lo = float(v - mpmath.mpf(hi))
    return hi, lo


with mpmath.workdps(40):
    LN2_HI, LN2_LO = _dd_const(mpmath.log(2))
    TWOPI_HI, TWOPI_LO = _dd_const(2 * mpmath.pi)
    # log(c_j) for c_j = 1/2 + j/512, j = 0..256 (argument-reduction table)
    _NTAB = 512
    _C_TAB = np.array([0.5 + j / _NTAB for j in range(_NTAB // 2 + 1)])
    _LNC = [_dd_const(mpmath.log(mpmath.mpf(0.5) + mpmath.mpf(j) / _NTAB)) for j in range(_NTAB // 2 + 1)]
    _LNC_HI = np.array([a for a, _ in _LNC])
    _LNC_LO = np.array([b for _, b in _LNC])
    del _LNC


def two_sum(a, b):
    """Knuth's TwoSum: ``s + e == a + b`` exactly."""
    s = a + b
    bb = s - a
    e = (a - (s - bb)) + (b - bb)
    return s, e


def fast_two_sum(a, b):
    """TwoSum for ``|a| >= |b|``."""
    s = a + b
    e = b - (s - a)
    return s, e


def _split(a):
    c = _SPLIT * a
    hi = c - (c - a)
    return hi, a - hi


def two_prod(a, b):
    """Dekker's TwoProduct: ``p + e == a * b`` exactly (no overflow assumed)."""
    p = a * b
    ah, al = _split(a)
    bh, bl = _split(b)
    e = ((ah * bh - p) + ah * bl + al * bh) + al * bl
    return p, e


def dd_add(ah, al, bh, bl):
    """Sum of two dd numbers."""
    s, e = two_sum(ah, bh)
    e = e + (al + bl)
    return fast_two_sum(s, e)


def dd_mul_d(ah, al, b):
    """Product of a dd number and a double."""
    p, e = two_prod(ah, b)
    e = e + al * b
    return fast_two_sum(p, e)


def dd_sqrt(ah, al):
    """Square root of a positive dd number (one Newton correction of the double sqrt)."""
    s = np.sqrt(ah)
    p, e = two_prod(s, s)
    corr = ((ah - p) - e + al) / (2.0 * s)
    return fast_two_sum(s, corr)


def dd_log(y):
    """Natural logarithm of positive doubles ``y`` as a dd pair.

    Reduction: ``y = 2^k m``, ``m = c_j (1 + delta)`` with ``|delta| <= 1/512``; ``delta`` is
    formed exactly as a dd pair and ``log1p(delta)`` by its Taylor series (the quadratic and
    higher terms need only double precision).  Absolute error below 1e-22 * (1 + |log y|)
    (measured against mpmath), ample for phases ``R log y`` with R <= 10^4.
    """
    y = np.asarray(y, dtype=np.float64)
    m, k = np.frexp(y)
    j = np.rint((m - 0.5) * _NTAB).astype(np.intp)
    c = _C_TAB[j]
    r = m - c  # exact (Sterbenz)
    dh = r / c
    p, pe = two_prod(dh, c)
    dl = ((r - p) - pe) / c
    # log1p(d) - d = -d^2/2 + d^3/3 - ... ; |d| <= 2^-9 so 9 terms reach 1e-27
    d = dh
    poly = d * (-1.0 / 2 + d * (1.0 / 3 + d * (-1.0 / 4 + d * (1.0 / 5 + d * (-1.0 / 6 + d * (1.0 / 7 + d * (-1.0 / 8 + d * (1.0 / 9))))))))
    poly = d * poly
    kf = k.astype(np.float64)
    a_h, a_l = two_prod(kf, LN2_HI)
    a_l = a_l + kf * LN2_LO
    s_h, s_l = dd_add(a_h, a_l, _LNC_HI[j], _LNC_LO[j])
    return dd_add(s_h, s_l, dh, dl + poly)


def dd_log_dd(yh, yl):
    """Natural logarithm of a positive dd number."""
    lh, ll = dd_log(yh)
    return fast_two_sum(lh, ll + yl / yh)


def dd_cos_sin(th, tl):
    """cos and sin of a dd angle, after exact reduction modulo 2 pi (dd 2 pi)."""
    k = np.rint(th / TWOPI_HI)
    p, pe = two_prod(k, TWOPI_HI)
    rh, rl = two_sum(th, -p)
    rl = rl - pe - k * TWOPI_LO + tl
    rh, rl = fast_two_sum(rh, rl)
    c = np.cos(rh)
    s = np.sin(rh)
    return c - rl * s, s + rl * c
