"""Scaling matrices, Atkin--Lehner matrices, reflection, membership, cusp lookup.

Sources: scaling matrices, Iwaniec, Spectral Methods of Automorphic Forms (2002) §2.3;
Atkin--Lehner matrices W_Q = [[Qx, y], [Nz, Qw]], det Q, normalise Gamma0(N) and
W_Q^2 in Q Gamma0(N): Atkin & Lehner, Math. Ann. 185 (1970) 134-160; reflection
J [[a,b],[c,d]] J = [[a,-b],[-c,d]] (docs/theory.md §1.1, common practice).
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest

from maasscomp.errors import InputError
from maasscomp.groups import gamma0


def _mul(*Ms):
    out = [[1, 0], [0, 1]]
    for M in Ms:
        M = [[int(v) for v in row] for row in np.asarray(M).tolist()]
        out = [
            [out[0][0] * M[0][0] + out[0][1] * M[1][0], out[0][0] * M[0][1] + out[0][1] * M[1][1]],
            [out[1][0] * M[0][0] + out[1][1] * M[1][0], out[1][0] * M[0][1] + out[1][1] * M[1][1]],
        ]
    return out


def _adj(M):
    M = np.asarray(M).tolist()
    return [[M[1][1], -M[0][1]], [-M[1][0], M[0][0]]]


def _in_gamma0(M, N):
    return M[0][0] * M[1][1] - M[0][1] * M[1][0] == 1 and M[1][0] % N == 0


def _generators_sample(N, count=20, seed=0):
    rng = np.random.default_rng(seed)
    out = [[[1, 1], [0, 1]], [[1, 0], [N, 1]], [[-1, 0], [0, -1]]]
    while len(out) < count:
        c = N * int(rng.integers(-4, 5))
        d = int(rng.integers(-20, 21))
        if math.gcd(c, d) != 1 or c == 0:
            continue
        a = pow(d, -1, abs(c)) if abs(c) > 1 else 0
        out.append([[a, (a * d - 1) // c], [c, d]])
    return out


@pytest.mark.parametrize("N", list(range(1, 61)) + [64, 72, 90, 98, 100, 105, 128, 210])
def test_scaling_matrices(N):
    G = gamma0(N)
    T = [[1, 1], [0, 1]]
    for cusp in G.cusps:
        M = cusp.scaling
        d = cusp.scaling_det
        assert d > 0
        A = cusp.A
        assert A[0][0] * A[1][1] - A[0][1] * A[1][0] == 1
        # sigma(infinity) = A(infinity) = the cusp a/c (infinity for index 0)
        if cusp.index == 0:
            assert M[1][0] == 0 and A[1][0] == 0
        else:
            assert Fraction(M[0][0], M[1][0]) == Fraction(cusp.a, cusp.c)
            assert Fraction(A[0][0], A[1][0]) == Fraction(cusp.a, cusp.c)
        # sigma T sigma^{-1} = M T adj(M) / d is an integer matrix in Gamma0(N)
        P = _mul(M, T, _adj(M))
        assert all(v % d == 0 for row in P for v in row)
        assert _in_gamma0([[v // d for v in row] for row in P], N)
        # the stabiliser A T^m A^{-1} lies in Gamma0(N) exactly when width | m
        for m in range(1, cusp.width + 1):
            Sm = _mul(A, [[1, m], [0, 1]], _adj(A))
            assert _in_gamma0(Sm, N) == (m == cusp.width)
        # and sigma^{-1} (A T^w A^{-1}) sigma = +-T^{+-1}: the width normalises to 1
        Sw = _mul(_adj(M), A, [[1, cusp.width], [0, 1]], _adj(A), M)
        assert all(v % d == 0 for row in Sw for v in row)
        Sw = [[v // d for v in row] for row in Sw]
        assert Sw[1][0] == 0 and abs(Sw[0][0]) == 1 and Sw[0][0] == Sw[1][1] and abs(Sw[0][1]) == 1
        if G.is_squarefree:
            assert cusp.atkin_lehner_Q == cusp.width
            assert np.array_equal(np.array(M), G.atkin_lehner(cusp.width))
        else:
            assert cusp.atkin_lehner_Q is None
            assert d == cusp.width


@pytest.mark.parametrize("N", list(range(1, 61)) + [72, 100, 210, 2310])
def test_atkin_lehner(N):
    G = gamma0(N)
    Qs = G.exact_divisors()
    assert Qs == tuple(Q for Q in range(1, N + 1) if N % Q == 0 and math.gcd(Q, N // Q) == 1)
    gens = _generators_sample(N)
    for Q in Qs:
        W = G.atkin_lehner(Q)
        assert W.dtype == np.int64 and W.shape == (2, 2)
        assert W[0, 0] % Q == 0 and W[1, 0] % N == 0 and W[1, 1] % Q == 0
        assert int(round(np.linalg.det(W))) == Q
        # W_Q normalises Gamma0(N)
        for g in gens:
            P = _mul(W, g, _adj(W))
            assert all(v % Q == 0 for row in P for v in row)
            assert _in_gamma0([[v // Q for v in row] for row in P], N)
        # W_Q^2 in Q * Gamma0(N)
        W2 = _mul(W, W)
        assert all(v % Q == 0 for row in W2 for v in row)
        assert _in_gamma0([[v // Q for v in row] for row in W2], N)
    assert np.array_equal(G.atkin_lehner(1), np.eye(2, dtype=np.int64))
    if N > 1:
        assert np.array_equal(G.atkin_lehner(N), [[0, -1], [N, 0]])


def test_atkin_lehner_bad_q():
    G = gamma0(12)
    assert G.exact_divisors() == (1, 3, 4, 12)
    for bad in (2, 6, 5, 0, -3, 1.5, "3"):
        with pytest.raises(InputError, match="exact divisor"):
            G.atkin_lehner(bad)


def test_reflect_and_contains():
    N = 20
    G = gamma0(N)
    gens = np.array(_generators_sample(N, count=40, seed=3))
    assert np.all(G.contains(gens))
    J = G.reflect(gens)
    assert np.all(G.contains(J))
    assert np.array_equal(G.reflect(J), gens)
    # J M J acts as z -> -conj(M(-conj z))
    z = 0.3 + 0.7j
    for M, MJ in zip(gens, J):
        lhs = -np.conj((M[0, 0] * (-np.conj(z)) + M[0, 1]) / (M[1, 0] * (-np.conj(z)) + M[1, 1]))
        rhs = (MJ[0, 0] * z + MJ[0, 1]) / (MJ[1, 0] * z + MJ[1, 1])
        assert abs(lhs - rhs) < 1e-12
    assert G.contains([[1, 0], [20, 1]]) is True
    assert G.contains([[1, 0], [10, 1]]) is False
    assert G.contains([[2, 0], [0, 1]]) is False
    assert G.contains(np.array([[1.0, 0.0], [40.0, 1.0]])) is True
    with pytest.raises(InputError):
        G.contains([[1.5, 0], [0, 1]])
    with pytest.raises(InputError):
        G.contains([1, 0, 0, 1])


@pytest.mark.parametrize("N", [4, 6, 9, 12, 25, 27, 30, 36, 45, 49, 100])
def test_cusp_of_is_invariant(N):
    G = gamma0(N)
    gens = _generators_sample(N, count=15, seed=N)
    assert G.cusp_of(1, 0) == 0 and G.cusp_of(-7, 0) == 0
    assert G.cusp_of(1, N) == 0 and G.cusp_of(0, 1) == 1 and G.cusp_of(0, -5) == 1
    for cusp in G.cusps:
        for g in gens:
            a2 = g[0][0] * cusp.a + g[0][1] * cusp.c
            c2 = g[1][0] * cusp.a + g[1][1] * cusp.c
            assert G.cusp_of(a2, c2) == cusp.index
            assert G.cusp_of(3 * a2, 3 * c2) == cusp.index
    with pytest.raises(InputError, match="0/0"):
        G.cusp_of(0, 0)
    with pytest.raises(InputError):
        G.cusp_of(0.5, 1)


def test_apply_scaling_roundtrip():
    G = gamma0(30)
    x, y = np.array([0.1, -0.4]), np.array([0.05, 2.0])
    for cusp in G.cusps:
        X, Y = cusp.apply_scaling(x, y)
        x2, y2 = cusp.apply_inverse_scaling(X, Y)
        assert np.allclose(x2, x) and np.allclose(y2, y)
