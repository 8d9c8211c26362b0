"""Complex multi-cusp Hejhal system for Maass forms on Gamma0(N) with a character chi.

Sources: D. A. Hejhal, "On eigenfunctions of the Laplacian for Hecke triangle groups",
IMA Vol. Math. Appl. 109 (1999) 291-315, and F. Strömberg, *Computational aspects of Maass
waveforms*, thesis, Uppsala 2005, Ch. 1 (one expansion per cusp, sample points on
horocycles, pullback, discrete inversion: docs/theory.md §1.2). The character's effect on
each step is derived in docs/theory.md §12.2.

Forms
-----
f(gamma z) = chi(d) f(z) for gamma = [[a, b], [c, d]] in Gamma0(N), chi even (weight 0).
At cusp j (scaling matrix sigma_j of the group, stabiliser generator
gamma_j = sigma_j T sigma_j^{-1}) F_j(z) = f(sigma_j z) satisfies F_j(z + 1) =
e(kappa_j) F_j(z) with chi(gamma_j) = e(kappa_j) (:func:`maasscomp.groups.characters.cusp_shifts`),
so

    F_j(x + iy) = sum_{nu in kappa_j + Z, nu != 0} c_j(nu) sqrt(y) K_{iR}(2 pi |nu| y) e(nu x).

A cusp with kappa_j = 0 is singular for chi; only there can a constant term (Eisenstein
series) occur, and a cusp form has none. The reflection J: z -> -conj(z) keeps chi
(J gamma J = [[a, -b], [-c, d]] has the same d), so even and odd forms exist for every
chi; at infinity (sigma_0 = I, kappa_0 = 0) parity eps means c_0(-n) = eps c_0(n).

Unknowns and equations
----------------------
* infinity: c_0(n), n = 1..M0 (the parity fixes c_0(-n)); Q points
  x_m = (m - 1/2)/(2Q) in (0, 1/2) and
  c_0(n) sqrt(Y) Kt(2 pi n Y) = (1/Q) sum_m F_0(z_m) cs(2 pi n x_m) / (1 or i)
  (cos and 1 for even, sin and i for odd forms);
* every other cusp: c_j(nu) for the M0 positive and the M0 negative frequencies of
  kappa_j + Z nearest 0; 2Q points x_m = (1 - 2m)/(4Q), m = 1-Q..Q, and
  c_j(nu) sqrt(Y) Kt(2 pi |nu| Y) = (1/2Q) sum_m F_j(z_m) e(-nu x_m).

F_j(z_m) = f(sigma_j z_m) is expressed through the unknowns of the cusp the pullback
reaches: gamma (sigma_j z_m) = sigma_k w gives f(sigma_j z_m) = chi(gamma^{-1}) F_k(w) =
conj(chi(d_gamma)) F_k(w). The matrix is complex; it is square, linear in the values
Kt(R, x) at :attr:`CharacterSamples.k_points`, and singular at the eigenvalues of the
class (and at spurious points of the truncated system, which move with Y).

Storage
-------
:meth:`CharacterSystem.coefficients` gives an array (n_cusps, 2, M0): [j, 0, n-1] is the
coefficient of the n-th positive frequency of kappa_j + Z (kappa_j + n - 1 if kappa_j > 0,
n if kappa_j = 0), [j, 1, n-1] the n-th negative one (kappa_j - n). Row 0 holds
c_0(n) and c_0(-n) = eps c_0(n).
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np

from maasscomp.errors import InputError
from maasscomp.hejhal.types import PARITIES, SolverParams
from maasscomp.special import ktilde

TWO_PI = 2.0 * np.pi


def frequencies(kappa: Fraction, M0: int) -> tuple[np.ndarray, np.ndarray]:
    """(positive, negative) frequencies nu in kappa + Z nearest 0, M0 of each."""
    n = np.arange(1, M0 + 1, dtype=float)
    k = float(kappa)
    pos = n - 1.0 + k if kappa != 0 else n
    neg = k - n
    return pos, neg


class CharacterSamples:
    """R- and parity-independent data of the character system of (group, chi): sample
    points, pullbacks and the character factors conj(chi(d_gamma)).

    Parameters
    ----------
    group : Gamma0
    chi : maasscomp.groups.characters.DirichletCharacter
        Even, modulo the level.
    params : SolverParams
        Y below the group's Y0, M0, Q > M0.
    """

    def __init__(self, group, chi, params: SolverParams) -> None:
        from maasscomp.groups.characters import complex_value, cusp_shifts

        if chi.modulus != group.level:
            raise InputError(f"character {chi.label} has modulus {chi.modulus}; the level is {group.level}")
        if not chi.is_even:
            raise InputError(f"character {chi.label} is odd; at weight 0 only even characters have Maass forms")
        Y0 = group.fundamental_domain_height
        if not (0 < params.Y < Y0):
            raise InputError(f"sample height Y={params.Y!r} is not allowed for level {group.level}; "
                             f"it must lie in (0, {Y0:.6g})")
        if params.Q <= params.M0:
            raise InputError(f"sample count Q={params.Q!r} is not allowed; it must exceed M0={params.M0}")
        self.group, self.chi, self.params = group, chi, params
        M0, Q, Y = params.M0, params.Q, params.Y
        self.kappas: tuple[Fraction, ...] = cusp_shifts(group, chi)
        nc = group.n_cusps
        # unknowns: infinity M0, every other cusp 2 M0
        self.offsets = [0] + [M0 + 2 * M0 * (j - 1) for j in range(1, nc)]
        self.size = M0 + 2 * M0 * (nc - 1)
        self.freqs = []  # per cusp: the frequencies of its unknowns (signed)
        for j in range(nc):
            pos, neg = frequencies(self.kappas[j], M0)
            self.freqs.append(pos if j == 0 else np.concatenate([pos, neg]))
        px, py, owner, xloc = [], [], [], []
        for j, cusp in enumerate(group.cusps):
            if j == 0:
                m = np.arange(1, Q + 1)
                x = (m - 0.5) / (2 * Q)
            else:
                m = np.arange(1 - Q, Q + 1)
                x = (1 - 2 * m) / (4 * Q)
            a, b = cusp.apply_scaling(x, np.full_like(x, Y))
            px.append(a)
            py.append(b)
            owner.append(np.full(x.size, j))
            xloc.append(x)
        self.owner = np.concatenate(owner)
        self.x_local = np.concatenate(xloc)
        pb = group.pullback(np.concatenate(px), np.concatenate(py))
        self.target = np.asarray(pb.cusp, dtype=np.int64)
        self.xs = np.asarray(pb.x, dtype=float)
        self.ys = np.asarray(pb.y, dtype=float)
        if float(np.min(self.ys)) <= Y * (1 + 1e-12):
            raise InputError(f"sample height Y={Y} is too large for level {group.level}: some pullbacks "
                             "do not rise above Y")
        gam = np.asarray(pb.gamma, dtype=np.int64).reshape(-1, 2, 2)
        dvals = gam[:, 1, 1] % group.level
        table = {int(d): complex_value(chi, int(d)).conjugate() for d in np.unique(dvals)}
        self.chi_factor = np.array([table[int(d)] for d in dvals], dtype=complex)
        # Kt arguments: per target cusp k, its points times |frequencies of k|; then the diagonal
        kp, self.k_index = [], {}
        off = 0
        for k in range(nc):
            sel = np.nonzero(self.target == k)[0]
            if sel.size == 0:
                continue
            a = TWO_PI * np.outer(self.ys[sel], np.abs(self.freqs[k]))
            kp.append(a.ravel())
            self.k_index[k] = (sel, off)
            off += a.size
        self.n_pullback_k = off
        kp.append(TWO_PI * Y * np.concatenate([np.abs(f) for f in self.freqs]))
        self.k_points = np.concatenate(kp)

    @property
    def n_points(self) -> int:
        return int(self.ys.size)

    def k_values(self, R: float) -> np.ndarray:
        """Kt(R, x) at :attr:`k_points`."""
        return ktilde(float(R), self.k_points)


class CharacterSystem:
    """Complex Hejhal system of one parity class of Maass forms with character chi.

    Parameters
    ----------
    group : Gamma0
    chi : maasscomp.groups.characters.DirichletCharacter
    parity : {"even", "odd"}
    params : SolverParams
    samples : CharacterSamples, optional
        Shared with the other parity (same points, same Kt values).
    """

    is_complex = True
    real_coefficients = False

    def __init__(self, group, chi, parity: str, params: SolverParams, samples: CharacterSamples | None = None) -> None:
        if parity not in PARITIES:
            raise InputError(f"parity {parity!r} is not allowed; use 'even' or 'odd'")
        if samples is None:
            samples = CharacterSamples(group, chi, params)
        elif samples.params != params or samples.group.level != group.level or samples.chi != chi:
            raise InputError("the shared sample set was built for other parameters, level or character")
        self.group, self.chi, self.parity, self.params, self.samples = group, chi, parity, params, samples
        self.eps = 1.0 if parity == "even" else -1.0
        self.size = samples.size
        self.kappas = samples.kappas
        s = samples
        M0, Q = params.M0, params.Q
        nc = group.n_cusps
        n = np.arange(1, M0 + 1)
        even = parity == "even"
        cs = np.cos if even else np.sin
        # discrete inversion weights of each owner cusp: (its unknowns) x (its points)
        weights = {}
        for j in range(nc):
            cols = np.nonzero(s.owner == j)[0]
            x = s.x_local[cols]
            if j == 0:
                w = (1.0 / Q) * cs(TWO_PI * np.outer(n, x)) * (1.0 if even else -1j)
            else:
                w = (1.0 / (2 * Q)) * np.exp(-1j * TWO_PI * np.outer(s.freqs[j], x))
            weights[j] = (cols, np.asarray(w, dtype=complex))
        # phases of each target column at each point: chi factor * sqrt(y) * e(nu x)
        # (infinity: e(n x) + eps e(-n x) = 2 cos / 2i sin)
        self._parts = []
        for k, (sel, koff) in s.k_index.items():
            xs, sq = s.xs[sel], np.sqrt(s.ys[sel]) * s.chi_factor[sel]
            if k == 0:
                base = 2.0 * cs(TWO_PI * np.outer(xs, n)) * (1.0 if even else 1j)
            else:
                base = np.exp(1j * TWO_PI * np.outer(xs, s.freqs[k]))
            ph = sq[:, None] * base
            nf = s.freqs[k].size
            kidx = koff + np.arange(sel.size)[:, None] * nf + np.arange(nf)[None, :]
            for j in range(nc):
                cols, w = weights[j]
                # points of owner j that target k
                pos_in_cols = np.nonzero(s.owner[sel] == j)[0]
                if pos_in_cols.size == 0:
                    continue
                pts = sel[pos_in_cols]
                # position of these points among owner j's columns
                wcols = np.searchsorted(cols, pts)
                self._parts.append((j, k, np.ascontiguousarray(w[:, wcols]), np.ascontiguousarray(ph[pos_in_cols]),
                                    kidx[pos_in_cols]))
        self._nfreq = [f.size for f in s.freqs]

    @property
    def k_points(self) -> np.ndarray:
        return self.samples.k_points

    def _rows(self, j: int) -> slice:
        o = self.samples.offsets[j]
        return slice(o, o + self._nfreq[j])

    def matrix_from_k(self, k: np.ndarray) -> np.ndarray:
        """A(R) from k = Kt(R, :attr:`k_points`) (complex); linear in k, so the same call
        with dKt/dR gives dA/dR."""
        k = np.asarray(k)
        A = np.zeros((self.size, self.size), dtype=complex)
        for j, kk, W, ph, kidx in self._parts:
            A[self._rows(j), self._rows(kk)] -= W @ (k[kidx] * ph)
        diag = math.sqrt(self.params.Y) * k[self.samples.n_pullback_k:]
        idx = np.arange(self.size)
        A[idx, idx] += diag
        return A

    def matrix(self, R: float) -> np.ndarray:
        return self.matrix_from_k(self.samples.k_values(R))

    def coefficients(self, vector: np.ndarray) -> np.ndarray:
        """Unknowns to the storage layout (n_cusps, 2, M0) (module docstring); a matrix
        (size, k) of vectors gives (k, n_cusps, 2, M0)."""
        u = np.asarray(vector, dtype=complex)
        if u.ndim == 2:
            return np.stack([self.coefficients(u[:, i]) for i in range(u.shape[1])])
        if u.shape != (self.size,):
            raise InputError(f"unknown vector has shape {u.shape}; expected ({self.size},)")
        M0 = self.params.M0
        out = np.zeros((self.group.n_cusps, 2, M0), dtype=complex)
        out[0, 0] = u[:M0]
        out[0, 1] = self.eps * u[:M0]
        for j in range(1, self.group.n_cusps):
            o = self.samples.offsets[j]
            out[j, 0] = u[o:o + M0]
            out[j, 1] = u[o + M0:o + 2 * M0]
        return out

    def storage_scale(self, unknown_scale: np.ndarray) -> np.ndarray:
        """Per storage entry (n_cusps, 2, M0): the scale of the unknown it comes from."""
        c = np.asarray(unknown_scale, dtype=float)
        M0 = self.params.M0
        out = np.zeros((self.group.n_cusps, 2, M0))
        out[0, 0] = out[0, 1] = c[:M0]
        for j in range(1, self.group.n_cusps):
            o = self.samples.offsets[j]
            out[j, 0] = c[o:o + M0]
            out[j, 1] = c[o + M0:o + 2 * M0]
        return out
