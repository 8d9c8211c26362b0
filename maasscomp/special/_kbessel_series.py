"""Power series of Kt(R, x) = exp(pi R/2) K_{iR}(x) for small x, and Taylor marching of the ODE.

Power series (DLMF 10.25.2 and 10.27.4):

    K_{iR}(x) = -pi Im I_{iR}(x) / sinh(pi R),
    I_{iR}(x) = (x/2)^{iR} / Gamma(1 + iR) * sum_k (x^2/4)^k / (k! (1 + iR)_k),

and ``|Gamma(1 + iR)|^2 = pi R / sinh(pi R)`` (DLMF 5.4.3), so that

    Kt(R, x) = -sqrt(2 pi / (R (1 - exp(-2 pi R)))) Im[ exp(i psi) S(x) ],
    psi = R log(x/2) - arg Gamma(1 + iR),   S(x) = sum_k (x^2/4)^k / (k! (1 + iR)_k).

``arg Gamma(1 + iR)`` comes from mpmath's ``loggamma`` (its continuous branch) at 40 digits
and ``psi`` is formed in double-double arithmetic.  Used for ``R`` below about 10 and
``x <= 2``, where the terms of ``S`` do not cancel much.

Taylor marching: the scaled function solves Bessel's modified equation with imaginary order
(DLMF 10.25.1 with nu = iR)

    x^2 w'' + x w' + (R^2 - x^2) w = 0,

whose Taylor coefficients about any ``x0 > 0`` obey a five-term recurrence (derived in
:func:`taylor_coefficients`).  Marching towards smaller ``x`` from a point beyond the
turning point is the stable direction for the recessive solution K.
"""

from __future__ import annotations

import math

import mpmath
import numpy as np

from maasscomp.special import _dd


def arg_gamma_dd(R: float) -> tuple[float, float]:
    """arg Gamma(1 + iR) (continuous branch, = Im loggamma) as a double-double pair."""
    with mpmath.workdps(40):
        v = mpmath.im(mpmath.loggamma(mpmath.mpc(1, R)))
        hi = float(v)
        lo = float(v - mpmath.mpf(hi))
    return hi, lo


def series_prefactor(R: float) -> float:
    """-sqrt(2 pi / (R (1 - exp(-2 pi R))))."""
    return -math.sqrt(2.0 * math.pi / (R * -math.expm1(-2.0 * math.pi * R)))


def series_sum(R: float, x: np.ndarray, need_deriv: bool = False):
    """S(x) = sum_k (x^2/4)^k / (k! (1 + iR)_k) and optionally dS/dx (complex arrays).

    ``dS/dx = (x/2) sum_{k>=1} z^{k-1} / ((k-1)! (1 + iR)_k)``, ``z = x^2/4``, summed with its
    own term recurrence (no division by x, which may be subnormal).
    """
    z = 0.25 * x * x
    term = np.ones(x.shape, dtype=np.complex128)
    acc = term.copy()
    v = np.full(x.shape, 1.0 / complex(1.0, R)) if need_deriv else None
    dacc = v.copy() if need_deriv else None
    k = 0
    while True:
        k += 1
        term = term * z / (k * complex(k, R))
        acc = acc + term
        if need_deriv and k >= 2:
            v = v * z / ((k - 1) * complex(k, R))
            dacc = dacc + v
        if np.all(np.abs(term) <= 1e-18 * np.abs(acc)) or k > 400:
            break
    if need_deriv:
        # one more term of the derivative series, which lags by one index
        v = v * z / (k * complex(k + 1, R))
        dacc = dacc + v
        return acc, 0.5 * x * dacc
    return acc, None


def series_eval(R: float, argg: tuple[float, float], x: np.ndarray, need_deriv: bool = False):
    """Kt(R, x) (and dKt/dx) from the power series; ``argg`` = arg Gamma(1 + iR) in dd."""
    S, dS = series_sum(R, x, need_deriv)
    lh, ll = _dd.dd_log(x)  # log(x/2) = log x - log 2 (x/2 may underflow)
    lh, ll = _dd.dd_add(lh, ll, -_dd.LN2_HI, -_dd.LN2_LO)
    ph, pl = _dd.dd_mul_d(lh, ll, R)
    ph, pl = _dd.dd_add(ph, pl, -argg[0], -argg[1])
    c, s = _dd.dd_cos_sin(ph, pl)
    pref = series_prefactor(R)
    val = pref * (s * S.real + c * S.imag)
    if not need_deriv:
        return val, None
    # d/dx [e^{i psi} S] = e^{i psi} (i R / x S + S'); x times it is finite for every x, and
    # the division by x comes last so that a subnormal x gives +-inf (the true value
    # overflows there), not inf * 0 = nan
    xT = 1j * R * S + x * dS
    dval = pref * (s * xT.real + c * xT.imag) / x
    return val, dval


def taylor_coefficients(R: float, x0: float, w0: float, dw0: float, nterms: int) -> np.ndarray:
    """Taylor coefficients a_n of the solution of x^2 w'' + x w' + (R^2 - x^2) w = 0 at x0.

    With ``x = x0 + eta`` the coefficient of ``eta^n`` in the equation gives

        x0^2 (n+1)(n+2) a_{n+2} + x0 (n+1)(2n+1) a_{n+1} + (n^2 + R^2 - x0^2) a_n
            - 2 x0 a_{n-1} - a_{n-2} = 0.
    """
    a = np.zeros(nterms)
    a[0] = w0
    if nterms > 1:
        a[1] = dw0
    x02 = x0 * x0
    q0 = (R - x0) * (R + x0)  # R^2 - x0^2 without cancellation
    for n in range(0, nterms - 2):
        am1 = a[n - 1] if n >= 1 else 0.0
        am2 = a[n - 2] if n >= 2 else 0.0
        a[n + 2] = -(x0 * (n + 1) * (2 * n + 1) * a[n + 1] + (n * n + q0) * a[n] - 2 * x0 * am1 - am2) / (x02 * (n + 1) * (n + 2))
    return a


def march_down(R: float, x_start: float, w0: float, dw0: float, x_end: float, nterms: int = 40):
    """March the ODE from ``x_start`` down to ``x_end`` by Taylor steps.

    Returns the step points (decreasing) and the Taylor coefficients at each of them, so
    that values anywhere in between can be produced (dense output).  The step is limited by
    the radius of convergence (distance ``x0`` to the singular point 0) and by the local
    frequency ``sqrt|R^2 - x0^2| / x0`` so that each Taylor polynomial is accurate to a
    few units in the last place.
    """
    xs = []
    coefs = []
    x0, w, dw = x_start, w0, dw0
    while True:
        a = taylor_coefficients(R, x0, w, dw, nterms)
        xs.append(x0)
        coefs.append(a)
        if x0 <= x_end:
            break
        freq = math.sqrt(abs(R * R - x0 * x0)) / x0
        h = min(x0 / 4.0, 2.0 / max(freq, 0.5), x0 - x_end)
        if x0 - h < x_end + 1e-12 * x_end:
            h = x0 - x_end
        # value and derivative at x0 - h
        p = (-h) ** np.arange(nterms)
        w = float(np.dot(a, p))
        dw = float(np.dot(a[1:] * np.arange(1, nterms), p[:-1]))
        x0 = x0 - h
        if h <= 0:
            break
    return np.array(xs), np.array(coefs)


def dense_eval(xs_steps: np.ndarray, coefs: np.ndarray, x: np.ndarray) -> np.ndarray:
    """Evaluate the marched solution at points x (uses the nearest step point)."""
    # steps are decreasing; find nearest
    order = xs_steps[::-1]
    j = np.searchsorted(order, x)
    j = np.clip(j, 0, order.size - 1)
    jm = np.clip(j - 1, 0, order.size - 1)
    pick = np.where(np.abs(order[jm] - x) < np.abs(order[j] - x), jm, j)
    idx = order.size - 1 - pick
    eta = x - xs_steps[idx]
    nterms = coefs.shape[1]
    out = coefs[idx, nterms - 1].copy()
    for k in range(nterms - 2, -1, -1):
        out = out * eta + coefs[idx, k]
    return out
