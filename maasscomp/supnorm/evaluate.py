"""Evaluation of a stored Maass form anywhere in the upper half plane.

Everything here works with the **scaled form** F = e^{pi R/2} f (docs/theory.md, conventions):

    F(sigma_j z) = sum_{n>=1} A_n(y) [alpha_j(n) cos(2 pi n x) + beta_j(n) sin(2 pi n x)],
    A_n(y) = sqrt(y) Kt_R(2 pi n y),   Kt_R = e^{pi R/2} K_{iR},

with (alpha, beta) = (Re c, Im c) for even and (Im c, Re c) for odd forms (the project's
coefficient convention, ``maasscomp.spectrum.form.Form``). The physical form is e^{-pi R/2} F;
that factor underflows for R above ~450 and cancels from every ratio (L2-normalised values,
peaks, cusp/compact ratios), so it is never formed.

A point z is first pulled back (``Gamma0.pullback``) to the cusp j and the point w = sigma_j^{-1}
gamma z of largest height; the expansion of cusp j at w converges fastest because A_n(Im w)
decays like exp(-2 pi n Im w) once 2 pi n Im w exceeds R (DLMF 10.40.2; Hejhal 1999, §2). The
number of terms is chosen per block of points so that the neglected tail is below ``tol``,
using the coefficient envelope of :mod:`maasscomp.supnorm._coeffs`. Coefficients beyond the
stored range are filled in by the Hecke relations where possible; what stays unknown is bounded
and reported.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from maasscomp import special
from maasscomp.errors import AccuracyWarning, InputError
from maasscomp.groups import gamma0
from maasscomp.supnorm._coeffs import CoefficientTable, build_table

TWO_PI = 2.0 * math.pi

#: Default absolute accuracy of F (coefficient normalisation c_0(1) = 1).
DEFAULT_TOL = 1e-12

_CHUNK = 2048


def ktilde(R: float, x: ArrayLike) -> np.ndarray:
    """Kt_R(x) = e^{pi R/2} K_{iR}(x) from :mod:`maasscomp.special` (looked up at call time)."""
    return np.asarray(special.ktilde(R, x), dtype=float)


def ktilde_and_derivative(R: float, t: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """Kt_R(t) and d/dt Kt_R(t) (``special.ktilde`` and ``special.ktilde_dx``)."""
    t = np.asarray(t, dtype=float)
    return ktilde(R, t), np.asarray(special.ktilde_dx(R, t), dtype=float)


@dataclass(frozen=True)
class Evaluation:
    """Values of the scaled form F = e^{pi R/2} f at a set of points.

    Attributes
    ----------
    values : ndarray
        F(z) (shape of the input points).
    error_bound : ndarray
        Bound on |computed - exact| from the truncated tail, from coefficients that are
        neither stored nor obtainable by the Hecke relations (coefficient envelope bound), and
        from the conditioning of the pullback: rounding moves the computed w = sigma^{-1} gamma z
        by up to 16 u max(1, |z|^2) / Im z |w| (u = 2^-53; the relative error of the pullback
        grows like |z|^2 / Im z, see ``Gamma0.pullback``), which changes F by at most that
        times the termwise gradient bound sum_n |c_n| (2 pi n |A_n| + |A_n'|) at Im w.
    cusp : ndarray of int
        Cusp whose expansion was used (the one where the pulled-back point is highest).
    x, y : ndarray
        The pulled-back point w = sigma_j^{-1} gamma z in that cusp's coordinate.
    n_terms : int
        Largest number of terms used for any point.
    extended : bool
        True when coefficients beyond the stored range were filled in by the Hecke relations.
    complete : bool
        False when some needed coefficients were unknown (their contribution is in
        ``error_bound``).
    notes : tuple of str
        Human-readable remarks (extension used, accuracy not reached).
    """

    values: np.ndarray
    error_bound: np.ndarray
    cusp: np.ndarray
    x: np.ndarray
    y: np.ndarray
    n_terms: int
    extended: bool
    complete: bool
    notes: tuple[str, ...] = ()


class FormEvaluator:
    """Evaluates one form (scaled by e^{pi R/2}); caches the coefficient table.

    Parameters
    ----------
    form : Form
        Any stored form (``maasscomp.spectrum.form.Form``) of any level.
    tol : float
        Target absolute accuracy of F (default 1e-12).
    group : Gamma0, optional
        The group (default ``gamma0(form.level)``).
    """

    def __init__(self, form, *, tol: float = DEFAULT_TOL, group=None) -> None:
        if not (isinstance(tol, (int, float)) and 0 < tol < 1):
            raise InputError(f"evaluation tolerance tol={tol!r} is not allowed; it must lie in (0, 1)")
        R = float(form.R)
        if not (math.isfinite(R) and R > 0):
            raise InputError(f"form R={form.R!r} is not allowed; R must be positive and finite")
        C = np.asarray(form.coeffs)
        if C.size and not np.all(np.isfinite(C)):
            bad = np.argwhere(~np.isfinite(C.reshape(C.shape[0] if C.ndim == 2 else 1, -1)))[0]
            raise InputError(
                f"form at level {form.level}, R={R:.10g}: coefficient c_{int(bad[0])}({int(bad[1]) + 1}) is "
                f"{C.reshape(-1, C.shape[-1])[bad[0], bad[1]]!r}; every stored coefficient must be a finite "
                "number (re-solve or re-extend the form)")
        self.form = form
        self.R = R
        self.lam = 0.25 + R * R
        self.tol = float(tol)
        self.group = gamma0(form.level) if group is None else group
        self._table = build_table(form, self.group)
        self._nterm_cache: dict[tuple[float, float], int] = {}

    # ------------------------------------------------------------------ coefficients

    @property
    def table(self) -> CoefficientTable:
        return self._table

    def ensure_terms(self, n: int) -> CoefficientTable:
        """Make the table at least n columns wide (Hecke extension where possible)."""
        if n > self._table.M:
            self._table = build_table(self.form, self.group, max(n, int(1.25 * self._table.M)))
        return self._table

    @property
    def extended(self) -> bool:
        return self._table.extended

    # ------------------------------------------------------------------ term sizes

    def amplitudes(self, y: ArrayLike, n_terms: int) -> np.ndarray:
        """A_n(y) = sqrt(y) Kt_R(2 pi n y), shape (len(y), n_terms)."""
        y = np.atleast_1d(np.asarray(y, dtype=float))
        n = np.arange(1, n_terms + 1, dtype=float)
        return np.sqrt(y)[:, None] * ktilde(self.R, TWO_PI * y[:, None] * n[None, :])

    def terms_needed(self, y_min: float, tol: float | None = None) -> int:
        """Smallest M with sum_{n>M} envelope(n) A_n(y) <= tol for every y >= y_min.

        Beyond the turning point 2 pi n y > R each A_n(y) decreases in y (DLMF 10.40.2), so the
        tail at a height below y_min bounds the tail at and above y_min; heights are rounded
        down to a grid of 64 points per e-fold so that results can be cached. M is never below
        the turning point index.
        """
        tol = self.tol if tol is None else float(tol)
        if not (y_min > 0 and math.isfinite(y_min)):
            raise InputError(f"height y={y_min!r} is not allowed; it must be positive and finite")
        q = math.floor(math.log(y_min) * 64.0)
        key = (q, tol)
        if key in self._nterm_cache:
            return self._nterm_cache[key]
        y_min = math.exp(q / 64.0)
        R = self.R
        n0 = max(1, int(math.ceil((R + 2.0 * max(R, 1.0) ** (1 / 3)) / (TWO_PI * y_min))))
        n_hi = n0 + 8
        while True:
            env = self._table.envelope(n_hi)
            t = env * np.abs(self.amplitudes([y_min], n_hi)[0])
            if t[-1] < 1e-3 * tol:
                break
            n_hi = int(1.5 * n_hi) + 8
            if n_hi > 10_000_000:
                raise InputError(f"height y={y_min!r} is too small to evaluate the form at R={R}")
        tail = np.cumsum(t[::-1])[::-1]  # tail[k] = sum_{n>=k+1} t_n
        ok = np.nonzero(tail <= tol)[0]
        M = int(ok[0]) if ok.size else n_hi
        M = max(M, min(n0, n_hi))
        self._nterm_cache[key] = M
        return M

    def _envelope(self, n_max: int) -> np.ndarray:
        return self._table.envelope(n_max)

    # ------------------------------------------------------------------ direct expansions

    def expansion(self, cusp: int, x: ArrayLike, y: ArrayLike, n_terms: int | None = None
                  ) -> tuple[np.ndarray, np.ndarray]:
        """F(sigma_cusp (x + i y)) from the expansion of that cusp, without pullback.

        Returns (values, error_bound); ``n_terms`` defaults to what the smallest height needs.
        Use :meth:`__call__` for arbitrary points: this method converges slowly for low y.
        """
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        xb, yb = np.broadcast_arrays(x, y)
        shape = xb.shape
        xf, yf = xb.ravel(), yb.ravel()
        if not (0 <= cusp < self._table.n_cusps):
            raise InputError(f"cusp index {cusp!r} is not allowed; use 0..{self._table.n_cusps - 1}")
        if xf.size == 0:
            return np.zeros(shape), np.zeros(shape)
        if not np.all(yf > 0):
            raise InputError("heights y must be positive")
        vals = np.empty(xf.size)
        errs = np.empty(xf.size)
        order = np.argsort(yf)
        for start in range(0, xf.size, _CHUNK):
            idx = order[start:start + _CHUNK]
            nt = n_terms if n_terms is not None else self.terms_needed(float(yf[idx].min()))
            v, e = self._sum(cusp, xf[idx], yf[idx], nt, tail=n_terms is None)
            vals[idx] = v
            errs[idx] = e
        return vals.reshape(shape), errs.reshape(shape)

    def _sum(self, cusp: int, x: np.ndarray, y: np.ndarray, nt: int, tail: bool = True):
        tab = self.ensure_terms(nt)
        A = self.amplitudes(y, nt)
        alpha, beta = tab.cos_sin(cusp, nt)
        th = TWO_PI * np.outer(x, np.arange(1, nt + 1))
        vals = (A * (np.cos(th) * alpha + np.sin(th) * beta)).sum(axis=1)
        miss = tab.missing_mask(cusp, nt)
        err = np.full(x.size, self.tol if tail else 0.0)
        if miss.any():
            env = tab.envelope(nt)
            err = err + (np.abs(A[:, miss]) * env[miss]).sum(axis=1)
        return vals, err

    # ------------------------------------------------------------------ anywhere in H

    def gradient_bound(self, cusp: int, y: ArrayLike, n_terms: int) -> np.ndarray:
        """sum_n |c_n| (2 pi n |A_n(y)| + |A_n'(y)|) >= |F_x| + |F_y| on the horocycle Im w = y."""
        y = np.atleast_1d(np.asarray(y, dtype=float))
        tab = self.ensure_terms(n_terms)
        n = np.arange(1, n_terms + 1, dtype=float)
        alpha, beta = tab.cos_sin(cusp, n_terms)
        c = np.hypot(alpha, beta)
        miss = tab.missing_mask(cusp, n_terms)
        if miss.any():
            c = np.where(miss, tab.envelope(n_terms), c)
        t = TWO_PI * y[:, None] * n[None, :]
        K, Kp = ktilde_and_derivative(self.R, t)
        sy = np.sqrt(y)[:, None]
        A = sy * K
        Ap = K / (2.0 * sy) + sy * TWO_PI * n[None, :] * Kp
        return (TWO_PI * n[None, :] * np.abs(A) + np.abs(Ap)) @ c

    def __call__(self, x: ArrayLike, y: ArrayLike, *, conditioning: bool = True) -> Evaluation:
        """F(z) at z = x + i y (broadcast), via pullback to the highest cusp expansion.

        With ``conditioning=False`` the error bound leaves out the pullback's conditioning
        term (for callers that use the values only).
        """
        pb = self.group.pullback(x, y)
        shape = np.shape(pb.x)
        cus = np.asarray(pb.cusp).ravel()
        wx = np.asarray(pb.x, dtype=float).ravel()
        wy = np.asarray(pb.y, dtype=float).ravel()
        vals = np.empty(wx.size)
        errs = np.empty(wx.size)
        cond = np.zeros(wx.size)
        n_used = 0
        for j in np.unique(cus):
            sel = np.nonzero(cus == j)[0]
            v, e = self.expansion(int(j), wx[sel], wy[sel])
            vals[sel] = v
            errs[sel] = e
            nt = self.terms_needed(float(wy[sel].min()))
            n_used = max(n_used, nt)
            if conditioning:
                xi, yi = np.broadcast_arrays(np.asarray(x, dtype=float), np.asarray(y, dtype=float))
                xi, yi = xi.ravel()[sel], yi.ravel()[sel]
                kappa = np.maximum(1.0, xi * xi + yi * yi) / yi
                dw = 16.0 * 2.0**-53 * kappa * np.maximum(1.0, np.hypot(wx[sel], wy[sel]))
                for start in range(0, sel.size, _CHUNK):
                    part = slice(start, start + _CHUNK)
                    cond[sel[part]] = dw[part] * self.gradient_bound(int(j), wy[sel[part]], nt)
        used = sorted(int(j) for j in np.unique(cus))
        return self._result(vals.reshape(shape), errs.reshape(shape), cus.reshape(shape),
                            wx.reshape(shape), wy.reshape(shape), n_used, used, cond.reshape(shape))

    def _result(self, vals, errs, cus, wx, wy, n_used, used_cusps, cond=None) -> Evaluation:
        tab = self._table
        notes = []
        complete = not any(tab.missing_mask(j, n_used).any() for j in used_cusps) if n_used else True
        if tab.extended and n_used > tab.n_stored:
            notes.append(
                f"coefficients n = {tab.n_stored + 1}..{n_used} were filled in from the stored "
                f"{tab.n_stored} by Hecke multiplicativity"
            )
        worst = float(np.max(errs)) if errs.size else 0.0
        if worst > 1.000001 * self.tol:
            notes.append(
                f"accuracy {self.tol:.1e} not reached: error bound up to {worst:.2e} "
                f"(unknown coefficients beyond the stored {tab.n_stored})"
            )
            warnings.warn(
                f"form at level {self.form.level}, R={self.R:.10g}: evaluation error bound {worst:.2e} "
                f"exceeds tol={self.tol:.1e}; store more coefficients", AccuracyWarning, stacklevel=3,
            )
        if cond is not None and cond.size and float(np.max(cond)) > self.tol:
            notes.append(f"the pullback's conditioning limits the accuracy to {float(np.max(cond)):.1e} "
                         "(rounding of the input point, amplified near the real axis)")
            errs = errs + cond
        return Evaluation(values=vals, error_bound=errs, cusp=cus, x=wx, y=wy, n_terms=int(n_used),
                          extended=bool(tab.extended and n_used > tab.n_stored), complete=complete,
                          notes=tuple(notes))

    # ------------------------------------------------------------------ horocycles

    def horocycle(self, cusp: int, y: float, L: int, n_terms: int | None = None,
                  amplitudes: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
        """F on the horocycle Im w = y of a cusp at x_k = -1/2 + k/L, k = 0..L-1, by one FFT.

        F(x + i y) = Re sum_n d_n A_n(y) e^{2 pi i n x} with d_n = conj(c_n) (even) or -i c_n
        (odd), so the L samples are the real part of an inverse DFT of the padded vector; the
        shift to x_0 = -1/2 multiplies d_n by (-1)^n. Needs L > n_terms (no aliasing).
        ``amplitudes`` may pass precomputed A_n(y), n = 1..n_terms. Returns (x_k, values).
        """
        nt = self.terms_needed(y) if n_terms is None else int(n_terms)
        if L <= nt:
            raise InputError(f"horocycle length L={L} must exceed the number of terms {nt}")
        tab = self.ensure_terms(nt)
        A = self.amplitudes([y], nt)[0] if amplitudes is None else np.asarray(amplitudes)[:nt]
        d = tab.exp_coeffs(cusp, nt) * A
        d = d * np.where(np.arange(1, nt + 1) % 2 == 1, -1.0, 1.0)
        buf = np.zeros(L, dtype=complex)
        buf[1:nt + 1] = d
        vals = np.fft.ifft(buf).real * L
        return -0.5 + np.arange(L) / L, vals

    def derivatives(self, cusp: int, x: ArrayLike, y: ArrayLike, n_terms: int | None = None
                    ) -> tuple[np.ndarray, ...]:
        """F, F_x, F_y, F_xx, F_xy, F_yy at points of one cusp's coordinate (no pullback).

        A_n'' comes from the eigen-equation: -y^2 (u_xx + u_yy) = lambda u for each term gives
        A_n'' = ((2 pi n)^2 - lambda / y^2) A_n (docs/theory.md, conventions).
        """
        x = np.atleast_1d(np.asarray(x, dtype=float))
        y = np.atleast_1d(np.asarray(y, dtype=float))
        nt = n_terms if n_terms is not None else self.terms_needed(float(y.min()))
        tab = self.ensure_terms(nt)
        n = np.arange(1, nt + 1, dtype=float)
        t = TWO_PI * y[:, None] * n[None, :]
        K, Kp = ktilde_and_derivative(self.R, t)
        sy = np.sqrt(y)[:, None]
        A = sy * K
        Ap = K / (2.0 * sy) + sy * TWO_PI * n[None, :] * Kp
        App = ((TWO_PI * n[None, :]) ** 2 - self.lam / (y[:, None] ** 2)) * A
        alpha, beta = tab.cos_sin(cusp, nt)
        th = TWO_PI * x[:, None] * n[None, :]
        c, s = np.cos(th), np.sin(th)
        P = c * alpha + s * beta
        Px = TWO_PI * n * (-s * alpha + c * beta)
        Pxx = -(TWO_PI * n) ** 2 * P
        F = (A * P).sum(1)
        Fx = (A * Px).sum(1)
        Fy = (Ap * P).sum(1)
        Fxx = (A * Pxx).sum(1)
        Fxy = (Ap * Px).sum(1)
        Fyy = (App * P).sum(1)
        return F, Fx, Fy, Fxx, Fxy, Fyy


def evaluate(form, x: ArrayLike, y: ArrayLike, *, tol: float = DEFAULT_TOL) -> Evaluation:
    """Scaled form F = e^{pi R/2} f at the points x + i y (any level, anywhere in H).

    Parameters
    ----------
    form : Form
        A stored form.
    x, y : array_like
        Real and imaginary parts (broadcast together), y > 0.
    tol : float
        Target absolute accuracy of F in the normalisation c_0(1) = 1.

    Returns
    -------
    Evaluation
        Values, error bounds, the cusp and pulled-back point used, and flags saying whether the
        Hecke relations extended the coefficients and whether every needed coefficient was
        known. An :class:`~maasscomp.errors.AccuracyWarning` is issued when the error bound
        exceeds ``tol``.
    """
    return FormEvaluator(form, tol=tol)(x, y)


def _memo(form) -> dict:
    """The per-form memo of a :class:`~maasscomp.spectrum.form.Form` (a plain dict for other
    form-like objects, which then get no caching)."""
    m = getattr(form, "_memo", None)
    return m if isinstance(m, dict) else {}


def normalising_scale(form, evaluator: FormEvaluator | None = None) -> float:
    """1/||F|| for F = e^{pi R/2} f, so that F/||F|| = f/||f|| (the L2 norm over Gamma0(N)\\H
    by :func:`maasscomp.supnorm.norm.l2_norm`, computed once per form and kept in its memo)."""
    memo = _memo(form)
    if "scale" not in memo:
        from maasscomp.supnorm.norm import l2_norm

        memo["scale"] = float(l2_norm(form, evaluator=evaluator, rankin_selberg=False).scale)
    return memo["scale"]


def form_values(form, z: ArrayLike, y: ArrayLike | None = None, *, normalized: bool = False,
                tol: float = DEFAULT_TOL) -> np.floating | np.ndarray:
    """The physical form f(z) (or f/||f|| with ``normalized``) at points of H.

    What ``Form.__call__`` returns: ``z`` complex (scalar or array), or ``z`` = x and ``y``
    given. The scaled sum F = e^{pi R/2} f of :class:`FormEvaluator` is multiplied by
    e^{-pi R/2} (``normalized=False``; underflows to 0 for R above about 470) or by 1/||F||
    from :func:`maasscomp.supnorm.norm.l2_norm` (``normalized=True``; ||f|| = e^{-pi R/2}||F||,
    so f/||f|| = F/||F||). The evaluator and the norm are computed once per form.

    Returns a numpy scalar for scalar input, else an array of the broadcast shape.
    """
    if y is None:
        zz = np.asarray(z)
        if not np.iscomplexobj(zz):
            raise InputError("a form is evaluated at complex z = x + iy (e.g. f(0.1 + 1.2j)) or at "
                             "two real arrays x, y (f(x, y)); got one real argument")
        x, yy = zz.real, zz.imag
    else:
        x, yy = np.asarray(z, dtype=float), np.asarray(y, dtype=float)
        if np.iscomplexobj(np.asarray(z)):
            raise InputError("with two arguments f(x, y) both must be real")
    x, yy = np.broadcast_arrays(x, yy)
    if yy.size and not np.all(yy > 0):
        bad = float(yy.ravel()[np.argmin(yy.ravel())])
        raise InputError(f"points must lie in the upper half plane; found Im z = {bad:g}")
    memo = _memo(form)
    key = ("evaluator", float(tol))
    ev = memo.get(key)
    if ev is None:
        ev = FormEvaluator(form, tol=tol)
        memo[key] = ev
    F = ev(x, yy).values
    scale = normalising_scale(form, ev) if normalized else math.exp(-math.pi * float(form.R) / 2.0)
    out = np.asarray(F, dtype=float) * scale
    return out[()] if out.ndim == 0 else out
