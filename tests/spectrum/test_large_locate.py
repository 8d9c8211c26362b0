"""The large-R locate-and-verify routine (spectrum/large.py).

Outside reference: the PSL(2,Z) eigenvalues below R = 20 of
data/reference/psl2z_forms_computed.csv (refined to 32 digits in arb by the project's
high-precision module; R1 agrees with Booker-Strombergsson-Venkatesh 2006, R2 and the first
even R with published tables, see that file's header). Cross-method check: the window search
of spectrum/search.py (det-sign scan, two-height secant) must find the same forms at R = 300
and 1000. What the tests can detect: a wrong root, a missed or invented form, a spurious root
that passes verification, a nearest-k contract that returns a farther form, a memory fallback
that changes results, and bad input that is not refused.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from maasscomp.errors import InputError
from maasscomp.groups import gamma0
from maasscomp.spectrum.large import (LargeSettings, accurate_count, forms_in_window_large, locate_large,
                                      store_count)
from maasscomp.spectrum.near import forms_in_window

from tests.conftest import read_reference_csv

_REF = [(float(r["R"]), r["parity"]) for r in read_reference_csv("psl2z_forms_computed.csv")]


def test_small_R_forms_and_spurious_roots():
    """Near R0 = 13: the two nearest forms are the even 13.7797513518907... and the odd
    12.1730083246796... (reference table), and the spurious Y1 root of the truncated system
    at 12.597 (nearer to R0 than both) is rejected by the second height."""
    res = locate_large(gamma0(1), 13.0, k=2, settings=LargeSettings(lfunction_check=False))
    ref = sorted(_REF, key=lambda t: abs(t[0] - 13.0))[:2]
    assert [f.parity for f in res.forms] == [p for _, p in ref]
    for f, (R, _) in zip(res.forms, ref):
        assert abs(f.R - R) <= 1e-12 * R
        assert f.R_error <= 1e-10 and f.hecke_residual <= 1e-9
        assert f.coeffs.shape[1] >= 60 and np.all(f.coeff_errors[0, :30] <= 1e-8)
    rejected = [c for c in res.candidates if not c.accepted and not c.reason.startswith("not examined")]
    assert rejected and all(("second height" in c.reason) or ("coefficients" in c.reason) for c in rejected)
    # every reference form inside the searched interval closer than the second one was confirmed
    lo, hi = min(a for a, _ in res.windows), max(b for _, b in res.windows)
    assert any(abs(c.R - 12.597) < 1e-3 for c in rejected)
    assert res.parity_mismatches == 0 and lo <= 12.1 and hi >= 13.8


def test_agrees_with_the_window_search_at_R300():
    """Every form that spectrum.search finds in the searched window is found here, same R."""
    g = gamma0(1)
    res = locate_large(g, 300.0, k=3, settings=LargeSettings(lfunction_check=False))
    lo, hi = min(a for a, _ in res.windows), max(b for _, b in res.windows)
    ref = forms_in_window(g, lo, hi)
    near_ref = sorted(ref.forms, key=lambda f: abs(f.R - 300.0))[:3]
    assert len(res.forms) == 3
    for f, r in zip(res.forms, near_ref):
        assert f.parity == r.parity and abs(f.R - r.R) <= 1e-9 * f.R
        np.testing.assert_allclose(f.coeffs[0, :20], r.coeffs[0, :20], atol=1e-7)
    # roots at Y1 examined or not, the verified ones are eigenvalues the other method knows
    for c in res.candidates:
        if c.accepted:
            assert any(abs(c.R - r.R) <= 1e-9 * c.R for r in ref.forms)


def test_window_version_finds_the_same_forms_as_the_window_search():
    """Every form in [300, 300.12] (about six, Weyl's law) found by both methods, same R and a(2)."""
    g = gamma0(1)
    res = forms_in_window_large(g, 300.0, 300.12, settings=LargeSettings(lfunction_check=False))
    ref = forms_in_window(g, 300.0, 300.12)
    assert len(res.windows) >= 2 and res.parity_mismatches == 0
    assert [(f.parity, round(f.R, 8)) for f in res.forms] == [(f.parity, round(f.R, 8)) for f in ref.forms]
    for f, r in zip(res.forms, ref.forms):
        assert abs(f.R - r.R) <= 1e-9 * f.R and abs(f.coeffs[0, 1] - r.coeffs[0, 1]) <= 1e-8
    assert all(c.accepted or not c.reason.startswith("not examined") for c in res.candidates)
    with pytest.raises(InputError, match="R_min"):
        forms_in_window_large(g, 300.0, 299.0)


@pytest.mark.slow
def test_agrees_with_the_window_search_at_R1000():
    g = gamma0(1)
    res = locate_large(g, 1000.0, k=2, settings=LargeSettings(lfunction_check=False))
    lo, hi = min(a for a, _ in res.windows), max(b for _, b in res.windows)
    ref = forms_in_window(g, lo, hi)
    near_ref = sorted(ref.forms, key=lambda f: abs(f.R - 1000.0))[:2]
    for f, r in zip(res.forms, near_ref):
        assert f.parity == r.parity and abs(f.R - r.R) <= 1e-11 * f.R
    assert res.stats["lu_factorisations"] > 0 and res.stats["M0"]["Y1"] > 200


def test_memory_limit_processes_classes_one_at_a_time():
    """A memory limit that fits one class but not both gives the same forms."""
    g = gamma0(1)
    s_all = LargeSettings(lfunction_check=False)
    a = locate_large(g, 60.0, k=2, settings=s_all)
    M0 = max(a.stats["M0"].values())
    one = LargeSettings(lfunction_check=False, memory_limit=8.0 * M0 * M0 * 30)
    b = locate_large(g, 60.0, k=2, settings=one)
    assert [(f.parity, round(f.R, 10)) for f in a.forms] == [(f.parity, round(f.R, 10)) for f in b.forms]
    with pytest.raises(InputError, match="memory_limit"):
        locate_large(g, 60.0, settings=LargeSettings(memory_limit=1000.0))


def test_stored_coefficients_reach_the_fundamental_domain():
    """The stored count is the truncation at 0.97 Y0 (with margin), and each is determined."""
    g = gamma0(1)
    res = locate_large(g, 200.0, settings=LargeSettings(lfunction_check=False))
    f = res.forms[0]
    m = store_count(g, f.R, 1e-14, 60)
    assert f.coeffs.shape[1] == m
    assert np.all(f.coeff_errors[0] <= 1e-7)
    # at large R the scan-height solve alone determines them (no extra solves)
    R = 4e4
    assert store_count(g, R, 1e-14, 60) <= accurate_count(R, 0.92 * g.fundamental_domain_height)


@pytest.mark.parametrize("kw,match", [
    ({"R0": 0.5}, "R0"), ({"R0": 2e5}, "R0"), ({"R0": True}, "R0"), ({"R0": math.nan}, "R0"),
    ({"k": 0}, "k="), ({"k": True}, "k="), ({"parities": ("odd", "odd")}, "parities"),
    ({"parities": ("up",)}, "parities"),
])
def test_bad_input_is_refused(kw, match):
    args = {"R0": 20.0} | kw
    R0 = args.pop("R0")
    with pytest.raises(InputError, match=match):
        locate_large(gamma0(1), R0, **args)


def test_bad_settings_and_levels_are_refused():
    with pytest.raises(InputError, match="squarefree"):
        locate_large(gamma0(4), 20.0)
    for kw in ({"Y1_frac": 0.7}, {"centres_per_spacing": 0.1}, {"R_tol": 0.0}, {"n_coeffs": 5},
               {"hecke_nmax": 100}, {"workers": 0}, {"memory_limit": -1.0}, {"eps": 0.5}):
        with pytest.raises(InputError):
            LargeSettings(**kw)
