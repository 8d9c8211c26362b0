"""Weyl's law for Maass forms on Gamma0(q) with a primitive even character chi, q prime.

Derived by the project (docs/theory.md §12.7) from the trace formula with a
character (D. A. Hejhal, *The Selberg Trace Formula for PSL(2,R)*, Vol. 2, Springer LNM 1001
(1983); H. Iwaniec, *Spectral Methods of Automorphic Forms*, 2nd ed. 2002, Thm 10.2 and
Ch. 11, structure as for the trivial character in :mod:`maasscomp.spectrum.weyl`):

    W_chi(T) = (mu/12) T^2 - (2 h T/pi) log((T/e) sqrt(2/pi)) - (T/pi) log A_chi + C_chi
               + osc_chi(T),

with h = 2 singular cusps (infinity and 0; both are singular for every chi mod a prime),
mu = q + 1, and the scattering determinant over the singular cusps

    det Phi(s) = -G(s)^2 q^{-2s} L(2s-1, chi) L(2s-1, chi-bar) / (L(2s, chi) L(2s, chi-bar)),
    G(s) = sqrt(pi) Gamma(s - 1/2)/Gamma(s)

(phi_inf,inf = phi_0,0 = 0 because the character sums over full unit groups vanish;
phi_inf,0 = G(s) q^{-s} L(2s-1, chi-bar)/L(2s, chi-bar) from the double cosets with lower-left
entry d sqrt(q), each class weighted by chi-bar(d), phi(d) classes; |det Phi| = 1 on
Re s = 1/2 checks the powers of q). Hence log A_chi = 3 log q (two conductors q and the
factor q^{-2s}), Tr(I - Phi(1/2)) = 2 (off-diagonal involution: k = 1), no zeta factor and no
constant eigenfunction, and

    C_chi = -mu/144 + E_chi - h/4 + k/2,
    E_chi = sum over elliptic points of order m with generator R of
            sum_{j=1}^{m-1} Re chi(R)^j / (4 m sin^2(pi j/m)),

which for the trivial character gives the (m^2 - 1)/(12 m) of :mod:`maasscomp.spectrum.weyl`;
osc_chi(T) = -(1/pi) sum_{psi in {chi, chi-bar}} (arg L(1 + 2iT, psi) - arg L(1, psi)).

Only this case is provided (prime level, primitive chi); :func:`character_weyl_terms` raises
InputError elsewhere. The counts are over both parities.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from maasscomp.arith import is_prime
from maasscomp.errors import InputError


@dataclass(frozen=True)
class CharacterWeylTerms:
    """Constants of Weyl's law for (Gamma0(q), chi) (module docstring)."""

    level: int
    character: str
    mu: int
    n_singular_cusps: int
    elliptic: float
    minus_one_multiplicity: int
    log_conductor: float
    constant: float

    def as_text(self) -> str:
        return (f"Weyl's law for Gamma0({self.level}) with character {self.character}: mu = {self.mu}, "
                f"{self.n_singular_cusps} singular cusps, elliptic {self.elliptic:.6g}, "
                f"log A = {self.log_conductor:.12g}, C = {self.constant:.12g}")


def _elliptic_generators(q: int) -> list[tuple[int, int]]:
    """(m, d mod q) for one generator R = [[a, b], [q c, d]] of each elliptic point of
    Gamma0(q), q prime: order 2 (trace 0, a^2 = -1 mod q) and order 3 (trace 1,
    a^2 - a + 1 = 0 mod q); the two solutions a give the two points (Shimura 1971,
    Prop. 1.43: nu2 = 1 + (-1/q), nu3 = 1 + (-3/q))."""
    out = []
    for a in range(q):
        if (a * a + 1) % q == 0:
            out.append((2, (-a) % q))
        if (a * a - a + 1) % q == 0:
            out.append((3, (1 - a) % q))
    return out


def character_weyl_terms(level: int, chi) -> CharacterWeylTerms:
    """Constants of Weyl's law with a character; prime level, primitive even chi only."""
    from maasscomp.groups import gamma0
    from maasscomp.groups.characters import complex_value, cusp_shifts

    q = int(level)
    if chi.modulus != q:
        raise InputError(f"character {chi.label} has modulus {chi.modulus}, not the level {q}")
    if not (is_prime(q) and chi.conductor == q and chi.is_even):
        raise InputError(f"Weyl's law with a character is available for a primitive even character "
                         f"of prime level only; not for {chi.label} at level {q}")
    G = gamma0(q)
    kap = cusp_shifts(G, chi)
    h = sum(1 for k in kap if k == 0)
    if h != 2:  # pragma: no cover - both cusps of a prime level are singular
        raise AssertionError("expected two singular cusps")
    E = 0.0
    for m, d in _elliptic_generators(q):
        c = complex_value(chi, d)
        E += sum((c ** j).real / (4 * m * math.sin(math.pi * j / m) ** 2) for j in range(1, m))
    k = 1
    C = -G.index / 144.0 + E - h / 4.0 + k / 2.0
    return CharacterWeylTerms(q, chi.label, G.index, h, float(E), k, 3.0 * math.log(q), float(C))


def _values(chi) -> np.ndarray:
    from maasscomp.groups.characters import complex_value

    return np.array([complex_value(chi, a) for a in range(chi.modulus)], dtype=complex)


def character_weyl_count(level: int, chi, T, *, oscillatory: bool = True):
    """W_chi(T): expected number of cusp forms with character chi (both parities) with R <= T."""
    from maasscomp.groups.characters import conjugate
    from maasscomp.spectrum.scattering import arg_L_1_plus_it, dirichlet_L

    d = character_weyl_terms(level, chi)
    t = np.atleast_1d(np.asarray(T, dtype=float))
    scalar = np.ndim(T) == 0
    if not np.all(np.isfinite(t)) or np.any(t < 0):
        raise InputError(f"T = {T!r} is not allowed; use finite values >= 0")
    with np.errstate(divide="ignore", invalid="ignore"):
        logterm = np.where(t > 0, t * np.log(np.where(t > 0, t, 1.0) / math.e * math.sqrt(2 / math.pi)), 0.0)
    w = (d.mu / 12.0 * t ** 2 - (2 * d.n_singular_cusps / math.pi) * logterm
         - (t / math.pi) * d.log_conductor + d.constant)
    if oscillatory:
        uniq, inv = np.unique(t, return_inverse=True)
        osc = np.zeros_like(uniq)
        for psi in (chi, conjugate(chi)):
            v = _values(psi)
            a0 = float(np.angle(dirichlet_L(np.array([1.0 + 0j]), v))[0])
            osc -= (arg_L_1_plus_it(2.0 * uniq, v) - a0) / math.pi
        w = w + osc[inv].reshape(t.shape)
    return float(w[0]) if scalar else w


def character_weyl_density(level: int, chi, T):
    """dW_chi/dT without the oscillating part."""
    d = character_weyl_terms(level, chi)
    t = np.asarray(T, dtype=float)
    return (d.mu / 6.0 * t - (2 * d.n_singular_cusps / math.pi) * np.log(t * math.sqrt(2 / math.pi))
            - d.log_conductor / math.pi)
