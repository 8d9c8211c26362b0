"""Helpers shared by the pipeline and CLI tests: small configs and store comparison."""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[2]
PUBLISHED = REPO / "data" / "reference" / "maass_level1_published.csv"


def published_level1_R() -> dict[int, tuple[str, float, int]]:
    """form number -> (parity, R, digits printed) from data/reference/maass_level1_published.csv
    (sources named in that file's header)."""
    out = {}
    with open(PUBLISHED, encoding="utf-8") as fh:
        rows = [r for r in fh if not r.startswith("#")]
    for row in csv.DictReader(rows):
        if row["quantity"] == "R":
            out[int(row["form"])] = (row["parity"], float(row["value"]), int(row["digits_printed"]))
    return out


def write_config(path: Path, *, output: str, levels="[1]", windows=None, R=(9.3, 9.8),
                 parities='["odd"]', backend="serial", workers=1, chunk_width=0.25,
                 step=0.05, name="t", extra_search="", extra="") -> Path:
    """A small job config (step 0.05 is ample for level 1 and 2 near R = 10, where the
    mean spacing per class is about 1; step=None leaves the search's default). Scans are off
    unless ``extra_search`` or ``extra`` has a [scan] section (they are tested in
    test_pipeline_scan_report.py)."""
    if "[scan]" not in extra_search + extra:
        extra_search += "\n[scan]\nenabled = false"
    win = (f"windows = {windows}" if windows is not None else f"R_min = {R[0]!r}\nR_max = {R[1]!r}")
    text = f"""[job]
name = "{name}"
output = "{output}"

[search]
levels = {levels}
{win}
parities = {parities}
chunk_width = {chunk_width!r}
{"" if step is None else f"step = {step!r}"}
n_coeffs = 20
{extra_search}

[executor]
backend = "{backend}"
workers = {workers}
{extra}
"""
    path.write_text(text, encoding="utf-8")
    return path


def store_content(path: Path) -> list[dict]:
    """The forms of a store in a canonical order, without write-order or time fields."""
    from maasscomp.store import Store

    out = []
    with Store.open(path, "r") as st:
        for k in st.keys():
            f = st.get(k)
            out.append({"level": f.level, "label": f.symmetry.label, "R": f.R,
                        "basis_index": f.basis_index, "coeffs": f.coeffs, "is_new": f.is_new,
                        "R_error": f.R_error})
    out.sort(key=lambda d: (d["level"], d["label"], d["R"], d["basis_index"]))
    return out


def assert_same_content(a: list[dict], b: list[dict], *, R_tol: float = 1e-10,
                        c_tol: float = 1e-8) -> None:
    """Same forms: same level, class, multiplicity index and new/old label; R and the
    coefficients equal to within the accuracy the search confirms (R to 1e-8 at two
    heights, so differences of rounding between processes are far below R_tol)."""
    assert [(d["level"], d["label"], d["basis_index"]) for d in a] == \
        [(d["level"], d["label"], d["basis_index"]) for d in b]
    for x, y in zip(a, b):
        assert abs(x["R"] - y["R"]) <= R_tol, (x["R"], y["R"])
        assert x["coeffs"].shape == y["coeffs"].shape
        assert np.max(np.abs(x["coeffs"] - y["coeffs"])) <= c_tol
        assert x["is_new"] == y["is_new"]
