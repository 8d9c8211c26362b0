"""Wall time to find and verify every PSL(2,Z) cusp form with R < 20 (there are ten).

Goal: <= 20 s on 2 cores. Prints the serial time of the search of both parities together
(they share the sample points and K-Bessel values), the time with the two parities on two
worker processes, the forms found, and as a reference measured in the same run the cost of
one determinant evaluation of the R = 20 system (what the old sign scan paid per grid point
and height). Run: ``python benchmarks/bench_search.py [R_max]``.
"""

from __future__ import annotations

import sys
import time

from joblib import Parallel, delayed

from maasscomp.groups import gamma0
from maasscomp.spectrum.search import search_forms

R_MIN = 1.0


def run(parities: tuple[str, ...], R_max: float):
    t, c = time.perf_counter(), time.process_time()
    res = search_forms(gamma0(1), R_MIN, R_max, parities)
    return res, time.perf_counter() - t, time.process_time() - c


def det_reference(R: float, reps: int = 200) -> float:
    from maasscomp.hejhal.params import choose_params
    from maasscomp.hejhal.system import HejhalSystem
    from maasscomp.hejhal.types import SymmetryClass

    g = gamma0(1)
    S = HejhalSystem(g, SymmetryClass("odd"), choose_params(R + 1, 0.92 * g.fundamental_domain_height))
    S.log_det(R)
    t = time.perf_counter()
    for i in range(reps):
        S.log_det(R + 1e-4 * i)
    return (time.perf_counter() - t) / reps


def main() -> None:
    R_max = float(sys.argv[1]) if len(sys.argv) > 1 else 20.0
    run(("odd",), 10.0)  # warm caches and compiled kernels
    both, t_serial, c_serial = run(("even", "odd"), R_max)
    t0 = time.perf_counter()
    par = Parallel(n_jobs=2)(delayed(run)((p,), R_max) for p in ("even", "odd"))
    t_par = time.perf_counter() - t0
    assert sorted(round(f.R, 9) for f in both.forms) == sorted(round(f.R, 9) for r, _, _ in par for f in r.forms)
    t_det = det_reference(R_max)
    print(f"forms with {R_MIN} <= R <= {R_max}: {len(both.forms)} (ten expected below 20)")
    for f in both.forms:
        print(f"  R = {f.R:.12f}  {f.parity:<4}  R_error {f.R_error:.1e}  Hecke {f.hecke_residual:.1e}")
    print(f"search statistics: {both.stats}")
    print(f"serial, both parities on shared K: {t_serial:.2f} s wall, {c_serial:.2f} s CPU   (goal <= 20 s)")
    print(f"2 workers, one parity each       : {t_par:.2f} s wall")
    print(f"reference: one log-determinant of the R = {R_max:g} system: {1e3 * t_det:.2f} ms; the "
          f"search costs {c_serial / t_det:.0f} of them ({c_serial / t_det / max(1, len(both.forms)):.0f} per form)")


if __name__ == "__main__":
    main()
