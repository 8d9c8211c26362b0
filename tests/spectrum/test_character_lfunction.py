"""The L-function of a newform with a character, and new/old with a character.

* Lambda(s, f) = eps Lambda(1 - s, f~), f~(z) = conj f(-conj z), with eps = (-1)^delta eta and
  f(-1/(Nz)) = eta f~(z) (docs/theory.md §12.8; the pseudo-eigenvalue after W.-C. W. Li,
  Math. Ann. 212 (1975), recalled; the approximate functional equation after Iwaniec-Kowalski,
  *Analytic Number Theory* (2004) Thm 5.3). The root number is fitted from the coefficients
  alone and eta is measured from the form's values, so their agreement is not circular.
* New/old (docs/theory.md §12.4): an oldform brings g(z) and g(pz) into its eigenspace.

The twists mod 5 and 7 (root number eps_f chi(-1) tau(chi)^2 / q) are checked in the slow
``test_twist_of_level_one_form`` of test_character_forms.py.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from maasscomp.groups import DirichletCharacter, gamma0
from maasscomp.groups import characters as C
from maasscomp.spectrum import charforms as CF
from maasscomp.spectrum.lfunction import functional_equation_check_character
from maasscomp.spectrum.search import search_forms


@pytest.fixture(scope="module")
def level9():
    """(Gamma0(9), chi of order 3): two odd forms near R = 3.86 and 3.94 (complex eps)."""
    G = gamma0(9)
    chi = DirichletCharacter.from_label("X9.2")
    return G, search_forms(G, 3.84, 3.96, character=chi).forms


@pytest.fixture(scope="module")
def dihedral5():
    """The dihedral form of (Gamma0(5), chi_5) at R = 3.2642513... (real coefficients)."""
    G = gamma0(5)
    return G, search_forms(G, 3.2, 3.3, character=C.kronecker_character(5)).forms


def test_search_stores_a_passing_check_with_complex_root_number(level9):
    G, forms = level9
    assert len(forms) == 2
    for f in forms:
        assert f.is_new is True
        lf = f.extra["lfunction"]
        assert lf["passed"], lf
        eps = complex(*lf["root_number"])
        eta = complex(*lf["fricke_pseudo_eigenvalue"])
        assert abs(abs(eps) - 1) < 1e-10
        assert abs(eps - (-1 if f.parity == "odd" else 1) * eta) < 1e-10
        assert lf["residual"] < 1e-12
        assert abs(eps.imag) > 0.3  # genuinely complex: a sign +-1 would not do


def test_root_number_of_the_dihedral_form(dihedral5):
    G, forms = dihedral5
    (f,) = forms
    lf = f.extra["lfunction"]
    assert lf["passed"], lf
    eps = complex(*lf["root_number"])
    assert abs(eps - round(eps.real)) < 1e-10  # real coefficients: eps = +-1


def test_check_has_power(level9):
    """A wrong R, or the prediction from conj(eta), fails."""
    G, forms = level9
    f = forms[0]
    eta, spread = CF.fricke_pseudo_eigenvalue(G, f)
    assert spread < 1e-10
    n = f.extra["lfunction"]["n_coeffs_used"]
    a, err = CF.extend_character_coefficients(G, f, n)
    assert np.max(np.abs(a[: f.coeffs.shape[1]] - f.coeffs[0])) < 1e-9
    sign = -1 if f.parity == "odd" else 1
    good = functional_equation_check_character(f.R, a, f.parity, 9, fricke_pseudo_eigenvalue=eta)
    assert good.passed
    shifted = functional_equation_check_character(f.R + 1e-6, a, f.parity, 9, fricke_pseudo_eigenvalue=eta)
    assert shifted.residual > 1e-8 and not shifted.passed
    conj = functional_equation_check_character(f.R, a, f.parity, 9, fricke_pseudo_eigenvalue=np.conj(eta))
    assert conj.prediction_gap > 1e-2 and not conj.passed
    assert abs(good.root_number - sign * eta) < 1e-10
    # the coefficients of f~ in place of f: the fit of eps no longer closes
    swapped = functional_equation_check_character(f.R, np.conj(a), f.parity, 9, fricke_pseudo_eigenvalue=np.conj(eta))
    assert abs(swapped.root_number - sign * np.conj(eta)) < 1e-8  # f~ is a newform too (for conj chi)
    wrong_level = functional_equation_check_character(f.R, a, f.parity, 3)
    assert wrong_level.residual > 1e-6


def test_newness_of_an_eigenspace(dihedral5):
    """g of level 5 and character chi_5, read at level 25: span{g(z), g(5z)} is old; span of
    g(z) and an unrelated vector is new; a single form is new."""
    G, (g,) = dihedral5
    a = np.real(g.coeffs[0])
    K = a.size
    n = np.arange(1, K + 1)
    g5 = np.where(n % 5 == 0, a[np.maximum(n // 5, 1) - 1], 0.0)
    chi = C.induce(C.kronecker_character(5), 25)
    assert CF.newness_of_eigenspace(np.stack([a + 0.3 * g5, g5 - 0.7 * a]), 25, chi)[0] is False
    rng = np.random.default_rng(1)
    assert CF.newness_of_eigenspace(np.stack([a, rng.normal(size=K)]), 25, chi)[0] is True
    assert CF.newness_of_eigenspace(a[None, :], 25, chi)[0] is True
    # a character primitive mod N has no lower level: nothing is old
    prim = DirichletCharacter.from_label("X9.2")
    b9 = np.where(n % 3 == 0, 1.0, 0.0)
    assert CF.newness_of_eigenspace(np.stack([a, b9]), 9, prim)[0] is True
