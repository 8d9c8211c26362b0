"""Loaders for the K-Bessel reference tables in data/reference/ (CSV with '#' header lines)."""

from __future__ import annotations

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
