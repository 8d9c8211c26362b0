"""Where an oldform comes from: its newform of lower level and its place in the oldspace.

Theory (Atkin & Lehner, Math. Ann. 185 (1970) 134-160, for holomorphic forms; the Maass case
is common practice; docs/theory.md §1.1): the cusp forms of Gamma0(N) with a given R are
spanned by the newforms of level N and, for each newform g of a level M | N, M < N, by the
sigma_0(N/M) functions g(d z), d | N/M. In the cos/sin normalisation the function g(d z) has
the coefficient sqrt(d) a_g(n/d) at n (zero unless d | n), because
sqrt(d y) K(2 pi m d y) = sqrt(d) sqrt(y) K(2 pi (m d) y).

:func:`describe_old` writes the coefficients of a form at infinity as a combination of these
lifts for the given candidate parents (newforms of lower levels with the same R and parity),
by least squares on the well-determined coefficients. A form is old when the fit leaves a
residual at the level of the coefficient errors; the fitted numbers x_d with
f = sum_d x_d g(d z) are its coordinates in the oldspace of g. Because a cusp form is
determined by its expansion at infinity, the coefficients at infinity suffice.

The results go into ``Form.extra`` (see :meth:`OldformDescription.as_extra`):

``old_parents``
    list of {"level": M, "R": R of g, "parity": ..., "label": ..., "coordinates": {"d": x_d}}
    (one entry per parent with a non-zero part, d | N/M as strings);
``old_fit_residual``
    max |c(n) - sum x_d sqrt(d) a_g(n/d)| / max |c(n)| over the n used;
``old_fit_n``
    the number of coefficients used.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from maasscomp.errors import InputError
from maasscomp.groups import divisors
from maasscomp.spectrum.form import Form

__all__ = [
    "ParentForm",
    "OldComponent",
    "OldformDescription",
    "lift_columns",
    "describe_old",
    "label_old",
    "DEFAULT_FIT_TOL",
]

#: Relative residual below which a fit counts (coefficients are stored to ~1e-12).
DEFAULT_FIT_TOL = 1e-7

#: Default absolute error below which a stored coefficient enters a fit.
DEFAULT_ERR_TOL = 1e-9


@dataclass(frozen=True, eq=False)
class ParentForm:
    """A Hecke newform of some level, as needed to recognise its oldforms and twists.

    Attributes
    ----------
    level : int
    R : float
    parity : {"even", "odd"}
    coeffs : ndarray
        a(1..K) at infinity, a(1) = 1 (the Hecke eigenvalues).
    label : str
        Free text naming the form (e.g. where its coefficients come from).
    """

    level: int
    R: float
    parity: str
    coeffs: np.ndarray
    label: str = ""

    def __post_init__(self) -> None:
        if not (isinstance(self.level, (int, np.integer)) and self.level >= 1):
            raise InputError(f"level {self.level!r} is not allowed; use a positive integer")
        if self.parity not in ("even", "odd"):
            raise InputError(f"parity {self.parity!r} is not allowed; use 'even' or 'odd'")
        a = np.real(np.asarray(self.coeffs, dtype=complex)).astype(float).ravel()
        if a.size < 2 or not np.all(np.isfinite(a)) or abs(a[0] - 1.0) > 1e-8:
            raise InputError("a parent needs finite coefficients a(1..K), K >= 2, with a(1) = 1")
        object.__setattr__(self, "coeffs", a)

    @classmethod
    def from_form(cls, form: Form, label: str = "", *, err_tol: float = DEFAULT_ERR_TOL) -> "ParentForm":
        """The newform ``form`` as a parent (its well-determined coefficients at infinity).

        Raises
        ------
        InputError
            If the form is marked old or is not a Hecke eigenform with c(1) = 1.
        """
        if form.is_new is False:
            raise InputError(f"the form at R={form.R} of level {form.level} is old; parents must be newforms")
        if not form.extra.get("hecke_eigenform", True):
            raise InputError(f"the form at R={form.R} of level {form.level} is not a Hecke eigenform")
        c = np.real(np.asarray(form.coeffs)[0])
        e = np.asarray(form.coeff_errors)[0]
        ok = np.isfinite(c) & (e <= err_tol * np.maximum(1.0, np.abs(c)))
        K = int(np.sum(np.cumprod(ok)))
        return cls(int(form.level), float(form.R), form.parity, c[: max(K, 2)], label)

    def describe(self) -> dict:
        return {"level": int(self.level), "R": float(self.R), "parity": self.parity, "label": self.label}


def lift_columns(parent: ParentForm, level: int, K: int) -> tuple[list[int], np.ndarray]:
    """The d | N/M and the matrix (K, sigma_0(N/M)) of coefficients sqrt(d) a_g(n/d), n = 1..K.

    Raises
    ------
    InputError
        If the parent's level does not divide ``level`` or it has fewer than K coefficients.
    """
    if level % parent.level:
        raise InputError(f"a parent of level {parent.level} has no oldforms at level {level}")
    if parent.coeffs.size < K:
        raise InputError(f"the parent carries {parent.coeffs.size} coefficients; {K} are needed")
    ds = divisors(level // parent.level)
    B = np.zeros((K, len(ds)))
    n = np.arange(1, K + 1)
    for i, d in enumerate(ds):
        sel = n % d == 0
        B[sel, i] = np.sqrt(d) * parent.coeffs[n[sel] // d - 1]
    return ds, B


@dataclass(frozen=True)
class OldComponent:
    """The part of a form coming from one parent: f_g = sum_d x_d g(d z)."""

    parent: ParentForm
    coordinates: dict[int, float]


@dataclass(frozen=True)
class OldformDescription:
    """Outcome of :func:`describe_old` for a form found to be old."""

    components: tuple[OldComponent, ...]
    residual: float
    n_used: int

    def as_extra(self) -> dict:
        """The ``Form.extra`` entries (module docstring)."""
        parents = []
        for comp in self.components:
            d = comp.parent.describe()
            d["coordinates"] = {str(k): float(v) for k, v in comp.coordinates.items()}
            parents.append(d)
        return {"old_parents": parents, "old_fit_residual": float(self.residual), "old_fit_n": int(self.n_used)}


def _good_count(form: Form, err_tol: float) -> int:
    c = np.real(np.asarray(form.coeffs)[0])
    e = np.asarray(form.coeff_errors)[0]
    ok = np.isfinite(c) & (e <= err_tol * np.maximum(1.0, np.abs(c)))
    return int(np.sum(np.cumprod(ok)))


def _matching_parents(form: Form, parents: Sequence[ParentForm], R_tol: float, same_parity: bool | None):
    out = []
    for g in parents:
        if not isinstance(g, ParentForm):
            raise InputError(f"parents must be ParentForm objects, got {type(g).__name__}")
        if abs(g.R - form.R) > R_tol * max(1.0, form.R):
            continue
        if same_parity is True and g.parity != form.parity:
            continue
        out.append(g)
    return out


def describe_old(
    group,
    form: Form,
    parents: Sequence[ParentForm],
    *,
    R_tol: float = 1e-8,
    fit_tol: float = DEFAULT_FIT_TOL,
    err_tol: float = DEFAULT_ERR_TOL,
) -> OldformDescription | None:
    """Write ``form`` as a combination of the lifts g(d z) of the given parents, if it is one.

    Parameters
    ----------
    group : Gamma0
        The form's group.
    form : Form
    parents : sequence of ParentForm
        Candidate newforms; those of a level M | N, M < N, with the form's parity and R
        (within ``R_tol`` relative) take part. Parents must be newforms: the lifts of
        distinct newforms are linearly independent (distinct Hecke eigenvalues), so the
        coordinates are unique.
    R_tol : float
        Relative tolerance for matching R.
    fit_tol : float
        Largest relative residual of an accepted fit.
    err_tol : float
        Coefficients at infinity with stored errors above this (times max(1, |c|)) are not
        used.

    Returns
    -------
    OldformDescription or None
        None when no parent matches or the fit leaves a residual above ``fit_tol``
        (the form has a part outside the oldspace of the given parents).
    """
    if form.level != group.level:
        raise InputError(f"the form has level {form.level} but the group is Gamma0({group.level})")
    N = group.level
    cands = [g for g in _matching_parents(form, parents, R_tol, True) if N % g.level == 0 and g.level < N]
    if not cands:
        return None
    K = min([_good_count(form, err_tol)] + [g.coeffs.size for g in cands])
    cols, owners = [], []
    for g in cands:
        ds, B = lift_columns(g, N, K)
        cols.append(B)
        owners.extend((g, d) for d in ds)
    A = np.hstack(cols)
    if K < A.shape[1] + 4:
        raise InputError(
            f"only {K} well-determined coefficients at infinity; fitting {A.shape[1]} lifts needs more"
        )
    c = np.real(np.asarray(form.coeffs)[0, :K])
    x, *_ = np.linalg.lstsq(A, c, rcond=None)
    res = float(np.max(np.abs(A @ x - c)) / max(np.max(np.abs(c)), 1e-300))
    if res > fit_tol:
        return None
    scale = np.max(np.abs(x))
    comps = []
    for g in cands:
        coords = {d: float(x[i]) for i, (gg, d) in enumerate(owners) if gg is g}
        if max(abs(v) for v in coords.values()) > 1e-8 * scale:
            comps.append(OldComponent(g, coords))
    return OldformDescription(tuple(comps), res, K)


def label_old(group, form: Form, parents: Sequence[ParentForm], **kwargs) -> OldformDescription | None:
    """:func:`describe_old`, and on success write its entries into ``form.extra``."""
    desc = describe_old(group, form, parents, **kwargs)
    if desc is not None:
        form.extra.update(desc.as_extra())
    return desc
