"""Group invariants of Gamma0(N) against an independent brute force over P^1(Z/NZ).

Sources of the classical formulas checked here: Shimura, Introduction to the Arithmetic
Theory of Automorphic Functions (1971), §1.6 and Prop. 1.43; Diamond & Shurman, A First
Course in Modular Forms (2005), §3.8 (cusps, widths) and §3.9 (genus, epsilon_2,
epsilon_3). The brute force below uses only the definitions: right cosets
Gamma0(N)\\SL2(Z) <-> P^1(Z/NZ) via the bottom row (D&S §3.8), cusps = orbits of
(c : d) -> (c : c + d), elliptic points = fixed points of S and ST on the cosets.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from maasscomp.errors import InputError
from maasscomp.groups import Gamma0, gamma0

GENUS_FILE = Path(__file__).resolve().parents[2] / "data" / "reference" / "modular_curves_genus.txt"
LEVELS = range(1, 201)


def _brute(N: int) -> dict:
    """Invariants of Gamma0(N) from the definitions (independent of the package)."""
    c, d = np.meshgrid(np.arange(N), np.arange(N), indexing="ij")
    valid = np.gcd(np.gcd(c, d), N) == 1
    units = [u for u in range(N) if math.gcd(u, N) == 1]
    lab = np.full((N, N), N * N, dtype=np.int64)
    for u in units:
        lab = np.minimum(lab, ((u * c) % N) * N + (u * d) % N)
    lab[~valid] = -1
    classes = np.unique(lab[valid])
    rc, rd = np.divmod(classes, N)

    def L(cc, dd):
        return lab[cc % N, dd % N]

    nxt = dict(zip(classes.tolist(), L(rc, rc + rd).tolist()))
    seen: set[int] = set()
    widths = []
    for k in classes.tolist():
        if k in seen:
            continue
        n, j = 0, k
        while j not in seen:
            seen.add(j)
            j = nxt[j]
            n += 1
        widths.append(n)
    nu2 = int(np.sum(L(rd, -rc) == classes))  # (c, d) S = (d, -c)
    nu3 = int(np.sum(L(rd, rd - rc) == classes))  # (c, d) [[0,-1],[1,1]] = (d, d - c)
    mu = len(classes)
    twelve_g = 12 + mu - 3 * nu2 - 4 * nu3 - 6 * len(widths)
    return dict(
        mu=mu, widths=sorted(widths), nu2=nu2, nu3=nu3, genus=twelve_g // 12, g_int=twelve_g % 12 == 0,
        lab=lab, classes=classes,
    )


def _genus_lists() -> dict[int, set[int]]:
    out = {}
    for line in GENUS_FILE.read_text().splitlines():
        if line.startswith("#") or not line.strip():
            continue
        g, levels = line.split(":")
        out[int(g)] = {int(v) for v in levels.split()}
    return out


@pytest.fixture(scope="module")
def brute_all():
    return {N: _brute(N) for N in LEVELS}


def test_invariants_match_brute_force(brute_all):
    # Shimura 1971 Prop. 1.43 and §1.6; Diamond & Shurman 2005 §3.8-3.9
    for N in LEVELS:
        G = gamma0(N)
        B = brute_all[N]
        assert B["g_int"]
        assert G.index == B["mu"], N
        assert G.n_cusps == len(B["widths"]), N
        assert sorted(c.width for c in G.cusps) == B["widths"], N
        assert sum(c.width for c in G.cusps) == G.index
        assert (G.nu2, G.nu3) == (B["nu2"], B["nu3"]), N
        assert G.genus == B["genus"], N
        # closed forms (docs/theory.md §1.1)
        fac = [p for p in range(2, N + 1) if N % p == 0 and all(p % q for q in range(2, p))]
        assert G.primes == tuple(fac)
        assert G.index == round(N * math.prod(1 + 1 / p for p in fac))
        phi = lambda n: sum(1 for a in range(1, n + 1) if math.gcd(a, n) == 1)  # noqa: E731
        assert G.n_cusps == sum(phi(math.gcd(c, N // c)) for c in range(1, N + 1) if N % c == 0)
        assert G.is_squarefree == all(N % (p * p) for p in fac)
        assert G.area == pytest.approx(math.pi * G.index / 3, rel=1e-15)


def test_squarefree_cusps_one_per_divisor():
    # docs/theory.md §1.1: squarefree N has 2^omega(N) cusps 1/c, width N/c
    for N in (1, 2, 3, 5, 6, 10, 15, 30, 105, 210):
        G = gamma0(N)
        assert G.is_squarefree
        assert G.n_cusps == 2 ** len(G.primes)
        for cusp in G.cusps:
            assert cusp.width == N // cusp.c
            assert cusp.atkin_lehner_Q == cusp.width


def test_genus_zero_and_one_levels():
    # Ogg 1974 (lists in data/reference/modular_curves_genus.txt, from memory), N <= 200
    lists = _genus_lists()
    assert set(lists) == {0, 1}
    g0 = {N for N in LEVELS if gamma0(N).genus == 0}
    g1 = {N for N in LEVELS if gamma0(N).genus == 1}
    assert g0 == lists[0]
    assert g1 == lists[1]


def test_coset_reps_and_p1_index(brute_all):
    # the package's CRT index of P^1(Z/NZ) must induce exactly the brute-force classes
    for N in list(range(1, 61)) + [64, 72, 81, 100, 125, 128, 180, 196, 200]:
        G = gamma0(N)
        B = brute_all[N]
        lab = B["lab"]
        c, d = np.nonzero(lab >= 0)
        idx = G.coset_index(np.stack([np.stack([np.ones_like(c), np.zeros_like(c)], -1),
                                      np.stack([c, d], -1)], -2))
        assert idx.min() == 0 and idx.max() == G.index - 1
        # same partition: label -> index is a bijection
        pairs = set(zip(lab[c, d].tolist(), idx.tolist()))
        assert len(pairs) == G.index
        R = G.coset_reps()
        assert R.shape == (G.index, 2, 2) and R.dtype == np.int64
        assert np.array_equal(R[0], np.eye(2, dtype=np.int64))
        assert np.all(R[:, 0, 0] * R[:, 1, 1] - R[:, 0, 1] * R[:, 1, 0] == 1)
        assert len(set(lab[R[:, 1, 0] % N, R[:, 1, 1] % N].tolist())) == G.index
        assert np.array_equal(G.coset_index(R), np.arange(G.index))
        # each representative A_j T^m maps infinity to (a translate of) its cusp
        cc = G.coset_cusp()
        for k in range(G.index):
            j = int(cc[k])
            if R[k, 1, 0] == 0:
                assert j == 0
            else:
                assert G.cusp_of(int(R[k, 0, 0]), int(R[k, 1, 0])) == j


def test_cusp_labels():
    # Diamond & Shurman 2005 §3.8: a/c, c | N, width N / gcd(c^2, N)
    for N in range(1, 101):
        G = gamma0(N)
        assert G.cusps[0].index == 0 and (G.cusps[0].a, G.cusps[0].c) == (1, N)
        assert G.cusps[0].width == 1 and G.cusps[0].is_infinity
        seen = set()
        for j, cusp in enumerate(G.cusps):
            assert cusp.index == j
            assert N % cusp.c == 0 and math.gcd(cusp.a, cusp.c) == 1
            assert cusp.width == N // math.gcd(cusp.c**2, N)
            assert G.cusp_of(cusp.a, cusp.c) == j
            seen.add(G.cusp_of(cusp.a, cusp.c))
        if N > 1:
            assert (G.cusps[1].a, G.cusps[1].c) == (0, 1) and G.cusps[1].width == N
        assert len(seen) == G.n_cusps


@pytest.mark.parametrize("bad", [0, -3, 2.5, "6", None, True])
def test_bad_level(bad):
    with pytest.raises(InputError, match=repr(bad).replace("(", r"\(").replace(".", r"\.")):
        gamma0(bad)


def test_cached_and_equal():
    assert gamma0(12) is gamma0(12)
    assert gamma0(12) == Gamma0(12)
    assert gamma0(np.int64(12)) is gamma0(12)
    assert gamma0(6) != gamma0(12)
    assert "Gamma0(12)" in repr(gamma0(12))
