"""The sup-norm scanner: peaks, the first-term profile, the n >= 2 part, the grid guarantee.

Outside sources: DLMF §9.9, Table 9.9.1 (Airy constants, copied to
data/reference/supnorm_airy_constants.csv) with the leading term of the uniform expansion
of K_{iR} (DLMF §10.20 form, docs/theory.md §3.1). The numbers from docs/theory.md §3.3
(R = 9.5337: cusp peak 2.8235921 at (0.25216, 1.27311); R = 13.7798: local cusp peak
2.3436238 at (0, 1.90938), |f| = 3.7587 at (0, 1)) are project-side scratch computations,
used here as a consistency check only.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from maasscomp.errors import InputError
from maasscomp.supnorm import FormEvaluator, ScanResult, ScanSettings, leading_profile_peak, scan_form

TWO_PI = 2 * math.pi


def _airy_constants() -> dict[str, float]:
    from tests.conftest import read_reference_csv

    return {r["name"]: float(r["value"]) for r in read_reference_csv("supnorm_airy_constants.csv")}


@pytest.fixture(scope="module")
def scans(forms_by_level):
    """Scans of a few forms: level 1 (R = 9.53, 13.78, 19.42) and levels 2 and 11."""
    out = {}
    for R in (9.5337, 13.7798, 19.4235):
        f = min(forms_by_level[1], key=lambda g: abs(g.R - R))
        out[("1", round(R, 1))] = (f, scan_form(f))
    for N, i in ((2, 0), (11, 3)):
        f = forms_by_level[N][i]
        out[(str(N), round(f.R, 1))] = (f, scan_form(f))
    return out


def _get(scans, level: int, R: float):
    return scans[(str(level), round(R, 1))]


@pytest.mark.parametrize("R, tol", [(20.0, 0.04), (100.0, 0.012), (1000.0, 0.003)])
def test_first_term_profile_airy_limit(R, tol):
    """max_y sqrt(y) Kt_R(2 pi y) / (C R^{1/6}) -> 1, C = pi 2^{1/3} (2 pi)^{-1/2} max Ai.

    Leading term of the uniform (Airy-type) expansion of K_{iR} (docs/theory.md §3.1, DLMF §10.20
    form) evaluated at the first maximum of Ai (DLMF §9.9, Table 9.9.1); the relative correction
    is O(R^{-2/3}) (4% at R = 20, 0.3% at R = 1000 as required).
    """
    a = _airy_constants()
    C = math.pi * 2 ** (1 / 3) * (2 * math.pi) ** -0.5 * a["Ai_at_a1_prime"]
    value, y = leading_profile_peak(R, 1.0)
    ratio = value / (C * R ** (1 / 6))
    assert abs(ratio - 1) < tol
    assert ratio < 1  # the correction is negative (docs/theory.md §3.3 table)
    # location: 2 pi y* = R + a'_1 (R/2)^{1/3} + O(R^{-1/3})
    x_pred = R + a["a1_prime"] * (R / 2) ** (1 / 3)
    assert abs(TWO_PI * y - x_pred) < 0.6 * R ** (-1 / 3)


def test_first_term_profile_matches_special_airy_peak():
    """Cross-check against the special stage's own maximiser (project-internal)."""
    from maasscomp.special import airy_peak

    for R in (12.0, 250.0):
        value, y = leading_profile_peak(R, 0.5)
        x_star, v2 = airy_peak(R)
        assert math.isclose(value, v2, rel_tol=1e-12)
        assert abs(TWO_PI * y - x_star) < 1e-6 * x_star


def test_cusp_peak_level1_first_form(scans):
    f, r = _get(scans, 1, 9.5337)
    p = r.cusp_peaks[0]
    # docs/theory.md §3.3 (project scratch values, 8 and 5 digits printed)
    assert abs(p.value - 2.8235921) < 2e-7
    assert abs(abs(p.x) - 0.25216) < 2e-5 and abs(p.y - 1.27311) < 2e-5
    assert r.global_region == "cusp 0"
    # the peak is a true value of |f|/||f||
    v = FormEvaluator(f).expansion(0, [p.x], [p.y])[0][0] * r.scale
    assert math.isclose(abs(v), p.value, rel_tol=1e-12)


def test_cusp_peak_is_first_term_up_to_reported_rest(scans):
    """cusp peak = |rho(1)| part: scale * max_y A_1(y) up to the reported n >= 2 contribution.

    In the cos/sin normalisation a(1) = 1 means rho(+-1) = 1/2 in the exponential expansion
    f = sum_{n != 0} rho(n) sqrt(y) K_{iR}(2 pi |n| y) e(nx), so the n = +-1 terms add up to
    2 |rho(1)| sqrt(y) K cos(2 pi x) and the first-term peak of the normalised form is
    2 |rho_norm(1)| max_y sqrt(y) |K_{iR}(2 pi y)| = scale * max_y A_1(y) (physical units
    e^{-pi R/2} cancel against the scaled norm).
    """
    for key, (f, r) in scans.items():
        for j, p in enumerate(r.cusp_peaks):
            c1 = abs(FormEvaluator(f).table.rows[j, 0])
            assert math.isclose(r.leading_term_peak[j], c1 * r.scale * r.leading_profile_max[j], rel_tol=1e-12)
            gap = abs(p.value - r.leading_term_peak[j])
            assert gap <= r.n2_sup[j] + p.grid_bound + 1e-12, (key, j)
            assert r.n2_sup_grid[j] <= r.n2_sup[j] * (1 + 1e-9)
    # the transition peak sits near (R - 0.81 R^{1/3}) / (2 pi) when the first term dominates
    f, r = _get(scans, 1, 9.5337)
    assert abs(r.transition_y[0] - (f.R - 0.81 * f.R ** (1 / 3)) / TWO_PI) < 0.05
    assert abs(r.n2_at_peak[0]) < 0.01 * r.cusp_peaks[0].value


def test_even_form_boundary_and_transition_peaks(scans):
    f, r = _get(scans, 1, 13.7798)
    # |f| = 3.7587 at (0, 1), the bottom of the cusp region (docs/theory.md §3.3, 5 digits)
    assert abs(r.cusp_peaks[0].value - 3.7587) < 1e-4
    assert abs(r.cusp_peaks[0].y - 1.0) < 1e-12 and abs(r.cusp_peaks[0].x) < 1e-9
    # the boundary belongs to both regions: a tie is reported as compact
    assert r.global_region == "compact"
    assert math.isclose(r.compact_peak.value, r.cusp_peaks[0].value, rel_tol=1e-9)
    # local cusp peak 2.3436238 at (0, 1.90938) (docs/theory.md §3.3, 8 and 6 digits)
    assert abs(r.transition_peak[0] - 2.3436238) < 2e-7
    assert abs(r.transition_y[0] - 1.90938) < 2e-5


def test_grid_bound_meets_tolerance(scans):
    for key, (f, r) in scans.items():
        for p in r.cusp_peaks + (r.compact_peak,):
            assert p.grid_bound <= r.rtol * p.value * (1 + 1e-9) + 1e-12, (key, p)
        assert r.grid_bound_rel <= r.rtol * (1 + 1e-9)
        assert not any("refinement stopped" in n for n in r.notes)


def test_multi_cusp_results(scans):
    for N in ("2", "11"):
        (f, r), = [v for k, v in scans.items() if k[0] == N]
        G = FormEvaluator(f).group
        assert len(r.cusp_peaks) == G.n_cusps == 2
        # the compact peak is a point of the compact part, reported at its largest height
        pb = G.pullback([r.compact_peak.z_re], [r.compact_peak.z_im])
        assert pb.y[0] <= r.Y_c * (1 + 1e-9)
        assert math.isclose(pb.y[0], r.compact_peak.y, rel_tol=1e-9)
        # mass bookkeeping: compact part + cusp regions = 1 (L2-normalised)
        assert abs(r.compact_area - (G.area - 2 / r.Y_c)) < 1e-9
        assert 0 < r.compact_l2 < 1


def _cusp_samples(rng, n, y_top):
    """Points of a cusp region: half uniform in dmu above Y_c = 1, half uniform in y."""
    x = rng.uniform(-0.5, 0.5, n)
    u = rng.uniform(0, 1, n // 2)
    y1 = 1.0 / (1.0 - u * (1.0 - 1.0 / y_top))  # density ~ 1/y^2 on [1, y_top]
    y2 = rng.uniform(1.0, y_top, n - n // 2)
    return x, np.concatenate([y1, y2])


@settings(max_examples=3, deadline=None, derandomize=True)
@given(seed=st.integers(0, 2**32 - 1))
def test_scanner_never_below_random_evaluations(scans, seed):
    """Property: 10^5 random evaluations per region never exceed the reported maximum."""
    rng = np.random.default_rng(seed)
    for key, (f, r) in scans.items():
        ev = FormEvaluator(f)
        G = ev.group
        for j, p in enumerate(r.cusp_peaks):
            x, y = _cusp_samples(rng, 100_000, r.y_top[j])
            v = np.abs(ev.expansion(j, x, y)[0]) * r.scale
            assert v.max() <= p.value + 1e-9, (key, j, v.max(), p.value)
        # compact part: points of every cusp's slab whose largest height is below Y_c
        n = 100_000
        j = rng.integers(0, G.n_cusps, n)
        x = rng.uniform(-0.5, 0.5, n)
        y = np.exp(rng.uniform(math.log(G.fundamental_domain_height), 0.0, n))
        zx, zy = np.empty(n), np.empty(n)
        for k, c in enumerate(G.cusps):
            s = j == k
            zx[s], zy[s] = c.apply_scaling(x[s], y[s])
        res = ev(zx, zy)
        inside = res.y <= r.Y_c
        assert inside.sum() > n // 4
        vmax = float(np.max(np.abs(res.values[inside]))) * r.scale
        assert vmax <= r.compact_peak.value + 1e-9, (key, vmax, r.compact_peak.value)


def test_scan_non_squarefree_level(general_forms):
    """Level 4 (three cusps, one of width 1 besides infinity): bound, bookkeeping, samples."""
    f = min((g for g in general_forms.values() if g.level == 4), key=lambda g: g.R)
    r = scan_form(f)
    ev = FormEvaluator(f)
    G = ev.group
    assert len(r.cusp_peaks) == G.n_cusps == 3
    assert r.grid_bound_rel <= r.rtol * (1 + 1e-9)
    assert abs(r.compact_area - (G.area - 3 / r.Y_c)) < 1e-9
    rng = np.random.default_rng(4)
    for j, p in enumerate(r.cusp_peaks):
        x, y = _cusp_samples(rng, 20_000, r.y_top[j])
        assert np.abs(ev.expansion(j, x, y)[0]).max() * r.scale <= p.value + 1e-9


def test_scan_result_round_trip(scans):
    f, r = _get(scans, 1, 9.5337)
    d = r.as_dict()
    back = ScanResult.from_dict(d)
    assert back == r


def test_scan_refuses_too_few_coefficients(level1_form):
    from dataclasses import replace

    f = level1_form(19.42)
    # c(5) and c(7) cannot be obtained from c(1..3)
    short = replace(f, coeffs=f.coeffs[:, :3].copy(), coeff_errors=f.coeff_errors[:, :3].copy())
    with pytest.raises(InputError, match="store at least"):
        scan_form(short)


def test_bad_scan_settings():
    with pytest.raises(InputError):
        ScanSettings(Y_c=0.9)
    with pytest.raises(InputError):
        ScanSettings(rtol=0.0)
    with pytest.raises(InputError):
        ScanSettings(samples_per_wavelength=1.0)
