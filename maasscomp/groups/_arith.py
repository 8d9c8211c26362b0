"""Exact integer helpers for Gamma0(N): SL2(Z) matrices and an O(1) index of P^1(Z/NZ).

Factorisation, divisors and Bezout come from :mod:`maasscomp.arith`.

Everything here works on Python ints or int64 arrays; nothing uses floating point.
"""

from __future__ import annotations


import numpy as np

from maasscomp.arith import egcd, factorint

Mat = tuple[tuple[int, int], tuple[int, int]]


def sl2_first_column(a: int, c: int) -> Mat:
    """A matrix ``[[a, b], [c, d]]`` in SL2(Z) (requires gcd(a, c) = 1)."""
    g, x, y = egcd(a, c)
    if g != 1:
        raise ValueError(f"gcd({a}, {c}) = {g} != 1")
    # a x + c y = 1  ->  a d - b c = 1 with d = x, b = -y
    return ((a, -y), (c, x))


def sl2_bottom_row(c: int, d: int) -> Mat:
    """A matrix ``[[a, b], [c, d]]`` in SL2(Z) (requires gcd(c, d) = 1)."""
    g, x, y = egcd(d, c)
    if g != 1:
        raise ValueError(f"gcd({c}, {d}) = {g} != 1")
    # d x + c y = 1  ->  a = x, b = -y
    return ((x, -y), (c, d))


def matmul(A: Mat, B: Mat) -> Mat:
    """Exact 2x2 product of integer matrices given as nested tuples."""
    return (
        (A[0][0] * B[0][0] + A[0][1] * B[1][0], A[0][0] * B[0][1] + A[0][1] * B[1][1]),
        (A[1][0] * B[0][0] + A[1][1] * B[1][0], A[1][0] * B[0][1] + A[1][1] * B[1][1]),
    )


def adjugate(A: Mat) -> Mat:
    """adj(A) = det(A) A^{-1} for a 2x2 matrix."""
    return ((A[1][1], -A[0][1]), (-A[1][0], A[0][0]))


def det(A: Mat) -> int:
    return A[0][0] * A[1][1] - A[0][1] * A[1][0]


class P1Index:
    """Bijection P^1(Z/NZ) -> {0, ..., mu-1}, vectorised over int64 arrays.

    P^1(Z/NZ) is the set of pairs (c, d) mod N with gcd(c, d, N) = 1 modulo units; it
    indexes the right cosets Gamma0(N) \\ SL2(Z) by the bottom row of a representative
    (Diamond & Shurman 2005, §3.8; Shimura 1971, §1.6). By the Chinese remainder
    theorem it is the product of P^1(Z/p^e Z) over p^e || N. Locally a class is
    (x : 1) with x = c/d mod q when p does not divide d, or (1 : y) with y = d/c mod q
    and p | y otherwise; that gives q + q/p classes and an index computed in O(1).
    The identity coset (0 : 1) has index 0.
    """

    def __init__(self, N: int) -> None:
        self.N = N
        self._parts: list[tuple[int, int, np.ndarray, int]] = []
        size = 1
        for p, e in sorted(factorint(N).items()):
            q = p**e
            inv = np.zeros(q, dtype=np.int64)
            for u in range(q):
                if u % p:
                    inv[u] = pow(u, -1, q)
            self._parts.append((p, q, inv, size))
            size *= q + q // p
        self.size = size

    def __call__(self, c: np.ndarray | int, d: np.ndarray | int) -> np.ndarray:
        c = np.asarray(c, dtype=np.int64)
        d = np.asarray(d, dtype=np.int64)
        idx = np.zeros(np.broadcast(c, d).shape, dtype=np.int64)
        for p, q, inv, radix in self._parts:
            cq = c % q
            dq = d % q
            dunit = (dq % p) != 0
            local = np.where(
                dunit,
                (cq * inv[dq]) % q,
                q + ((dq * inv[cq]) % q) // p,
            )
            idx += radix * local
        return idx
