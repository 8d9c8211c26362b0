"""Build the arb oracle tables for Kt(R, x) = exp(pi R/2) K_{iR}(x) at large R.

Writes (run from the repository root; about an hour on one core, most of it at R = 10^5):

    python tests/special/make_kbessel_table_large.py

or, in parallel processes with the rows saved as they come (each part prints CSV rows):

    python tests/special/make_kbessel_table_large.py rows 100000 --part 0 --parts 2 > p0.txt
    python tests/special/make_kbessel_table_large.py merge p0.txt p1.txt ...

* ``data/reference/kbessel_arb_table_large.csv``: Kt at R = 2e4, 4e4, 1e5 (and any R given
  on the command line instead);
* ``data/reference/kbessel_arb_dx_large.csv``: dKt/dx at a few points per R, from
  dK_nu/dx = -(K_{nu-1} + K_{nu+1}) / 2 (DLMF 10.29.1) with nu = iR.

Reference values come from python-flint (arb): ``acb(x).bessel_k(acb(s, R))`` times
``exp(pi R / 2)`` in ball arithmetic.  Precision recipe: the cancellation in K_{iR}(x) for
x < R costs about pi R / (2 log 2) = 2.27 R bits, so the working precision starts at
``3 R + 128`` bits and is doubled until the relative radius of the real part is below 1e-20;
the precision used and the final relative radius are stored with every row.  Arguments are
exact doubles.

Grid per R: the oscillatory side x < R (from x = 1e-3, where the phase R log(2R/x) is
largest, up to the last oscillations), both sides of the method switches at
R -/+ 3 R^{1/3}, the turning zone, and the decaying side x > R at prescribed values of the
Liouville-Green exponent Psi(x) = sqrt(x^2 - R^2) - R arccos(R/x) from 1 to 640 (values
down to about 1e-280), plus seeded random points in each region.
"""

from __future__ import annotations

import math
import os
import sys
import time

import flint
import numpy as np

R_DEFAULT = [20000.0, 40000.0, 100000.0]
HERE = os.path.dirname(__file__)
OUT = os.path.join(HERE, "..", "..", "data", "reference", "kbessel_arb_table_large.csv")
OUT_DX = os.path.join(HERE, "..", "..", "data", "reference", "kbessel_arb_dx_large.csv")


def arb_ktilde(R: float, x: float, order_shift: int = 0, rel_tol: float = 1e-20) -> tuple[float, float, int]:
    """(value, relative radius, bits) of exp(pi R/2) K_{s + iR}(x) (real part) from arb."""
    prec = int(3 * R) + 128
    old = flint.ctx.prec
    try:
        while True:
            flint.ctx.prec = prec
            v = flint.acb(x).bessel_k(flint.acb(order_shift, R)) * (flint.arb.pi() * flint.arb(R) / 2).exp()
            re = v.real
            mid = float(re.mid())
            rad = float(re.rad())
            if mid != 0.0 and math.isfinite(mid) and rad <= rel_tol * abs(mid):
                return mid, rad / abs(mid), prec
            if mid == 0.0 and rad < 1e-320:  # below the double range
                return 0.0, 0.0, prec
            prec *= 2
            if prec > 4 * (int(3 * R) + 128):
                raise RuntimeError(f"arb did not converge for R={R}, x={x}")
    finally:
        flint.ctx.prec = old


def x_at_psi(R: float, psi: float) -> float:
    """x > R with Psi(x) = psi (bisection on R (v - arctan v), v = sqrt(x^2 - R^2) / R)."""
    lo, hi = R, 2.0 * R + 4.0 * psi
    for _ in range(200):
        mid = 0.5 * (lo + hi)
        v = math.sqrt((mid - R) * (mid + R)) / R
        if R * (v - math.atan(v)) < psi:
            lo = mid
        else:
            hi = mid
    return hi


def grid(R: float, rng: np.random.Generator) -> list[float]:
    r3 = R ** (1.0 / 3.0)
    xs = [1e-3, 2 * math.pi * 0.01, 1.0, 2.0, math.sqrt(R), R / 100, R / 10, R / 3, R / 2, 0.9 * R,
          0.99 * R, R - 10 * r3, R - 5 * r3, R - r3,
          # last maximum before the turning point, x* ~ R + a'_1 (R/2)^{1/3} (DLMF 9.9.1)
          R - 1.0187929716474710890 * (R / 2) ** (1.0 / 3.0),
          R, R + r3, R + 5 * r3, R + 10 * r3]
    for edge in (R - 3 * r3, R + 3 * r3):
        xs += [edge, edge * (1 - 1e-12), edge * (1 + 1e-12)]
    xs += [x_at_psi(R, p) for p in (1.0, 10.0, 50.0, 200.0, 400.0, 640.0)]
    xs += list(np.exp(rng.uniform(math.log(1e-3), math.log(R - 3 * r3), 6)))
    xs += list(R + r3 * rng.uniform(-6, 6, 6))
    xs += [x_at_psi(R, p) for p in rng.uniform(0.5, 650.0, 4)]
    return sorted({float(x) for x in xs if x > 0})


def dx_points(R: float) -> list[float]:
    r3 = R ** (1.0 / 3.0)
    return [1e-3, R / 3, R - 5 * r3, R - r3, R, R + r3, R + 10 * r3, x_at_psi(R, 300.0)]


def rows_for(R: float, part: int = 0, parts: int = 1):
    """Yield ("v" | "d", R, x, value, rel_radius, bits) for every grid point of R in this part."""
    rng = np.random.default_rng([20250117, int(R)])
    jobs = [("v", x) for x in grid(R, rng)] + [("d", x) for x in dx_points(R)]
    for i, (kind, x) in enumerate(jobs):
        if i % parts != part:
            continue
        if kind == "v":
            val, rr, prec = arb_ktilde(R, x)
            if abs(val) < 1e-300:
                continue
            yield kind, R, x, val, rr, prec
        else:
            km, rm, pm = arb_ktilde(R, x, -1)
            kp, rp, pp = arb_ktilde(R, x, 1)
            d = -(km + kp) / 2
            # the relative radius of the sum, bounded by those of the terms
            rr = (abs(km) * rm + abs(kp) * rp) / (2 * abs(d)) if d != 0 else 0.0
            yield kind, R, x, d, rr, max(pm, pp)


def write_tables(rows) -> None:
    vals = sorted((r[1:] for r in rows if r[0] == "v"))
    ders = sorted((r[1:] for r in rows if r[0] == "d"))
    precs = [r[-1] for r in vals + ders]
    head = ("# source: python-flint {v} (arb ball arithmetic), acb(x).bessel_k(acb({s}, R)) * exp(pi R/2)\n"
            "# precision recipe: per row (bits), starting at 3 R + 128 and doubled until the relative radius\n"
            "# of the real part is <= 1e-20; precision range used: {p0}..{p1} bits; values printed with\n"
            "# 17 significant digits (full double); R and x are exact doubles\n"
            "# generated by tests/special/make_kbessel_table_large.py\n")
    cover = []
    for R in sorted({r[0] for r in vals}):
        xs = [r for r in vals if r[0] == R]
        nd = sum(1 for r in ders if r[0] == R)
        cover.append(f"# R = {R:g}: {len(xs)} value rows, x from {min(r[1] for r in xs):.3g} to "
                     f"{max(r[1] for r in xs):.6g}, smallest |Kt| {min(abs(r[2]) for r in xs):.1e}; "
                     f"{nd} derivative rows\n")
    with open(OUT, "w") as fh:
        fh.write("# Scaled K-Bessel function Kt(R, x) = exp(pi R/2) K_{iR}(x), reference values at large R.\n")
        fh.write(head.format(v=flint.__version__, s="0", p0=min(precs), p1=max(precs)))
        fh.write("".join(cover))
        fh.write("R,x,ktilde,rel_radius,prec_bits\n")
        for R, x, val, rr, prec in vals:
            fh.write(f"{R!r},{x!r},{val:.17g},{rr:.2e},{prec}\n")
    with open(OUT_DX, "w") as fh:
        fh.write("# Derivative dKt/dx = -exp(pi R/2) (K_{iR-1}(x) + K_{iR+1}(x)) / 2 (DLMF 10.29.1), large R.\n")
        fh.write(head.format(v=flint.__version__, s="-+1", p0=min(precs), p1=max(precs)))
        fh.write("R,x,ktilde_dx,rel_radius,prec_bits\n")
        for R, x, val, rr, prec in ders:
            fh.write(f"{R!r},{x!r},{val:.17g},{rr:.2e},{prec}\n")
    print(f"wrote {len(vals)} rows to {os.path.normpath(OUT)} and {len(ders)} to {os.path.normpath(OUT_DX)}")


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    if argv and argv[0] == "rows":
        R = float(argv[1])
        part = int(argv[argv.index("--part") + 1]) if "--part" in argv else 0
        parts = int(argv[argv.index("--parts") + 1]) if "--parts" in argv else 1
        for row in rows_for(R, part, parts):
            print(",".join(repr(v) for v in row), flush=True)
        return 0
    if argv and argv[0] == "merge":
        rows = []
        for name in argv[1:]:
            with open(name) as fh:
                for line in fh:
                    k, R, x, v, rr, prec = line.strip().split(",")
                    rows.append((k.strip("'"), float(R), float(x), float(v), float(rr), int(prec)))
        write_tables(rows)
        return 0
    Rs = [float(a) for a in argv] if argv else R_DEFAULT
    t0 = time.time()
    rows = []
    for R in Rs:
        rows += list(rows_for(R))
        print(f"R = {R:g}: {len(rows)} rows so far, {time.time() - t0:.0f} s", flush=True)
    write_tables(rows)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
