"""Roots of det A(R) = 0 near a point, from one LU factorisation: local linearisation.

A(R) is the square Hejhal matrix; its determinant vanishes at the eigenvalues (and at
spurious roots of the truncated system; docs/theory.md §1.4). Near a point R_c,

    A(R_c + delta) = A(R_c) + delta A'(R_c) + O(delta^2),

so the roots delta of the linearised determinant are the eigenvalues of the pencil
(A(R_c), -A'(R_c)), i.e. delta = -1/mu for the eigenvalues mu of B = A(R_c)^{-1} A'(R_c).
The roots nearest to R_c are the eigenvalues of B of largest modulus, which a Krylov
method (ARPACK, via scipy.sparse.linalg.eigs) finds with a few dozen products
v -> A^{-1} (A' v) on top of one LU factorisation. This is the first step of the method of
successive linear problems (A. Ruhe, "Algorithms for the nonlinear eigenvalue problem",
SIAM J. Numer. Anal. 10 (1973) 674-689, §3); repeating it at the predicted root is Newton's
method for the eigenvalue and converges quadratically for a simple root, and the
dominant eigenvector of B is then the null vector of A, i.e. the Fourier coefficients.

Compared with a scan of the sign of det A(R) on a grid (one LU per grid point, about a
dozen per mean spacing, then Brent's method), one factorisation per centre predicts every
root within a radius of the centre, including pairs of roots closer than any grid step,
and a root costs two or three further factorisations to polish.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np
import scipy.linalg
from scipy.sparse.linalg import ArpackNoConvergence, LinearOperator, eigs

from maasscomp.errors import ConvergenceError


@dataclass(frozen=True)
class Linearisation:
    """Roots of det A predicted from the linearisation at one centre.

    Attributes
    ----------
    R : float
        The centre.
    sign, logdet : float
        Sign and log|det A(R)| (from the LU factorisation).
    roots : tuple of float
        Real parts of the predicted roots within ``radius`` of R whose imaginary part is
        small (see :func:`linearise`), sorted.
    complex_roots : tuple of complex
        Predicted roots within ``radius`` with a larger imaginary part (not eigenvalues of
        a self-adjoint problem; kept for diagnosis).
    radius : float
        Every root of the linearised determinant within this distance is listed.
    products : int
        Products v -> A^{-1} A' v used.
    """

    R: float
    sign: float
    logdet: float
    roots: tuple[float, ...]
    complex_roots: tuple[complex, ...]
    radius: float
    products: int


@dataclass(frozen=True)
class RefinedRoot:
    """A root of det A(R) polished by Newton steps on the linearisation.

    Attributes
    ----------
    R : float
        The root.
    converged : bool
        Whether the last step fell below the tolerance within the allowed steps and the
        iterate stayed inside the allowed interval.
    steps : int
        Newton steps (= LU factorisations) used.
    last_step : float
        Size of the last Newton step (an estimate of the error of R when converged).
    vector : numpy.ndarray
        Null vector of A(R), normalised to vector[0] = 1 (the coefficients a(1..M0)).
    sign, logdet : float
        Of det A at the last factorisation.
    """

    R: float
    converged: bool
    steps: int
    last_step: float
    vector: np.ndarray
    sign: float
    logdet: float


def _lu(A: np.ndarray):
    lu, piv = scipy.linalg.lu_factor(A, overwrite_a=True, check_finite=False)
    d = np.diagonal(lu)
    swaps = int(np.count_nonzero(piv != np.arange(piv.size)))
    sign = (-1.0) ** swaps * float(np.prod(np.sign(d)))
    logdet = float(np.sum(np.log(np.abs(d))))
    return (lu, piv), sign, logdet


def _operator(lu_piv, dA: np.ndarray, counter: list[int]) -> LinearOperator:
    n = dA.shape[0]

    def mv(v):
        counter[0] += 1
        v = np.asarray(v).reshape(-1)
        if np.iscomplexobj(v):
            return (scipy.linalg.lu_solve(lu_piv, dA @ v.real, check_finite=False)
                    + 1j * scipy.linalg.lu_solve(lu_piv, dA @ v.imag, check_finite=False))
        return scipy.linalg.lu_solve(lu_piv, dA @ v, check_finite=False)

    def mm(V):
        counter[0] += V.shape[1]
        V = np.asarray(V)
        if np.iscomplexobj(V):
            return (scipy.linalg.lu_solve(lu_piv, dA @ V.real, check_finite=False)
                    + 1j * scipy.linalg.lu_solve(lu_piv, dA @ V.imag, check_finite=False))
        return scipy.linalg.lu_solve(lu_piv, dA @ V, check_finite=False)

    return LinearOperator((n, n), matvec=mv, matmat=mm, dtype=float)


def linearise(A: np.ndarray, dA: np.ndarray, R: float, radius: float, *, k: int = 8,
              imag_frac: float = 0.1, max_k: int = 64) -> Linearisation:
    """Predict every root of det A within ``radius`` of ``R`` from one LU factorisation.

    Parameters
    ----------
    A, dA : numpy.ndarray
        A(R) and dA/dR (A is overwritten by its LU factors).
    R : float
        The centre.
    radius : float
        Half-width of the neighbourhood whose roots are wanted.
    k : int
        Eigenvalues of B = A^{-1} A' requested first; doubled until the smallest of them in
        modulus lies beyond ``radius`` (then no root of the linearised determinant within
        ``radius`` is missing), up to ``max_k``.
    imag_frac : float
        A predicted root counts as real when its imaginary part is at most
        ``imag_frac * radius`` (a close pair of real roots can come out of the
        linearisation as a complex pair; the caller's Newton steps decide).

    Raises
    ------
    ConvergenceError
        If more than ``max_k`` roots crowd the neighbourhood or ARPACK does not converge.
    """
    lu_piv, sign, logdet = _lu(A)
    n = dA.shape[0]
    counter = [0]
    op = _operator(lu_piv, dA, counter)
    kk = min(k, n - 2)
    while True:
        try:
            mu = eigs(op, k=kk, which="LM", tol=1e-10, return_eigenvectors=False,
                      v0=np.ones(n) / math.sqrt(n))
        except ArpackNoConvergence as exc:  # pragma: no cover - ARPACK converges on these gaps
            raise ConvergenceError(f"ARPACK did not converge for the linearisation at R={R}",
                                   best=len(exc.eigenvalues)) from None
        mu = np.asarray(mu)
        if float(np.min(np.abs(mu))) < 1.0 / radius or kk >= min(max_k, n - 2):
            break
        kk = min(2 * kk, max_k, n - 2)
    if float(np.min(np.abs(mu))) >= 1.0 / radius:
        raise ConvergenceError(f"more than {kk} roots of det A within {radius:.2e} of R={R}; "
                               "use a smaller radius", best=kk)
    delta = -1.0 / mu
    near = np.abs(delta) <= radius
    real = near & (np.abs(delta.imag) <= imag_frac * radius)
    roots = tuple(sorted(float(R + d.real) for d in delta[real]))
    cplx = tuple(complex(R + d) for d in delta[near & ~real])
    return Linearisation(R=float(R), sign=sign, logdet=logdet, roots=roots, complex_roots=cplx,
                         radius=float(radius), products=counter[0])


def _dominant(op: LinearOperator, v: np.ndarray, max_iter: int = 12, tol: float = 1e-11):
    """Dominant real eigenpair of op by power iteration (the caller's start is close)."""
    mu_old = None
    for it in range(max_iter):
        u = op.matvec(v)
        j = int(np.argmax(np.abs(v)))
        mu = float(u[j] / v[j])
        v = u / np.linalg.norm(u)
        if mu_old is not None and abs(mu - mu_old) <= tol * abs(mu):
            return mu, v, True
        mu_old = mu
    return mu, v, False


def refine_root(pair: Callable[[float], tuple[np.ndarray, np.ndarray]], R_start: float, *,
                lo: float, hi: float, tol: float = 1e-13, max_steps: int = 10) -> RefinedRoot:
    """Newton's method for a root of det A(R) via the dominant eigenvalue of A^{-1} A'.

    Each step factorises A(R) once; the dominant eigenpair (mu, v) of A(R)^{-1} A'(R) gives
    the step -1/mu and, at convergence, the null vector v (Ruhe 1973, §3).

    Parameters
    ----------
    pair : callable
        R -> (A(R), dA/dR); A may be overwritten.
    R_start : float
        Starting point (a predicted root).
    lo, hi : float
        The iterate must stay in [lo, hi] (otherwise ``converged`` is False).
    tol : float
        Stop when the step is below tol * max(1, |R|).
    """
    R = float(R_start)
    scale = max(1.0, abs(R))
    v = None
    step = math.inf
    sign = logdet = math.nan
    prev = math.inf
    for it in range(1, max_steps + 1):
        A, dA = pair(R)
        lu_piv, sign, logdet = _lu(A)
        del A
        op = _operator(lu_piv, dA, [0])
        if v is None:
            # start from the solution with a(1) = 1 of the last M0 - 1 equations: close to
            # the null vector near a root
            rhs = np.zeros(dA.shape[0])
            rhs[0] = 1.0
            v = scipy.linalg.lu_solve(lu_piv, rhs, check_finite=False)
            v /= np.linalg.norm(v)
        mu, v, ok = _dominant(op, v)
        if not ok or mu == 0.0:
            mu, vec = eigs(op, k=1, which="LM", tol=1e-12, v0=v)
            mu = float(mu[0].real)
            v = np.real(vec[:, 0] / vec[np.argmax(np.abs(vec[:, 0])), 0])
            v /= np.linalg.norm(v)
        step = -1.0 / mu
        R_new = R + step
        if not (lo <= R_new <= hi) or not math.isfinite(R_new):
            return RefinedRoot(R=R, converged=False, steps=it, last_step=abs(step),
                               vector=v / v[0], sign=sign, logdet=logdet)
        R = R_new
        if abs(step) <= tol * scale or (abs(step) >= prev and abs(step) <= 1e3 * tol * scale):
            # converged, or stalled at the rounding level of the determinant
            # (the eigenvector is that of the linearisation at R - step, accurate to
            # O(step^2))
            return RefinedRoot(R=R, converged=True, steps=it, last_step=abs(step),
                               vector=v / v[0], sign=sign, logdet=logdet)
        prev = abs(step)
    return RefinedRoot(R=R, converged=False, steps=max_steps, last_step=abs(step),
                       vector=v / v[0], sign=sign, logdet=logdet)
