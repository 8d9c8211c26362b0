"""Scattering matrix of Gamma0(N) for every level (maasscomp.spectrum.scattering).

Outside facts used, with their sources:

* phi_ab(s) = sqrt(pi) Gamma(s-1/2)/Gamma(s) sum_c S_ab(0,0;c) c^{-2s}, S_ab(0,0;c) the number
  of d mod c with [[*, *], [c, d]] in sigma_a^{-1} Gamma sigma_b (Iwaniec, *Spectral Methods
  of Automorphic Forms*, 2nd ed. 2002, Thm 3.4).  The brute-force test below enumerates
  these matrices directly (bottom rows), independently of the first-column counting the
  module uses.
* Phi(s) is symmetric, Phi(s) Phi(1-s) = I, |det Phi| = 1 on Re s = 1/2, Phi(1/2) is a real
  symmetric involution (Iwaniec 2002, Thm 6.5 and §6.4; common practice).
* Level 1: phi(s) = Lambda(2s-1)/Lambda(2s), Lambda(s) = pi^{-s/2} Gamma(s/2) zeta(s)
  (Iwaniec 2002, (3.25); reference values by mpmath).
* Squarefree N: det Phi_N(s) = phi_1(s)^h prod_{p|N} ((p^{2-2s}-1)/(p^{2s}-1))^{h/2}
  (structure as in M. N. Huxley, "Scattering matrices for congruence subgroups", in
  *Modular Forms*, ed. R. A. Rankin, 1984; docs/theory.md §2.3), Phi_N(1/2) = -I.
* Dirichlet L-functions: mpmath.dirichlet (mpmath 1.3) as the reference.
"""

from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest

from maasscomp.errors import InputError
from maasscomp.groups import gamma0
from maasscomp.spectrum import scattering as sc


def _np(P) -> np.ndarray:
    return np.array([[complex(P[i, j]) for j in range(P.cols)] for i in range(P.rows)])


def _brute_force_counts(N: int, C: int) -> np.ndarray:
    """S_ab(0,0; gamma sqrt(w_a w_b)) for gamma = 1..C by enumerating the bottom rows
    (gamma, delta), delta mod gamma w_b, of A_a^{-1} Gamma0(N) A_b: complete each to an SL2(Z)
    matrix M and test A_a T^t M A_b^{-1} in Gamma0(N) for t mod w_a."""
    cusps = gamma0(N).cusps
    h = len(cusps)
    out = np.zeros((h, h, C + 1), dtype=np.int64)
    for i, ca in enumerate(cusps):
        (_, _), (a3, a4) = ca.A
        wa = ca.width
        for j, cb in enumerate(cusps):
            (_, _), (d3, d4) = cb.A
            wb = cb.width
            for gam in range(1, C + 1):
                delta = np.array([d for d in range(gam * wb) if math.gcd(d, gam) == 1], dtype=np.int64)
                alpha = (np.zeros_like(delta) if gam == 1 else
                         np.array([pow(int(d % gam), -1, gam) for d in delta], dtype=np.int64))
                beta = (alpha * delta - 1) // gam
                ok = np.zeros(delta.size, dtype=bool)
                for t in range(wa):
                    al, be = alpha + t * gam, beta + t * delta
                    ok |= ((a3 * al + a4 * gam) * d4 - (a3 * be + a4 * delta) * d3) % N == 0
                out[i, j, gam] = int(ok.sum())
    return out


def _module_count(sd, i: int, j: int, gam: int) -> int:
    """The module's count n_ab(gamma) = phi(m) c_ab(g, m mod N), with the tail rule for
    v_p(g) > v_p(N) (count times p, residue times p on the prime-to-p part)."""
    N = sd.level
    units = [r for r in range(N) if math.gcd(r, N) == 1] if N > 1 else [0]
    g = 1
    for p in sd.primes:
        while gam % (g * p) == 0:
            g *= p
    m = gam // g
    phi_m = sum(1 for x in range(1, m + 1) if math.gcd(x, m) == 1)
    r = m % N if N > 1 else 0
    factor = 1
    kidx = []
    for p, e in zip(sd.primes, sd.exps):
        k = 0
        while g % p ** (k + 1) == 0:
            k += 1
        if k > e:
            q, rest = p**e, N // p**e
            u = next(u for u in range(1, N + 1) if u % q == 1 % q and u % rest == p % rest) % N
            factor *= p ** (k - e)
            r = r * pow(u, k - e, N) % N
            k = e
        kidx.append(k)
    row = next(n for n, ks in enumerate(sd.ks.tolist()) if ks == kidx)
    return phi_m * factor * int(sd.counts[i, j, row, units.index(r)])


@pytest.mark.parametrize("N", [4, 9, 12, 18, 25, pytest.param(36, marks=pytest.mark.slow),
                               pytest.param(50, marks=pytest.mark.slow)])
def test_constant_term_counts_against_brute_force_enumeration(N):
    """S_ab(0,0;c) for every pair of cusps and every lower-left entry gamma sqrt(w_a w_b),
    gamma up to 2N or 3N, exactly (a different parametrisation: bottom rows)."""
    C = 3 * N if N <= 12 else 2 * N
    bf = _brute_force_counts(N, C)
    sd = sc.scattering_data(N)
    h = sd.n_cusps
    for i in range(h):
        for j in range(h):
            for gam in range(1, C + 1):
                assert _module_count(sd, i, j, gam) == bf[i, j, gam], (N, i, j, gam)


def test_constant_terms_sum_to_the_matrix():
    """The Dirichlet series of the counts, summed directly, is the module's matrix at s = 4
    (N = 9; beyond gamma = 500 the tail is below 1e-10 relative: the first term of the
    (infinity, infinity) entry is gamma = 9, the tail starts at (500/9)^{-6})."""
    N, s, C = 9, 4.0, 500
    sd = sc.scattering_data(N)
    h = sd.n_cusps
    D = np.zeros((h, h))
    for i in range(h):
        for j in range(h):
            w = math.sqrt(sd.widths[i] * sd.widths[j])
            D[i, j] = sum(_module_count(sd, i, j, g) * (g * w) ** (-2 * s) for g in range(1, C + 1))
    with mpmath.workdps(25):
        G = float(mpmath.sqrt(mpmath.pi) * mpmath.gamma(s - 0.5) / mpmath.gamma(s))
        P = _np(sc.scattering_matrix(N, s)).real / G
    np.testing.assert_allclose(P, D, rtol=1e-9, atol=0)


def test_level_one_is_the_classical_phi():
    for s in (2.3, 0.5 + 7.1j, 1.7 - 0.4j):
        with mpmath.workdps(30):
            s = mpmath.mpc(s)
            lam = lambda x: mpmath.pi ** (-x / 2) * mpmath.gamma(x / 2) * mpmath.zeta(x)  # noqa: E731
            ref = complex(lam(2 * s - 1) / lam(2 * s))
            got = complex(sc.scattering_matrix(1, s)[0, 0])
        assert abs(got - ref) < 1e-20 + 1e-12 * abs(ref)


@pytest.mark.parametrize("N", [4, 8, 9, 25, pytest.param(50, marks=pytest.mark.slow)])
def test_functional_equation_symmetry_and_unitarity(N):
    with mpmath.workdps(25):
        for s in (mpmath.mpc(0.5, 3.7), mpmath.mpc(0.8, -1.3)):
            P = sc.scattering_matrix(N, s, dps=25)
            Q = sc.scattering_matrix(N, 1 - s, dps=25)
            h = P.rows
            assert mpmath.mnorm(P * Q - mpmath.eye(h), 1) < 1e-15
            assert mpmath.mnorm(P - P.T, 1) < 1e-15
            if s.real == 0.5:
                assert abs(abs(mpmath.det(P)) - 1) < 1e-15


@pytest.mark.parametrize("N", [4, 9, 25])
def test_phi_at_one_half_is_a_symmetric_involution(N):
    P0 = sc.scattering_matrix_at_half(N)
    np.testing.assert_allclose(P0, P0.T, atol=1e-12)
    np.testing.assert_allclose(P0 @ P0, np.eye(P0.shape[0]), atol=1e-10)


@pytest.mark.parametrize("N", [2, 6, 15])
def test_general_determinant_reproduces_the_squarefree_closed_form(N):
    D = sc.scattering_determinant(N)
    g = gamma0(N)
    h = g.n_cusps
    assert D.n_cusps == h and D.minus_one_multiplicity == h and D.n_trivial == h
    assert D.log_conductor == pytest.approx(h * math.log(N), abs=1e-12)
    T = np.array([0.0, 0.4, 3.3, 17.9, 250.25])
    cf = -(h / math.pi) * sc.arg_L_1_plus_it(2 * T, np.ones(1))
    for p in g.primes:
        cf -= h / (2 * math.pi) * np.angle(1 - np.exp(-2j * T * math.log(p)) / p)
    np.testing.assert_allclose(D.oscillatory(T), cf, atol=1e-11)


def _theta_direct(N: int, t: float) -> float:
    """arg det Phi(1/2 + it) / det Phi(1/2) by mpmath (principal value)."""
    with mpmath.workdps(30):
        d = complex(mpmath.det(sc.scattering_matrix(N, mpmath.mpc(0.5, t), dps=30)))
    d0 = float(np.prod(np.linalg.eigvalsh(sc.scattering_matrix_at_half(N))))
    return float(np.angle(d / d0))


@pytest.mark.parametrize("N", [4, 9, 25, pytest.param(36, marks=pytest.mark.slow),
                               pytest.param(50, marks=pytest.mark.slow)])
def test_phase_decomposition_matches_the_determinant(N):
    """theta(t) - theta(0) from the factorised form (Gamma, Dirichlet L, per-prime periodic
    parts) equals the argument of the directly computed determinant, mod 2 pi."""
    D = sc.scattering_determinant(N)
    for t in (0.37, 2.9, 11.4):
        g = float(mpmath.arg(mpmath.gamma(mpmath.mpc(0.5, t))))  # continuous for small t
        lin = 0.0
        th = 0.0
        for f, chi, n in D.characters:
            a = sc.arg_L_1_plus_it(np.array([2 * t]), chi)[0]
            a0 = -math.pi / 2 if f == 1 else float(np.angle(sc.dirichlet_L(np.array([1.0 + 0j]), chi))[0])
            th += n * (-2 * t * math.log(f / math.pi) - 2 * g - 2 * (a - a0))
        for pp in D.primes:
            th += float(pp(np.array([t]))[0])
            lin += pp.slope * t
        direct = _theta_direct(N, t)
        assert abs(np.angle(np.exp(1j * (th - direct)))) < 1e-8, (N, t, th, direct)


def test_prime_power_closed_forms():
    """det Phi_{p^e}(s) = +-phi_1(s)^h p^{m(1-2s)} F_p(s)^{h-1}, F_p = (p^{2-2s}-1)/(p^{2s}-1),
    for the prime powers whose characters psi with psi^2 = 1 only (derived by the project,
    docs/theory.md §8.2): m = 1, 4, 10 (N = 4, 8, 16), 1, 6 (N = 9, 27)."""
    cases = {4: 1, 8: 4, 16: 10, 9: 1, 27: 6}
    with mpmath.workdps(30):
        s = mpmath.mpc(0.83, 2.1)
        phi1 = mpmath.sqrt(mpmath.pi) * mpmath.gamma(s - 0.5) / mpmath.gamma(s) * mpmath.zeta(2 * s - 1) / mpmath.zeta(2 * s)
        for N, m in cases.items():
            p = min(sc.scattering_data(N).primes)
            h = gamma0(N).n_cusps
            F = (mpmath.mpf(p) ** (2 - 2 * s) - 1) / (mpmath.mpf(p) ** (2 * s) - 1)
            pred = phi1**h * mpmath.mpf(p) ** (m * (1 - 2 * s)) * F ** (h - 1)
            got = mpmath.det(sc.scattering_matrix(N, s, dps=30))
            assert abs(abs(got / pred) - 1) < 1e-20 and abs(abs(mpmath.arg(got / pred)) % math.pi) < 1e-20


@pytest.mark.parametrize("N", [1, 12, 25, 36])
def test_characters_are_a_group_with_conductors(N):
    chars = sc.dirichlet_characters(N)
    units = [r for r in range(N) if math.gcd(r, N) == 1] if N > 1 else [0]
    assert len(chars) == len(units)
    V = np.array([[c.values[r] for r in units] for c in chars])
    np.testing.assert_allclose(V @ V.conj().T, len(units) * np.eye(len(chars)), atol=1e-9)
    for c in chars:
        assert N % c.conductor == 0
        for r in units:
            assert abs(c.primitive[r % c.conductor] - c.values[r]) < 1e-9


def test_dirichlet_L_against_mpmath():
    c5 = sc.dirichlet_characters(5)[2]  # a complex character mod 5
    chi = c5.primitive
    s = np.array([1 + 0.5j, 1 + 40j, 1.3 + 700j, 2 - 3j, 1 + 0j, 1 + 3e-5j])
    with mpmath.workdps(50):
        v = [c5.exact_value(n) for n in range(5)]  # exact values: the Hurwitz poles cancel
        # s = 1 itself is approached from 1 + 1e-30 i (mpmath's sum has the poles)
        pts = [mpmath.mpc(x.real, x.imag if x != 1 else mpmath.mpf("1e-30")) for x in s]
        ref = np.array([complex(mpmath.dirichlet(x, v)) for x in pts])
    got = sc.dirichlet_L(s, chi)
    np.testing.assert_allclose(got[:4], ref[:4], rtol=1e-11)
    # at and next to s = 1: digamma formula (DLMF 25.11.18) and a first-order term
    np.testing.assert_allclose(got[4:], ref[4:], rtol=1e-8)


def test_bad_level():
    with pytest.raises(InputError):
        sc.scattering_data(0)
    with pytest.raises(InputError):
        sc.scattering_data(2.5)
