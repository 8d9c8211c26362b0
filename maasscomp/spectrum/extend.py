"""More Fourier coefficients of a stored form, and the L-function label of a newform.

Hejhal's inversion (docs/theory.md §1.2 item 3, real version): on a horocycle of height Y,

    a(n) sqrt(Y) Kt_R(2 pi n Y) = (2/Q) sum_{m=1}^{Q} f(z_m) cs(2 pi n x_m),

with f(z_m) evaluated at the pulled-back points (height >= Y0 in the coordinate of their
cusp), where the stored coefficients suffice. The sum is a type-II DCT/DST. Heights with
2 pi n Y below the turning point R keep Kt(2 pi n Y) of moderate size; for each n the best of
three heights is used and the second best gives the error estimate.
"""

from __future__ import annotations

import math

import numpy as np

from maasscomp.errors import InputError
from maasscomp.hejhal.params import truncation_M0
from maasscomp.hejhal.system import TWO_PI
from maasscomp.special import ktilde
from maasscomp.spectrum.form import Form


def extend_form_coefficients(group, form: Form, n_max: int, *, eps: float = 1e-14,
                             heights: tuple[float, ...] = (0.95, 0.82, 0.7)) -> tuple[np.ndarray, np.ndarray]:
    """a(1..n_max) at infinity of a stored form of any level, with error estimates.

    The form's stored expansion at every cusp is used (docs/theory.md,
    conventions: F_j(w) = sum sqrt(y) Kt(2 pi l y) [Re c_j(l) cs(2 pi l x) + Im c_j(l)
    cs'(2 pi l x)] at the pulled-back point w of cusp j). A form of squarefree level that
    stores only its expansion at infinity uses c_j = eps_Q c_0 at the cusp W_Q(infinity)
    with the signs of its symmetry class (docs/theory.md §1.5).

    Parameters
    ----------
    group : Gamma0
        The form's group.
    form : Form
        A stored form whose coefficients reach the truncation at height Y0.
    n_max : int
        Number of coefficients wanted (10 <= n_max <= 200000).
    eps : float
        Truncation target of the expansions evaluated at the pulled-back points.
    heights : tuple of float
        Factors c with Y = c R / (2 pi n_max) (at least two).

    Returns
    -------
    a, err : ndarray
        The coefficients (a(1) = 1) and their estimated absolute errors.
    """
    if group.level != form.level:
        raise InputError(f"coefficient extension needs the group of the form (level {form.level}), got level {group.level}")
    if not (isinstance(n_max, int) and 10 <= n_max <= 200000):
        raise InputError(f"n_max={n_max!r} is not allowed; it must be an integer in [10, 200000]")
    R = form.R
    C = np.asarray(form.coeffs)
    # a squarefree-level form given by its expansion at infinity alone uses its signs eps_Q;
    # otherwise every cusp's stored expansion is read
    one_cusp = group.is_squarefree and C.shape[0] == 1
    if not one_cusp and C.shape[0] != group.n_cusps:
        raise InputError(f"the form stores {C.shape[0]} cusp expansions; level {group.level} has {group.n_cusps} cusps")
    Y0 = group.fundamental_domain_height
    need = truncation_M0(R, Y0, eps)
    if C.shape[1] < need:
        raise InputError(f"the form stores {C.shape[1]} coefficients; extending it needs at least {need}")
    if one_cusp:
        rows = np.real(C[:1, :need]).astype(float)
        imag = np.zeros_like(rows)
    else:
        rows = np.real(C[:, :need]).astype(float)
        imag = np.imag(C[:, :need]).astype(float) if np.iscomplexobj(C) else np.zeros_like(rows)
    cs = np.cos if form.parity == "even" else np.sin
    cs_other = np.sin if form.parity == "even" else np.cos
    l = np.arange(1, need + 1)
    n = np.arange(1, n_max + 1)
    vals, kmag = [], []
    for c in heights:
        Y = min(0.9 * Y0, c * max(R, 1.0) / (TWO_PI * n_max))
        Q = max(n_max, truncation_M0(R, Y, eps)) + 8
        x = (np.arange(1, Q + 1) - 0.5) / (2 * Q)
        pb = group.pullback(x, np.full_like(x, Y))
        jc = np.asarray(pb.cusp, dtype=np.int64)
        if one_cusp:
            sign = np.array([form.symmetry.al_sign(group.cusps[int(j)].atkin_lehner_Q) for j in jc])
            row_of = np.zeros(Q, dtype=np.int64)
        else:
            sign = np.ones(Q)
            row_of = jc
        ys, xs = np.asarray(pb.y), np.asarray(pb.x)
        f = np.empty(Q)
        for i0 in range(0, Q, 4096):  # blocks keep the Q x need work arrays small
            sl = slice(i0, i0 + 4096)
            kb = ktilde(R, (TWO_PI * ys[sl])[:, None] * l[None, :]) * np.sqrt(ys[sl])[:, None]
            ang = TWO_PI * xs[sl][:, None] * l[None, :]
            r = row_of[sl]
            f[sl] = sign[sl] * np.sum(kb * (cs(ang) * rows[r] + cs_other(ang) * imag[r]), axis=1)
        from scipy.fft import dct, dst

        b = dct(f, type=2)[1 : n_max + 1] / Q if form.parity == "even" else dst(f, type=2)[:n_max] / Q
        k = math.sqrt(Y) * ktilde(R, TWO_PI * n * Y)
        vals.append(b / k)
        kmag.append(np.abs(k))
    vals, kmag = np.array(vals), np.array(kmag)
    order = np.argsort(-kmag, axis=0)
    best = np.take_along_axis(vals, order[:1], 0)[0]
    second = np.take_along_axis(vals, order[1:2], 0)[0]
    err = np.maximum(np.abs(best - second), 1e-16 * np.abs(best))
    best[0] = 1.0
    return best, err


#: The functional-equation check is skipped when it would need more coefficients
#: (its cutoff grows quickly with R: about 190 at R = 9.5, 8e5 at R = 100).
LFUNCTION_MAX_COEFFS = 20000


def lfunction_label(group, form: Form) -> dict:
    """Functional-equation check of a newform of any level (spectrum.lfunction).

    The predicted sign (-1)^delta eta_N needs the Atkin--Lehner eigenvalues: at squarefree
    levels they follow from a(p) = -eps_p/sqrt(p); at other levels they are fitted on the
    stored cusp expansions (:func:`maasscomp.spectrum.operators.atkin_lehner_eigenvalues`).

    Returns a dict for ``Form.extra["lfunction"]``: the sign found, the sign predicted from
    the Atkin--Lehner data, the residual, the number of coefficients used and ``passed``;
    at non-squarefree levels also ``fricke_eigenvalue`` (the raw fitted eta_N); or
    ``{"skipped": reason}`` when the check would need more than
    :data:`LFUNCTION_MAX_COEFFS` coefficients or the stored coefficients do not allow the
    extension.
    """
    from maasscomp.spectrum.lfunction import TooFewCoefficients, functional_equation_check

    al = None
    fricke = None
    if not group.is_squarefree:
        from maasscomp.spectrum.operators import atkin_lehner_eigenvalue

        fit = atkin_lehner_eigenvalue(group, form, group.level)
        fricke = float(fit.value)
        al = {group.level: fricke}
    a0 = np.real(form.coeffs[0])
    try:
        chk = functional_equation_check(form.R, a0, form.parity, group.level, al_eigenvalues=al)
        used = int(form.coeffs.shape[1])
    except TooFewCoefficients as exc:
        n_need = exc.needed + 8
        if n_need > LFUNCTION_MAX_COEFFS:
            return {"skipped": f"needs {n_need} coefficients (limit {LFUNCTION_MAX_COEFFS})"}
        try:
            a, _ = extend_form_coefficients(group, form, n_need)
        except InputError as exc2:
            return {"skipped": f"coefficient extension not possible: {exc2}"}
        chk = functional_equation_check(form.R, a, form.parity, group.level, al_eigenvalues=al)
        used = n_need
    out = {
        "sign": int(chk.sign),
        "predicted_sign": None if chk.predicted_sign is None else int(chk.predicted_sign),
        "residual": float(chk.residual),
        "passed": bool(chk.passed),
        "n_coeffs_used": used,
    }
    if fricke is not None:
        out["fricke_eigenvalue"] = fricke
    return out
