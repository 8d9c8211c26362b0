"""Steepest-descent quadratures for the scaled K-Bessel function of imaginary order.

Notation: ``Kt(R, x) = exp(pi R / 2) K_{iR}(x)`` for real ``R > 0``, ``x > 0``.

Both routines start from the integral representation (DLMF 10.32.9)

    K_{iR}(x) = (1/2) int_{-inf}^{inf} exp(-x cosh t + i R t) dt

and move the path onto steepest-descent contours, where the integrand does not oscillate
and the trapezoidal rule converges geometrically (the approach of A. Gil, J. Segura and
N. M. Temme, "Evaluation of the modified Bessel function of the third kind of imaginary
orders", J. Comput. Phys. 175 (2002) 398-411, and "Computing solutions of the modified
Bessel differential equation for imaginary orders and positive arguments", ACM TOMS 30
(2004) 145-158; see also J. A. C. Weideman and L. N. Trefethen, "The exponentially
convergent trapezoidal rule", SIAM Review 56 (2014) 385-458).  The contour parametrisations
and the cancellation-free forms of the exponents below are derived for this module.

Oscillatory side, ``x < R`` (function :func:`osc_amplitude`)
    With ``t = u - i pi/2`` the representation becomes
    ``Kt = Re int_L exp(i phi(u)) du``, ``phi(u) = x sinh u - R u``, where ``L`` runs from the
    valley at ``-i inf`` to the valley at ``+inf`` (the other half of the real line gives the
    complex conjugate).  ``phi`` has a saddle at ``u = alpha = arccosh(R/x)`` with value
    ``Phi(x) = S - R arccosh(R/x)``, ``S = sqrt(R^2 - x^2)``.  Writing ``u = alpha + w``,

        phi(alpha + w) - Phi = S (cosh w - 1) + R (sinh w - w) =: psi(w),

    and the steepest-descent path is ``psi(w) = i tau^2``, ``tau`` real.  Hence

        Kt(R, x) = Re[ exp(i Phi(x)) J(x) ],   J(x) = int exp(-tau^2) (dw/dtau) dtau,

    with ``J`` smooth and non-oscillatory on ``0 <= x < R`` (``J ~ sqrt(2 pi / S) e^{i pi/4}``,
    the Liouville-Green amplitude).  The large phase ``Phi`` is handled separately, in
    double-double arithmetic.

Decaying side, ``x > R`` (function :func:`decay_amplitude`)
    Shift ``t -> t + i s(t)`` with ``sin s = R t / (x sinh t)`` (the imaginary part of the
    exponent then vanishes; docs/theory.md §4.2):

        Kt(R, x) = exp(-Psi(x)) M(x),  M(x) = int_0^inf exp(-B(t)) dt,

    ``Psi(x) = sqrt(x^2 - R^2) - R arccos(R/x)`` (the Liouville-Green exponent) and
    ``B(t) >= 0`` the exponent relative to its value at ``t = 0``, written without
    cancellation (see :func:`_decay_exponent`).
"""

from __future__ import annotations

import math

import numpy as np

# ---------------------------------------------------------------------------------------
# small cancellation-free building blocks


def _sinh_minus_id(w):
    """sinh(w) - w for real or complex w, accurate also for small |w| (Taylor series)."""
    w = np.asarray(w)
    out = np.sinh(w) - w
    small = np.abs(w) < 1.0
    if np.any(small):
        ws = w[small]
        w2 = ws * ws
        # sum_{n>=1} w^(2n+1)/(2n+1)!, 10 terms: |w|^23/23! < 4e-23 for |w| < 1
        term = ws * w2 / 6.0
        acc = term
        for n in range(2, 12):
            term = term * w2 / ((2 * n) * (2 * n + 1))
            acc = acc + term
        out[small] = acc
    return out


def _x_minus_sin(d):
    """d - sin(d) for real d, accurate for small |d|."""
    d = np.asarray(d, dtype=np.float64)
    out = d - np.sin(d)
    small = np.abs(d) < 1.0
    if np.any(small):
        ds = d[small]
        d2 = ds * ds
        term = ds * d2 / 6.0
        acc = term
        for n in range(2, 12):
            term = -term * d2 / ((2 * n) * (2 * n + 1))
            acc = acc + term
        out[small] = acc
    return out


def t_over_sinh(t):
    """g(t) = t / sinh(t) (g(0) = 1) and 1 - g(t)^2, both without cancellation."""
    t = np.asarray(t, dtype=np.float64)
    with np.errstate(invalid="ignore", divide="ignore"):
        sh = np.sinh(t)
        g = np.where(t == 0.0, 1.0, t / np.where(t == 0.0, 1.0, sh))
        smt = _sinh_minus_id(t)  # sinh t - t
        one_m_g2 = np.where(t == 0.0, 0.0, smt * (sh + t) / np.where(t == 0.0, 1.0, sh * sh))
    return g, one_m_g2


def psi_decay(R: float, x):
    """Liouville-Green exponent ``Psi(x) = sqrt(x^2 - R^2) - R arccos(R/x)`` for ``x >= R``.

    Written as ``R (v - arctan v)``, ``v = sqrt(x^2 - R^2) / R``, with a series for small v,
    so that no cancellation occurs near the turning point ``x = R``.
    """
    x = np.asarray(x, dtype=np.float64)
    v = np.sqrt((x - R) * (x + R)) / R
    out = v - np.arctan(v)
    small = v < 0.5
    if np.any(small):
        vs = v[small]
        v2 = vs * vs
        # v - arctan v = sum_{n>=1} (-1)^(n+1) v^(2n+1)/(2n+1); 0.25^n, 26 terms -> 1e-17
        acc = np.zeros_like(vs)
        p = vs * v2
        for n in range(1, 28):
            acc = acc + (p / (2 * n + 1) if n % 2 == 1 else -p / (2 * n + 1))
            p = p * v2
        out[small] = acc
    return R * out


def phi_osc_double(R: float, x):
    """``Phi(x) = sqrt(R^2 - x^2) - R arccosh(R/x)`` in plain double precision (x < R)."""
    x = np.asarray(x, dtype=np.float64)
    S = np.sqrt((R - x) * (R + x))
    return S - R * np.log((R + S) / x)


# ---------------------------------------------------------------------------------------
# oscillatory side


def _psi_osc(S, R, w):
    sh2 = np.sinh(0.5 * w)
    return 2.0 * S * sh2 * sh2 + R * _sinh_minus_id(w)


def _dpsi_osc(S, R, w):
    sh2 = np.sinh(0.5 * w)
    return S * np.sinh(w) + 2.0 * R * sh2 * sh2


def osc_amplitude(R: float, x, h: float = 0.3, tau_max: float = 6.3, substeps: int = 2):
    """Complex amplitude ``J(x)`` with ``Kt(R, x) = Re[exp(i Phi(x)) J(x)]`` for ``0 <= x < R``.

    Trapezoidal rule in the steepest-descent variable ``tau`` (step ``h``, ``|tau| <= tau_max``,
    so the neglected tail is below ``exp(-tau_max^2) < 1e-17``).  The contour point ``w(tau)``
    is followed by continuation in ``tau`` with Newton corrections on ``psi(w) = i tau^2``.

    Accuracy (trapezoidal-rule theory, checked against arb): the error is governed by
    ``exp(-pi^2/h^2)`` and by the distance of the nearest singularity of ``w(tau)`` from the
    real axis, which is ``sqrt(|Phi(x)|)`` (the second saddle ``-alpha``) and
    ``sqrt(pi R)`` (saddles at ``alpha + 2 pi i k``).  Callers keep ``|Phi| >= 4`` and
    ``R >= 8``, where ``h = 0.3`` gives relative errors near 1e-16.

    The continuation is checked: if a Newton solve leaves a residual above 1e-12, the
    computation is repeated with twice as many continuation substeps.
    """
    x = np.atleast_1d(np.asarray(x, dtype=np.float64))
    S = np.sqrt((R - x) * (R + x))
    c0 = np.sqrt(2.0 / S) * np.exp(0.25j * math.pi)
    K = int(math.ceil(tau_max / h))
    dt = h / substeps
    total = c0.astype(np.complex128)  # tau = 0 node: dw/dtau = c0
    for sgn in (1.0, -1.0):
        hist = [np.zeros_like(c0)]  # w at tau = 0
        for j in range(1, K * substeps + 1):
            tau = sgn * j * dt
            if j == 1:
                w = tau * c0
            elif j == 2:
                w = 2.0 * hist[-1] - hist[-2]
            else:
                w = 3.0 * hist[-1] - 3.0 * hist[-2] + hist[-3]
            target = 1j * tau * tau
            for _ in range(4):
                w = w - (_psi_osc(S, R, w) - target) / _dpsi_osc(S, R, w)
            resid = np.abs(_psi_osc(S, R, w) - target)
            if np.any(~(resid <= 1e-12 * (1.0 + tau * tau))):
                if substeps >= 64:
                    raise RuntimeError(f"osc_amplitude: contour continuation failed for R={R}")
                return osc_amplitude(R, x, h, tau_max, 2 * substeps)
            hist.append(w)
            if len(hist) > 3:
                hist.pop(0)
            if j % substeps == 0:
                dw = 2j * tau / _dpsi_osc(S, R, w)
                total = total + math.exp(-tau * tau) * dw
    return h * total


# ---------------------------------------------------------------------------------------
# decaying side


def _tau_star(rho):
    """Smallest tau in (0, pi) with tau / sin(tau) = 1 / rho (rho = R/x < 1), vectorised."""
    target = 1.0 / rho
    lo = np.zeros_like(rho)
    hi = np.full_like(rho, math.pi)
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        val = np.where(mid == 0.0, 1.0, mid / np.sin(mid))
        big = val > target
        hi = np.where(big, mid, hi)
        lo = np.where(big, lo, mid)
    return 0.5 * (lo + hi)


def _decay_exponent(R, x, t, need_deriv=False):
    """B(t) = [x cosh t cos s + R s] - [x cos s0 + R s0] >= 0 without cancellation.

    ``sin s = rho g(t)``, ``g = t/sinh t``, ``rho = R/x``, ``s0 = s(0) = arcsin(rho)``.
    With ``delta = s - s0 = -arcsin(rho (1 - g^2) / (g cos s0 + cos s))``:

        B = 2 x sinh^2(t/2) cos s - 2 x cos s0 sin^2(delta/2) + R (delta - sin delta).

    Optionally also returns the weight ``cosh t cos s - s'(t) sinh t sin s`` of the
    x-derivative (``dKt/dx = -int weight * exp(-Psi - B) dt``).
    """
    rho = R / x
    cos_s0 = np.sqrt((x - R) * (x + R)) / x
    g, omg2 = t_over_sinh(t)
    cos_s = np.sqrt(cos_s0 * cos_s0 + rho * rho * omg2)
    delta = -np.arcsin(rho * omg2 / (g * cos_s0 + cos_s))
    sh = np.sinh(0.5 * t)
    sd = np.sin(0.5 * delta)
    B = 2.0 * x * sh * sh * cos_s - 2.0 * x * cos_s0 * sd * sd + R * _x_minus_sin(delta)
    if not need_deriv:
        return B, None
    # g'(t) = (sinh t - t cosh t)/sinh^2 t; small t: -t/3 + 7 t^3/90 - 31 t^5/2520 + ...
    with np.errstate(invalid="ignore", divide="ignore"):
        sht = np.sinh(t)
        gp = np.where(t == 0.0, 0.0, (sht - t * np.cosh(t)) / np.where(t == 0.0, 1.0, sht * sht))
    small = np.abs(t) < 0.25
    if np.any(small):
        ts = t[small]
        t2 = ts * ts
        gp[small] = ts * (-1.0 / 3 + t2 * (7.0 / 90 + t2 * (-31.0 / 2520 + t2 * (127.0 / 75600 + t2 * (-73.0 / 342144)))))
    sp = rho * gp / cos_s
    sin_s = rho * g
    weight = np.cosh(t) * cos_s - sp * sht * sin_s
    return B, weight


def decay_amplitude(R: float, x, need_deriv: bool = False, nodes_per_width: float = 1.0):
    """``M(x) = Kt(R, x) exp(Psi(x))`` for ``x > R`` (and ``exp(Psi) dKt/dx`` if asked).

    Trapezoidal rule on ``[0, inf)`` for the even integrand ``exp(-B(t))``.  The step is set
    from the analyticity strip of the integrand (half-width ``tau*``, the root of
    ``tau / sin tau = x / R``, where ``cos s`` vanishes, capped at 1.4 because beyond
    ``|Im t| = pi/2`` the integrand grows) and from the curvature of ``B`` at 0.
    """
    x = np.atleast_1d(np.asarray(x, dtype=np.float64))
    rho = R / x
    ts = _tau_star(rho)
    cos_s0 = np.sqrt((x - R) * (x + R)) / x
    # curvature of B at 0: B ~ b2 t^2, b2 = x cos s0 / 2 + R rho/(6 cos s0) (leading terms)
    b2 = 0.5 * x * cos_s0 + R * rho / (6.0 * cos_s0)
    # the integrand grows like exp(x cosh(Re t) |cos(Im t)|) once |Im t| > pi/2, so the usable
    # strip half-width is min(tau*, ~1.4)
    h = np.minimum(np.minimum(ts, 1.4) / 7.5, 0.5 / np.sqrt(b2)) / nodes_per_width
    val = 0.5 * np.ones_like(x)
    dval = None
    if need_deriv:
        _, w0 = _decay_exponent(R, x, np.zeros_like(x), True)
        dval = 0.5 * w0
    k = 1
    active = np.ones(x.shape, dtype=bool)
    while np.any(active):
        idx = np.nonzero(active)[0]
        t = k * h[idx]
        B, wgt = _decay_exponent(R, x[idx], t, need_deriv)
        e = np.exp(-B)
        val[idx] += e
        if need_deriv:
            dval[idx] += wgt * e
        active[idx[e < 1e-19]] = False
        k += 1
        if k > 100000:  # pragma: no cover - guards against a bad step choice
            raise RuntimeError("decay_amplitude: trapezoidal sum did not terminate")
    if need_deriv:
        return h * val, -h * dval
    return h * val
