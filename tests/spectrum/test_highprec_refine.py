"""High-precision refinement (maasscomp.spectrum.highprec)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from flint import arb, ctx

from maasscomp.errors import InputError
from maasscomp.spectrum.highprec import (
    HighPrecisionForm,
    extend_coefficients,
    refine_high_precision,
)

REF = Path(__file__).resolve().parents[2] / "data" / "reference"


def _r1_reference() -> str:
    # Booker-Strombergsson-Venkatesh, IMRN 2006, Art. ID 71281 (first 35 digits, from
    # memory; see the header of the file)
    lines = [ln for ln in (REF / "psl2z_r1_highprec.txt").read_text().splitlines() if ln and ln[0] != "#"]
    return lines[0].strip()


def _diff(a: str, b: str) -> float:
    with ctx.workprec(600):
        return abs(float((arb(a) - arb(b)).mid()))


@pytest.fixture(scope="module")
def r1_30():
    return refine_high_precision(1, 9.53369526135, "odd", 30)


def test_r1_to_30_digits_matches_published(r1_30):
    f = r1_30
    assert isinstance(f, HighPrecisionForm)
    assert f.digits == 30 and f.R_error < 1e-30
    # source digits: 34 decimal places (Booker-Strombergsson-Venkatesh 2006, from memory)
    assert _diff(f.R, _r1_reference()) < 1e-33


def test_r1_coefficients_match_published(r1_30):
    # F. Chamizo, "Plotting Maass forms" (web page quoting published tables), digits as
    # printed there (data/reference/maass_level1_published.csv, status P)
    printed = {2: "-1.0683335512", 3: "-0.45619735450", 4: "0.14133657666", 5: "-0.2906725549",
               6: "0.4873709397983", 7: "-0.7449416121475798"}
    for n, s in printed.items():
        ndec = len(s.split(".")[1])
        # one unit in the last printed digit (the page truncates or rounds)
        assert _diff(r1_30.coeffs[n - 1], s) <= 10.0 ** (-ndec), n


def test_r1_hecke_relations_high_precision(r1_30):
    # a(mn) = a(m) a(n) for coprime m, n and a(p^2) = a(p)^2 - 1 (Hecke theory,
    # common practice); with 30-digit R the low coefficients satisfy them far beyond 1e-20
    with ctx.workprec(200):
        c = [arb(s) for s in r1_30.coeffs]
        checks = [c[5] - c[1] * c[2], c[3] - c[1] ** 2 + 1, c[8] - c[2] ** 2 + 1, c[9] - c[1] * c[4]]
        worst = max(abs(float(x.mid())) for x in checks)
    assert worst < 1e-25


def test_first_even_form_20_digits():
    # R = 13.779751351890738, a(2) = 1.549304477941, a(3) = 0.246899772453,
    # a(5) = 0.737060385348 (12 decimals): recalled from memory of the literature
    # (data/reference/maass_level1_published.csv, status M)
    f = refine_high_precision(1, 13.779751351890738, "even", 20)
    assert abs(f.R_float - 13.779751351890738) < 2e-14
    for n, v in {2: 1.549304477941, 3: 0.246899772453, 5: 0.737060385348}.items():
        assert abs(float(f.coeffs[n - 1]) - v) < 2e-12


def test_second_odd_form_20_digits():
    # Chamizo page: R2 = 12.173008324679677 (15 decimals printed)
    f = refine_high_precision(1, 12.173008324, "odd", 20)
    assert abs(f.R_float - 12.173008324679677) < 2e-15


def test_extend_coefficients_hecke_and_published(r1_30):
    a, err = extend_coefficients(r1_30, 60)
    assert a.shape == (60,) and err.shape == (60,)
    assert err.max() < 1e-12
    # agrees with the high-precision system coefficients where both exist
    for n in range(2, 8):
        assert abs(a[n - 1] - float(r1_30.coeffs[n - 1])) < 1e-12
    # Hecke relations up to 60 (common practice)
    worst = 0.0
    for m in range(2, 60):
        for n in range(2, 60 // m + 1):
            if np.gcd(m, n) == 1 and m * n <= 60:
                worst = max(worst, abs(a[m * n - 1] - a[m - 1] * a[n - 1]))
    for p in (2, 3, 5, 7):
        worst = max(worst, abs(a[p * p - 1] - a[p - 1] ** 2 + 1))
    assert worst < 1e-12


def test_wrong_parity_does_not_converge_to_claimed_value():
    # there is no even form near 9.53: the refinement must not claim one there
    from maasscomp.errors import ConvergenceError

    try:
        f = refine_high_precision(1, 9.53369526135, "even", 12, max_steps_per_stage=6)
    except ConvergenceError:
        return
    assert abs(f.R_float - 9.53369526135) > 1e-3


@pytest.mark.parametrize(
    "kw",
    [
        dict(level=4, R0=9.5, parity="odd", al_signs={2: 1}),
        dict(level=2, R0=9.5, parity="odd", al_signs={3: 1}),
        dict(level=6, R0=9.5, parity="odd", al_signs={2: 1, 3: 0}),
        dict(level=0, R0=9.5, parity="odd"),
        dict(level=1, R0=-1.0, parity="odd"),
        dict(level=1, R0=9.5, parity="both"),
        dict(level=1, R0=9.5, parity="odd", digits=5),
        dict(level=1, R0=float("nan"), parity="odd"),
    ],
)
def test_bad_input(kw):
    with pytest.raises(InputError) as exc:
        refine_high_precision(**kw)
    if kw["level"] == 4:
        assert "not squarefree" in str(exc.value)
    elif kw["level"] in (2, 6):
        assert "al_signs" in str(exc.value)


def test_extend_bad_input(r1_30):
    with pytest.raises(InputError):
        extend_coefficients(r1_30, 1)
    with pytest.raises(InputError):
        extend_coefficients("not a form", 10)  # type: ignore[arg-type]


@pytest.mark.slow
def test_r1_to_100_digits_self_consistent():
    # precision ladder: the 100-digit value must agree with an independent 60-digit run
    # to 60 digits, and with the published 34 digits (BSV 2006, from memory)
    f100 = refine_high_precision(1, 9.53369526135, "odd", 100)
    f60 = refine_high_precision(1, 9.5336952613, "odd", 60)
    assert f100.R_error < 1e-100
    assert _diff(f100.R, f60.R) < 1e-60
    assert _diff(f100.R, _r1_reference()) < 1e-33
