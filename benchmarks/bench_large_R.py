"""Large eigenvalues: locate and verify forms at large R, with wall time, CPU time and peak memory.

Three kinds of runs, each in a fresh subprocess so that its peak resident memory
(``ru_maxrss``) and CPU time (``ru_utime + ru_stime``) are its own:

``--present R0 ...``
    The window search (``spectrum.near.nearest_forms``: det-sign scan at two heights, Brent,
    two-height secant confirmation, storage-height solves) for the form nearest to R0.
    Goals: R0 = 1000 in <= 2 min, R0 = 10^4 in <= 30 min on 2 cores.
``--large R0 ...``
    The large-R routine (``spectrum.large.locate_large``: node-interpolated matrices,
    linearised roots, Newton at two heights). Goal: R0 >= 4e4 in <= 3 h wall and <= 16 GB.
    Reference measured in the same process: one dense LU factorisation of the size of the
    scan system (scipy.linalg.lu_factor) and Kt evaluations per second at R0.
``--costs R ...``
    Unit costs of the present search's building blocks at R (what one grid point, one Brent
    step, one confirmation step cost): Kt at all sample points, the DCT assembly and its
    temporaries, slogdet, one solve, the memory of the sample set and of one class's
    system, and the storage-height solve; then the estimated total of one nearest-form
    search from the operation counts of spectrum/search.py.

Run: ``python benchmarks/bench_large_R.py`` (default: ``--present 1000 --large 1000``);
e.g. ``nice -n 10 python benchmarks/bench_large_R.py --large 40000`` for the large case
(``--present 9999`` keeps the earlier 10^4 case runnable; ``--solve-exponent`` fits the cost
growth of one dense solve in R). Set OPENBLAS_NUM_THREADS to the
cores the LU factorisations may use; the matrix assembly uses ``--workers`` threads.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys

PRELUDE = r"""
import json, resource, sys, time
def usage():
    ru = resource.getrusage(resource.RUSAGE_SELF)
    return ru.ru_utime + ru.ru_stime, ru.ru_maxrss / 1024.0
"""

CHILD_PRESENT = PRELUDE + r"""
from maasscomp.groups import gamma0
from maasscomp.spectrum.near import nearest_forms
R0 = float(sys.argv[1])
t = time.perf_counter()
res = nearest_forms(gamma0(1), R0, k=1)
wall = time.perf_counter() - t
f = res.forms[0]
cpu, rss = usage()
out = {"R0": R0, "R": f.R, "parity": f.parity, "R_error": f.R_error,
       "hecke": f.hecke_residual, "M0": f.params.M0, "found": res.found, "expected": res.expected,
       "wall": wall, "cpu": cpu, "peak_rss_mb": rss}
try:
    from maasscomp.supnorm import scan_form
except ImportError:
    scan_form = None
if scan_form is not None:
    t = time.perf_counter()
    scan_form(f)
    out["t_scan"] = time.perf_counter() - t
print("RESULT " + json.dumps(out))
"""

CHILD_LARGE = PRELUDE + r"""
import math
import numpy as np, scipy.linalg
from maasscomp.groups import gamma0
from maasscomp.special import ktilde
from maasscomp.spectrum.large import LargeSettings, locate_large
R0, workers = float(sys.argv[1]), int(sys.argv[2])
t = time.perf_counter()
res = locate_large(gamma0(1), R0, k=1, settings=LargeSettings(workers=workers),
                   log=lambda s: print("LOG " + s, flush=True))
wall = time.perf_counter() - t
cpu, rss = usage()
f = res.forms[0]
out = {"R0": R0, "R": f.R, "parity": f.parity, "R_error": f.R_error, "R_second_height": f.extra["R_second_height"],
       "hecke": f.hecke_residual, "n_coeffs": int(f.coeffs.shape[1]),
       "coeff_err_max_first30": float(np.max(f.coeff_errors[0, :30])),
       "coeff_err_max_all": float(np.max(f.coeff_errors[0])), "lfunction": f.extra.get("lfunction"),
       "candidates": [[c.R, c.symmetry.parity, c.accepted, c.reason] for c in res.candidates],
       "expected": res.expected, "parity_mismatches": res.parity_mismatches, "stats": res.stats,
       "wall": wall, "cpu": cpu, "peak_rss_mb": rss}
# Hecke relations spelled out on the stored coefficients (a(1) = 1)
a = f.coeffs[0]
out["hecke_examples"] = {"a(6)-a(2)a(3)": float(a[5] - a[1] * a[2]), "a(4)-a(2)^2+1": float(a[3] - a[1] ** 2 + 1),
                         "a(9)-a(3)^2+1": float(a[8] - a[2] ** 2 + 1), "a(10)-a(2)a(5)": float(a[9] - a[1] * a[4])}
# references in the same process: one dense LU of the scan size, Kt evaluations per second
M0 = res.stats["M0"]["Y1"]
A = np.asfortranarray(np.random.default_rng(0).standard_normal((M0, M0)))
c0, w0 = time.process_time(), time.perf_counter()
scipy.linalg.lu_factor(A, overwrite_a=True, check_finite=False)
out["ref_lu"] = {"n": M0, "cpu": time.process_time() - c0, "wall": time.perf_counter() - w0}
del A
x = np.linspace(2 * math.pi * 0.8, R0 * 1.05, 2_000_000)
ktilde(R0 + 0.1, x[:10])
c0, w0 = time.process_time(), time.perf_counter()
ktilde(R0 + 0.1, x)
out["ref_kt_per_cpu_s"] = x.size / (time.process_time() - c0)
out["ref_kt_per_wall_s"] = x.size / (time.perf_counter() - w0)
print("RESULT " + json.dumps(out))
"""

CHILD_COSTS = PRELUDE + r"""
import math, tracemalloc
import numpy as np
from maasscomp.groups import gamma0
from maasscomp.hejhal.params import choose_params
from maasscomp.hejhal.system import HejhalSystem, SampleSet, normalised_solution, slogdet
from maasscomp.hejhal.types import SymmetryClass
from maasscomp.spectrum.search import SearchSettings, mean_spacing, _store_count, _store_height
R = float(sys.argv[1])
g = gamma0(1)
s = SearchSettings()
out = {"R": R}
def timed(fn):
    c, w = time.process_time(), time.perf_counter()
    v = fn()
    return v, time.process_time() - c, time.perf_counter() - w
for name, frac in (("Y1", s.Y1_frac), ("Y2", s.Y2_frac)):
    p = choose_params(R + 1.0, frac * g.fundamental_domain_height, s.eps)
    S, c_ss, _ = timed(lambda: SampleSet(g, p))
    sysm, c_sys, _ = timed(lambda: HejhalSystem(g, SymmetryClass("even"), p, S))
    k, c_k, w_k = timed(lambda: S.k_values(R))
    tracemalloc.start()
    A, c_m, w_m = timed(lambda: sysm.matrix_from_k(k))
    peak_m = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    _, c_d, w_d = timed(lambda: slogdet(A))
    _, c_s, w_s = timed(lambda: normalised_solution(A))
    out[name] = {"M0": p.M0, "Q": p.Q, "sample_set_bytes": int(S.k_points.nbytes), "system_bytes_per_class": int(sysm._out.nbytes),
                 "k_values_bytes": int(k.nbytes), "assembly_peak_temporaries_bytes": int(peak_m),
                 "cpu_kt": c_k, "cpu_assembly": c_m, "cpu_slogdet": c_d, "cpu_solve": c_s, "cpu_setup": c_ss + c_sys}
    del S, sysm, k, A
# storage-height solve
m = _store_count(g, R, s)
p1 = choose_params(R + 1.0, s.Y1_frac * g.fundamental_domain_height, s.eps)
Ys = _store_height(R, m, p1)
ps = choose_params(R + 0.5, 0.9 * Ys, s.eps)
out["store"] = {"n_coeffs": m, "Y": Ys, "M0_second": ps.M0}
# operation counts of nearest_forms(k=1): the grid at two heights, ~12 det evaluations per
# Brent refinement, and 2 + 2 x (secant steps) solves per confirmation
spacing_all = 6.0 / R
d = 1.5 * spacing_all
step = min(s.max_step, mean_spacing(1, 2, R + d, 1) / s.steps_per_spacing)
n_grid = int(math.ceil(2 * d / step)) + 1
out["grid_points_per_height"] = n_grid
cpu, rss = usage()
out["peak_rss_mb"] = rss
print("RESULT " + json.dumps(out))
"""


def run_child(code: str, *args: str) -> dict:
    env = dict(os.environ)
    p = subprocess.Popen([sys.executable, "-c", code, *args], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                         text=True, env=env)
    result = None
    for line in p.stdout:
        if line.startswith("LOG "):
            print("   " + line[4:].rstrip(), flush=True)
        elif line.startswith("RESULT "):
            result = json.loads(line[7:])
    err = p.stderr.read()
    p.wait()
    if result is None:
        raise RuntimeError(err[-3000:])
    return result


def present(R0: float) -> None:
    r = run_child(CHILD_PRESENT, str(R0))
    print(f"present search, R0 = {R0:g}: nearest form R = {r['R']:.10f} ({r['parity']}), M0 = {r['M0']}, "
          f"Hecke residual {r['hecke']:.1e}; wall {r['wall']:.1f} s, CPU {r['cpu']:.1f} s, peak memory "
          f"{r['peak_rss_mb']:.0f} MB; window held {r['found']} forms, Weyl expects {r['expected']:.2f}"
          + (f"; sup-norm scan of the form {r['t_scan']:.1f} s" if "t_scan" in r else ""), flush=True)


def solve_cost() -> None:
    """Cost growth of one dense solve of the present system with R (fitted exponent)."""
    import time

    import numpy as np

    from maasscomp.groups import gamma0
    from maasscomp.hejhal.params import choose_params
    from maasscomp.hejhal.system import HejhalSystem
    from maasscomp.hejhal.types import SymmetryClass

    g = gamma0(1)
    Rs = np.array([250.0, 500.0, 1000.0, 2000.0, 4000.0, 8000.0])
    ts, m0 = [], []
    for R in Rs:
        p = choose_params(R, 0.92 * g.fundamental_domain_height)
        S = HejhalSystem(g, SymmetryClass("even"), p)
        S.solve(R + 0.01)  # warm the K table
        t = time.process_time()
        S.solve(R + 0.02)
        ts.append(time.process_time() - t)
        m0.append(p.M0)
    k = np.polyfit(np.log(Rs[-3:]), np.log(ts[-3:]), 1)[0]
    for R, M, t in zip(Rs, m0, ts):
        print(f"  one solve at R = {R:6.0f}: M0 = {M:5d}, {t:7.3f} CPU s")
    print(f"fitted exponent of one solve in R (last three points): {k:.2f}  (dense LU: 3)", flush=True)


def large(R0: float, workers: int) -> None:
    r = run_child(CHILD_LARGE, str(R0), str(workers))
    st = r["stats"]
    print(f"large-R routine, R0 = {R0:g}: form R = {r['R']:.12f} ({r['parity']}), R error estimate "
          f"{r['R_error']:.1e} (root at the second height {r['R_second_height']:.12f})")
    print(f"  Hecke residual {r['hecke']:.1e} over n <= 30; examples {r['hecke_examples']}")
    print(f"  {r['n_coeffs']} coefficients stored, error estimate max {r['coeff_err_max_first30']:.1e} (n <= 30), "
          f"{r['coeff_err_max_all']:.1e} (all); L-function check: {r['lfunction']}")
    print(f"  candidates: {r['candidates']}")
    print(f"  Weyl expects {r['expected']:.2f} forms in the searched interval; parity mismatches "
          f"{r['parity_mismatches']}")
    print(f"  M0 = {st['M0']}, LU factorisations {st['lu_factorisations']}, Kt evaluations "
          f"{st['kt_evaluations']:.3e}, node matrices up to {st['node_matrix_bytes_max'] / 1e9:.2f} GB")
    print(f"  CPU s per stage {({k: round(v, 1) for k, v in st['cpu_s'].items()})}")
    print(f"  wall s per stage {({k: round(v, 1) for k, v in st['wall_s'].items()})}")
    print(f"  total: wall {r['wall']:.0f} s ({r['wall'] / 3600:.2f} h), CPU {r['cpu']:.0f} s, peak memory "
          f"{r['peak_rss_mb'] / 1024:.2f} GB (goal <= 3 h, <= 16 GB)")
    lu = r["ref_lu"]
    print(f"  reference in the same run: one dense LU of size {lu['n']}: CPU {lu['cpu']:.1f} s, wall "
          f"{lu['wall']:.1f} s -> the run cost {r['cpu'] / lu['cpu']:.0f} such LUs of CPU; Kt at R0: "
          f"{r['ref_kt_per_cpu_s']:.2e} evaluations per CPU second ({r['ref_kt_per_wall_s']:.2e} per wall second)",
          flush=True)


def costs(R: float) -> None:
    r = run_child(CHILD_COSTS, str(R))
    print(f"present search building blocks at R = {R:g} (CPU seconds; bytes):")
    for name in ("Y1", "Y2"):
        h = r[name]
        per_point = h["cpu_kt"] + 2 * (h["cpu_assembly"] + h["cpu_slogdet"])
        print(f"  {name}: M0 = {h['M0']}, Q = {h['Q']}; Kt at all points {h['cpu_kt']:.1f} s, DCT assembly "
              f"{h['cpu_assembly']:.1f} s (temporaries {h['assembly_peak_temporaries_bytes'] / 1e9:.2f} GB), "
              f"slogdet {h['cpu_slogdet']:.1f} s, solve {h['cpu_solve']:.1f} s; sample-set points "
              f"{h['sample_set_bytes'] / 1e9:.2f} GB, system per class {h['system_bytes_per_class'] / 1e9:.2f} GB, "
              f"Kt values {h['k_values_bytes'] / 1e9:.2f} GB; one grid point (2 classes) {per_point:.1f} s")
    y1, y2 = r["Y1"], r["Y2"]
    n = r["grid_points_per_height"]
    scan = n * (y1["cpu_kt"] + y2["cpu_kt"] + 2 * (y1["cpu_assembly"] + y1["cpu_slogdet"] + y2["cpu_assembly"]
                                                   + y2["cpu_slogdet"]))
    brent1 = 12 * (y1["cpu_kt"] + y1["cpu_assembly"] + y1["cpu_slogdet"])
    secant = 2 * 6 * (y1["cpu_kt"] + y2["cpu_kt"] + y1["cpu_assembly"] + y2["cpu_assembly"] + y1["cpu_solve"]
                      + y2["cpu_solve"]) / 2
    memory = 2 * (y1["system_bytes_per_class"] + y2["system_bytes_per_class"]) + y1["sample_set_bytes"] \
        + y2["sample_set_bytes"] + y2["k_values_bytes"] + y2["assembly_peak_temporaries_bytes"]
    print(f"  nearest form (k = 1): {n} grid points per height -> scan {scan / 60:.0f} CPU min; each root "
          f"refined by Brent ~{brent1 / 60:.1f} CPU min per height; each confirmation (~6 secant steps at two "
          f"heights) ~{secant / 60:.1f} CPU min; storage solve at Y = {r['store']['Y']:.3f} with M0 = "
          f"{r['store']['M0_second']} for {r['store']['n_coeffs']} coefficients")
    print(f"  resident arrays of the present search: about {memory / 1e9:.1f} GB; this probe peaked at "
          f"{r['peak_rss_mb'] / 1024:.2f} GB", flush=True)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--present", type=float, nargs="*", default=None, help="R0 values for the window search")
    ap.add_argument("--large", type=float, nargs="*", default=None, help="R0 values for the large-R routine")
    ap.add_argument("--costs", type=float, nargs="*", default=None, help="R values for the unit-cost probe")
    ap.add_argument("--workers", type=int, default=1, help="assembly threads of the large-R routine")
    ap.add_argument("--solve-exponent", action="store_true", help="fit the cost growth of one solve in R")
    args = ap.parse_args(argv)
    if args.present is None and args.large is None and args.costs is None and not args.solve_exponent:
        args.present, args.large = [1000.0], [1000.0]
    for R0 in args.present or []:
        present(R0)
    for R in args.costs or []:
        costs(R)
    for R0 in args.large or []:
        large(R0, args.workers)
    if args.solve_exponent:
        solve_cost()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
