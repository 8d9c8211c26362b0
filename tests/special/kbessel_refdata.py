"""Loaders for the K-Bessel reference tables in data/reference/ (CSV with '#' header lines)."""

from __future__ import annotations

import math
import os

import numpy as np

REF_DIR = os.path.join(os.path.dirname(__file__), "..", "..", "data", "reference")


def load_csv(name: str) -> dict[str, np.ndarray]:
    """Columns of a reference CSV as float arrays, keyed by the column names."""
    with open(os.path.join(REF_DIR, name)) as fh:
        lines = [ln.strip() for ln in fh if ln.strip() and not ln.startswith("#")]
    names = lines[0].split(",")
    data = np.array([[float(v) for v in ln.split(",")] for ln in lines[1:]])
    return {n: data[:, i] for i, n in enumerate(names)}


def arb_ktilde_re(R: float, x: float, order_shift: int = 0) -> float:
    """Real part of exp(pi R/2) K_{order_shift + iR}(x) from python-flint arb, 1e-18 relative.

    The working precision starts at 2.3 R + 192 bits (the cancellation for x < R costs about
    2.27 R bits, docs/theory.md §4.3) and is doubled until the enclosure is tight enough.
    """
    import flint

    prec = int(2.3 * R) + 192
    old = flint.ctx.prec
    try:
        while True:
            flint.ctx.prec = prec
            v = flint.acb(x).bessel_k(flint.acb(order_shift, R)) * (flint.arb.pi() * flint.arb(R) / 2).exp()
            mid, rad = float(v.real.mid()), float(v.real.rad())
            if mid != 0.0 and math.isfinite(mid) and rad <= 1e-18 * abs(mid):
                return mid
            prec *= 2
    finally:
        flint.ctx.prec = old
