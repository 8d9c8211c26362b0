"""Multi-cusp real Hejhal system for Gamma0(N), any level, with the parity symmetry imposed.

Sources: D. A. Hejhal, "On eigenfunctions of the Laplacian for Hecke triangle groups",
IMA Vol. Math. Appl. 109 (1999) 291-315; F. Strömberg, *Computational aspects of Maass
waveforms*, thesis, Uppsala 2005, Ch. 1 (one expansion per cusp, sample points on
horocycles, pullback, discrete inversion: docs/theory.md §1.2 items 1-5). The reduction
by the reflection J: z -> -conj(z) below is derived for this module (docs/theory.md §1.2
item 6 is its special case where J fixes every cusp with compatible scaling matrices).

Reflection and cusps
--------------------
J normalises Gamma0(N) (J [[a, b], [c, d]] J = [[a, -b], [-c, d]]), so it permutes the
cusps. For each cusp j, J sigma_j J is a scaling matrix of the cusp k = J(j) (up to
Gamma0(N)), hence

    J sigma_j J = gamma sigma_k T_t,   gamma in Gamma0(N), T_t = [[1, t], [0, 1]],

with a real shift t determined modulo 1. Writing F_j(z) = f(sigma_j z) and eps = +1
(even) / -1 (odd) for f(J z) = eps f(z), this gives

    F_j(J z) = eps F_k(z + t).                                              (*)

* Self-conjugate cusp (k = j): G_j(z) = F_j(z + t/2) satisfies G_j(J z) = eps G_j(z),
  so G_j has a pure cos (even) / sin (odd) expansion with real coefficients a_j(n).
* Pair (j, k = J(j) != j): F_j carries both cos and sin terms (real alpha_n, beta_n, f
  real), and (*) gives F_k(w) = eps F_j(t - Re w + i Im w): no unknowns at k.

The shift t is found numerically: the point P = sigma_j(iH) (H large) has J P =
(J sigma_j J)(iH); its pullback lands at cusp k at height H and abscissa t (mod 1).

Equations
---------
Self-conjugate cusp j: Q points x_m = (m - 1/2)/(2Q), m = 1..Q, at height Y in G_j
coordinates; f at the physical point sigma_j(z_m + t/2) is expressed through the unknowns
after pulling back, and for 1 <= n <= M0 < Q (docs/theory.md §1.2 item 6)

    a_j(n) sqrt(Y) Kt_R(2 pi n Y) = (2/Q) sum_m f(.) cs(2 pi n x_m).

Pair (j, k): 2Q points x_m = (1 - 2m)/(4Q), m = 1-Q..Q, in F_j coordinates and

    alpha_n sqrt(Y) Kt_R(2 pi n Y) = (1/Q) sum_m f(.) cos(2 pi n x_m),
    beta_n  sqrt(Y) Kt_R(2 pi n Y) = (1/Q) sum_m f(.) sin(2 pi n x_m).

This is a square real system A(R) u = 0 of size n_cusps * M0 (each pair contributes 2 M0
unknowns, each self-conjugate cusp M0); det A(R) is continuous in R and vanishes at the
eigenvalues of the parity class.

Storage convention (shared with the evaluator): c_j(n) in the group's sigma_j
coordinates with

    F_j(x + iy) = sum_{n>=1} sqrt(y) Kt_R(2 pi n y) [Re c_j(n) cs_par(2 pi n x)
                                                  + Im c_j(n) cs_oth(2 pi n x)],

cs_par = cos (even) / sin (odd), cs_oth the other one.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction

import numpy as np

from maasscomp.errors import InputError
from maasscomp.hejhal.types import PARITIES, SolverParams
from maasscomp.special import ktilde

TWO_PI = 2.0 * np.pi

#: Height (in cusp coordinates) of the probe point used to find J(j) and the shift t.
_PROBE_HEIGHT = 6.0


@dataclass(frozen=True)
class CuspReflection:
    """How the reflection J acts on one cusp j: J sigma_j J = gamma sigma_k T_t.

    Attributes
    ----------
    cusp : int
        j.
    image : int
        k = J(j).
    shift : float
        t in [0, 1).
    """

    cusp: int
    image: int
    shift: float

    @property
    def self_conjugate(self) -> bool:
        return self.image == self.cusp


@dataclass(frozen=True)
class Block:
    """One block of unknowns.

    kind "self": a self-conjugate cusp, M0 unknowns a_j(1..M0) of G_j = F_j(. + t/2);
    kind "pair": representative cusp j with partner k, 2 M0 unknowns alpha_1..alpha_M0,
    beta_1..beta_M0 of F_j.
    """

    kind: str
    cusp: int
    partner: int
    shift: float  # t of the cusp (self) or of J sigma_j J = gamma sigma_k T_t (pair)
    offset: int  # first unknown index


def cusp_reflections(group, height: float = _PROBE_HEIGHT) -> tuple[CuspReflection, ...]:
    """The action of J on the cusps of ``group`` (see the module docstring).

    Parameters
    ----------
    group : Gamma0
    height : float
        Height H of the probe point iH in cusp coordinates; must exceed 1 so that the
        point lies in the horoball of its cusp, where the pullback keeps the height.

    Raises
    ------
    AssertionError
        If the pullback of a probe point does not keep its height (internal error).
    """
    out = []
    for cusp in group.cusps:
        px, py = cusp.apply_scaling(np.array([0.0]), np.array([height]))
        pb = group.pullback(-px, py)
        k = int(np.asarray(pb.cusp).ravel()[0])
        yw = float(np.asarray(pb.y).ravel()[0])
        xw = float(np.asarray(pb.x).ravel()[0])
        if abs(yw - height) > 1e-8 * height:
            raise AssertionError(
                f"reflected probe of cusp {cusp.index} came back at height {yw}, expected {height}"
            )
        # exact shift: sigma_k^{-1} gamma J sigma_j J = T_t, i.e. adj(M_k) gamma (J M_j J)
        # is the integer matrix [[d, t d], [0, d]] up to sign (d = sqrt(det M_j det M_k))
        gam = np.asarray(pb.gamma, dtype=np.int64).reshape(2, 2)
        T = _int_matmul(_int_adjugate(group.cusps[k].scaling), _int_matmul(gam.tolist(), _int_reflect(cusp.scaling)))
        if T[1][0] != 0 or T[0][0] != T[1][1] or T[0][0] == 0:
            raise AssertionError(f"J sigma_j J is not sigma_k times a translation for cusp {cusp.index}: {T}")
        tf = Fraction(T[0][1], T[0][0])
        tf -= math.floor(tf)
        t = float(tf)
        if abs(((xw - t + 0.5) % 1.0) - 0.5) > 1e-8:
            raise AssertionError(f"shift of cusp {cusp.index}: exact {tf} but pullback gave {xw}")
        out.append(CuspReflection(cusp=cusp.index, image=k, shift=t))
    for r in out:
        if out[r.image].image != r.cusp:
            raise AssertionError(f"J is not an involution on the cusps (cusp {r.cusp})")
    return tuple(out)


def _int_matmul(A, B):
    return [
        [A[0][0] * B[0][0] + A[0][1] * B[1][0], A[0][0] * B[0][1] + A[0][1] * B[1][1]],
        [A[1][0] * B[0][0] + A[1][1] * B[1][0], A[1][0] * B[0][1] + A[1][1] * B[1][1]],
    ]


def _int_adjugate(M):
    (a, b), (c, d) = M
    return [[int(d), -int(b)], [-int(c), int(a)]]


def _int_reflect(M):
    (a, b), (c, d) = M
    return [[int(a), -int(b)], [-int(c), int(d)]]


class MultiCuspSamples:
    """R- and parity-independent data of the multi-cusp system: blocks of unknowns, sample
    points and their pullbacks.

    Both parity classes of a level use the same points (only the cos/sin factors differ), so
    they share one instance, hence the values Kt(R, x) at :attr:`k_points`.

    Parameters
    ----------
    group : Gamma0
    params : SolverParams
        Y (below the group's fundamental-domain height Y0), M0, Q > M0.
    """

    def __init__(self, group, params: SolverParams) -> None:
        Y0 = group.fundamental_domain_height
        if not (0 < params.Y < Y0):
            raise InputError(
                f"sample height Y={params.Y!r} is not allowed for level {group.level}; "
                f"it must lie in (0, {Y0:.6g}) so that every pullback raises the point"
            )
        if params.Q <= params.M0:
            raise InputError(f"sample count Q={params.Q!r} is not allowed; it must exceed M0={params.M0}")
        self.group = group
        self.params = params
        self.reflections = cusp_reflections(group)
        M0, Q, Y = params.M0, params.Q, params.Y
        blocks = []
        off = 0
        for r in self.reflections:
            if r.self_conjugate:
                blocks.append(Block("self", r.cusp, r.cusp, r.shift, off))
                off += M0
            elif r.cusp < r.image:
                blocks.append(Block("pair", r.cusp, r.image, r.shift, off))
                off += 2 * M0
        self.blocks: tuple[Block, ...] = tuple(blocks)
        self.size = off
        self.block_of_cusp = np.empty(group.n_cusps, dtype=np.int64)
        for b, blk in enumerate(blocks):
            self.block_of_cusp[blk.cusp] = b
            self.block_of_cusp[blk.partner] = b
        pts_x, pts_y, owner, xloc = [], [], [], []
        for b, blk in enumerate(self.blocks):
            cusp = group.cusps[blk.cusp]
            if blk.kind == "self":
                m = np.arange(1, Q + 1)
                x = (m - 0.5) / (2 * Q)
                px, py = cusp.apply_scaling(x + blk.shift / 2, np.full_like(x, Y))
            else:
                m = np.arange(1 - Q, Q + 1)
                x = (1 - 2 * m) / (4 * Q)
                px, py = cusp.apply_scaling(x, np.full_like(x, Y))
            pts_x.append(px)
            pts_y.append(py)
            owner.append(np.full(px.size, b))
            xloc.append(x)
        px = np.concatenate(pts_x)
        py = np.concatenate(pts_y)
        #: block whose equations use each point, and the point's abscissa in that block
        self.owner = np.concatenate(owner)
        self.x_local = np.concatenate(xloc)
        pb = group.pullback(px, py)
        self.cusp = np.asarray(pb.cusp, dtype=np.int64)
        self.xs = np.asarray(pb.x, dtype=float)
        self.ys = np.asarray(pb.y, dtype=float)
        self.min_ratio = float(np.min(self.ys) / Y)
        if self.min_ratio <= 1 + 1e-12:
            raise InputError(
                f"sample height Y={Y} is too large for level {group.level}: some pullbacks do not rise above Y"
            )
        #: block whose unknowns express f at each pulled-back point
        self.target = self.block_of_cusp[self.cusp]
        n = np.arange(1, M0 + 1)
        # every x at which Kt is needed: the pulled-back points (P x M0), then the diagonal
        self.k_points = np.concatenate([((TWO_PI * self.ys)[:, None] * n[None, :]).ravel(), TWO_PI * Y * n])

    @property
    def n_points(self) -> int:
        return int(self.ys.size)

    def k_values(self, R: float) -> np.ndarray:
        """Kt(R, x) at :attr:`k_points`."""
        return ktilde(float(R), self.k_points)


class MultiCuspSystem:
    """Real Hejhal system of one parity class on Gamma0(N), any level N.

    Parameters
    ----------
    group : Gamma0
        From :func:`maasscomp.groups.gamma0`.
    parity : {"even", "odd"}
        Symmetry under J: z -> -conj(z).
    params : SolverParams
        Y (below the group's fundamental-domain height Y0), M0, Q > M0.
    samples : MultiCuspSamples, optional
        Share the sample points (and the Kt values) with the other parity.

    Notes
    -----
    Unknowns are ordered block by block (cusps in the group's order, a pair at its
    lower-numbered cusp); see :attr:`blocks`. :meth:`matrix` returns A(R) as built;
    :meth:`log_det` and :meth:`null_space` work with the equilibrated matrix
    D_r A(R) D_c (D_c = inverse column 2-norms, then D_r = inverse row 2-norms), whose
    determinant has the sign of det A(R) (all scalings are positive) and whose singular
    values are comparable across columns of very different size (the column of a(n)
    carries the factor Kt_R(2 pi n y), which is exponentially small for large n).
    """

    def __init__(self, group, parity: str, params: SolverParams, samples: MultiCuspSamples | None = None) -> None:
        if parity not in PARITIES:
            raise InputError(f"parity {parity!r} is not allowed; use 'even' or 'odd'")
        if samples is None:
            samples = MultiCuspSamples(group, params)
        elif samples.params != params or samples.group.level != group.level:
            raise InputError("the shared sample set was built for other parameters or another level")
        self.group = group
        self.parity = parity
        self.params = params
        self.samples = samples
        self.eps = 1.0 if parity == "even" else -1.0
        self.reflections = samples.reflections
        self.blocks = samples.blocks
        self.size = samples.size
        self._block_of_cusp = samples.block_of_cusp
        M0, Q = params.M0, params.Q
        n = np.arange(1, M0 + 1)
        cs = np.cos if parity == "even" else np.sin
        s = samples
        # discrete inversion weights: rows = unknowns, columns = sample points of the owner
        inv = np.zeros((self.size, s.n_points))
        for b, blk in enumerate(self.blocks):
            cols = np.nonzero(s.owner == b)[0]
            x = s.x_local[cols]
            if blk.kind == "self":
                w = (2.0 / Q) * cs(TWO_PI * np.outer(n, x))
            else:
                w = np.vstack([(1.0 / Q) * np.cos(TWO_PI * np.outer(n, x)),
                               (1.0 / Q) * np.sin(TWO_PI * np.outer(n, x))])
            inv[blk.offset : blk.offset + w.shape[0], cols] = w
        # per (target block, owner block): the points owned by one block (whose equations use
        # them) and expressed through the unknowns of another, the owner's inversion weights
        # at those points and the R-independent factor sqrt(y*) cs(.) of each target column.
        # A row of the matrix only involves the points of its own block, so A is assembled
        # block by block (n_blocks times fewer operations than one dense product).
        self._parts = []
        sq = np.sqrt(s.ys)
        for b, blk in enumerate(self.blocks):
            sel = np.nonzero(s.target == b)[0]
            if sel.size == 0:
                continue
            xs = s.xs[sel]
            if blk.kind == "self":
                ph = (sq[sel][:, None] * cs(TWO_PI * np.outer(xs - blk.shift / 2, n)))[None]
            else:
                # representative: F_j(w); partner: eps F_j(t - Re w + i Im w)
                is_partner = s.cusp[sel] == blk.partner
                xx = np.where(is_partner, blk.shift - xs, xs)
                sgn = np.where(is_partner, self.eps, 1.0) * sq[sel]
                arg = TWO_PI * np.outer(xx, n)
                ph = np.stack([sgn[:, None] * np.cos(arg), sgn[:, None] * np.sin(arg)])
            for o, own in enumerate(self.blocks):
                pick = np.nonzero(s.owner[sel] == o)[0]
                if pick.size == 0:
                    continue
                rows = slice(own.offset, own.offset + (M0 if own.kind == "self" else 2 * M0))
                W = np.ascontiguousarray(inv[rows][:, sel[pick]])
                self._parts.append((blk, rows, sel[pick], W, np.ascontiguousarray(ph[:, pick])))

    # ------------------------------------------------------------------------------------
    @property
    def real_coefficients(self) -> bool:
        """True when every cusp is self-conjugate with shift 0 (real storage arrays)."""
        return all(b.kind == "self" and b.shift == 0.0 for b in self.blocks)

    @property
    def k_points(self) -> np.ndarray:
        """Points x at which :meth:`matrix_from_k` needs Kt(R, x)."""
        return self.samples.k_points

    def matrix_from_k(self, k: np.ndarray) -> np.ndarray:
        """A(R) from k = Kt(R, :attr:`k_points`); linear in k, so the same call with
        dKt/dR gives dA/dR."""
        M0, Y = self.params.M0, self.params.Y
        P = self.samples.n_points
        kb = np.asarray(k[: P * M0]).reshape(P, M0)
        A = np.zeros((self.size, self.size))
        for blk, rows, pts, W, ph in self._parts:
            K = kb[pts]
            off = blk.offset
            A[rows, off : off + M0] -= W @ (K * ph[0])
            if blk.kind == "pair":
                A[rows, off + M0 : off + 2 * M0] -= W @ (K * ph[1])
        diag = math.sqrt(Y) * np.asarray(k[P * M0 :])
        for blk in self.blocks:
            reps = 1 if blk.kind == "self" else 2
            for r in range(reps):
                idx = blk.offset + r * M0 + np.arange(M0)
                A[idx, idx] += diag
        return A

    # ------------------------------------------------------------------------------------
    def matrix(self, R: float) -> np.ndarray:
        """The square matrix A(R) = D(R) - V(R) of size n_cusps * M0."""
        return self.matrix_from_k(self.samples.k_values(R))

    def equilibrated(self, R: float) -> tuple[np.ndarray, np.ndarray]:
        """(B, c) with B = D_r A(R) D_c and c the column scaling (u = c * v for B v = 0)."""
        A = self.matrix(R)
        cn = np.linalg.norm(A, axis=0)
        cn = np.where(cn > 0, cn, 1.0)
        B = A / cn[None, :]
        rn = np.linalg.norm(B, axis=1)
        rn = np.where(rn > 0, rn, 1.0)
        B /= rn[:, None]
        return B, 1.0 / cn

    def log_det(self, R: float) -> tuple[float, float]:
        """Sign of det A(R) and log|det| of the equilibrated matrix (see class notes)."""
        B, _ = self.equilibrated(R)
        sign, logdet = np.linalg.slogdet(B)
        return float(sign), float(logdet)

    def null_space(self, R: float, tol: float = 1e-9, *, count: int | None = None) -> tuple[np.ndarray, np.ndarray]:
        """Singular values and the approximate null space of A(R).

        Parameters
        ----------
        R : float
        tol : float
            Singular values (of the equilibrated matrix, relative to the largest) below
            ``tol`` count as zero.
        count : int, optional
            Return exactly this many directions (the smallest singular values) instead.

        Returns
        -------
        sv : ndarray
            All relative singular values in increasing order.
        basis : ndarray, shape (size, m)
            Unknown vectors u with A(R) u ~ 0 for the m singular values below tol (or the
            ``count`` smallest), each scaled to unit Euclidean norm.
        """
        B, c = self.equilibrated(R)
        _, s, Vt = np.linalg.svd(B)
        s = s / s[0]
        order = np.argsort(s)
        s = s[order]
        V = Vt[order].T
        m = int(np.sum(s < tol)) if count is None else int(count)
        U = c[:, None] * V[:, :m]
        if m:
            U = U / np.linalg.norm(U, axis=0)[None, :]
        return s, U

    def column_scale(self, R: float) -> np.ndarray:
        """Column scaling c (inverse column norms) of A(R); a coefficient with large c is
        poorly determined (its column is tiny)."""
        return self.equilibrated(R)[1]

    # ------------------------------------------------------------------------------------
    def coefficients(self, vector: np.ndarray) -> np.ndarray:
        """Convert unknowns into the storage convention c_j(n), shape (n_cusps, M0).

        Real array when every cusp is self-conjugate with zero shift, complex otherwise.
        ``vector`` may also be a matrix of shape (size, k); the result is then
        (k, n_cusps, M0).
        """
        u = np.asarray(vector, dtype=float)
        if u.ndim == 2:
            return np.stack([self.coefficients(u[:, i]) for i in range(u.shape[1])])
        if u.shape != (self.size,):
            raise InputError(f"unknown vector has shape {u.shape}; expected ({self.size},)")
        M0 = self.params.M0
        n = np.arange(1, M0 + 1)
        out = np.zeros((self.group.n_cusps, M0), dtype=complex)
        even = self.parity == "even"
        for blk in self.blocks:
            if blk.kind == "self":
                a = u[blk.offset : blk.offset + M0]
                # F_j(z) = G_j(z - t/2): cos(th - ph) = cos th cos ph + sin th sin ph,
                # sin(th - ph) = sin th cos ph - cos th sin ph, ph = pi n t
                ph = np.pi * n * blk.shift
                out[blk.cusp] = a * np.exp(1j * ph) if even else a * np.exp(-1j * ph)
                continue
            al = u[blk.offset : blk.offset + M0]
            be = u[blk.offset + M0 : blk.offset + 2 * M0]
            # representative: cos-coefficient alpha, sin-coefficient beta
            cos_c, sin_c = al, be
            out[blk.cusp] = cos_c + 1j * sin_c if even else sin_c + 1j * cos_c
            # partner: eps [alpha cos(ph - th) + beta sin(ph - th)], ph = 2 pi n t
            ph = TWO_PI * n * blk.shift
            cos_k = self.eps * (al * np.cos(ph) + be * np.sin(ph))
            sin_k = self.eps * (al * np.sin(ph) - be * np.cos(ph))
            out[blk.partner] = cos_k + 1j * sin_k if even else sin_k + 1j * cos_k
        if self.real_coefficients:
            return out.real.copy()
        return out

    def storage_scale(self, unknown_scale: np.ndarray) -> np.ndarray:
        """Per storage entry (n_cusps, M0): the largest scale of the unknowns it depends on."""
        c = np.asarray(unknown_scale)
        M0 = self.params.M0
        out = np.zeros((self.group.n_cusps, M0))
        for blk in self.blocks:
            if blk.kind == "self":
                out[blk.cusp] = c[blk.offset : blk.offset + M0]
            else:
                w = np.maximum(c[blk.offset : blk.offset + M0], c[blk.offset + M0 : blk.offset + 2 * M0])
                out[blk.cusp] = w
                out[blk.partner] = w
        return out

    def coefficient_scale(self, R: float) -> np.ndarray:
        """Per storage entry (n_cusps, M0): the largest column scaling of the unknowns it
        depends on (large values mark poorly determined coefficients)."""
        c = self.column_scale(R)
        M0 = self.params.M0
        out = np.zeros((self.group.n_cusps, M0))
        for blk in self.blocks:
            if blk.kind == "self":
                out[blk.cusp] = c[blk.offset : blk.offset + M0]
            else:
                w = np.maximum(c[blk.offset : blk.offset + M0], c[blk.offset + M0 : blk.offset + 2 * M0])
                out[blk.cusp] = w
                out[blk.partner] = w
        return out
