"""Kt(R, x) on a fixed point set for many R: Chebyshev interpolation in R.

A window scan evaluates the Hejhal matrix at hundreds of R values, always on the same
points x (the sample points and their pullbacks do not depend on R). As a function of R,
Kt(R, x) = e^{pi R/2} K_{iR}(x) is entire and, for fixed x, oscillates with local
frequency d/dR [R arccosh(R/x) - sqrt(R^2 - x^2)] = arccosh(R/x) on the oscillatory side
(Liouville--Green form, DLMF 10.45.7 / docs/theory.md §3.2) and is monotone beyond the
turning point. A Chebyshev interpolant in R on [Ra, Rb] with a few more nodes than
omega (Rb - Ra)/2, omega = arccosh(Rb / x_min), therefore converges geometrically
(Trefethen, *Approximation Theory and Approximation Practice*, SIAM 2013, Ch. 8). Each
interpolant checks itself against a direct evaluation at an off-node R and adds nodes until
the check passes, so the scan never runs on silently inaccurate values.
"""

from __future__ import annotations

import math

import numpy as np

from maasscomp.errors import ConvergenceError
from maasscomp.special import ktilde


def _cheb_nodes(a: float, b: float, m: int) -> np.ndarray:
    k = np.arange(m)
    return 0.5 * (a + b) + 0.5 * (b - a) * np.cos(np.pi * (k + 0.5) / m)


class KInterpolator:
    """Chebyshev interpolant of R -> Kt(R, X) on [Ra, Rb] for a fixed point set X.

    Parameters
    ----------
    X : ndarray
        Points x > 0 (any shape; flattened internally).
    Ra, Rb : float
        The R interval, 0 < Ra < Rb.
    tol : float
        Required absolute accuracy (relative to max(1, max |Kt|)) at the check point.
    max_nodes : int
        Give up (ConvergenceError) beyond this many nodes.
    """

    def __init__(self, X: np.ndarray, Ra: float, Rb: float, *, tol: float = 1e-12, max_nodes: int = 400) -> None:
        self.shape = np.shape(X)
        self.X = np.asarray(X, dtype=float).reshape(-1)
        self.Ra, self.Rb = float(Ra), float(Rb)
        xmin = float(self.X.min())
        omega = math.acosh(max(self.Rb / xmin, 1.0))
        m = int(math.ceil(1.2 * omega * 0.5 * (self.Rb - self.Ra))) + 14
        # an off-node check point (between the two central Chebyshev nodes)
        R_check = 0.5 * (self.Ra + self.Rb) + 0.123456789 * (self.Rb - self.Ra) / max(m, 4)
        exact = ktilde(R_check, self.X)
        scale = max(1.0, float(np.max(np.abs(exact))))
        while True:
            self._build(m)
            err = float(np.max(np.abs(self(R_check).reshape(-1) - exact)))
            if err <= tol * scale:
                self.error = err
                self.nodes = m
                return
            if m >= max_nodes:
                raise ConvergenceError(
                    f"Chebyshev interpolation of Kt in R on [{Ra}, {Rb}] reached only {err:.1e} "
                    f"with {m} nodes; use a shorter R chunk",
                    best=err,
                )
            m = min(max_nodes, int(1.5 * m) + 4)

    def _build(self, m: int) -> None:
        nodes = _cheb_nodes(self.Ra, self.Rb, m)
        vals = np.stack([ktilde(float(R), self.X) for R in nodes])  # (m, n)
        # Chebyshev coefficients by the discrete cosine transform on first-kind nodes
        k = np.arange(m)
        T = np.cos(np.pi * np.outer(k, k + 0.5) / m)  # T[j, i] = T_j(node_i)
        coef = (2.0 / m) * (T @ vals)
        coef[0] *= 0.5
        self._coef = coef

    def _t(self, R: float) -> float:
        return (2.0 * R - self.Ra - self.Rb) / (self.Rb - self.Ra)

    def __call__(self, R: float) -> np.ndarray:
        """Kt(R, X) for Ra <= R <= Rb, in the shape of X."""
        T, _ = _cheb_basis(self._t(R), self._coef.shape[0], derivative=False)
        # one matrix-vector product over the coefficient table (memory bound, one pass)
        return (T @ self._coef).reshape(self.shape)

    def value_and_derivative(self, R: float) -> tuple[np.ndarray, np.ndarray]:
        """Kt(R, X) and dKt/dR (R, X) for Ra <= R <= Rb, each in the shape of X.

        The derivative of sum_j c_j T_j(t) is sum_j j c_j U_{j-1}(t) (DLMF 18.9.21); both
        sums come from one product of a 2 x m basis table with the coefficient table.
        """
        T, dT = _cheb_basis(self._t(R), self._coef.shape[0], derivative=True)
        both = np.stack([T, dT * (2.0 / (self.Rb - self.Ra))]) @ self._coef
        return both[0].reshape(self.shape), both[1].reshape(self.shape)


def _cheb_basis(t: float, m: int, *, derivative: bool) -> tuple[np.ndarray, np.ndarray | None]:
    """T_0..T_{m-1}(t) and, if asked, their t-derivatives j U_{j-1}(t) (DLMF 18.9.1, 18.9.21)."""
    T = np.empty(m)
    T[0] = 1.0
    if m > 1:
        T[1] = t
    for j in range(2, m):
        T[j] = 2.0 * t * T[j - 1] - T[j - 2]
    if not derivative:
        return T, None
    U = np.empty(m)
    U[0] = 1.0
    if m > 1:
        U[1] = 2.0 * t
    for j in range(2, m):
        U[j] = 2.0 * t * U[j - 1] - U[j - 2]
    dT = np.zeros(m)
    dT[1:] = np.arange(1, m) * U[: m - 1]
    return T, dT


#: Beyond this many bytes of Chebyshev coefficients a :class:`KSource` evaluates Kt
#: directly instead of interpolating in R.
INTERP_MAX_BYTES = 600 * 2**20


def interpolation_nodes(X_min: float, Ra: float, Rb: float) -> int:
    """Starting number of Chebyshev nodes of :class:`KInterpolator` on [Ra, Rb] (it may add more)."""
    omega = math.acosh(max(Rb / X_min, 1.0))
    return int(math.ceil(1.2 * omega * 0.5 * (Rb - Ra))) + 14


class KSource:
    """Kt(R, x) and dKt/dR (R, x) at a fixed point set, for any R in [Ra, Rb].

    The search evaluates the Hejhal matrices of a level at many R on the same points; this
    object decides once how: by a Chebyshev interpolant in R (:class:`KInterpolator`) when its
    coefficients fit in ``max_bytes``, otherwise by direct evaluation
    (:func:`maasscomp.special.ktilde`) with the R-derivative from a central difference.
    Outside [Ra, Rb] it always evaluates directly. The derivative is only used to linearise
    the matrices and to take Newton steps; the eigenvalues found depend on the values alone.

    This is the plug-in point for other ways of producing Kt at large R: any object with
    ``values(R)`` and ``values_and_derivative(R)`` returning arrays over the points will do.

    Parameters
    ----------
    X : ndarray
        Points x > 0 (flattened).
    Ra, Rb : float
        The R range of the interpolant.
    max_bytes : float
        Memory allowed for the interpolant's coefficients.
    """

    def __init__(self, X: np.ndarray, Ra: float, Rb: float, *, max_bytes: float = INTERP_MAX_BYTES) -> None:
        self.X = np.asarray(X, dtype=float).reshape(-1)
        self.Ra, self.Rb = float(Ra), float(Rb)
        self.interp: KInterpolator | None = None
        nodes = interpolation_nodes(float(self.X.min()), self.Ra, self.Rb)
        if self.Rb > self.Ra and 8.0 * nodes * self.X.size <= max_bytes:
            self.interp = KInterpolator(self.X, self.Ra, self.Rb)

    def _inside(self, R: float) -> bool:
        return self.interp is not None and self.Ra <= R <= self.Rb

    def values(self, R: float) -> np.ndarray:
        """Kt(R, X)."""
        if self._inside(R):
            return self.interp(R)  # type: ignore[misc]
        return ktilde(float(R), self.X)

    def values_and_derivative(self, R: float) -> tuple[np.ndarray, np.ndarray]:
        """(Kt(R, X), dKt/dR (R, X))."""
        if self._inside(R):
            return self.interp.value_and_derivative(R)  # type: ignore[union-attr]
        # central difference: error h^2 omega^3/6 + u/h relative, h ~ 1e-5 max(1, R)^(1/3)
        h = 1e-5 * max(1.0, abs(R)) ** (1.0 / 3.0)
        lo, hi = ktilde(float(R) - h, self.X), ktilde(float(R) + h, self.X)
        return ktilde(float(R), self.X), (hi - lo) / (2.0 * h)
