"""Atkin--Lehner and Hecke operators acting on stored forms, at every level.

Everything here works from the stored Fourier coefficients of a :class:`Form` at all cusps
(docs/theory.md, conventions: c_j(n) in the coordinates of the group's scaling matrix
sigma_j = M_j / sqrt(det M_j)), so no evaluation of the form is needed.

Normaliser elements (docs/theory.md §9.1, derived here)
-----------------------------------------------------------------------
Let W be an integer matrix of determinant D > 0 that normalises Gamma0(N) (an Atkin--Lehner
matrix W_Q, Q || N: Atkin & Lehner, Math. Ann. 185 (1970) 134-160). For a Maass form f on
Gamma0(N), f|W (z) = f(W z) is again one. For every cusp k, W sigma_k / sqrt(D) maps infinity
to the cusp W(a_k) and conjugates the stabiliser of infinity in Gamma0(N) onto the
stabiliser of W(a_k) (because W Gamma0(N) W^-1 = Gamma0(N)); it is therefore a scaling
matrix of that cusp. Two scaling matrices of Gamma0(N)-equivalent cusps differ by an element
of Gamma0(N) on the left and a translation on the right (Iwaniec, *Spectral Methods of
Automorphic Forms* (2002) §2.3), so there are gamma in Gamma0(N), a cusp l and a rational t with

    gamma W sigma_k / sqrt(D) = +-sigma_l T_t,     T_t = [[1, t], [0, 1]],

and (f|W)(sigma_k z) = f(sigma_l (z + t)) = F_l(z + t). In the cos/sin storage convention a
translation by t multiplies c_l(n) by e(-n t) for even forms and by e(n t) for odd forms
(e(x) = exp(2 pi i x)): the cos/sin pair of frequency n is Re(conj(c) e(n x)) for even and
Im(c e(n x)) for odd forms. Hence the coefficients of f|W at cusp k are

    c'_k(n) = c_l(n) e(-+ n t_k)        (- even, + odd).

The cusp l and the shift t are found exactly: a probe point sigma_k(iH), H > 1, is mapped by W
and pulled back (which gives gamma), and adj(M_l) gamma W M_k is then checked to be an integer
multiple of [[1, t], [0, 1]].

Hecke operators (Iwaniec, *Topics in Classical Automorphic Forms* (1997) Ch. 6, recalled, for the
holomorphic case; the Maass case is common practice), in the normalisation c(1) = 1 where a
Hecke newform has c(n) = lambda_f(n):

* T_p, p not dividing N: (T_p f) has c'(n) = c(p n) + c(n / p) at infinity (c(n/p) = 0 unless
  p | n); the eigenvalue on a Hecke eigenform is c(p).
* U_p, p | N: (U_p f)(z) = p^(-1/2) sum_{b mod p} f((z + b)/p) has c'(n) = c(p n) (derived:
  the sum over b keeps the frequencies divisible by p); the eigenvalue on a newform is c(p).

Both are computed from the coefficients at infinity only; a cusp form is determined by its
expansion at infinity, so the matrix of an operator on the span of several forms follows from
those expansions as well.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from fractions import Fraction
from typing import Sequence

import numpy as np

from maasscomp.arith import is_prime
from maasscomp.errors import InputError
from maasscomp.spectrum.form import Form

__all__ = [
    "CuspImage",
    "OperatorFit",
    "OperatorMatrix",
    "cusp_label",
    "cusp_action",
    "match_scaling",
    "reflection_action",
    "atkin_lehner_action",
    "apply_cusp_action",
    "apply_atkin_lehner",
    "atkin_lehner_eigenvalue",
    "atkin_lehner_matrix",
    "atkin_lehner_eigenvalues",
    "label_atkin_lehner",
    "hecke_image",
    "hecke_eigenvalue",
    "hecke_matrix",
]

#: Height of the probe point (cusp coordinates) used to identify W(a_k); above 1 every
#: point lies in the horoball of its cusp, where the pullback keeps the height.
_PROBE_HEIGHT = 6.0

#: Default absolute error (stored coeff_errors) below which a coefficient is used in a fit.
DEFAULT_ERR_TOL = 1e-9


# ----------------------------------------------------------------------------------------
# cusp names and cusp actions
# ----------------------------------------------------------------------------------------


def cusp_label(group, j: int) -> str:
    """Name of cusp ``j`` by its representative a/c (c | N): "∞", "0", "1/2", "2/3", ...

    The representative is the one the group stores (``group.cusps[j].a`` / ``.c``); infinity
    is written "∞" and 0/1 as "0".
    """
    if not (isinstance(j, (int, np.integer)) and 0 <= int(j) < group.n_cusps):
        raise InputError(f"cusp index {j!r} is not allowed; level {group.level} has cusps 0..{group.n_cusps - 1}")
    c = group.cusps[int(j)]
    if c.index == 0:
        return "∞"
    if c.a == 0:
        return "0"
    return f"{c.a}/{c.c}"


@dataclass(frozen=True)
class CuspImage:
    """How a normaliser element W acts on one cusp: gamma W sigma_k = +-sigma_l T_t.

    Attributes
    ----------
    cusp : int
        k.
    image : int
        l, the cusp Gamma0(N)-equivalent to W(a_k).
    shift : Fraction
        t in [0, 1), exact.
    """

    cusp: int
    image: int
    shift: Fraction


def _mat(M) -> list[list[int]]:
    a = np.asarray(M)
    return [[int(a[0, 0]), int(a[0, 1])], [int(a[1, 0]), int(a[1, 1])]]


def _mul(A, B) -> list[list[int]]:
    return [
        [A[0][0] * B[0][0] + A[0][1] * B[1][0], A[0][0] * B[0][1] + A[0][1] * B[1][1]],
        [A[1][0] * B[0][0] + A[1][1] * B[1][0], A[1][0] * B[0][1] + A[1][1] * B[1][1]],
    ]


def _adj(A) -> list[list[int]]:
    return [[A[1][1], -A[0][1]], [-A[1][0], A[0][0]]]


def match_scaling(group, U) -> tuple[int, Fraction]:
    """The cusp l and shift t with gamma U = +-c sigma_l T_t (gamma in Gamma0(N), c > 0).

    ``U`` is an integer matrix of positive determinant such that U/sqrt(det U) is a scaling
    matrix of the cusp U(infinity) (e.g. W M_k for a normaliser element W, or the reflected
    scaling matrix J M_k J). The probe point U(iH), H = 6, is pulled back (giving gamma and
    l), and adj(M_l) gamma U is checked exactly to be an integer multiple of T_t.

    Raises
    ------
    InputError
        If U/sqrt(det U) is not a scaling matrix of its cusp (the product is not a
        translation).
    """
    Um = _mat(U)
    z = complex(0.0, _PROBE_HEIGHT)
    w = (Um[0][0] * z + Um[0][1]) / (Um[1][0] * z + Um[1][1])
    pb = group.pullback(np.array([w.real]), np.array([w.imag]))
    l = int(np.asarray(pb.cusp).ravel()[0])
    gam = _mat(np.asarray(pb.gamma).reshape(2, 2))
    T = _mul(_adj([list(r) for r in group.cusps[l].scaling]), _mul(gam, Um))
    if T[1][0] != 0 or T[0][0] != T[1][1] or T[0][0] == 0:
        raise InputError(
            f"U = {Um} is not a scaling matrix of its cusp for Gamma0({group.level}): the "
            f"conjugated stabiliser is not a translation group ({T})"
        )
    t = Fraction(T[0][1], T[0][0])
    return l, t - math.floor(t)


def cusp_action(group, W) -> tuple[CuspImage, ...]:
    """The permutation of cusps and the shifts by which ``W`` acts (module docstring).

    Parameters
    ----------
    group : Gamma0
    W : integer 2x2 matrix
        det W > 0 and W Gamma0(N) W^-1 = Gamma0(N) (e.g. ``group.atkin_lehner(Q)``).

    Returns
    -------
    tuple of CuspImage, one per cusp in the group's order.

    Raises
    ------
    InputError
        If W is not an integer matrix of positive determinant, or does not map the
        stabiliser of some cusp onto a stabiliser (W does not normalise Gamma0(N)).
    """
    Wa = np.asarray(W)
    if Wa.shape != (2, 2) or Wa.dtype.kind not in "iuf" or np.any(Wa != np.round(Wa)):
        raise InputError(f"W must be an integer 2x2 matrix, got {W!r}")
    Wm = _mat(Wa)
    D = Wm[0][0] * Wm[1][1] - Wm[0][1] * Wm[1][0]
    if D <= 0:
        raise InputError(f"W = {Wm} has determinant {D}; a positive determinant is required")
    out = []
    for cusp in group.cusps:
        try:
            l, t = match_scaling(group, _mul(Wm, [list(r) for r in cusp.scaling]))
        except InputError as exc:
            raise InputError(
                f"W = {Wm} does not normalise Gamma0({group.level}) (at cusp "
                f"{cusp_label(group, cusp.index)}: {exc})"
            ) from exc
        out.append(CuspImage(cusp=cusp.index, image=l, shift=t))
    images = sorted(ci.image for ci in out)
    if images != list(range(group.n_cusps)):
        raise InputError(f"W = {Wm} does not permute the cusps of Gamma0({group.level})")
    return tuple(out)


def reflection_action(group) -> tuple[CuspImage, ...]:
    """How J: z -> -conj(z) acts on the cusps: J sigma_k J = +-gamma^-1 sigma_l T_t.

    For a form of parity eps (f(J z) = eps f(z)): F_k(J z) = eps F_l(z + t). J sigma_k J is
    the scaling matrix M_k with its off-diagonal entries negated (J normalises Gamma0(N),
    docs/theory.md §1.1).
    """
    out = []
    for cusp in group.cusps:
        (a, b), (c, d) = cusp.scaling
        l, t = match_scaling(group, [[a, -b], [-c, d]])
        out.append(CuspImage(cusp=cusp.index, image=l, shift=t))
    return tuple(out)


def _check_Q(group, Q) -> int:
    ok = isinstance(Q, (int, np.integer)) and not isinstance(Q, bool) and int(Q) in group.exact_divisors()
    if not ok:
        raise InputError(
            f"Q={Q!r} is not an exact divisor of N={group.level}; allowed: {list(group.exact_divisors())}"
        )
    return int(Q)


def atkin_lehner_action(group, Q: int) -> tuple[CuspImage, ...]:
    """:func:`cusp_action` of the group's Atkin--Lehner matrix W_Q (``group.atkin_lehner``)."""
    return cusp_action(group, group.atkin_lehner(_check_Q(group, Q)))


def apply_cusp_action(coeffs: np.ndarray, action: Sequence[CuspImage], parity: str) -> np.ndarray:
    """Coefficients of f|W at every cusp from those of f (module docstring).

    Parameters
    ----------
    coeffs : ndarray, shape (n_cusps, M)
        c_j(n) of f (real or complex).
    action : sequence of CuspImage
        From :func:`cusp_action`.
    parity : {"even", "odd"}

    Returns
    -------
    ndarray, shape (n_cusps, M), complex
        c'_k(n) = c_l(n) e(-n t) (even) or c_l(n) e(n t) (odd).
    """
    if parity not in ("even", "odd"):
        raise InputError(f"parity {parity!r} is not allowed; use 'even' or 'odd'")
    C = np.asarray(coeffs)
    if C.ndim != 2 or C.shape[0] != len(action):
        raise InputError(f"coeffs has shape {C.shape}; expected ({len(action)}, M)")
    n = np.arange(1, C.shape[1] + 1)
    sgn = -1.0 if parity == "even" else 1.0
    out = np.empty(C.shape, dtype=complex)
    for ci in action:
        # exact phase: n t mod 1 in rationals, so large n keep full accuracy
        frac = np.array([float((k * ci.shift) % 1) for k in n]) if ci.shift else np.zeros(n.size)
        out[ci.cusp] = C[ci.image] * np.exp(sgn * 2j * np.pi * frac)
    return out


def apply_atkin_lehner(group, form: Form, Q: int) -> Form:
    """The form f|W_Q (same R and parity), with coefficients at every cusp.

    The stored errors are carried along with the cusps they belong to. ``extra`` records
    the operator (``{"image_of": "W_Q"}``); everything else is copied.
    """
    _check_form(group, form)
    act = atkin_lehner_action(group, Q)
    C = apply_cusp_action(form.coeffs, act, form.parity)
    E = np.asarray(form.coeff_errors)[[ci.image for ci in act]]
    if np.max(np.abs(C.imag), initial=0.0) == 0.0:
        C = C.real.copy()
    return Form(
        level=form.level,
        R=form.R,
        symmetry=form.symmetry,
        coeffs=C,
        coeff_errors=E,
        R_error=form.R_error,
        hecke_residual=form.hecke_residual,
        params=form.params,
        is_new=form.is_new,
        multiplicity=form.multiplicity,
        basis_index=form.basis_index,
        extra={"image_of": f"W_{Q}"},
    )


def _check_form(group, form: Form) -> None:
    if not isinstance(form, Form):
        raise InputError(f"expected a Form, got {type(form).__name__}")
    if form.level != group.level:
        raise InputError(f"the form has level {form.level} but the group is Gamma0({group.level})")
    if np.asarray(form.coeffs).shape[0] != group.n_cusps:
        raise InputError(
            f"the form stores {np.asarray(form.coeffs).shape[0]} cusp expansions; "
            f"Gamma0({group.level}) has {group.n_cusps} cusps"
        )


# ----------------------------------------------------------------------------------------
# fits
# ----------------------------------------------------------------------------------------


@dataclass(frozen=True)
class OperatorFit:
    """Eigenvalue of an operator on one form, fitted on its coefficients.

    Attributes
    ----------
    value : float
        Real part of the least-squares eigenvalue eta = <c, c'> / <c, c> (raw, not rounded).
    imag : float
        Its imaginary part (0 up to rounding for the self-adjoint operators here).
    residual : float
        max |c' - eta c| over the entries used, relative to max |c| there.
    n_used : int
        Number of coefficients (entries) in the fit.
    """

    value: float
    imag: float
    residual: float
    n_used: int

    @property
    def sign(self) -> int:
        """+-1 if ``value`` is within 1e-6 of +-1 with a residual below 1e-6, else 0."""
        if self.residual <= 1e-6 and abs(self.imag) <= 1e-6:
            for s in (1, -1):
                if abs(self.value - s) <= 1e-6:
                    return s
        return 0


@dataclass(frozen=True)
class OperatorMatrix:
    """Matrix A of an operator on the span of forms f_1..f_m: T f_i = sum_k A[k, i] f_k.

    Attributes
    ----------
    matrix : ndarray, shape (m, m)
    residual : float
        max |T f_i - sum_k A[k, i] f_k| over the entries used, relative to the largest
        coefficient of the images.
    n_used : int
        Number of entries per form in the fit.
    """

    matrix: np.ndarray
    residual: float
    n_used: int


def _fit_scalar(c: np.ndarray, cp: np.ndarray) -> OperatorFit:
    c = np.asarray(c, dtype=complex)
    cp = np.asarray(cp, dtype=complex)
    den = float(np.vdot(c, c).real)
    if c.size == 0 or den == 0.0:
        raise InputError("no well-determined coefficients to fit an eigenvalue on")
    eta = complex(np.vdot(c, cp) / den)
    res = float(np.max(np.abs(cp - eta * c)) / np.max(np.abs(c)))
    return OperatorFit(value=eta.real, imag=eta.imag, residual=res, n_used=int(c.size))


def _fit_matrix(V: np.ndarray, TV: np.ndarray) -> OperatorMatrix:
    """Least squares A with V A = TV; V, TV complex (entries, m), A real."""
    Vr = np.vstack([V.real, V.imag])
    Tr = np.vstack([TV.real, TV.imag])
    if Vr.shape[0] < Vr.shape[1]:
        raise InputError(f"{Vr.shape[0]} entries are too few to fit a {Vr.shape[1]}-dimensional operator")
    A, *_ = np.linalg.lstsq(Vr, Tr, rcond=None)
    res = float(np.max(np.abs(Vr @ A - Tr)) / max(np.max(np.abs(Tr)), 1e-300))
    return OperatorMatrix(matrix=A, residual=res, n_used=int(V.shape[0]))


def _good_entries(forms: Sequence[Form], err_tol: float) -> np.ndarray:
    """Entries (n_cusps, M) whose stored error is below err_tol * max(1, |c|) in every form."""
    M = min(np.asarray(f.coeffs).shape[1] for f in forms)
    mask = np.ones((np.asarray(forms[0].coeffs).shape[0], M), dtype=bool)
    for f in forms:
        C = np.asarray(f.coeffs)[:, :M]
        E = np.asarray(f.coeff_errors)[:, :M]
        mask &= np.isfinite(C) & (E <= err_tol * np.maximum(1.0, np.abs(C)))
    return mask


# ----------------------------------------------------------------------------------------
# Atkin--Lehner
# ----------------------------------------------------------------------------------------


def atkin_lehner_eigenvalue(group, form: Form, Q: int, *, err_tol: float = DEFAULT_ERR_TOL) -> OperatorFit:
    """Eigenvalue eta of W_Q on ``form`` (f|W_Q = eta f), fitted on all cusps.

    Every entry c_j(n) whose stored error is below ``err_tol`` (times max(1, |c|)) both in f
    and at the cusp it comes from enters the least-squares fit. For a newform with trivial
    character eta = +-1 (Atkin & Lehner 1970, Thm 3 for the holomorphic case; the Maass case
    is common practice); a residual far above the coefficient errors says the form is not
    an eigenform of W_Q (e.g. a member of an echelon basis of an oldspace).
    """
    _check_form(group, form)
    act = atkin_lehner_action(group, Q)
    C = np.asarray(form.coeffs)
    Cp = apply_cusp_action(C, act, form.parity)
    good = _good_entries([form], err_tol)
    good &= good[[ci.image for ci in act]]
    return _fit_scalar(C[good], Cp[good])


def atkin_lehner_matrix(group, forms: Sequence[Form], Q: int, *, err_tol: float = DEFAULT_ERR_TOL) -> OperatorMatrix:
    """Matrix of W_Q on the span of ``forms`` (same level, R and parity), fitted on all cusps."""
    forms = list(forms)
    if not forms:
        raise InputError("atkin_lehner_matrix needs at least one form")
    for f in forms:
        _check_form(group, f)
        if f.parity != forms[0].parity:
            raise InputError("the forms of one span must share their parity")
    act = atkin_lehner_action(group, Q)
    M = min(np.asarray(f.coeffs).shape[1] for f in forms)
    good = _good_entries(forms, err_tol)
    good &= good[[ci.image for ci in act]]
    V = np.stack([np.asarray(f.coeffs)[:, :M][good] for f in forms], axis=1)
    TV = np.stack([apply_cusp_action(np.asarray(f.coeffs)[:, :M], act, f.parity)[good] for f in forms], axis=1)
    return _fit_matrix(V, TV)


def atkin_lehner_eigenvalues(group, form: Form, *, err_tol: float = DEFAULT_ERR_TOL) -> dict[int, OperatorFit]:
    """:func:`atkin_lehner_eigenvalue` for every exact divisor Q > 1 of N."""
    return {Q: atkin_lehner_eigenvalue(group, form, Q, err_tol=err_tol) for Q in group.exact_divisors() if Q > 1}


def label_atkin_lehner(group, form: Form, *, err_tol: float = DEFAULT_ERR_TOL) -> dict:
    """Fit every W_Q (Q || N, Q > 1) and record the result in ``form.extra``.

    Writes ``form.extra["atkin_lehner"]`` = {"Q": {"eigenvalue": raw value, "imag": ...,
    "residual": ..., "sign": +-1 or 0}} (keys are the exact divisors as strings; "sign" is 0
    when the form is not an eigenform of W_Q within 1e-6) and returns that dict.
    """
    out = {}
    for Q, fit in atkin_lehner_eigenvalues(group, form, err_tol=err_tol).items():
        out[str(Q)] = {
            "eigenvalue": float(fit.value),
            "imag": float(fit.imag),
            "residual": float(fit.residual),
            "sign": int(fit.sign),
            "n_used": int(fit.n_used),
        }
    form.extra["atkin_lehner"] = out
    return out


# ----------------------------------------------------------------------------------------
# Hecke operators
# ----------------------------------------------------------------------------------------


def hecke_image(coeffs: np.ndarray, p: int, level: int) -> np.ndarray:
    """Coefficients at infinity of T_p f (p not dividing N) or U_p f (p | N).

    Parameters
    ----------
    coeffs : ndarray, shape (M,)
        c(1..M) of f at infinity (real part used: the expansion at infinity is a pure
        cs-series).
    p : int
        A prime.
    level : int
        N.

    Returns
    -------
    ndarray, shape (M // p,)
        c(pn) + c(n/p) (T_p) or c(pn) (U_p) for n = 1..M//p (module docstring).
    """
    if not (isinstance(p, (int, np.integer)) and is_prime(int(p))):
        raise InputError(f"p={p!r} is not allowed; it must be a prime")
    p = int(p)
    c = np.real(np.asarray(coeffs)).astype(float).ravel()
    L = c.size // p
    if L < 1:
        raise InputError(f"{c.size} coefficients are too few for the Hecke operator at p={p}")
    n = np.arange(1, L + 1)
    out = c[p * n - 1].copy()
    if level % p:
        div = n % p == 0
        out[div] += c[n[div] // p - 1]
    return out


def _good_count(form: Form, err_tol: float) -> int:
    """Number of leading coefficients at infinity with stored error below err_tol."""
    c = np.real(np.asarray(form.coeffs)[0])
    e = np.asarray(form.coeff_errors)[0]
    ok = np.isfinite(c) & (e <= err_tol * np.maximum(1.0, np.abs(c)))
    return int(np.sum(np.cumprod(ok)))


def hecke_eigenvalue(form: Form, p: int, *, err_tol: float = DEFAULT_ERR_TOL) -> OperatorFit:
    """Eigenvalue of T_p (p not dividing N) or U_p (p | N) on ``form`` with its residual.

    Fitted on the leading coefficients at infinity whose stored errors are below
    ``err_tol``; for a Hecke eigenform with c(1) = 1 the value is c(p).
    """
    if not isinstance(form, Form):
        raise InputError(f"expected a Form, got {type(form).__name__}")
    K = _good_count(form, err_tol)
    c = np.real(np.asarray(form.coeffs)[0, :K])
    img = hecke_image(c, p, form.level)
    return _fit_scalar(c[: img.size], img)


def hecke_matrix(forms: Sequence[Form], p: int, *, err_tol: float = DEFAULT_ERR_TOL) -> OperatorMatrix:
    """Matrix of T_p (p not dividing N) or U_p (p | N) on the span of ``forms``.

    The forms share the level (and normally R and parity); the fit uses the leading
    coefficients at infinity that are well determined in every form.
    """
    forms = list(forms)
    if not forms:
        raise InputError("hecke_matrix needs at least one form")
    if any(not isinstance(f, Form) for f in forms):
        raise InputError("hecke_matrix needs Form objects")
    if len({f.level for f in forms}) != 1:
        raise InputError("the forms of one span must share their level")
    K = min(_good_count(f, err_tol) for f in forms)
    B = np.stack([np.real(np.asarray(f.coeffs)[0, :K]) for f in forms], axis=1)
    TB = np.stack([hecke_image(B[:, i], p, forms[0].level) for i in range(B.shape[1])], axis=1)
    L = TB.shape[0]
    # the rows n <= K/p must determine the span (g(dz) vanishes below n = d)
    sv = np.linalg.svd(B[:L], compute_uv=False)
    if L < B.shape[1] or sv[-1] <= 1e-8 * sv[0]:
        raise InputError(
            f"the {L} coefficients c(1..{L}) used for the operator at p={p} do not determine the "
            f"span of {B.shape[1]} forms ({K} well-determined coefficients stored; need more)"
        )
    return _fit_matrix(B[:L].astype(complex), TB.astype(complex))
