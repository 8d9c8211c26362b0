"""Public entry points for the scaled K-Bessel function of imaginary order.

    Kt(R, x) = exp(pi R / 2) K_{iR}(x),   R > 0, x > 0,

which is O(1) in size for all R (K_{iR} itself underflows doubles for R > ~450).
Implementation: per-R tables (:mod:`._kbessel_table`) built once and cached, evaluated
with vectorised numpy; see that module for the zones and methods and the references
cited there (DLMF 10.25.2, 10.27.4, 10.32.9; Gil, Segura and Temme 2002/2004).
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np
import scipy.optimize
from numpy.typing import ArrayLike

from maasscomp.errors import InputError
from maasscomp.special._kbessel_table import KTable, evaluate_nodes

R_MAX = 100000.0  # largest R verified against arb (data/reference/kbessel_arb_table_large.csv)
_CACHE_SIZE = 32


def _fmt(v) -> str:
    """repr of a bad value, without numpy scalar decorations."""
    try:
        return repr(float(v))
    except (TypeError, ValueError):
        return repr(v)


def _is_bool(v) -> bool:
    return isinstance(v, (bool, np.bool_))


def _check_R(R) -> float:
    if _is_bool(R):
        raise InputError(f"R = {R!r} is a boolean, not a number; R must be a finite float in (0, {R_MAX:g}]")
    try:
        Rf = float(R)
    except (TypeError, ValueError):
        raise InputError(f"R = {R!r} is not a real number; R must be a finite float in (0, {R_MAX:g}]") from None
    if not math.isfinite(Rf) or Rf <= 0.0 or Rf > R_MAX:
        raise InputError(f"R = {_fmt(R)} is out of range; R must be a finite float in (0, {R_MAX:g}]")
    return Rf


def _reject_bools(v, name: str, allowed: str) -> None:
    """Booleans are not numbers here (numpy would silently read True as 1.0)."""
    bad = _is_bool(v) or (isinstance(v, np.ndarray) and v.dtype == np.bool_)
    if not bad and isinstance(v, (list, tuple)):
        obj = np.asarray(v, dtype=object).reshape(-1)
        bad = any(_is_bool(e) for e in obj) or (obj.size > 0 and isinstance(obj[0], np.ndarray)
                                                and any(np.asarray(e).dtype == np.bool_ for e in obj))
    if bad:
        raise InputError(f"{name} = {v!r} contains booleans, which are not numbers; {allowed}")


def _check_x(x) -> np.ndarray:
    _reject_bools(x, "x", "x must be finite and > 0")
    try:
        xa = np.asarray(x, dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError(f"x = {x!r} is not an array of real numbers; x must be finite and > 0") from None
    bad = ~(np.isfinite(xa) & (xa > 0.0))
    if np.any(bad):
        first = xa[bad].flat[0]
        raise InputError(
            f"x = {_fmt(first)} is out of range ({int(bad.sum())} bad value(s)); x must be finite and > 0"
        )
    return xa


@lru_cache(maxsize=_CACHE_SIZE)
def _table(R: float) -> KTable:
    return KTable(R)


def kbessel_table(R: float) -> KTable:
    """The cached per-R table (built on first use; at most 32 tables are kept)."""
    return _table(_check_R(R))


def ktilde(R: float, x: ArrayLike) -> np.ndarray:
    """Scaled K-Bessel function of imaginary order, ``exp(pi R/2) K_{iR}(x)``.

    Parameters
    ----------
    R : float
        Order parameter, ``0 < R <= R_MAX`` (10^5).
    x : array_like
        Arguments, all finite and ``> 0``.

    Returns
    -------
    numpy.ndarray
        float64 array of the same shape as ``x``.  Values below 1e-300 (far beyond the
        turning point ``x = R``) are returned as 0.0.

    Raises
    ------
    maasscomp.errors.InputError
        If ``R`` or any ``x`` is out of range or not a number.

    Notes
    -----
    The first call for a given ``R`` builds a table (milliseconds to tens of
    milliseconds); later calls with the same ``R`` reuse it.  Methods and references:
    power series (DLMF 10.25.2, 10.27.4) for small ``R`` and ``x``; steepest-descent
    trapezoidal quadrature of DLMF 10.32.9 (as in A. Gil, J. Segura, N. M. Temme,
    J. Comput. Phys. 175 (2002) 398-411) on both sides of the turning point, with the large
    oscillatory phase ``sqrt(R^2 - x^2) - R arccosh(R/x)`` evaluated in double-double
    arithmetic; Taylor marching of Bessel's equation (DLMF 10.25.1) across the turning
    point.  Accuracy measured against arb (data/reference/kbessel_arb_table.csv,
    R = 0.1 .. 10^4): absolute error below 4e-14 * max(1, |Kt|) for ``x < R``, relative
    error below 1.4e-13 for ``x >= R`` (the largest errors come from ``exp(-Psi)`` with
    ``Psi`` up to 700 in the far tail).
    """
    Rf = _check_R(R)
    xa = _check_x(x)
    flat = xa.reshape(-1)
    return _table(Rf).evaluate(flat).reshape(xa.shape)


def ktilde_dx(R: float, x: ArrayLike) -> np.ndarray:
    """Derivative in x of :func:`ktilde`, ``exp(pi R/2) dK_{iR}(x)/dx``.

    Same parameters and errors as :func:`ktilde`.  Computed from the same tables
    (differentiated Chebyshev interpolants, analytic derivatives of the phase and
    exponent, term-wise differentiated series), so it is about one to two digits less
    accurate than the function itself.  For tiny x the derivative is about
    ``R cos(R log(x/2) - arg Gamma(1 + iR)) / x`` (``-1/x`` as R -> 0); where that exceeds
    the double range (subnormal x) the result is ``+inf`` or ``-inf`` with the sign of the
    true value, never nan.
    """
    Rf = _check_R(R)
    xa = _check_x(x)
    flat = xa.reshape(-1)
    # for subnormal x the derivative (~R/x) legitimately overflows to +-inf
    with np.errstate(over="ignore", invalid="ignore"):
        return _table(Rf).evaluate(flat, deriv=True).reshape(xa.shape)


def ktilde_nodes(Rs: ArrayLike, x: ArrayLike) -> np.ndarray:
    """:func:`ktilde` at several R for the same points: array of shape ``(len(Rs),) + x.shape``.

    Same values as ``[ktilde(R, x) for R in Rs]`` (to rounding), faster when the R are close
    together (e.g. the Chebyshev nodes of a short R interval): on the oscillatory side the
    double-double phase is computed once per x and carried to the other R by its Taylor
    expansion in R (``d Phi / dR = -arccosh(R/x)``, ``d^2 Phi / dR^2 = -1/sqrt(R^2 - x^2)``),
    wherever the neglected fourth-order term is below 1e-19.
    """
    _reject_bools(Rs, "R", f"R must be finite floats in (0, {R_MAX:g}]")
    try:
        Ra = np.asarray(Rs, dtype=np.float64).reshape(-1)
    except (TypeError, ValueError):
        raise InputError(f"R = {Rs!r} is not an array of real numbers; R must be finite floats in (0, {R_MAX:g}]") from None
    tables = [_table(_check_R(R)) for R in Ra]
    xa = _check_x(x)
    return evaluate_nodes(tables, xa.reshape(-1)).reshape((Ra.size,) + xa.shape)


def ktilde_many(R: ArrayLike, x: ArrayLike) -> np.ndarray:
    """:func:`ktilde` broadcast over both ``R`` and ``x`` (loops over the distinct R values)."""
    _reject_bools(R, "R", f"R must be finite floats in (0, {R_MAX:g}]")
    try:
        Ra = np.asarray(R, dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError(f"R = {R!r} is not an array of real numbers; R must be finite floats in (0, {R_MAX:g}]") from None
    for Rk in np.unique(Ra):
        _check_R(Rk)
    xa = _check_x(x)
    Rb, xb = np.broadcast_arrays(Ra, xa)
    out = np.empty(Rb.shape, dtype=np.float64)
    Rflat = Rb.reshape(-1)
    xflat = xb.reshape(-1)
    oflat = out.reshape(-1)
    uniq, inv = np.unique(Rflat, return_inverse=True)
    for k, Rk in enumerate(uniq):
        sel = inv == k
        oflat[sel] = _table(_check_R(Rk)).evaluate(xflat[sel])
    return out


def airy_peak(R: float) -> tuple[float, float]:
    """Location and value of the maximum of ``sqrt(x / (2 pi)) Kt(R, x)`` over ``x > 0``.

    This is the maximum over ``y > 0`` of ``sqrt(y) exp(pi R/2) K_{iR}(2 pi y)``, i.e. the
    cusp peak of the first Fourier term of a Maass form (docs/theory.md §3.3).  For large
    ``R`` it sits in the last oscillation before the turning point,
    ``x* = R + a'_1 (R/2)^{1/3} + ...`` with ``a'_1`` the first zero of Ai' (DLMF 9.9.1),
    and the value is ``c R^{1/6} (1 + O(R^{-2/3}))``, ``c = sqrt(pi) 2^{-1/6} Ai(a'_1)``
    (leading term of the Airy-type uniform expansion, Dunster, SIAM J. Math. Anal. 21 (1990)
    995-1018).

    Parameters
    ----------
    R : float
        ``0 < R <= R_MAX`` (10^5).

    Returns
    -------
    (x_star, value) : tuple of float
        The argmax ``x*`` (so ``y* = x* / (2 pi)``) and the maximum value.

    Notes
    -----
    A grid search over the last oscillations is refined by solving
    ``d/dx [sqrt(x) Kt] = 0`` (i.e. ``Kt / (2x) + Kt' = 0``) with Brent's method
    (scipy.optimize.brentq).
    """
    Rf = _check_R(R)
    tab = _table(Rf)
    r3 = Rf ** (1.0 / 3.0)
    lo = max(1e-3, Rf - 6.0 * r3 - 2.0)
    hi = Rf + 3.0 * r3 + 2.0
    xs = np.linspace(lo, hi, 2001)
    f = np.sqrt(xs / (2 * math.pi)) * tab.evaluate(xs)
    i = int(np.argmax(f))
    i = min(max(i, 1), xs.size - 2)

    def g(t: float) -> float:
        a = np.array([t])
        return float(tab.evaluate(a)[0] / (2 * t) + tab.evaluate(a, deriv=True)[0])

    a, b = float(xs[i - 1]), float(xs[i + 1])
    if g(a) * g(b) < 0:
        xstar = float(scipy.optimize.brentq(g, a, b, xtol=1e-15 * b, rtol=1e-15, maxiter=200))
    else:  # pragma: no cover - the grid maximum is interior by construction
        xstar = float(xs[i])
    val = float(math.sqrt(xstar / (2 * math.pi)) * tab.evaluate(np.array([xstar]))[0])
    return xstar, val
