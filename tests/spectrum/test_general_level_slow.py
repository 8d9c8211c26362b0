"""Full windows 1 <= R <= 10 for non-squarefree levels 4, 8, 9 (slow: several minutes).

External facts and their sources:
* Hecke relations c(mn) = c(m) c(n) (coprime m, n), c(p^2) = c(p)^2 - 1 (p not dividing N) for
  Hecke eigenforms with c(1) = 1: common practice (Iwaniec, Topics in Classical Automorphic
  Forms (1997) §6).
* Oldforms (Atkin & Lehner, Math. Ann. 185 (1970) 134-160): a newform of level M | N gives
  d(N/M) forms of the same R and parity at level N.
* Twists (from memory of the theory): chi(p) = (p/3) is odd; twisting a form of level dividing 9
  by chi gives a form of level dividing 9 with the same R and the opposite parity, non-zero
  when the form has a coefficient c(n) != 0 with 3 not dividing n (every eigenspace contains a
  newform of level M | 9 with c(1) = 1).
* Weyl's law for squarefree N: maasscomp.spectrum.weyl (derived by the project, checked at N = 2).
"""

from __future__ import annotations

import numpy as np
import pytest

from maasscomp.groups import gamma0
from maasscomp.hejhal.multicusp import MultiCuspSystem
from maasscomp.hejhal.params import choose_params
from maasscomp.spectrum.hecke import hecke_residual
from maasscomp.spectrum.search import SearchSettings, search_forms

MULTIPLICITY_TOL = SearchSettings().mult_tol

pytestmark = pytest.mark.slow

WINDOW = (1.0, 10.0)


@pytest.fixture(scope="module")
def spectra():
    return {
        (N, parity): search_forms(gamma0(N), *WINDOW, (parity,))
        for N in (4, 8, 9)
        for parity in ("even", "odd")
    }


def _eigenvalues(res) -> dict[float, int]:
    return {f.R: f.multiplicity for f in res.forms if f.basis_index == 0}


def _lookup(table: dict[float, int], R: float, tol: float = 1e-9) -> int:
    hits = [m for r, m in table.items() if abs(r - R) <= tol]
    return hits[0] if hits else 0


def test_hecke_relations_on_every_eigenform(spectra):
    n_eigen = 0
    for (N, _), res in spectra.items():
        for f in res.forms:
            assert f.hecke_residual <= 1e-8, (N, f.R, f.basis_index)
            if f.extra["hecke_eigenform"]:
                n_eigen += 1
                assert f.coeffs[0, 0].real == 1.0
                assert hecke_residual(f.coeffs[0].real, N, 30) <= 1e-8, (N, f.R)
    assert n_eigen >= 20


def test_every_eigenspace_is_confirmed_at_a_third_height(spectra):
    for (N, parity), res in spectra.items():
        G = gamma0(N)
        S = MultiCuspSystem(G, parity, choose_params(WINDOW[1] + 1, 0.6 * G.fundamental_domain_height))
        for R, m in _eigenvalues(res).items():
            sv, U = S.null_space(R, MULTIPLICITY_TOL)
            assert U.shape[1] == m, (N, parity, R, sv[: m + 1])
            assert sv[m] > 1e-5


@pytest.mark.parametrize("parity", ["even", "odd"])
def test_level8_old_spectrum_is_the_level4_spectrum(spectra, parity):
    """Every divisor M < 8 of 8 divides 4 and d(8/M) = d(4/M) + 1: an eigenvalue of
    multiplicity m at level 4 has multiplicity m + 1 at level 8, and every eigenvalue of
    multiplicity >= 2 at level 8 comes from level 4 (Atkin & Lehner 1970)."""
    four = _eigenvalues(spectra[(4, parity)])
    eight = _eigenvalues(spectra[(8, parity)])
    for R, m in four.items():
        assert _lookup(eight, R) == m + 1, (R, m)
    for R, m in eight.items():
        if m >= 2:
            assert _lookup(four, R) == m - 1, (R, m)
        else:
            assert _lookup(four, R) == 0
            assert all(f.is_new for f in spectra[(8, parity)].forms if f.R == R)


@pytest.mark.parametrize("parity", ["even", "odd"])
def test_level12_old_spectrum_from_levels_4_and_3(spectra, parity):
    """d(12/M) = 2 d(4/M) for M | 4, so an eigenvalue of multiplicity m at level 4 has
    multiplicity 2m at level 12; a level-3 newform (multiplicity d(3) = 2 at level 9) has
    d(4) = 3 oldforms at level 12 (Atkin & Lehner 1970)."""
    twelve = _eigenvalues(search_forms(gamma0(12), *WINDOW, (parity,)))
    four = _eigenvalues(spectra[(4, parity)])
    nine = _eigenvalues(spectra[(9, parity)])
    for R, m in four.items():
        assert _lookup(twelve, R) == 2 * m, (R, m)
    level3 = [R for R, m in nine.items() if m == 2]
    assert level3
    for R in level3:
        assert _lookup(twelve, R) == 3, R


def test_level9_spectrum_is_symmetric_under_the_twist_mod_3(spectra):
    even = _eigenvalues(spectra[(9, "even")])
    odd = _eigenvalues(spectra[(9, "odd")])
    assert len(even) == len(odd) >= 10
    for R in even:
        assert _lookup(odd, R) > 0, R


def test_level2_general_search_agrees_with_atkin_lehner_search_and_weyl():
    from maasscomp.spectrum.weyl import expected_in_window

    G = gamma0(2)
    total = 0
    for parity in ("even", "odd"):
        general = _eigenvalues(search_forms(G, *WINDOW, (parity,), system="multi-cusp"))
        by_class: dict[float, int] = {}
        for f in search_forms(G, *WINDOW, (parity,)).forms:
            key = next((r for r in by_class if abs(r - f.R) <= 1e-9), f.R)
            by_class[key] = by_class.get(key, 0) + 1
        assert len(general) == len(by_class)
        for R, m in general.items():
            assert _lookup(by_class, R) == m, (parity, R)
        total += sum(general.values())
    # Weyl's law (project formula, squarefree levels): the remainder S(T) is O(1) on this range
    assert abs(total - expected_in_window(2, *WINDOW)) <= 3
