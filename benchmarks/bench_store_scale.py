"""Benchmark: a store growing to 10^5 synthetic forms (M = 200, 1-4 cusps, ~10 kB each).

Run: python benchmarks/bench_store_scale.py [N_FORMS] [--no-export]

The store is filled by transactions of 100 forms (as a run commits), in writer sessions of
10 000 forms; closing a session compacts when the commit records have outgrown the base.
Printed:

* seconds per 100-form commit while the store holds about 10^3, 10^4 and 10^5 forms
  (median of 20 commits; goal: flat), with fsync on every commit;
* the compactions (when, how long) and the whole fill amortised per commit;
* opening the store, ``maasscomp list`` (a subprocess, wall time: goal <= 1 s at 10^5)
  and the in-process index listing, a JSON export of every form (goal <= 30 s);
* peak memory of this process and of the ``list`` subprocess;
* the reference measured in the same run: plain h5py writes of the same forms into one
  file kept open (one group per form, not crash-safe), per 100 forms at the same sizes.

Set BENCH_DIR to choose the disk (default: the system temporary directory).
"""

from __future__ import annotations

import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import h5py
import numpy as np

from maasscomp.hejhal.types import SolverParams, SymmetryClass
from maasscomp.spectrum.form import Form
from maasscomp.report.export import export_csv
from maasscomp.store import Store, export_json

M = 200
BATCH = 100
SESSION = 10_000
MARKS = (1_000, 10_000, 100_000)


def make_forms(start: int, n: int) -> list[Form]:
    rng = np.random.default_rng(start)
    out = []
    for i in range(start, start + n):
        nc = 1 + i % 4
        out.append(Form(level=[1, 2, 6, 30][i % 4], R=1.0 + 0.001 * i,
                        symmetry=SymmetryClass("even" if i % 2 else "odd"),
                        coeffs=rng.normal(size=(nc, M)), coeff_errors=rng.random((nc, M)),
                        R_error=1e-10, hecke_residual=1e-9, params=SolverParams(0.2, M, M + 20),
                        extra={"i": i, "hecke": [0.5, -1.2]}))
    return out


def peak_rss_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def fill_store(path: Path, n: int) -> dict:
    """Fill by 100-form commits; time the commits near each mark and every compaction."""
    per_mark: dict[int, list[float]] = {m: [] for m in MARKS if m <= n}
    compactions = []
    t_all = time.perf_counter()
    done = 0
    while done < n:
        st = Store.open(path, "a", create=True)
        stop = min(n, done + SESSION)
        while done < stop:
            forms = make_forms(done, BATCH)
            t = time.perf_counter()
            st.add_forms(forms, run_id="bench")
            dt = time.perf_counter() - t
            done += BATCH
            for m in per_mark:
                if m - 10 * BATCH < done <= m + 10 * BATCH:
                    per_mark[m].append(dt)
        t = time.perf_counter()
        will = st._should_compact()
        st.close()
        if will:
            compactions.append((done, time.perf_counter() - t))
    total = time.perf_counter() - t_all
    return {"per_mark": per_mark, "compactions": compactions, "total": total,
            "commits": n // BATCH}


def reference_h5py(path: Path, n: int) -> dict[int, float]:
    """Plain h5py, one group per form, one file kept open: seconds per 100 forms."""
    out: dict[int, list[float]] = {m: [] for m in MARKS if m <= n}
    with h5py.File(path, "w") as h:
        done = 0
        while done < n:
            forms = make_forms(done, BATCH)
            t = time.perf_counter()
            for j, f in enumerate(forms):
                g = h.create_group(f"f{done + j}")
                for k in ("level", "R", "R_error", "hecke_residual"):
                    g.attrs[k] = getattr(f, k)
                g.create_dataset("coeffs", data=f.coeffs)
                g.create_dataset("coeff_errors", data=f.coeff_errors)
            h.flush()
            dt = time.perf_counter() - t
            done += BATCH
            for m in out:
                if m - 10 * BATCH < done <= m + 10 * BATCH:
                    out[m].append(dt)
    return {m: statistics.median(v) for m, v in out.items()}


def main() -> None:
    args = [a for a in sys.argv[1:] if not a.startswith("--")]
    n = int(args[0]) if args else 100_000
    do_export = "--no-export" not in sys.argv
    print(f"store of {n} synthetic forms, M={M}, 1-4 cusps, commits of {BATCH} forms "
          f"(fsync on), writer sessions of {SESSION}; load average {os.getloadavg()[0]:.1f}")
    with tempfile.TemporaryDirectory(dir=os.environ.get("BENCH_DIR")) as d:
        d = Path(d)
        path = d / "scale.h5"
        c0 = time.process_time()
        fill = fill_store(path, n)
        size = os.path.getsize(path)
        print(f"filled in {fill['total']:.1f} s wall ({time.process_time() - c0:.1f} s CPU); "
              f"file {size / 1e6:.0f} MB; amortised {1e3 * fill['total'] / fill['commits']:.1f} ms "
              "per commit including compactions")
        t = time.perf_counter()
        c0 = time.process_time()
        ref = reference_h5py(d / "ref.h5", n)
        t_ref = time.perf_counter() - t
        print(f"reference plain h5py writes: {t_ref:.1f} s wall ({time.process_time() - c0:.1f} s "
              f"CPU) for all {n} forms "
              f"(file {os.path.getsize(d / 'ref.h5') / 1e6:.0f} MB)")
        print(f"{'forms in store':>15} {'store ms/100':>13} {'h5py ms/100':>12} {'ratio':>6}")
        for m, v in fill["per_mark"].items():
            med = statistics.median(v)
            print(f"{m:>15} {1e3 * med:>13.1f} {1e3 * ref[m]:>12.1f} {med / ref[m]:>6.2f}")
        for at, dt in fill["compactions"]:
            print(f"  compaction on closing at {at} forms: {dt:.2f} s")
        (d / "ref.h5").unlink()

        if do_export:
            t = time.perf_counter()
            c = time.process_time()
            nexp = export_csv(path, d / "all.csv", n_coeffs=10)
            print(f"export_csv (one row per form, c1..c10) of {nexp} forms: "
                  f"{time.perf_counter() - t:.1f} s wall ({time.process_time() - c:.1f} s CPU)")
        t = time.perf_counter()
        with Store.open(path) as st:
            k = len(st)
            t_open = time.perf_counter() - t
            t = time.perf_counter()
            rows = st.summary_rows(n_coeffs=3)
            t_rows = time.perf_counter() - t
        print(f"open (index of {k} forms): {t_open:.2f} s; index listing in-process: "
              f"{t_rows:.2f} s for {len(rows)} rows")
        env = dict(os.environ)
        ch0 = resource.getrusage(resource.RUSAGE_CHILDREN)
        t = time.perf_counter()
        res = subprocess.run([sys.executable, "-c",
                              "import resource, sys\n"
                              "from maasscomp.cli import main\n"
                              "code = main(['list', sys.argv[1]])\n"
                              "print(resource.getrusage(resource.RUSAGE_SELF).ru_maxrss, "
                              "file=sys.stderr)\n"
                              "sys.exit(code)", str(path)],
                             stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=env, text=True)
        t_list = time.perf_counter() - t
        ch1 = resource.getrusage(resource.RUSAGE_CHILDREN)
        cpu_list = (ch1.ru_utime - ch0.ru_utime) + (ch1.ru_stime - ch0.ru_stime)
        rss = int(res.stderr.strip().splitlines()[-1]) / 1024
        t = time.perf_counter()
        res2 = subprocess.run([sys.executable, "-c", "import maasscomp.cli"], env=env)
        t_import = time.perf_counter() - t
        print(f"maasscomp list (subprocess): {t_list:.2f} s wall, {cpu_list:.2f} s CPU, exit "
              f"{res.returncode}, peak {rss:.0f} MB (starting Python and importing alone: "
              f"{t_import:.2f} s wall)")
        del res2
        if do_export:
            t = time.perf_counter()
            c = time.process_time()
            nexp = export_json(path, d / "all.json")
            print(f"export_json of {nexp} forms: {time.perf_counter() - t:.1f} s wall "
                  f"({time.process_time() - c:.1f} s CPU), "
                  f"{os.path.getsize(d / 'all.json') / 1e9:.2f} GB")
        print(f"peak memory of this process: {peak_rss_mb():.0f} MB")


if __name__ == "__main__":
    main()
