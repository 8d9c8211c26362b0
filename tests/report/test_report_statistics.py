"""Statistics of the peak study: intervals, fits, bands, the extrapolation model.

Outside sources: scipy.stats (``binomtest(...).proportion_ci(method="wilson")`` for the Wilson
score interval, Wilson, JASA 22 (1927) 209-212; ``linregress`` for the least-squares slope and
its standard error, with the Student t quantile ``scipy.stats.t.ppf``).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
import scipy.stats

from maasscomp.report.peaks import (band_label, band_of, equidistribution, extrapolate_beats_bulk, form_rows,
                                    kt_profile_max, power_fit, transition_beats_bulk, wilson)


@pytest.mark.parametrize("k, n", [(0, 23), (3, 14), (12, 12), (7, 50)])
def test_wilson_against_scipy(k, n):
    ci = scipy.stats.binomtest(k, n).proportion_ci(confidence_level=0.95, method="wilson")
    lo, hi = wilson(k, n)
    assert math.isclose(lo, ci.low, abs_tol=1e-12) and math.isclose(hi, ci.high, abs_tol=1e-12)


def test_power_fit_against_scipy():
    rng = np.random.default_rng(1)
    lam = np.geomspace(1e2, 1e8, 40)
    peak = 1.7 * lam ** (1 / 12) * np.exp(rng.normal(0, 0.05, lam.size))
    f = power_fit("x", lam, peak)
    ref = scipy.stats.linregress(np.log(lam), np.log(peak))
    t = scipy.stats.t.ppf(0.975, lam.size - 2)
    assert math.isclose(f.slope, ref.slope, rel_tol=1e-10)
    assert math.isclose(f.slope_hi - f.slope, t * ref.stderr, rel_tol=1e-8)
    assert f.slope_lo < 1 / 12 < f.slope_hi
    assert power_fit("x", lam[:2], peak[:2]) is None


def test_bands_are_centred_on_half_decades():
    """R = 10^{k/2} sits in the middle (in log R) of its band; neighbouring study windows
    (10, 30, 100, 300, 1000, 3000, 10^4) fall in different bands."""
    for k in range(1, 9):
        lo, hi = band_of(10 ** (k / 2))
        assert math.isclose(math.log10(lo) + math.log10(hi), k, abs_tol=1e-12)
    labels = [band_label(band_of(R)) for R in (10, 30, 100, 300, 1000, 3000, 9999)]
    assert len(set(labels)) == 7 and labels[4] == "562–1780"


def test_kt_profile_max_continues_past_the_table():
    """Exact below 10^4 (special.airy_peak); beyond, the Airy term matched at 10^4 is continuous
    there and tends to c R^{1/6} (docs/theory.md §3.3, c = 0.845843032)."""
    from maasscomp.special import airy_peak

    assert kt_profile_max(5000.0) == airy_peak(5000.0)[1]
    assert math.isclose(kt_profile_max(10000.0), kt_profile_max(10000.0 * (1 + 1e-9)), rel_tol=1e-8)
    c = 0.84584303241985210151
    assert abs(kt_profile_max(1e8) / (c * 1e8 ** (1 / 6)) - 1) < 1e-4


@pytest.fixture(scope="module")
def template(forms_by_level):
    from maasscomp.supnorm import scan_form

    return scan_form(min(forms_by_level[1], key=lambda f: abs(f.R - 19.42)))


def _fake(template, R, L, bulk, overlap=False):
    """A scan result with the given R, L(1, sym^2 f) and bulk peak; the transition peak is the
    first-term prediction 2 max|A_1| sqrt((1 + e^{-2 pi R}) / L)."""
    T = 2 * kt_profile_max(R) * math.sqrt((1 + math.exp(-2 * math.pi * R)) / L)
    regions = tuple(replace(p, value=T) if p.kind == "transition" else replace(p, value=bulk) if p.kind == "omega"
                    else replace(p, value=math.nan) for p in template.regions)
    return replace(template, R=R, eigenvalue=0.25 + R * R, sym2_L1_norm=L, bulk_value=bulk, regions=regions,
                   overlap=overlap)


def test_beats_fraction_and_extrapolation(template):
    """With the bulk on a sqrt(log lambda) trend and L spread over [0.5, 6], the model reproduces
    the measured fractions, grows with R (the transition peak grows like R^{1/6}), flags targets
    beyond the data, and its bootstrap interval contains the point estimate."""
    rng = np.random.default_rng(3)
    res = []
    for R in (300.0, 1000.0, 3000.0, 9000.0):
        for L in rng.uniform(0.5, 6.0, 25):
            bulk = 0.6 + 1.2 * math.sqrt(math.log(0.25 + R * R)) + rng.normal(0, 0.1)
            res.append(_fake(template, R, L, bulk))
    res.append(_fake(template, 20.0, 1.0, 9.0, overlap=True))
    rows = transition_beats_bulk(res)
    assert sum(r["marked"] for r in rows) == 1 and sum(r["forms"] for r in rows) == 100
    ex = extrapolate_beats_bulk(res, (300.0, 1000.0, 3000.0, 9000.0, 1e5, 1e6), n_boot=200)
    assert math.isclose(ex.beta, 1.2, rel_tol=0.1)
    model = {R: f for R, f, *_ in ex.rows}
    for r in rows:
        if r["forms"]:
            assert abs(model[min(model, key=lambda R: abs(R - r["R_median"]))] - r["fraction"]) < 0.25
    fr = [f for _, f, *_ in ex.rows]
    assert fr == sorted(fr) and fr[-1] > fr[0]
    for R, f, lo, hi, beyond in ex.rows:
        assert lo <= f <= hi
        assert beyond == (R > 9000.0 * 1.01)
    # every transition peak far above the bulk: the model says 1 everywhere
    high = [_fake(template, r.R, 0.01, 1.0) for r in res[:-1]]
    assert all(f == 1.0 for _, f, *_ in extrapolate_beats_bulk(high, (1000.0, 1e5), n_boot=20).rows)


def test_form_rows_and_equidistribution(template):
    (row,) = form_rows([template])
    assert row["transition_over_bulk"] == template.transition.value / template.bulk_value
    assert math.isclose(row["exp_omega"], math.log(template.omega.value) / math.log(template.eigenvalue))
    (eq,) = equidistribution([template])
    assert eq["forms"] == 1 and math.isclose(eq["mean"], template.omega_mean_sq * template.volume)
