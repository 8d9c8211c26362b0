"""Local linearisation of the Hejhal system in R, Newton's method on it, and null spaces.

The square Hejhal matrix A(R) of one symmetry class is singular (up to the truncation error)
exactly at the eigenvalues of the class, and at spurious points where the truncated system
happens to be singular (docs/theory.md §1.4). Around an expansion point c,

    A(c + d) = A(c) + d A'(c) + O(d^2),

so the generalised eigenvalues d of the pencil (A(c), A'(c)) near 0 approximate every root of
det A(R) near c at once, however close two of them are: a pair of eigenvalues 1e-5 apart gives
two pencil eigenvalues 1e-5 apart, and an eigenvalue of multiplicity m gives m of them. This
is the method of successive linear problems for nonlinear eigenvalue problems (A. Ruhe,
"Algorithms for the nonlinear eigenvalue problem", SIAM J. Numer. Anal. 10 (1973) 674-689);
for Maass forms it was used by H. Then, "Large sets of consecutive Maass forms and
fluctuations in the Weyl remainder", arXiv:1212.3149. Each pencil eigenvalue is then polished
by Newton's method on (A(R) v = 0, u^T v = 1) ("nonlinear inverse iteration", Ruhe 1973 §3),
which converges quadratically also to a semisimple multiple eigenvalue.

All functions here work on matrices that the caller has equilibrated with one fixed pair of
diagonal scalings (the pencil's eigenvalues, Newton's iterates and the roots do not depend
on them; the rounding errors do).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np
import scipy.linalg as sla

#: Dense eigenvalue solves up to this matrix size; beyond it block subspace iteration with
#: one LU factorisation finds the pencil eigenvalues nearest the expansion point.
DENSE_PENCIL_MAX = 150


def scalings(A: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Row and column scalings (dr, dc) with rows and columns of dr A dc of unit 2-norm
    (columns first, then rows)."""
    cn = np.linalg.norm(A, axis=0)
    dc = 1.0 / np.where(cn > 0, cn, 1.0)
    rn = np.linalg.norm(A * dc[None, :], axis=1)
    dr = 1.0 / np.where(rn > 0, rn, 1.0)
    return dr, dc


def scale(A: np.ndarray, dr: np.ndarray, dc: np.ndarray) -> np.ndarray:
    return (dr[:, None] * A) * dc[None, :]


@dataclass(frozen=True)
class PencilRoots:
    """Pencil eigenvalues d (complex) near an expansion point and their right eigenvectors
    (columns, in the scaled unknowns)."""

    delta: np.ndarray
    vectors: np.ndarray


def pencil_roots(A0: np.ndarray, A1: np.ndarray, radius: float, *, imag_max: float | None = None,
                 block: int | None = None, rng: np.random.Generator | None = None) -> PencilRoots:
    """Eigenvalues d of the pencil A0 + d A1 with |Re d| <= radius and |Im d| <= imag_max.

    Dense (LAPACK) for small matrices; for larger ones block subspace iteration on
    T = A0^{-1} A1, whose eigenvalues mu = -1/d are largest for the d nearest 0, with a block
    grown until its smallest Ritz value lies well outside the radius (so that every wanted
    eigenvalue, multiple ones included, belongs to the converged invariant subspace).

    Parameters
    ----------
    A0, A1 : ndarray
        A(c) and A'(c), equilibrated alike.
    radius : float
        Half-width of the collection interval on the real axis.
    imag_max : float, optional
        Largest |Im d| kept (default: radius). A close pair can turn into a complex pair
        under the O(d^2) error of the linearisation; both then count as candidates.
    block : int, optional
        Starting block size of the subspace iteration.
    rng : numpy Generator, optional
        Source of the random starting block (default: a fixed seed, so runs repeat).
    """
    imag_max = radius if imag_max is None else imag_max
    n = A0.shape[0]
    if n <= DENSE_PENCIL_MAX:
        lu = sla.lu_factor(A0, check_finite=False)
        T = sla.lu_solve(lu, A1, check_finite=False)
        mu, V = np.linalg.eig(T)
        return _select(mu, V, radius, imag_max)
    return _subspace_pencil(A0, A1, radius, imag_max, block, rng)


def _select(mu: np.ndarray, V: np.ndarray, radius: float, imag_max: float) -> PencilRoots:
    with np.errstate(divide="ignore", invalid="ignore"):
        d = -1.0 / mu
    keep = np.isfinite(d) & (np.abs(d.real) <= radius) & (np.abs(d.imag) <= imag_max)
    idx = np.nonzero(keep)[0]
    idx = idx[np.argsort(d[idx].real)]
    return PencilRoots(d[idx], V[:, idx])


def _subspace_pencil(A0, A1, radius, imag_max, block, rng) -> PencilRoots:
    n = A0.shape[0]
    rng = rng or np.random.default_rng(20240611)
    lu = sla.lu_factor(A0, check_finite=False)
    p = min(n, block or 12)
    while True:
        X = np.linalg.qr(rng.standard_normal((n, p)))[0]
        prev = None
        for _ in range(60):
            Z = sla.lu_solve(lu, A1 @ X, check_finite=False)
            X, _r = np.linalg.qr(Z)
            H = X.conj().T @ sla.lu_solve(lu, A1 @ X, check_finite=False)
            mu = np.linalg.eigvals(H)
            d = np.sort_complex(-1.0 / mu)
            inner = d[np.abs(d) <= 1.5 * radius]
            if prev is not None and inner.size == prev.size and (
                    inner.size == 0 or np.max(np.abs(inner - prev)) <= 1e-9 * radius):
                break
            prev = inner
        # the block must reach well beyond the radius: its farthest Ritz value decides
        far = np.max(np.abs(d))
        if far >= 3.0 * radius or p == n:
            break
        p = min(n, 2 * p)
    TX = sla.lu_solve(lu, A1 @ X, check_finite=False)
    H = X.conj().T @ TX
    mu, W = np.linalg.eig(H)
    return _select(mu, X @ W, radius, imag_max)


@dataclass(frozen=True)
class NewtonResult:
    """Outcome of :func:`newton_root`."""

    R: float
    vector: np.ndarray  # scaled unknowns, u^T v = 1
    steps: int  # matrix factorisations made
    last_step: float
    converged: bool
    lu: tuple | None
    A: np.ndarray | None
    dA: np.ndarray | None


def newton_root(matrices: Callable[[float], tuple[np.ndarray, np.ndarray]], R0: float, v0: np.ndarray, *,
                tol: float, max_steps: int = 12, max_move: float = math.inf) -> NewtonResult:
    """Root of the nonlinear eigenvalue problem A(R) v = 0 near R0 by Newton's method.

    With the normalisation u^T v = 1 (u = v0 / |v0|^2), one step solves
    A(R) x = A'(R) v and sets R <- R - 1/(u^T x), v <- x / (u^T x) (Ruhe 1973, §3).

    Parameters
    ----------
    matrices : callable R -> (A(R), A'(R))
        Scaled alike at every R.
    R0 : float
    v0 : ndarray
        Starting vector (real part of a pencil eigenvector).
    tol : float
        Stop when a step is below tol, or when the steps stop shrinking below 100 tol
        (rounding noise).
    max_steps : int
    max_move : float
        Give up when the iterate leaves [R0 - max_move, R0 + max_move].
    """
    v0 = np.asarray(v0)
    if not np.iscomplexobj(v0):
        v0 = np.real(v0)
    nv = float(np.vdot(v0, v0).real)
    if not nv > 0:
        v0 = np.ones_like(v0)
        nv = float(np.vdot(v0, v0).real)
    # complex systems (a character): u^H v = 1; R stays real (the real part of the step;
    # at a root of the complex system the step is real up to the truncation error)
    u = np.conj(v0) / nv
    v = v0.copy()
    R = float(R0)
    steps, last = 0, math.inf
    lu = A = dA = None
    converged = False
    for steps in range(1, max_steps + 1):
        A, dA = matrices(R)
        lu = sla.lu_factor(A, check_finite=False)
        x = sla.lu_solve(lu, dA @ v, check_finite=False)
        ux = complex(u @ x) if np.iscomplexobj(x) else float(u @ x)
        if not (np.isfinite(ux) and ux != 0.0):
            break
        v = x / ux
        step = float(np.real(1.0 / ux))
        R -= step
        if abs(R - R0) > max_move:
            last = abs(step)
            break
        if abs(step) <= tol or (abs(step) <= 100 * tol and abs(step) >= 0.5 * last):
            # converged: A, dA and lu belong to the previous iterate, one (tiny) step away,
            # which is all the null-space probe and the condition number need
            last = abs(step)
            converged = True
            break
        last = abs(step)
    return NewtonResult(R, v, steps, last, converged, lu, A, dA)


@dataclass(frozen=True)
class NullBasis:
    """The smallest singular values of a (scaled) matrix and their right singular vectors."""

    sv: np.ndarray  # ascending, relative to the largest singular value estimate
    vectors: np.ndarray  # (n, k) orthonormal, in the order of sv


def null_basis(A: np.ndarray, lu, k: int, *, rng: np.random.Generator | None = None) -> NullBasis:
    """The k smallest singular triplets of A from its LU factors.

    One step of inverse iteration with (A^T A)^{-1} = A^{-1} A^{-T} on a random block of k
    columns, then Rayleigh--Ritz: the singular values of A Q (Q an orthonormal basis of the
    block). Directions with singular value s are amplified by 1/s^2, so the m directions of
    an m-dimensional near-null space (s ~ 1e-14) are separated from the rest (s >~ 1e-6)
    to rounding accuracy. By the Courant--Fischer theorem the j-th Ritz value is never below
    the j-th smallest singular value, so a small Ritz value proves a small singular value.
    """
    n = A.shape[0]
    k = min(k, n)
    rng = rng or np.random.default_rng(7)
    X = rng.standard_normal((n, k))
    tr = 2 if np.iscomplexobj(A) else 1  # A^H for complex matrices
    Z = sla.lu_solve(lu, sla.lu_solve(lu, X, trans=tr, check_finite=False), check_finite=False)
    Q = np.linalg.qr(Z)[0]
    Z = sla.lu_solve(lu, sla.lu_solve(lu, Q, trans=tr, check_finite=False), check_finite=False)
    Q = np.linalg.qr(Z)[0]
    _, s, Vt = np.linalg.svd(A @ Q, full_matrices=False)
    order = np.argsort(s)
    norm = _norm2(A, rng)
    return NullBasis(s[order] / norm, Q @ Vt[order].T)


def _norm2(A: np.ndarray, rng: np.random.Generator) -> float:
    """Estimate of the largest singular value (a few power steps; equilibrated A has it O(1))."""
    x = rng.standard_normal(A.shape[1])
    s = 1.0
    for _ in range(6):
        y = A.conj().T @ (A @ x)
        s = float(np.linalg.norm(y))
        if s == 0:
            return 1.0
        x = y / s
    return math.sqrt(s)


def root_condition(A: np.ndarray, dA: np.ndarray, lu, v: np.ndarray, *,
                   rng: np.random.Generator | None = None) -> float:
    """First-order sensitivity of a simple root: |dR| <= kappa |dA| with
    kappa = |w| |v| / |w^T A' v| (w the left null vector), the classical eigenvalue
    condition number of the linearised problem."""
    rng = rng or np.random.default_rng(11)
    tr = 2 if np.iscomplexobj(A) else 1
    w = sla.lu_solve(lu, rng.standard_normal(A.shape[0]), trans=tr, check_finite=False)
    den = abs(np.vdot(w, dA @ v)) if np.iscomplexobj(A) else abs(float(w @ (dA @ v)))
    if den == 0:
        return math.inf
    return float(np.linalg.norm(w) * np.linalg.norm(v) / den)
