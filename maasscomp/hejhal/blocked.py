"""Hejhal matrices at large R: memory-bounded assembly and interpolation in R.

The matrix of one symmetry class of a squarefree level (docs/theory.md §1.2 item 6, §1.5;
the same system as :class:`maasscomp.hejhal.system.HejhalSystem`) is

    A(R)[n, l] = delta_{nl} sqrt(Y) Kt_R(2 pi n Y)
                 - (2/Q) sum_m eps_{Q(m)} sqrt(y*_m) Kt_R(2 pi l y*_m) cs(2 pi l x*_m) cs(2 pi n x_m),

1 <= n, l <= M0, with Q equally spaced samples x_m = (m - 1/2)/(2Q) at height Y and their
pullbacks (x*_m, y*_m). At R = 4e4 on PSL(2,Z) (Y = 0.92 Y0) M0 is about 8,100 and Q about
9,100, so one matrix needs Kt at 7.4e7 points and an array of those values alone is
590 MB. This module never forms such arrays:

* :class:`BlockedSystem` assembles A(R) column block by column block (a few hundred
  columns l at a time): the Kt values of a block, its cos/sin factors and the type-II
  DCT/DST over the samples (Hejhal 1999, §2; the discrete inversion as a fast transform)
  live only for that block, so the memory is the output matrices plus O(Q x block).
  Several classes share the Kt values of a block, and several R values share its
  cos/sin factors. Blocks may run on a few threads (the Kt kernel and the transforms
  release the interpreter lock).
* :class:`RInterpolatedMatrices` stores A(R) at m Chebyshev points of a short R interval
  and gives A(R) and dA/dR anywhere in it as fixed linear combinations (Lagrange
  interpolation). Each entry is an entire function of R whose local frequency in R is at
  most omega = arccosh(R / x_min) (Liouville-Green phase, DLMF 10.45.7 / docs/theory.md
  §3.2), so the interpolation error is below 2 (omega h / 2)^m / m! relative to the entry
  size on an interval of half-width h (Chebyshev interpolation of e^{i omega R}; L. N.
  Trefethen, *Approximation Theory and Approximation Practice*, SIAM 2013, Ch. 7-8). On
  the windows a large-R search uses (h ~ 1e-4, omega <= 10) five nodes give 1e-17, so a
  matrix at any R of the window costs one pass over m stored matrices instead of a fresh
  Kt evaluation. Every interpolant checks itself against a directly assembled column
  block at an off-node R.

Matrices are stored transposed (row l holds column l of A), so that the transposed view
handed out is Fortran-ordered and LAPACK factorises it in place without a copy.
"""

from __future__ import annotations

import math
from concurrent.futures import ThreadPoolExecutor
from typing import Sequence

import numpy as np
import scipy.fft

from maasscomp.errors import ConvergenceError, InputError
from maasscomp.hejhal.system import check_symmetry
from maasscomp.hejhal.types import SolverParams, SymmetryClass
from maasscomp.special import ktilde, ktilde_nodes

TWO_PI = 2.0 * math.pi


class BlockedSystem:
    """Hejhal matrices of one or more symmetry classes of a squarefree level, assembled in blocks.

    Parameters
    ----------
    group : Gamma0
        From :func:`maasscomp.groups.gamma0` (squarefree level).
    classes : sequence of SymmetryClass
        Classes whose matrices are wanted; they share the sample points and the Kt values.
    params : SolverParams
        Y, M0, Q (Y below the group's fundamental-domain height).
    block : int, optional
        Columns per block (default: about 6e6 Kt values per block, over all R assembled at once).
    workers : int
        Threads assembling blocks concurrently (1 = no threads).

    Notes
    -----
    Memory: the output matrices (8 M0^2 bytes each) plus about 100 MB per worker for the
    block temporaries. No array of size Q x M0 is formed.
    """

    def __init__(self, group, classes: Sequence[SymmetryClass], params: SolverParams, *,
                 block: int | None = None, workers: int = 1) -> None:
        classes = list(dict.fromkeys(classes))
        if not classes:
            raise InputError("no symmetry class given; give at least one")
        for c in classes:
            check_symmetry(group, c)
        if not (isinstance(workers, int) and not isinstance(workers, bool) and workers >= 1):
            raise InputError(f"workers={workers!r} is not allowed; it must be an integer >= 1")
        Y0 = group.fundamental_domain_height
        if not (0 < params.Y < Y0):
            raise InputError(
                f"sample height Y={params.Y!r} is not allowed for level {group.level}; "
                f"it must lie in (0, {Y0:.6g}) so that every pullback raises the point")
        self.group = group
        self.classes = classes
        self.params = params
        self.workers = workers
        Q, M0 = params.Q, params.M0
        m = np.arange(1, Q + 1)
        x = (m - 0.5) / (2 * Q)
        pb = group.pullback(x, np.full_like(x, params.Y))
        self.xs = np.asarray(pb.x, dtype=float)
        self.ys = np.asarray(pb.y, dtype=float)
        cusp = np.asarray(pb.cusp, dtype=int)
        if np.any(self.ys <= params.Y * (1 + 1e-12)):
            raise InputError(f"sample height Y={params.Y} is too large for level {group.level}: "
                             "some pullbacks do not rise above Y")
        # per class: eps_{Q(m)} sqrt(y*_m), the R-independent weight of sample m
        self._weight = {}
        for c in classes:
            sign = np.array([c.al_sign(group.cusps[int(j)].atkin_lehner_Q) for j in cusp], dtype=float)
            self._weight[c] = sign * np.sqrt(self.ys)
        self._block_user = None if block is None else int(block)
        self.block = self._block_size(1)
        self.x_min = TWO_PI * min(params.Y, float(self.ys.min()))

    def _block_size(self, n_R: int) -> int:
        """Columns per block: the caller's choice, else about 6e6 Kt values (all R) per block."""
        if self._block_user is not None:
            return self._block_user
        return max(8, min(self.params.M0, int(6e6 // (self.params.Q * max(n_R, 1)))))

    # -- sizes -------------------------------------------------------------------------------
    @property
    def M0(self) -> int:
        return self.params.M0

    def matrix_bytes(self) -> int:
        """Bytes of one M0 x M0 matrix."""
        return 8 * self.params.M0 ** 2

    def kt_points(self) -> int:
        """Kt evaluations per R (all classes together)."""
        return self.params.Q * self.params.M0 + self.params.M0

    # -- assembly ----------------------------------------------------------------------------
    def _fill_block(self, Rs: Sequence[float], out: dict, l0: int, l1: int, row0: int | None = None) -> None:
        """Write -V^T for columns l0+1..l1 into out[c][r, row0:row0 + l1 - l0] (row0 = l0 by default)."""
        row0 = l0 if row0 is None else row0
        Q = self.params.Q
        M0 = self.params.M0
        l = np.arange(l0 + 1, l1 + 1, dtype=float)
        xk = (TWO_PI * l)[:, None] * self.ys[None, :]  # (b, Q) Kt arguments
        arg = (TWO_PI * l)[:, None] * self.xs[None, :]
        cs = {}
        for par in {c.parity for c in self.classes}:
            cs[par] = np.cos(arg) if par == "even" else np.sin(arg)
        del arg
        # all R at once: the large phase of Kt is shared by nearby R (special.ktilde_nodes)
        kall = ktilde_nodes(Rs, xk)
        del xk
        for r in range(len(Rs)):
            k = kall[r]
            for c in self.classes:
                B = k * cs[c.parity]
                B *= self._weight[c][None, :]
                if c.parity == "even":
                    V = scipy.fft.dct(B, type=2, axis=1, overwrite_x=True)[:, 1:M0 + 1]
                else:
                    V = scipy.fft.dst(B, type=2, axis=1, overwrite_x=True)[:, :M0]
                np.multiply(V, -1.0 / Q, out=out[c][r, row0:row0 + l1 - l0, :])

    def assemble_transposed(self, Rs: Sequence[float]) -> dict[SymmetryClass, np.ndarray]:
        """A(R)^T for every class and every R in ``Rs``: arrays of shape (len(Rs), M0, M0).

        ``out[c][r].T`` is A(Rs[r]) of class c (Fortran-ordered).
        """
        Rs = [float(R) for R in Rs]
        M0 = self.params.M0
        out = {c: np.empty((len(Rs), M0, M0)) for c in self.classes}
        bs = self._block_size(len(Rs))
        blocks = [(l0, min(l0 + bs, M0)) for l0 in range(0, M0, bs)]
        if self.workers == 1:
            for l0, l1 in blocks:
                self._fill_block(Rs, out, l0, l1)
        else:
            with ThreadPoolExecutor(self.workers) as ex:
                for f in [ex.submit(self._fill_block, Rs, out, l0, l1) for l0, l1 in blocks]:
                    f.result()
        n = np.arange(1, M0 + 1)
        d = np.arange(M0)
        for r, R in enumerate(Rs):
            diag = math.sqrt(self.params.Y) * ktilde(R, TWO_PI * n * self.params.Y)
            for c in self.classes:
                out[c][r, d, d] += diag
        return out

    def matrix(self, c: SymmetryClass, R: float) -> np.ndarray:
        """A(R) of one class (Fortran-ordered M0 x M0 array)."""
        if c not in self.classes:
            raise InputError(f"symmetry class {c.label!r} is not one of this system's classes")
        return self.assemble_transposed([R])[c][0].T

    def column_block(self, c: SymmetryClass, R: float, l0: int, l1: int) -> np.ndarray:
        """Rows l0..l1-1 of A(R)^T (columns l0+1..l1 of A), assembled directly; for checks."""
        M0 = self.params.M0
        tmp = {cc: np.empty((1, l1 - l0, M0)) for cc in self.classes}
        self._fill_block([R], tmp, l0, l1, row0=0)
        blk = tmp[c][0]
        n = np.arange(l0 + 1, l1 + 1)
        blk[np.arange(l1 - l0), n - 1] += math.sqrt(self.params.Y) * ktilde(R, TWO_PI * n * self.params.Y)
        return blk


def _lagrange_weights(t: float, nodes: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Lagrange basis values l_j(t) and derivatives l_j'(t) for the given nodes (m <= ~16)."""
    m = nodes.size
    w = np.empty(m)
    dw = np.empty(m)
    for j in range(m):
        others = np.delete(nodes, j)
        den = float(np.prod(nodes[j] - others))
        diff = t - others
        w[j] = float(np.prod(diff)) / den
        s = 0.0
        for i in range(m - 1):
            s += float(np.prod(np.delete(diff, i)))
        dw[j] = s / den
    return w, dw


def interpolation_nodes_needed(omega: float, half_width: float, target: float = 2e-16) -> int:
    """Smallest m with 2 (omega h / 2)^m / m! <= target (Chebyshev interpolation of e^{i omega R})."""
    q = 0.5 * omega * half_width
    m = 2
    while 2.0 * q**m / math.factorial(m) > target:
        m += 1
        if m > 60:
            break
    return m


class RInterpolatedMatrices:
    """A(R) and dA/dR of each class of a :class:`BlockedSystem` on [Ra, Rb] from node matrices.

    Parameters
    ----------
    system : BlockedSystem
    Ra, Rb : float
        The interval, Ra < Rb.
    nodes : int, optional
        Number of Chebyshev points (default from :func:`interpolation_nodes_needed`: the bound
        is for the entries of highest frequency, most entries are far more accurate).
    tol : float
        Accepted error of the self-check, relative to the largest entry of the checked
        column block (a directly assembled block at an off-node R, the block holding the
        smallest Kt arguments, whose frequency in R is the highest).

    Attributes
    ----------
    check_error : float
        Relative error found by the self-check.
    """

    def __init__(self, system: BlockedSystem, Ra: float, Rb: float, *, nodes: int | None = None,
                 tol: float = 1e-13) -> None:
        if not (0 < Ra < Rb):
            raise InputError(f"R interval [{Ra!r}, {Rb!r}] is not allowed; it needs 0 < Ra < Rb")
        self.system = system
        self.Ra, self.Rb = float(Ra), float(Rb)
        omega = math.acosh(max(self.Rb / system.x_min, 1.0))
        if nodes is None:
            nodes = interpolation_nodes_needed(omega, 0.5 * (self.Rb - self.Ra))
        m = int(nodes)
        k = np.arange(m)
        t = np.cos(np.pi * (2 * k + 1) / (2 * m))[::-1]  # first-kind points, increasing
        self.R_nodes = 0.5 * (self.Ra + self.Rb) + 0.5 * (self.Rb - self.Ra) * t
        # the weights must refer to the nodes actually used: at R = 2e4 rounding R_j to a
        # double moves it by up to 1.8e-12, which times dKt/dR ~ arccosh(R/x) |Kt| is an
        # error of 1e-11 relative if ignored (2 R_j - Ra - Rb is exact in double)
        self.t_nodes = (2.0 * self.R_nodes - self.Ra - self.Rb) / (self.Rb - self.Ra)
        self._mats = system.assemble_transposed(self.R_nodes)
        # self-check at an off-node R on the first column block (smallest x, highest omega)
        R_chk = 0.5 * (self.Ra + self.Rb) + 0.3183098861837907 * (self.Rb - self.Ra) / max(m, 2)
        l1 = min(system.block, system.M0)
        err = 0.0
        for c in system.classes:
            exact = system.column_block(c, R_chk, 0, l1)
            w, _ = self._weights(R_chk)
            approx = np.tensordot(w, self._mats[c][:, :l1, :], axes=1)
            err = max(err, float(np.max(np.abs(approx - exact)) / max(np.max(np.abs(exact)), 1e-300)))
        self.check_error = err
        if not err <= tol:
            raise ConvergenceError(
                f"interpolation of the Hejhal matrix in R on [{Ra}, {Rb}] with {m} nodes is off by "
                f"{err:.1e} (relative) at a check point; use a shorter interval or more nodes", best=err)

    @property
    def nodes(self) -> int:
        return int(self.R_nodes.size)

    def _weights(self, R: float) -> tuple[np.ndarray, np.ndarray]:
        t = (2.0 * R - self.Ra - self.Rb) / (self.Rb - self.Ra)
        w, dw = _lagrange_weights(t, self.t_nodes)
        return w, dw * (2.0 / (self.Rb - self.Ra))

    def stored_bytes(self) -> int:
        return sum(a.nbytes for a in self._mats.values())

    def matrix(self, c: SymmetryClass, R: float) -> np.ndarray:
        """A(R) (Fortran-ordered, a fresh array the caller may overwrite)."""
        w, _ = self._weights(R)
        return np.tensordot(w, self._mats[c], axes=1).T

    def pair(self, c: SymmetryClass, R: float) -> tuple[np.ndarray, np.ndarray]:
        """A(R) and dA/dR (both Fortran-ordered fresh arrays), in one pass over the nodes."""
        w, dw = self._weights(R)
        both = np.tensordot(np.stack([w, dw]), self._mats[c], axes=1)
        return both[0].T, both[1].T

    def release(self) -> None:
        """Drop the stored node matrices (the object is unusable afterwards)."""
        self._mats = {}
