"""Scattering matrix of Gamma0(N) for every level N, and its determinant on Re s = 1/2.

The scattering matrix Phi(s) = (phi_ab(s)) collects the constant terms of the Eisenstein
series E_a(z, s) of the cusps a at the cusps b (Iwaniec, *Spectral Methods of Automorphic
Forms*, 2nd ed. 2002, Thm 3.4 and (3.21)):

    phi_ab(s) = sqrt(pi) Gamma(s - 1/2)/Gamma(s) * sum_{c > 0} S_ab(0, 0; c) c^{-2s},

where c runs over the lower-left entries of sigma_a^{-1} Gamma0(N) sigma_b and S_ab(0, 0; c)
counts the classes d mod c.  This module evaluates that Dirichlet series *exactly*
(docs/theory.md §8.1, derived by the project):

* for the cusp a = A_a(infinity) of width w_a (A_a in SL2(Z)), the entries with lower-left
  entry c = gamma sqrt(w_a w_b) correspond one-to-one to the primitive vectors
  (alpha, gamma), gamma >= 1, alpha mod gamma w_a, with A_a (alpha, gamma)^T in the
  Gamma0(N)-orbit of the first column of A_b.  That orbit is a union of classes mod N
  (Gamma(N) acts transitively on primitive vectors with a given reduction mod N), so the
  count n_ab(gamma) depends on gamma only through its N-part g (the largest divisor of
  gamma built from primes of N), gamma mod N and phi(gamma / g);
* writing gamma = g m with gcd(m, N) = 1 and expanding the dependence on m mod N in
  Dirichlet characters chi mod N gives

      phi_ab(s) = G(s) sum_chi L(2s-1, chi)/L(2s, chi) * B_ab,chi(s),
      G(s) = sqrt(pi) Gamma(s - 1/2)/Gamma(s),

  with B_ab,chi(s) = (w_a w_b)^{-s} phi(N)^{-1} sum_g g^{-2s} sum_{r mod N} conj(chi(r)) c_ab(g, r)
  a finite rational function of the p^{-s}, p | N (the sum over g has a geometric tail
  in each prime once p^{v_p(N)} | g).

The description is per ordered pair of cusp classes; adding a nebentypus later means
weighting the counted classes by the character and keeping only the cusps singular for
it (docs/theory.md §8.1).

For the determinant the characters decouple: in a basis of character sums over each cusp
class the matrix is block diagonal with exactly one L-ratio per block, so

    det Phi(s) = G(s)^h prod_chi [L(2s-1, chi)/L(2s, chi)]^{n_chi} R(s),
    R(s) = det( sum_chi B_chi(s) ),

with n_chi the rank of B_chi and sum_chi n_chi = h (the number of cusps).  R depends on
the variables x_p = p^{-s} separately and factors as prod_p R_p(x_p); on Re s = 1/2 each
R_p has constant modulus and is periodic in t with period pi / log p.  This is what
Weyl's law needs (:class:`ScatteringDeterminant`): the continuous argument of
det Phi(1/2 + it), split into Gamma and Dirichlet-L pieces and one periodic-plus-linear
piece per prime, and Tr(I - Phi(1/2)) from the multiplicity of the eigenvalue -1 of the
involution Phi(1/2).
"""

from __future__ import annotations

import functools
import itertools
import math
from dataclasses import dataclass, field

import mpmath
import numpy as np

from maasscomp.arith import check_level, prime_factors

__all__ = [
    "DirichletCharacter",
    "dirichlet_characters",
    "ScatteringData",
    "scattering_data",
    "scattering_matrix",
    "scattering_matrix_at_half",
    "ScatteringDeterminant",
    "scattering_determinant",
    "dirichlet_L",
    "arg_L_1_plus_it",
]


# --------------------------------------------------------------------------- characters


@dataclass(frozen=True, eq=False)
class DirichletCharacter:
    """A Dirichlet character mod N, with its primitive character.

    Attributes
    ----------
    modulus : int
    exponents : tuple of int
        chi(g_i) = exp(2 pi i exponents[i] / orders[i]) on the generators of
        (Z/NZ)^x used by :func:`dirichlet_characters` (exact identity of the character).
    values : ndarray, complex, shape (modulus,)
        chi(n) for n = 0 .. N-1 (0 where gcd(n, N) > 1).
    conductor : int
    primitive : ndarray, complex, shape (conductor,)
        Values of the primitive character inducing chi.
    is_even : bool
    order : int
        A common multiple of the orders of the values.
    index : ndarray, int
        chi(n) = exp(2 pi i index[n] / order), index = -1 where gcd(n, N) > 1 (exact
        values for multiprecision sums).
    """

    modulus: int
    exponents: tuple[int, ...]
    values: np.ndarray
    conductor: int
    primitive: np.ndarray
    is_even: bool
    order: int = 1
    index: np.ndarray = field(default_factory=lambda: np.zeros(1, dtype=np.int64), repr=False)

    def exact_value(self, n: int) -> "mpmath.mpc":
        """chi(n) in the current mpmath precision (exp(2 pi i index/order), or 0)."""
        k = int(self.index[n % self.modulus])
        if k < 0:
            return mpmath.mpc(0)
        return mpmath.expjpi(mpmath.mpf(2 * k) / self.order)

    @property
    def is_trivial(self) -> bool:
        return self.conductor == 1

    def primitive_key(self) -> tuple:
        """Hashable identity of the primitive character (values rounded to 1e-9)."""
        v = np.round(self.primitive, 9) + 0.0
        return (self.conductor, tuple(complex(x) for x in v))

    def primitive_at(self, n: int) -> complex:
        """chi*(n) for the primitive character chi* (0 if gcd(n, conductor) > 1)."""
        return complex(self.primitive[n % self.conductor])


def _unit_group(q: int, p: int, e: int) -> list[tuple[int, int]]:
    """Generators (g, order) of (Z/p^e Z)^x (cyclic for odd p; -1 and 5 for 2^e, e >= 3)."""
    if q == 2:
        return []
    if p == 2 and e >= 3:
        return [(q - 1, 2), (5, q // 4)]
    order = q // p * (p - 1)
    for g in range(2, q):
        if g % p == 0:
            continue
        if all(pow(g, order // r, q) != 1 for r in prime_factors(order)):
            return [(g, order)]
    raise AssertionError(f"no generator mod {q}")  # pragma: no cover


@functools.lru_cache(maxsize=64)
def dirichlet_characters(N: int) -> tuple[DirichletCharacter, ...]:
    """All phi(N) Dirichlet characters mod N, trivial character first.

    Built from generators of (Z/p^e Z)^x for each p^e || N (cyclic for odd p; generated
    by -1 and 5 for 2^e with e >= 3), combined by the Chinese remainder theorem.
    """
    from maasscomp.groups import factorint

    N = int(N)
    fac = factorint(N)
    comps = []  # per prime power: (q, [(exponent tuple, values mod q)])
    for p, e in sorted(fac.items()):
        q = p**e
        gens = _unit_group(q, p, e)
        logs: dict[int, tuple[int, ...]] = {}
        for ks in itertools.product(*[range(o) for _, o in gens]):
            x = 1
            for (g, _), k in zip(gens, ks):
                x = x * pow(g, k, q) % q
            logs[x] = ks
        chars = []
        for js in itertools.product(*[range(o) for _, o in gens]):
            v = np.zeros(q, dtype=complex)
            for x, ks in logs.items():
                v[x] = np.exp(2j * np.pi * sum(j * k / o for j, k, (_, o) in zip(js, ks, gens)))
            chars.append((tuple(js), v))
        comps.append((q, chars))
    out = []
    n = np.arange(N)
    order = 1
    for q, chars in comps:
        for js, _ in chars:
            pass
    gens_orders = []
    for p, e in sorted(fac.items()):
        gens_orders += [o for _, o in _unit_group(p**e, p, e)]
    for o in gens_orders:
        order = order * o // math.gcd(order, o)
    # discrete logarithms of every unit mod N on the combined generators
    logs_all = []
    for p, e in sorted(fac.items()):
        q = p**e
        gens = _unit_group(q, p, e)
        lg: dict[int, tuple[int, ...]] = {}
        for ks in itertools.product(*[range(o) for _, o in gens]):
            x = 1
            for (g, _), k in zip(gens, ks):
                x = x * pow(g, k, q) % q
            lg[x] = ks
        logs_all.append((q, [o for _, o in gens], lg))
    for combo in itertools.product(*[c for _, c in comps]):
        vals = np.ones(N, dtype=complex)
        exps: tuple[int, ...] = ()
        for (q, _), (js, v) in zip(comps, combo):
            vals = vals * v[n % q]
            exps = exps + js
        idx = np.full(N, -1, dtype=np.int64)
        for r in range(N):
            if math.gcd(r, N) != 1:
                continue
            k, pos = 0, 0
            for q, ords, lg in logs_all:
                for j, o, kk in zip(exps[pos : pos + len(ords)], ords, lg[r % q]):
                    k += j * kk * (order // o)
                pos += len(ords)
            idx[r] = k % order
        if N == 1:
            vals = np.ones(1, dtype=complex)
            idx = np.zeros(1, dtype=np.int64)
        f = _conductor(N, vals)
        prim = np.zeros(f, dtype=complex)
        for r in range(f):
            if math.gcd(r, f) == 1:
                # any lift of r coprime to N carries the primitive value
                m = r
                while math.gcd(m, N) != 1:
                    m += f
                prim[r] = vals[m % N]
        if f == 1:
            prim = np.ones(1, dtype=complex)
        even = bool(abs(vals[(N - 1) % N] - 1) < 1e-9) if N > 2 else True
        out.append(DirichletCharacter(N, exps, vals, f, prim, even, order, idx))
    out.sort(key=lambda c: (c.conductor > 1, c.conductor, c.exponents))
    return tuple(out)


def _conductor(N: int, vals: np.ndarray) -> int:
    from maasscomp.groups import divisors

    if N == 1:
        return 1
    for f in divisors(N):
        ok = True
        for a in range(1, N, f):  # a = 1 mod f
            if math.gcd(a, N) == 1 and abs(vals[a] - 1) > 1e-9:
                ok = False
                break
        if ok:
            return f
    return N  # pragma: no cover


# --------------------------------------------------------------------------- exact counts


def _orbit_table(N: int, u: int, v: int) -> np.ndarray:
    """Boolean N x N table: vectors mod N in the Gamma0(N)-orbit of (u, v)^T (mod N).

    Gamma0(N) reduces mod N onto the upper triangular matrices [[a, b], [0, a^{-1}]],
    which send (u, v) to (a u + b v, a^{-1} v).
    """
    T = np.zeros((N, N), dtype=bool)
    units = [a for a in range(N) if math.gcd(a, N) == 1] if N > 1 else [0]
    b = np.arange(N)
    for a in units:
        ai = pow(a, -1, N) if N > 1 else 0
        T[(a * u + b * v) % N, (ai * v) % N] = True
    return T


def _count(N: int, A, wa: int, orbit: np.ndarray, g: int, g_primes, units: np.ndarray) -> np.ndarray:
    """c(g, r) = #{alpha mod g w_a : gcd(alpha, g) = 1, A (alpha, g r)^T mod N in orbit},
    for every unit r mod N (vector over ``units``).

    The condition depends on alpha only mod gcd(N, g w_a) and, through gcd(alpha, g), mod
    rad(g); M = lcm of the two divides g w_a, so the count mod g w_a is (g w_a / M) times
    the count mod M.
    """
    rad = math.prod(g_primes) if g_primes else 1
    M0 = math.gcd(N, g * wa)
    M = M0 * rad // math.gcd(M0, rad)
    alpha = np.arange(M)
    keep = np.ones(M, dtype=bool)
    for p in g_primes:
        keep &= alpha % p != 0
    alpha = alpha[keep]
    gam = (g * units) % N
    (a11, a12), (a21, a22) = A
    X = (a11 * alpha[:, None] + a12 * gam[None, :]) % N
    Y = (a21 * alpha[:, None] + a22 * gam[None, :]) % N
    return orbit[X, Y].sum(axis=0) * (g * wa // M)


@dataclass(frozen=True, eq=False)
class ScatteringData:
    """Exact data of the scattering matrix of Gamma0(N) (see the module docstring).

    Attributes
    ----------
    level : int
    primes : tuple of int
    exps : tuple of int
        v_p(N) for each prime.
    widths : tuple of int
        Cusp widths, in the order of ``gamma0(N).cusps``.
    wexp : ndarray, int, shape (h, h, n_primes)
        v_p(w_a w_b).
    ks : ndarray, int, shape (n_g, n_primes)
        The classes of the N-part g of the lower-left entry: k_p = v_p(g) for
        k_p < v_p(N), and k_p = v_p(N) standing for every k_p >= v_p(N) (geometric tail).
    counts : ndarray, int, shape (h, h, n_g, phi(N))
        c_ab(g_k, r) with g_k = prod_p p^{k_p}, for r over the units mod N (in increasing
        order).
    characters : tuple of DirichletCharacter
    coef : dict
        chi index -> complex array (h, h, n_g): phi(N)^{-1} sum_r conj(chi(r)) c_ab(g_k, r);
        only characters with a non-zero array are kept.
    """

    level: int
    primes: tuple[int, ...]
    exps: tuple[int, ...]
    widths: tuple[int, ...]
    wexp: np.ndarray
    ks: np.ndarray
    counts: np.ndarray
    characters: tuple[DirichletCharacter, ...]
    coef: dict = field(repr=False)

    @property
    def n_cusps(self) -> int:
        return len(self.widths)

    def tail_ratio(self, chi_index: int, t: int) -> complex:
        """tau = chi'(p) for the t-th prime p: the prime-to-p part of chi evaluated at p.

        Beyond p^{v_p(N)} | g a further factor p multiplies the count by p and shifts the
        residue of the lower-left entry mod N/p^{v_p(N)} by p, so the character sum of the
        tail is geometric with ratio p tau p^{-2s} (docs/theory.md §8.1).
        """
        p, e = self.primes[t], self.exps[t]
        q = p**e
        rest = self.level // q
        # u = 1 mod p^e, u = p mod N/p^e
        u = next(u for u in range(1, self.level + 1) if u % q == 1 % q and u % rest == p % rest) % self.level
        return complex(self.characters[chi_index].values[u]) if self.level > 1 else 1.0

    def g_weights(self, chi_index: int, x: np.ndarray) -> np.ndarray:
        """Weights of the g-classes for one character: prod_p x_p^{2 k_p}, divided by
        (1 - p tau_p x_p^2) in the tail (:meth:`tail_ratio`).

        x : complex array, shape (..., n_primes), x_p = p^{-s} (one value per prime, so the
        primes can be varied separately). Returns shape (..., n_g).
        """
        x = np.asarray(x, dtype=complex)
        out = np.ones(x.shape[:-1] + (self.ks.shape[0],), dtype=complex)
        for i, (p, e) in enumerate(zip(self.primes, self.exps)):
            xp = x[..., i : i + 1]
            k = self.ks[:, i]
            w = xp ** (2 * k)
            tau = self.tail_ratio(chi_index, i)
            w = np.where(k == e, w / (1.0 - p * tau * xp**2), w)
            out = out * w
        return out

    def width_factor(self, x: np.ndarray) -> np.ndarray:
        """(w_a w_b)^{-s} = prod_p x_p^{v_p(w_a w_b)}; x shape (..., n_primes) -> (..., h, h)."""
        x = np.asarray(x, dtype=complex)
        h = self.n_cusps
        out = np.ones(x.shape[:-1] + (h, h), dtype=complex)
        for i in range(len(self.primes)):
            out = out * x[..., i][..., None, None] ** self.wexp[:, :, i]
        return out

    def B(self, chi_index: int, x: np.ndarray) -> np.ndarray:
        """B_chi(x) for one character; x shape (..., n_primes) -> (..., h, h)."""
        x = np.asarray(x, dtype=complex)
        gw = self.g_weights(chi_index, x)
        return np.einsum("...k,abk->...ab", gw, self.coef[chi_index]) * self.width_factor(x)

    def rational_matrix(self, x: np.ndarray) -> np.ndarray:
        """sum_chi B_chi(x): Phi(s)/G(s) with every L-ratio set to 1; its determinant is R.

        x shape (..., n_primes) -> (..., h, h).
        """
        x = np.asarray(x, dtype=complex)
        out = None
        for ci in self.coef:
            b = self.B(ci, x)
            out = b if out is None else out + b
        return out


@functools.lru_cache(maxsize=32)
def scattering_data(level: int) -> ScatteringData:
    """Exact count data of the scattering matrix of Gamma0(level) (module docstring).

    Cost grows like h^2 * prod_p (v_p(N) + 1) * N rad(N) phi(N) elementary operations
    (h = number of cusps); about a second for N = 100.
    """
    from maasscomp.groups import factorint, gamma0

    N = check_level(level)
    G = gamma0(N)
    fac = factorint(N)
    primes = tuple(sorted(fac))
    exps = tuple(fac[p] for p in primes)
    units = np.array([r for r in range(N) if math.gcd(r, N) == 1] if N > 1 else [0], dtype=np.int64)
    cusps = G.cusps
    h = len(cusps)
    widths = tuple(int(c.width) for c in cusps)
    wexp = np.zeros((h, h, len(primes)), dtype=np.int64)
    for i, wa in enumerate(widths):
        for j, wb in enumerate(widths):
            for t, p in enumerate(primes):
                m, k = wa * wb, 0
                while m % p == 0:
                    m //= p
                    k += 1
                wexp[i, j, t] = k
    ks = np.array(list(itertools.product(*[range(e + 1) for e in exps])), dtype=np.int64)
    ks = ks.reshape(max(ks.shape[0], 1), len(primes))
    gs = [math.prod(p**k for p, k in zip(primes, row)) for row in ks]
    gp = [tuple(p for p, k in zip(primes, row) if k > 0) for row in ks]
    counts = np.zeros((h, h, len(gs), len(units)), dtype=np.int64)
    for j, cb in enumerate(cusps):
        (ub, _), (vb, _) = cb.A
        orbit = _orbit_table(N, ub % N, vb % N) if N > 1 else np.ones((1, 1), dtype=bool)
        for i, ca in enumerate(cusps):
            for k, (g, gpr) in enumerate(zip(gs, gp)):
                counts[i, j, k] = _count(N, ca.A, widths[i], orbit, g, gpr, units)
    chars = dirichlet_characters(N)
    coef = {}
    for ci, chi in enumerate(chars):
        w = np.conj(chi.values[units]) if N > 1 else np.ones(1)
        arr = np.einsum("abkr,r->abk", counts.astype(float), w) / len(units)
        # counts are integers and character values roots of unity: a zero sum is zero to
        # rounding, a non-zero one is at least ~1/phi(N)
        if np.max(np.abs(arr)) > 1e-8:
            coef[ci] = arr
    return ScatteringData(N, primes, exps, widths, wexp, ks, counts, chars, coef)


# --------------------------------------------------------------------------- the matrix


def scattering_matrix(level: int, s: complex, *, dps: int = 30) -> "mpmath.matrix":
    """Phi(s) for Gamma0(level), evaluated exactly (mpmath, ``dps`` digits).

    Entries in the order of ``gamma0(level).cusps``.  Slow (one L-function pair per
    character); meant for checks and for Phi(1/2), not for Weyl's law at many heights.
    At s = 1/2 use :func:`scattering_matrix_at_half` (poles cancel there).
    """
    sd = scattering_data(level)
    with mpmath.workdps(dps):
        s = mpmath.mpc(s)
        G = mpmath.sqrt(mpmath.pi) * mpmath.gamma(s - 0.5) / mpmath.gamma(s)
        xs = [mpmath.mpf(p) ** (-s) for p in sd.primes]
        h = sd.n_cusps
        P = mpmath.matrix(h, h)
        units = [r for r in range(sd.level) if math.gcd(r, sd.level) == 1] if sd.level > 1 else [0]
        nu = len(units)
        for ci in sd.coef:
            chi = sd.characters[ci]
            rho = _L_ratio_mp(chi, s)
            cbar = [mpmath.conj(chi.exact_value(r)) for r in units]
            taus = [_tail_ratio_mp(sd, chi, t) for t in range(len(sd.primes))]
            gw = []
            for row in sd.ks:
                w = mpmath.mpf(1)
                for t, (p, e) in enumerate(zip(sd.primes, sd.exps)):
                    w *= xs[t] ** (2 * int(row[t]))
                    if row[t] == e:
                        w /= 1 - p * taus[t] * xs[t] ** 2
                gw.append(w)
            for a in range(h):
                for b in range(h):
                    acc = mpmath.mpf(0)
                    for k, w in enumerate(gw):
                        cnt = sd.counts[a, b, k]
                        if cnt.any():
                            # exact character sum phi(N)^{-1} sum_r conj(chi(r)) c_ab(g, r)
                            acc += w * mpmath.fsum(cbar[r] * int(cnt[r]) for r in range(nu) if cnt[r]) / nu
                    wf = mpmath.mpf(1)
                    for t in range(len(sd.primes)):
                        wf *= xs[t] ** int(sd.wexp[a, b, t])
                    P[a, b] += G * rho * acc * wf
        return P


def _tail_ratio_mp(sd: ScatteringData, chi: DirichletCharacter, t: int) -> "mpmath.mpc":
    p, e = sd.primes[t], sd.exps[t]
    q = p**e
    rest = sd.level // q
    u = next(u for u in range(1, sd.level + 1) if u % q == 1 % q and u % rest == p % rest) % sd.level
    return chi.exact_value(u)


def _L_ratio_mp(chi: DirichletCharacter, s) -> "mpmath.mpc":
    """L(2s-1, chi)/L(2s, chi) for chi mod N, from the primitive character:
    L(s, chi) = L(s, chi*) prod_{p | N} (1 - chi*(p) p^{-s})."""
    N, f = chi.modulus, chi.conductor
    if f == 1:
        num, den = mpmath.zeta(2 * s - 1), mpmath.zeta(2 * s)
        prim = lambda n: mpmath.mpf(1)  # noqa: E731
    else:
        def prim(n: int):
            m = n
            while math.gcd(m, N) != 1:
                m += f
            return chi.exact_value(m)

        v = [prim(n) if math.gcd(n, f) == 1 else mpmath.mpc(0) for n in range(f)]
        num, den = mpmath.dirichlet(2 * s - 1, v), mpmath.dirichlet(2 * s, v)
    from maasscomp.groups import factorint

    for p in factorint(N):
        if f % p:
            c = prim(p)
            num *= 1 - c * mpmath.mpf(p) ** (1 - 2 * s)
            den *= 1 - c * mpmath.mpf(p) ** (-2 * s)
    return num / den


def scattering_matrix_at_half(level: int) -> np.ndarray:
    """Phi(1/2) as a real symmetric matrix (float), from the real part of Phi(1/2 + i eps).

    Phi is real on the real axis, so Re Phi(1/2 + i eps) = Phi(1/2) + O(eps^2); eps = 1e-9.
    Gamma(s - 1/2), 1/L(2s, chi_0) and the geometric tails 1/(1 - p^{1-2s}) have poles at
    s = 1/2 that cancel, each costing about 9 digits, so the working precision grows with
    the number of primes of N.
    """
    sd = scattering_data(level)
    dps = 40 + 10 * (len(sd.primes) + 2)
    with mpmath.workdps(dps):
        P = scattering_matrix(level, mpmath.mpc(0.5, mpmath.mpf("1e-9")), dps=dps)
        h = P.rows
        return np.array([[float(mpmath.re(P[i, j])) for j in range(h)] for i in range(h)])


# --------------------------------------------------------------------------- L-functions


_EM_COEF = np.array([float(mpmath.bernoulli(2 * k) / mpmath.factorial(2 * k)) for k in range(1, 13)])


def _hurwitz_em(s: np.ndarray, a: float) -> np.ndarray:
    """zeta(s, a) = sum_{n>=0} (n + a)^{-s} for Re s >= 1, s != 1, 0 < a <= 1, vectorised.

    Euler-Maclaurin summation (DLMF 25.11.5 / 25.2.9 pattern): the first M terms, then
    (M+a)^{1-s}/(s-1) + (M+a)^{-s}/2 + sum_{k=1}^{12} B_{2k}/(2k)! s(s+1)...(s+2k-2)
    (M+a)^{-s-2k+1}, with M > |s|/2 + 20 so that successive corrections shrink by
    (|s|/(2 pi M))^2 < 1/pi^2 (relative error below 1e-12).
    """
    s = np.asarray(s, dtype=complex)
    out = np.empty_like(s)
    flat, res = s.ravel(), out.ravel()
    order = np.argsort(np.abs(flat.imag))
    for i0 in range(0, flat.size, 256):
        idx = order[i0 : i0 + 256]
        ss = flat[idx]
        M = int(np.max(np.abs(ss)) / 2) + 20
        logn = np.log(np.arange(M, dtype=float) + a)
        acc = np.zeros(ss.size, dtype=complex)
        for j0 in range(0, logn.size, 4096):
            acc += np.exp(-np.outer(ss, logn[j0 : j0 + 4096])).sum(axis=1)
        lnM = math.log(M + a)
        MmS = np.exp(-ss * lnM)
        acc += (M + a) * MmS / (ss - 1.0) + 0.5 * MmS
        poch = ss.copy()
        term = MmS / (M + a)
        for k, c in enumerate(_EM_COEF, start=1):
            acc += c * poch * term
            poch = poch * (ss + 2 * k - 1) * (ss + 2 * k)
            term = term / ((M + a) * (M + a))
        res[idx] = acc
    return out


def dirichlet_L(s: np.ndarray, chi: np.ndarray) -> np.ndarray:
    """L(s, chi) = f^{-s} sum_{a=1}^{f} chi(a) zeta(s, a/f) for Re s >= 1 (vectorised).

    ``chi``: values mod f (length f; chi = [1] is the Riemann zeta function).  For a
    non-trivial character the Hurwitz poles at s = 1 cancel; within 1e-4 of s = 1 the value
    is taken from L(1, chi) = -(1/f) sum_a chi(a) psi(a/f) (DLMF 25.11.18 with the digamma
    function) plus a first-order term.
    """
    chi = np.asarray(chi, dtype=complex)
    f = chi.size
    s = np.asarray(s, dtype=complex)
    if f == 1:
        return _hurwitz_em(s, 1.0)
    near = np.abs(s - 1.0) < 1e-4
    safe = np.where(near, 2.0 + 0j, s)
    out = np.zeros_like(s)
    for a in range(1, f + 1):
        c = chi[a % f]
        if c != 0:
            out = out + c * _hurwitz_em(safe, a / f)
    out = out * np.exp(-safe * math.log(f))
    if np.any(near):
        from scipy.special import digamma

        L1 = -sum(chi[a % f] * digamma(a / f) for a in range(1, f + 1)) / f
        hstep = 1e-3
        pm = dirichlet_L(np.array([1.0 + hstep + 0j]), chi)
        # one-sided slope from L(1 + h): error O(h), times |s - 1| < 1e-4
        slope = (pm[0] - L1) / hstep
        out = np.where(near, L1 + (s - 1.0) * slope, out)
    return out


# sigma nodes for following arg L(sigma + it) from sigma = 2 (|L - 1| < 1 there, so the
# principal value is the continuous branch) down to sigma = 1; each step changes the
# argument by much less than pi (|d arg/d sigma| = |Im L'/L| is O(log t) there)
_SIGMA_PATH = (2.0, 1.6, 1.35, 1.18, 1.08, 1.0)


def arg_L_1_plus_it(t: np.ndarray, chi: np.ndarray) -> np.ndarray:
    """Continuous branch of arg L(1 + it, chi) for t >= 0 (zero as sigma -> +infinity).

    For the trivial character (zeta) the value at t = 0 is the limit -pi/2 from t > 0
    (simple pole with residue 1).  Vectorised over t.
    """
    t = np.asarray(t, dtype=float)
    chi = np.asarray(chi, dtype=complex)
    trivial = chi.size == 1
    safe = np.where(t == 0, 1.0, t) if trivial else t
    prev = dirichlet_L(_SIGMA_PATH[0] + 1j * safe, chi)
    total = np.angle(prev)
    for sig in _SIGMA_PATH[1:]:
        cur = dirichlet_L(sig + 1j * safe, chi)
        total = total + np.angle(cur / prev)
        prev = cur
    if trivial:
        total = np.where(t == 0, -math.pi / 2, total)
    return total


# --------------------------------------------------------------------------- determinant


@dataclass(frozen=True, eq=False)
class _PrimePhase:
    """Continuous argument of Rt_p on Re s = 1/2: slope t + periodic part (period 2 pi/log p).

    theta_p(t) - theta_p(0) = slope * t + sum_k a_k (e^{i k t log p} - 1),
    with the periodic part as a truncated Fourier series (fitted once per level).
    """

    p: int
    slope: float
    winding: int  # turns of Rt_p per period 2 pi / log p
    fourier: np.ndarray  # complex coefficients a_k, k = -K..K
    K: int

    def __call__(self, t: np.ndarray) -> np.ndarray:
        t = np.asarray(t, dtype=float)
        w = math.log(self.p)
        k = np.arange(-self.K, self.K + 1)
        per = np.real(np.exp(1j * w * np.multiply.outer(t, k)) @ self.fourier)
        return self.slope * t + per - float(np.real(self.fourier.sum()))

    def derivative(self, t: np.ndarray) -> np.ndarray:
        t = np.asarray(t, dtype=float)
        w = math.log(self.p)
        k = np.arange(-self.K, self.K + 1)
        return self.slope + np.real(np.exp(1j * w * np.multiply.outer(t, k)) @ (1j * w * k * self.fourier))


@dataclass(frozen=True, eq=False)
class ScatteringDeterminant:
    """det Phi(1/2 + it) of Gamma0(N) in the form Weyl's law needs.

        det Phi(s) = G(s)^h prod_chi [L(2s-1, chi*)/L(2s, chi*)]^{n_chi} prod_p Rt_p(p^{-s}),

    chi* the primitive characters (conductor f_chi) behind the characters chi mod N with
    n_chi > 0, Rt_p = R_p times the Euler factors that turn L(s, chi mod N) into
    L(s, chi*).  On the critical line (docs/theory.md §8.2)

        theta(t) - theta(0) = sum_chi n_chi [ -2 t log(f_chi/pi) - 2 arg Gamma(1/2 + it)
                                              - 2 (arg L(1 + 2it, chi*) - arg L(1, chi*)) ]
                              + sum_p (theta_p(t) - theta_p(0)).

    Attributes
    ----------
    level : int
    n_cusps : int
        h.
    characters : tuple of (conductor, primitive values, n_chi)
    minus_one_multiplicity : int
        k = multiplicity of the eigenvalue -1 of Phi(1/2); Tr(I - Phi(1/2)) = 2k.
    primes : tuple of _PrimePhase
    log_conductor : float
        log A_N with theta(t) = -2 t log(A_N) + (terms of order t log t, t and O(1)):
        log A_N = sum_chi n_chi log f_chi - sum_p slope_p / 2.
    """

    level: int
    n_cusps: int
    characters: tuple[tuple[int, np.ndarray, int], ...]
    minus_one_multiplicity: int
    primes: tuple[_PrimePhase, ...]
    log_conductor: float

    def conductor_exponents(self) -> dict[int, float]:
        """A_N = prod_p p^{a_p}: a_p = sum_chi n_chi v_p(f_chi) - (turns of Rt_p per period)/2."""
        out: dict[int, float] = {}
        for pp in self.primes:
            a = -pp.winding / 2.0
            for f, _, n in self.characters:
                m = f
                while m % pp.p == 0:
                    a += n
                    m //= pp.p
            out[pp.p] = a
        return out

    @property
    def n_trivial(self) -> int:
        """n_chi of the trivial character (the number of zeta-ratio factors)."""
        return sum(n for f, _, n in self.characters if f == 1)

    def oscillatory(self, t: np.ndarray) -> np.ndarray:
        """The bounded part of (theta(t) - theta(0))/(2 pi) beyond -(h/pi)(arg Gamma) and
        the linear terms: -(1/pi) sum_chi n_chi arg L(1 + 2it, chi*) plus the periodic parts
        (theta_p(t) - theta_p(0) - slope_p t)/(2 pi).  Zero-th order term of the trivial
        character's arg zeta at t = 0 (-pi/2) is *not* subtracted (it goes into the
        constant of Weyl's law, as in docs/theory.md §2.2)."""
        t = np.asarray(t, dtype=float)
        out = np.zeros_like(t)
        for f, chi, n in self.characters:
            a = arg_L_1_plus_it(2.0 * t, chi)
            if f > 1:
                a = a - float(np.angle(dirichlet_L(np.array([1.0 + 0j]), chi))[0])
            out = out - (n / math.pi) * a
        for pp in self.primes:
            out = out + (pp(t) - pp.slope * t) / (2 * math.pi)
        return out


def _prime_log(sd: ScatteringData, idx: int, n_chi: list[tuple[DirichletCharacter, int]],
               t: np.ndarray) -> np.ndarray:
    """log Rt_p(x_p(t)) (principal imaginary part) on Re s = 1/2, other primes held at a
    fixed generic point of their circle |x_q| = q^{-1/2} (R factors over the primes, so
    this changes Rt_p only by a constant)."""
    p = sd.primes[idx]
    x = np.empty((t.size, len(sd.primes)), dtype=complex)
    for j, q in enumerate(sd.primes):
        x[:, j] = q ** -0.5 * np.exp(-1j * 0.3711 * math.log(q))
    x[:, idx] = p ** -0.5 * np.exp(-1j * t * math.log(p))
    sign, logabs = np.linalg.slogdet(sd.rational_matrix(x))
    lg = logabs + np.log(sign)
    xp = x[:, idx]
    for chi, n in n_chi:
        c = chi.primitive_at(p) if chi.conductor % p else 0.0
        if c != 0:
            # L(s, chi mod N) = L(s, chi*) (1 - chi*(p) p^{-s}) for p | N, p not | f_chi
            lg = lg + n * (np.log(1 - c * p * xp**2) - np.log(1 - c * xp**2))
    return lg


def _fit_prime_phase(sd: ScatteringData, idx: int, n_chi, level: int) -> _PrimePhase:
    p = sd.primes[idx]
    period = 2 * math.pi / math.log(p)  # period of x_p = p^{-1/2 - it} in t
    w = math.log(p)
    n_grid = 128
    while True:
        # midpoints: x_p^2 = 1/p (t = 0 and half a period) can be a removable singularity
        # of the separate factors
        t = (np.arange(n_grid) + 0.5) * period / n_grid
        lg = _prime_log(sd, idx, n_chi, t)
        mod = lg.real
        if np.ptp(mod) > 1e-7 * max(1.0, float(np.max(np.abs(mod)))):
            raise ArithmeticError(f"level {level}: |R_{p}| is not constant on the critical line "
                                  f"(spread {np.ptp(mod):.2e})")
        ang = np.unwrap(lg.imag)
        close = float(np.angle(np.exp(1j * (lg.imag[0] - ang[-1]))))
        wind = (ang[-1] + close - ang[0]) / (2 * math.pi)
        if abs(wind - round(wind)) > 1e-6:
            raise ArithmeticError(f"level {level}: non-integer winding {wind} of R_{p}")
        slope = round(wind) * w
        kk = np.fft.fftfreq(n_grid, d=1.0 / n_grid)
        a = np.fft.fft(ang - slope * t) / n_grid * np.exp(-1j * kk * w * t[0])
        if np.max(np.abs(a[np.abs(kk) >= n_grid // 4])) < 1e-12 or n_grid >= 1 << 14:
            break
        n_grid *= 2
    K = n_grid // 4
    order = np.argsort(kk)
    kk, a = kk[order], a[order]
    sel = np.abs(kk) <= K
    pp = _PrimePhase(p, float(slope), int(round(wind)), a[sel], K)
    # independent check between the grid points
    tt = (np.arange(n_grid) + 0.25) * period / n_grid
    direct = _prime_log(sd, idx, n_chi, tt).imag
    base = float(np.real(a[sel].sum()))
    err = np.angle(np.exp(1j * (direct - pp(tt) - base)))
    if np.max(np.abs(err)) > 1e-8:
        raise ArithmeticError(f"level {level}: phase of R_{p} not reproduced ({np.max(np.abs(err)):.1e})")
    return pp


@functools.lru_cache(maxsize=32)
def scattering_determinant(level: int) -> ScatteringDeterminant:
    """The factorised determinant of the scattering matrix of Gamma0(level) on Re s = 1/2.

    Raises
    ------
    InputError
        For a level that is not a positive integer.
    ArithmeticError
        If a self-check fails: sum n_chi != h, |Rt_p| not constant on its circle, a
        non-integer winding, a phase not reproduced between grid points, Phi(1/2) not an
        involution.  (None is expected; they guard the derivation.)
    """
    sd = scattering_data(level)
    h = sd.n_cusps
    # ranks of the B_chi at a generic point give the exponents n_chi
    xg = np.array([p ** -0.5 * np.exp(-1j * 0.2903 * math.log(p)) for p in sd.primes], dtype=complex)
    n_chi: list[tuple[DirichletCharacter, int]] = []
    for ci in sorted(sd.coef):
        sv = np.linalg.svd(sd.B(ci, xg), compute_uv=False)
        n = int(np.sum(sv > 1e-9 * max(float(sv.max()), 1e-300)))
        if n:
            n_chi.append((sd.characters[ci], n))
    if sum(n for _, n in n_chi) != h:
        raise ArithmeticError(f"level {level}: character ranks sum to {sum(n for _, n in n_chi)}, not {h}")
    groups: dict[tuple, list] = {}
    for chi, n in n_chi:
        key = chi.primitive_key()
        if key in groups:
            groups[key][2] += n
        else:
            groups[key] = [chi.conductor, chi.primitive.copy(), n]
    chars = tuple((int(f), v, int(n)) for f, v, n in groups.values())
    phases = tuple(_fit_prime_phase(sd, i, n_chi, level) for i in range(len(sd.primes)))
    P0 = scattering_matrix_at_half(level)
    ev = np.linalg.eigvalsh(0.5 * (P0 + P0.T))
    if np.max(np.abs(np.abs(ev) - 1)) > 1e-8 or np.max(np.abs(P0 - P0.T)) > 1e-8:
        raise ArithmeticError(f"level {level}: Phi(1/2) is not a symmetric involution (eigenvalues {ev})")
    k = int(np.sum(ev < 0))
    logA = sum(n * math.log(f) for f, _, n in chars) - sum(pp.slope for pp in phases) / 2.0
    return ScatteringDeterminant(level, h, chars, k, phases, float(logA))
