"""Maass forms with a Dirichlet character: confirmation, Hecke relations, conjugate forms,
evaluation.

A form with character chi (f(gamma z) = chi(d) f(z) on Gamma0(N), chi even) is found by
:func:`maasscomp.spectrum.search.search_forms` with ``character=chi`` on the complex system
of :mod:`maasscomp.hejhal.charsystem`; this module turns the roots of the two heights into
:class:`Form` records (docs/theory.md §12):

* storage: ``Form.coeffs[j, n-1]`` = c_j(nu_n^+) (the n-th positive frequency of
  kappa_j + Z), ``extra["coeffs_negative"][j, n-1]`` = c_j(nu_n^-) (the n-th negative one,
  kappa_j - n); ``extra["cusp_shifts"]`` the kappa_j as fractions, ``extra["singular_cusps"]``
  the cusps with kappa_j = 0; ``Form.character`` = chi. At infinity c(-n) = eps c(n).
* normalisation c_inf(1) = 1; in an eigenspace of dimension m > 1 a basis of eigenvectors
  of the Hecke operators T_p (p not dividing N) with chi (:func:`hecke_image_chi`), or an
  echelon basis where they do not separate the space.
* the Hecke relations with chi, a(m) a(n) = sum_{d | (m, n)} chi(d) a(mn/d^2)
  (:func:`hecke_residual_chi`; Iwaniec, *Spectral Methods of Automorphic Forms*, 2nd ed.
  2002, §8.5, recalled for weight 0 from the holomorphic case, Iwaniec, *Topics in
  Classical Automorphic Forms* (1997) Thm. 6.19).
* :func:`conjugate_form` derives the form of chi-bar from one of chi:
  g(z) = conj(f(-conj z)) has character chi-bar, the same parity and
  c_inf(n; g) = conj(c_inf(n; f)).
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np
import scipy.linalg as sla

from maasscomp.errors import InputError
from maasscomp.hejhal.family import build_family
from maasscomp.hejhal.params import choose_params
from maasscomp.hejhal.types import SymmetryClass
from maasscomp.spectrum import pencil as pn
from maasscomp.spectrum.form import Form

#: As in :mod:`maasscomp.spectrum.confirm` and :mod:`maasscomp.spectrum.search`.
GOOD_AMPLIFICATION = 1e6
COMPARE_AMPLIFICATION = 1e4
_U = 2.0**-53


# ----------------------------------------------------------------------------------------
# Hecke operators with a character
# ----------------------------------------------------------------------------------------


def chi_values(chi, nmax: int) -> np.ndarray:
    """chi(0..nmax) as complex numbers."""
    from maasscomp.groups.characters import complex_value

    return np.array([complex_value(chi, n) for n in range(nmax + 1)], dtype=complex)


def hecke_image_chi(a: np.ndarray, p: int, chi) -> np.ndarray:
    """Coefficients at infinity of T_p f for p not dividing N:
    (T_p f)(n) = a(pn) + chi(p) a(n/p) (a(n/p) = 0 unless p | n), n = 1..len(a)//p.

    With T_p f(z) = p^{-1/2} [chi(p) f(pz) + sum_{b mod p} f((z + b)/p)] this is the usual
    action on Fourier coefficients in the sqrt(y) K_{iR}(2 pi |n| y) normalisation
    (Iwaniec 2002, §8.5; recalled)."""
    a = np.asarray(a)
    L = len(a) // p
    from maasscomp.groups.characters import complex_value

    cp = complex_value(chi, p)
    out = np.array(a[p - 1: p * L: p], dtype=complex)
    n = np.arange(1, L + 1)
    div = n % p == 0
    out[div] += cp * a[n[div] // p - 1]
    return out


def hecke_residual_chi(a: np.ndarray, chi, nmax: int) -> float:
    """max over m, n >= 2, mn <= nmax, of |a(m) a(n) - sum_{d | (m, n)} chi(d) a(mn/d^2)|
    for a normalised eigenform (a(1) = 1), a(n) = ``a[n-1]``; relative to max(1, |a(m)a(n)|)."""
    a = np.asarray(a)
    nmax = min(nmax, len(a))
    cv = chi_values(chi, nmax)
    worst = 0.0
    for m in range(2, nmax + 1):
        for n in range(m, nmax // m + 1):
            g = math.gcd(m, n)
            s = sum(cv[d] * a[m * n // (d * d) - 1] for d in range(1, g + 1) if g % d == 0)
            lhs = a[m - 1] * a[n - 1]
            worst = max(worst, abs(lhs - s) / max(1.0, abs(lhs)))
    return float(worst)


def _usable_primes(level: int, K: int, count: int = 4) -> list[int]:
    out = []
    p = 2
    while len(out) < count and 2 * p <= K:
        if level % p and all(p % q for q in range(2, int(p ** 0.5) + 1)):
            out.append(p)
        p += 1
    return out


# ----------------------------------------------------------------------------------------
# confirmation
# ----------------------------------------------------------------------------------------


def _complex_gap(C1: np.ndarray, C2: np.ndarray, mask: np.ndarray) -> float:
    """Sine of the largest principal angle between the complex spans of C1[i][mask] and
    C2[i][mask]."""
    X1 = np.stack([c[mask] for c in C1], axis=1)
    X2 = np.stack([c[mask] for c in C2], axis=1)
    Q1 = np.linalg.qr(X1)[0]
    Q2 = np.linalg.qr(X2)[0]
    s = np.linalg.svd(Q1.conj().T @ Q2, compute_uv=False)
    cmin = float(np.min(s)) if s.size else 0.0
    return math.sqrt(max(0.0, 1.0 - min(1.0, cmin) ** 2))


@lru_cache(maxsize=32)
def _system_at(level: int, chi, parity: str, Y: float, R_top: float, eps: float):
    from maasscomp.groups import gamma0

    p = choose_params(R_top + 0.5, Y, eps)
    cls = SymmetryClass(parity)
    return build_family(gamma0(level), [cls], p, "character", chi).systems[cls]


def _null_at(system, R: float, m: int, extra: int = 2):
    A = system.matrix(R)
    dr, dc = pn.scalings(A)
    As = pn.scale(A, dr, dc)
    lu = sla.lu_factor(As, check_finite=False)
    nb = pn.null_basis(As, lu, m + extra)
    return nb.sv, dc[:, None] * nb.vectors[:, :m], dc


def accept_character(group, chi, cls: SymmetryClass, a, b, settings, third):
    """Accept an eigenvalue of the character system seen at both heights (same null
    dimension and complex null space) and build its forms; (ok, reason, forms)."""
    from maasscomp.spectrum.confirm import store_height

    if a.m != b.m:
        return False, f"null space of dimension {a.m} at Y1 but {b.m} at Y2", []
    if a.m == 0:
        return False, "no null direction", []
    sa, sb = a.system, b.system
    M = min(sa.params.M0, sb.params.M0)
    mask = ((sa.storage_scale(a.unknown_scale)[:, :, :M] <= COMPARE_AMPLIFICATION * a.unknown_scale.min())
            & (sb.storage_scale(b.unknown_scale)[:, :, :M] <= COMPARE_AMPLIFICATION * b.unknown_scale.min()))
    C1 = sa.coefficients(a.vectors)[:, :, :, :M]
    C2 = sb.coefficients(b.vectors)[:, :, :, :M]
    gap = _complex_gap(C1, C2, mask)
    if not (np.isfinite(gap) and gap <= settings.coeff_tol):
        return False, f"null spaces at the two heights differ (sin angle {gap:.2e})", []
    m = a.m
    R = 0.5 * (a.R + b.R)
    m_store = settings.n_coeffs
    Y2 = b.system.params.Y
    Ya = min(Y2, store_height(R, m_store))
    if Ya == Y2 and third is not None:
        s1, sv1, U1, dc1 = b.system, b.sv, b.vectors, b.unknown_scale
        s2, sv2, U2, dc2 = third(R, m)
    else:
        s1, s2 = (_system_at(group.level, chi, cls.parity, Y, math.ceil(4 * R) / 4, settings.eps)
                  for Y in (Ya, 0.9 * Ya))
        (sv1, U1, dc1), (sv2, U2, dc2) = (_null_at(s, R, m) for s in (s1, s2))
    worst = max(sv1[m - 1], sv2[m - 1])
    if not worst <= settings.mult_tol:
        return False, (f"eigenspace of dimension {m} not found at the storage heights "
                       f"(singular value {worst:.1e})"), []
    Ms = min(m_store, s1.params.M0, s2.params.M0)
    Ca = s1.coefficients(U1)[:, :, :, :Ms]
    Cb = s2.coefficients(U2)[:, :, :, :Ms]
    good = ((s1.storage_scale(dc1)[:, :, :Ms] <= GOOD_AMPLIFICATION * dc1.min())
            & (s2.storage_scale(dc2)[:, :, :Ms] <= GOOD_AMPLIFICATION * dc2.min()))
    K = int(np.sum(np.cumprod(good[0, 0])))
    hecke_nmax = min(settings.hecke_nmax, K)
    spread = abs(a.R - b.R)
    kappa = min(a.kappa, b.kappa)
    rounding = 8.0 * _U * kappa if math.isfinite(kappa) else 0.0
    R_error = max(spread, rounding, 4.0 * _U * max(1.0, R))
    members = _members(Ca, Cb, good, K, group.level, chi)
    if members is None:
        return False, f"no Hecke basis on {K} well-determined coefficients at infinity", []
    from maasscomp.groups.characters import cusp_shifts

    kap = cusp_shifts(group, chi)
    base_extra = {
        "R_heights": [float(a.R), float(b.R)],
        "R_error_parts": {"two_height_spread": float(spread), "rounding_bound": float(rounding),
                          "condition": float(kappa)},
        "singular_values": [float(v) for v in a.sv[: m + 1]],
        "well_determined_at_infinity": K,
        "system": "character",
        "coefficient_subspace_gap": float(gap),
        "cusp_shifts": [str(k) for k in kap],
        "singular_cusps": [c.name for c, k in zip(group.cusps, kap) if k == 0],
        "expansion": "F_j(z) = sum over nu in kappa_j + Z of c_j(nu) sqrt(y) K_iR(2 pi |nu| y) e(nu x)",
    }
    is_new, newness = newness_of_eigenspace(Ca[:, 0, 0, :K], group.level, chi)
    base_extra["newness"] = newness
    forms = []
    for idx, (coeffs, errs, eig) in enumerate(members):
        cinf = coeffs[0, 0]
        if eig:
            hres = hecke_residual_chi(cinf, chi, hecke_nmax)
        else:
            hres = _eigen_residual(coeffs[0, 0], chi, K)
        if not hres <= settings.hecke_tol:
            return False, f"Hecke residual {hres:.2e} above {settings.hecke_tol:.0e} (basis member {idx})", []
        extra = dict(base_extra)
        extra["hecke_eigenform"] = bool(eig)
        extra["coeffs_negative"] = np.ascontiguousarray(coeffs[:, 1])
        extra["coeff_errors_negative"] = np.ascontiguousarray(errs[:, 1])
        if m > 1:
            extra["basis"] = "hecke" if eig else "echelon"
        forms.append(Form(level=group.level, R=float(R), symmetry=cls,
                          coeffs=np.ascontiguousarray(coeffs[:, 0]),
                          coeff_errors=np.ascontiguousarray(errs[:, 0]), R_error=float(R_error),
                          hecke_residual=float(hres), params=s1.params, is_new=is_new, multiplicity=m,
                          basis_index=idx, extra=extra, character=chi))
    if settings.lfunction_check and is_new:
        for f in forms:
            if f.extra["hecke_eigenform"]:
                f.extra["lfunction"] = character_lfunction_label(group, f)
    return True, f"confirmed, multiplicity {m}", forms


def newness_of_eigenspace(B: np.ndarray, level: int, chi, tol: float = 1e-6) -> tuple[bool | None, str]:
    """New or old, for every form of one eigenspace (fixed R, chi, parity), and why.

    An oldform from level M (cond(chi) | M | N, M < N) brings the forms g(dz), d | N/M, into
    the eigenspace: at least two of them (same R, character and parity), and g(pz), p a
    prime dividing N/M, has c(n) = 0 for every n prime to p (docs/theory.md §12.4). So an
    eigenspace of dimension 1 is new, and one of dimension m >= 2 is old exactly when it
    holds a vector whose coefficients at infinity vanish at all n prime to some prime p
    with cond(chi) | N/p. Numerically: the columns of ``B`` (K, m) (the coefficients
    c_inf(1..K) of a basis, transposed) restricted to the rows n prime to p lose rank (smallest singular
    value below ``tol`` times the largest).

    Parameters
    ----------
    B : ndarray, shape (m, K)
        c_inf(1..K) of each of the m basis members.
    level : int
    chi : character (its ``conductor`` is read)
    tol : float

    Returns
    -------
    (is_new, reason) : (bool or None, str)
        None when K is too small for the rank test.
    """
    B = np.asarray(B).T  # (K, m)
    K, m = B.shape
    if m == 1:
        return True, "eigenspace of dimension 1 (an oldform brings at least two forms)"
    from maasscomp.arith import prime_factors

    cond = int(chi.conductor)
    n = np.arange(1, K + 1)
    tested = []
    for p in prime_factors(level):
        if (level // p) % cond:
            continue  # no level M with cond(chi) | M | N/p: nothing old through p
        rows = B[n % p != 0]
        if rows.shape[0] < 2 * m:
            return None, f"too few coefficients ({K}) for the rank test at p = {p}"
        sv = np.linalg.svd(rows / np.max(np.abs(rows)), compute_uv=False)
        tested.append(f"{p}: {sv[-1]:.1e}")
        if sv[-1] <= tol * sv[0]:
            return False, (f"eigenspace of dimension {m} holds a form supported on multiples of "
                           f"{p} (smallest singular value {sv[-1]:.1e}): old through p = {p}")
    return True, (f"eigenspace of dimension {m} with no form supported on multiples of a prime "
                  f"p with cond(chi) | N/p (smallest singular values {', '.join(tested) or 'none'})")


def _eigen_residual(a: np.ndarray, chi, K: int) -> float:
    """Largest relative residual of T_p f = lambda_p f on the first coefficients (a basis
    member that is not normalisable by a(1), e.g. an oldform combination)."""
    worst = 0.0
    for p in _usable_primes(chi.modulus, K):
        img = hecke_image_chi(a[:K], p, chi)
        L = img.size
        i = int(np.argmax(np.abs(a[:L])))
        lam = img[i] / a[i]
        worst = max(worst, float(np.max(np.abs(img - lam * a[:L])) / max(1e-300, np.max(np.abs(a[:L])))))
    return worst


def _members(Ca, Cb, good, K, level, chi):
    """(coeffs (n_cusps, 2, Ms), errors, is_eigenform) for each basis member."""
    m = Ca.shape[0]
    if m == 1:
        c1 = Ca[0, 0, 0, 0]
        if abs(c1) <= 1e-8 * np.max(np.abs(Ca[0, 0, 0])):
            return None
        coeffs = Ca[0] / c1
        cb = Cb[0] / Cb[0, 0, 0, 0]
        return [(coeffs, np.abs(coeffs - cb), True)]
    B = Ca[:, 0, 0, :K].T  # (K, m)
    primes = _usable_primes(level, K)
    if not primes:
        return None
    rng = np.random.default_rng(5)
    H = np.zeros((m, m), dtype=complex)
    Hs = []
    for p in primes:
        img = np.stack([hecke_image_chi(B[:, i], p, chi) for i in range(m)], axis=1)
        L = img.shape[0]
        Hp = np.linalg.lstsq(B[:L], img, rcond=None)[0]
        Hs.append(Hp)
        H += rng.uniform(0.5, 1.5) * Hp
    ev, V = np.linalg.eig(H)
    scale = max(1.0, float(np.max(np.abs(ev))))
    order = np.argsort(ev.real)
    clusters: list[list[int]] = []
    for i in order:
        if clusters and abs(ev[i] - ev[clusters[-1][-1]]) <= 1e-6 * scale:
            clusters[-1].append(i)
        else:
            clusters.append([i])
    weights = []
    for cl in clusters:
        if len(cl) == 1:
            weights.append((V[:, cl[0]], True))
        else:
            # repeated eigenvalues: an echelon basis of the cluster's span
            W = V[:, cl]
            Bc = B @ W
            Q, Rr, P = sla.qr(Bc.T, pivoting=True)
            piv = np.sort(P[:len(cl)])
            T = np.linalg.solve(Bc[piv], np.eye(len(cl)))  # (B W T)[piv] = identity
            for i in range(len(cl)):
                weights.append((W @ T[:, i], False))
    Xb = np.stack([c[good] for c in Cb], axis=1)
    out = []
    for w, eig in weights:
        coeffs = np.tensordot(w, Ca, axes=(0, 0))
        row = coeffs[0, 0]
        piv = 0 if abs(row[0]) > 1e-8 * np.max(np.abs(row)) else int(np.argmax(np.abs(row) > 1e-8 * np.max(np.abs(row))))
        eig = eig and piv == 0
        coeffs = coeffs / row[piv]
        x = np.linalg.lstsq(Xb, coeffs[good], rcond=None)[0]
        cb = np.tensordot(x, Cb, axes=(0, 0))
        out.append((coeffs, np.abs(coeffs - cb), eig))
    out.sort(key=lambda t: int(np.argmax(np.abs(t[0][0, 0]) > 1e-8)))
    return out


# ----------------------------------------------------------------------------------------
# the conjugate character, evaluation
# ----------------------------------------------------------------------------------------


def two_sided(form: Form) -> np.ndarray:
    """(n_cusps, 2, M): positive and negative frequency coefficients of a character form."""
    neg = form.extra.get("coeffs_negative")
    if neg is None:
        raise InputError("the form carries no negative-frequency coefficients (not a character form)")
    return np.stack([np.asarray(form.coeffs, dtype=complex), np.asarray(neg, dtype=complex)], axis=1)


def cusp_frequencies(kappa, M: int) -> tuple[np.ndarray, np.ndarray]:
    from maasscomp.hejhal.charsystem import frequencies

    return frequencies(kappa, M)


def evaluate_character_form(group, form: Form, x, y) -> np.ndarray:
    """f(z) at points z = x + iy (arrays) from the stored expansions: the pullback
    gamma z = sigma_k w gives f(z) = conj(chi(d_gamma)) F_k(w) (docs/theory.md §12
    §2). The physical value carries the factor e^{-pi R/2} relative to the sums in Kt."""
    from fractions import Fraction

    from maasscomp.groups.characters import complex_value
    from maasscomp.special import ktilde

    chi = form.character
    C = two_sided(form)
    M = C.shape[2]
    kap = [Fraction(s) for s in form.extra["cusp_shifts"]]
    x = np.atleast_1d(np.asarray(x, dtype=float)).ravel()
    y = np.atleast_1d(np.asarray(y, dtype=float)).ravel()
    pb = group.pullback(x, y)
    cusp = np.asarray(pb.cusp).ravel()
    xs, ys = np.asarray(pb.x).ravel(), np.asarray(pb.y).ravel()
    d = np.asarray(pb.gamma).reshape(-1, 2, 2)[:, 1, 1]
    out = np.zeros(x.size, dtype=complex)
    # points grouped by cusp, in blocks: one K-Bessel table per block instead of per point
    for k in np.unique(cusp).tolist():
        at = np.flatnonzero(cusp == k)
        pos, neg = cusp_frequencies(kap[k], M)
        nu = np.concatenate([pos, neg]).astype(float)
        c = np.concatenate([C[k, 0], C[k, 1]])
        for i0 in range(0, at.size, 1024):
            ii = at[i0:i0 + 1024]
            kv = ktilde(form.R, 2 * np.pi * ys[ii][:, None] * np.abs(nu)[None, :])
            ph = np.exp(2j * np.pi * xs[ii][:, None] * nu[None, :])
            out[ii] = np.sqrt(ys[ii]) * ((kv * ph) @ c)
    chis = {int(v): complex_value(chi, int(v)) for v in np.unique(d % chi.modulus).tolist()}
    return out * np.conj(np.array([chis[int(v)] for v in (d % chi.modulus).tolist()], dtype=complex))


def fricke_pseudo_eigenvalue(group, form: Form, n_points: int = 12, seed: int = 3) -> tuple[complex, float]:
    """eta with f(-1/(Nz)) = eta f~(z), f~(z) = conj f(-conj z) (docs/theory.md §12.8).

    Measured at ``n_points`` random points near the circle |z| = N^{-1/2} (least squares);
    returns (eta, spread), spread = max |f(-1/(Nz)) - eta f~(z)| / max |f~(z)|, which is small
    exactly when f|W_N is a multiple of f~ (a newform)."""
    rng = np.random.default_rng(seed)
    N = group.level
    x = rng.uniform(-0.5, 0.5, n_points)
    y = rng.uniform(0.6, 1.4, n_points) / math.sqrt(N)
    z = x + 1j * y
    w = -1.0 / (N * z)
    fw = evaluate_character_form(group, form, w.real, w.imag)
    ft = np.conj(evaluate_character_form(group, form, -x, y))
    eta = complex(np.vdot(ft, fw) / np.vdot(ft, ft))
    spread = float(np.max(np.abs(fw - eta * ft)) / np.max(np.abs(ft)))
    return eta, spread


def extend_character_coefficients(group, form: Form, n_max: int, *, eps: float = 1e-14,
                                  heights: tuple[float, ...] = (0.95, 0.82, 0.7)) -> tuple[np.ndarray, np.ndarray]:
    """c_inf(1..n_max) of a form with a character, with error estimates.

    Hejhal's inversion on a horocycle of height Y (docs/theory.md §1.2 item 3, complex form):
    c(n) sqrt(Y) Kt(2 pi n Y) = (1/Q) sum_m f(x_m + iY) e(-n x_m), x_m = (m - 1/2)/Q, with the
    values from :func:`evaluate_character_form` (pulled-back points, where the stored
    expansions suffice) and Q >= n_max + the truncation at Y, so no frequency aliases. For
    each n the best of three heights Y = c R/(2 pi n_max) is kept; the second best gives the
    error estimate.
    """
    from maasscomp.hejhal.params import truncation_M0
    from maasscomp.special import ktilde

    if group.level != form.level:
        raise InputError(f"coefficient extension needs the group of the form (level {form.level}), got level {group.level}")
    if not (isinstance(n_max, int) and 10 <= n_max <= 200000):
        raise InputError(f"n_max={n_max!r} is not allowed; it must be an integer in [10, 200000]")
    R = form.R
    Y0 = group.fundamental_domain_height
    n = np.arange(1, n_max + 1)
    vals, kmag = [], []
    for c in heights:
        Y = min(0.9 * Y0, c * max(R, 1.0) / (2 * math.pi * n_max))
        Q = n_max + truncation_M0(R, Y, eps) + 8
        xm = (np.arange(1, Q + 1) - 0.5) / Q
        f = evaluate_character_form(group, form, xm, np.full(Q, Y))
        b = np.exp(-1j * np.pi * n / Q) * np.fft.fft(f)[1:n_max + 1] / Q
        k = math.sqrt(Y) * ktilde(R, 2 * math.pi * n * Y)
        vals.append(b / k)
        kmag.append(np.abs(k))
    vals, kmag = np.array(vals), np.array(kmag)
    order = np.argsort(-kmag, axis=0)
    best = np.take_along_axis(vals, order[:1], 0)[0]
    second = np.take_along_axis(vals, order[1:2], 0)[0]
    err = np.maximum(np.abs(best - second), 1e-16 * np.abs(best))
    return best, err


#: The character L-function check is skipped beyond this many coefficients.
CHARACTER_LFUNCTION_MAX_COEFFS = 20000


def character_lfunction_label(group, form: Form) -> dict:
    """Functional-equation check of a newform with a character (``Form.extra["lfunction"]``).

    The root number is fitted (:func:`maasscomp.spectrum.lfunction.functional_equation_check_character`)
    and compared with (-1)^delta eta, eta the Fricke pseudo-eigenvalue measured from the form's
    values (:func:`fricke_pseudo_eigenvalue`); coefficients beyond the stored ones come from
    :func:`extend_character_coefficients`. Returns the root number found and predicted, the
    residual, |eps| - 1, eta and its spread, the coefficients used and ``passed``; or
    ``{"skipped": reason}``.
    """
    from maasscomp.spectrum.lfunction import TooFewCoefficients, functional_equation_check_character

    if form.is_new is not True:
        return {"skipped": "not a newform"}
    eta, spread = fricke_pseudo_eigenvalue(group, form)
    a = np.asarray(form.coeffs[0], dtype=complex)
    try:
        chk = functional_equation_check_character(form.R, a, form.parity, group.level,
                                                  fricke_pseudo_eigenvalue=eta)
        used = a.size
    except TooFewCoefficients as exc:
        n_need = exc.needed + 8
        if n_need > CHARACTER_LFUNCTION_MAX_COEFFS:
            return {"skipped": f"needs {n_need} coefficients (limit {CHARACTER_LFUNCTION_MAX_COEFFS})"}
        a2, _ = extend_character_coefficients(group, form, n_need)
        chk = functional_equation_check_character(form.R, a2, form.parity, group.level,
                                                  fricke_pseudo_eigenvalue=eta)
        used = n_need
    return {
        "root_number": [chk.root_number.real, chk.root_number.imag],
        "predicted_root_number": [chk.predicted.real, chk.predicted.imag],
        "fricke_pseudo_eigenvalue": [eta.real, eta.imag],
        "fricke_spread": spread,
        "residual": chk.residual,
        "unit_defect": chk.unit_defect,
        "prediction_gap": chk.prediction_gap,
        "passed": bool(chk.passed and spread <= 1e-6),
        "n_coeffs_used": int(used),
    }


def evaluate_at_infinity(form: Form, x, y) -> np.ndarray:
    """F_inf(z) from the expansion at infinity alone (no pullback), for a check of the
    other cusps' data and of the character factors (valid where the truncated expansion
    converges, y not too small)."""
    from maasscomp.special import ktilde

    C = two_sided(form)
    M = C.shape[2]
    n = np.arange(1, M + 1)
    x = np.atleast_1d(np.asarray(x, dtype=float))
    y = np.atleast_1d(np.asarray(y, dtype=float))
    out = np.zeros(x.size, dtype=complex)
    for i in range(x.size):
        kv = ktilde(form.R, 2 * np.pi * n * y[i]) * math.sqrt(y[i])
        out[i] = np.sum(kv * (C[0, 0] * np.exp(2j * np.pi * n * x[i]) + C[0, 1] * np.exp(-2j * np.pi * n * x[i])))
    return out


def conjugate_form(group, form: Form) -> Form:
    """The form of the conjugate character derived from ``form``:
    g(z) = conj(f(-conj z)) (docs/theory.md §12.3).

    At cusp j with J sigma_j J = gamma sigma_k T_t (J: z -> -conj z),
    G_j(z) = conj(chi(gamma)) sum_nu conj(c_k(nu)) e(-nu t) sqrt(y) K(2 pi |nu| y) e(nu x),
    the sum over the frequencies nu of cusp k for chi, which are those of cusp j for
    chi-bar. At infinity c(n; g) = conj(c(n; f)).
    """
    from maasscomp.groups.characters import complex_value, conjugate, cusp_shifts

    chi = form.character
    chib = conjugate(chi)
    C = two_sided(form)
    E = np.stack([np.asarray(form.coeff_errors, dtype=float),
                  np.asarray(form.extra.get("coeff_errors_negative", np.zeros_like(form.coeff_errors)))], axis=1)
    M = C.shape[2]
    kap = cusp_shifts(group, chi)
    kapb = cusp_shifts(group, chib)
    out = np.zeros_like(C)
    err = np.zeros_like(E)
    for r in _reflection_gammas(group):
        j, k, t, dgam = r
        pos, neg = cusp_frequencies(kap[k], M)
        # the same frequency set: for chi-bar at j the shift is kappa_k(chi)
        if (kapb[j] - kap[k]) % 1 != 0:
            raise AssertionError("cusp shifts of chi-bar at j and chi at J(j) differ")
        fac = np.conj(complex_value(chi, dgam))
        out[j, 0] = fac * np.conj(C[k, 0]) * np.exp(-2j * np.pi * pos * t)
        out[j, 1] = fac * np.conj(C[k, 1]) * np.exp(-2j * np.pi * neg * t)
        err[j] = E[k]
    extra = dict(form.extra)
    extra["coeffs_negative"] = np.ascontiguousarray(out[:, 1])
    extra["coeff_errors_negative"] = np.ascontiguousarray(err[:, 1])
    extra["cusp_shifts"] = [str(k) for k in kapb]
    extra["singular_cusps"] = [c.name for c, k in zip(group.cusps, kapb) if k == 0]
    extra["derived_from_conjugate"] = chi.label
    return Form(level=form.level, R=form.R, symmetry=form.symmetry, coeffs=np.ascontiguousarray(out[:, 0]),
                coeff_errors=np.ascontiguousarray(err[:, 0]), R_error=form.R_error,
                hecke_residual=form.hecke_residual, params=form.params, is_new=form.is_new,
                multiplicity=form.multiplicity, basis_index=form.basis_index, extra=extra, character=chib)


@lru_cache(maxsize=64)
def _reflection_gammas(group) -> tuple[tuple[int, int, float, int], ...]:
    """For every cusp j: (j, k = J(j), t, d_gamma mod N) with J sigma_j J = gamma sigma_k T_t."""
    out = []
    for cusp in group.cusps:
        px, py = cusp.apply_scaling(np.array([0.0]), np.array([6.0]))
        pb = group.pullback(-px, py)
        k = int(np.asarray(pb.cusp).ravel()[0])
        gam = [[int(v) for v in row] for row in np.asarray(pb.gamma).reshape(2, 2)]
        (a, b), (c, d) = cusp.scaling
        JMJ = [[a, -b], [-c, d]]
        (p, q), (r, s) = group.cusps[k].scaling
        adj = [[s, -q], [-r, p]]

        def mul(A, B):
            return [[A[0][0] * B[0][0] + A[0][1] * B[1][0], A[0][0] * B[0][1] + A[0][1] * B[1][1]],
                    [A[1][0] * B[0][0] + A[1][1] * B[1][0], A[1][0] * B[0][1] + A[1][1] * B[1][1]]]

        T = mul(adj, mul(gam, JMJ))
        if T[1][0] != 0 or T[0][0] != T[1][1] or T[0][0] == 0:
            raise AssertionError(f"J sigma_j J is not sigma_k times a translation at cusp {cusp.name}")
        t = T[0][1] / T[0][0]
        # the pullback gives gamma (J sigma_j J) = sigma_k T_t, i.e. J sigma_j J = gamma^{-1} sigma_k T_t
        dinv = gam[0][0]  # d of gamma^{-1} is a of gamma
        out.append((cusp.index, k, t, dinv % group.level))
    return tuple(out)
