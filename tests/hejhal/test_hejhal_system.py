"""The squarefree-level Hejhal system: parameters, assembly, K interpolation, input errors."""

from __future__ import annotations

import math

import numpy as np
import pytest

from maasscomp.errors import InputError
from maasscomp.groups import gamma0
from maasscomp.hejhal.kinterp import KInterpolator
from maasscomp.hejhal.params import choose_params, truncation_M0
from maasscomp.hejhal.system import HejhalSystem, SampleSet
from maasscomp.hejhal.types import SymmetryClass
from maasscomp.special import ktilde


@pytest.mark.parametrize("R,Y", [(9.5, 0.8), (50.0, 0.5), (300.0, 0.79), (20.0, 0.05)])
def test_truncation_bounds_the_tail(R, Y):
    eps = 1e-14
    M0 = truncation_M0(R, Y, eps)
    n = np.arange(M0, M0 + 200)
    assert np.all(math.sqrt(Y) * np.abs(ktilde(R, 2 * np.pi * n * Y)) * n**0.25 < eps)
    # and M0 is not wasteful: the term just below is above eps
    assert math.sqrt(Y) * abs(ktilde(R, np.array([2 * np.pi * (M0 - 1) * Y]))[0]) * (M0 - 1) ** 0.25 >= eps


@pytest.mark.parametrize("N,label", [(1, "odd"), (1, "even"), (6, "even,2+,3-"), (10, "odd,2-,5+")])
def test_fast_assembly_equals_the_defining_sums(N, label):
    """The DCT/DST assembly reproduces V_{nl} = (2/Q) sum_m eps sqrt(y*) Kt cs cs (docs/theory.md §1.2)."""
    g = gamma0(N)
    sym = SymmetryClass.from_label(label)
    p = choose_params(20.0, 0.9 * g.fundamental_domain_height)
    S = HejhalSystem(g, sym, p)
    R = 17.3
    s = S.samples
    n = np.arange(1, p.M0 + 1)
    cs = np.cos if sym.parity == "even" else np.sin
    sign = np.array([sym.al_sign(g.cusps[j].atkin_lehner_Q) for j in s.cusp])
    V = np.zeros((p.M0, p.M0))
    for m in range(p.Q):
        left = cs(2 * np.pi * n * s.x[m])
        right = sign[m] * math.sqrt(s.ys[m]) * ktilde(R, 2 * np.pi * n * s.ys[m]) * cs(2 * np.pi * n * s.xs[m])
        V += (2.0 / p.Q) * np.outer(left, right)
    A = -V + np.diag(math.sqrt(p.Y) * ktilde(R, 2 * np.pi * n * p.Y))
    assert np.max(np.abs(S.matrix(R) - A)) < 1e-13


def test_k_interpolation_matches_direct_values():
    g = gamma0(1)
    S = SampleSet(g, choose_params(30.0, 0.8))
    ki = KInterpolator(S.k_points, 20.0, 30.0)
    for R in (20.0, 21.234567, 25.5, 29.99):
        assert np.max(np.abs(ki(R) - ktilde(R, S.k_points))) < 1e-11


def test_solution_does_not_depend_on_Y_at_an_eigenvalue():
    """At R1 (published: 9.53369526135, F. Chamizo's page; see data/reference) the
    normalised coefficients agree across heights, and the determinant changes sign."""
    g, sym = gamma0(1), SymmetryClass("odd")
    R1 = 9.5336952613535575543
    a = HejhalSystem(g, sym, choose_params(10.0, 0.8)).solve(R1)
    b = HejhalSystem(g, sym, choose_params(10.0, 0.6)).solve(R1)
    # a(2..4): well inside the accurate range n <~ M0/3 (docs/theory.md §1.3)
    assert np.max(np.abs(a[1:4] - b[1:4])) < 1e-10
    S = HejhalSystem(g, sym, choose_params(10.0, 0.8))
    assert S.log_det(R1 - 1e-3)[0] * S.log_det(R1 + 1e-3)[0] < 0


def test_bad_inputs_are_named():
    g = gamma0(6)
    with pytest.raises(InputError, match="needs exactly one sign"):
        HejhalSystem(g, SymmetryClass("even", ((2, 1),)), choose_params(10.0, 0.2))
    with pytest.raises(InputError, match="not squarefree"):
        HejhalSystem(gamma0(4), SymmetryClass("even"), choose_params(10.0, 0.2))
    with pytest.raises(InputError, match="sample height"):
        HejhalSystem(gamma0(1), SymmetryClass("odd"), choose_params(10.0, 0.9))
    with pytest.raises(InputError, match="parity"):
        SymmetryClass("up")
    with pytest.raises(InputError, match="Q="):
        choose_params(10.0, 0.8, M0=20, Q=20)
