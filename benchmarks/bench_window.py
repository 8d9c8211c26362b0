"""Every PSL(2,Z) form in a window at large R: wall time on 2 cores, forms per second, and
the cost growth with R.

Parts (run all by default, or name some):

* ``1000``  -- the window [999.5, 1000.5], both parities, split in two halves searched on two
  worker processes. Goal: every form (Weyl's law expects about 162) in <= 60 s wall.
* ``3000``  -- the window [3000, 3000.2] (about 100 forms) the same way. Goal: <= 5 min.
* ``rate``  -- one process, windows holding about 24 forms at R = 300, 1000, 3000 (and 10^4
  with ``rate10k``): CPU seconds per form and the fitted exponent of the cost in R.
* ``agree`` -- the 1000 window searched a second time with other heights (0.86/0.74 Y0),
  the lattice shifted by half a spacing and twice the expansion points: the two sets agree
  (an independent check of completeness, no outside list used).

Reference measured in the same run: the cost of one log-determinant of the Hejhal matrix at
the same R and size (what the former determinant-sign scan paid per grid point and height;
it used 12 grid points per mean spacing of a class at two heights, i.e. about 24 per form
before refinement), and of one LU factorisation of that size. Searches store no sup-norm
scans. Run: ``python benchmarks/bench_window.py [1000] [3000] [rate] [rate10k] [agree]``.
"""

from __future__ import annotations

import os
import sys
import time

import numpy as np
from joblib import Parallel, delayed

os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")


def _search(a: float, b: float, **kw):
    from maasscomp.groups import gamma0
    from maasscomp.spectrum.search import SearchSettings, search_forms

    os.environ["OPENBLAS_NUM_THREADS"] = "1"
    t, c = time.perf_counter(), time.process_time()
    res = search_forms(gamma0(1), a, b, settings=SearchSettings(**kw))
    rows = [(f.symmetry.label, f.R, f.R_error, f.hecke_residual, f.extra["R_heights"]) for f in res.forms]
    return rows, len(res.rejected), res.stats, time.perf_counter() - t, time.process_time() - c


def reference(R: float) -> tuple[float, float, int]:
    """(one log-determinant, one LU) in seconds for the Y1 system at R, and its size."""
    import scipy.linalg as sla

    from maasscomp.groups import gamma0
    from maasscomp.hejhal.params import choose_params
    from maasscomp.hejhal.system import HejhalSystem
    from maasscomp.hejhal.types import SymmetryClass

    g = gamma0(1)
    S = HejhalSystem(g, SymmetryClass("odd"), choose_params(R + 1, 0.92 * g.fundamental_domain_height))
    S.log_det(R)
    reps = 5
    t = time.perf_counter()
    for i in range(reps):
        S.log_det(R + 1e-3 * i)
    t_det = (time.perf_counter() - t) / reps
    A = S.matrix(R)
    t = time.perf_counter()
    for _ in range(20):
        sla.lu_factor(A)
    return t_det, (time.perf_counter() - t) / 20, S.params.M0


def window(a: float, b: float, goal: float, label: str) -> list:
    from maasscomp.spectrum.weyl import expected_in_window

    mid = 0.5 * (a + b)
    t0 = time.perf_counter()
    parts = Parallel(n_jobs=2)(delayed(_search)(lo, hi) for lo, hi in ((a, mid), (mid, b)))
    wall = time.perf_counter() - t0
    rows = sorted({(r[0], round(r[1], 9)): r for p in parts for r in p[0]}.values(), key=lambda r: r[1])
    cpu = sum(p[4] for p in parts)
    rej = sum(p[1] for p in parts)
    exp = expected_in_window(1, a, b)
    t_det, t_lu, M0 = reference(mid)
    worst_h = max(r[3] for r in rows)
    worst_s = max(abs(r[4][0] - r[4][1]) for r in rows)
    print(f"[{a:g}, {b:g}]: {len(rows)} forms (Weyl's law expects {exp:.2f}), {rej} proposed eigenvalues "
          f"rejected; {wall:.1f} s wall on 2 workers (goal <= {goal:g} s), {cpu:.1f} s CPU, "
          f"{len(rows) / wall:.2f} forms/s wall; worst Hecke residual {worst_h:.1e}, largest two-height "
          f"spread of R {worst_s:.1e}")
    print(f"  reference at R = {mid:g} (M0 = {M0}): one log-determinant {1e3 * t_det:.1f} ms, one LU "
          f"{1e3 * t_lu:.2f} ms; the search cost {cpu / t_det / max(1, len(rows)):.1f} log-determinants "
          f"per form (the former scan: about 24 per form before refinement)")
    for p in parts:
        print(f"  half: {len(p[0])} forms, {p[3]:.1f} s wall, {p[4]:.1f} s CPU, statistics {p[2]}")
    close = [(rows[i][1], rows[i + 1][1]) for i in range(len(rows) - 1)
             if rows[i][0] == rows[i + 1][0] and rows[i + 1][1] - rows[i][1] < 1e-3]
    print(f"  pairs of one class closer than 1e-3: " + ", ".join(f"{x:.7f}/{y:.7f}" for x, y in close))
    return rows


def agree(rows_a: list) -> None:
    t0 = time.perf_counter()
    kw = dict(Y1_frac=0.86, Y2_frac=0.74, offset=0.5, steps_per_spacing=2.0, lfunction_check=False)
    parts = Parallel(n_jobs=2)(delayed(_search)(lo, hi, **kw) for lo, hi in ((999.5, 1000.0), (1000.0, 1000.5)))
    rows_b = {(r[0], round(r[1], 8)): r[1] for p in parts for r in p[0]}
    a = {(r[0], round(r[1], 8)): r[1] for r in rows_a}
    diff = max((abs(a[k] - rows_b[k]) for k in set(a) & set(rows_b)), default=0.0)
    print(f"independent second search of [999.5, 1000.5] (heights 0.86/0.74 Y0, lattice offset 0.5, "
          f"2 points per spacing): {len(rows_b)} forms in {time.perf_counter() - t0:.1f} s wall; only in the "
          f"first: {sorted(set(a) - set(rows_b))}, only in the second: {sorted(set(rows_b) - set(a))}; "
          f"largest difference of R {diff:.1e}")


def rate(Rs: list[float]) -> None:
    costs = []
    for R in Rs:
        w = 24.0 / (R / 6.0)  # N'(R) ~ R/6 forms per unit R on PSL(2,Z) (docs/theory.md §2.2)
        rows, rej, stats, wall, cpu = _search(R, R + w)
        t_det, t_lu, M0 = reference(R)
        costs.append(cpu / max(1, len(rows)))
        print(f"R = {R:g}: {len(rows)} forms in [{R:g}, {R + w:.4f}], {cpu:.1f} s CPU, {wall:.1f} s wall, "
              f"{len(rows) / cpu:.3f} forms per CPU-second; M0 = {M0}, one log-determinant {1e3 * t_det:.1f} ms "
              f"(search: {costs[-1] / t_det:.1f} per form), one LU {1e3 * t_lu:.2f} ms; {stats}")
    if len(Rs) >= 2:
        k = np.polyfit(np.log(Rs), np.log(costs), 1)[0]
        print(f"fitted exponent of the CPU time per form in R: {k:.2f}")


def main() -> None:
    parts = sys.argv[1:] or ["1000", "3000", "rate", "agree"]
    load = os.getloadavg()[0]
    print(f"machine load (1 min) at start: {load:.1f} on {os.cpu_count()} cores")
    rows = None
    if "1000" in parts or "agree" in parts:
        rows = window(999.5, 1000.5, 60.0, "1000")
    if "3000" in parts:
        window(3000.0, 3000.2, 300.0, "3000")
    if "rate" in parts or "rate10k" in parts:
        rate([300.0, 1000.0, 3000.0] + ([1e4 - 0.2] if "rate10k" in parts else []))
    if "agree" in parts and rows is not None:
        agree(rows)
    print(f"machine load (1 min) at end: {os.getloadavg()[0]:.1f}")


if __name__ == "__main__":
    main()
