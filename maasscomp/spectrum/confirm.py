"""Turn an eigenvalue found at two sample heights into verified :class:`Form` records.

Input: the roots R1, R2 of the Hejhal systems of one symmetry class at the heights Y1 > Y2,
each with the dimension m of its null space and a basis of it (:mod:`maasscomp.spectrum.search`).
Output: m forms (a basis of the eigenspace), or a reason for rejecting the eigenvalue.

1. R = (R1 + R2)/2. The roots of the two truncated systems differ by their truncation
   errors, which are independent, so |R1 - R2| measures the error of R; it is combined
   with the first-order rounding bound kappa u (kappa the condition number of the root,
   :func:`maasscomp.spectrum.pencil.root_condition`) into ``R_error``.
2. The eigenspace is recomputed at a storage height Ya low enough for the stored
   coefficients to be accurate, and at 0.9 Ya; the differences of the two are the
   coefficient errors.
3. m = 1: the form is normalised by c_inf(1) = 1. m > 1: a basis of Hecke eigenforms (or the
   reduced echelon basis where the T_p, p not dividing N, do not separate the space), see
   :mod:`maasscomp.spectrum.eigenspace`.
4. Hecke relations (:func:`maasscomp.spectrum.hecke.hecke_residual`), new/old
   classification, the Atkin--Lehner relations that fit the form's type, and the
   functional equation of the standard L-function of newforms of squarefree level.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from maasscomp.hejhal.family import build_family
from maasscomp.hejhal.params import choose_params, truncation_M0
from maasscomp.hejhal.types import SymmetryClass
from maasscomp.spectrum import eigenspace as es
from maasscomp.spectrum import pencil as pn
from maasscomp.spectrum.form import Form
from maasscomp.spectrum.hecke import hecke_residual

#: Relative coefficient accuracy below which an entry counts as well determined (column
#: scaling over its best value, i.e. roughly the error amplification).
GOOD_AMPLIFICATION = 1e6

#: Unit roundoff of double precision.
_U = 2.0**-53


@dataclass
class Root:
    """A root of one class's Hejhal system at one height, refined and examined.

    Attributes
    ----------
    R : float
    height : int
        1 (Y1) or 2 (Y2).
    m : int
        Dimension of the null space (singular values below ``mult_tol``).
    sv : ndarray
        The smallest relative singular values found (ascending).
    vectors : ndarray, shape (size, m)
        Null vectors in the system's unknowns.
    unknown_scale : ndarray
        Column scaling of the matrix at R (large = poorly determined unknown).
    system : object
        The class's system at this height.
    kappa : float
        Condition number of the root (simple roots; inf otherwise).
    steps : int
        Newton steps taken.
    start : float
        Where Newton started (a pencil eigenvalue).
    patch : int
        Index of the expansion point whose pencil gave the start.
    """

    R: float
    height: int
    m: int
    sv: np.ndarray
    vectors: np.ndarray
    unknown_scale: np.ndarray
    system: object
    kappa: float
    steps: int
    start: float
    patch: int


def store_count(group, R: float, n_coeffs: int, eps: float) -> int:
    """Coefficients to store: at least ``n_coeffs``, and enough to evaluate the form to the
    truncation target anywhere in the fundamental domain (heights >= Y0 in every cusp).

    The truncation is taken at the next multiple of 1/8 above R (it grows with R), so that
    forms nearby share one evaluation of the rule.
    """
    return max(n_coeffs, _eval_count(group.fundamental_domain_height, math.ceil(8.0 * R) / 8.0, eps))


@lru_cache(maxsize=4096)
def _eval_count(Y0: float, R: float, eps: float) -> int:
    # a few per cent of margin: the evaluator rounds heights down and bounds whole tails
    return int(math.ceil(1.03 * truncation_M0(R, 0.97 * Y0, eps)))


def store_height(R: float, m: int) -> float:
    """A height at which a(1..m) are all determined accurately.

    Row n of the system divides by Kt(2 pi n Y), which decays exponentially beyond the
    turning point 2 pi n Y = R (DLMF 10.40.2 / docs/theory.md §3.2); a(n) stays accurate
    while 2 pi n Y <= R + 2 R^{1/3} + 6 (measured on PSL(2,Z) at R = 10, 300, 1000).
    """
    return (R + 2.0 * R ** (1.0 / 3.0) + 6.0) / (2.0 * math.pi * m)


def _bucket(R: float) -> float:
    """R rounded up to the next multiple of 1/4: systems built for it serve every R below
    (their truncation M0 grows with R), so nearby eigenvalues share them."""
    return math.ceil(4.0 * R) / 4.0


@lru_cache(maxsize=64)
def _system_at(level: int, symmetry: SymmetryClass, kind: str, Y: float, R_top: float, eps: float):
    """The system of one class at height Y with parameters for R <= R_top (cached: the
    sample points and pullbacks are the expensive part)."""
    from maasscomp.groups import gamma0

    p = choose_params(R_top + 0.5, Y, eps)
    return build_family(gamma0(level), [symmetry], p, kind).systems[symmetry]


def _null_at(system, R: float, m: int, extra: int = 2):
    """Null basis of ``system`` at R (direct Kt values): (sv, vectors in unknowns, column scale)."""
    A = system.matrix_from_k(system.samples.k_values(R))
    dr, dc = pn.scalings(A)
    As = pn.scale(A, dr, dc)
    import scipy.linalg as sla

    lu = sla.lu_factor(As, check_finite=False)
    nb = pn.null_basis(As, lu, m + extra)
    return nb.sv, dc[:, None] * nb.vectors[:, :m], dc


def _normalise_columns(U: np.ndarray) -> np.ndarray:
    return U / np.linalg.norm(U, axis=0)[None, :]


def build_forms(group, symmetry: SymmetryClass, kind: str, r1: Root, r2: Root, settings,
                third=None) -> tuple[bool, str, list[Form]]:
    """Confirm an eigenvalue seen at both heights and build its forms.

    Parameters
    ----------
    group, symmetry, kind
        The level, the class and the system kind searched.
    r1, r2 : Root
        The eigenvalue's roots at Y1 and Y2 (same multiplicity m).
    settings : SearchSettings
    third : callable (R, m) -> (system, sv, vectors, unknown_scale), optional
        Null space at 0.9 Y2 from the search's own interpolant of Kt (saves direct Kt
        evaluations); used when Y2 is low enough for all stored coefficients.

    Returns (ok, reason, forms).
    """
    m = r1.m
    R = 0.5 * (r1.R + r2.R)
    # storage heights: all stored coefficients accurate at Ya, error estimate from 0.9 Ya
    if kind == "atkin-lehner":
        m_store = store_count(group, R, settings.n_coeffs, settings.eps)
    else:
        m_store = settings.n_coeffs
    Y2 = r2.system.params.Y
    Ya = min(Y2, store_height(R, m_store))
    if Ya == Y2 and third is not None:
        # the null space at Y2 (at its root R2, |R2 - R| <= R_error) is the one at Ya
        sa, sva, Ua, dca = r2.system, r2.sv, r2.vectors, r2.unknown_scale
        sb, svb, Ub, dcb = third(R, m)
    else:
        systems = [_system_at(group.level, symmetry, kind, Y, _bucket(R), settings.eps) for Y in (Ya, 0.9 * Ya)]
        (sva, Ua, dca), (svb, Ub, dcb) = (_null_at(s, R, m) for s in systems)
        sa, sb = systems
    worst = max(sva[m - 1], svb[m - 1])
    if not worst <= settings.mult_tol:
        return False, (f"eigenspace of dimension {m} not found at the storage heights "
                       f"(singular value {worst:.1e})"), []
    Ms = min(m_store, sa.params.M0, sb.params.M0)
    Ca = sa.coefficients(_normalise_columns(Ua))  # (m, n_cusps, M0)
    Cb = sb.coefficients(_normalise_columns(Ub))
    Ca, Cb = Ca[:, :, :Ms], Cb[:, :, :Ms]
    good = ((sa.storage_scale(dca)[:, :Ms] <= GOOD_AMPLIFICATION * dca.min())
            & (sb.storage_scale(dcb)[:, :Ms] <= GOOD_AMPLIFICATION * dcb.min()))
    K = int(np.sum(np.cumprod(good[0])))  # leading well-determined coefficients at infinity
    hecke_nmax = min(settings.hecke_nmax, K)
    R_error, err_info = _r_error(r1, r2)

    base_extra = {
        "R_heights": [float(r1.R), float(r2.R)],
        "R_error_parts": err_info,
        "singular_values": [float(v) for v in r1.sv[: m + 1]],
        "well_determined_at_infinity": K,
        "system": kind,
    }
    if m == 1:
        members = _single_member(Ca, Cb, good)
        if members is None:
            return False, "c_inf(1) vanishes for a one-dimensional eigenspace", []
    else:
        if K < max(2 * m + 4, 8):
            return False, f"only {K} well-determined coefficients at infinity", []
        members = _eigenspace_members(Ca, Cb, good, K, group.level)
        if members is None:
            return False, f"no Hecke operator T_p could be fitted on {K} coefficients at infinity", []

    if group.level == 1:
        old_dim = None
    elif kind == "multi-cusp":
        old_dim = _old_dimension(group, symmetry.parity, R, settings)
    else:
        old_dim = None
    forms: list[Form] = []
    for idx, (coeffs, errs, eig, lam) in enumerate(members):
        c_inf = np.real(coeffs[0])
        if eig:
            hres = hecke_residual(c_inf, group.level, hecke_nmax)
            if lam:
                hres = max(hres, es.eigen_residual(c_inf, lam, hecke_nmax))
        else:
            hres = es.eigen_residual(c_inf, lam, hecke_nmax)
        if not hres <= settings.hecke_tol:
            return False, f"Hecke residual {hres:.2e} above {settings.hecke_tol:.0e} (basis member {idx})", []
        extra = dict(base_extra)
        extra["hecke_eigenform"] = bool(eig)
        if lam:
            extra["hecke_eigenvalues"] = {str(p): float(v) for p, v in lam.items()}
        if m > 1:
            extra["basis"] = "hecke" if eig else "echelon"
        is_new = _classify(group, symmetry, kind, R, c_inf, m, eig, lam, old_dim, extra)
        if not np.iscomplexobj(coeffs) or np.max(np.abs(coeffs.imag)) == 0.0:
            coeffs = np.real(coeffs).copy()
            errs = np.real(errs)
        form = Form(
            level=group.level, R=float(R), symmetry=symmetry, coeffs=coeffs,
            coeff_errors=np.asarray(errs, dtype=float), R_error=float(R_error),
            hecke_residual=float(hres), params=sa.params, is_new=is_new,
            multiplicity=m, basis_index=idx, extra=extra,
        )
        if settings.lfunction_check and is_new and kind == "atkin-lehner" and m == 1:
            from maasscomp.spectrum.extend import lfunction_label

            extra["lfunction"] = lfunction_label(group, form)
        forms.append(form)
    return True, f"confirmed, multiplicity {m}", forms


def _r_error(r1: Root, r2: Root) -> tuple[float, dict]:
    """Error estimate of R = (R1 + R2)/2 (module docstring, item 1)."""
    spread = abs(r1.R - r2.R)
    kappa = min(r1.kappa, r2.kappa)
    # rounding: the scaled matrices carry relative errors of a few u per entry
    rounding = 8.0 * _U * kappa if math.isfinite(kappa) else 0.0
    floor = 4.0 * _U * max(1.0, abs(r1.R))
    est = max(spread, rounding, floor)
    return est, {"two_height_spread": float(spread), "rounding_bound": float(rounding),
                 "condition": float(kappa)}


def _single_member(Ca, Cb, good):
    c1 = Ca[0, 0, 0].real
    if abs(c1) <= 1e-8 * np.max(np.abs(Ca[0, 0])):
        return None
    coeffs = Ca[0] / c1
    cb = Cb[0] / Cb[0, 0, 0].real
    errs = np.abs(coeffs - cb)
    return [(coeffs, errs, True, {})]


def _eigenspace_members(Ca, Cb, good, K, level):
    """(coeffs, errs, is_hecke_eigenform, T_p eigenvalues) for each basis member of an
    eigenspace of dimension m > 1 (storage arrays ``Ca``, ``Cb`` of the two heights)."""
    B = Ca[:, 0, :K].real.T  # (K, m); infinity is self-conjugate with shift 0: real
    clusters = es.hecke_clusters(B, level)
    if not clusters[0].eigenvalues:
        return None
    members = []
    for cl in clusters:
        Bc = B @ cl.weights
        if cl.weights.shape[1] == 1 and abs(Bc[0, 0]) > 1e-6 * np.max(np.abs(Bc)):
            members.append((cl.weights[:, 0] / Bc[0, 0], True, cl.eigenvalues))
        else:
            Wr = cl.weights @ es.rref_weights(Bc)
            for i in range(Wr.shape[1]):
                members.append((Wr[:, i], False, cl.eigenvalues))
    members.sort(key=lambda t: int(np.argmax(np.abs(B @ t[0]) > 1e-8 * np.max(np.abs(B @ t[0])))))
    Xb = es.real_rows(Cb, good)
    out = []
    for w, eig, lam in members:
        coeffs = np.tensordot(w, Ca, axes=(0, 0))
        # exact normalisation: c_inf(1) = 1 (eigenforms) or 1 at the echelon pivot
        piv = int(np.argmax(np.abs(coeffs[0].real) > 1e-8 * np.max(np.abs(coeffs[0].real))))
        coeffs = coeffs / coeffs[0, piv].real
        # the second height's realisation: closest element of span(Cb) on good entries
        target = es.real_rows(coeffs[None], good)[:, 0]
        x, *_ = np.linalg.lstsq(Xb, target, rcond=None)
        coeffs_b = np.tensordot(x, Cb, axes=(0, 0))
        out.append((coeffs, np.abs(coeffs - coeffs_b), eig, lam))
    return out


def _classify(group, symmetry, kind, R, c_inf, m, eig, lam, old_dim, extra) -> bool | None:
    """New/old label of one basis member; fills the Atkin--Lehner relation residual that
    fits the form's type (squarefree levels)."""
    if group.level == 1:
        return True
    if kind == "atkin-lehner":
        from maasscomp.spectrum.classify import classify

        cl = classify(group.level, symmetry, R, c_inf)
        extra["atkin_lehner_residual"] = cl.al_residual
        extra["atkin_lehner_relations"] = cl.al_relations
        if not cl.is_new:
            extra["old_from_level"] = cl.old_from_level
            extra["old_relation_residual"] = cl.old_relation_residual
            return False
        if cl.newform_residual > 1e-6:
            # confirmed eigenvalue, but neither old nor a clean newform: keep it unlabelled
            extra["classification_note"] = (
                f"not an eigenvalue at a divisor level, yet c(p) = -eps_p/sqrt(p) fails by "
                f"{cl.newform_residual:.2e}")
            return None
        return True
    if old_dim is None:
        return None
    dim, lam_lower, origin = old_dim
    extra["old_dimension"] = int(dim)
    if dim == 0:
        return True
    if dim >= m:
        if origin is not None:
            extra["old_from_level"] = origin
        return False
    # mixed eigenspace: a member whose T_p eigenvalues match a lower-level form is old
    for ll in lam_lower:
        common = set(ll) & set(lam)
        if common and all(abs(ll[p] - lam[p]) < 1e-5 for p in common):
            if origin is not None:
                extra["old_from_level"] = origin
            return False
    return True if eig else None


def _old_dimension(group, parity: str, R: float, settings):
    """(oldform dimension at level N, T_p eigenvalue sets of lower levels, smallest level with a
    newform at R) at R.

    R is checked at every proper divisor level M (same parity; oldforms keep the parity of
    g). With m_M the multiplicity at level M, the numbers of newforms follow from
    m_M = sum_{M' | M} new_{M'} d(M/M') (Atkin & Lehner 1970), and the oldform dimension at
    N is sum_{M | N, M < N} new_M d(N/M).
    """
    from maasscomp.groups import divisors, gamma0

    N = group.level
    mult: dict[int, int] = {}
    lam_lower: list[dict[int, float]] = []
    for M in divisors(N)[:-1]:
        G = gamma0(M)
        sysM = _system_at(M, SymmetryClass(parity), "multi-cusp", 0.9 * G.fundamental_domain_height,
                          _bucket(R), settings.eps)
        k = 2 * len(divisors(M)) + 2
        while True:
            sv, U, dc = _null_at(sysM, R, k, extra=0)
            mM = int(np.sum(sv[:k] <= settings.mult_tol))
            if mM < k or k >= sysM.size:
                break
            k = min(sysM.size, 2 * k)
        mult[M] = mM
        if mM:
            good = sysM.storage_scale(dc) <= GOOD_AMPLIFICATION * dc.min()
            C = sysM.coefficients(U[:, :mM])
            Kc = int(np.sum(np.cumprod(good[0])))
            if Kc >= 8:
                for cl in es.hecke_clusters(C[:, 0, :Kc].real.T, N):
                    lam_lower.append(cl.eigenvalues)
    new: dict[int, int] = {}
    for M in divisors(N)[:-1]:
        new[M] = mult[M] - sum(new[Mp] * len(divisors(M // Mp)) for Mp in divisors(M)[:-1])
    old = sum(new[M] * len(divisors(N // M)) for M in new)
    # the smallest level at which R is an eigenvalue (as for the one-cusp classification)
    origin = min((M for M in new if new[M] > 0), default=None)
    return old, lam_lower, origin
