"""Per-R tables for Kt(R, x) = exp(pi R/2) K_{iR}(x) and their vectorised evaluation.

For one R the positive x-axis is split into four zones (``c = 3``):

I.   ``0 < x <= x_lo = R - c R^{1/3}`` (only when ``x_lo >= 3.5``, i.e. R >~ 10):
     ``Kt = Re[exp(i Phi(x)) J(x)]`` with the smooth complex amplitude ``J`` stored as a
     piecewise Chebyshev interpolant (built from the steepest-descent quadrature of
     :mod:`._kbessel_quad`) and the large phase ``Phi(x) = sqrt(R^2-x^2) - R arccosh(R/x)``
     evaluated in double-double arithmetic at every call, so that no digits are lost to
     phases of size ``R log(2R/x)``.
I'.  for smaller R instead: the power series (:mod:`._kbessel_series`) on ``0 < x <= x_s``.
II.  the turning-point zone ``[x_lo, x_hi]``, ``x_hi = R + c R^{1/3}``: Kt itself as a
     piecewise Chebyshev interpolant, built by Taylor marching of Bessel's equation downward
     from ``x_hi`` (the stable direction), starting from quadrature values of Kt and Kt'.
     The zone holds only a few oscillations, so plain double precision suffices.
III. ``x_hi <= x <= x_max``: ``Kt = exp(-Psi(x)) M(x)`` with ``M`` smooth and positive,
     stored as a piecewise Chebyshev interpolant, ``Psi = sqrt(x^2-R^2) - R arccos(R/x)``
     evaluated at every call (cancellation-free form); ``x_max`` is where
     ``Psi = 700`` (Kt < 1e-300).
IV.  ``x > x_max``: Kt is returned as 0.0 (below 1e-300).

The zone layout (power series / steepest descent / turning-point method, docs/theory.md §4)
follows Gil, Segura and Temme, ACM TOMS 30 (2004) 145-158; the phase-amplitude split of zone I and the per-R tables are
this module's own design for the many-x-per-R access pattern of Hejhal's method.

Tiny R (``R < R_TINY = 1e-100``): ``K_{iR}(x)`` is even and analytic in R, and the first
correction to ``K_0(x)`` is of relative size ``(R log(x/2))^2 <= (745 R)^2 < 1e-194`` for
every double ``x > 0`` (small-x form DLMF 10.31.2 / 10.27.4), far below double precision;
since also ``exp(pi R/2) = 1`` to double precision, ``Kt = K_0(x)`` and ``dKt/dx = -K_1(x)``
(DLMF 10.29.3) there.  The power series would divide ``1/R`` by ``R`` and overflow.
"""

from __future__ import annotations

import math

import numpy as np
import scipy.special

from maasscomp.special import _dd
from maasscomp.special._cheb import PiecewiseCheb, build_adaptive, make_piecewise
from maasscomp.special._kbessel_quad import decay_amplitude, osc_amplitude, psi_decay
from maasscomp.special._kbessel_series import arg_gamma_dd, dense_eval, march_down, series_eval

try:  # the compiled kernel is optional: without numba the numpy path is used
    from maasscomp.special import _kbessel_fast as _fast
except ImportError:  # pragma: no cover
    _fast = None

def _osc_amp(R: float, x: np.ndarray) -> np.ndarray:
    """J(x) at table nodes: compiled kernel, numpy fallback (also if continuation fails)."""
    if _fast is not None:
        out = np.empty(x.shape, dtype=np.complex128)
        for sub in (2, 8):
            if _fast.osc_amplitude_kernel(R, np.ascontiguousarray(x, dtype=np.float64), 0.3, 6.3, sub, out):
                return out
    return osc_amplitude(R, x)


def _decay_amp(R: float, x: np.ndarray) -> np.ndarray:
    """M(x) at table nodes: compiled kernel, numpy fallback."""
    if _fast is not None:
        out = np.empty(x.shape, dtype=np.float64)
        _fast.decay_amplitude_kernel(R, np.ascontiguousarray(x, dtype=np.float64), 1.0, out)
        return out
    return decay_amplitude(R, x)


C_ZONE = 3.0
X_LO_MIN = 3.5  # zone I is used when R - C R^{1/3} >= this
X_SERIES = 2.0  # upper end of the power-series zone for small R
PSI_MAX = 700.0
R_TINY = 1e-100  # below this Kt(R, x) = K_0(x) to double precision (module docstring)


def _phase_dd(R: float, x: np.ndarray):
    """Phi(x) = sqrt(R^2 - x^2) - R log((R + sqrt(R^2 - x^2)) / x) as a dd pair (x < R)."""
    r2h, r2l = _dd.two_prod(R, R)
    x2h, x2l = _dd.two_prod(x, x)
    dh, dl = _dd.dd_add(r2h, r2l, -x2h, -x2l)
    sh, sl = _dd.dd_sqrt(dh, dl)
    th, tl = _dd.dd_add(sh, sl, R, 0.0)
    lth, ltl = _dd.dd_log_dd(th, tl)
    lxh, lxl = _dd.dd_log(x)
    ah, al = _dd.dd_add(lth, ltl, -lxh, -lxl)
    ah, al = _dd.dd_mul_d(ah, al, R)
    return _dd.dd_add(sh, sl, -ah, -al)


class KTable:
    """All per-R data needed to evaluate Kt(R, x) for any x > 0."""

    def __init__(self, R: float) -> None:
        self.R = R = float(R)
        self.tiny = R < R_TINY
        self._deriv_ready = False
        self._kargs = None
        if self.tiny:
            # Kt = K_0(x): no zones; x_lo = x_hi = 0 and x_max = inf keep the attributes meaningful
            self.osc = False
            self.x_lo = self.x_hi = 0.0
            self.x_max = math.inf
            self.zone2 = None
            return
        r3 = R ** (1.0 / 3.0)
        self.x_hi = R + C_ZONE * r3
        x_lo = R - C_ZONE * r3
        self.osc = x_lo >= X_LO_MIN
        if self.osc:
            self.x_lo = x_lo
        else:
            self.x_lo = min(X_SERIES, self.x_hi)
            self.argg = arg_gamma_dd(R)
        self._build_zone3()
        if self.osc:
            self._build_zone1()
        if self.x_lo < self.x_hi:
            self._build_zone2()
        else:
            self.zone2 = None

    # -- construction -------------------------------------------------------------------
    def _build_zone1(self) -> None:
        R, x_lo = self.R, self.x_lo
        d = R - x_lo
        breaks = [x_lo]
        while R - 2.0 * d > 0.0:
            d *= 2.0
            breaks.append(R - d)
        breaks.append(0.0)
        breaks = sorted(breaks)
        edges, cs = build_adaptive(lambda xx: _osc_amp(R, xx), breaks, n=24)
        self.j_re = make_piecewise(edges, [c.real.copy() for c in cs])
        self.j_im = make_piecewise(edges, [c.imag.copy() for c in cs])

    def _build_zone3(self) -> None:
        R = self.R
        # x_max: Psi(x_max) = PSI_MAX (Psi increasing for x > R); scalar bisection
        def psi(x: float) -> float:
            v = math.sqrt((x - R) * (x + R)) / R
            return R * (v - math.atan(v))  # no cancellation issue at Psi ~ 700

        lo, hi = R, R + 2.0 * PSI_MAX + 10.0 * R ** (1.0 / 3.0) + 10.0
        while psi(hi) < PSI_MAX:
            hi *= 2.0
        for _ in range(80):
            mid = 0.5 * (lo + hi)
            if psi(mid) < PSI_MAX:
                lo = mid
            else:
                hi = mid
        self.x_max = hi
        d = self.x_hi - R
        breaks = [self.x_hi]
        while R + 2.0 * d < self.x_max:
            d *= 2.0
            breaks.append(R + d)
        breaks.append(self.x_max)
        edges, cs = build_adaptive(lambda xx: _decay_amp(R, xx), breaks, n=24)
        self.m_cheb = make_piecewise(edges, cs)

    def _build_zone2(self) -> None:
        R = self.R
        m0, d0 = decay_amplitude(R, np.array([self.x_hi]), need_deriv=True)
        e = math.exp(-float(psi_decay(R, np.array([self.x_hi]))[0]))
        w0, dw0 = float(m0[0]) * e, float(d0[0]) * e
        xs, coefs = march_down(R, self.x_hi, w0, dw0, self.x_lo)
        # breakpoints: about one Airy length (R^{1/3}) per piece, more for the series case
        width = self.x_hi - self.x_lo
        npieces = max(2, int(math.ceil(width / max(R ** (1.0 / 3.0), 0.5))))
        breaks = list(np.linspace(self.x_lo, self.x_hi, npieces + 1))
        # rounding noise of the node values is ~eps times the envelope (near zeros of Kt)
        # plus eps |x Kt'| (rounding of the nodes), so the accuracy test of a piece is
        # made relative to these floors rather than to the local values
        floor = float(np.max(np.abs(coefs[:, 0])))
        noise = 8.0 * 2.2e-16 * self.x_hi * float(np.max(np.abs(coefs[:, 1])))
        edges, cs = build_adaptive(
            lambda xx: dense_eval(xs, coefs, xx), breaks, n=24, scale_floor=floor, noise_floor=noise
        )
        self.zone2 = make_piecewise(edges, cs)

    def _prepare_derivatives(self) -> None:
        if self._deriv_ready:
            return
        if self.osc:
            self.dj_re = self.j_re.derivative()
            self.dj_im = self.j_im.derivative()
        self.dm_cheb = self.m_cheb.derivative()
        if self.zone2 is not None:
            self.dzone2 = self.zone2.derivative()
        self._deriv_ready = True

    # -- evaluation ---------------------------------------------------------------------
    def _kernel_args(self):
        if getattr(self, "_kargs", None) is None:
            dummy_e = np.array([0.0, 1.0])
            dummy_c = np.zeros((2, 1))
            j_e = self.j_re.edges if self.osc else dummy_e
            j_r = np.ascontiguousarray(self.j_re.coef) if self.osc else dummy_c
            j_i = np.ascontiguousarray(self.j_im.coef) if self.osc else dummy_c
            has2 = self.zone2 is not None
            z_e = self.zone2.edges if has2 else dummy_e
            z_c = np.ascontiguousarray(self.zone2.coef) if has2 else dummy_c
            self._kargs = (self.R, self.osc, self.x_lo, self.x_hi, self.x_max, j_e, j_r, j_i, z_e, z_c, has2,
                           self.m_cheb.edges, np.ascontiguousarray(self.m_cheb.coef),
                           _dd._C_TAB, _dd._LNC_HI, _dd._LNC_LO)
        return self._kargs

    def evaluate(self, x: np.ndarray, deriv: bool = False) -> np.ndarray:
        """Kt(R, x) (or dKt/dx if ``deriv``) for a 1-D float64 array of positive x.

        Values use the compiled kernel of :mod:`._kbessel_fast` (the power-series zone of
        small R and all derivatives use the numpy code below).
        """
        if self.tiny:
            return self._evaluate_tiny(x, deriv)
        if not deriv and _fast is not None:
            x = np.ascontiguousarray(x, dtype=np.float64)
            out = np.empty_like(x)
            _fast.eval_kernel(*self._kernel_args(), x, out)
            if not self.osc:
                sel = np.isnan(out)
                if np.any(sel):
                    out[sel] = series_eval(self.R, self.argg, x[sel])[0]
            return out
        return self.evaluate_numpy(x, deriv)

    @staticmethod
    def _evaluate_tiny(x: np.ndarray, deriv: bool) -> np.ndarray:
        """K_0(x), or -K_1(x), for R < R_TINY.

        scipy's k0/k1 fail for subnormal x (inf, nan); for x < 1e-150 the small-x forms
        K_0(x) = -log(x/2) - gamma and K_1(x) = 1/x (DLMF 10.31.2, 10.31.1) are exact to
        double precision (next terms relative O(x^2 log x)).
        """
        x = np.asarray(x, dtype=np.float64)
        small = x < 1e-150
        with np.errstate(over="ignore", divide="ignore"):
            if deriv:
                # -1/x overflows to -inf for subnormal x, as the true value does
                return np.where(small, -1.0 / np.where(small, x, 1.0), -scipy.special.k1(x))
            lead = -(np.log(np.where(small, x, 1.0)) - math.log(2.0)) - np.euler_gamma
            return np.where(small, lead, scipy.special.k0(x))

    def evaluate_numpy(self, x: np.ndarray, deriv: bool = False) -> np.ndarray:
        """Pure-numpy evaluation (reference path for the compiled kernel; derivatives)."""
        if self.tiny:
            return self._evaluate_tiny(x, deriv)
        R = self.R
        out = np.zeros_like(x)
        if deriv:
            self._prepare_derivatives()
        z1 = x <= self.x_lo
        z3 = (x >= self.x_hi) & (x <= self.x_max)
        z2 = ~(z1 | z3) & (x < self.x_hi)
        if np.any(z1):
            xx = x[z1]
            if self.osc:
                ph, pl = _phase_dd(R, xx)
                c, s = _dd.dd_cos_sin(ph, pl)
                jr = self.j_re.evaluate(xx)
                ji = self.j_im.evaluate(xx)
                if not deriv:
                    out[z1] = c * jr - s * ji
                else:
                    # d/dx Re[e^{i Phi} J] = Re[e^{i Phi} (i Phi' J + J')], Phi' = S / x; formed
                    # as (x times the derivative) / x so that a subnormal x gives +-inf, not
                    # inf - inf = nan
                    S = np.sqrt((R - xx) * (R + xx))
                    tr = xx * self.dj_re.evaluate(xx) - S * ji
                    ti = xx * self.dj_im.evaluate(xx) + S * jr
                    out[z1] = (c * tr - s * ti) / xx
            else:
                v, dv = series_eval(R, self.argg, xx, need_deriv=deriv)
                out[z1] = dv if deriv else v
        if np.any(z2):
            xx = x[z2]
            out[z2] = (self.dzone2 if deriv else self.zone2).evaluate(xx)
        if np.any(z3):
            xx = x[z3]
            psi = psi_decay(R, xx)
            m = self.m_cheb.evaluate(xx)
            e = np.exp(-psi)
            if not deriv:
                out[z3] = m * e
            else:
                dpsi = np.sqrt((xx - R) * (xx + R)) / xx
                out[z3] = (self.dm_cheb.evaluate(xx) - dpsi * m) * e
        return out

    def nbytes(self) -> int:
        tot = 0
        for name in ("j_re", "j_im", "m_cheb", "zone2", "dj_re", "dj_im", "dm_cheb", "dzone2"):
            pc = getattr(self, name, None)
            if isinstance(pc, PiecewiseCheb):
                tot += pc.coef.nbytes + pc.edges.nbytes
        return tot


def evaluate_nodes(tables: list[KTable], x: np.ndarray) -> np.ndarray:
    """Kt(R_j, x) for the R_j of several tables at once: array (len(tables), x.size).

    With the compiled kernel and oscillatory tables (R >~ 10) the large phase is shared by
    nearby R (:func:`._kbessel_fast.eval_nodes_kernel`); otherwise each table is evaluated
    on its own.
    """
    x = np.ascontiguousarray(x, dtype=np.float64).reshape(-1)
    m = len(tables)
    out = np.empty((m, x.size))
    if _fast is None or m == 0 or not all(t.osc and not t.tiny and t.zone2 is not None for t in tables):
        for j, t in enumerate(tables):
            out[j] = t.evaluate(x)
        return out
    Rs = np.array([t.R for t in tables])
    ref = int(np.argmin(np.abs(Rs - 0.5 * (Rs.min() + Rs.max()))))

    def pack(get):
        pcs = [get(t) for t in tables]
        n = {pc.coef.shape[0] for pc in pcs}
        if len(n) != 1:  # pragma: no cover - all tables are built with the same degree
            raise RuntimeError("tables of different degree")
        P = max(pc.coef.shape[1] for pc in pcs)
        edges = np.full((m, P + 1), np.inf)
        coef = np.zeros((m, n.pop(), P))
        cnt = np.empty(m, dtype=np.int64)
        for j, pc in enumerate(pcs):
            k = pc.coef.shape[1]
            edges[j, : k + 1] = pc.edges
            coef[j, :, :k] = pc.coef
            cnt[j] = k
        return cnt, edges, coef

    nj, je, jr = pack(lambda t: t.j_re)
    _, _, ji = pack(lambda t: t.j_im)
    nz, ze, zc = pack(lambda t: t.zone2)
    nm, me, mc = pack(lambda t: t.m_cheb)
    x_lo = np.array([t.x_lo for t in tables])
    x_hi = np.array([t.x_hi for t in tables])
    x_max = np.array([t.x_max for t in tables])
    _fast.eval_nodes_kernel(Rs, ref, x_lo, x_hi, x_max, nj, je, jr, ji, nz, ze, zc, nm, me, mc,
                            _dd._C_TAB, _dd._LNC_HI, _dd._LNC_LO, x, out)
    return out
