"""Sup-norm scan cost per form against R: L2 norm + scan of every region, time and peak memory.

Each form is normalised and scanned in its own subprocess, which reports its wall time, CPU time
and peak resident memory (``resource.getrusage``), so one form's memory does not hide another's.

Forms: with ``--store FILE`` the level-1 forms of that store nearest to R = 100, 1000, 3000 and
10^4 (e.g. the study store of configs/study-peaks.toml); without it, level-1 test coefficients
at exactly those R: a(p) = 2 cos(theta_p) with random theta_p, extended by Hecke
multiplicativity (not Maass forms, but the scanner's work depends only on R and on the sizes of
the coefficients, which match those of Hecke eigenforms). ``--R 100,1000`` picks other R.

Goals: R = 3000 in <= 20 s and R = 10^4 in <= 3 minutes and <= 2 GB per form. The cost exponent
k (time ~ R^k) is fitted to the largest three R. Every time is also printed as a ratio to a
reference measured in the same run: 10^6 evaluations of the scaled K-Bessel function at R = 20.
CPU time is the better measure on a shared machine; the load average is printed.

Run: ``python benchmarks/bench_scan.py [--store FILE] [--R 100,1000,3000,10000]``.
"""

from __future__ import annotations

import json
import math
import os
import subprocess
import sys
import time

import numpy as np

GOALS = {3000.0: (20.0, None), 10000.0: (180.0, 2048.0)}  # R: (seconds, MB)


def synthetic_form(R: float, M: int, seed: int = 1):
    """Level-1 coefficients a(p) = 2 cos(theta_p) (random theta_p), extended multiplicatively."""
    from maasscomp.hejhal.types import SolverParams, SymmetryClass
    from maasscomp.spectrum.form import Form

    rng = np.random.default_rng(seed)
    a = np.zeros(M + 1)
    a[1] = 1.0
    spf = np.zeros(M + 1, dtype=int)
    for p in range(2, M + 1):
        if spf[p] == 0:
            spf[p::p][spf[p::p] == 0] = p
    theta: dict[int, float] = {}
    for n in range(2, M + 1):
        p, m, e = spf[n], n, 0
        while m % p == 0:
            m //= p
            e += 1
        if m > 1:
            a[n] = a[m] * a[n // m]
            continue
        th = theta.setdefault(p, rng.uniform(0.05, math.pi - 0.05))
        a[n] = math.sin((e + 1) * th) / math.sin(th)
    return Form(level=1, R=R, symmetry=SymmetryClass("even"), coeffs=a[1:][None, :],
                coeff_errors=np.zeros((1, M)), R_error=0.0, hecke_residual=0.0,
                params=SolverParams(Y=0.1, M0=10, Q=20), extra={"synthetic": True})


def worker(spec: str) -> None:
    """Child process: normalise and scan one form, print a JSON line."""
    import resource

    from maasscomp.supnorm import FormEvaluator, l2_norm, scan_form

    kind, arg, R = spec.split("|")
    R = float(R)
    if kind == "store":
        from maasscomp.store import Store

        with Store.open(arg, "r") as st:
            keys = st.select(level=1)
            form = st.get(min(keys, key=lambda k: abs(st.get(k).R - R)))
    else:
        form = synthetic_form(R, int(R / 2.5) + 80)
    w0, c0 = time.perf_counter(), time.process_time()
    ev = FormEvaluator(form)
    norm = l2_norm(form, evaluator=ev, rankin_selberg=False)
    w1, c1 = time.perf_counter(), time.process_time()
    res = scan_form(form, norm=norm, evaluator=ev)
    w2, c2 = time.perf_counter(), time.process_time()
    print(json.dumps({"R": form.R, "norm_wall": w1 - w0, "norm_cpu": c1 - c0, "scan_wall": w2 - w1,
                      "scan_cpu": c2 - c1, "mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
                      "points": sum(p.grid_points for p in res.regions), "region": res.global_region,
                      "synthetic": kind != "store"}))


def main() -> None:
    if len(sys.argv) > 2 and sys.argv[1] == "--worker":
        worker(sys.argv[2])
        return
    store = sys.argv[sys.argv.index("--store") + 1] if "--store" in sys.argv else None
    Rs = [float(v) for v in sys.argv[sys.argv.index("--R") + 1].split(",")] if "--R" in sys.argv \
        else [100.0, 1000.0, 3000.0, 10000.0]
    from maasscomp.special import ktilde

    x = np.random.default_rng(0).uniform(0.5, 40.0, 1_000_000)
    ktilde(20.0, x[:10])
    t = time.perf_counter()
    ktilde(20.0, x)
    ref = time.perf_counter() - t
    print(f"reference: 1e6 Kt evaluations at R = 20 take {ref:.3f} s; load average {os.getloadavg()[0]:.1f} "
          f"on {os.cpu_count()} cores")
    print(f"{'R':>10} {'norm cpu':>9} {'scan cpu':>9} {'cpu s':>8} {'wall s':>8} {'/ref':>7} {'peak MB':>8} "
          f"{'points':>11}  global max")
    rows = []
    env = dict(os.environ, OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1")
    for R in Rs:
        spec = f"store|{store}|{R}" if store else f"synthetic||{R}"
        out = subprocess.run([sys.executable, __file__, "--worker", spec], capture_output=True, text=True, env=env)
        if out.returncode != 0:
            print(f"{R:>10g} failed: {out.stderr.strip().splitlines()[-1]}")
            continue
        d = json.loads(out.stdout.strip().splitlines()[-1])
        cpu = d["norm_cpu"] + d["scan_cpu"]
        wall = d["norm_wall"] + d["scan_wall"]
        rows.append((d["R"], cpu, wall, d["mb"]))
        print(f"{d['R']:>10.4f} {d['norm_cpu']:>9.2f} {d['scan_cpu']:>9.2f} {cpu:>8.2f} {wall:>8.2f} "
              f"{wall / ref:>7.0f} {d['mb']:>8.0f} {d['points']:>11}  {d['region']}"
              + (" (test coefficients)" if d["synthetic"] else ""))
    for R0, (secs, mb) in GOALS.items():
        for R, cpu, wall, m in rows:
            if abs(R - R0) / R0 < 0.01:
                print(f"R = {R0:g}: {cpu:.1f} s CPU, {wall:.1f} s wall (goal <= {secs:g} s)"
                      + (f", {m:.0f} MB (goal <= {mb:g} MB)" if mb else ""))
    big = sorted(rows)[-3:]
    if len(big) >= 2:
        k_cpu = np.polyfit(np.log([r[0] for r in big]), np.log([r[1] for r in big]), 1)[0]
        k_wall = np.polyfit(np.log([r[0] for r in big]), np.log([r[2] for r in big]), 1)[0]
        print(f"fitted cost exponent over R = {', '.join(f'{r[0]:.0f}' for r in big)} (time ~ R^k): "
              f"k = {k_cpu:.2f} cpu, {k_wall:.2f} wall")


if __name__ == "__main__":
    main()
