"""Bases of multi-dimensional eigenspaces: Hecke eigenforms or echelon bases.

One symmetry class can hold an eigenspace of dimension m > 1 at one R: the oldforms g(d z),
d | N/M, of a newform g of level M (Atkin & Lehner, Math. Ann. 185 (1970) 134-160), and
twists that land in the same class. Given m independent coefficient vectors of the space,
this module splits it into joint eigenspaces of the Hecke operators T_p, p not dividing N
(their matrix on the span follows from lambda(p) a(n) = a(pn) + a(n/p), Iwaniec, *Topics in
Classical Automorphic Forms* (1997) §6), picks Hecke eigenforms with c_inf(1) = 1 where the
T_p separate the space and the reduced echelon basis elsewhere, and compares coefficient
subspaces by principal angles (Björck & Golub, Math. Comp. 27 (1973) 579-594).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.linalg import subspace_angles

#: T_p eigenvalues closer than this are treated as equal (one Hecke cluster).
CLUSTER_TOL = 1e-5


def small_primes(level: int, count: int = 4) -> list[int]:
    out, p = [], 2
    while len(out) < count:
        if all(p % q for q in range(2, int(math.isqrt(p)) + 1)) and level % p:
            out.append(p)
        p += 1
    return out


# ----------------------------------------------------------------------------------------
# Hecke structure of an eigenspace
# ----------------------------------------------------------------------------------------


@dataclass(frozen=True)
class HeckeCluster:
    """Joint eigenspace of the T_p (p not dividing N) inside one eigenspace."""

    weights: np.ndarray  # (m, d) combinations of the null vectors spanning the cluster
    eigenvalues: dict[int, float]  # lambda_p


def hecke_matrix(B: np.ndarray, p: int) -> tuple[np.ndarray, float]:
    """Matrix H of T_p on the span of the columns of B (coefficients at infinity,
    n = 1..K), from (T_p b)(n) = b(pn) + b(n/p) on n <= K/p, and its relative fit residual."""
    K = B.shape[0]
    L = K // p
    n = np.arange(1, L + 1)
    TB = B[p * n - 1].copy()
    div = n % p == 0
    TB[div] += B[n[div] // p - 1]
    H, *_ = np.linalg.lstsq(B[:L], TB, rcond=None)
    res = np.linalg.norm(B[:L] @ H - TB) / max(np.linalg.norm(TB), 1e-300)
    return H, float(res)


def usable_primes(B: np.ndarray, level: int) -> list[int]:
    """Small primes p not dividing N for which the rows n <= K/p of B determine the span
    (full column rank), so that T_p can be fitted on them."""
    K, m = B.shape
    out = []
    for p in small_primes(level, 4):
        L = K // p
        if L < m + 2:
            continue
        sv = np.linalg.svd(B[:L], compute_uv=False)
        if sv[-1] > 1e-8 * sv[0]:
            out.append(p)
    return out


def hecke_clusters(B: np.ndarray, level: int) -> list[HeckeCluster]:
    """Split span(B) into joint eigenspaces of T_p, p not dividing N (small p).

    B has shape (K, m): coefficients at infinity of m independent forms. A fixed generic
    combination of the T_p is diagonalised; eigenvalues within CLUSTER_TOL form one
    cluster. Only primes whose fit rows n <= K/p determine the span are used (an oldform
    g(dz) vanishes at n < d).
    """
    K, m = B.shape
    primes = usable_primes(B, level)
    if not primes or m == 1:
        lam = {p: float(hecke_matrix(B, p)[0][0, 0]) for p in primes} if m == 1 else {}
        return [HeckeCluster(np.eye(m), lam)]
    Hs = {p: hecke_matrix(B, p)[0] for p in primes}
    # generic combination (fixed irrational-looking weights keep the run deterministic)
    w = [1.0, 0.7548776662, 0.5698402910, 0.4301597090]
    Hc = sum(wi * Hs[p] for wi, p in zip(w, primes))
    ev, V = np.linalg.eig(Hc)
    ev = ev.real  # Hecke operators are self-adjoint: a tiny imaginary part is rounding
    order = np.argsort(ev)
    ev, V = ev[order], V[:, order]
    groups: list[list[int]] = [[0]]
    for i in range(1, m):
        if abs(ev[i] - ev[groups[-1][-1]]) <= CLUSTER_TOL * max(1.0, abs(ev[i])):
            groups[-1].append(i)
        else:
            groups.append([i])
    out = []
    for g in groups:
        # a real orthonormal basis of the cluster's invariant subspace: a (nearly) repeated
        # eigenvalue may come back as a complex-conjugate pair, whose real and imaginary
        # parts together span the real subspace (the individual eigenvectors are arbitrary)
        Z = np.hstack([V[:, g].real, V[:, g].imag])
        W = np.linalg.svd(Z, full_matrices=False)[0][:, : len(g)]
        Bw = B @ W
        lam = {}
        for p in primes:
            H, _ = hecke_matrix(Bw, p)
            lam[p] = float(np.trace(H) / H.shape[0])
        out.append(HeckeCluster(W, lam))
    return out


def rref_weights(B: np.ndarray, tol: float = 1e-8) -> np.ndarray:
    """Weights W (m x m) such that (B W) is the reduced echelon basis of span(B):
    column i has a 1 at its pivot n_i, zeros at the other pivots, pivots increasing."""
    K, m = B.shape
    X = B.T.copy()  # rows = forms
    W = np.eye(m)
    scale = np.max(np.abs(X))
    row = 0
    for col in range(K):
        if row == m:
            break
        piv = row + int(np.argmax(np.abs(X[row:, col])))
        if abs(X[piv, col]) <= tol * scale:
            continue
        X[[row, piv]] = X[[piv, row]]
        W[:, [row, piv]] = W[:, [piv, row]]
        f = X[row, col]
        X[row] /= f
        W[:, row] /= f
        for r in range(m):
            if r != row and X[r, col] != 0.0:
                g = X[r, col]
                X[r] -= g * X[row]
                W[:, r] -= g * W[:, row]
        row += 1
    return W


def eigen_residual(b: np.ndarray, lam: dict[int, float], nmax: int) -> float:
    """max |b(pn) + b(n/p) - lambda_p b(n)| over p in lam, pn <= nmax, relative to max|b|."""
    nmax = min(nmax, b.size)
    worst = 0.0
    for p, lp in lam.items():
        for n in range(1, nmax // p + 1):
            v = b[p * n - 1] + (b[n // p - 1] if n % p == 0 else 0.0) - lp * b[n - 1]
            worst = max(worst, abs(v))
    return float(worst / max(np.max(np.abs(b[:nmax])), 1e-300))


def real_rows(C: np.ndarray, mask: np.ndarray) -> np.ndarray:
    """Stack real and imaginary parts of the masked entries: (k, n_cusps, M) -> (rows, k)."""
    X = C[:, mask].T
    if np.iscomplexobj(X):
        X = np.vstack([X.real, X.imag])
    return X


def subspace_gap(C1: np.ndarray, C2: np.ndarray, mask: np.ndarray) -> float:
    """sin of the largest principal angle between two coefficient subspaces on ``mask``."""
    X1, X2 = real_rows(C1, mask), real_rows(C2, mask)
    return float(np.sin(np.max(subspace_angles(X1, X2))))
