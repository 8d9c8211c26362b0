"""Search for exceptional eigenvalues lambda = 1/4 - t^2, 0 < t < 1/2, of a squarefree level.

Selberg's eigenvalue conjecture predicts none for congruence groups; it is proved for small
levels (Huxley 1985; for squarefree N < 857 by Booker and Strömbergsson 2007 -- from memory),
so every confirmed root here would be a failure of the solver. The Hejhal system is built
with K_t of real order (scipy.special.kv); det A(t) is scanned for sign changes on a grid of
(0, 1/2), each refined by Brent's method and tested at a second height.
"""

from __future__ import annotations

import math
from typing import Callable

import numpy as np
from scipy.optimize import brentq

from maasscomp.hejhal.params import choose_params
from maasscomp.hejhal.system import HejhalSystem
from maasscomp.hejhal.types import SymmetryClass
from maasscomp.spectrum.search import Candidate, SearchSettings


def _refine(det: Callable[[float], tuple[float, float]], a: float, b: float) -> float:
    """Root of det in the sign-change bracket [a, b] by Brent's method."""
    ref = max(det(a)[1], det(b)[1])

    def g(t: float) -> float:
        s, ld = det(t)
        return s * math.exp(max(ld - ref, -700.0))

    return float(brentq(g, a, b, xtol=1e-15, rtol=1e-12, maxiter=200))


def search_exceptional(group, symmetry: SymmetryClass, settings: SearchSettings | None = None,
                       *, n_grid: int = 400) -> tuple[Candidate, ...]:
    """Every sign change of det A(t) in (0, 1/2) of one class, with its verdict.

    A candidate is accepted (an exceptional eigenvalue, t = its ``R``) only if the
    normalised coefficients a(2..5) at the second height agree with the first to
    ``settings.coeff_tol``.
    """
    settings = settings or SearchSettings()
    Y0 = group.fundamental_domain_height
    sys1 = HejhalSystem(group, symmetry, choose_params(1.0, settings.Y1_frac * Y0, settings.eps))
    sys2 = HejhalSystem(group, symmetry, choose_params(1.0, settings.Y2_frac * Y0, settings.eps))
    grid = np.linspace(0.002, 0.498, n_grid)
    det = lambda t: sys1.log_det(t, exceptional=True)  # noqa: E731
    signs = np.array([det(float(t))[0] for t in grid])
    out = []
    for i in np.nonzero(signs[:-1] * signs[1:] < 0)[0]:
        tc = _refine(det, float(grid[i]), float(grid[i + 1]))
        a1 = sys1.solve(tc, exceptional=True)
        a2 = sys2.solve(tc, exceptional=True)
        d = float(np.max(np.abs(a1[1:6] - a2[1:6])))
        ok = bool(np.isfinite(d) and d < settings.coeff_tol)
        out.append(Candidate(R=tc, symmetry=symmetry, accepted=ok,
                             reason="confirmed" if ok else f"coefficients at Y1 and Y2 differ by {d:.2e}"))
    return tuple(out)
