"""Shared fixtures: published reference values and searched spectra (computed once per session)."""

from __future__ import annotations

import csv
from pathlib import Path

import pytest

REF = Path(__file__).resolve().parents[1] / "data" / "reference"


def read_reference_csv(name: str) -> list[dict[str, str]]:
    """Rows of a data/reference CSV file (lines starting with '#' are the source header)."""
    with open(REF / name, encoding="utf-8") as fh:
        lines = [ln for ln in fh if not ln.startswith("#")]
    return list(csv.DictReader(lines))


@pytest.fixture(scope="session")
def level1_published() -> dict[tuple[int, str], tuple[float, int]]:
    """{(form, quantity): (value, digits printed)} from data/reference/maass_level1_published.csv."""
    out = {}
    for row in read_reference_csv("maass_level1_published.csv"):
        out[(int(row["form"]), row["quantity"])] = (float(row["value"]), int(row["digits_printed"]))
    return out


@pytest.fixture(scope="session")
def level1_window_9_14():
    """Both parities of PSL(2,Z) searched on [9, 14] with the default settings."""
    from maasscomp.groups import gamma0
    from maasscomp.spectrum.search import search_forms

    g = gamma0(1)
    return {p: search_forms(g, 9.0, 14.0, (p,)) for p in ("even", "odd")}
