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

    def __call__(self, R: float) -> np.ndarray:
        """Kt(R, X) for Ra <= R <= Rb, in the shape of X."""
        t = (2.0 * R - self.Ra - self.Rb) / (self.Rb - self.Ra)
        m = self._coef.shape[0]
        # Clenshaw recurrence over the node index
        b1 = np.zeros_like(self._coef[0])
        b2 = np.zeros_like(b1)
        for j in range(m - 1, 0, -1):
            b1, b2 = 2.0 * t * b1 - b2 + self._coef[j], b1
        out = t * b1 - b2 + self._coef[0]
        return out.reshape(self.shape)
