"""Completeness reports against Weyl's law (maasscomp.spectrum.weyl.completeness).

Outside source: exactly ten cusp forms on PSL(2,Z) have R < 20 (Booker-Strombergsson-
Venkatesh, IMRN 2006, certify the first ten eigenvalues, as stated there).  The ten
values themselves are a project computation (data/reference/psl2z_forms_computed.csv),
whose first three agree with published digits (checked in test_psl2z_table_values).
"""

from __future__ import annotations

import numpy as np
import pytest

from maasscomp.errors import InputError
from maasscomp.spectrum.weyl import completeness, weyl_count

from ._psl2z_table import forms


def _R() -> np.ndarray:
    return np.array([float(r) for _, _, r in forms()])


def test_psl2z_table_values():
    # data/reference/maass_level1_published.csv: R1 = 9.53369526135 (Chamizo page, 11
    # decimals), R2 = 12.173008324679677 (Chamizo, 15 decimals), first even form
    # 13.779751351890738 (from memory, 15 decimals); ten forms below 20 (BSV 2006)
    f = forms()
    assert len(f) == 10 and all(float(r) < 20 for _, _, r in f)
    assert abs(float(f[0][2]) - 9.53369526135) < 1e-11 and f[0][1] == "odd"
    assert abs(float(f[1][2]) - 12.173008324679677) < 2e-15 and f[1][1] == "odd"
    evens = [float(r) for _, p, r in f if p == "even"]
    assert abs(evens[0] - 13.779751351890738) < 2e-15


def test_complete_list_is_not_flagged():
    R = _R()
    rep = completeness(1, R, 0.0, 20.0)
    assert rep.total_found == 10
    assert round(rep.total_expected) == 10
    assert rep.is_complete, rep.as_text()
    assert rep.suspect_gaps == ()
    # remainder N - W is of the usual size (docs/theory.md §2.2: r.m.s. about 0.3 for T <= 20)
    assert np.all(np.abs(rep.remainder) < 1.0)
    assert abs(rep.mean_remainder) < 0.5
    assert rep.rms_remainder < 0.6


@pytest.mark.parametrize("window", [None, 2.0, 3.0])
@pytest.mark.parametrize("k", range(10))
def test_deleted_eigenvalue_is_flagged_in_its_window(k, window):
    R = _R()
    gone = R[k]
    rep = completeness(1, np.delete(R, k), 0.0, 20.0, window=window)
    assert not rep.is_complete
    # exactly one missing eigenvalue is reported, and its window is flagged
    assert len(rep.suspect_gaps) == 1, rep.as_text()
    assert any(w.T_lo < gone <= w.T_hi for w in rep.flagged), rep.as_text()
    # windows flagged by the count test touch the suspect gap
    lo, hi = rep.suspect_gaps[0]
    assert all(w.T_lo < hi and w.T_hi > lo for w in rep.flagged if "count" in w.reasons)


def test_every_pair_of_deleted_eigenvalues_gives_two_gaps():
    R = _R()
    for i in range(10):
        for j in range(i + 1, 10):
            rep = completeness(1, np.delete(R, [i, j]), 0.0, 20.0)
            assert len(rep.suspect_gaps) == 2, (i, j, rep.as_text())
            for gone in (R[i], R[j]):
                assert any(w.T_lo < gone <= w.T_hi for w in rep.flagged), (i, j, rep.as_text())


def test_report_table_fields():
    R = _R()
    rep = completeness(1, R, 0.0, 20.0, window=2.0)
    assert len(rep.windows) == 10
    assert sum(w.found for w in rep.windows) == 10
    assert rep.windows[-1].expected == pytest.approx(
        weyl_count(1, 20.0) - weyl_count(1, 18.0), abs=1e-12
    )
    text = rep.as_text(limitations=False)
    assert "expected" in text and len(text.splitlines()) == 13
    assert "can and cannot" in rep.as_text()


def test_count_below_offsets_running_remainder():
    R = _R()
    hi = R[R > 15]
    rep = completeness(1, hi, 15.0, 20.0, count_below=int(np.sum(R <= 15)))
    full = completeness(1, R, 0.0, 20.0)
    np.testing.assert_allclose(rep.remainder, full.remainder[R > 15], atol=1e-12)


def test_bad_arguments():
    with pytest.raises(InputError):
        completeness(1, [9.5], 5.0, 4.0)
    with pytest.raises(InputError):
        completeness(1, [-1.0], 0.0, 20.0)
    with pytest.raises(InputError):
        completeness(0, [9.5], 0.0, 20.0)
    with pytest.raises(InputError):
        completeness(1, [9.5], 0.0, 20.0, complete_to=19.0)
    with pytest.raises(InputError):
        completeness(1, [9.5], 0.0, 20.0, window=[0.0, 30.0, 20.0])
