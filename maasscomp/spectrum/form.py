"""The :class:`Form` record: one verified Maass cusp form, as stored."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

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
        (:mod:`maasscomp.spectrum.charforms`, docs/theory.md §12).
    key : str or None
        The store key of a form read from a store (None for a form not read from one). It is
        not part of the stored data and does not take part in comparisons.

    Notes
    -----
    A form is callable: ``f(z)`` for complex ``z`` (scalar or array) or ``f(x, y)`` gives the
    physical value f(z) as a numpy scalar or array (``normalized=True``: f/||f||, the
    L2-normalised form); ``f.plot()`` draws |f| on the fundamental domain and
    ``f.to_dataframe()`` gives the coefficients as a pandas DataFrame. These three delegate
    to the later stages (``supnorm`` evaluates, ``report`` draws and tabulates) through
    imports made when they are called, so that importing this stage never loads them
    (``tests/test_stage_imports.py`` lists these methods as the only such calls).
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
    key: str | None = field(default=None, compare=False)

    def __post_init__(self) -> None:
        # per-object memo of the evaluator and the L2 norm (keyed by the form itself)
        object.__setattr__(self, "_memo", {})

    def __getstate__(self) -> dict[str, Any]:
        state = dict(self.__dict__)
        state.pop("_memo", None)  # an evaluator is rebuilt where it is needed
        return state

    def __setstate__(self, state: dict[str, Any]) -> None:
        self.__dict__.update(state)
        object.__setattr__(self, "_memo", {})

    def __repr__(self) -> str:
        M = self.coeffs.shape[-1] if self.coeffs.ndim else 0
        nc = self.coeffs.shape[0] if self.coeffs.ndim == 2 else 1
        kind = {True: "new", False: "old", None: "unclassified"}[self.is_new]
        mult = f", multiplicity {self.multiplicity}" if self.multiplicity != 1 else ""
        key = f", key={self.key!r}" if self.key else ""
        return (f"<Form level {self.level}, {self.symmetry.label}, R = {float(self.R)!r} "
                f"± {float(self.R_error):.1e}, {kind}{mult}, {M} coefficients at {nc} "
                f"cusp{'s' if nc != 1 else ''}{key}>")

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

    @property
    def c(self) -> np.ndarray:
        """c_infinity(n) for n = 1..M (row 0 of ``coeffs``; a read-only view)."""
        v = self.coeffs[0].view()
        v.flags.writeable = False
        return v

    def __call__(self, z: ArrayLike, y: ArrayLike | None = None, *, normalized: bool = False,
                 tol: float = 1e-12) -> np.floating | np.ndarray:
        """The form at points of the upper half plane.

        Parameters
        ----------
        z : complex or array_like
            Points x + i y with y > 0; or, when ``y`` is given, their real parts x.
        y : array_like, optional
            Imaginary parts (broadcast against ``z``).
        normalized : bool
            False: the physical value f(z) in the normalisation c_infinity(1) = 1 (it carries
            the factor e^{-pi R/2} and underflows to 0 for R above about 470); True:
            f(z)/||f||, the L2-normalised form (the norm over Gamma0(N)\\H is computed once
            per form by :func:`maasscomp.supnorm.norm.l2_norm`).
        tol : float
            Absolute accuracy of the scaled sum e^{pi R/2} f (see
            :class:`maasscomp.supnorm.evaluate.FormEvaluator`).

        Returns
        -------
        numpy.float64 or ndarray
            A numpy scalar for scalar input, else an array of the broadcast shape.
        """
        from maasscomp.supnorm.evaluate import form_values  # evaluation is a later stage

        return form_values(self, z, y, normalized=normalized, tol=tol)

    def plot(self, *, normalized: bool = True, path: Any = None, rows: int = 120, cols: int = 160):
        """A map of |f| over the fundamental domain, one panel per cusp (no scan needed).

        Returns the matplotlib ``Figure``; with ``path`` it is also written to that file.
        See :func:`maasscomp.report.figures.plot_form`.
        """
        from maasscomp.report.figures import plot_form  # drawing is a later stage

        return plot_form(self, normalized=normalized, path=path, rows=rows, cols=cols)

    def to_dataframe(self):
        """The coefficients as a pandas DataFrame, one row per (cusp, n): columns ``cusp``,
        ``n``, ``re``, ``im``, ``error`` (needs the optional extra ``pandas``)."""
        from maasscomp.report.frames import form_frame  # tables are a later stage

        return form_frame(self)
