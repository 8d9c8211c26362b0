"""The congruence subgroup Gamma0(N): cosets, cusps, scaling matrices, Atkin--Lehner, pullback.

Sources for the group data (cited in the docstrings below):

* Shimura, *Introduction to the Arithmetic Theory of Automorphic Functions* (1971),
  §1.6 and Prop. 1.43 (index, elliptic points, genus);
* Diamond & Shurman, *A First Course in Modular Forms* (2005), §3.8 (cusps and widths),
  §3.9 (genus formula, epsilon_2, epsilon_3);
* Iwaniec, *Spectral Methods of Automorphic Forms* (2nd ed. 2002), §2.3 (scaling matrices);
* Atkin & Lehner, Math. Ann. 185 (1970) 134-160 (Atkin--Lehner matrices W_Q).

All matrix arithmetic is exact (Python ints for the tables, int64 with explicit range
checks for the vectorised pullback).
"""

from __future__ import annotations

import functools
import math
import numbers
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from maasscomp.arith import divisors, egcd, euler_phi, factorint, kronecker
from maasscomp.errors import ConvergenceError, InputError

from . import _arith
from ._arith import Mat, P1Index

_IDENTITY: Mat = ((1, 0), (0, 1))

# Above this size an int64 entry may overflow in the products formed by the pullback
# (entries are multiplied by tabulated matrices with entries <= ~N^2).
_INT_SAFE = 2**52
_CHUNK = 8192
_TOO_LOW = (
    "points with Im z down to {y:g} are too close to the real axis: the exact reducing "
    "matrices leave the int64 range (a double-precision point is only determined to "
    "relative ~1e-16/Im z there); supported: Im z >= 1e-12"
)


# ----------------------------------------------------------------------------------------
# Cusp
# ----------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Cusp:
    """One cusp of Gamma0(N) with its scaling matrix.

    Attributes
    ----------
    index : int
        Position in ``Gamma0.cusps``; 0 is always infinity.
    a, c : int
        The cusp is the fraction a/c with c | N and gcd(a, c) = 1 (Diamond & Shurman
        2005, Prop. 3.8.3: a runs over residues mod gcd(c, N/c)). Convention: infinity
        is labelled a = 1, c = N (1/N is Gamma0(N)-equivalent to infinity); the cusp 0 is
        a = 0, c = 1. For every other cusp ``A`` and ``scaling`` map infinity exactly
        onto a/c; for infinity they are the identity.
    width : int
        N / gcd(c^2, N) (Diamond & Shurman 2005, §3.8).
    A : ((int, int), (int, int))
        A matrix in SL2(Z) with A(infinity) = the cusp.
    scaling : ((int, int), (int, int))
        Integer matrix M with det M = d > 0 such that sigma = M / sqrt(d) is the scaling
        matrix: sigma(infinity) = the cusp and sigma^{-1} Gamma_cusp sigma =
        {+-[[1, n], [0, 1]]} (Iwaniec 2002, §2.3). For squarefree N, M = W_Q is the
        Atkin--Lehner matrix ``Gamma0.atkin_lehner(Q)`` with Q = width, so that an
        Atkin--Lehner eigenform satisfies f(sigma z) = eps_Q f(z). Otherwise
        M = A diag(width, 1) (d = width).
    atkin_lehner_Q : int or None
        For squarefree N the Q || N with W_Q(infinity) = this cusp (Q = width); None for
        non-squarefree N.
    """

    index: int
    a: int
    c: int
    width: int
    A: Mat
    scaling: Mat
    atkin_lehner_Q: int | None = None

    @property
    def scaling_det(self) -> int:
        """d = det M (sigma = M / sqrt(d))."""
        return _arith.det(self.scaling)

    @property
    def is_infinity(self) -> bool:
        return self.index == 0

    @property
    def representative(self) -> tuple[int, int]:
        """The cusp as a reduced point (a, c) of P^1(Q): (1, 0) is infinity, (0, 1) is 0."""
        if self.index == 0:
            return (1, 0)
        return (self.a, self.c)

    @property
    def name(self) -> str:
        """Canonical name of the cusp class: ``"inf"``, ``"0"`` or ``"a/c"``.

        For a cusp other than infinity and 0, c is the divisor of N with 1 < c < N whose
        class it is, and a is the least positive integer prime to c in the cusp's class
        of a modulo gcd(c, N/c) (Diamond & Shurman 2005, Prop. 3.8.3), so the name does not
        depend on the order of ``Gamma0.cusps``.
        """
        if self.index == 0:
            return "inf"
        if self.c == 1:
            return "0"
        return f"{self.a}/{self.c}"

    def apply_scaling(self, x: ArrayLike, y: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
        """Return (Re, Im) of sigma(x + i y) for the scaling matrix sigma = M / sqrt(d).

        The factor 1/sqrt(d) cancels in the Möbius action, so this is M(z).
        """
        z = np.asarray(x, dtype=float) + 1j * np.asarray(y, dtype=float)
        (a, b), (c, d) = self.scaling
        w = (a * z + b) / (c * z + d)
        return w.real, w.imag

    def apply_inverse_scaling(self, x: ArrayLike, y: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
        """Return (Re, Im) of sigma^{-1}(x + i y) = adj(M)(z)."""
        z = np.asarray(x, dtype=float) + 1j * np.asarray(y, dtype=float)
        (a, b), (c, d) = _arith.adjugate(self.scaling)
        w = (a * z + b) / (c * z + d)
        return w.real, w.imag


# ----------------------------------------------------------------------------------------
# Pullback result
# ----------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Pullback:
    """Result of :meth:`Gamma0.pullback` for points z = x + i y.

    For every input point z (array shape S):

    * ``gamma`` (S + (2, 2), int64) is in Gamma0(N) with det 1 (sign normalised so that
      the lower-left entry is > 0, or it is 0 and the lower-right entry is > 0);
    * ``cusp`` (S, int) is the index j of a cusp of ``Gamma0.cusps``;
    * ``x``, ``y`` (S, float) give w = x + i y with |x| <= 1/2 such that

          gamma z = sigma_j w,   sigma_j = M_j / sqrt(det M_j)  (M_j = cusps[j].scaling),

      i.e. w = sigma_j^{-1} gamma z. Among all gamma' in Gamma0(N) and all cusps k the
      pair (j, gamma) maximises Im(sigma_k^{-1} gamma' z), so y is the largest height
      of the orbit of z in any cusp coordinate, and y >= ``Gamma0.fundamental_domain_height``.

    Automorphy f(gamma z) = f(z) then gives, for a Maass form f on Gamma0(N),

          f(z) = f(sigma_j w) = sum_{n != 0} rho_j(n) sqrt(y) K_{iR}(2 pi |n| y) e(n x),

    the expansion of f at cusp j evaluated at w (docs/theory.md §1.2 step 4, Hejhal 1999).
    """

    gamma: np.ndarray
    cusp: np.ndarray
    x: np.ndarray
    y: np.ndarray


# ----------------------------------------------------------------------------------------
# Gamma0(N)
# ----------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class Gamma0:
    """The Hecke congruence group Gamma0(N) = {[[a, b], [c, d]] in SL2(Z) : N | c}.

    Construct with :func:`gamma0` (cached). N = 1 is the full modular group.

    Attributes
    ----------
    level : int
        N.
    index : int
        mu = [SL2(Z) : Gamma0(N)] = N prod_{p | N} (1 + 1/p) (Shimura 1971, §1.6).
    cusps : tuple of Cusp
        Infinity first, then 0, then the remaining cusps a/c ordered by (c, a).
    nu2, nu3 : int
        Numbers of elliptic points of order 2 and 3 (Shimura 1971, Prop. 1.43):
        nu2 = 0 if 4 | N else prod_{p | N} (1 + (-4/p)); nu3 = 0 if 9 | N else
        prod_{p | N} (1 + (-3/p)) (Kronecker symbols).
    genus : int
        g = 1 + mu/12 - nu2/4 - nu3/3 - n_cusps/2 (Diamond & Shurman 2005, Thm 3.1.1, §3.9).
    n_cusps : int
        sum_{c | N} phi(gcd(c, N/c)) (Diamond & Shurman 2005, §3.8).
    is_squarefree : bool
    primes : tuple of int
        The prime divisors of N.
    """

    level: int
    index: int = field(init=False)
    cusps: tuple[Cusp, ...] = field(init=False)
    nu2: int = field(init=False)
    nu3: int = field(init=False)
    genus: int = field(init=False)
    n_cusps: int = field(init=False)
    is_squarefree: bool = field(init=False)
    primes: tuple[int, ...] = field(init=False)
    _t: "_Tables" = field(init=False, repr=False)

    def __post_init__(self) -> None:
        N = _check_level(self.level)
        fac = factorint(N)
        primes = tuple(sorted(fac))
        mu = N
        for p in primes:
            mu = mu // p * (p + 1)
        if N % 4 == 0:
            nu2 = 0
        else:
            nu2 = math.prod(1 + kronecker(-4, p) for p in primes)
        if N % 9 == 0:
            nu3 = 0
        else:
            nu3 = math.prod(1 + kronecker(-3, p) for p in primes)
        n_cusps = sum(euler_phi(math.gcd(c, N // c)) for c in divisors(N))
        twelve_g = 12 + mu - 3 * nu2 - 4 * nu3 - 6 * n_cusps
        if twelve_g % 12:
            raise AssertionError(f"genus formula not integral for N={N}")
        sf = all(e == 1 for e in fac.values())
        tables = _Tables(N, sf, mu)
        if len(tables.cusps) != n_cusps:
            raise AssertionError(f"cusp count mismatch for N={N}")
        set_ = object.__setattr__
        set_(self, "level", N)
        set_(self, "index", mu)
        set_(self, "cusps", tables.cusps)
        set_(self, "nu2", nu2)
        set_(self, "nu3", nu3)
        set_(self, "genus", twelve_g // 12)
        set_(self, "n_cusps", n_cusps)
        set_(self, "is_squarefree", sf)
        set_(self, "primes", primes)
        set_(self, "_t", tables)

    # -- identity -----------------------------------------------------------------------

    def __eq__(self, other: object) -> bool:
        return isinstance(other, Gamma0) and other.level == self.level

    def __hash__(self) -> int:
        return hash(("Gamma0", self.level))

    def __repr__(self) -> str:
        return (
            f"Gamma0({self.level}): index {self.index}, {self.n_cusps} cusps, "
            f"nu2={self.nu2}, nu3={self.nu3}, genus {self.genus}"
        )

    # -- simple invariants --------------------------------------------------------------

    @property
    def area(self) -> float:
        """Hyperbolic area of Gamma0(N)\\H: pi mu / 3 (docs/theory.md §1.1)."""
        return math.pi * self.index / 3.0

    @functools.cached_property
    def fundamental_domain_height(self) -> float:
        """Y0: a certified lower bound for the height of every pulled-back point.

        For every z in H, ``self.pullback(z).y >= Y0`` (up to rounding in the last bit
        for N = 1); hence sample points at height Y < Y0 in any cusp coordinate are
        strictly raised by the pullback (docs/theory.md §1.3). N = 1: Y0 = sqrt(3)/2
        exactly (the corners of the standard domain). N > 1: the
        pulled-back height of a point is max over finitely many candidates
        y / (w |c z + d|^2) with z in the standard domain F1 (see
        :meth:`pullback`). A branch-and-bound over F1 x (cosets), with the lower bound
        y0 / (w max_corners |c z + d|^2) on each rectangle (|c z + d|^2 is convex),
        gives a lower bound within relative 1e-6 of the true minimum. It is always >=
        sqrt(3) / (2N), the elementary bound from the coset's own cusp (width <= N).
        """
        if self.level == 1:
            return math.sqrt(3.0) / 2.0
        from ._height import certified_min_height

        t = self._t
        lower = certified_min_height(t.cand.cd, t.cand.width, t.cand.relevant, rtol=1e-6)
        elementary = math.sqrt(3.0) / (2.0 * max(c.width for c in self.cusps))
        # the factor covers rounding in the pullback (relative ~1e-15) and its 1e-12 tie rule
        return max(lower * (1.0 - 1e-9), elementary)

    @property
    def Y0(self) -> float:
        """Alias of :attr:`fundamental_domain_height`."""
        return self.fundamental_domain_height

    # -- cosets -------------------------------------------------------------------------

    def coset_reps(self) -> np.ndarray:
        """Right coset representatives of Gamma0(N) \\ SL2(Z), shape (mu, 2, 2), int64.

        The representatives are A_j T^m (T = [[1, 1], [0, 1]]) for each cusp j (in the
        order of ``cusps``) and 0 <= m < width_j; the identity comes first. Two matrices
        lie in the same right coset iff their bottom rows agree in P^1(Z/NZ)
        (Diamond & Shurman 2005, §3.8).
        """
        return self._t.reps.copy()

    def coset_cusp(self) -> np.ndarray:
        """Cusp index attached to each coset representative (shape (mu,), int64)."""
        return self._t.rep_cusp.copy()

    def coset_index(self, M: ArrayLike) -> np.ndarray:
        """Index into :meth:`coset_reps` of the right coset Gamma0(N) M, M in SL2(Z)."""
        M = _as_int_matrices(M, "M")
        return self._t.coset_of(M[..., 1, 0], M[..., 1, 1])

    def contains(self, M: ArrayLike) -> bool | np.ndarray:
        """True where the integer matrix M (shape (..., 2, 2)) has det 1 and N | M[1, 0]."""
        M = _as_int_matrices(M, "M")
        det = M[..., 0, 0] * M[..., 1, 1] - M[..., 0, 1] * M[..., 1, 0]
        res = (det == 1) & (M[..., 1, 0] % self.level == 0)
        return bool(res) if res.ndim == 0 else res

    # -- Atkin--Lehner and reflection ---------------------------------------------------

    def exact_divisors(self) -> tuple[int, ...]:
        """The Q || N (Q | N and gcd(Q, N/Q) = 1), sorted."""
        N = self.level
        return tuple(Q for Q in divisors(N) if math.gcd(Q, N // Q) == 1)

    def atkin_lehner(self, Q: int) -> np.ndarray:
        """An Atkin--Lehner matrix W_Q = [[Q x, y], [N z, Q w]] with det W_Q = Q.

        (Atkin & Lehner 1970.) Choices: W_1 = identity, W_N = [[0, -1], [N, 0]]
        (Fricke), otherwise x = z = 1, i.e. W_Q = [[Q, y], [N, Q w]] with
        Q w - (N/Q) y = 1; then W_Q(infinity) = 1/(N/Q). For squarefree N this is the
        ``scaling`` matrix of the cusp of width Q.

        Raises
        ------
        InputError
            If Q is not an exact divisor of N.
        """
        return np.array(self._atkin_lehner_tuple(Q), dtype=np.int64)

    def _atkin_lehner_tuple(self, Q: Any) -> Mat:
        N = self.level
        if not _is_int(Q) or int(Q) < 1 or N % int(Q) or math.gcd(int(Q), N // int(Q)) != 1:
            raise InputError(
                f"Q={Q!r} is not an exact divisor of N={N}; allowed: {list(self.exact_divisors())}"
            )
        return _atkin_lehner_matrix(N, int(Q))

    @staticmethod
    def reflect(M: ArrayLike) -> np.ndarray:
        """J M J for J: z -> -conj(z), i.e. [[a, b], [c, d]] -> [[a, -b], [-c, d]].

        J normalises Gamma0(N) (docs/theory.md §1.1, common practice).
        """
        M = _as_int_matrices(M, "M").copy()
        M[..., 0, 1] *= -1
        M[..., 1, 0] *= -1
        return M

    # -- cusps --------------------------------------------------------------------------

    def cusp_of(self, a: int, c: int) -> int:
        """Index of the cusp Gamma0(N)-equivalent to the rational number a/c (c = 0: infinity)."""
        if not (_is_int(a) and _is_int(c)):
            raise InputError(f"cusp a/c needs integers, got a={a!r}, c={c!r}")
        a, c = int(a), int(c)
        if a == 0 and c == 0:
            raise InputError("cusp a/c = 0/0 is not a point of P^1(Q); give a != 0 or c != 0")
        g = math.gcd(a, c)
        a, c = a // g, c // g
        if c == 0:
            return 0
        (_, _), (cc, dd) = _arith.sl2_first_column(a, c)
        k = int(self._t.coset_of(np.int64(cc % self.level), np.int64(dd % self.level)))
        return int(self._t.rep_cusp[k])

    # -- pullback -----------------------------------------------------------------------

    def pullback(self, x: ArrayLike, y: ArrayLike) -> Pullback:
        """Map points z = x + i y into the fundamental domain, highest cusp first.

        Method (docs/theory.md §1.2 step 4 and §1.5): (1) reduce z into the standard
        domain F1 = {|Re| <= 1/2, |z| >= 1} of SL2(Z) by z -> z - round(Re z),
        z -> -1/z, accumulating the reducing matrix A exactly (int64); (2) with
        B = A^{-1}, z = A z_in lies in the translate B F1 of the Gamma0(N) domain; every
        candidate h in a finite list (bottom rows (c, d) with c^2 - |c d| + d^2 <= N)
        gives the point h A z_in in the coordinate of the cusp attached to the coset of
        B h^{-1}, at height Im(z) / (w |c z + d|^2); (3) keep the highest candidate. The
        list is complete: a candidate can beat (c, d) = (0, 1) only if
        |c z + d|^2 <= N, and |c z + d|^2 >= c^2 - |c d| + d^2 on F1. So y is the
        maximum of Im(sigma_k^{-1} gamma z) over gamma in Gamma0(N) and all cusps k.

        Parameters
        ----------
        x, y : array_like
            Real and imaginary parts (broadcast together); y > 0 and finite.

        Returns
        -------
        Pullback
            ``gamma``, ``cusp``, ``x``, ``y`` with gamma z = sigma_j w (see
            :class:`Pullback`); output arrays have the broadcast shape of the input.

        Notes
        -----
        The reducing matrices are exact; their entries grow like y^{-1/2} for generic x
        and up to y^{-1} for x near a rational with small denominator. The computed w
        inherits the conditioning of the map z -> gamma z: a rounding error of size
        2^-53 |z| in the input becomes a relative error of about 1e-16 |z|^2 / y in w,
        i.e. ~1e-10 at y = 1e-6, ~1e-5 at y = 1e-12 (measured against exact rational
        arithmetic). Below that the double-precision input no longer determines the
        point; when the matrices would leave the exact int64 range (possible from
        y ~ 1e-13 on, or |x| above ~1e15) InputError is raised.
        """
        return _pullback(self, x, y)


# ----------------------------------------------------------------------------------------
# Tables built once per level
# ----------------------------------------------------------------------------------------


class _Tables:
    """Exact tables for one level: cusps, coset reps, pullback candidates."""

    def __init__(self, N: int, squarefree: bool, mu: int) -> None:
        self.N = N
        self.p1 = P1Index(N)
        if self.p1.size != mu:
            raise AssertionError(f"P^1(Z/{N}Z) has {self.p1.size} elements, expected {mu}")
        self.cusps = self._make_cusps(N, squarefree)
        self._make_cosets(N, mu)
        self.scal = np.array([c.scaling for c in self.cusps], dtype=np.int64)
        self.scal_det = np.array([c.scaling_det for c in self.cusps], dtype=np.int64)
        self.mmax = int(np.abs(self.scal).max())

    # cusps ------------------------------------------------------------------------------
    @staticmethod
    def _cusp_labels(N: int) -> list[tuple[int, int]]:
        """(a, c) with c | N, a mod gcd(c, N/c) a unit, lifted with gcd(a, c) = 1."""
        labels = []
        for c in divisors(N):
            if c == N:
                labels.append((1, N))
                continue
            g = math.gcd(c, N // c)
            for a0 in range(g):
                if math.gcd(a0, g) != 1:
                    continue
                if c == 1:
                    a = 0
                else:
                    a = a0 if a0 > 0 else g
                    while math.gcd(a, c) != 1:
                        a += g
                labels.append((a, c))
        return labels

    def _make_cusps(self, N: int, squarefree: bool) -> tuple[Cusp, ...]:
        labels = self._cusp_labels(N)

        def key(ac: tuple[int, int]) -> tuple[int, int, int]:
            a, c = ac
            if c == N:
                return (0, 0, 0)
            if c == 1:
                return (1, 0, 0)
            return (2, c, a)

        labels.sort(key=key)
        if N == 1:
            labels = [(1, 1)]
        cusps = []
        for j, (a, c) in enumerate(labels):
            width = N // math.gcd(c * c, N)
            if j == 0:
                A = _IDENTITY
            else:
                A = _arith.sl2_first_column(a, c)
            if squarefree:
                Q = width
                M = _IDENTITY if j == 0 else _atkin_lehner_matrix(N, Q)
                if j != 0 and M[0][0] * c != M[1][0] * a:
                    raise AssertionError(f"W_{Q}(inf) != {a}/{c} for N={N}")
                alq: int | None = Q
            else:
                M = _arith.matmul(A, ((width, 0), (0, 1)))
                alq = None
            cusps.append(Cusp(j, a, c, width, A, M, alq))
        return tuple(cusps)

    # cosets -----------------------------------------------------------------------------
    def _make_cosets(self, N: int, mu: int) -> None:
        reps = []
        rep_cusp = []
        E = []  # adj(M_j) R_k: upper triangular, maps R_k z into cusp coordinates
        perm = np.full(mu, -1, dtype=np.int64)
        for cusp in self.cusps:
            A = cusp.A
            adjM = _arith.adjugate(cusp.scaling)
            seen = []
            for m in range(cusp.width):
                R = _arith.matmul(A, ((1, m), (0, 1)))
                idx = int(self.p1(np.int64(R[1][0] % N), np.int64(R[1][1] % N)))
                if perm[idx] != -1:
                    raise AssertionError(f"coset listed twice for N={N} (cusp {cusp})")
                perm[idx] = len(reps)
                seen.append(idx)
                reps.append(R)
                rep_cusp.append(cusp.index)
                e = _arith.matmul(adjM, R)
                if e[1][0] != 0:
                    raise AssertionError(f"scaling matrix of {cusp} does not fix A(inf)")
                if e[1][1] < 0:
                    e = ((-e[0][0], -e[0][1]), (0, -e[1][1]))
                E.append(e)
            # the orbit of (c : d) under d -> d + c closes after exactly `width` steps
            R = _arith.matmul(A, ((1, cusp.width), (0, 1)))
            if int(self.p1(np.int64(R[1][0] % N), np.int64(R[1][1] % N))) != seen[0]:
                raise AssertionError(f"width of {cusp} is not the orbit length")
        if (perm < 0).any():
            raise AssertionError(f"cosets not covered by the cusp translates for N={N}")
        self.perm = perm
        self.reps = np.array(reps, dtype=np.int64).reshape(mu, 2, 2)
        self.reps.setflags(write=False)
        self.rep_cusp = np.array(rep_cusp, dtype=np.int64)
        self.rep_cusp.setflags(write=False)
        self.E = E

    def coset_of(self, c: np.ndarray, d: np.ndarray) -> np.ndarray:
        return self.perm[self.p1(c, d)]

    # pullback candidates -----------------------------------------------------------------
    @functools.cached_property
    def cand(self) -> "_Candidates":
        return _Candidates(self)


class _Candidates:
    """Pullback candidates h_s (bottom rows (c, d) with c^2 - |c d| + d^2 <= N).

    For coset k and candidate s: the cusp j reached (the cusp of the coset of R_k h_s^{-1}),
    its width, and C = E_k' h_s, the integer matrix taking z in F1 into that cusp's
    coordinate (det C = det M_j). Built lazily: only the pullback and Y0 need it.
    """

    def __init__(self, t: _Tables) -> None:
        N = t.N
        bound = math.isqrt(2 * N) + 1
        cand = [(0, 1)]
        for c in range(1, bound + 1):
            for d in range(-bound, bound + 1):
                if math.gcd(c, d) == 1 and c * c - abs(c * d) + d * d <= N:
                    cand.append((c, d))
        # nearest candidates first (ties in argmax go to the earlier one)
        cand[1:] = sorted(cand[1:], key=lambda cd: (cd[0] ** 2 - abs(cd[0] * cd[1]) + cd[1] ** 2, cd))
        H = np.array([_arith.sl2_bottom_row(c, d) for c, d in cand], dtype=np.int64)  # (S,2,2)
        Hadj = np.empty_like(H)
        Hadj[:, 0, 0], Hadj[:, 1, 1] = H[:, 1, 1], H[:, 0, 0]
        Hadj[:, 0, 1], Hadj[:, 1, 0] = -H[:, 0, 1], -H[:, 1, 0]
        R = t.reps
        # bottom row of R_k h_s^{-1}
        bot = np.einsum("ki,sij->ksj", R[:, 1, :], Hadj)
        kk = t.coset_of(bot[..., 0], bot[..., 1])  # (mu, S)
        E = np.array(t.E, dtype=np.int64)
        self.cd = np.array(cand, dtype=float)
        self.cusp = t.rep_cusp[kk]
        self.width = np.array([c.width for c in t.cusps], dtype=float)[self.cusp]
        self.C = np.einsum("ksij,sjl->ksil", E[kk], H)
        self.Cf = self.C.astype(float)
        self.cmax = int(np.abs(self.C).max())
        # candidate s can beat s = 0 on F1 only if (c^2 - |c d| + d^2) w[k, s] <= w[k, 0]
        # (|c z + d|^2 >= c^2 - |c d| + d^2 for |z| >= 1, |Re z| <= 1/2); the 1e-9 keeps ties
        cd = np.array(cand, dtype=np.int64)
        lower = (cd[:, 0] ** 2 - np.abs(cd[:, 0] * cd[:, 1]) + cd[:, 1] ** 2).astype(float)
        ok = lower[None, :] * self.width <= self.width[:, :1] * (1 + 1e-9)
        ok[:, 0] = True
        self.relevant = [np.flatnonzero(row) for row in ok]


# ----------------------------------------------------------------------------------------
# Pullback kernel
# ----------------------------------------------------------------------------------------


def _reduce_sl2z(x: np.ndarray, y: np.ndarray, maxit: int = 10_000):
    """Reduce points into F1; return the exact reducing matrix entries and A z.

    The loop is the classical one (docs/theory.md §1.2): translate by round(Re z), invert
    when |z| < 1. The inversion test uses 1 - 1e-13 so that points on the unit circle,
    where rounding could make -1/z fall back inside, cannot cycle.
    """
    n = x.shape[0]
    a = np.ones(n, dtype=np.int64)
    b = np.zeros(n, dtype=np.int64)
    c = np.zeros(n, dtype=np.int64)
    d = np.ones(n, dtype=np.int64)
    zx = x.copy()
    zy = y.copy()
    # the first translation may be large; do it exactly once for all points
    t = np.rint(zx)
    if np.abs(t).max(initial=0.0) >= _INT_SAFE:
        raise InputError(f"Re z up to {np.abs(x).max():g} is too large for exact int64 reduction")
    zx -= t
    b -= t.astype(np.int64)
    r2 = zx * zx + zy * zy
    idx = np.flatnonzero(r2 < 1.0 - 1e-13)
    it = 0
    while idx.size:
        it += 1
        if it > maxit:
            raise ConvergenceError(
                f"SL2(Z) reduction did not finish after {maxit} steps for {idx.size} points",
                best=idx,
            )
        # invert
        r = r2[idx]
        zxi = -zx[idx] / r
        zyi = zy[idx] / r
        ai, bi, ci, di = a[idx], b[idx], c[idx], d[idx]
        # S A with S = [[0, -1], [1, 0]]
        ai, bi, ci, di = -ci, -di, ai, bi
        # translate
        t = np.rint(zxi)
        zxi -= t
        ti = t.astype(np.int64)
        ai = ai - ti * ci
        bi = bi - ti * di
        if np.abs(ai).max() > _INT_SAFE or np.abs(bi).max() > _INT_SAFE:
            raise InputError(_TOO_LOW.format(y=y.min()))
        a[idx], b[idx], c[idx], d[idx] = ai, bi, ci, di
        zx[idx] = zxi
        zy[idx] = zyi
        r2i = zxi * zxi + zyi * zyi
        r2[idx] = r2i
        idx = idx[r2i < 1.0 - 1e-13]
    return a, b, c, d


def _best_candidate(cand: _Candidates, k: np.ndarray, zx: np.ndarray, zy: np.ndarray) -> np.ndarray:
    """Index s of the highest candidate for points z = zx + i zy in F1 with cosets k.

    Points are grouped by coset so that only the candidates that can beat the coset's
    own cusp are evaluated (``cand.relevant``), and no (n, S) temporaries are formed.
    """
    n = k.shape[0]
    s = np.zeros(n, dtype=np.int64)
    if cand.cd.shape[0] == 1 or n == 0:
        return s
    order = np.argsort(k, kind="stable")
    counts = np.bincount(k, minlength=len(cand.relevant))
    stops = np.cumsum(counts)
    for kk in np.flatnonzero(counts):
        rel = cand.relevant[kk]
        if rel.size == 1:
            continue
        idx = order[stops[kk] - counts[kk] : stops[kk]]
        cc = cand.cd[rel, 0]
        dd = cand.cd[rel, 1]
        zxi = zx[idx, None]
        zyi = zy[idx, None]
        qx = cc * zxi + dd
        qy = cc * zyi
        h = 1.0 / ((qx * qx + qy * qy) * cand.width[kk, rel])
        # prefer the coset's own cusp unless another candidate is genuinely higher
        h[:, 0] *= 1.0 + 1e-12
        s[idx] = rel[np.argmax(h, axis=1)]
    return s


def _pullback(G: Gamma0, x: ArrayLike, y: ArrayLike) -> Pullback:
    xa = np.asarray(x, dtype=float)
    ya = np.asarray(y, dtype=float)
    try:
        xb, yb = np.broadcast_arrays(xa, ya)
    except ValueError as exc:
        raise InputError(f"x and y have incompatible shapes {xa.shape} and {ya.shape}") from exc
    shape = xb.shape
    xf = np.ascontiguousarray(xb, dtype=float).ravel()
    yf = np.ascontiguousarray(yb, dtype=float).ravel()
    bad = ~(np.isfinite(xf) & np.isfinite(yf) & (yf > 0))
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise InputError(
            f"pullback needs finite points in the upper half plane; got z = {xf[i]!r} + {yf[i]!r}i"
        )
    n_pts = xf.shape[0]
    gam = np.empty((n_pts, 4), dtype=np.int64)
    j = np.empty(n_pts, dtype=np.int64)
    wx = np.empty(n_pts)
    wy = np.empty(n_pts)
    # chunks keep the temporaries in cache (measured: ~1.5x faster at 1e5 points)
    for lo in range(0, n_pts, _CHUNK):
        sl = slice(lo, min(lo + _CHUNK, n_pts))
        gam[sl], j[sl], wx[sl], wy[sl] = _pullback_core(G._t, xf[sl], yf[sl])
    return Pullback(
        gamma=gam.reshape(shape + (2, 2)),
        cusp=j.reshape(shape),
        x=wx.reshape(shape),
        y=wy.reshape(shape),
    )


def _pullback_core(t: _Tables, xf: np.ndarray, yf: np.ndarray):
    cand = t.cand
    a, b, c, d = _reduce_sl2z(xf, yf)
    # z = A w recomputed from the input with the exact matrix (keeps gamma and w consistent)
    cf, df = c.astype(float), d.astype(float)
    den_re = cf * xf + df
    den_im = cf * yf
    den2 = den_re * den_re + den_im * den_im
    af, bf = a.astype(float), b.astype(float)
    num_re = af * xf + bf
    zx = (num_re * den_re + af * yf * den_im) / den2
    zy = yf / den2
    # coset of B = A^{-1} = [[d, -b], [-c, a]]
    k = t.coset_of(-c, a)
    s = _best_candidate(cand, k, zx, zy)
    C = cand.C[k, s]  # (n, 2, 2)
    Cf = cand.Cf[k, s]
    j = cand.cusp[k, s]
    # w* = C z (Möbius); C = E_k' h is upper triangular times h, det = det M_j
    c00, c01, c10, c11 = Cf[:, 0, 0], Cf[:, 0, 1], Cf[:, 1, 0], Cf[:, 1, 1]
    dre = c10 * zx + c11
    dim = c10 * zy
    dn2 = dre * dre + dim * dim
    nre = c00 * zx + c01
    detC = t.scal_det[j].astype(float)
    wx = (nre * dre + c00 * zy * dim) / dn2
    wy = detC * zy / dn2
    n = np.rint(wx)
    wx -= n
    ni = n.astype(np.int64)
    # gamma = M_j T^{-n} C A / det M_j  (exact; in Gamma0(N), see module notes)
    amax = max(int(np.abs(a).max()), int(np.abs(b).max()), int(np.abs(c).max()), int(np.abs(d).max()))
    if 8 * cand.cmax * amax * t.mmax * (1 + int(np.abs(ni).max(initial=0))) >= 2**62:
        raise InputError(_TOO_LOW.format(y=yf.min()))
    F00 = C[:, 0, 0] * a + C[:, 0, 1] * c
    F01 = C[:, 0, 0] * b + C[:, 0, 1] * d
    F10 = C[:, 1, 0] * a + C[:, 1, 1] * c
    F11 = C[:, 1, 0] * b + C[:, 1, 1] * d
    F00 = F00 - ni * F10
    F01 = F01 - ni * F11
    M = t.scal[j]
    D = t.scal_det[j]
    g00 = M[:, 0, 0] * F00 + M[:, 0, 1] * F10
    g01 = M[:, 0, 0] * F01 + M[:, 0, 1] * F11
    g10 = M[:, 1, 0] * F00 + M[:, 1, 1] * F10
    g11 = M[:, 1, 0] * F01 + M[:, 1, 1] * F11
    gam = np.stack([g00, g01, g10, g11], axis=-1)
    if (gam % D[:, None]).any():
        raise AssertionError("pullback matrix not integral (internal error)")
    gam //= D[:, None]
    neg = (gam[:, 2] < 0) | ((gam[:, 2] == 0) & (gam[:, 3] < 0))
    gam[neg] *= -1
    return gam, j, wx, wy


# ----------------------------------------------------------------------------------------
# helpers
# ----------------------------------------------------------------------------------------


def _atkin_lehner_matrix(N: int, Q: int) -> Mat:
    if Q == 1:
        return _IDENTITY
    if Q == N:
        return ((0, -1), (N, 0))
    c = N // Q
    # [[Q, y], [N, Q w]], det = Q (Q w - c y) = Q
    g, w, yy = egcd(Q, c)
    if g != 1:
        raise AssertionError(f"Q={Q} not exact in N={N}")
    return ((Q, -yy), (N, Q * w))


def _is_int(v: Any) -> bool:
    return isinstance(v, numbers.Integral) and not isinstance(v, bool)


def _check_level(N: Any) -> int:
    if not _is_int(N) or int(N) < 1:
        raise InputError(f"level N={N!r} is not allowed; N must be an integer >= 1")
    return int(N)


def _as_int_matrices(M: ArrayLike, name: str) -> np.ndarray:
    arr = np.asarray(M)
    if arr.shape[-2:] != (2, 2):
        raise InputError(f"{name} must have shape (..., 2, 2), got {arr.shape}")
    if arr.dtype.kind in "iu":
        return arr.astype(np.int64)
    if arr.dtype.kind == "f" and np.all(np.isfinite(arr)) and np.all(arr == np.round(arr)):
        return arr.astype(np.int64)
    if arr.dtype == object:
        try:
            return arr.astype(np.int64)
        except (TypeError, OverflowError) as exc:
            raise InputError(f"{name} must be an integer matrix") from exc
    raise InputError(f"{name} must be an integer matrix, got dtype {arr.dtype}")


@functools.lru_cache(maxsize=None)
def _gamma0_cached(N: int) -> Gamma0:
    return Gamma0(N)


def gamma0(N: int) -> Gamma0:
    """The group Gamma0(N) (cached per level).

    Raises
    ------
    InputError
        If N is not an integer >= 1.
    """
    return _gamma0_cached(_check_level(N))
