"""Loader for the project-computed PSL(2,Z) forms table (see make_psl2z_forms_table.py)."""

from __future__ import annotations

import csv
from functools import lru_cache
from pathlib import Path

import numpy as np

REF = Path(__file__).resolve().parents[2] / "data" / "reference"


def _rows(name: str) -> list[dict[str, str]]:
    with open(REF / name) as fh:
        lines = [ln for ln in fh if not ln.startswith("#")]
    return list(csv.DictReader(lines))


@lru_cache(maxsize=None)
def forms() -> tuple[tuple[int, str, str], ...]:
    """(index, parity, R as decimal string) for the ten forms with R < 20."""
    return tuple((int(r["form"]), r["parity"], r["R"]) for r in _rows("psl2z_forms_computed.csv"))


@lru_cache(maxsize=None)
def coefficients(k: int) -> tuple[np.ndarray, np.ndarray]:
    """a(1..N) and their estimated errors for form k."""
    rows = [r for r in _rows("psl2z_coeffs_computed.csv") if int(r["form"]) == k]
    rows.sort(key=lambda r: int(r["n"]))
    return np.array([float(r["a"]) for r in rows]), np.array([float(r["a_error"]) for r in rows])
