"""Completeness against Weyl's law and the automatic re-search of deficit windows.

Source for the count: exactly ten cusp forms of PSL(2,Z) have R < 20 (Booker,
Strömbergsson and Venkatesh, IMRN 2006, certify the first ten eigenvalues; statement as
printed there, digits of the tenth recalled from memory).
"""

from __future__ import annotations

import pytest

import maasscomp.spectrum.complete as complete
from maasscomp.groups import gamma0
from maasscomp.spectrum.complete import complete_search, merge_forms
from maasscomp.spectrum.search import SearchSettings

FAST = SearchSettings(lfunction_check=False)


@pytest.fixture(scope="module")
def level1_to_20():
    return complete_search(gamma0(1), 0.5, 20.0, settings=FAST)


def test_ten_forms_below_20_and_complete(level1_to_20):
    res = level1_to_20
    assert len(res.forms) == 10  # BSV 2006: the first ten eigenvalues lie below R = 20
    assert res.report is not None and res.report.is_complete
    assert not res.researched
    assert abs(res.report.mean_remainder) < 0.5


def test_a_missed_form_is_flagged_and_found_again(level1_to_20, monkeypatch):
    """Drop the form near R = 14.3585 from the first search: the deficit window must be
    flagged and the re-search (finer grid, other heights) must recover it."""
    real_search = complete._search
    calls = []

    def lossy(group, parities, a, b, settings, progress):
        forms = real_search(group, parities, a, b, settings, progress)
        calls.append((a, b))
        if len(calls) == 1:
            forms = [f for f in forms if abs(f.R - 14.3585095) > 1e-3]
        return forms

    monkeypatch.setattr(complete, "_search", lossy)
    res = complete_search(gamma0(1), 0.5, 20.0, settings=FAST)
    assert len(calls) >= 2
    assert any(a < 14.3585 <= b for a, b in res.researched), res.researched
    assert len(res.forms) == 10
    assert res.report.is_complete
    assert any("re-searched" in line for line in res.log)


def test_duplicates_are_merged(level1_to_20):
    forms = list(level1_to_20.forms)
    merged, n = merge_forms(forms + forms[:3])
    assert n == 3 and len(merged) == len(forms)
