"""All cusp forms with R <= R_max at every level N <= N_max: wall time, cost per form, growth.

Goal: every form with R <= 10 at every N <= 30 (about 5,000 forms with multiplicity by Weyl's
law), every form verified, in <= 30 min wall on 2 cores; the cost per form at non-squarefree
levels (multi-cusp system) within 2x of squarefree levels (Atkin--Lehner system) of similar
index.

One task per level and parity (the Atkin--Lehner classes of a parity share sample points and
K-Bessel values), biggest levels first on two worker processes. Printed per level: forms
(with multiplicity), distinct eigenvalues, CPU seconds, CPU seconds per form, the system used
and its size; then the per-form cost of non-squarefree levels against squarefree levels of
similar index, the fitted exponent of the CPU time in N, and the Weyl's-law comparison where
the project has Weyl's law (squarefree levels). As a reference measured in the same run, the
cost of one LU factorisation of each level's largest search matrix.
Run: ``python benchmarks/bench_levels.py [N_max] [R_max]``.
"""

from __future__ import annotations

import os
import sys
import time

import numpy as np
from joblib import Parallel, delayed

R_MIN = 0.5


def level_task(N: int, parity: str, R_max: float):
    os.environ["OPENBLAS_NUM_THREADS"] = "1"
    from maasscomp.groups import gamma0
    from maasscomp.spectrum.search import search_forms

    g = gamma0(N)
    t, c = time.perf_counter(), time.process_time()
    res = search_forms(g, R_MIN, R_max, (parity,))
    bad = [f for f in res.forms if not f.hecke_residual <= 1e-6]
    rows = [(f.R, f.multiplicity, f.basis_index, f.symmetry.label) for f in res.forms]
    return N, parity, rows, len(res.rejected), len(bad), res.system, time.perf_counter() - t, time.process_time() - c


def lu_reference(N: int, R_max: float) -> tuple[int, float]:
    import scipy.linalg as sla

    from maasscomp.groups import gamma0
    from maasscomp.hejhal.family import build_family
    from maasscomp.hejhal.params import choose_params
    from maasscomp.spectrum.search import symmetry_classes

    g = gamma0(N)
    p = choose_params(R_max + 1.0, 0.80 * g.fundamental_domain_height)
    cls = symmetry_classes(g, ("odd",))[0]
    S = build_family(g, [cls], p).systems[cls]
    A = S.matrix_from_k(S.samples.k_values(R_max))
    t = time.perf_counter()
    for _ in range(5):
        sla.lu_factor(A)
    return S.size, (time.perf_counter() - t) / 5


def main() -> None:
    N_max = int(sys.argv[1]) if len(sys.argv) > 1 else 30
    R_max = float(sys.argv[2]) if len(sys.argv) > 2 else 10.0
    from maasscomp.groups import gamma0

    print(f"machine load (1 min) at start: {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
    tasks = sorted(((N, p) for N in range(1, N_max + 1) for p in ("even", "odd")),
                   key=lambda t: -gamma0(t[0]).index * (gamma0(t[0]).n_cusps if not gamma0(t[0]).is_squarefree else 1))
    t0, c0 = time.perf_counter(), time.process_time()
    out = Parallel(n_jobs=2)(delayed(level_task)(N, p, R_max) for N, p in tasks)
    wall = time.perf_counter() - t0
    per: dict[int, dict] = {}
    for N, p, rows, rej, bad, system, w, c in out:
        d = per.setdefault(N, {"forms": 0, "eig": 0, "cpu": 0.0, "rej": 0, "bad": 0, "system": system, "R": []})
        d["forms"] += len(rows)
        d["eig"] += sum(1 for r in rows if r[2] == 0)
        d["cpu"] += c
        d["rej"] += rej
        d["bad"] += bad
        d["R"] += [r[0] for r in rows]
    total_forms = sum(d["forms"] for d in per.values())
    total_cpu = sum(d["cpu"] for d in per.values())
    print(f"{'N':>3} {'index':>5} {'system':>12} {'size':>5} {'forms':>6} {'eigen':>6} {'cpu s':>8} "
          f"{'s/form':>7} {'LU ms':>7} {'rej':>4} {'Weyl':>8}")
    from maasscomp.spectrum.weyl import expected_in_window
    from maasscomp.errors import InputError

    for N in sorted(per):
        d = per[N]
        g = gamma0(N)
        size, t_lu = lu_reference(N, R_max)
        try:
            weyl = f"{expected_in_window(N, R_MIN, R_max):8.1f}"
        except InputError:
            weyl = "       -"
        print(f"{N:>3} {g.index:>5} {d['system']:>12} {size:>5} {d['forms']:>6} {d['eig']:>6} {d['cpu']:>8.1f} "
              f"{d['cpu'] / max(1, d['forms']):>7.3f} {1e3 * t_lu:>7.1f} {d['rej']:>4} {weyl}"
              + (f"  ({d['bad']} forms above Hecke 1e-6!)" if d["bad"] else ""))
    print(f"total: {total_forms} forms (with multiplicity) for N <= {N_max}, R <= {R_max}; {wall:.1f} s wall "
          f"on 2 workers (goal <= 1800 s), {total_cpu:.1f} s CPU in tasks")
    # per-form cost: non-squarefree against squarefree levels of similar index
    sq = [(gamma0(N).index, per[N]["cpu"] / max(1, per[N]["forms"])) for N in per if gamma0(N).is_squarefree and N > 1]
    print("per-form cost, non-squarefree level against the squarefree levels of nearest index:")
    for N in sorted(per):
        g = gamma0(N)
        if g.is_squarefree:
            continue
        near = sorted(sq, key=lambda t: abs(np.log(t[0] / g.index)))[:2]
        ref = np.mean([c for _, c in near])
        mine = per[N]["cpu"] / max(1, per[N]["forms"])
        print(f"  N = {N:>2} (index {g.index:>3}): {mine:.3f} s/form against {ref:.3f} s/form at squarefree "
              f"index {', '.join(str(i) for i, _ in near)}: ratio {mine / ref:.2f} (goal <= 2)")
    Ns = np.array(sorted(N for N in per if N >= 2), dtype=float)
    ts = np.array([per[int(N)]["cpu"] for N in Ns])
    k = np.polyfit(np.log(Ns), np.log(ts), 1)[0]
    print(f"fitted exponent of the CPU time per level in N (time ~ N^k, 2 <= N <= {N_max}): k = {k:.2f}")
    print(f"machine load (1 min) at end: {os.getloadavg()[0]:.1f}")


if __name__ == "__main__":
    main()
