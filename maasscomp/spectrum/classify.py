"""New/old classification of forms of squarefree level.

Theory (Atkin & Lehner, Math. Ann. 185 (1970); the Maass case is common practice): the cusp
forms of Gamma0(N) at a given R are spanned by newforms of level N and by g(dz), d | N/M, for
newforms g of proper divisor levels M. For squarefree N an oldform of the Atkin--Lehner class
(eps_p) is g(z) + sum over d of eps_d sqrt(d)-weighted lifts, whose coefficients satisfy
c(p) = a_g(p) + eps_p sqrt(p) for p | N/M; a newform satisfies c(p) = -eps_p / sqrt(p) for p | N.

:func:`classify` decides by solving the Hejhal system of the divisor levels at the form's R:
R is an eigenvalue at level M when the two-height solutions of the restricted class agree.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from maasscomp.groups import divisors

from maasscomp.hejhal.params import choose_params
from maasscomp.hejhal.system import HejhalSystem
from maasscomp.hejhal.types import SymmetryClass


@dataclass(frozen=True)
class Classification:
    """Outcome of :func:`classify`."""

    is_new: bool
    old_from_level: int | None  # smallest level M < N at which R is an eigenvalue
    old_relation_residual: float | None  # max_p |c(p) - a_g(p) - eps_p sqrt p| over p | N/M
    newform_residual: float  # max_p |c(p) + eps_p / sqrt p| over p | N
    al_residual: float  # the Atkin-Lehner relations that fit the form's type (see classify)
    al_relations: str  # which relations al_residual checks


def eigen_at_level(M: int, parity: str, al_signs: dict[int, int], R: float, *, tol: float = 1e-7,
                   eps: float = 1e-14) -> np.ndarray | None:
    """Coefficients a(1..) of an eigenform at level M, class (parity, al_signs|M), at R — or None.

    R must be known to about 1e-10; the test is that the normalised solutions at two heights
    agree to ``tol`` in a(2..6).
    """
    from maasscomp.groups import gamma0

    g = gamma0(M)
    sym = SymmetryClass(parity, tuple((p, al_signs[p]) for p in sorted(g.primes)))
    # parameters for the next multiple of 1/4 above R: nearby forms share the systems
    R_top = math.ceil(4.0 * R) / 4.0
    sols = [_system(M, sym, f, R_top, eps).solve(R) for f in (1.0, 0.85)]
    k = min(7, sols[0].size, sols[1].size)
    if np.all(np.isfinite(sols[0][:k])) and np.max(np.abs(sols[0][1:k] - sols[1][1:k])) < tol:
        return sols[0]
    return None


@lru_cache(maxsize=256)
def _system(M: int, sym: SymmetryClass, f: float, R_top: float, eps: float) -> HejhalSystem:
    """The system of level M used by :func:`eigen_at_level` for R <= R_top (cached: its sample
    points and pullbacks do not depend on R)."""
    from maasscomp.groups import gamma0

    g = gamma0(M)
    Y0 = g.fundamental_domain_height
    # heights low enough that M0 >= 24, so a(2..6) are far inside the accurate range (~M0/3)
    p = choose_params(R_top + 0.5, 0.9 * Y0, eps)
    Y = 0.9 * Y0 * min(1.0, p.M0 / 24.0)
    return HejhalSystem(g, sym, choose_params(R_top + 0.5, f * Y, eps))


def classify(level: int, symmetry: SymmetryClass, R: float, coeffs: np.ndarray) -> Classification:
    """Classify a confirmed form of squarefree ``level`` as new or old.

    Parameters
    ----------
    level : int
    symmetry : SymmetryClass
        With one Atkin--Lehner sign per prime dividing the level.
    R : float
    coeffs : ndarray
        c(1..) at infinity, c(1) = 1.

    Notes
    -----
    ``al_residual`` checks the Atkin--Lehner relations valid for the form's type: for a
    newform c(p) = -eps_p/sqrt(p) at every p | N; for an oldform from level M (built from
    a newform g, Atkin & Lehner 1970) c(p) = a_g(p) + eps_p sqrt(p) at p | N/M and the
    newform relation of g, c(p) = -eps_p/sqrt(p), at p | M. (The newform relation alone is
    meaningless for oldforms: it fails there by design.)
    """
    signs = dict(symmetry.al_signs)
    primes = sorted(signs)

    def new_rel(ps) -> float:
        return max((abs(coeffs[p - 1] + signs[p] / math.sqrt(p)) for p in ps if p <= coeffs.size), default=0.0)

    new_res = new_rel(primes)
    for M in divisors(level)[:-1]:
        ag = eigen_at_level(M, symmetry.parity, signs, R)
        if ag is None:
            continue
        rel = max(
            (abs(coeffs[p - 1] - ag[p - 1] - signs[p] * math.sqrt(p)) for p in primes if M % p and p <= min(ag.size, coeffs.size)),
            default=0.0,
        )
        # an oldform from level M keeps the newform relation of g at the primes dividing M
        al = max(rel, new_rel([p for p in primes if M % p == 0]))
        return Classification(False, M, float(rel), float(new_res), float(al),
                              f"oldform from level {M}: c(p) = a_g(p) + eps_p sqrt(p) for p | {level // M}, "
                              f"c(p) = -eps_p/sqrt(p) for p | {M}" if M > 1 else
                              f"oldform from level 1: c(p) = a_g(p) + eps_p sqrt(p) for p | {level}")
    return Classification(True, None, None, float(new_res), float(new_res),
                          "newform: c(p) = -eps_p/sqrt(p) for p | N")
