"""All cusp forms with R <= R_max at each level N <= N_max: wall time and cost growth.

Goal (issue): the whole N <= 12, R <= 10 table in <= 10 minutes on 2 cores. Prints time and
form count per level, and fitted exponents of the cost in N (at fixed R) and in R (level 1
windows). Levels that are not squarefree are searched with the multi-cusp system when it is
available. Run: ``python benchmarks/bench_levels.py [N_max] [R_max]``.
"""

from __future__ import annotations

import sys
import time

import numpy as np
from joblib import Parallel, delayed

from maasscomp.groups import gamma0
from maasscomp.spectrum.search import search_classes, search_window, symmetry_classes


def level_task(N: int, parity: str, R_max: float):
    """All forms of one parity at level N (all Atkin-Lehner classes at once when squarefree)."""
    import os

    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
    g = gamma0(N)
    t = time.perf_counter()
    if g.is_squarefree:
        res = search_classes(g, symmetry_classes(g, (parity,)), 0.5, R_max)
        n = sum(len(r.forms) for r in res.values())
    else:
        from maasscomp.spectrum.general import search_window_general

        n = len(search_window_general(g, parity, 0.5, R_max).forms)
    return N, n, time.perf_counter() - t


def main() -> None:
    N_max = int(sys.argv[1]) if len(sys.argv) > 1 else 12
    R_max = float(sys.argv[2]) if len(sys.argv) > 2 else 10.0
    # biggest levels first so the two workers finish together
    tasks = [(N, p) for N in range(N_max, 0, -1) for p in ("even", "odd")]
    t0 = time.perf_counter()
    out = Parallel(n_jobs=2)(delayed(level_task)(N, p, R_max) for N, p in tasks)
    wall = time.perf_counter() - t0
    per = {}
    for N, n, t in out:
        a, b = per.get(N, (0, 0.0))
        per[N] = (a + n, b + t)
    print(f"{'N':>3} {'forms':>6} {'cpu s':>8}")
    for N in sorted(per):
        print(f"{N:>3} {per[N][0]:>6} {per[N][1]:>8.2f}")
    print(f"wall time for N <= {N_max}, R <= {R_max} on 2 workers: {wall:.1f} s (goal <= 600 s)")
    Ns = np.array(sorted(per), dtype=float)
    ts = np.array([per[int(N)][1] for N in Ns])
    sel = Ns >= 2
    if sel.sum() >= 2:
        k = np.polyfit(np.log(Ns[sel]), np.log(ts[sel]), 1)[0]
        print(f"fitted cost exponent in N (cpu time ~ N^k): k = {k:.2f}")
    Rs = np.array([10.0, 20.0, 40.0])
    tR = []
    for R in Rs:
        t = time.perf_counter()
        search_classes(gamma0(1), symmetry_classes(gamma0(1)), R - 1.0, R)
        tR.append(time.perf_counter() - t)
    kR = np.polyfit(np.log(Rs), np.log(tR), 1)[0]
    print("level 1, unit windows [R-1, R]: " + ", ".join(f"R={R:.0f}: {t:.2f} s" for R, t in zip(Rs, tR)))
    print(f"fitted cost exponent in R (time per unit window ~ R^k): k = {kR:.2f}")


if __name__ == "__main__":
    main()
