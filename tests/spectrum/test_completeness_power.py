"""Power of the completeness tests on complete lists (lean version for the default run).

The full measurement is benchmarks/bench_completeness_power.py; its rates are stated in
docs/theory.md §8.6 and in maasscomp.spectrum.weyl.completeness.

Outside check: Weyl's law for PSL(2,Z) (R. Steil, DESY 94-028 (1994); H. Then, Math. Comp.
74 (2005); from memory of these sources) and the trace formula behind it.  The lists are
project computations: data/reference/psl2z_R100_window.csv and psl2z_R1000_window.csv
(every form with 95 <= R <= 105, resp. 998 <= R <= 1002, both parities; the R = 1000 list
is one run of the search over the whole range, and a second run with another lattice of
expansion points and other sample heights reproduced all 277 forms of the parts it covered,
[998, 998.75] and [999.5, 1000.5], to 1.2e-10 in R; see the headers).  What is tested here is that the tests have power
on these lists: a complete list passes, a list with one form or one close pair removed is
flagged, and the flagged search-again intervals contain what was removed.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pytest

from maasscomp.spectrum.weyl import completeness

REF = Path(__file__).resolve().parents[2] / "data" / "reference"


class _Sym:
    def __init__(self, label: str) -> None:
        self.label = label


class _Form:
    def __init__(self, R: float, label: str) -> None:
        self.R, self.symmetry, self.is_new, self.multiplicity = R, _Sym(label), True, 1


def _forms(name: str) -> list[_Form]:
    lines = [ln for ln in open(REF / name) if not ln.startswith("#")]
    return sorted((_Form(float(r["R"]), r["label"]) for r in csv.DictReader(lines)), key=lambda f: f.R)


def _detected(rep, xs) -> bool:
    return all(any(w.T_lo < x <= w.T_hi for w in rep.flagged) and
               any(a <= x <= b for a, b in rep.research_intervals()) for x in xs)


@pytest.fixture(scope="module")
def r100():
    return _forms("psl2z_R100_window.csv")


@pytest.fixture(scope="module")
def r1000():
    return _forms("psl2z_R1000_window.csv")


def test_complete_lists_pass(r100, r1000):
    assert completeness(1, r100, 95.0, 104.0, complete_to=105.0).is_complete
    rep = completeness(1, r1000, 998.0, 1001.2, complete_to=1002.0)
    assert rep.is_complete, rep.as_text()


@pytest.mark.parametrize("x0", [98.0, 99.5, 101.0])
def test_one_deleted_form_is_found_at_R100(r100, x0):
    k = int(np.argmin([abs(f.R - x0) for f in r100]))
    gone = r100[k].R
    rep = completeness(1, r100[:k] + r100[k + 1:], 95.0, 104.0, complete_to=105.0)
    assert _detected(rep, [gone]), rep.as_text()


def test_one_deleted_form_is_found_at_R1000(r1000):
    k = int(np.argmin([abs(f.R - 999.9) for f in r1000]))
    gone = r1000[k].R
    rep = completeness(1, r1000[:k] + r1000[k + 1:], 998.0, 1001.2, complete_to=1002.0)
    assert _detected(rep, [gone]), rep.as_text()


def test_a_deleted_close_pair_is_found_at_R1000(r1000):
    # the odd pair 999.592113 / 999.592629 (gap 5.2e-4), one of those a coarse grid misses
    pair = [f.R for f in r1000 if abs(f.R - 999.5924) < 5e-4 and f.symmetry.label == "odd"]
    assert len(pair) == 2
    rest = [f for f in r1000 if f.R not in pair]
    rep = completeness(1, rest, 998.0, 1001.2, complete_to=1002.0)
    assert _detected(rep, pair), rep.as_text()


def test_losing_every_close_pair_shows_in_the_gap_test(r1000):
    """What a coarse grid does: one member of every same-parity pair closer than 1e-3 in
    [999.5, 1000.5] is lost; the small-gap test flags the window, the count does not."""
    drop = set()
    for lab in ("even", "odd"):
        xs = sorted(f.R for f in r1000 if f.symmetry.label == lab and 999.5 <= f.R <= 1000.5)
        drop |= {b for a, b in zip(xs, xs[1:]) if b - a < 1e-3}
    rest = [f for f in r1000 if f.R not in drop]
    rep = completeness(1, rest, 999.0, 1001.0, window=[999.0, 999.5, 1000.5, 1001.0], complete_to=1002.0)
    mid = rep.windows[1]
    assert "spacing" in mid.reasons and mid.spacing_p < 0.01, rep.as_text()
    full = completeness(1, r1000, 999.0, 1001.0, window=[999.0, 999.5, 1000.5, 1001.0], complete_to=1002.0)
    assert "spacing" not in full.windows[1].reasons
