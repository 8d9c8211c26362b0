"""Squarefree levels: oldforms from PSL(2,Z), newform relations, no exceptional eigenvalues.

Sources: the level-1 eigenvalues R = 9.53369526135 and 12.173008324679677 are published
(F. Chamizo, "Plotting Maass forms", quoting published tables; data/reference/
maass_level1_published.csv). Oldform theory (Atkin & Lehner, Math. Ann. 185 (1970)):
a level-1 form g gives the sigma_0(N) forms g(dz), d | N, at level N; for squarefree N they
split one per Atkin--Lehner class, with c(p) = a_g(p) + eps_p sqrt(p). Newforms of squarefree
level satisfy c(p) = -eps_p/sqrt(p) (Atkin & Lehner 1970, Thm 3, holomorphic analogue; the
Maass version is common practice). No eigenvalue below 1/4: Huxley 1985 and, for squarefree
N < 857, Booker--Strömbergsson 2007 (both from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from maasscomp.groups import gamma0
from maasscomp.hejhal.types import SymmetryClass
from maasscomp.spectrum.hecke import atkin_lehner_residual, hecke_residual
from maasscomp.spectrum.exceptional import search_exceptional
from maasscomp.spectrum.search import search_forms, symmetry_classes

LEVEL1_ODD = (9.53369526135, 12.173008324679677)  # published (see module docstring)


def _divisor_count(n: int) -> int:
    return sum(1 for d in range(1, n + 1) if n % d == 0)


def _search_odd_near(N: int, lo: float, hi: float):
    return list(search_forms(gamma0(N), lo, hi, ("odd",)).forms)


@pytest.mark.parametrize("N", [2, 3, 5])
def test_level1_forms_reappear_as_oldforms(N):
    for R0 in LEVEL1_ODD[:1]:
        forms = _search_odd_near(N, R0 - 0.05, R0 + 0.05)
        old = [f for f in forms if abs(f.R - R0) < 1e-8]
        # sigma_0(N) copies, one per Atkin-Lehner class, all labelled old from level 1
        assert len(old) == _divisor_count(N), [f.R for f in forms]
        assert len({f.symmetry.label for f in old}) == len(old)
        for f in old:
            assert f.is_new is False
            assert f.extra["old_from_level"] == 1
            assert f.extra["old_relation_residual"] < 1e-8


@pytest.mark.slow
@pytest.mark.parametrize("N", [6, 7, 11])
def test_level1_forms_reappear_as_oldforms_slow(N):
    for R0 in LEVEL1_ODD:
        forms = _search_odd_near(N, R0 - 0.05, R0 + 0.05)
        old = [f for f in forms if abs(f.R - R0) < 1e-8]
        assert len(old) == _divisor_count(N), [f.R for f in forms]
        for f in old:
            assert f.is_new is False and f.extra["old_from_level"] == 1


def _all_forms(N: int, R_max: float):
    return list(search_forms(gamma0(N), 0.5, R_max).forms)


def _check_newforms(forms, N):
    n_new = 0
    for f in forms:
        assert f.hecke_residual <= 1e-8
        assert hecke_residual(f.coeffs[0], N, 30) <= 1e-8
        if f.is_new:
            n_new += 1
            al = dict(f.symmetry.al_signs)
            assert atkin_lehner_residual(f.coeffs[0], N, al, 30) <= 1e-8
            # every cusp expansion is eps_Q times the one at infinity
            for j, c in enumerate(gamma0(N).cusps):
                assert np.allclose(f.coeffs[j], f.symmetry.al_sign(c.atkin_lehner_Q) * f.coeffs[0])
    return n_new


@pytest.mark.parametrize("N", [2])
def test_newform_relations(N):
    forms = _all_forms(N, 10.0)
    assert _check_newforms(forms, N) >= 1


@pytest.mark.slow
@pytest.mark.parametrize("N", [3, 5, 6, 7, 10, 11])
def test_newform_relations_slow(N):
    forms = _all_forms(N, 10.0)
    assert _check_newforms(forms, N) >= 1


@pytest.mark.parametrize("N", [1, 2, 3])
def test_no_exceptional_eigenvalues(N):
    g = gamma0(N)
    for sym in symmetry_classes(g, ("even", "odd")):
        cands = search_exceptional(g, sym)
        assert not [c for c in cands if c.accepted], cands
