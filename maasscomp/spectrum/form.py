"""The :class:`Form` record: one verified Maass cusp form, as stored."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from maasscomp.hejhal.types import SolverParams, SymmetryClass


@dataclass(frozen=True, eq=False)
class Form:
    """A Maass cusp form on Gamma0(level) with its verification data.

    Normalisation (docs/theory.md, conventions): at every cusp j, with sigma_j the group's
    scaling matrix (``gamma0(N).cusps[j].scaling`` divided by the square root of its
    determinant),

        f(sigma_j z) = sum_{n>=1} sqrt(y) K_{iR}(2 pi n y)
                       [Re c[j, n-1] cs_par(2 pi n x) + Im c[j, n-1] cs_oth(2 pi n x)],

    where cs_par = cos for even and sin for odd forms and cs_oth is the other one. A real
    ``coeffs`` array means every cusp expansion is a pure cos (even) or sin (odd) series.
    c[0, 0] = c_infinity(1) = 1, so that for a Hecke newform c[0, n-1] is the Hecke
    eigenvalue lambda_f(n). The physical form carries the factor e^{-pi R/2} relative to
    the sums in the scaled K-Bessel function Kt = e^{pi R/2} K_{iR} that the code uses.

    Attributes
    ----------
    level : int
    R : float
        Spectral parameter, lambda = 1/4 + R^2.
    symmetry : SymmetryClass
    coeffs : ndarray, shape (n_cusps, M), real or complex
        c_j(n) for n = 1..M at each cusp (row 0 is infinity).
    coeff_errors : ndarray, shape (n_cusps, M)
        Estimated absolute error of each coefficient (difference between the two
        Y solves at the final R).
    R_error : float
        Estimated error of R.
    hecke_residual : float
        Largest Hecke-relation residual over the checked range.
    params : SolverParams
        Parameters of the final solve.
    is_new : bool or None
        True for newforms, False for oldforms, None if not classified.
    multiplicity : int
        Dimension of the eigenspace in this symmetry class at R (1 when simple).
    basis_index : int
        Index of this form inside a multiplicity > 1 eigenspace basis.
    extra : dict
        Further labels (Atkin-Lehner signs found, Hecke eigenvalues, origin of an oldform...).
    character : maasscomp.groups.characters.DirichletCharacter or None
        The form's character chi modulo the level, f(gamma z) = chi(d) f(z); None means the
        trivial character. A form with a nontrivial character is complex-valued: ``coeffs``
        then holds c_j(nu) for the positive frequencies nu of kappa_j + Z at each cusp and
        ``extra["coeffs_negative"]`` those of the negative ones
        (:mod:`maasscomp.spectrum.charforms`, docs/theory-additions/chars.md).
    """

    level: int
    R: float
    symmetry: SymmetryClass
    coeffs: np.ndarray
    coeff_errors: np.ndarray
    R_error: float
    hecke_residual: float
    params: SolverParams
    is_new: bool | None = None
    multiplicity: int = 1
    basis_index: int = 0
    extra: dict[str, Any] = field(default_factory=dict)
    character: Any = None

    @property
    def parity(self) -> str:
        return self.symmetry.parity

    @property
    def eigenvalue(self) -> float:
        """lambda = 1/4 + R^2."""
        return 0.25 + self.R * self.R

    def coefficient(self, n: int, cusp: int = 0) -> float | complex:
        """c_cusp(n) for 1 <= n <= M (complex when the stored array is complex)."""
        v = self.coeffs[cusp, n - 1]
        return complex(v) if np.iscomplexobj(self.coeffs) else float(v)
