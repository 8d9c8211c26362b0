"""Weyl's law at the non-squarefree levels 4, 8, 9 against complete lists of eigenvalues.

The outside check is the trace formula itself (Selberg's trace formula for Gamma0(N):
H. Iwaniec, *Spectral Methods of Automorphic Forms*, 2nd ed. 2002, Thm 10.2; D. A. Hejhal,
Springer LNM 1001, 1983), from which the project derived W_N
(docs/theory.md §8.3).  The lists of eigenvalues are our own:
data/reference/weyl_level{4,8,9}_R12.csv, computed here with maasscomp
(a fine-grid search of the project, two independent fine-grid runs; see the
file headers and tests/spectrum/make_spectrum_lists.py).  A list is compared with the law,
so this checks the law only as far as the lists are complete, and the lists only as far as
the law is right; the two were made independently.
"""

from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np
import pytest

from maasscomp.spectrum.spectral_checks import remainder_scale
from maasscomp.spectrum.weyl import completeness, count_identity, weyl_count, weyl_terms

REF = Path(__file__).resolve().parents[2] / "data" / "reference"


def _rows(level: int) -> list[dict]:
    lines = [ln for ln in open(REF / f"weyl_level{level}_R12.csv") if not ln.startswith("#")]
    return list(csv.DictReader(lines))


def _R(level: int) -> np.ndarray:
    return np.sort(np.array([float(r["R"]) for r in _rows(level)]))


@pytest.mark.parametrize("N", [4, 8, 9])
def test_counts_agree_with_weyls_law_within_the_remainder(N):
    R = _R(N)
    T = np.linspace(3.0, 12.0, 181)
    S = np.searchsorted(R, T, side="right") - weyl_count(N, T)
    # the remainder is mean-zero and of the size measured on complete lists (its model); it
    # jumps by sigma_0(N) at an eigenvalue of level 1 (oldforms g(dz), d | N)
    assert abs(np.mean(S)) < 0.5, np.mean(S)
    sigma0 = sum(1 for d in range(1, N + 1) if N % d == 0)
    assert np.max(np.abs(S)) < sigma0 / 2 + 1.0 + 4.0 * remainder_scale(N, 12.0)
    # power of this check: the naive scattering conductor N^h (the squarefree pattern) in
    # place of A_N shifts the mean remainder by (T/pi) log(N^h / A_N), more than 1 here
    t = weyl_terms(N)
    shift = (T / math.pi) * (t.n_cusps * math.log(N) - t.log_conductor)
    assert np.mean(S + shift) > 1.0


@pytest.mark.parametrize("N", [4, 8, 9])
def test_complete_lists_pass_the_completeness_report(N):
    rep = completeness(N, _R(N), 0.0, 12.0)
    assert rep.is_complete, rep.as_text()


def test_old_new_identity_at_level_8():
    """Level-8 forms from level 1 (sigma_0(8) = 4 copies), 2 (3) and 4 (2): the stored
    classification of the lists of levels 4 and 8 obeys N_8 = sum_M sigma_0(8/M) N_M^new."""

    class F:
        def __init__(self, r, level):
            self.R = float(r["R"])
            self.level = level
            self.is_new = {"1": True, "0": False}.get(r["is_new"])
            self.extra = {"old_from_level": int(r["old_from_level"])} if r["old_from_level"] else {}

    forms = [F(r, 8) for r in _rows(8)] + [F(r, 4) for r in _rows(4)]
    rows, summ = count_identity(8, forms, 12.0)
    by = {r.M: r for r in rows}
    # no newform of level 1 or 2 lies below R = 12 apart from R1 = 9.53... (level 1):
    # its four copies at level 8 and the level-4 newforms' two copies each are checked
    assert by[4].ok, rows
    assert summ["unclassified"] == 0
