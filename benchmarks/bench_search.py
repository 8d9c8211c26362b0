"""Wall time to find and verify every PSL(2,Z) cusp form with R < 20 (there are ten).

Goal: <= 20 s on 2 cores. Prints the serial time, the time with the two parities on two
worker processes, and the forms found. Run: ``python benchmarks/bench_search.py [R_max]``.
"""

from __future__ import annotations

import sys
import time

from joblib import Parallel, delayed

from maasscomp.groups import gamma0
from maasscomp.hejhal.types import SymmetryClass
from maasscomp.spectrum.search import search_classes, search_window

R_MIN = 1.0


def run(parity: str, R_max: float):
    t = time.perf_counter()
    res = search_window(gamma0(1), SymmetryClass(parity), R_MIN, R_max)
    return parity, res, time.perf_counter() - t


def main() -> None:
    R_max = float(sys.argv[1]) if len(sys.argv) > 1 else 20.0
    run("odd", 10.0)  # warm caches and compiled kernels
    t0 = time.perf_counter()
    serial = [run(p, R_max) for p in ("even", "odd")]
    t_serial = time.perf_counter() - t0
    t0 = time.perf_counter()
    both = search_classes(gamma0(1), [SymmetryClass("even"), SymmetryClass("odd")], R_MIN, R_max)
    t_shared = time.perf_counter() - t0
    assert sorted(f.R for r in both.values() for f in r.forms) == sorted(f.R for _, r, _ in serial for f in r.forms)
    t0 = time.perf_counter()
    par = Parallel(n_jobs=2)(delayed(run)(p, R_max) for p in ("even", "odd"))
    t_par = time.perf_counter() - t0
    forms = sorted((f.R, p) for p, res, _ in serial for f in res.forms)
    for p, res, t in serial:
        print(f"{p:>4}: {len(res.forms)} forms, {len(res.candidates)} sign changes, grid step "
              f"{res.grid_step:.4f}, M0 = {res.params.M0}, {t:.2f} s")
    print(f"forms with {R_MIN} <= R <= {R_max}: {len(forms)}")
    for R, p in forms:
        print(f"  R = {R:.12f}  {p}")
    print(f"serial, one parity at a time       : {t_serial:.2f} s")
    print(f"serial, both parities on shared K  : {t_shared:.2f} s   (goal <= 20 s)")
    print(f"2 workers, one parity each         : {t_par:.2f} s   (speed-up {t_serial / t_par:.2f}x over one at a time)")


if __name__ == "__main__":
    main()
