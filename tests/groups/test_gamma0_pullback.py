"""Pullback into the fundamental domain of Gamma0(N): property tests.

What is checked (no outside numbers except where a source is named):
* every result lies in its cusp strip |x| <= 1/2 at height >= Y0;
* the returned matrices are in Gamma0(N) with det 1 and gamma z == sigma_j w;
* the result is a function of the Gamma0(N)-orbit: z and gamma' z give the same height
  always, and the same (cusp, x mod 1) away from the measure-zero boundaries;
* N = 1 gives the standard domain {|x| <= 1/2, |z| >= 1} (common practice).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from maasscomp.errors import InputError
from maasscomp.groups import gamma0

LEVELS = [1, 2, 3, 5, 6, 7, 10, 11, 13, 15, 30, 4, 8, 9, 12, 16, 18, 25, 27, 45, 49]


def _mobius(g: np.ndarray, z: np.ndarray) -> np.ndarray:
    g = np.asarray(g, dtype=float)
    return (g[..., 0, 0] * z + g[..., 0, 1]) / (g[..., 1, 0] * z + g[..., 1, 1])


def _random_gamma0(N: int, rng: np.random.Generator, size: int = 12) -> np.ndarray:
    """Random elements of Gamma0(N) with small entries (bottom row (kN, d), gcd = 1)."""
    out = []
    while len(out) < size:
        k = int(rng.integers(-3, 4))
        c = k * N
        d = int(rng.integers(-15, 16))
        if math.gcd(c, d) != 1:
            continue
        # a d - b c = 1
        if c == 0:
            a, b = d, int(rng.integers(-5, 6))
        else:
            a = pow(d, -1, abs(c)) if abs(c) > 1 else 0
            b = (a * d - 1) // c
        g = np.array([[a, b], [c, d]], dtype=np.int64)
        assert g[0, 0] * g[1, 1] - g[0, 1] * g[1, 0] == 1
        out.append(g)
    return np.array(out)


def _check_result(G, x, y, P):
    """Strip, height bound, group membership and the identity gamma z = sigma_j w."""
    z = np.asarray(x) + 1j * np.asarray(y)
    assert P.gamma.shape == z.shape + (2, 2) and P.gamma.dtype == np.int64
    assert np.all(G.contains(P.gamma))
    assert np.all(np.abs(P.x) <= 0.5 + 1e-12)
    # Y0 is exact for N = 1 (corner heights may round 1 ulp below sqrt(3)/2)
    assert np.all(P.y >= G.fundamental_domain_height * (1 - 1e-14))
    assert np.all((P.cusp >= 0) & (P.cusp < G.n_cusps))
    M = np.array([c.scaling for c in G.cusps], dtype=float)[P.cusp]
    sw = _mobius(M, P.x + 1j * P.y)
    gz = _mobius(P.gamma, z)
    # conditioning of z -> gamma z: input rounding 1e-16 |z| grows by |z| / y
    tol = 1e-12 * (1 + np.abs(z)) ** 2 / np.minimum(np.asarray(y), 1.0) * np.maximum(np.abs(sw), 1)
    assert np.all(np.abs(gz - sw) <= tol)
    # the same via the Cusp helper (sigma^{-1} gamma z = w)
    for j in np.unique(P.cusp):
        sel = P.cusp == j
        wx, wy = G.cusps[j].apply_inverse_scaling(gz.real[sel], gz.imag[sel])
        # sigma^{-1} stretches errors of gz by Im(w) / Im(gz)
        rel = 1e-13 * ((1 + np.abs(z[sel])) ** 2 * (1 + np.abs(gz[sel])) / (np.asarray(y)[sel] * gz.imag[sel]))
        assert np.all(np.abs(wy - P.y[sel]) <= np.maximum(rel, 1e-12) * P.y[sel])


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    N=st.sampled_from(LEVELS),
    x=st.floats(-6.0, 6.0, allow_nan=False),
    y=st.one_of(st.floats(1e-5, 40.0), st.floats(1e-5, 1e-3)),
)
def test_single_point_properties(N, x, y):
    G = gamma0(N)
    P = G.pullback(x, y)
    assert P.gamma.shape == (2, 2) and P.x.shape == ()
    _check_result(G, np.array(x), np.array(y), P)
    # the result is already reduced: pulling back sigma_j w gives the same height
    sx, sy = G.cusps[int(P.cusp)].apply_scaling(P.x, P.y)
    P2 = G.pullback(sx, sy)
    assert P2.y == pytest.approx(float(P.y), rel=1e-9)


@settings(max_examples=40, deadline=None)
@given(N=st.sampled_from(LEVELS), seed=st.integers(0, 2**32 - 1))
def test_orbit_invariance(N, seed):
    """z and gamma' z (gamma' in Gamma0(N)) pull back to the same (cusp, w)."""
    G = gamma0(N)
    rng = np.random.default_rng(seed)
    n = 200
    x = rng.uniform(-3, 3, n)
    y = np.where(rng.random(n) < 0.3, 10 ** rng.uniform(-5, -3, n), 10 ** rng.uniform(-3, 1, n))
    g = _random_gamma0(N, rng, size=n)
    z = x + 1j * y
    gz = _mobius(g, z)
    keep = gz.imag > 1e-7
    assume(keep.sum() > n // 2)
    z, gz = z[keep], gz[keep]
    P1 = G.pullback(z.real, z.imag)
    P2 = G.pullback(gz.real, gz.imag)
    _check_result(G, z.real, z.imag, P1)
    _check_result(G, gz.real, gz.imag, P2)
    rel = 1e-12 * (1 + np.abs(z) ** 2 + np.abs(gz) ** 2) / np.minimum(z.imag, gz.imag)
    # the height is a function on Gamma0(N)\H: always equal
    assert np.all(np.abs(P1.y - P2.y) <= rel * P1.y)
    # cusp and x agree except at ties (boundaries between cusp regions, measure zero)
    dx = np.abs((P1.x - P2.x + 0.5) % 1.0 - 0.5)
    same = (P1.cusp == P2.cusp) & (dx <= rel * 10)
    assert same.mean() >= 0.99, (N, np.flatnonzero(~same)[:5])


@pytest.mark.parametrize("N", [2, 6, 9, 12, 25, 49])
def test_near_real_axis(N):
    G = gamma0(N)
    rng = np.random.default_rng(N)
    x = rng.uniform(-1, 1, 2000)
    y = np.full(2000, 1e-5)
    P = G.pullback(x, y)
    _check_result(G, x, y, P)
    y6 = np.full(2000, 1e-6)
    _check_result(G, x, y6, G.pullback(x, y6))


def test_modular_group_standard_domain():
    # N = 1: the standard domain |x| <= 1/2, |z| >= 1 (common practice)
    G = gamma0(1)
    rng = np.random.default_rng(0)
    x = rng.uniform(-10, 10, 5000)
    y = 10 ** rng.uniform(-6, 1, 5000)
    P = G.pullback(x, y)
    assert np.all(P.cusp == 0)
    assert np.all(np.abs(P.x) <= 0.5 + 1e-12)
    assert np.all(P.x**2 + P.y**2 >= 1 - 1e-9)
    assert np.all(P.y >= math.sqrt(3) / 2 * (1 - 1e-12))
    w = _mobius(P.gamma, x + 1j * y)
    assert np.allclose(w.real, P.x, atol=1e-6) and np.allclose(w.imag, P.y, rtol=1e-6)
    # points already in the domain stay put with the identity matrix
    Pin = G.pullback([0.1, -0.3, 0.0], [1.5, 2.0, 7.0])
    assert np.array_equal(Pin.gamma, np.broadcast_to(np.eye(2, dtype=np.int64), (3, 2, 2)))
    # the reducing matrix of a simple point: -1/(2i) = i/2 -> S
    P1 = G.pullback(0.0, 0.5)
    assert P1.y == pytest.approx(2.0) and abs(P1.x) < 1e-15
    assert np.array_equal(P1.gamma, [[0, -1], [1, 0]])


def test_shape_and_broadcast():
    G = gamma0(6)
    P = G.pullback(np.zeros((3, 4)), 0.01)
    assert P.x.shape == (3, 4) and P.gamma.shape == (3, 4, 2, 2) and P.cusp.shape == (3, 4)


@pytest.mark.parametrize("x,y", [(0.0, 0.0), (0.0, -1.0), (float("nan"), 1.0), (0.0, float("inf"))])
def test_bad_points(x, y):
    with pytest.raises(InputError, match="upper half plane"):
        gamma0(4).pullback(x, y)


def test_y0_values():
    G1 = gamma0(1)
    assert G1.fundamental_domain_height == math.sqrt(3) / 2
    # Gamma0(2): the regions of infinity and 0 meet on |z|^2 = 1/2, lowest at (1 + i)/2,
    # height 1/2 in both cusps (derived by us: Im(-1/(2z)) = y / (2|z|^2))
    assert gamma0(2).Y0 == pytest.approx(0.5, rel=2e-6)
    assert gamma0(2).Y0 <= 0.5
    for N in (3, 6, 11, 12, 25, 49, 60):
        assert gamma0(N).Y0 >= math.sqrt(3) / (2 * N)  # docs/theory.md §1.3 elementary bound


@pytest.mark.parametrize("N", [2, 5, 6, 11, 12, 18, 25])
def test_y0_is_attained(N):
    """Y0 is a lower bound of the pulled-back heights and nearly attained (<= 2 % gap)."""
    G = gamma0(N)
    # above y = Y0 * (max width) every coset's own cusp already gives height > Y0
    ytop = 1.05 * G.Y0 * max(c.width for c in G.cusps)
    X, Yv = np.meshgrid(np.linspace(-0.5, 0.5, 121), np.linspace(math.sqrt(3) / 2, max(ytop, 1.0), 161))
    inside = X**2 + Yv**2 >= 1
    t = np.linspace(math.pi / 3, 2 * math.pi / 3, 241)
    z = np.concatenate([(X + 1j * Yv)[inside], np.exp(1j * t)])
    R = G.coset_reps()
    pts = _mobius(R[:, None], z[None, :]).ravel()
    P = G.pullback(pts.real, pts.imag)
    assert P.y.min() >= G.Y0
    assert P.y.min() <= 1.02 * G.Y0


def _exact_w(g, M, x, y):
    """sigma^{-1} gamma z in exact rational arithmetic for the float point x + i y."""
    from fractions import Fraction

    X, Y = Fraction(float(x)), Fraction(float(y))
    G = [[int(v) for v in row] for row in np.asarray(g).tolist()]
    A = [[M[1][1], -M[0][1]], [-M[1][0], M[0][0]]]
    P = [[sum(A[i][k] * G[k][j] for k in range(2)) for j in range(2)] for i in range(2)]
    (a, b), (c, d) = P
    # (a z + b) / (c z + d) with z = X + iY
    nr, ni = a * X + b, a * Y
    dr, di = c * X + d, c * Y
    den = dr * dr + di * di
    wr = (nr * dr + ni * di) / den
    wi = (ni * dr - nr * di) / den
    return wr - round(wr), wi


@pytest.mark.parametrize("N", [1, 12, 30, 45])
def test_accuracy_against_exact_arithmetic(N):
    """w agrees with exact rational arithmetic to ~1e-16 |z|^2 / y (documented bound)."""
    G = gamma0(N)
    rng = np.random.default_rng(7 + N)
    x = rng.uniform(-2, 2, 40)
    y = 10 ** rng.uniform(-6, -1, 40)
    P = G.pullback(x, y)
    for i in range(x.size):
        wr, wi = _exact_w(P.gamma[i], G.cusps[int(P.cusp[i])].scaling, x[i], y[i])
        bound = 1e-15 * (1 + x[i] ** 2 + y[i] ** 2) / y[i]
        assert abs(float(wi) - P.y[i]) <= bound * P.y[i]
        dx = abs((float(wr) - P.x[i] + 0.5) % 1.0 - 0.5)
        assert dx <= bound * P.y[i]


def test_too_close_to_axis():
    G = gamma0(12)
    P = G.pullback([0.3141592653589793, -0.7234], [1e-12, 1e-12])
    assert np.all(G.contains(P.gamma))
    with pytest.raises(InputError, match="too close to the real axis"):
        G.pullback(-0.7234, 1e-40)
