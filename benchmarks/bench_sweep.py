"""Speed-up of a level sweep with 2 workers against 1, per executor, and the per-task
overhead of the Dask path against joblib.

Usage::

    python benchmarks/bench_sweep.py                    # squarefree N <= 12, 7 <= R <= 10
    python benchmarks/bench_sweep.py --levels "squarefree up to 6" --rmin 9.5
    python benchmarks/bench_sweep.py --backends joblib  # one executor only

Each configuration runs the whole sweep into a fresh store (search, commits, all), timed
wall-clock. The reference for each speed-up is the same executor with one worker,
measured in the same run. The overhead per task comes from running many no-op tasks
(returning a result of the size of a search outcome) through each executor. Goal: a
speed-up >= 1.7 on two cores. Every run uses one BLAS thread per process, so one worker
means one core. Fixed costs (starting Python and the workers, about two
seconds each) are included, so small sweeps show less. The load average and the CPU time
of each run are printed: other processes on the machine lower the speed-up (CPU time /
wall time shows how many cores a run really got), so compare numbers taken on an idle
machine.
"""

from __future__ import annotations

import argparse
import math
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path


def _write_config(path: Path, levels: str, rmin: float, rmax: float, chunk: float,
                  backend: str, workers: int) -> Path:
    path.write_text(f"""[job]
name = "bench"
output = "{path.with_suffix('.h5')}"
[search]
levels = "{levels}"
R_min = {rmin!r}
R_max = {rmax!r}
chunk_width = {chunk!r}
n_coeffs = 30
[scan]
enabled = false   # this benchmark measures the search only
[executor]
backend = "{backend}"
workers = {workers}
""")
    return path


def _noop(x):
    import numpy as np

    return np.zeros((2, 30)) + x  # about the size of a stored form's coefficients


def _overhead(backend: str, workers: int, n: int) -> float:
    from maasscomp.pipeline.executors import DaskExecutor, JoblibExecutor

    ex = JoblibExecutor(workers) if backend == "joblib" else DaskExecutor(workers)
    with ex:
        list(ex.as_completed(_noop, range(2 * workers)))  # warm the workers up
        t = time.perf_counter()
        for _ in ex.as_completed(_noop, range(n)):
            pass
        return (time.perf_counter() - t) / n


def main() -> None:
    from maasscomp.config import load
    from maasscomp.pipeline.tasks import build_plan
    from maasscomp.store import Store

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--levels", default="squarefree up to 12")
    ap.add_argument("--rmin", type=float, default=7.0)
    ap.add_argument("--rmax", type=float, default=10.0)
    ap.add_argument("--chunk", type=float, default=0.5)
    ap.add_argument("--backends", default="joblib,dask")
    ap.add_argument("--noop-tasks", type=int, default=400)
    ap.add_argument("--repeat", type=int, default=1,
                    help="run every configuration this many times and keep the fastest "
                         "(helps on a machine shared with other work)")
    args = ap.parse_args()
    backends = [b.strip() for b in args.backends.split(",") if b.strip()]

    print(f"cores: {os.cpu_count()}, load average at start: {os.getloadavg()}")
    print(f"sweep: levels {args.levels!r}, R in [{args.rmin}, {args.rmax}], chunk width {args.chunk} "
          "(search only: [scan] enabled = false)")
    # one BLAS thread per process, so that "1 worker" means one core (the matrices are
    # small; loky gives each of two workers one thread on two cores anyway)
    env = dict(os.environ, OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1", MKL_NUM_THREADS="1")
    times: dict[tuple[str, int], float] = {}
    n_tasks = 0
    forms = None
    with tempfile.TemporaryDirectory() as d:
        for backend in ["serial"] + backends:
            for w in ((1,) if backend == "serial" else (1, 2)):
                cfg_path = _write_config(Path(d) / f"{backend}{w}.toml", args.levels, args.rmin,
                                         args.rmax, args.chunk, backend, w)
                cfg = load(cfg_path)
                n_tasks = len(build_plan(cfg).tasks)
                best, cpu_best = math.inf, math.nan
                for _ in range(args.repeat):
                    if cfg.job.output.exists():
                        cfg.job.output.unlink()
                    # a fresh process per measurement: no K-Bessel table survives from the last one
                    ru0 = resource.getrusage(resource.RUSAGE_CHILDREN)
                    t = time.perf_counter()
                    r = subprocess.run([sys.executable, "-m", "maasscomp", "run", str(cfg_path), "-q"],
                                       capture_output=True, text=True, env=env)
                    wall = time.perf_counter() - t
                    ru1 = resource.getrusage(resource.RUSAGE_CHILDREN)
                    assert r.returncode == 0, r.stderr
                    if wall < best:
                        best = wall
                        cpu_best = (ru1.ru_utime + ru1.ru_stime) - (ru0.ru_utime + ru0.ru_stime)
                times[(backend, w)] = best
                with Store.open(cfg.job.output, "r") as st:
                    nf = len(st)
                assert forms is None or nf == forms, "executors found different numbers of forms"
                forms = nf
                print(f"  {backend:>6} x {w}: {times[(backend, w)]:8.2f} s wall (process start "
                      f"included), {cpu_best:8.2f} s CPU of all its processes (cores used "
                      f"{cpu_best / times[(backend, w)]:.2f}), {n_tasks} tasks, {nf} forms", flush=True)
    print()
    print(f"serial executor: {times[('serial', 1)]:.2f} s")
    for b in backends:
        sp = times[(b, 1)] / times[(b, 2)]
        print(f"speed-up {b:>6}, 2 workers vs 1: {sp:5.2f}x   (goal >= 1.7x; "
              f"2 workers vs serial: {times[('serial', 1)] / times[(b, 2)]:.2f}x)")
    if "joblib" in backends and "dask" in backends:
        d2 = (times[("dask", 2)] - times[("joblib", 2)]) / n_tasks
        print(f"sweep wall time difference per task, dask - joblib (2 workers): {1e3 * d2:+.1f} ms")
        oj = _overhead("joblib", 2, args.noop_tasks)
        od = _overhead("dask", 2, args.noop_tasks)
        print(f"no-op task round trip (2 workers, {args.noop_tasks} tasks): joblib {1e3 * oj:.2f} ms, "
              f"dask {1e3 * od:.2f} ms per task; dask / joblib = {od / oj:.2f}x, "
              f"dask - joblib = {1e3 * (od - oj):+.2f} ms per task")
    print(f"load average at end: {os.getloadavg()}")


if __name__ == "__main__":
    sys.exit(main())
