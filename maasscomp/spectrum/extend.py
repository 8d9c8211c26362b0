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
    """a(1..n_max) at infinity of a form of squarefree level, with error estimates.

    Parameters
    ----------
    group : Gamma0
        The form's group (squarefree level).
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
    if not group.is_squarefree or group.level != form.level:
        raise InputError(f"coefficient extension needs the squarefree group of the form (level {form.level})")
    if not (isinstance(n_max, int) and 10 <= n_max <= 200000):
        raise InputError(f"n_max={n_max!r} is not allowed; it must be an integer in [10, 200000]")
    R = form.R
    a_st = np.real(np.asarray(form.coeffs[0])).astype(float)
    Y0 = group.fundamental_domain_height
    need = truncation_M0(R, Y0, eps)
    if a_st.size < need:
        raise InputError(f"the form stores {a_st.size} coefficients; extending it needs at least {need}")
    a_st = a_st[:need]
    cs = np.cos if form.parity == "even" else np.sin
    l = np.arange(1, need + 1)
    n = np.arange(1, n_max + 1)
    vals, kmag = [], []
    for c in heights:
        Y = min(0.9 * Y0, c * max(R, 1.0) / (TWO_PI * n_max))
        Q = max(n_max, truncation_M0(R, Y, eps)) + 8
        x = (np.arange(1, Q + 1) - 0.5) / (2 * Q)
        pb = group.pullback(x, np.full_like(x, Y))
        sign = np.array([form.symmetry.al_sign(group.cusps[int(j)].atkin_lehner_Q) for j in np.asarray(pb.cusp)])
        ys, xs = np.asarray(pb.y), np.asarray(pb.x)
        f = np.empty(Q)
        for i0 in range(0, Q, 4096):  # blocks keep the Q x need work arrays small
            sl = slice(i0, i0 + 4096)
            kb = ktilde(R, (TWO_PI * ys[sl])[:, None] * l[None, :]) * np.sqrt(ys[sl])[:, None]
            f[sl] = sign[sl] * ((kb * cs(TWO_PI * xs[sl][:, None] * l[None, :])) @ a_st)
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
    """Functional-equation check of a newform of squarefree level (spectrum.lfunction).

    Returns a dict for ``Form.extra["lfunction"]``: the sign found, the sign predicted from
    the Atkin--Lehner data, the residual, the number of coefficients used and ``passed``;
    or ``{"skipped": reason}`` when the check would need more than
    :data:`LFUNCTION_MAX_COEFFS` coefficients.
    """
    from maasscomp.spectrum.lfunction import TooFewCoefficients, functional_equation_check

    try:
        chk = functional_equation_check(form.R, np.real(form.coeffs[0]), form.parity, group.level)
        used = int(form.coeffs.shape[1])
    except TooFewCoefficients as exc:
        n_need = exc.needed + 8
        if n_need > LFUNCTION_MAX_COEFFS:
            return {"skipped": f"needs {n_need} coefficients (limit {LFUNCTION_MAX_COEFFS})"}
        a, _ = extend_form_coefficients(group, form, n_need)
        chk = functional_equation_check(form.R, a, form.parity, group.level)
        used = n_need
    return {
        "sign": int(chk.sign),
        "predicted_sign": None if chk.predicted_sign is None else int(chk.predicted_sign),
        "residual": float(chk.residual),
        "passed": bool(chk.passed),
        "n_coeffs_used": used,
    }
