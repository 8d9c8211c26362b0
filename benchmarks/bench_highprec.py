"""Benchmark: high-precision refinement of the first PSL(2,Z) eigenvalue R1.

Prints the time to refine R1 (odd, start 9.53369526135) to 30 and to 100 decimal places,
the number of two-height evaluations, the digits reached, the agreement with the
published 34 decimals (Booker-Strombergsson-Venkatesh 2006, from memory; see
data/reference/psl2z_r1_highprec.txt), and as a reference measured in the same run the
time of the bare K-Bessel values that one system of the final stage needs (M0 x Q arb
evaluations), so the ratio shows the overhead beyond the special-function cost.

Run:  python benchmarks/bench_highprec.py [--digits 30 100] [--max-seconds 900]
"""

from __future__ import annotations

import argparse
import math
import multiprocessing as mp
import time
from pathlib import Path

from flint import acb, arb, ctx

from maasscomp.spectrum.highprec import refine_high_precision

REF = Path(__file__).resolve().parents[1] / "data" / "reference" / "psl2z_r1_highprec.txt"


def _published() -> str:
    return [ln for ln in REF.read_text().splitlines() if ln and not ln.startswith("#")][0].strip()


def _run(digits: int, q) -> None:
    t0 = time.perf_counter()
    f = refine_high_precision(1, 9.53369526135, "odd", digits)
    q.put((time.perf_counter() - t0, f.R, f.R_error, f.iterations, f.M0, f.Q, f.prec_bits))


def _bessel_reference(M0: int, Q: int, prec: int, R: str) -> float:
    """Time of M0*Q K-Bessel values at the final working precision (arb)."""
    with ctx.workprec(prec + 48):
        Ra = arb(R)
        xs = [2 * arb.pi() * (l + 1) * arb(0.9 + 0.3 * m / Q) for l in range(M0) for m in range(Q)]
        t0 = time.perf_counter()
        for x in xs:
            acb(x).bessel_k(acb(0, Ra))
        return time.perf_counter() - t0


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--digits", type=int, nargs="+", default=[30, 100])
    ap.add_argument("--max-seconds", type=float, default=900.0)
    args = ap.parse_args(argv)
    pub = _published()
    print(f"{'digits':>6} {'time [s]':>9} {'evals':>5} {'s/eval':>7} {'M0':>4} {'Q':>4} "
          f"{'bits':>5} {'est. error':>10} {'|R - BSV34|':>11} {'K ref [s]':>9} {'ratio':>6}")
    for d in args.digits:
        q: mp.Queue = mp.Queue()
        p = mp.Process(target=_run, args=(d, q))
        p.start()
        p.join(args.max_seconds)
        if p.is_alive():
            p.terminate()
            p.join()
            print(f"{d:6d}  did not finish within {args.max_seconds:.0f} s")
            continue
        if q.empty():
            print(f"{d:6d}  failed (see traceback above)")
            continue
        dt, R, err, evals, M0, Q, bits = q.get()
        with ctx.workprec(400):
            diff = abs(float((arb(R) - arb(pub)).mid()))
        kref = _bessel_reference(M0, Q, bits, R)
        # one evaluation = two systems (Y1 and Y2); compare with one system's Bessel cost
        ratio = (dt / evals / 2) / kref
        print(f"{d:6d} {dt:9.2f} {evals:5d} {dt / evals:7.2f} {M0:4d} {Q:4d} {bits:5d} "
              f"{err:10.1e} {diff:11.1e} {kref:9.2f} {ratio:6.2f}")
        print(f"       R = {R[: d + 3]}")
    print("(|R - BSV34| is limited by the 34 published decimals: ~1e-34 means agreement)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
