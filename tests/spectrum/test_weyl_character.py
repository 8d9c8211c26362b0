"""Weyl's law with a character (prime level, primitive even chi; docs/theory.md §12.7).

* the scattering determinant used is unitary on Re s = 1/2 and equals -1 at s = 1/2
  (checked with mpmath's Dirichlet L-functions, mpmath.dirichlet): this fixes the powers of
  q in log A_chi and the multiplicity k = 1 of the eigenvalue -1 of Phi(1/2);
* the elliptic points found by the formula match the group's counts nu2, nu3 (Shimura 1971,
  Prop. 1.43, via maasscomp.groups.gamma0);
* the counts of complete lists (data/reference/character_lists.csv, computed here with
  tests/spectrum/make_character_lists.py by two independent searches) follow W_chi: the
  remainder S = N - W has mean within 0.5 and stays within 2.5 on [3, R_max], and the
  completeness report flags nothing; with one form deleted the Turing test flags it.
"""

from __future__ import annotations

import csv
from pathlib import Path

import mpmath as mp
import numpy as np
import pytest

from maasscomp.errors import InputError
from maasscomp.groups import DirichletCharacter, gamma0
from maasscomp.groups import characters as C
from maasscomp.spectrum.weyl import completeness
from maasscomp.spectrum.weyl_character import (
    _elliptic_generators,
    character_weyl_count,
    character_weyl_terms,
)

LISTS = Path(__file__).resolve().parents[2] / "data" / "reference" / "character_lists.csv"


def _list(N: int, label: str) -> np.ndarray:
    rows = [r for r in csv.DictReader(line for line in LISTS.read_text().splitlines() if not line.startswith("#"))
            if int(r["level"]) == N and r["character"] == label]
    return np.array(sorted(float(r["R"]) for r in rows))


@pytest.mark.parametrize("label", ["X5.2", "X7.2", "X13.2", "X11.2"])
def test_scattering_determinant_is_unitary(label):
    chi = DirichletCharacter.from_label(label)
    q = chi.modulus
    v = [C.complex_value(chi, a) for a in range(q)]
    vb = [x.conjugate() for x in v]
    with mp.workdps(20):
        def det_phi(s):
            G = mp.sqrt(mp.pi) * mp.gamma(s - 0.5) / mp.gamma(s)
            return (-G ** 2 * mp.power(q, -2 * s) * mp.dirichlet(2 * s - 1, v) * mp.dirichlet(2 * s - 1, vb)
                    / (mp.dirichlet(2 * s, v) * mp.dirichlet(2 * s, vb)))

        for t in (0.4, 2.3, 7.9):
            assert abs(abs(det_phi(mp.mpf(0.5) + 1j * t)) - 1) < 1e-12
        assert abs(det_phi(mp.mpf(0.5) + 1e-9j) + 1) < 1e-6
    assert character_weyl_terms(q, chi).minus_one_multiplicity == 1


@pytest.mark.parametrize("q", [5, 7, 11, 13, 17, 19, 37])
def test_elliptic_points(q):
    g = gamma0(q)
    gens = _elliptic_generators(q)
    assert sum(m == 2 for m, _ in gens) == g.nu2 and sum(m == 3 for m, _ in gens) == g.nu3


def test_refuses_cases_without_the_formula():
    with pytest.raises(InputError, match="prime level"):
        character_weyl_terms(9, DirichletCharacter.from_label("X9.2"))
    with pytest.raises(InputError, match="prime level"):
        character_weyl_terms(7, DirichletCharacter.trivial(7))


@pytest.mark.parametrize("N,label,R_max", [(5, "X5.2", 12.0), (7, "X7.2", 10.0)])
def test_counts_of_complete_lists(N, label, R_max):
    chi = DirichletCharacter.from_label(label)
    R = _list(N, label)
    assert R.size > 10 and R.max() <= R_max
    T = np.linspace(3.0, R_max, 400)
    S = np.searchsorted(R, T, side="right") - character_weyl_count(N, chi, T)
    assert abs(np.mean(S)) < 0.5, np.mean(S)
    assert np.max(np.abs(S)) < 2.5, np.max(np.abs(S))
    # the same list against the trivial character's law is far off (power of the check)
    from maasscomp.spectrum.weyl import weyl_count

    S0 = np.searchsorted(R, T, side="right") - weyl_count(N, T)
    assert abs(np.mean(S0)) > 1.0
    rep = completeness(N, R, 0.0, R_max, character=chi)
    assert rep.is_complete, rep.as_text()
    # two forms deleted in the middle: the Turing test sees the missing slope
    i = int(np.searchsorted(R, 0.5 * R_max))
    rep2 = completeness(N, np.delete(R, [i, i + 1]), 0.0, R_max, character=chi)
    assert not rep2.is_complete, rep2.as_text()
