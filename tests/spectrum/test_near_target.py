"""Forms near a target R: nearest-k and window searches, checked against Weyl's law.

Weyl's law for PSL(2,Z) with its lower-order terms (Steil, DESY report 94-028 (1994); Hejhal,
LNM 1001 (1983); recalled from memory, see docs/theory.md §2.2) fixes the expected count; the
remainder S(T) has mean zero and, for this arithmetic group, Poisson-like fluctuations, so a
window holding ~W forms may deviate by a few sqrt(W) (common practice in the field).
"""

from __future__ import annotations

import math

import pytest

from maasscomp.groups import gamma0
from maasscomp.spectrum.hecke import hecke_residual
from maasscomp.spectrum.near import forms_in_window, nearest_forms


def test_nearest_forms_are_the_nearest_in_a_larger_window():
    g = gamma0(1)
    near = nearest_forms(g, 40.0, k=3)
    assert len(near.forms) == 3
    d3 = abs(near.forms[-1].R - 40.0)
    wide = forms_in_window(g, 40.0 - d3 - 0.05, 40.0 + d3 + 0.05)
    within = sorted(abs(f.R - 40.0) for f in wide.forms)
    # the same three distances, and nothing closer was missed
    assert [round(x, 8) for x in within[:3]] == [round(abs(f.R - 40.0), 8) for f in near.forms]
    for f in near.forms:
        assert f.hecke_residual <= 1e-8


def test_window_count_matches_weyl_law():
    res = forms_in_window(gamma0(1), 50.0, 52.0)
    assert res.expected is not None
    assert abs(res.found - res.expected) <= 3 * math.sqrt(res.expected) + 1


def test_bad_targets_are_refused():
    from maasscomp.errors import InputError

    with pytest.raises(InputError, match="k="):
        nearest_forms(gamma0(1), 40.0, k=0)
    with pytest.raises(InputError, match="R0="):
        nearest_forms(gamma0(1), -1.0)


@pytest.mark.slow
def test_window_near_1000():
    """Issue check: every form near R = 1000 satisfies Hecke to 1e-8, is independent of Y,
    and the count matches Weyl's law within the usual remainder."""
    res = forms_in_window(gamma0(1), 1000.0, 1000.06)
    assert res.found >= 4
    assert abs(res.found - res.expected) <= 3 * math.sqrt(res.expected) + 1
    for f in res.forms:
        assert hecke_residual(f.coeffs[0], 1, 30) <= 1e-8
        assert f.coeff_errors[0, :30].max() <= 1e-8
