"""Atkin--Lehner and Hecke operators on stored coefficients (maasscomp.spectrum.operators).

Fast checks without a search. Outside facts and their sources:
* W_Q normalises Gamma0(N) and W_Q^2 is in Q Gamma0(N); W_Q1 W_Q2 = W_{Q1 Q2} modulo Gamma0(N)
  for coprime Q1, Q2 (Atkin & Lehner, Math. Ann. 185 (1970) 134-160, Lemmas 8-9 as recalled;
  docs/theory.md §1.1). So on Gamma0(N)-invariant functions W_Q is an involution and the
  W_Q compose like the exact divisors (a group (Z/2)^omega(N)).
* For squarefree N the cusp W_Q(infinity) has scaling matrix W_Q/sqrt(Q) (docs/theory.md §1.1,
  derived there).
* Oldforms g(dz) of a level-1 form at every cusp: tests/spectrum/levels_helpers.lift_at_cusps,
  derived independently of the module under test (docs/theory.md §9.6).
* W_Q on the g(dz), g of level 1: g(d W_Q z) = g(d' z), d' = Q d2/d1 with d1 = gcd(d, Q),
  d2 = d/d1 (derived in docs/theory.md §9.2); in particular W_4 acts on
  (g(z), g(2z), g(4z)) as the permutation matrix [[0,0,1],[0,1,0],[1,0,0]].
* Hecke operators in the normalisation c(1) = 1: T_p c(n) = c(pn) + c(n/p) (p not dividing N),
  U_p c(n) = c(pn) (p | N), common practice (Iwaniec, Topics in Classical Automorphic Forms
  (1997) §6, holomorphic case); U_p on (g, g(pz)) is [[a(p), sqrt p], [-1/sqrt p, 0]]
  (derived, docs/theory.md §9.3).
* a(n) of the first PSL(2,Z) form: data/reference/psl2z_coeffs_computed.csv (project
  computation; its outside checks are named in its header).
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest

from maasscomp.errors import InputError
from maasscomp.groups import divisors, gamma0
from maasscomp.spectrum import operators as op

from .levels_helpers import level1_table, lift_at_cusps, synthetic_form

LEVELS = (4, 8, 9, 12, 16, 18, 25, 27, 36, 64)


def _g1():
    k, parity, R, a = level1_table()[0]  # R1 = 9.5337..., odd
    return parity, float(R), a


def test_cusp_labels_name_the_cusp_they_stand_for():
    assert [op.cusp_label(gamma0(1), 0)] == ["∞"]
    assert [op.cusp_label(gamma0(4), j) for j in range(3)] == ["∞", "0", "1/2"]
    assert [op.cusp_label(gamma0(9), j) for j in range(4)] == ["∞", "0", "1/3", "2/3"]
    for N in (12, 16, 25, 64):
        G = gamma0(N)
        for j in range(G.n_cusps):
            name = op.cusp_label(G, j)
            if name == "∞":
                assert j == 0
                continue
            a, c = (int(t) for t in name.split("/")) if "/" in name else (0, 1)
            assert G.cusp_of(a, c) == j, (N, j, name)
    with pytest.raises(InputError, match="cusp index"):
        op.cusp_label(gamma0(4), 3)


@pytest.mark.parametrize("N", LEVELS)
def test_atkin_lehner_is_an_involution_on_expansions(N):
    """f|W_Q|W_Q = f for every exact divisor Q: the permutation is an involution and the
    shifts add up to integers (a wrong phase rule or cusp would fail for random data)."""
    G = gamma0(N)
    rng = np.random.default_rng(N)
    C = rng.normal(size=(G.n_cusps, 30)) + 1j * rng.normal(size=(G.n_cusps, 30))
    for Q in G.exact_divisors():
        act = op.atkin_lehner_action(G, Q)
        for parity in ("even", "odd"):
            twice = op.apply_cusp_action(op.apply_cusp_action(C, act, parity), act, parity)
            assert np.max(np.abs(twice - C)) < 1e-12, (N, Q, parity)
        assert all(isinstance(ci.shift, Fraction) and 0 <= ci.shift < 1 for ci in act)
        if Q == 1:
            assert all(ci.image == ci.cusp and ci.shift == 0 for ci in act)


@pytest.mark.parametrize("N", (12, 18, 36, 60))
def test_atkin_lehner_operators_compose_like_the_exact_divisors(N):
    G = gamma0(N)
    rng = np.random.default_rng(7 * N)
    C = rng.normal(size=(G.n_cusps, 24)) + 1j * rng.normal(size=(G.n_cusps, 24))
    Qs = [Q for Q in G.exact_divisors() if Q > 1]
    act = {Q: op.atkin_lehner_action(G, Q) for Q in G.exact_divisors()}
    checked = 0
    for Q1 in Qs:
        for Q2 in Qs:
            if math.gcd(Q1, Q2) != 1:
                continue
            for parity in ("even", "odd"):
                step = op.apply_cusp_action(op.apply_cusp_action(C, act[Q1], parity), act[Q2], parity)
                direct = op.apply_cusp_action(C, act[Q1 * Q2], parity)
                assert np.max(np.abs(step - direct)) < 1e-12, (N, Q1, Q2, parity)
                checked += 1
    assert checked >= 4


@pytest.mark.parametrize("N", (6, 30, 210))
def test_squarefree_levels_permute_the_cusps_like_the_divisors(N):
    """At squarefree N the cusp of width Q' is W_Q'(infinity) with scaling matrix W_Q'/sqrt(Q');
    W_Q sends it to the cusp of width Q Q'/gcd(Q, Q')^2 with no shift (docs/theory.md §1.1)."""
    G = gamma0(N)
    width = [c.width for c in G.cusps]
    for Q in G.exact_divisors():
        for ci in op.atkin_lehner_action(G, Q):
            Qp = width[ci.cusp]
            assert width[ci.image] == Q * Qp // math.gcd(Q, Qp) ** 2
            assert ci.shift == 0


def _lift_basis(N: int, M: int = 40):
    parity, R, a = _g1()
    ds = divisors(N)
    return ds, [synthetic_form(N, parity, R, lift_at_cusps(a, d, N, parity, M)) for d in ds]


def _predicted_permutation(N: int, Q: int) -> np.ndarray:
    """W_Q on (g(dz))_{d | N}: g(dz) -> g(d'z), d' = Q d2/d1 (docs/theory.md §9.2)."""
    ds = divisors(N)
    P = np.zeros((len(ds), len(ds)))
    for i, d in enumerate(ds):
        d1 = math.gcd(d, Q)
        P[ds.index(Q * (d // d1) // d1), i] = 1.0
    return P


@pytest.mark.parametrize("N", (4, 9, 12, 16, 18, 27))
def test_atkin_lehner_permutes_the_oldforms_of_a_level1_form(N):
    """W_Q applied to the expansions of g(dz) at every cusp gives the expansions of g(d'z):
    entry by entry (phases included), and as a fitted matrix on the oldspace."""
    G = gamma0(N)
    ds, basis = _lift_basis(N)
    for Q in G.exact_divisors():
        P = _predicted_permutation(N, Q)
        for i, f in enumerate(basis):
            img = op.apply_atkin_lehner(G, f, Q)
            k = int(np.argmax(P[:, i]))
            assert np.max(np.abs(img.coeffs - basis[k].coeffs)) < 1e-12, (N, Q, ds[i], ds[k])
            assert img.extra == {"image_of": f"W_{Q}"}
        A = op.atkin_lehner_matrix(G, basis, Q)
        assert np.max(np.abs(A.matrix - P)) < 1e-10, (N, Q, A.matrix)
        assert A.residual < 1e-12


def test_w4_matrix_on_f_f2_f4():
    """The matrix of W_4 = [[0, -1], [4, 0]] on (f(z), f(2z), f(4z)), f the first PSL(2,Z)
    form: f(-1/(4z)) = f(4z), f(-2/(4z)) = f(2z), f(-4/(4z)) = f(z)."""
    G = gamma0(4)
    assert np.array_equal(G.atkin_lehner(4), np.array([[0, -1], [4, 0]]))
    _, basis = _lift_basis(4)
    A = op.atkin_lehner_matrix(G, basis, 4)
    print("W_4 on (f(z), f(2z), f(4z)), fitted from the cusp expansions:\n", A.matrix)
    assert np.max(np.abs(A.matrix - np.array([[0, 0, 1], [0, 1, 0], [1, 0, 0]]))) < 1e-12


def test_atkin_lehner_eigenvalue_of_an_eigen_combination():
    """g(z) + g(4z) and g(2z) are W_4-even, g(z) - g(4z) is W_4-odd."""
    G = gamma0(4)
    _, (f1, f2, f4) = _lift_basis(4)
    plus = synthetic_form(4, f1.parity, f1.R, f1.coeffs + f4.coeffs)
    minus = synthetic_form(4, f1.parity, f1.R, f1.coeffs - f4.coeffs)
    for f, eta in ((plus, 1), (f2, 1), (minus, -1)):
        fit = op.atkin_lehner_eigenvalue(G, f, 4)
        assert abs(fit.value - eta) < 1e-12 and fit.residual < 1e-12 and fit.sign == eta
    # not an eigenform: a large residual and sign 0
    assert op.atkin_lehner_eigenvalue(G, f1, 4).sign == 0
    out = op.label_atkin_lehner(G, minus)
    assert minus.extra["atkin_lehner"] is out and out["4"]["sign"] == -1


def test_hecke_operators_on_level1_oldspaces():
    parity, R, a = _g1()
    G1 = gamma0(1)
    g = synthetic_form(1, parity, R, a[None, :200].astype(complex))
    for p in (2, 3, 5, 7):
        fit = op.hecke_eigenvalue(g, p)
        assert abs(fit.value - a[p - 1]) < 1e-14 and fit.residual < 1e-12
    assert G1.level == 1
    for p in (2, 3):
        # (g, g(pz)) at level p: U_p = [[a(p), sqrt p], [-1/sqrt p, 0]]
        pair = [synthetic_form(p, parity, R, lift_at_cusps(a, d, p, parity, 200)) for d in (1, p)]
        U = op.hecke_matrix(pair, p)
        expected = np.array([[a[p - 1], math.sqrt(p)], [-1 / math.sqrt(p), 0.0]])
        assert np.max(np.abs(U.matrix - expected)) < 1e-12, (p, U.matrix)
        # T_q, q not dividing p, is the scalar a(q) on the oldspace
        q = 5
        T = op.hecke_matrix(pair, q)
        assert np.max(np.abs(T.matrix - a[q - 1] * np.eye(2))) < 1e-12


def test_hecke_matrix_refuses_an_undetermined_span():
    parity, R, a = _g1()
    basis = [synthetic_form(64, parity, R, lift_at_cusps(a, d, 64, parity, 60)) for d in (1, 64)]
    # T_5 uses c(1..12) only, where g(64 z) vanishes
    with pytest.raises(InputError, match="do not determine the span"):
        op.hecke_matrix(basis, 5)


def test_bad_input():
    G = gamma0(4)
    with pytest.raises(InputError, match="does not normalise"):
        op.cusp_action(G, [[2, 0], [0, 1]])
    with pytest.raises(InputError, match="determinant"):
        op.cusp_action(G, [[0, 1], [1, 0]])
    with pytest.raises(InputError, match="not an exact divisor"):
        op.atkin_lehner_action(gamma0(12), 2)
    parity, R, a = _g1()
    f = synthetic_form(4, parity, R, lift_at_cusps(a, 1, 4, parity, 20))
    with pytest.raises(InputError, match="level 4 but the group"):
        op.apply_atkin_lehner(gamma0(8), f, 8)
    with pytest.raises(InputError, match="parity"):
        op.apply_cusp_action(f.coeffs, op.atkin_lehner_action(G, 4), "up")
    with pytest.raises(InputError, match="prime"):
        op.hecke_image(a, 4, 1)
