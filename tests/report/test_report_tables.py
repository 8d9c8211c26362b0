"""The one CSV writer and the one Markdown writer (project-internal checks)."""

from __future__ import annotations

import csv
import math

import numpy as np

from maasscomp.report.tables import Column, csv_text, markdown_table, write_csv


def test_csv_keeps_full_precision_and_plain_numbers(tmp_path):
    """numpy scalars become plain numbers; every float reads back bit for bit."""
    rows = [{"a": np.float64(-0.00741234567891234), "b": np.int64(3), "c": np.bool_(True), "d": None,
             "e": math.nan, "f": "x"}]
    path = write_csv(tmp_path / "t.csv", ["a", "b", "c", "d", "e", "f"], rows)
    text = path.read_text()
    assert "np." not in text and "float64" not in text
    (back,) = list(csv.DictReader(open(path, newline="")))
    assert float(back["a"]) == -0.00741234567891234
    assert back["b"] == "3" and back["c"] == "true" and back["d"] == "" and back["e"] == "nan"
    assert not list(tmp_path.glob("*.tmp"))


def test_markdown_digits_per_column():
    cols = [Column("R", digits=10), Column("share", fixed=3), Column("err", digits=2), Column("n")]
    rows = [{"R": np.float64(999.99861234567), "share": 0.5, "err": 3.14159e-9, "n": np.int64(7)}]
    md = markdown_table(cols, rows)
    line = md.strip().splitlines()[-1]
    assert line == "| 999.9986123 | 0.500 | 3.1e-09 | 7 |"
    assert "---:" in md


def test_csv_text_header_order():
    assert csv_text([Column("b"), "a"], [{"a": 1, "b": 2}]).splitlines() == ["b,a", "2,1"]
