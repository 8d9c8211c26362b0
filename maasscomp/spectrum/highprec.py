"""High-precision refinement of a Maass cusp form by Hejhal's method in ball arithmetic.

Given a double-precision eigenvalue R0 and the parity of a form, the real cos/sin version
of Hejhal's linear system (D. A. Hejhal, Mem. AMS 97 (1992) no. 469; docs/theory.md §1.2
item 6) is solved at two horocycle heights Y1 != Y2 in multiprecision (python-flint, i.e.
arb), and R is refined by the secant method on

    H(R) = a_2(R; Y1) - a_2(R; Y2),

which vanishes at an eigenvalue (the coefficients of a true eigenfunction do not depend
on Y; Hejhal 1992, and A. Booker, A. Strömbergsson, A. Venkatesh, IMRN 2006, Art. ID
71281, §2).  The working precision is raised along a ladder (about doubling the number of
digits per stage) so that most secant steps are cheap.

Levels:

* 1 (PSL(2,Z)) and every squarefree N with an Atkin-Lehner class (eps_p)_{p | N}: every
  cusp is W_Q(infinity) with scaling matrix W_Q/sqrt(Q), so f(sigma_j w) = eps_Q f(w) and one
  expansion (at infinity) is unknown, exactly as in the double-precision one-cusp system
  (docs/theory.md §1.5).  For every sample point the pullback gives an exact integer matrix
  g = adj(W_Q) gamma (determinant Q) and the sign eps_Q.
* every N in a parity class (no Atkin-Lehner signs): the multi-cusp system of
  ``hejhal/multicusp.py`` in ball arithmetic (:class:`_MultiSystem`), one expansion per
  cusp or pair of cusps swapped by J.  It needs a simple eigenvalue in the parity class
  (a multiplicity m > 1, e.g. oldforms, leaves the normalised system singular), and it is
  several times slower than the one-cusp system: the cost is dominated by the M0 x (number
  of sample points) K-Bessel values per height.

Every K-Bessel value is K~_R(x) = e^{pi R/2} K_{iR}(x) (the common factor e^{-pi R/2}
cancels from the homogeneous system), evaluated by arb's ``acb.bessel_k`` with a
rigorous error ball whose radius is checked.  The linear algebra uses ball midpoints
(error control is by the two-Y comparison and the truncation rule, not by ball
arithmetic), so the error figures returned are *estimates*.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field
from fractions import Fraction
from typing import Callable

import numpy as np
from flint import acb, arb, arb_mat, ctx

from maasscomp.arith import factorint
from maasscomp.errors import ConvergenceError, InputError

__all__ = ["HighPrecisionForm", "refine_high_precision", "extend_coefficients"]

_LN10 = math.log(10.0)


# --------------------------------------------------------------------------- level data


def _pullback_level1(x: float, y: float) -> tuple[tuple[int, int, int, int], int]:
    """Integer matrix g in SL2(Z) with g(x + iy) in the standard fundamental domain.

    The reduction x -> x - round(x), z -> -1/z while |z| < 1 (common practice; formulas
    ref. §1.2) is run in double precision only to *choose* g; the image point is then
    computed exactly in ball arithmetic from g.  Any g in SL2(Z) is correct by
    automorphy, so rounding ties do not matter.  The sign is +1 (no character).
    """
    a, b, c, d = 1, 0, 0, 1
    for _ in range(1000):
        n = math.floor(x + 0.5)
        x -= n
        # T^{-n} g
        a, b = a - n * c, b - n * d
        if x * x + y * y < 1.0 - 1e-15:
            r = x * x + y * y
            x, y = -x / r, y / r
            # S g with S = [[0, -1], [1, 0]]
            a, b, c, d = -c, -d, a, b
        else:
            return (a, b, c, d), 1
    raise ConvergenceError(f"pullback of {x} + i{y} did not terminate")  # pragma: no cover


@dataclass(frozen=True)
class _Level:
    Y0: float  # lowest height of the fundamental domain used by the pullback
    pullback: Callable[[float, float], tuple[tuple[int, int, int, int], int]] | None
    Y_fracs: tuple[Fraction, Fraction]  # Y1, Y2 as fractions of Y0 (exact rationals)
    h_indices: tuple[int, ...]  # n of H_n(R) = a_n(Y1) - a_n(Y2): first drives the secant
    group: object = None  # Gamma0(N) for the multi-cusp system (pullback is None then)

    @property
    def multi(self) -> bool:
        return self.pullback is None


def _coprime_indices(level: int, count: int = 4) -> tuple[int, ...]:
    """The first ``count`` integers n >= 2 prime to N.

    For a newform a(p) = -eps_p/sqrt(p) (p | N) is fixed by the class, so H_p carries less
    information about R; indices prime to N avoid that (at level 1: 2, 3, 4, 5).
    """
    out, n = [], 2
    while len(out) < count:
        if math.gcd(n, level) == 1:
            out.append(n)
        n += 1
    return tuple(out)


def _squarefree_pullback(level: int, signs: tuple[tuple[int, int], ...]):
    """Pullback of Gamma0(N), N squarefree, for the Atkin-Lehner class ``signs``.

    ``Gamma0.pullback`` gives gamma in Gamma0(N) and the cusp j with gamma z = sigma_j w,
    sigma_j = W_Q / sqrt(Q) (docs/theory.md §1.1).  Then w = adj(W_Q) gamma z with the
    integer matrix adj(W_Q) gamma of determinant Q, and f(z) = f(W_Q w) = eps_Q f(w).
    The double-precision pullback only chooses g; the image is recomputed exactly in ball
    arithmetic from g, and any g that raises the point is correct by automorphy.
    """
    from maasscomp.groups import gamma0

    G = gamma0(level)
    eps = dict(signs)

    def sign_of(Q: int) -> int:
        s = 1
        for p, e in eps.items():
            if Q % p == 0:
                s *= e
        return s

    def pull(x: float, y: float) -> tuple[tuple[int, int, int, int], int]:
        pb = G.pullback(np.array([x]), np.array([y]))
        j = int(np.asarray(pb.cusp).ravel()[0])
        g = np.asarray(pb.gamma).reshape(2, 2).astype(object)
        (a, b), (c, d) = G.cusps[j].scaling
        adj = np.array([[d, -b], [-c, a]], dtype=object)
        m = adj.dot(g)
        Q = G.cusps[j].atkin_lehner_Q
        return (int(m[0, 0]), int(m[0, 1]), int(m[1, 0]), int(m[1, 1])), sign_of(int(Q))

    return G.fundamental_domain_height, pull


@functools.lru_cache(maxsize=64)
def _level_data(level: int, al_signs: tuple[tuple[int, int], ...]) -> _Level:
    """Level data for (level, Atkin-Lehner class); cached by the full key."""
    fracs = (Fraction(4, 5), Fraction(18, 25))
    if level == 1:
        return _Level(math.sqrt(3) / 2, _pullback_level1, fracs, _coprime_indices(1))
    if al_signs:
        Y0, pull = _squarefree_pullback(level, al_signs)
        return _Level(Y0, pull, fracs, _coprime_indices(level))
    from maasscomp.groups import gamma0

    G = gamma0(level)
    return _Level(G.fundamental_domain_height, None, fracs, _coprime_indices(level), G)


def _check_level_signs(level: int, al_signs) -> tuple[tuple[int, int], ...]:
    """Validate the level and the Atkin-Lehner class; return the signs as sorted pairs."""
    fac = factorint(int(level))
    if any(e > 1 for e in fac.values()):
        if al_signs is not None:
            raise InputError(
                f"al_signs {al_signs!r} is not allowed at level {level}: it is not squarefree, so "
                f"the refinement uses the multi-cusp system of a parity class (give al_signs=None)"
            )
        return ()
    primes = sorted(fac)
    if al_signs is None:
        # level 1, or the multi-cusp system of a parity class at a squarefree level
        return ()
    try:
        pairs = dict(al_signs).items() if not isinstance(al_signs, dict) else al_signs.items()
        signs = tuple(sorted((int(p), int(e)) for p, e in pairs))
    except (TypeError, ValueError) as exc:
        raise InputError(f"al_signs {al_signs!r} is not allowed; give {{p: +1 or -1}} for p in {primes}") from exc
    if [p for p, _ in signs] != primes or any(e not in (1, -1) for _, e in signs):
        raise InputError(f"al_signs {al_signs!r} is not allowed; give one sign +1 or -1 for each prime in {primes}")
    return signs


# --------------------------------------------------------------------------- K-Bessel


def _kt(R: arb, x: arb, prec: int) -> arb:
    """K~_R(x) = e^{pi R/2} K_{iR}(x) to absolute accuracy about 2^-prec (arb, DLMF 10.25).

    Absolute, not relative, accuracy is asked for: every entry of Hejhal's system is
    compared with O(1) entries (max_y sqrt(y)|K~_R(2 pi y)| ~ 0.85 R^{1/6}, docs/theory.md §3.3), and tiny
    values far beyond the turning point would otherwise need twice the precision.  The
    cancellation inside K_{iR}(x) for x < R costs about pi R/(2 ln 2) bits (docs/theory.md
    §4.3); the working precision is raised until the radius is small enough.
    """
    # inputs are taken as exact midpoints: their own rounding is far below 2^-prec
    R = R.mid()
    x = x.mid()
    extra = int(1.6 * float(R)) + 32
    tol = arb(2) ** (-(prec - 8))
    for _ in range(6):
        with ctx.workprec(prec + extra):
            v = (acb(x).bessel_k(acb(0, R))).real * (arb.pi() * R / 2).exp()
        if v.rad() <= tol:
            return v.mid()
        extra *= 2
    raise ConvergenceError(f"K-Bessel at x={x} R={R} not accurate at {prec} bits")


def _kt_upper_bound_log(R: float, x: float) -> float:
    """log of a rigorous upper bound of |K~_R(x)|.

    |K_{iR}(x)| <= K_0(x) < sqrt(pi/(2x)) e^{-x} (DLMF 10.32.9 with |cos(Rt)| <= 1,
    and DLMF 10.40.10's bound of the K_0 remainder), hence
    |K~_R(x)| < e^{pi R/2} sqrt(pi/(2x)) e^{-x}.
    """
    return math.pi * R / 2 + 0.5 * math.log(math.pi / (2 * x)) - x


# --------------------------------------------------------------------------- the system


def _truncation_M(R: arb, Y: arb, eps_log: float, prec: int) -> int:
    """Smallest M beyond the turning point with sqrt(Y) K~_R(2 pi m Y) m^{1/2} < eps for m >= M.

    The factor m^{1/2} is a safety margin for the coefficient size (|a(n)| <= d(n)
    n^{7/64}; docs/theory.md §1.3).  K~ decreases monotonically beyond the turning
    point x = R, so the first M that passes is the truncation.
    """
    Rf = float(R.mid())
    Yf = float(Y.mid())
    m = max(1, int(math.ceil(Rf / (2 * math.pi * Yf))))
    twopi = 2 * arb.pi()
    while True:
        x = twopi * m * Y
        v = abs(float(_kt(R, x, 64))) if _kt_upper_bound_log(Rf, float(x.mid())) > eps_log - 60 else 0.0
        val = math.sqrt(Yf) * v * math.sqrt(m)
        if val == 0.0 or math.log(val) < eps_log:
            return m
        m += 1


class _System:
    """Hejhal's real system at one height Y for fixed (level, parity, M0, Q, precision).

    Sample points z_m = x_m + iY, x_m = (m - 1/2)/(2Q), m = 1..Q (docs/theory.md §1.2
    item 6); inversion a(n) sqrt(Y) K~(2 pi n Y) = (2/Q) sum_m f(z_m) cs(2 pi n x_m) for
    n <= M0 < Q, with f(z_m) = f(g z_m) expanded at the pulled-back point.
    """

    def __init__(
        self, lev: _Level, parity: str, Y: Fraction, M0: int, Q: int, prec: int, eps_log: float
    ) -> None:
        self.parity, self.M0, self.Q, self.prec = parity, M0, Q, prec
        self.eps_log = eps_log
        self.Yq = Y
        cs = "cos" if parity == "even" else "sin"
        with ctx.workprec(prec):
            self.Y = arb(Y.numerator) / Y.denominator
            twopi = 2 * arb.pi()
            self.pts = []  # (x*, y*, sign) in arb
            for m in range(1, Q + 1):
                xm = Fraction(2 * m - 1, 4 * Q)
                (a, b, c, d), sgn = lev.pullback(float(xm), float(Y))
                # g z = (a z + b)/(c z + d) computed exactly from rationals; Im(g z) =
                # det(g) Im z / |c z + d|^2 (det g = 1 at level 1, Q for W_Q at level N)
                xr = arb(xm.numerator) / xm.denominator
                den = (c * xr + d) ** 2 + (c * self.Y) ** 2
                ys = (a * d - b * c) * self.Y / den
                xs = (a * c * (xr * xr + self.Y * self.Y) + (a * d + b * c) * xr + b * d) / den
                if not float(ys.mid()) > float(Y):
                    raise ConvergenceError(  # pragma: no cover - guarded by Y < Y0
                        f"pullback of sample point {m} did not raise its height"
                    )
                self.pts.append((xs, ys, sgn))
            # C[m, n] = cs(2 pi n x_m)
            rows = []
            for m in range(1, Q + 1):
                ang = twopi * arb(2 * m - 1) / (4 * Q)
                rows.append([getattr(ang * n, cs)() for n in range(1, M0 + 1)])
            self.C = arb_mat(rows)
        self.cs = cs

    def matrix(self, R: arb) -> arb_mat:
        """V_{nl} - delta_{nl} sqrt(Y) K~(2 pi n Y), size M0 x M0 (ball midpoints)."""
        M0, Q, prec = self.M0, self.Q, self.prec
        Rf = float(R.mid())
        with ctx.workprec(prec):
            twopi = 2 * arb.pi()
            Brows = []
            for xs, ys, sgn in self.pts:
                row = []
                yf = float(ys.mid())
                sq = ys.sqrt()
                for l in range(1, M0 + 1):
                    xx = twopi * l * ys
                    # terms below eps * 1e-10 are dropped; rigorous bound, see _kt_upper_bound_log
                    if _kt_upper_bound_log(Rf, 2 * math.pi * l * yf) < self.eps_log - 23:
                        row.extend([arb(0)] * (M0 - l + 1))
                        break
                    k = _kt(R, xx, prec)
                    row.append(sgn * sq * k * getattr(twopi * l * xs, self.cs)())
                Brows.append(row)
            B = arb_mat(Brows)
            V = (self.C.transpose() * B) * (arb(2) / Q)
            sY = self.Y.sqrt()
            for n in range(1, M0 + 1):
                V[n - 1, n - 1] = V[n - 1, n - 1] - sY * _kt(R, twopi * n * self.Y, prec)
            return V.mid()

    def solve(self, R: arb) -> list[arb]:
        """Coefficients a(1..M0) with a(1) = 1 (row n = 1 dropped)."""
        A = self.matrix(R)
        M0 = self.M0
        with ctx.workprec(self.prec):
            red = arb_mat([[A[i, j] for j in range(1, M0)] for i in range(1, M0)])
            rhs = arb_mat([[-A[i, 0]] for i in range(1, M0)])
            sol = red.solve(rhs, algorithm="approx")
            return [arb(1)] + [sol[i, 0].mid() for i in range(M0 - 1)]


def _pull_exact(G, Mk, z: Fraction, Y: Fraction) -> tuple[arb, arb, int]:
    """Pulled-back point of z + iY (coordinates of the cusp with scaling matrix Mk).

    The double-precision ``Gamma0.pullback`` of the physical point Mk(z + iY) chooses gamma
    and the cusp l; w = g(z + iY) with the integer matrix g = adj(M_l) gamma Mk is then
    computed exactly in ball arithmetic (Im(g z) = det(g) Im z / |c z + d|^2).
    """
    (m00, m01), (m10, m11) = Mk
    zc = complex(float(z), float(Y))
    P = (m00 * zc + m01) / (m10 * zc + m11)
    pb = G.pullback(np.array([P.real]), np.array([P.imag]))
    l = int(np.asarray(pb.cusp).ravel()[0])
    gam = [[int(v) for v in row] for row in np.asarray(pb.gamma).reshape(2, 2)]
    (a, b), (c, d) = G.cusps[l].scaling
    adj = [[d, -b], [-c, a]]
    Mm = ((m00, m01), (m10, m11))
    g1 = [[sum(gam[i][r] * Mm[r][j] for r in range(2)) for j in range(2)] for i in range(2)]
    g = [[sum(adj[i][r] * g1[r][j] for r in range(2)) for j in range(2)] for i in range(2)]
    (ga, gb), (gc, gd) = g
    det = ga * gd - gb * gc
    xr = arb(z.numerator) / z.denominator
    Yr = arb(Y.numerator) / Y.denominator
    den = (gc * xr + gd) ** 2 + (gc * Yr) ** 2
    ys = det * Yr / den
    xs = (ga * gc * (xr * xr + Yr * Yr) + (ga * gd + gb * gc) * xr + gb * gd) / den
    if not float(ys.mid()) > float(Y):
        raise ConvergenceError("pullback of a sample point did not raise its height")  # pragma: no cover
    return xs, ys, l


class _MultiSystem:
    """Multi-cusp real system of one parity class in ball arithmetic (any level N).

    The real reduction of ``hejhal/multicusp.py`` (docs/theory.md §1.2 items 1-6): J acts on
    the cusps by J sigma_k J = gamma sigma_l T_t (``operators.reflection_action``, exact
    rational t). A self-conjugate cusp k carries real unknowns a_k(n) of
    G_k(z) = F_k(z + t/2) (a pure cos/sin series); a pair (k, l = J(k)) carries alpha_n,
    beta_n of F_k = sum sqrt(y) K~(2 pi n y) [alpha_n cos + beta_n sin], and
    F_l(w) = eps F_k(t - Re w + i Im w). Sample points: Q per self-conjugate cusp at
    x_m = (m - 1/2)/(2Q) in G_k coordinates, 2Q per pair at x_m = (1 - 2m)/(4Q); each is
    mapped exactly by g = adj(M_l) gamma M_k (gamma from ``Gamma0.pullback``), and the
    inversion rows are (2/Q) sum f cs(2 pi n x_m) (self) or (1/Q) sum f cos / sin (pairs).
    The normalisation a_infinity(1) = 1 drops the first equation (infinity is
    self-conjugate with shift 0).
    """

    def __init__(
        self, lev: _Level, parity: str, Y: Fraction, M0: int, Q: int, prec: int, eps_log: float
    ) -> None:
        from maasscomp.spectrum.operators import reflection_action

        G = lev.group
        self.group = G
        self.parity, self.M0, self.Q, self.prec = parity, M0, Q, prec
        self.eps_log = eps_log
        self.Yq = Y
        self.eps = 1 if parity == "even" else -1
        refl = reflection_action(G)
        blocks = []  # (kind, cusp, partner, shift, offset)
        off = 0
        for r in refl:
            if r.image == r.cusp:
                blocks.append(("self", r.cusp, r.cusp, r.shift, off))
                off += M0
            elif r.cusp < r.image:
                blocks.append(("pair", r.cusp, r.image, r.shift, off))
                off += 2 * M0
        if blocks[0][:2] != ("self", 0) or blocks[0][3] != 0:
            raise AssertionError("infinity must be self-conjugate with shift 0")  # pragma: no cover
        self.blocks = blocks
        self.size = off
        self.block_of = {}
        for b, (kind, k, l, t, o) in enumerate(blocks):
            self.block_of[k] = b
            self.block_of[l] = b
        cs = "cos" if parity == "even" else "sin"
        self.cs = cs
        with ctx.workprec(prec):
            self.Y = arb(Y.numerator) / Y.denominator
            twopi = 2 * arb.pi()
            self.pts = []  # (x*, y*, target block, is_partner)
            inv_rows = [[] for _ in range(self.size)]  # per unknown row: list of (point, weight)
            for b, (kind, k, l, t, o) in enumerate(blocks):
                Mk = G.cusps[k].scaling
                if kind == "self":
                    xs_q = [Fraction(2 * m - 1, 4 * Q) for m in range(1, Q + 1)]
                    shift = t / 2
                else:
                    xs_q = [Fraction(1 - 2 * m, 4 * Q) for m in range(1 - Q, Q + 1)]
                    shift = Fraction(0)
                for xq in xs_q:
                    z = xq + shift
                    xs, ys, tb, partner = self._pull(G, Mk, z, Y)
                    idx = len(self.pts)
                    self.pts.append((xs, ys, tb, partner))
                    ang = twopi * arb(xq.numerator) / xq.denominator
                    for n in range(1, M0 + 1):
                        if kind == "self":
                            inv_rows[o + n - 1].append((idx, getattr(ang * n, cs)() * 2 / Q))
                        else:
                            inv_rows[o + n - 1].append((idx, (ang * n).cos() / Q))
                            inv_rows[o + M0 + n - 1].append((idx, (ang * n).sin() / Q))
            P = len(self.pts)
            W = arb_mat(self.size, P)
            for i, row in enumerate(inv_rows):
                for idx, w in row:
                    W[i, idx] = w
            self.W = W

    def _pull(self, G, Mk, z: Fraction, Y: Fraction):
        """Exact image w = g(z + iY) of a sample point given in cusp-k coordinates."""
        xs, ys, l = _pull_exact(G, Mk, z, Y)
        tb = self.block_of[l]
        kind, k0, l0, t0, o0 = self.blocks[tb]
        return xs, ys, tb, (kind == "pair" and l == l0)

    def matrix(self, R: arb) -> arb_mat:
        """A(R) = D(R) - W B(R), size n_unknowns (ball midpoints)."""
        M0, prec = self.M0, self.prec
        Rf = float(R.mid())
        with ctx.workprec(prec):
            twopi = 2 * arb.pi()
            B = arb_mat(len(self.pts), self.size)
            for i, (xs, ys, tb, partner) in enumerate(self.pts):
                kind, k, l, t, o = self.blocks[tb]
                yf = float(ys.mid())
                sq = ys.sqrt()
                tr = arb(t.numerator) / t.denominator
                for n in range(1, M0 + 1):
                    if _kt_upper_bound_log(Rf, 2 * math.pi * n * yf) < self.eps_log - 23:
                        break
                    kv = sq * _kt(R, twopi * n * ys, prec)
                    if kind == "self":
                        B[i, o + n - 1] = kv * getattr(twopi * n * (xs - tr / 2), self.cs)()
                    else:
                        xx = (tr - xs) if partner else xs
                        sg = self.eps if partner else 1
                        ang = twopi * n * xx
                        B[i, o + n - 1] = sg * kv * ang.cos()
                        B[i, o + M0 + n - 1] = sg * kv * ang.sin()
            A = -(self.W * B)
            sY = self.Y.sqrt()
            diag = [sY * _kt(R, twopi * n * self.Y, prec) for n in range(1, M0 + 1)]
            for kind, k, l, t, o in self.blocks:
                for r in range(1 if kind == "self" else 2):
                    for n in range(M0):
                        A[o + r * M0 + n, o + r * M0 + n] += diag[n]
            return A.mid()

    def solve_all(self, R: arb) -> list[arb]:
        """All unknowns with a_infinity(1) = 1 (row 0 dropped, column 0 to the right side)."""
        A = self.matrix(R)
        n = self.size
        with ctx.workprec(self.prec):
            red = arb_mat([[A[i, j] for j in range(1, n)] for i in range(1, n)])
            rhs = arb_mat([[-A[i, 0]] for i in range(1, n)])
            sol = red.solve(rhs, algorithm="approx")
            u = [arb(1)] + [sol[i, 0].mid() for i in range(n - 1)]
        self.last = u
        return u

    def solve(self, R: arb) -> list[arb]:
        """Coefficients a_infinity(1..M0) (block 0)."""
        return self.solve_all(R)[: self.M0]

    def cusp_coefficients(self, u: list[arb]) -> list[list[tuple[arb, arb]]]:
        """c_j(n) = (Re, Im) in the storage convention (docs/theory.md, conventions)."""
        M0 = self.M0
        out: list[list[tuple[arb, arb]]] = [[] for _ in self.group.cusps]
        even = self.parity == "even"
        with ctx.workprec(self.prec):
            pi = arb.pi()
            for kind, k, l, t, o in self.blocks:
                tr = arb(t.numerator) / t.denominator
                if kind == "self":
                    for n in range(1, M0 + 1):
                        a = u[o + n - 1]
                        ph = pi * n * tr if even else -pi * n * tr
                        out[k].append((a * ph.cos(), a * ph.sin()))
                    continue
                for n in range(1, M0 + 1):
                    al, be = u[o + n - 1], u[o + M0 + n - 1]
                    # representative: cos coefficient alpha, sin coefficient beta
                    out[k].append((al, be) if even else (be, al))
                    ph = 2 * pi * n * tr
                    cos_l = self.eps * (al * ph.cos() + be * ph.sin())
                    sin_l = self.eps * (al * ph.sin() - be * ph.cos())
                    out[l].append((cos_l, sin_l) if even else (sin_l, cos_l))
        return out


# --------------------------------------------------------------------------- results


@dataclass(frozen=True)
class HighPrecisionForm:
    """A form refined to high precision (decimal strings keep every digit).

    Attributes
    ----------
    level : int
    parity : {"even", "odd"}
    R : str
        Spectral parameter as a decimal string (``digits`` + 5 digits printed).
    R_error : float
        Estimated absolute error of R (see :func:`refine_high_precision`).
    digits : int
        Number of decimal places claimed: R_error < 10^{-digits}.
    coeffs : tuple of str
        a(1..M0) at the final R from the Y1 system (a(1) = 1); the first half or so are
        accurate, the rest serve the evaluation of f at heights >= Y0.
    coeff_errors : tuple of float
        |a_n(Y1) - a_n(Y2)| + |d a_n/dR| R_error, an estimate of the absolute error.
    Y1, Y2 : str
        The two heights (exact rationals as "p/q").
    M0, Q : int
        Truncation and number of sample points of the final (Y1) system.
    prec_bits : int
        Working precision of the final stage.
    iterations : int
        Number of two-Y evaluations (all stages).
    history : tuple of (int, str, float)
        (stage digits, R, |step|) after each secant step.
    al_signs : tuple of (p, eps_p)
        The Atkin-Lehner class (empty at level 1 and for the multi-cusp system):
        f(W_p z) = eps_p f(z).
    cusp_coeffs : tuple
        Multi-cusp system only: for every cusp j, c_j(1..M0) as (Re, Im) decimal strings in
        the storage convention (docs/theory.md, conventions); empty otherwise.
    al_eigenvalues : tuple of (Q, str, float)
        Multi-cusp system only: for every exact divisor Q > 1 of N, the eigenvalue eta_Q of
        W_Q read off c'_infinity(1) of f|W_Q (docs/theory.md §9.1) as a
        decimal string, and max_n |c'_infinity(n) - eta_Q c_infinity(n)| over the first
        third of the coefficients (small for an Atkin-Lehner eigenform).
    """

    level: int
    parity: str
    R: str
    R_error: float
    digits: int
    coeffs: tuple[str, ...]
    coeff_errors: tuple[float, ...]
    Y1: str
    Y2: str
    M0: int
    Q: int
    prec_bits: int
    iterations: int
    history: tuple[tuple[int, str, float], ...] = field(default=())
    al_signs: tuple[tuple[int, int], ...] = ()
    cusp_coeffs: tuple[tuple[tuple[str, str], ...], ...] = ()
    al_eigenvalues: tuple[tuple[int, str, float], ...] = ()

    def R_arb(self, prec: int | None = None) -> arb:
        """R as an arb midpoint (precision in bits, default enough for ``digits``)."""
        p = prec or int((self.digits + 10) * 3.33) + 16
        with ctx.workprec(p):
            return arb(self.R).mid()

    def coeffs_float(self) -> np.ndarray:
        """a(1..M0) as float64."""
        return np.array([float(s) for s in self.coeffs])

    @property
    def R_float(self) -> float:
        return float(self.R)


# --------------------------------------------------------------------------- refinement


def _check_args(level: object, R0: object, parity: object, digits: object) -> None:
    if isinstance(level, bool) or not isinstance(level, (int, np.integer)) or level < 1:
        raise InputError(f"level {level!r} is not allowed; use a positive integer")
    if parity not in ("even", "odd"):
        raise InputError(f"parity {parity!r} is not allowed; use 'even' or 'odd'")
    if not isinstance(R0, (int, float, np.floating, str)) or isinstance(R0, bool):
        raise InputError(f"R0 {R0!r} is not allowed; use a positive number")
    r = float(R0)
    if not (math.isfinite(r) and 0 < r <= 300):
        raise InputError(f"R0 = {R0!r} is not allowed; use 0 < R0 <= 300")
    if isinstance(digits, bool) or not isinstance(digits, (int, np.integer)) or not 10 <= digits <= 400:
        raise InputError(f"digits = {digits!r} is not allowed; use an integer in [10, 400]")


class _Evaluator:
    """Two-Y solves at one precision stage (systems cached across R)."""

    def __init__(self, lev: _Level, parity: str, R_guess: float, digits: int) -> None:
        self.digits = digits
        # truncation eps = 10^-(digits + 6): H then carries about digits + 3 digits
        self.eps_log = -(digits + 6) * _LN10
        self.prec = int(math.ceil((digits + 15) * _LN10 / math.log(2))) + 16
        self.systems = []
        y0 = Fraction(lev.Y0).limit_denominator(10**6)
        with ctx.workprec(self.prec):
            Rarb = arb(R_guess)
            for frac in lev.Y_fracs:
                Yq = (y0 * frac).limit_denominator(1000)
                Yarb = arb(Yq.numerator) / Yq.denominator
                M0 = _truncation_M(Rarb, Yarb, self.eps_log, self.prec)
                Q = M0 + 8
                cls = _MultiSystem if lev.multi else _System
                self.systems.append(cls(lev, parity, Yq, M0, Q, self.prec, self.eps_log))
        self.count = 0

    def __call__(self, R: arb) -> tuple[list[arb], list[arb]]:
        self.count += 1
        with ctx.workprec(self.prec):
            Rm = arb(R.mid())
        return self.systems[0].solve(Rm), self.systems[1].solve(Rm)


def _H(c1: list[arb], c2: list[arb], n: int = 2) -> arb:
    return c1[n - 1] - c2[n - 1]


def refine_high_precision(
    level: int,
    R0: float | str,
    parity: str,
    digits: int = 30,
    *,
    al_signs: dict[int, int] | tuple[tuple[int, int], ...] | None = None,
    progress: Callable[[str], None] | None = None,
    max_steps_per_stage: int = 12,
) -> HighPrecisionForm:
    """Refine an eigenvalue and its coefficients to ``digits`` decimal places.

    Hejhal's method (Hejhal, Mem. AMS 97 (1992) no. 469; Booker-Strömbergsson-Venkatesh,
    IMRN 2006, §2) in multiprecision: the real cos/sin system at heights Y1 = 0.8 Y0
    and Y2 = 0.72 Y0 (Y0 = sqrt(3)/2 for level 1, ``Gamma0(N).fundamental_domain_height``
    otherwise), truncated at M0 = the smallest M with sqrt(Y) K~_R(2 pi M Y) sqrt(M) <
    10^{-(stage digits + 6)}, Q = M0 + 8 sample points, and the secant method on
    H(R) = a_n(R; Y1) - a_n(R; Y2) with n the least integer >= 2 prime to N.  With
    ``al_signs`` (squarefree N > 1) the system is the one-cusp Atkin-Lehner system of that
    class; without them at N > 1 it is the multi-cusp system of the parity class (module
    docstring), which needs a simple eigenvalue there and also returns the expansions at
    every cusp and the Atkin-Lehner eigenvalues.

    Precision ladder: stages of about 16, 32, 64, ... digits up to ``digits`` + 2; each
    stage re-evaluates the last two iterates at its precision and runs secant steps
    until the step is below 10^{-stage digits}.

    Error estimate: with slopes s_n of H_n(R) = a_n(R; Y1) - a_n(R; Y2) (the first four
    n >= 2 prime to N; n = 2..5 at level 1) measured in the first stage,
    R_error = max_n |H_n(R_final)| / |s_n|, taken at the final R in the final stage.  This combines the distance to the root with the
    truncation noise of H.  ``digits`` is claimed only if R_error < 10^{-digits}.

    Parameters
    ----------
    level : int
        Level N >= 1.
    R0 : float or str
        Start value, accurate to a small fraction of the distance to the neighbouring
        eigenvalues of the same parity (double precision values are fine).
    parity : {"even", "odd"}
    digits : int, optional
        Target number of decimal places of R, 10 <= digits <= 400 (default 30).
    al_signs : dict or tuple of (p, sign), optional
        The Atkin-Lehner class {p: eps_p} (eps_p = +-1, one for each prime p | N) for the
        one-cusp system at a squarefree N; f(W_p z) = eps_p f(z) (docs/theory.md,
        conventions).  None (default) at N > 1 selects the multi-cusp system of the parity
        class; not allowed at non-squarefree N.
    progress : callable, optional
        Called with one line of text after each secant step.
    max_steps_per_stage : int, optional
        Secant steps allowed per stage before :class:`ConvergenceError`.

    Returns
    -------
    HighPrecisionForm

    Raises
    ------
    InputError
        For a bad level, Atkin-Lehner signs (wrong primes, values, or given at a
        non-squarefree level), parity, R0 or digits.
    ConvergenceError
        If a stage does not converge (``best`` carries the last iterate as a string) or
        the final error estimate misses the target.
    """
    _check_args(level, R0, parity, digits)
    level = int(level)
    signs = _check_level_signs(level, al_signs)
    lev = _level_data(level, signs)
    h0 = lev.h_indices[0]
    say = progress or (lambda s: None)

    # each secant step roughly multiplies the number of correct digits (and H is far
    # more accurate than the truncation eps at low n), so stages may triple
    stages = []
    d = 16
    while d < digits + 2:
        stages.append(d)
        d *= 3
    stages.append(digits + 2)

    history: list[tuple[int, str, float]] = []
    total_evals = 0
    slopes: list[float] | None = None
    dadR: list[float] | None = None
    with ctx.workprec(64):
        R_a = arb(str(R0)) if isinstance(R0, str) else arb(float(R0))
    # second start point: a relative offset well above double-precision noise
    R_b = None
    last_step = float("inf")
    ev = None
    for st in stages:
        ev = _Evaluator(lev, parity, float(R_a.mid()), st)
        with ctx.workprec(ev.prec):
            R_a = arb(R_a.mid())
            if R_b is None or abs(float((R_b - R_a).mid())) < 10.0 ** (-0.75 * st):
                # the previous pair is too close to give a slope at this precision
                R_b = R_a + arb(10.0) ** (-min(8, max(4, st // 2)))
            Ra1, Ra2 = ev(R_a)
            Rb1, Rb2 = ev(R_b)
            Ha, Hb = _H(Ra1, Ra2, h0), _H(Rb1, Rb2, h0)
            if slopes is None:
                dR = R_b - R_a
                slopes = [float(((_H(Rb1, Rb2, n) - _H(Ra1, Ra2, n)) / dR).mid()) for n in lev.h_indices]
                dadR = [float(((Rb1[n - 1] - Ra1[n - 1]) / dR).mid()) for n in range(1, ev.systems[0].M0 + 1)]
            converged = False
            for _ in range(max_steps_per_stage):
                denom = Hb - Ha
                if denom.mid() == 0:
                    break
                R_new = (R_b - Hb * (R_b - R_a) / denom).mid()
                step = abs(float((R_new - R_b).mid()))
                R_a, Ha, Ra1, Ra2 = R_b, Hb, Rb1, Rb2
                R_b = R_new
                Rb1, Rb2 = ev(R_b)
                Hb = _H(Rb1, Rb2, h0)
                last_step = step
                history.append((st, R_b.mid().str(st + 5, radius=False), step))
                say(f"stage {st} digits: R = {R_b.mid().str(min(st + 3, 60), radius=False)}  |step| = {step:.3e}")
                if step < 10.0 ** (-st):
                    converged = True
                    break
            total_evals += ev.count
            if not converged:
                raise ConvergenceError(
                    f"secant refinement did not converge at the {st}-digit stage "
                    f"(last |step| = {last_step:.3e}); try a better R0 or the other parity",
                    best=R_b.mid().str(st, radius=False),
                )
            # keep the latest iterate as R_a for the next stage, the previous as R_b
            R_a, R_b = R_b, R_a

    assert ev is not None and slopes is not None and dadR is not None
    # the final iterate is R_a, with its two-Y solutions in Rb1, Rb2 (just swapped names)
    c1, c2 = Rb1, Rb2
    with ctx.workprec(ev.prec):
        Hn = [abs(float(_H(c1, c2, n).mid())) for n in lev.h_indices]
    R_error = max(h / abs(s) for h, s in zip(Hn, slopes) if s != 0)
    M0 = ev.systems[0].M0
    M0b = ev.systems[1].M0
    coeff_err = []
    with ctx.workprec(ev.prec):
        for n in range(1, M0 + 1):
            diff = abs(float((c1[n - 1] - c2[n - 1]).mid())) if n <= M0b else float("inf")
            coeff_err.append(diff + abs(dadR[n - 1] if n - 1 < len(dadR) else 0.0) * R_error)
        Rstr = R_a.mid().str(digits + 5, radius=False, more=True)
        coeffs = tuple(c.str(digits + 5, radius=False, more=True) for c in c1)
    if not R_error < 10.0 ** (-digits):
        raise ConvergenceError(
            f"refinement reached an estimated error {R_error:.2e}, above the target 1e-{digits}",
            best=Rstr,
        )
    cusp_strs: tuple = ()
    al_vals: tuple = ()
    if lev.multi:
        cusp_strs, al_vals = _multi_cusp_data(ev.systems[0], parity, digits)
    return HighPrecisionForm(
        level=level,
        parity=parity,
        R=_strip_brackets(Rstr),
        R_error=R_error,
        digits=int(digits),
        coeffs=tuple(_strip_brackets(c) for c in coeffs),
        coeff_errors=tuple(coeff_err),
        Y1=f"{ev.systems[0].Yq.numerator}/{ev.systems[0].Yq.denominator}",
        Y2=f"{ev.systems[1].Yq.numerator}/{ev.systems[1].Yq.denominator}",
        M0=M0,
        Q=ev.systems[0].Q,
        prec_bits=ev.prec,
        iterations=total_evals,
        history=tuple(history),
        al_signs=signs,
        cusp_coeffs=cusp_strs,
        al_eigenvalues=al_vals,
    )


def _multi_cusp_data(system: "_MultiSystem", parity: str, digits: int) -> tuple[tuple, tuple]:
    """Cusp expansions and Atkin-Lehner eigenvalues from the last solve of ``system``."""
    from maasscomp.spectrum.operators import atkin_lehner_action

    G = system.group
    cc = system.cusp_coefficients(system.last)
    nd = digits + 5
    with ctx.workprec(system.prec):
        def dec(x: arb) -> str:
            return _strip_brackets(x.str(nd, radius=False, more=True))

        strs = tuple(tuple((dec(re), dec(im)) for re, im in row) for row in cc)
        sgn = -1 if parity == "even" else 1
        twopi = 2 * arb.pi()
        al = []
        K = max(2, system.M0 // 3)
        for Q in G.exact_divisors():
            if Q == 1:
                continue
            ci = atkin_lehner_action(G, Q)[0]
            t = arb(ci.shift.numerator) / ci.shift.denominator
            vals = []
            for n in range(1, K + 1):
                re, im = cc[ci.image][n - 1]
                ang = sgn * twopi * n * t
                # c'(n) = c_l(n) e(-+ n t)
                vals.append((re * ang.cos() - im * ang.sin(), re * ang.sin() + im * ang.cos()))
            eta = vals[0][0]  # c_infinity(1) = 1
            res = 0.0
            for (vre, vim), (c0re, c0im) in zip(vals, cc[0]):
                res = max(res, abs(float((vre - eta * c0re).mid())), abs(float((vim - eta * c0im).mid())))
            al.append((int(Q), dec(eta), res))
    return strs, tuple(al)


def _strip_brackets(s: str) -> str:
    return s.strip("[]").split(" +/-")[0].strip()


def extend_coefficients(
    form: HighPrecisionForm,
    n_max: int,
    *,
    eps: float = 1e-17,
    heights: tuple[float, ...] = (1.0, 0.87, 0.76),
) -> tuple[np.ndarray, np.ndarray]:
    """Many coefficients a(1..n_max) of a refined form, in double precision.

    Hejhal's inversion (docs/theory.md §1.2 item 3, real version) at low heights Y:

        a(n) sqrt(Y) K~_R(2 pi n Y) = (2/Q) sum_{m=1}^{Q} f(z_m) cs(2 pi n x_m),

    where f(z_m) = f(g z_m) is evaluated at the pulled-back point (height >= Y0) from the
    high-precision coefficients of ``form`` (only the first dozen or so matter there).
    The sum is a type-II discrete cosine/sine transform (scipy.fft), which needs
    Q > M(Y), the truncation index at height Y.  Heights Y_k = c_k R/(2 pi n_max) for
    the factors c_k in ``heights`` keep 2 pi n Y below the turning point for all
    n <= n_max; for each n the height with the largest |K~_R(2 pi n Y)| is used (away
    from the zeros of K~), and the second best gives the error estimate.

    Parameters
    ----------
    form : HighPrecisionForm
        Output of :func:`refine_high_precision`.
    n_max : int
        Number of coefficients, 2 <= n_max <= 20000.
    eps : float, optional
        Truncation target of the expansions (default 1e-17).
    heights : tuple of float, optional
        The factors c_k (at least two).

    Returns
    -------
    a : ndarray, shape (n_max,)
        a(1..n_max), a(1) = 1.
    err : ndarray, shape (n_max,)
        Estimated absolute errors (difference between the two best heights; at least
        the double-precision rounding of the transform).
    """
    if not isinstance(form, HighPrecisionForm):
        raise InputError(f"form must be a HighPrecisionForm, got {type(form).__name__}")
    if isinstance(n_max, bool) or not isinstance(n_max, (int, np.integer)) or not 2 <= n_max <= 20000:
        raise InputError(f"n_max = {n_max!r} is not allowed; use an integer in [2, 20000]")
    if len(heights) < 2 or any(not 0 < c <= 1.5 for c in heights):
        raise InputError(f"heights {heights!r} not allowed; give >= 2 factors in (0, 1.5]")
    from scipy.fft import dct, dst

    lev = _level_data(form.level, form.al_signs)
    if lev.multi and not form.cusp_coeffs:
        raise InputError("the form carries no cusp expansions; it cannot be extended at this level")
    prec = 128
    eps_log = math.log(eps)
    cs = "cos" if form.parity == "even" else "sin"
    cs_other = "sin" if cs == "cos" else "cos"
    with ctx.workprec(prec):
        R = form.R_arb(prec)
        coef = [arb(c) for c in form.coeffs]
        if lev.multi:
            ccoef = [[(arb(re), arb(im)) for re, im in row] for row in form.cusp_coeffs]
        Rf = float(R)
        twopi = 2 * arb.pi()
        rows_a = []
        rows_k = []
        for c in heights:
            Yf = min(c * Rf / (2 * math.pi * n_max), 0.8 * lev.Y0)
            Yq = Fraction(Yf).limit_denominator(10**9)
            Y = arb(Yq.numerator) / Yq.denominator
            M = _truncation_M(R, Y, eps_log, 64)
            Q = M + 16
            fvals = np.empty(Q)
            for m in range(1, Q + 1):
                xm = Fraction(2 * m - 1, 4 * Q)
                if lev.multi:
                    xs, ys, jc = _pull_exact(lev.group, ((1, 0), (0, 1)), xm, Yq)
                    sgn = 1
                else:
                    (a, b, cc, d), sgn = lev.pullback(float(xm), float(Yq))
                    xr = arb(xm.numerator) / xm.denominator
                    den = (cc * xr + d) ** 2 + (cc * Y) ** 2
                    ys = (a * d - b * cc) * Y / den
                    xs = (a * cc * (xr * xr + Y * Y) + (a * d + b * cc) * xr + b * d) / den
                yf = float(ys)
                tot = arb(0)
                sq = ys.sqrt()
                for l in range(1, len(coef) + 1):
                    if _kt_upper_bound_log(Rf, 2 * math.pi * l * yf) < eps_log - 23:
                        break
                    kv = sq * _kt(R, twopi * l * ys, prec)
                    ang = twopi * l * xs
                    if lev.multi:
                        re, im = ccoef[jc][l - 1]
                        tot += kv * (re * getattr(ang, cs)() + im * getattr(ang, cs_other)())
                    else:
                        tot += coef[l - 1] * kv * getattr(ang, cs)()
                else:
                    raise ConvergenceError(
                        f"form carries {len(coef)} coefficients, too few to evaluate f at height {yf:.3f}"
                    )
                fvals[m - 1] = sgn * float(tot)
            # (2/Q) sum_m f_m cs(pi n (2m-1)/(2Q)) for n = 1..n_max (DCT-II / DST-II)
            if cs == "cos":
                tr = dct(fvals, type=2)[1 : n_max + 1] / Q
            else:
                tr = dst(fvals, type=2)[:n_max] / Q
            kt = np.array([float(_kt(R, twopi * n * Y, 64)) for n in range(1, n_max + 1)])
            sY = math.sqrt(float(Y))
            rows_k.append(np.abs(sY * kt))
            with np.errstate(divide="ignore", invalid="ignore"):
                rows_a.append(tr / (sY * kt))
    A = np.array(rows_a)
    K = np.array(rows_k)
    order = np.argsort(-K, axis=0)
    idx = np.arange(n_max)
    best = A[order[0], idx]
    second = A[order[1], idx]
    # rounding floor of the transform: ~1e-16 sqrt(Q) max|f| / |sqrt(Y) K~|
    floor = 1e-15 / K[order[0], idx]
    err = np.maximum(np.abs(best - second), floor)
    best = best.copy()
    err[0] = 0.0
    best[0] = 1.0
    return best, err
