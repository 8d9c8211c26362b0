"""The Hecke-relation checkers on synthetic multiplicative sequences."""

from __future__ import annotations

import math

import numpy as np

from maasscomp.spectrum.hecke import atkin_lehner_residual, hecke_residual


def _multiplicative(nmax: int, level: int, rng, al_signs=None) -> np.ndarray:
    """a(n) from random a(p) with the Hecke recursions (p not dividing N) and a(p^k) = a(p)^k
    (p | N, newform case with a(p) = -eps_p/sqrt(p))."""
    a = np.zeros(nmax + 1)
    a[1] = 1.0
    for n in range(2, nmax + 1):
        m, p = n, 2
        while m % p:
            p += 1
        k = 0
        while m % p == 0:
            m //= p
            k += 1
        if m > 1:
            a[n] = a[p**k] * a[m]
            continue
        if level % p == 0:
            ap = -al_signs[p] / math.sqrt(p)
            a[n] = ap**k
        elif k == 1:
            a[n] = rng.uniform(-2, 2)
        else:
            a[n] = a[p] * a[p ** (k - 1)] - a[p ** (k - 2)]
    return a[1:]


def test_exact_sequences_have_zero_residual():
    rng = np.random.default_rng(1)
    a = _multiplicative(60, 1, rng)
    assert hecke_residual(a, 1, 60) < 1e-12
    b = _multiplicative(60, 6, rng, {2: 1, 3: -1})
    assert hecke_residual(b, 6, 60) < 1e-12
    assert atkin_lehner_residual(b, 6, {2: 1, 3: -1}, 60) < 1e-12
    # wrong sign is detected
    assert atkin_lehner_residual(b, 6, {2: -1, 3: -1}, 60) > 1.0


def test_perturbations_are_detected():
    rng = np.random.default_rng(2)
    a = _multiplicative(40, 1, rng)
    for n in (4, 6, 9, 12, 25):
        b = a.copy()
        b[n - 1] += 1e-5
        assert hecke_residual(b, 1, 40) >= 0.9e-5
