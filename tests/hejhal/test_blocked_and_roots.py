"""Large-R building blocks: blocked assembly, interpolation of the matrix in R, linearised roots.

What these tests can detect:
* the column-blocked assembly (any block size, threads) differs from the reference assembly
  of :class:`HejhalSystem` (itself checked against the defining sums);
* the blocked assembly forms arrays of size Q x M0 (its traced peak memory is bounded);
* the R-interpolated matrices or their R-derivative are wrong, or the self-check cannot fail;
* the linearisation misses a root within its radius, or Newton's method does not converge
  quadratically to the root and its null vector (synthetic matrices with known roots);
* on PSL(2,Z) the polished root differs from the first odd eigenvalue R1 = 9.53369526135355755...
  (data/reference/psl2z_forms_computed.csv, refined here in arb; agrees with the published
  9.53369526135 quoted in data/reference/maass_level1_published.csv).
"""

from __future__ import annotations

import math
import tracemalloc

import numpy as np
import pytest

from maasscomp.errors import ConvergenceError, InputError
from maasscomp.groups import gamma0
from maasscomp.hejhal.blocked import BlockedSystem, RInterpolatedMatrices, interpolation_nodes_needed
from maasscomp.hejhal.nonlinear import linearise, refine_root
from maasscomp.hejhal.params import choose_params
from maasscomp.hejhal.system import HejhalSystem
from maasscomp.hejhal.types import SymmetryClass

from tests.conftest import read_reference_csv


@pytest.mark.parametrize("N,labels", [(1, ("even", "odd")), (6, ("even,2+,3-", "odd,2-,3-")), (10, ("odd,2-,5+",))])
@pytest.mark.parametrize("block,workers", [(None, 1), (7, 2), (1, 1)])
def test_blocked_assembly_equals_reference_assembly(N, labels, block, workers):
    g = gamma0(N)
    classes = [SymmetryClass.from_label(lab) for lab in labels]
    p = choose_params(40.0, 0.9 * g.fundamental_domain_height)
    bs = BlockedSystem(g, classes, p, block=block, workers=workers)
    for c in classes:
        ref = HejhalSystem(g, c, p).matrix(37.25)
        got = bs.matrix(c, 37.25)
        assert got.flags["F_CONTIGUOUS"]
        assert np.max(np.abs(got - ref)) <= 1e-13 * np.max(np.abs(ref))


def test_blocked_assembly_needs_no_q_by_m0_arrays():
    """Traced peak memory of one assembly: the output plus O(Q x block), far below the
    Q x M0 arrays of values the one-shot assembly forms (each 1.2 times the output here)."""
    g = gamma0(1)
    p = choose_params(2000.0, 0.92 * g.fundamental_domain_height)
    bs = BlockedSystem(g, [SymmetryClass("even")], p, block=16)
    bs.matrix(SymmetryClass("even"), 1999.0)  # tables and kernels outside the trace
    out_bytes = 8 * p.M0 ** 2
    tracemalloc.start()
    bs.matrix(SymmetryClass("even"), 1999.5)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert peak <= out_bytes + 12 * 8 * p.Q * 16 + 2_000_000
    assert 8 * p.Q * p.M0 > 1.1 * out_bytes  # a single Q x M0 array would not fit the bound


def test_interpolated_matrices_and_derivative():
    g = gamma0(1)
    classes = [SymmetryClass("even"), SymmetryClass("odd")]
    p = choose_params(301.0, 0.92 * g.fundamental_domain_height)
    bs = BlockedSystem(g, classes, p)
    ri = RInterpolatedMatrices(bs, 299.99, 300.01)
    assert ri.check_error <= 1e-13 and ri.nodes == interpolation_nodes_needed(
        math.acosh(300.01 / bs.x_min), 0.01)
    h = 1e-4
    for c in classes:
        R = 300.0031
        A, dA = ri.pair(c, R)
        ref = bs.matrix(c, R)
        assert np.max(np.abs(A - ref)) <= 1e-13 * np.max(np.abs(ref))
        fd = (bs.matrix(c, R + h) - bs.matrix(c, R - h)) / (2 * h)  # error ~ h^2 omega^3 / 6
        assert np.max(np.abs(dA - fd)) <= 1e-6 * np.max(np.abs(dA))
        assert np.max(np.abs(ri.matrix(c, R) - A)) <= 1e-15 * np.max(np.abs(A))


def test_interpolation_self_check_can_fail():
    """Two nodes over a window of many oscillations cannot represent A(R): ConvergenceError."""
    g = gamma0(1)
    p = choose_params(60.0, 0.92 * g.fundamental_domain_height)
    bs = BlockedSystem(g, [SymmetryClass("odd")], p)
    with pytest.raises(ConvergenceError, match="interpolation of the Hejhal matrix"):
        RInterpolatedMatrices(bs, 50.0, 60.0, nodes=2)


def test_blocked_system_bad_input():
    g = gamma0(1)
    p = choose_params(20.0, 0.9)
    with pytest.raises(InputError, match="sample height"):
        BlockedSystem(g, [SymmetryClass("odd")], p)
    p = choose_params(20.0, 0.8)
    with pytest.raises(InputError, match="workers"):
        BlockedSystem(g, [SymmetryClass("odd")], p, workers=0)
    with pytest.raises(InputError, match="no symmetry class"):
        BlockedSystem(g, [], p)
    with pytest.raises(InputError, match="squarefree"):
        BlockedSystem(gamma0(4), [SymmetryClass("odd")], p)


def _synthetic(roots, R_nl=False, seed=0):
    """A(R) = U diag(f_i(R)) W with f_i = R - r_i (or (R - r_i)(1 + 0.3 (R - r_i)), whose other
    root r_i - 10/3 is far from the test roots): det A = 0 exactly at the r_i."""
    rng = np.random.default_rng(seed)
    n = 40
    # orthogonal factors: the root is then as well conditioned as f itself
    U = np.linalg.qr(rng.standard_normal((n, n)))[0]
    W = np.linalg.qr(rng.standard_normal((n, n)))[0]
    r = np.concatenate([roots, np.linspace(50.0, 90.0, n - len(roots))])

    def pair(R):
        d = R - r
        f = d * (1 + 0.3 * d) if R_nl else d
        df = 1 + 0.6 * d if R_nl else np.ones(n)
        return np.asfortranarray((U * f) @ W), np.asfortranarray((U * df) @ W)

    return pair, W, r


def test_linearisation_finds_every_root_within_the_radius():
    roots = [10.001, 10.0011, 10.02, 10.05, 9.97]  # includes a pair 1e-4 apart
    pair, _, _ = _synthetic(roots)
    A, dA = pair(10.0)
    lin = linearise(A, dA, 10.0, radius=0.04)
    # linear f: the linearisation is exact
    np.testing.assert_allclose(lin.roots, sorted([10.001, 10.0011, 10.02, 9.97]), atol=1e-10)
    assert lin.sign == np.sign(np.linalg.det(pair(10.0)[0]))


def test_newton_on_the_linearisation_converges_to_root_and_null_vector():
    pair, W, r = _synthetic([10.3, 10.9], R_nl=True, seed=3)
    res = refine_root(pair, 10.25, lo=10.0, hi=11.0, tol=1e-14)
    assert res.converged and abs(res.R - 10.3) <= 1e-13 and res.steps <= 6
    # null vector of U diag(f) W at f_0 = 0: W v is proportional to e_0
    Wv = W @ res.vector
    assert np.max(np.abs(np.delete(Wv, 0))) <= 1e-10 * abs(Wv[0])
    out = refine_root(pair, 10.25, lo=10.0, hi=10.26)
    assert not out.converged  # the root lies outside the allowed interval


def test_polished_root_is_r1_of_psl2z():
    """Linearise at 9.5 and polish: R1 = 9.53369526135355755... (data/reference/psl2z_forms_computed.csv)."""
    rows = read_reference_csv("psl2z_forms_computed.csv")
    R1 = float(rows[0]["R"])
    g = gamma0(1)
    odd = SymmetryClass("odd")
    for frac in (0.92, 0.8):
        p = choose_params(10.0, frac * g.fundamental_domain_height)
        ri = RInterpolatedMatrices(BlockedSystem(g, [odd], p), 9.3, 9.7, nodes=20)
        A, dA = ri.pair(odd, 9.5)
        lin = linearise(A, dA, 9.5, radius=0.2)
        near = [x for x in lin.roots if abs(x - R1) < 0.05]
        assert len(near) == 1
        res = refine_root(lambda R: ri.pair(odd, R), near[0], lo=9.3, hi=9.7)
        assert res.converged and abs(res.R - R1) <= 1e-12 * R1
