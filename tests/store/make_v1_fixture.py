"""Write the schema-version-1 fixture store ``tests/store/data/v1-small.h5``.

The fixture was made once with the version-1 writer (maasscomp 0.1.0, before schema 2) so
that later readers can be tested against a file the old code really wrote; the JSON export
that the same old code produced from it is kept beside it (``v1-small.export.json``).
Rerunning this script with a newer writer would not make a version-1 file: keep the
committed files.

Content (synthetic data of our own, not real Maass forms): six forms at levels 1, 6 and 11
(real and complex coefficients, a degenerate pair, every kind of ``extra`` value), two runs
with task marks, and a scan-like attachment.

Usage: python tests/store/make_v1_fixture.py
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
OUT = HERE / "data" / "v1-small.h5"
OUT_JSON = HERE / "data" / "v1-small.export.json"


def fixture_forms():
    from maasscomp.hejhal.types import SolverParams, SymmetryClass
    from maasscomp.spectrum.form import Form

    rng = np.random.default_rng(20240501)
    out = []
    specs = [
        (1, SymmetryClass("even"), 9.5336952613, 1, 0, False),
        (1, SymmetryClass("odd"), 12.1730083246, 1, 0, False),
        (11, SymmetryClass("even", ((11, 1),)), 3.4536492130, 1, 0, False),
        (6, SymmetryClass("odd", ((2, -1), (3, 1))), 5.2001234567, 2, 0, False),
        (6, SymmetryClass("odd", ((2, -1), (3, 1))), 5.2001234567, 2, 1, False),
        (6, SymmetryClass("even"), 7.7500000001, 1, 0, True),
    ]
    n_cusps = {1: 1, 6: 4, 11: 2}
    for i, (N, sym, R, mult, bidx, cplx) in enumerate(specs):
        M = 12 + 3 * i
        c = rng.normal(size=(n_cusps[N], M))
        if cplx:
            c = c + 1j * rng.normal(size=c.shape)
        c[0, 0] = 1.0
        e = 10.0 ** rng.uniform(-14, -6, size=c.shape)
        out.append(Form(
            level=N, R=R, symmetry=sym, coeffs=c, coeff_errors=e,
            R_error=10.0 ** -(9 + i), hecke_residual=10.0 ** -(8 + i),
            params=SolverParams(Y=0.1 + 0.05 * i, M0=20 + i, Q=40 + 2 * i, eps=1e-14),
            is_new=[True, False, None][i % 3], multiplicity=mult, basis_index=bidx,
            extra={"index": i, "hecke": {"2": float(rng.normal())}, "pair": (1, 2.5),
                   "z": complex(0.5, -1.25), "vec": rng.normal(size=3),
                   "ints": np.arange(4, dtype=np.int32), "nan": math.nan, "none": None,
                   "text": "caf\u00e9"}))
    return out


def main() -> None:
    from maasscomp.store import SCHEMA_VERSION, Store, export_json

    if SCHEMA_VERSION != 1:
        raise SystemExit(f"this writer makes schema version {SCHEMA_VERSION}; the fixture must "
                         "come from the version-1 writer (keep the committed files)")
    if OUT.exists():
        OUT.unlink()
    forms = fixture_forms()
    with Store.open(OUT, "a", create=True) as st:
        rid = st.begin_run("fixture-run", config_text="[job]\nname = \"fixture-run\"\n")
        with st.transaction():
            keys = st.add_forms(forms[:3], config_text="levels = [1, 11]\n", run_id=rid)
            st.mark_task_done("search:N=1:even:[9.0,14.0]", keys[:1], run_id=rid)
            st.mark_task_done("search:N=1:odd:[9.0,14.0]", keys[1:2], run_id=rid)
            st.mark_task_done("search:N=11:even,11+:[3.0,4.0]", keys[2:3], run_id=rid)
        keys += st.add_forms(forms[3:], run_id="")
        st.mark_task_done("manual", keys[3:], run_id="other-run")
        st.put_attachment(keys[0], "scan", {"sup": 2.5, "where": "cusp 0",
                                            "peak": np.array([0.25, 1.75]), "none": None,
                                            "grid": {"n": 16}})
    export_json(OUT, OUT_JSON, attachments=True)
    print(f"wrote {OUT} and {OUT_JSON}: {len(keys)} forms")


if __name__ == "__main__":
    main()
