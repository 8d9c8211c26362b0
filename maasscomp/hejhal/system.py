"""Hejhal's linear system at a trial R for one symmetry class.

Source: D. A. Hejhal, "On eigenfunctions of the Laplacian for Hecke triangle groups",
IMA Vol. Math. Appl. 109 (1999) 291-315, and F. Strömberg, *Computational aspects of Maass
waveforms*, thesis, Uppsala 2005, Ch. 1; the real cos/sin form used here is docs/theory.md
§1.2 item 6, and the one-expansion reduction for squarefree levels via Atkin--Lehner
involutions is docs/theory.md §1.5.

For a squarefree level N every cusp is W_Q(infinity) for an exact divisor Q of N, and
with the scaling matrix sigma = W_Q / sqrt(Q) the expansion at that cusp is eps_Q times the
expansion at infinity. A form in the class (parity, (eps_p)) is therefore

    f(z) = sum_{n>=1} a(n) sqrt(y) Kt_R(2 pi n y) cs(2 pi n x)

(Kt = e^{pi R/2} K_{iR}, cs = cos or sin) and the sample points z_m = x_m + iY,
x_m = (m - 1/2)/(2Q), m = 1..Q, satisfy f(z_m) = eps_{Q(m)} f(w_m) with w_m the
pulled-back point. Discrete inversion on the horocycle gives, for 1 <= n <= M0 < Q,

    a(n) sqrt(Y) Kt_R(2 pi n Y) = sum_l V_{nl} a(l),
    V_{nl} = (2/Q) sum_m eps_{Q(m)} sqrt(y*_m) Kt_R(2 pi l y*_m) cs(2 pi l x*_m) cs(2 pi n x_m).

The square matrix A(R) = diag(sqrt(Y) Kt_R(2 pi n Y)) - V(R) is singular (up to the
truncation error) exactly when R is an eigenvalue of the class.
"""

from __future__ import annotations

import math

import numpy as np

from maasscomp.errors import InputError
from maasscomp.hejhal.types import SolverParams, SymmetryClass
from maasscomp.special import ktilde

TWO_PI = 2.0 * np.pi


def _cs(parity: str):
    return np.cos if parity == "even" else np.sin


def check_symmetry(group, symmetry: SymmetryClass) -> None:
    """Raise InputError unless ``symmetry`` fits the group (squarefree level, one sign per prime)."""
    if not group.is_squarefree:
        raise InputError(
            f"level {group.level} is not squarefree; the one-expansion Atkin-Lehner system needs a "
            "squarefree level (use the multi-cusp system for this level)"
        )
    primes = tuple(sorted(group.primes))
    given = tuple(sorted(p for p, _ in symmetry.al_signs))
    if given != primes:
        raise InputError(
            f"symmetry class {symmetry.label!r} gives Atkin-Lehner signs for primes {list(given)}; "
            f"level {group.level} needs exactly one sign for each of {list(primes)}"
        )


class SampleSet:
    """Sample points on the horocycle at height Y and their pullbacks.

    Independent of R and of the symmetry class, so every class of a level (and every R of
    a scan) shares one set: the matrices of all classes need Kt(R, x) at the same points.

    Parameters
    ----------
    group : Gamma0
    params : SolverParams
    """

    def __init__(self, group, params: SolverParams) -> None:
        Y0 = group.fundamental_domain_height
        if not (0 < params.Y < Y0):
            raise InputError(
                f"sample height Y={params.Y!r} is not allowed for level {group.level}; "
                f"it must lie in (0, {Y0:.6g}) so that every pullback raises the point"
            )
        self.group = group
        self.params = params
        m = np.arange(1, params.Q + 1)
        self.x = (m - 0.5) / (2 * params.Q)
        self.Y = params.Y
        pb = group.pullback(self.x, np.full_like(self.x, params.Y))
        self.cusp = np.asarray(pb.cusp, dtype=int)
        self.xs = np.asarray(pb.x, dtype=float)
        self.ys = np.asarray(pb.y, dtype=float)
        if np.any(self.ys <= params.Y * (1 + 1e-12)):
            raise InputError(
                f"sample height Y={params.Y} is too large for level {group.level}: some pullbacks "
                "do not rise above Y"
            )
        n = np.arange(1, params.M0 + 1)
        # every x at which Kt is needed: the pulled-back points (Q x M0), then the diagonal
        self.k_points = np.concatenate([((TWO_PI * self.ys)[:, None] * n[None, :]).ravel(), TWO_PI * self.Y * n])

    def k_values(self, R: float, *, exceptional: bool = False) -> np.ndarray:
        """Kt(R, x) at :attr:`k_points` (or K_t(x) of real order t = R when exceptional)."""
        if exceptional:
            if not (0 < R < 0.5):
                raise InputError(f"t={R!r} is not allowed for an exceptional system; it must lie in (0, 1/2)")
            from scipy.special import kv

            return kv(R, self.k_points)
        return ktilde(R, self.k_points)


class HejhalSystem:
    """The real Hejhal system of one symmetry class of a squarefree level.

    Parameters
    ----------
    group : Gamma0
        The group (from :func:`maasscomp.groups.gamma0`); its level must be squarefree.
    symmetry : SymmetryClass
        Parity and one Atkin--Lehner sign per prime dividing the level.
    params : SolverParams
        Y, M0, Q. Y must lie below the group's fundamental-domain height so that every
        pullback raises the sample point.
    samples : SampleSet, optional
        Share the sample points (and their pullbacks) with the other classes of the level.
    """

    def __init__(self, group, symmetry: SymmetryClass, params: SolverParams, samples: SampleSet | None = None) -> None:
        check_symmetry(group, symmetry)
        if samples is None:
            samples = SampleSet(group, params)
        elif samples.params != params or samples.group.level != group.level:
            raise InputError("the shared sample set was built for other parameters or another level")
        self.group = group
        self.symmetry = symmetry
        self.params = params
        self.samples = samples
        cs = _cs(symmetry.parity)
        sign = np.array([symmetry.al_sign(group.cusps[int(j)].atkin_lehner_Q) for j in samples.cusp], dtype=float)
        n = np.arange(1, params.M0 + 1)
        # R-independent factor of V: sign and cos/sin at the pulled-back points (Q x M0),
        # with sqrt(y*) folded in
        self._out = (sign * np.sqrt(samples.ys))[:, None] * cs(TWO_PI * np.outer(samples.xs, n))

    def _invert(self, B: np.ndarray) -> np.ndarray:
        """(2/Q) sum_m cs(2 pi n x_m) B[m, :] for n = 1..M0.

        The sample abscissae x_m = (m - 1/2)/(2Q) make this a type-II discrete cosine
        (even) or sine (odd) transform, O(Q log Q) per column instead of O(Q M0).
        """
        from scipy.fft import dct, dst

        Q, M0 = self.params.Q, self.params.M0
        if self.symmetry.parity == "even":
            return dct(B, type=2, axis=0)[1 : M0 + 1] / Q
        return dst(B, type=2, axis=0)[:M0] / Q

    @property
    def size(self) -> int:
        """Number of unknowns a(1..M0)."""
        return self.params.M0

    @property
    def k_points(self) -> np.ndarray:
        """Points x at which :meth:`matrix_from_k` needs Kt(R, x)."""
        return self.samples.k_points

    @property
    def real_coefficients(self) -> bool:
        """Always True: every cusp expansion is a pure cos/sin series with real coefficients."""
        return True

    def coefficients(self, vector: np.ndarray) -> np.ndarray:
        """Unknowns a(1..M0) -> storage c_j(n) = eps_{Q_j} a(n), shape (n_cusps, M0).

        Every cusp of a squarefree level is W_Q(infinity) with scaling matrix W_Q/sqrt(Q),
        so its expansion is eps_Q times the one at infinity (docs/theory.md §1.5). A matrix
        of shape (M0, k) gives (k, n_cusps, M0).
        """
        u = np.asarray(vector, dtype=float)
        sign = np.array([self.symmetry.al_sign(c.atkin_lehner_Q) for c in self.group.cusps], dtype=float)
        if u.ndim == 2:
            return sign[None, :, None] * u.T[:, None, :]
        return sign[:, None] * u[None, :]

    def storage_scale(self, unknown_scale: np.ndarray) -> np.ndarray:
        """Per storage entry (n_cusps, M0): the scale of the unknown it comes from."""
        return np.repeat(np.asarray(unknown_scale)[None, :], self.group.n_cusps, axis=0)

    def matrix_from_k(self, k: np.ndarray) -> np.ndarray:
        """A(R) from the values k = Kt(R, samples.k_points); linear in k, so the same call
        with dKt/dR gives dA/dR."""
        Q, M0 = self.params.Q, self.params.M0
        A = -self._invert(k[: Q * M0].reshape(Q, M0) * self._out)
        A[np.diag_indices(M0)] += math.sqrt(self.params.Y) * k[Q * M0:]
        return A

    def matrix(self, R: float, *, exceptional: bool = False) -> np.ndarray:
        """The square matrix A(R) of size M0 (singular at eigenvalues of the class).

        With ``exceptional=True`` the argument is t in (0, 1/2) and the system is built for
        lambda = 1/4 - t^2 (spectral parameter R = i t) with K_t of real order
        (scipy.special.kv), to search for exceptional eigenvalues below 1/4.
        """
        return self.matrix_from_k(self.samples.k_values(R, exceptional=exceptional))

    def log_det(self, R: float, *, exceptional: bool = False) -> tuple[float, float]:
        """Sign and log|det A(R)| (docs/theory.md §1.4: the sign changes at eigenvalues)."""
        return slogdet(self.matrix(R, exceptional=exceptional))

    def solve(self, R: float, *, exceptional: bool = False) -> np.ndarray:
        """Coefficients a(1..M0) with a(1) = 1 (the n = 1 equation is dropped)."""
        return normalised_solution(self.matrix(R, exceptional=exceptional))

    def residual(self, R: float, a: np.ndarray) -> float:
        """Relative residual |A a| / (|A| |a|) of a coefficient vector."""
        A = self.matrix(R)
        return float(np.linalg.norm(A @ a) / (np.linalg.norm(A) * np.linalg.norm(a)))


def slogdet(A: np.ndarray) -> tuple[float, float]:
    """Sign and log|det A| as floats."""
    sign, logdet = np.linalg.slogdet(A)
    return float(sign), float(logdet)


def normalised_solution(A: np.ndarray) -> np.ndarray:
    """Solution of A a = 0 with a(1) = 1, dropping the first equation (Hejhal 1999, §2)."""
    try:
        rest = np.linalg.solve(A[1:, 1:], -A[1:, 0])
    except np.linalg.LinAlgError:
        rest = np.linalg.lstsq(A[1:, 1:], -A[1:, 0], rcond=None)[0]
    return np.concatenate(([1.0], rest))
