"""Dirichlet characters as the search uses them: values, conjugates, induction, enumeration,
the specification of ``[search] characters`` and the character's behaviour at the cusps
(docs/theory.md §12.1-X.2)."""

from __future__ import annotations

import cmath
import math
from fractions import Fraction

import pytest

from maasscomp.errors import InputError
from maasscomp.groups import DirichletCharacter, gamma0
from maasscomp.groups import characters as C
from maasscomp.hejhal.multicusp import cusp_reflections


def _phi(n: int) -> int:
    return sum(1 for k in range(1, n + 1) if math.gcd(k, n) == 1)


def _mobius(n: int) -> int:
    out, m, p = 1, n, 2
    while p * p <= m:
        if m % p == 0:
            m //= p
            if m % p == 0:
                return 0
            out = -out
        p += 1
    return -out if m > 1 else out


@pytest.mark.parametrize("N", [5, 7, 8, 9, 12, 13, 15, 16, 20])
def test_values_are_multiplicative_and_conjugate(N):
    """chi(mn) = chi(m) chi(n), |chi(n)| = 1 on units, conj(chi)(n) = conj(chi(n)) (definition
    of a Dirichlet character; common practice)."""
    for chi in C.all_characters(N):
        cb = C.conjugate(chi)
        assert C.conjugate(cb) == chi
        for m in range(1, 2 * N):
            vm = C.complex_value(chi, m)
            assert abs(C.complex_value(cb, m) - vm.conjugate()) < 1e-15
            for n in range(1, N + 1):
                assert abs(C.complex_value(chi, m * n) - vm * C.complex_value(chi, n)) < 1e-13
        assert C.is_real(chi) == (chi.order <= 2)


@pytest.mark.parametrize("N", [3, 5, 7, 8, 9, 12, 15, 16, 20, 21])
def test_counts_of_even_and_primitive_characters(N):
    """phi(N)/2 even characters (chi -> chi(-1) is a nontrivial homomorphism for N > 2), and
    sum_{d | q} mu(q/d) phi(d) primitive characters of conductor q (Apostol, *Introduction
    to Analytic Number Theory* (1976), Ch. 8, recalled)."""
    assert len(C.even_characters(N)) == _phi(N) // 2
    expected = sum(_mobius(N // d) * _phi(d) for d in range(1, N + 1) if N % d == 0)
    assert len(C.primitive_characters(N)) == expected


def test_induction_keeps_values_and_conductor():
    for chi in C.all_characters(5):
        big = C.induce(chi, 20)
        assert big.modulus == 20 and big.conductor == chi.conductor
        for n in range(1, 60):
            if math.gcd(n, 20) == 1:
                assert abs(C.complex_value(big, n) - C.complex_value(chi, n)) < 1e-14
    with pytest.raises(InputError, match="multiple of 5"):
        C.induce(DirichletCharacter.trivial(5), 12)


@pytest.mark.parametrize("D,residues", [
    (5, {1, 4}),        # (5/p) = 1 iff p = +-1 mod 5 (quadratic reciprocity)
    (8, {1, 7}),        # (2/p) = 1 iff p = +-1 mod 8 (second supplement)
    (12, {1, 11}),      # (3/p)(-1)^... : (12/p) = (3/p) = 1 iff p = +-1 mod 12
    (13, {1, 3, 4, 9, 10, 12}),  # squares mod 13
])
def test_kronecker_character(D, residues):
    """The character of Q(sqrt D): chi_D(p) = 1 exactly on the residues given by quadratic
    reciprocity (Ireland & Rosen 1990, Ch. 5; common practice)."""
    chi = C.kronecker_character(D)
    assert chi.modulus == D and chi.conductor == D and chi.is_even
    for p in [3, 5, 7, 11, 13, 17, 19, 23, 29, 31, 37, 41, 43, 47]:
        if D % p == 0:
            continue
        assert C.complex_value(chi, p) == (1 if p % D in residues else -1)


@pytest.mark.parametrize("N", [5, 8, 9, 12, 16, 18, 20, 25])
def test_cusp_shifts(N):
    """kappa_inf = 0; the trivial character gives 0 everywhere; J maps cusp j to k with
    kappa_k = -kappa_j (J gamma_j J = gamma gamma_j^{-1} gamma^{-1}, docs/theory.md §12.2), so a cusp
    fixed by J has kappa in {0, 1/2}; and chi(gamma_j) computed from the stabiliser generator
    acting on a point near the cusp agrees."""
    G = gamma0(N)
    refl = cusp_reflections(G)
    assert all(k == 0 for k in C.cusp_shifts(G, DirichletCharacter.trivial(N)))
    for chi in C.even_characters(N):
        kap = C.cusp_shifts(G, chi)
        assert kap[0] == 0
        for r in refl:
            assert (kap[r.image] + kap[r.cusp]) % 1 == 0
            if r.self_conjugate:
                assert kap[r.cusp] in (Fraction(0), Fraction(1, 2))


def test_character_specs():
    """The ``[search] characters`` forms and their errors."""
    assert C.characters_for_level("trivial", 7) == (DirichletCharacter.trivial(7),)
    assert [c.label for c in C.characters_for_level("all-even", 7)] == ["X7.0", "X7.2", "X7.4"]
    got = C.characters_for_level(["X5.2", {"conductor": 7, "index": 1}, "trivial"], 35)
    assert [c.conductor for c in got] == [5, 7, 1] and all(c.modulus == 35 for c in got)
    # a modulus that does not divide the level is skipped at that level
    assert C.characters_for_level(["X5.2"], 7) == ()
    with pytest.raises(InputError, match=r"X7\.1.*odd"):
        C.characters_for_level(["X7.1"], 7)
    with pytest.raises(InputError, match="index"):
        C.characters_for_level([{"conductor": 7, "index": 9}], 7)
    with pytest.raises(InputError, match="not allowed"):
        C.characters_for_level([{"conductor": 7}], 7)
    with pytest.raises(InputError, match="exponents"):
        C.characters_for_level(["X7.6"], 7)
    chi = C.from_conductor(7, 1)
    assert chi.conductor == 7 and C.primitive_characters(7)[1] == chi


def test_values_match_the_exponent_definition():
    """chi(g_i) = exp(2 pi i k_i / o_i) on the documented generators (module docstring)."""
    for N in (9, 20, 16):
        for chi in C.all_characters(N):
            for (g, o), k in zip(C.unit_generators(N), chi.exponents):
                assert abs(C.complex_value(chi, g) - cmath.exp(2j * math.pi * k / o)) < 1e-14
