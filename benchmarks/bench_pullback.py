"""Benchmark: Gamma0(N).pullback on 10^5 points (run: python tests/groups/bench_pullback.py).

Two point sets per level: (a) Hejhal-style samples, horocycle points at 0.9 Y0 in every
cusp coordinate mapped by sigma_j (what the solver pulls back); (b) random points with
Im z log-uniform in [1e-5, 1]. The reference measured in the same run is the bare
SL2(Z) reduction into the standard domain of the same points (the first step of every
pullback), so the ratio shows the price of the Gamma0(N) part.
"""

from __future__ import annotations

import time

import numpy as np

from maasscomp.groups import gamma0
from maasscomp.groups.gamma0 import _reduce_sl2z


def _best_of(fn, repeat: int = 3) -> float:
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def main(n: int = 100_000, levels: tuple[int, ...] = (1, 6, 12, 25, 49, 100)) -> None:
    rng = np.random.default_rng(0)
    print(f"pullback of n = {n} points (best of 3)")
    print(f"{'N':>5} {'mu':>5} {'cusps':>5} {'Y0':>9} {'t_hejhal[s]':>11} {'t_random[s]':>11} "
          f"{'t_sl2z[s]':>9} {'ratio':>6}")
    for N in levels:
        G = gamma0(N)
        Y0 = G.Y0
        m = n // G.n_cusps + 1
        xs, ys = [], []
        for cusp in G.cusps:
            sx, sy = cusp.apply_scaling((np.arange(m) + 0.5) / m - 0.5, np.full(m, 0.9 * Y0))
            xs.append(sx)
            ys.append(sy)
        hx, hy = np.concatenate(xs)[:n], np.concatenate(ys)[:n]
        rx, ry = rng.uniform(-3, 3, n), 10 ** rng.uniform(-5, 0, n)
        G.pullback(hx[:10], hy[:10])  # build the lazy tables outside the timing
        t_h = _best_of(lambda: G.pullback(hx, hy))
        t_r = _best_of(lambda: G.pullback(rx, ry))
        t_ref = _best_of(lambda: _reduce_sl2z(rx, ry))
        print(f"{N:5d} {G.index:5d} {G.n_cusps:5d} {Y0:9.6f} {t_h:11.3f} {t_r:11.3f} {t_ref:9.3f} "
              f"{t_r / t_ref:6.2f}")


if __name__ == "__main__":
    main()
