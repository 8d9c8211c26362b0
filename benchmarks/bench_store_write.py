"""Benchmark: writing 1000 forms (M = 200, 1-4 cusps) into the store.

Run: python benchmarks/bench_store_write.py [N_FORMS]

Prints seconds for transactions of 1 and of 100 forms (durable fsync on and off), and
the ratio against a reference measured in the same run: the same forms written in place
with plain h5py into one open file (not crash-safe; the lower bound of the format).
"""

from __future__ import annotations

import os
import sys
import tempfile
import time
from pathlib import Path

import h5py
import numpy as np

from maasscomp.hejhal.types import SolverParams, SymmetryClass
from maasscomp.spectrum.form import Form
from maasscomp.store import Store


def make_forms(n: int, M: int = 200) -> list[Form]:
    rng = np.random.default_rng(0)
    out = []
    for i in range(n):
        nc = 1 + i % 4
        out.append(Form(level=[1, 2, 6, 30][i % 4], R=1.0 + 0.01 * i,
                        symmetry=SymmetryClass("even" if i % 2 else "odd"),
                        coeffs=rng.normal(size=(nc, M)), coeff_errors=rng.random((nc, M)),
                        R_error=1e-10, hecke_residual=1e-9, params=SolverParams(0.2, M, M + 20),
                        extra={"i": i, "hecke": [0.5, -1.2]}))
    return out


def reference_inplace(path: Path, forms: list[Form]) -> None:
    with h5py.File(path, "w") as h:
        for i, f in enumerate(forms):
            g = h.create_group(f"f{i}")
            for k in ("level", "R", "R_error", "hecke_residual"):
                g.attrs[k] = getattr(f, k)
            g.create_dataset("coeffs", data=f.coeffs)
            g.create_dataset("coeff_errors", data=f.coeff_errors)


def run(path: Path, forms: list[Form], batch: int, durable: bool) -> float:
    if path.exists():
        path.unlink()
    t = time.perf_counter()
    with Store.open(path, "a", create=True, durable=durable) as st:
        for i in range(0, len(forms), batch):
            st.add_forms(forms[i:i + batch])
    return time.perf_counter() - t


def main() -> None:
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 1000
    forms = make_forms(n)
    with tempfile.TemporaryDirectory(dir=os.environ.get("BENCH_DIR")) as d:
        d = Path(d)
        t = time.perf_counter()
        reference_inplace(d / "ref.h5", forms)
        ref = time.perf_counter() - t
        print(f"{n} forms, M=200, 1-4 cusps; file size {os.path.getsize(d / 'ref.h5') / 1e6:.1f} MB (reference)")
        print(f"reference in-place h5py (unsafe)       : {ref:8.3f} s")
        for batch in (100, 1):
            for durable in (False, True):
                s = run(d / "s.h5", forms, batch, durable)
                print(f"store, {n // batch:5d} transactions of {batch:3d}, fsync={str(durable):5s}: "
                      f"{s:8.3f} s  ({s / ref:6.1f} x reference, {1e3 * s / (n // batch):7.2f} ms/txn)")
        t = time.perf_counter()
        with Store.open(d / "s.h5") as st:
            got = st.forms()
        print(f"read back all {len(got)} forms                 : {time.perf_counter() - t:8.3f} s")


if __name__ == "__main__":
    main()
