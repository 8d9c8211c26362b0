"""Large eigenvalues: locate and verify the form nearest to R0, its peak memory, and the
cost growth of one Hejhal solve with R.

Goals (issue): nearest form to R0 = 1000 in <= 2 min on 2 cores, to R0 = 10^4 in <= 30 min;
solve cost growing like R^3 once M0 is large. Each locate runs in a fresh subprocess so
that its peak resident memory (ru_maxrss) is its own; the scan of the form found is timed
too when the sup-norm scanner is available.

Run: ``python benchmarks/bench_large_R.py [R0 ...]`` (default 1000; add 9999 explicitly: the
K-Bessel routine covers R <= 10^4 and the search window reaches a little above R0).
"""

from __future__ import annotations

import json
import subprocess
import sys
import time

import numpy as np

CHILD = r"""
import json, resource, sys, time
from maasscomp.groups import gamma0
from maasscomp.spectrum.near import nearest_forms
R0 = float(sys.argv[1])
t = time.perf_counter()
res = nearest_forms(gamma0(1), R0, k=1)
t_locate = time.perf_counter() - t
f = res.forms[0]
out = {"R0": R0, "R": f.R, "parity": f.parity, "R_error": f.R_error, "hecke": f.hecke_residual,
       "M0": f.params.M0, "found": res.found, "expected": res.expected, "t_locate": t_locate}
try:
    from maasscomp.supnorm import scan_form
except ImportError:
    scan_form = None
if scan_form is not None:
    t = time.perf_counter()
    sr = scan_form(f)
    out["t_scan"] = time.perf_counter() - t
out["peak_rss_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
print("RESULT " + json.dumps(out))
"""


def locate(R0: float) -> dict:
    p = subprocess.run([sys.executable, "-c", CHILD, str(R0)], capture_output=True, text=True)
    for line in p.stdout.splitlines():
        if line.startswith("RESULT "):
            return json.loads(line[7:])
    raise RuntimeError(p.stderr[-2000:])


def solve_cost() -> None:
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
        t = time.perf_counter()
        S.solve(R + 0.02)
        ts.append(time.perf_counter() - t)
        m0.append(p.M0)
    k = np.polyfit(np.log(Rs[-3:]), np.log(ts[-3:]), 1)[0]
    for R, M, t in zip(Rs, m0, ts):
        print(f"  one solve at R = {R:6.0f}: M0 = {M:5d}, {t:7.3f} s")
    print(f"fitted exponent of one solve in R (last three points): {k:.2f}  (dense LU: 3)")


def main() -> None:
    R0s = [float(a) for a in sys.argv[1:]] or [1000.0]
    for R0 in R0s:
        r = locate(R0)
        scan = f", scan {r['t_scan']:.1f} s" if "t_scan" in r else ""
        print(f"R0 = {R0:g}: nearest form R = {r['R']:.10f} ({r['parity']}), M0 = {r['M0']}, "
              f"Hecke residual {r['hecke']:.1e}; located and verified in {r['t_locate']:.1f} s{scan}; "
              f"peak memory {r['peak_rss_mb']:.0f} MB; window held {r['found']} forms, Weyl "
              f"expects {r['expected']:.2f}")
    solve_cost()


if __name__ == "__main__":
    main()
