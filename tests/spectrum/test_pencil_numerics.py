"""The numerical core of the search on a nonlinear eigenvalue problem with known roots.

A(R) = U diag(f_i(R)) V^T with random orthogonal U, V and f_i(R) = tanh(R - r_i)(1 + 0.3 cos R):
its roots are exactly the r_i (each with the multiplicity it is listed with), nonlinear in R
like the Hejhal matrices. No outside source is needed: the roots are built in.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.linalg as sla

from maasscomp.spectrum import pencil as pn

ROOTS = [0.10, 0.25, 0.25 + 1e-6, 0.40, 0.40, 0.55, 1.7, -1.3]  # a pair 1e-6 apart, a double root


def _problem(n: int = 60, seed: int = 3):
    rng = np.random.default_rng(seed)
    U = np.linalg.qr(rng.standard_normal((n, n)))[0]
    V = np.linalg.qr(rng.standard_normal((n, n)))[0]
    r = np.concatenate([ROOTS, rng.uniform(3.0, 9.0, n - len(ROOTS))])

    def mats(R: float):
        g = 1.0 + 0.3 * np.cos(R)
        t = np.tanh(R - r)
        f = t * g
        df = (1.0 - t * t) * g - 0.3 * np.sin(R) * t
        return (U * f) @ V.T, (U * df) @ V.T

    return mats


@pytest.mark.parametrize("dense_max", [1000, 0])
def test_pencil_sees_every_root_near_the_point_however_close(monkeypatch, dense_max):
    """Dense and subspace-iteration paths: every root within the radius appears, the pair
    1e-6 apart as two eigenvalues, the double root as two."""
    monkeypatch.setattr(pn, "DENSE_PENCIL_MAX", dense_max)
    mats = _problem()
    c = 0.33
    A0, A1 = mats(c)
    pr = pn.pencil_roots(A0, A1, 0.3)
    est = np.sort(c + pr.delta.real)
    inside = sorted(r for r in ROOTS if abs(r - c) <= 0.28)
    assert len(est) == len(inside), (est, inside)
    # linearisation error O(d^2): the starts are within 0.5 d^2 + 1e-9 of their roots
    for e, r in zip(est, inside):
        assert abs(e - r) <= 0.5 * (r - c) ** 2 + 1e-9


def test_newton_converges_to_each_member_of_a_close_pair_and_to_a_double_root():
    mats = _problem()
    c = 0.33
    A0, A1 = mats(c)
    pr = pn.pencil_roots(A0, A1, 0.3)
    found = []
    for d, v in zip(pr.delta, pr.vectors.T):
        nr = pn.newton_root(mats, c + d.real, np.real(v), tol=1e-15, max_move=0.3)
        assert nr.converged and nr.steps <= 8
        found.append(nr.R)
    found = np.sort(found)
    inside = np.sort([r for r in ROOTS if abs(r - c) <= 0.28])
    assert np.max(np.abs(found - inside)) <= 1e-12
    # the pair is resolved: two distinct roots 1e-6 apart
    assert abs(found[2] - found[1] - 1e-6) <= 1e-12


def test_null_basis_counts_the_multiplicity():
    mats = _problem()
    for R, m in [(0.40, 2), (0.10, 1), (0.9, 0)]:
        A, _ = mats(R)
        lu = sla.lu_factor(A)
        nb = pn.null_basis(A, lu, 5)
        assert int(np.sum(nb.sv <= 1e-8)) == m, (R, nb.sv)
        if m:
            # the vectors span the null space: A v ~ 0
            assert np.max(np.abs(A @ nb.vectors[:, :m])) <= 1e-12


def test_root_condition_of_a_simple_root():
    """kappa = |w||v| / |w^T A' v| is 1/|f_i'(r_i)| for an orthogonal factorisation."""
    mats = _problem()
    R = 0.10
    A, dA = mats(R)
    lu = sla.lu_factor(A)
    v = pn.null_basis(A, lu, 2).vectors[:, 0]
    g = 1.0 + 0.3 * np.cos(R)
    assert abs(pn.root_condition(A, dA, lu, v) - 1.0 / g) <= 1e-6
