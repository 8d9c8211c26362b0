"""Recompute the K-Bessel peak table and spot values in ball arithmetic (python-flint, arb).

Writes, from the repository root,

    python tests/special/make_kbessel_peak_values.py            # both files
    python tests/special/make_kbessel_peak_values.py --check    # compare, write nothing

* ``data/reference/kbessel_airy_peak.csv``: for each R the maximiser x* of
  g(x) = sqrt(x/(2 pi)) Kt(R, x), Kt = exp(pi R/2) K_{iR}, and the maximum g(x*).  x* is the
  zero of g'(x)/sqrt(x/(2 pi)) = Kt(x)/(2x) + Kt'(x) in the bracket of the last maximum before
  the turning point (Airy variable t = (x - R)/(R/2)^{1/3} in [-1.9, -0.2]: it holds the first
  zero a'_1 = -1.0188 of Ai' and neither a'_2 = -3.2482 nor the zero a_1 = -2.3381 of Ai,
  DLMF Table 9.9.1).  Kt' comes from K_{nu-1} + K_{nu+1} = -2 K'_nu (DLMF 10.29.1), all in arb.
  The root is found by bisection on the sign of that ball down to a relative width of 1e-15,
  so every step is decided rigorously (a ball that still holds 0 at four times the starting
  precision stops the bisection at that point).
* ``data/reference/kbessel_spot_values.csv``: Kt(R, x) at fixed points.

Precision: as in ``make_kbessel_table.py`` (start at 2.3 R + 128 bits, double until the
relative radius is below 1e-20).  Values are printed to the number of significant digits in
the ``*_digits``/``digits`` columns, rounded to nearest.  Takes about a minute (R = 10^4
dominates).
"""

from __future__ import annotations

import math
import os
import sys
import time

import flint

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
from make_kbessel_table import arb_ktilde  # noqa: E402  (same folder, run as a script)

REF = os.path.join(HERE, "..", "..", "data", "reference")
PEAK_FILE = os.path.join(REF, "kbessel_airy_peak.csv")
SPOT_FILE = os.path.join(REF, "kbessel_spot_values.csv")

# (R, significant digits of x*, significant digits of the maximum)
PEAK_ROWS = [(10, 11, 10), (30, 10, 10), (100, 10, 10), (300, 10, 10), (1000, 10, 10),
             (3000, 10, 10), (10000, 10, 10)]
# (R, x as printed, significant digits of the value)
SPOT_ROWS = [(10, "8.4358335228", 14), (100, "96.329078961", 14), (1000, "991.9520134", 15),
             (1000, "10", 15), (1000, "2000", 14), (100, "100", 11), (1000, "1000", 11)]


def _prec(R: float) -> int:
    return int(2.3 * R) + 128


def _slope_ball(R: float, x: flint.arb, prec: int):
    """Kt(x)/(2x) + Kt'(x) as an arb ball (the sign of g'(x))."""
    old = flint.ctx.prec
    try:
        flint.ctx.prec = prec
        z = flint.acb(x)
        scale = (flint.arb.pi() * flint.arb(R) / 2).exp()
        k0 = z.bessel_k(flint.acb(0, R)) * scale
        km = z.bessel_k(flint.acb(-1, R)) * scale
        kp = z.bessel_k(flint.acb(1, R)) * scale
        return (k0 / (2 * z) - (km + kp) / 2).real
    finally:
        flint.ctx.prec = old


def _sign(R: float, x: float) -> int:
    """Sign of g'(x), decided by an arb ball; 0 if the ball still holds 0 at 4x the precision."""
    prec = _prec(R)
    for _ in range(3):
        s = _slope_ball(R, flint.arb(x), prec)
        if s > 0:
            return 1
        if s < 0:
            return -1
        prec *= 2
    return 0


def airy_peak_arb(R: float) -> tuple[float, float]:
    """(x*, g(x*)) with x* to relative 1e-15 by bisection on rigorous signs."""
    s = (R / 2.0) ** (1.0 / 3.0)
    lo, hi = R - 1.9 * s, R - 0.2 * s
    s_lo, s_hi = _sign(R, lo), _sign(R, hi)
    if not (s_lo > 0 > s_hi):
        raise RuntimeError(f"bracket [{lo}, {hi}] does not hold one maximum for R={R}")
    # 1e-15 relative: far below the 11 printed digits, and above the last bit of a double
    while hi - lo > 1e-15 * hi:
        mid = 0.5 * (lo + hi)
        sm = _sign(R, mid)
        if sm == 0:
            lo = hi = mid
            break
        if sm > 0:
            lo = mid
        else:
            hi = mid
    x_star = 0.5 * (lo + hi)
    kt, _, _ = arb_ktilde(R, x_star)
    # g is flat at x*: an error of 1e-16 relative in x* changes g only at order 1e-32
    return x_star, math.sqrt(x_star / (2 * math.pi)) * kt


def _sig(v: float, digits: int) -> str:
    """v rounded to ``digits`` significant digits, written without an exponent when natural."""
    s = f"{v:.{digits - 1}e}"
    mant, exp = s.split("e")
    e = int(exp)
    if -5 <= e < 16:
        dec = max(digits - 1 - e, 0)
        return f"{v:.{dec}f}"
    return s.replace("e-0", "e-").replace("e+0", "e+").replace("e+", "e")


def peak_lines() -> list[str]:
    out = [
        "# Maximum over x > 0 of sqrt(x/(2 pi)) * exp(pi R/2) * |K_{iR}(x)| and its argmax x*.",
        f"# source: computed here with python-flint {flint.__version__} (arb ball arithmetic), script",
        "#   tests/special/make_kbessel_peak_values.py: x* = root of d/dx in the bracket of the last",
        "#   maximum before the turning point, by bisection on the sign of an arb ball (DLMF 10.29.1",
        "#   for K'), maximum = value at x*; rounded to the digits in the *_digits columns.",
        "# Airy constants of the leading-order prediction (DLMF section 9.9, Table 9.9.1):",
        "#   a'_1 = -1.0187929716474710890, Ai(a'_1) = 0.53565665601569986114.",
        "R,x_star,max_value,x_star_digits,max_digits",
    ]
    for R, dx, dv in PEAK_ROWS:
        t = time.time()
        x, v = airy_peak_arb(float(R))
        out.append(f"{R},{_sig(x, dx)},{_sig(v, dv)},{dx},{dv}")
        print(f"peak R = {R}: x* = {x!r}, max = {v!r} ({time.time() - t:.1f} s)", flush=True)
    return out


def spot_lines() -> list[str]:
    out = [
        "# Spot values of Kt(R, x) = exp(pi R/2) K_{iR}(x).",
        f"# source: computed here with python-flint {flint.__version__} (arb ball arithmetic), script",
        "#   tests/special/make_kbessel_peak_values.py: acb(x).bessel_k(acb(0, R)) * exp(pi R/2), precision",
        "#   doubled from 2.3 R + 128 bits until the relative radius is <= 1e-20; the digits column is",
        "#   the number of significant digits printed (rounded to nearest).",
        "R,x,value,digits",
    ]
    for R, xs, d in SPOT_ROWS:
        v, _, _ = arb_ktilde(float(R), float(xs))
        out.append(f"{R},{xs},{_sig(v, d)},{d}")
    return out


def _data_rows(path: str) -> list[str]:
    with open(path) as fh:
        return [ln.strip() for ln in fh if ln.strip() and not ln.startswith("#")]


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    check = "--check" in argv
    bad = 0
    for path, lines in ((SPOT_FILE, spot_lines()), (PEAK_FILE, peak_lines())):
        new_rows = [ln for ln in lines if not ln.startswith("#")]
        if check:
            old_rows = _data_rows(path)
            for o, n in zip(old_rows, new_rows):
                if o != n:
                    bad += 1
                    print(f"{os.path.basename(path)}: file {o!r} != recomputed {n!r}")
            if len(old_rows) != len(new_rows):
                bad += 1
                print(f"{os.path.basename(path)}: {len(old_rows)} rows in the file, {len(new_rows)} recomputed")
        else:
            with open(path, "w") as fh:
                fh.write("\n".join(lines) + "\n")
            print(f"wrote {os.path.normpath(path)}")
    if check:
        print("all rows reproduced" if bad == 0 else f"{bad} differences")
    return 1 if bad else 0


if __name__ == "__main__":
    raise SystemExit(main())
