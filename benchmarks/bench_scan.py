"""Sup-norm scan time per form against R (L2 norm + scan of every region).

Forms: the first level-1 forms found by the project's search near R = 10, 20, 40 (searched
in this run, not timed) and a level-11 form near R = 10. Goal: <= 5 s per form at R = 20 on
level 1, cost growing no faster than R^2 (the fitted exponent is printed). With ``--large``
the same is timed on synthetic level-1 coefficient vectors at R = 100, 300, 1000 (random
Hecke-multiplicative eigenvalues: not Maass forms, but the scanner's work depends only on R
and the coefficient sizes), which shows the cost where later studies need it (R ~ 10^3).

Every time is printed as wall and CPU seconds, and as a ratio to a reference measured in the
same run: the time of 10^6 evaluations of the scaled K-Bessel function at R = 20.

Run: ``python benchmarks/bench_scan.py [--large]``.
"""

from __future__ import annotations

import math
import sys
import time

import numpy as np

from maasscomp.groups import gamma0
from maasscomp.hejhal.types import SolverParams, SymmetryClass
from maasscomp.special import ktilde
from maasscomp.spectrum.form import Form
from maasscomp.spectrum.search import SearchSettings, search_forms
from maasscomp.supnorm import l2_norm, scan_form


def first_form(level: int, R: float, n_coeffs: int = 120) -> Form:
    g = gamma0(level)
    width = 0.6
    while True:
        found = list(search_forms(g, R, R + width, settings=SearchSettings(n_coeffs=n_coeffs)).forms)
        found = [f for f in found if f.is_new is not False]
        if found:
            return min(found, key=lambda f: f.R)
        width *= 2


def synthetic_form(R: float, M: int, seed: int = 1) -> Form:
    """Level-1 coefficients a(p) = 2 cos(theta_p) (random theta_p), extended multiplicatively."""
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


def timed(form: Form) -> tuple[float, float, float, float, object]:
    w0, c0 = time.perf_counter(), time.process_time()
    norm = l2_norm(form, rankin_selberg=False)
    w1, c1 = time.perf_counter(), time.process_time()
    res = scan_form(form, norm=norm)
    w2, c2 = time.perf_counter(), time.process_time()
    return w1 - w0, w2 - w1, w2 - w0, c2 - c0, res


def main() -> None:
    large = "--large" in sys.argv[1:]
    x = np.random.default_rng(0).uniform(0.5, 40.0, 1_000_000)
    ktilde(20.0, x[:10])
    t = time.perf_counter()
    ktilde(20.0, x)
    ref = time.perf_counter() - t
    print(f"reference: 1e6 Kt evaluations at R = 20 take {ref:.3f} s")

    cases = [(1, 10.0), (1, 20.0), (1, 40.0), (11, 10.0)]
    forms = [(N, first_form(N, R)) for N, R in cases]
    timed(forms[0][1])  # warm caches and compiled kernels
    print(f"{'level':>5} {'R':>10} {'norm s':>8} {'scan s':>8} {'total s':>8} {'cpu s':>8} {'/ref':>7} "
          f"{'points':>9}  global max")
    rows = []
    for N, f in forms:
        tn, ts, tt, tc, res = timed(f)
        pts = sum(p.grid_points for p in res.cusp_peaks) + res.compact_peak.grid_points
        rows.append((N, f.R, tt, tc))
        print(f"{N:>5} {f.R:>10.5f} {tn:>8.2f} {ts:>8.2f} {tt:>8.2f} {tc:>8.2f} {tt / ref:>7.1f} {pts:>9}  "
              f"{res.global_region}")
    if large:
        for R in (100.0, 300.0, 1000.0):
            f = synthetic_form(R, int(R / 2.5) + 80)
            tn, ts, tt, tc, res = timed(f)
            pts = sum(p.grid_points for p in res.cusp_peaks) + res.compact_peak.grid_points
            rows.append((1, R, tt, tc))
            print(f"{1:>5} {R:>10.1f} {tn:>8.2f} {ts:>8.2f} {tt:>8.2f} {tc:>8.2f} {tt / ref:>7.1f} {pts:>9}  "
                  f"{res.global_region} (synthetic coefficients)")
    lvl1 = [(R, t, c) for N, R, t, c in rows if N == 1]
    Rs = np.log([r[0] for r in lvl1])
    k_wall = np.polyfit(Rs, np.log([r[1] for r in lvl1]), 1)[0]
    k_cpu = np.polyfit(Rs, np.log([r[2] for r in lvl1]), 1)[0]
    t20 = [t for N, R, t, _ in rows if N == 1 and abs(R - 20) < 5]
    print(f"level 1 at R ~ 20: {t20[0]:.2f} s per form (goal <= 5 s)")
    print(f"fitted cost exponent on level 1 (time ~ R^k): k = {k_wall:.2f} wall, {k_cpu:.2f} cpu (goal <= 2)")


if __name__ == "__main__":
    main()
