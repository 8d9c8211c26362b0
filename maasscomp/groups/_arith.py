"""Exact integer helpers for Gamma0(N): factorisation, Bezout, and an O(1) index of P^1(Z/NZ).

Everything here works on Python ints or int64 arrays; nothing uses floating point.
"""

from __future__ import annotations

import math

import numpy as np

Mat = tuple[tuple[int, int], tuple[int, int]]


def factorint(n: int) -> dict[int, int]:
    """Prime factorisation of ``n >= 1`` by trial division (levels are small)."""
    out: dict[int, int] = {}
    m = n
    p = 2
    while p * p <= m:
        while m % p == 0:
            out[p] = out.get(p, 0) + 1
            m //= p
        p += 1 if p == 2 else 2
    if m > 1:
        out[m] = out.get(m, 0) + 1
    return out


def divisors(n: int) -> list[int]:
    """Sorted positive divisors of ``n``."""
    small = [d for d in range(1, math.isqrt(n) + 1) if n % d == 0]
    return sorted(set(small + [n // d for d in small]))


def egcd(a: int, b: int) -> tuple[int, int, int]:
    """Return ``(g, x, y)`` with ``a x + b y = g = gcd(a, b) >= 0``."""
    x0, y0, x1, y1 = 1, 0, 0, 1
    while b:
        q, a, b = a // b, b, a - (a // b) * b
        x0, x1 = x1, x0 - q * x1
        y0, y1 = y1, y0 - q * y1
    if a < 0:
        a, x0, y0 = -a, -x0, -y0
    return a, x0, y0


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
