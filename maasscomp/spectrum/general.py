"""Eigenvalue search for any level with multiplicities (parity classes only).

For a level N that is not squarefree there is no Atkin--Lehner splitting of the whole
space, and one parity class can hold eigenspaces of dimension m > 1: the oldforms g(d z),
d | N/M, of a newform g of level M share R and parity (Atkin & Lehner, Math. Ann. 185
(1970) 134-160), and twists may add newforms at the same R. A root of det A(R) of even
multiplicity does not change sign, so the scan of the multi-cusp system
(:class:`maasscomp.hejhal.multicusp.MultiCuspSystem`) looks at both

* sign changes of det A(R) (refined by Brent's method, restarted on |det|^(1/m) once the
  multiplicity m of a slowly converging root has been estimated), and
* interior local minima of log|det A(R)| after the spikes of the sign-change roots are
  removed (an even-multiplicity root next to an odd one), refined by golden-section search,

at two heights Y1 and Y2 evaluated at the same grid points (a spurious root of the
truncated system depends on Y and can mask a true eigenvalue in the same grid interval at
one height only), on a grid whose step is a fraction of the mean spacing from Weyl's law
(docs/theory.md §2). Each candidate R is then tested with the singular value decomposition
of the equilibrated matrix (:meth:`MultiCuspSystem.null_space`):

1. multiplicity m = number of relative singular values below ``mult_tol`` (at an
   eigenvalue the m smallest ones are at the truncation level ~1e-15 and grow like
   |R - R_true|; the next one is of the order of the distance to the next eigenvalue);
2. the other height is singular at R as well (a quick test that removes most spurious
   roots), its own root (or minimum) agrees within ``R_tol`` and has the same multiplicity;
3. the null spaces at both heights span the same coefficient subspace (principal angles of
   the well-determined coefficients, Björck & Golub, Math. Comp. 27 (1973) 579-594);
4. at a low storage height the eigenspace is recomputed and a basis chosen: Hecke
   eigenforms with c_inf(1) = 1 when the Hecke operators T_p (p not dividing N) separate
   the space (their matrix on the span follows from lambda(p) a(n) = a(pn) + a(n/p),
   Iwaniec, *Topics in Classical Automorphic Forms* (1997) §6), otherwise the reduced
   echelon basis of the coefficients at infinity;
5. every basis member satisfies the Hecke eigen-relations for p not dividing N, and
   Hecke eigenforms also multiplicativity (:func:`maasscomp.spectrum.hecke.hecke_residual`).

New/old: R is checked at every proper divisor level M of N (same parity; oldforms keep
the parity of g). With m_M the multiplicity at level M, the numbers of newforms follow
from m_M = sum_{M' | M} new_{M'} d(M/M') (Atkin & Lehner 1970), and the oldform
dimension at N is sum_{M | N, M < N} new_M d(N/M).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

from maasscomp.groups import divisors
from scipy.linalg import subspace_angles
from scipy.optimize import brentq

from maasscomp.errors import InputError
from maasscomp.hejhal.multicusp import MultiCuspSystem
from maasscomp.hejhal.params import choose_params
from maasscomp.hejhal.types import PARITIES, SolverParams, SymmetryClass
from maasscomp.spectrum.form import Form
from maasscomp.spectrum.hecke import hecke_residual
from maasscomp.spectrum.search import Candidate, SearchResult, SearchSettings, mean_spacing

#: Relative singular values (equilibrated matrix, over the largest) below this count as
#: zero. Measured on levels 1, 4, 8, 9, 12, 25 (all eigenspaces with R <= 10): at the
#: refined eigenvalue the m small ones lie between 1e-17 and 3e-13; they grow like |dR|
#: (1e-10..5e-9 at dR = 1e-9); the first non-null one is above 1e-3 (smallest seen
#: 9.6e-4, at two eigenvalues 0.0036 apart).
MULTIPLICITY_TOL = 1e-8

#: Relative coefficient accuracy below which an entry counts as well determined
#: (column scaling over its best value, i.e. roughly the error amplification).
_GOOD_AMPLIFICATION = 1e6

#: A candidate whose m-th relative singular value at the other height exceeds this is
#: rejected without a root search there (true eigenvalues give ~1e-13).
_QUICK_REJECT = 1e-6

#: T_p eigenvalues closer than this are treated as equal (one Hecke cluster).
_CLUSTER_TOL = 1e-5


def _small_primes(level: int, count: int = 4) -> list[int]:
    out, p = [], 2
    while len(out) < count:
        if all(p % q for q in range(2, int(math.isqrt(p)) + 1)) and level % p:
            out.append(p)
        p += 1
    return out


# ----------------------------------------------------------------------------------------
# one-dimensional refinement
# ----------------------------------------------------------------------------------------


def _refine_sign_change(system: MultiCuspSystem, a: float, b: float) -> tuple[float, int]:
    """Root of det A(R) in [a, b] (a sign change) to ~1e-15 relative, and the estimated
    multiplicity used for the final iteration (1 when Brent's method converged at once).

    Near a root of multiplicity m, |det| ~ |R - R0|^m, on which Brent's method converges
    only linearly for m > 1. After a few Brent steps on sign * |det| the multiplicity is
    estimated from the slope of log|det| against log|R - R0| over the points already
    evaluated, and Brent's method is restarted on sign * |det|^(1/m), which has a simple root.
    """
    seen: dict[float, tuple[float, float]] = {}

    def ev(R: float) -> tuple[float, float]:
        if R not in seen:
            seen[R] = system.log_det(R)
        return seen[R]

    ref = max(ev(a)[1], ev(b)[1])

    def make(m: int):
        def g(R: float) -> float:
            s, ld = ev(R)
            return s * math.exp(max((ld - ref) / m, -700.0)) if s != 0 else 0.0

        return g

    tol = dict(xtol=1e-15, rtol=4 * np.finfo(float).eps)
    try:
        return float(brentq(make(1), a, b, maxiter=12, **tol)), 1
    except RuntimeError:
        pass
    pts = sorted(seen.items())
    lo, hi = a, b
    for (r0, (s0, _)), (r1, (s1, _)) in zip(pts[:-1], pts[1:]):
        if s0 * s1 < 0:
            lo, hi = r0, r1
            break
    c, w = 0.5 * (lo + hi), hi - lo
    far = [(r, v[1]) for r, v in pts if abs(r - c) >= 3 * w]
    m = 1
    if len(far) >= 2:
        X = np.array([[math.log(abs(r - c)), 1.0] for r, _ in far])
        slope = float(np.linalg.lstsq(X, np.array([ld for _, ld in far]), rcond=None)[0][0])
        m = int(min(12, max(1, round(slope))))
    ref = max(ev(lo)[1], ev(hi)[1])
    return float(brentq(make(m), lo, hi, maxiter=200, **tol)), m


def _refine_minimum(system: MultiCuspSystem, a: float, b: float, mid: float | None = None, deflate=()) -> float:
    """Minimum of log|det| in [a, b] by golden-section search to ~1e-14 relative.

    Near an eigenvalue of multiplicity m, log|det A| ~ m log|R - R0| + smooth, a
    logarithmic spike that parabolic steps fit badly (and library minimisers stop at a
    relative tolerance of sqrt(machine eps)); golden section only needs unimodality.
    ``deflate`` lists known roots (r, m) whose spikes m log|R - r| are removed first.
    """

    def f(R: float) -> float:
        v = system.log_det(R)[1]
        for r, m in deflate:
            v -= m * math.log(max(abs(R - r), 1e-300))
        return v

    g = 0.5 * (3.0 - math.sqrt(5.0))
    x = mid if mid is not None and a < mid < b else a + g * (b - a)
    fx = f(x)
    tol = 1e-14 * max(1.0, abs(x))
    for _ in range(300):
        if b - a <= 4 * tol:
            break
        # probe the larger part of the bracket
        if x - a > b - x:
            u = x - g * (x - a)
        else:
            u = x + g * (b - x)
        fu = f(u)
        if fu < fx:
            if u < x:
                b = x
            else:
                a = x
            x, fx = u, fu
        else:
            if u < x:
                a = u
            else:
                b = u
    return float(x)


def _root_near(system: MultiCuspSystem, R: float, width: float, odd: bool) -> float | None:
    """det root (odd multiplicity) or log|det| minimum (even) of ``system`` near R."""
    for w in (width, 4 * width, 16 * width):
        a, b = R - w, R + w
        if odd:
            if system.log_det(a)[0] * system.log_det(b)[0] < 0:
                return _refine_sign_change(system, a, b)[0]
        else:
            r = _refine_minimum(system, a, b, R)
            if a + 1e-3 * w < r < b - 1e-3 * w:
                return r
    return None


# ----------------------------------------------------------------------------------------
# coefficient subspaces
# ----------------------------------------------------------------------------------------


def _good_mask(system: MultiCuspSystem, R: float) -> np.ndarray:
    """Well-determined storage entries (n_cusps, M0) of ``system`` at R."""
    sc = system.coefficient_scale(R)
    return sc <= _GOOD_AMPLIFICATION * sc.min()


def _real_rows(C: np.ndarray, mask: np.ndarray) -> np.ndarray:
    """Stack real and imaginary parts of the masked entries: (k, n_cusps, M) -> (rows, k)."""
    X = C[:, mask].T
    if np.iscomplexobj(X):
        X = np.vstack([X.real, X.imag])
    return X


def _subspace_gap(C1: np.ndarray, C2: np.ndarray, mask: np.ndarray) -> float:
    """sin of the largest principal angle between two coefficient subspaces on ``mask``."""
    X1, X2 = _real_rows(C1, mask), _real_rows(C2, mask)
    return float(np.sin(np.max(subspace_angles(X1, X2))))


# ----------------------------------------------------------------------------------------
# Hecke structure of an eigenspace
# ----------------------------------------------------------------------------------------


@dataclass(frozen=True)
class _Cluster:
    """Joint eigenspace of the T_p (p not dividing N) inside one eigenspace."""

    weights: np.ndarray  # (m, d) combinations of the null vectors spanning the cluster
    eigenvalues: dict[int, float]  # lambda_p


def _hecke_matrix(B: np.ndarray, p: int) -> tuple[np.ndarray, float]:
    """Matrix H of T_p on the span of the columns of B (coefficients at infinity,
    n = 1..K), from (T_p b)(n) = b(pn) + b(n/p) on n <= K/p, and its relative fit residual."""
    K = B.shape[0]
    L = K // p
    n = np.arange(1, L + 1)
    TB = B[p * n - 1].copy()
    div = n % p == 0
    TB[div] += B[n[div] // p - 1]
    H, *_ = np.linalg.lstsq(B[:L], TB, rcond=None)
    res = np.linalg.norm(B[:L] @ H - TB) / max(np.linalg.norm(TB), 1e-300)
    return H, float(res)


def _usable_primes(B: np.ndarray, level: int) -> list[int]:
    """Small primes p not dividing N for which the rows n <= K/p of B determine the span
    (full column rank), so that T_p can be fitted on them."""
    K, m = B.shape
    out = []
    for p in _small_primes(level, 4):
        L = K // p
        if L < m + 2:
            continue
        sv = np.linalg.svd(B[:L], compute_uv=False)
        if sv[-1] > 1e-8 * sv[0]:
            out.append(p)
    return out


def _hecke_clusters(B: np.ndarray, level: int) -> list[_Cluster]:
    """Split span(B) into joint eigenspaces of T_p, p not dividing N (small p).

    B has shape (K, m): coefficients at infinity of m independent forms. A fixed generic
    combination of the T_p is diagonalised; eigenvalues within _CLUSTER_TOL form one
    cluster. Only primes whose fit rows n <= K/p determine the span are used (an oldform
    g(dz) vanishes at n < d).
    """
    K, m = B.shape
    primes = _usable_primes(B, level)
    if not primes or m == 1:
        lam = {p: float(_hecke_matrix(B, p)[0][0, 0]) for p in primes} if m == 1 else {}
        return [_Cluster(np.eye(m), lam)]
    Hs = {p: _hecke_matrix(B, p)[0] for p in primes}
    # generic combination (fixed irrational-looking weights keep the run deterministic)
    w = [1.0, 0.7548776662, 0.5698402910, 0.4301597090]
    Hc = sum(wi * Hs[p] for wi, p in zip(w, primes))
    ev, V = np.linalg.eig(Hc)
    ev = ev.real  # Hecke operators are self-adjoint: a tiny imaginary part is rounding
    order = np.argsort(ev)
    ev, V = ev[order], V[:, order]
    groups: list[list[int]] = [[0]]
    for i in range(1, m):
        if abs(ev[i] - ev[groups[-1][-1]]) <= _CLUSTER_TOL * max(1.0, abs(ev[i])):
            groups[-1].append(i)
        else:
            groups.append([i])
    out = []
    for g in groups:
        # a real orthonormal basis of the cluster's invariant subspace: a (nearly) repeated
        # eigenvalue may come back as a complex-conjugate pair, whose real and imaginary
        # parts together span the real subspace (the individual eigenvectors are arbitrary)
        Z = np.hstack([V[:, g].real, V[:, g].imag])
        W = np.linalg.svd(Z, full_matrices=False)[0][:, : len(g)]
        Bw = B @ W
        lam = {}
        for p in primes:
            H, _ = _hecke_matrix(Bw, p)
            lam[p] = float(np.trace(H) / H.shape[0])
        out.append(_Cluster(W, lam))
    return out


def _rref_weights(B: np.ndarray, tol: float = 1e-8) -> np.ndarray:
    """Weights W (m x m) such that (B W) is the reduced echelon basis of span(B):
    column i has a 1 at its pivot n_i, zeros at the other pivots, pivots increasing."""
    K, m = B.shape
    X = B.T.copy()  # rows = forms
    W = np.eye(m)
    scale = np.max(np.abs(X))
    row = 0
    for col in range(K):
        if row == m:
            break
        piv = row + int(np.argmax(np.abs(X[row:, col])))
        if abs(X[piv, col]) <= tol * scale:
            continue
        X[[row, piv]] = X[[piv, row]]
        W[:, [row, piv]] = W[:, [piv, row]]
        f = X[row, col]
        X[row] /= f
        W[:, row] /= f
        for r in range(m):
            if r != row and X[r, col] != 0.0:
                g = X[r, col]
                X[r] -= g * X[row]
                W[:, r] -= g * W[:, row]
        row += 1
    return W


def _eigen_residual(b: np.ndarray, lam: dict[int, float], nmax: int) -> float:
    """max |b(pn) + b(n/p) - lambda_p b(n)| over p in lam, pn <= nmax, relative to max|b|."""
    nmax = min(nmax, b.size)
    worst = 0.0
    for p, lp in lam.items():
        for n in range(1, nmax // p + 1):
            v = b[p * n - 1] + (b[n // p - 1] if n % p == 0 else 0.0) - lp * b[n - 1]
            worst = max(worst, abs(v))
    return float(worst / max(np.max(np.abs(b[:nmax])), 1e-300))


# ----------------------------------------------------------------------------------------
# the search
# ----------------------------------------------------------------------------------------


def search_window_general(
    group,
    parity: str,
    R_min: float,
    R_max: float,
    settings: SearchSettings | None = None,
    *,
    step: float | None = None,
    progress: Callable[[int, int], None] | None = None,
    mult_tol: float = MULTIPLICITY_TOL,
    classify: bool = True,
) -> SearchResult:
    """Find every eigenvalue of one parity class of Gamma0(N), any N, with multiplicities.

    Parameters
    ----------
    group : Gamma0
        From :func:`maasscomp.groups.gamma0`.
    parity : {"even", "odd"}
    R_min, R_max : float
        The window, 0 < R_min < R_max.
    settings : SearchSettings, optional
        Shared knobs of the search (heights, grid density, tolerances, stored length).
    step : float, optional
        Grid step override (default: mean spacing of the class / steps_per_spacing,
        capped by max_step; Weyl's law leading term for the two parity classes).
    progress : callable(done, total), optional
        Called after each grid point (both heights are evaluated at each point).
    mult_tol : float
        Relative singular value below which a direction counts as null
        (:data:`MULTIPLICITY_TOL`).
    classify : bool
        Decide new/old by checking R at the proper divisor levels (costs one SVD per
        divisor level and candidate).

    Returns
    -------
    SearchResult
        One :class:`Form` per basis member of every confirmed eigenspace (sorted by R, then
        basis index) with ``multiplicity`` and ``basis_index`` set, and every candidate with
        the reason it was kept or rejected. ``symmetry`` carries the parity only.
    """
    settings = settings or SearchSettings()
    if parity not in PARITIES:
        raise InputError(f"parity {parity!r} is not allowed; use 'even' or 'odd'")
    for name, v in (("R_min", R_min), ("R_max", R_max)):
        if not (isinstance(v, (int, float)) and math.isfinite(v) and v > 0):
            raise InputError(f"{name}={v!r} is not allowed; it must be a positive finite number")
    if R_min >= R_max:
        raise InputError(f"R_min={R_min!r} must be smaller than R_max={R_max!r}")
    if not (0 < mult_tol < 1e-3):
        raise InputError(f"mult_tol={mult_tol!r} is not allowed; it must lie in (0, 1e-3)")
    if step is None:
        step = min(settings.max_step, mean_spacing(group.level, 2, R_max, group.index) / settings.steps_per_spacing)
    if not (step > 0 and math.isfinite(step)):
        raise InputError(f"grid step={step!r} is not allowed; it must be a positive finite number")

    Y0 = group.fundamental_domain_height
    Y1, Y2 = settings.Y1_frac * Y0, settings.Y2_frac * Y0
    p1 = choose_params(R_max + 1.0, Y1, settings.eps)
    p2 = choose_params(R_max + 1.0, Y2, settings.eps)
    sys1 = MultiCuspSystem(group, parity, p1)
    sys2 = MultiCuspSystem(group, parity, p2)

    # one extra grid point beyond each end so that minima at the window edges are interior
    n = max(2, int(math.ceil((R_max - R_min) / step)) + 1)
    grid = np.concatenate(([R_min - step], np.linspace(R_min, R_max, n), [R_max + step]))
    grid = grid[grid > 0]
    # Both heights are scanned: a spurious root of the truncated system at one height (these
    # depend on Y) can hide a true eigenvalue in the same grid interval, which the other
    # height then still shows.
    systems = (sys1, sys2)
    signs = np.empty((2, grid.size))
    logs = np.empty((2, grid.size))
    # both heights at the same R back to back: the per-R K-Bessel table is built once
    for i, R in enumerate(grid):
        for k, sysk in enumerate(systems):
            signs[k, i], logs[k, i] = sysk.log_det(float(R))
        if progress is not None:
            progress(i + 1, grid.size)
    raw: list[tuple[float, str, int]] = []
    for k, sysk in enumerate(systems):
        sg, lg = signs[k], logs[k]
        roots: list[tuple[float, int]] = []
        for i in np.nonzero(sg[:-1] * sg[1:] < 0)[0]:
            r, mr = _refine_sign_change(sysk, float(grid[i]), float(grid[i + 1]))
            roots.append((r, mr))
            raw.append((r, "sign change", k))
        # log|det| with the spikes of the sign-change roots removed: its interior local
        # minima mark roots of even multiplicity, also one hiding next to a sign change
        D = lg.copy()
        for r, mr in roots:
            D -= mr * np.log(np.maximum(np.abs(grid - r), 1e-300))
        for i in range(1, grid.size - 1):
            if not (D[i] < D[i - 1] and D[i] < D[i + 1]):
                continue
            a, b = float(grid[i - 1]), float(grid[i + 1])
            near = [(r, mr) for r, mr in roots if grid[max(i - 2, 0)] <= r <= grid[min(i + 2, grid.size - 1)]]
            Rm = _refine_minimum(sysk, a, b, float(grid[i]), deflate=near)
            if all(abs(Rm - r) > 1e-9 * max(1.0, r) for r, _ in near):
                raw.append((Rm, "log|det| minimum", k))
    raw.sort()
    clusters: list[list[tuple[float, str, int]]] = []
    for item in raw:
        if clusters and abs(item[0] - clusters[-1][-1][0]) < 1e-7:
            clusters[-1].append(item)
        else:
            clusters.append([item])

    candidates: list[Candidate] = []
    forms: list[Form] = []
    for cl in clusters:
        for Rc, how, k in cl:
            if not (R_min <= Rc <= R_max):
                continue
            ok, reason, new_forms = _confirm(
                group, parity, Rc, systems[k], systems[1 - k], settings, mult_tol, classify
            )
            candidates.append(Candidate(R=Rc, accepted=ok, reason=f"{how} at Y{k + 1}: {reason}"))
            if ok:
                forms.extend(new_forms)
                break
    return SearchResult(
        level=group.level,
        symmetry=SymmetryClass(parity),
        R_min=float(R_min),
        R_max=float(R_max),
        forms=tuple(sorted(forms, key=lambda f: (f.R, f.basis_index))),
        candidates=tuple(candidates),
        grid_step=float(step),
        params=p1,
    )


def _confirm(group, parity, Rc, sys1, sys2, settings: SearchSettings, mult_tol: float, classify: bool):
    """Independent confirmation of a candidate found with ``sys1`` (the scan height), using
    ``sys2`` (the other height); returns (ok, reason, forms)."""
    sv1, U1 = sys1.null_space(Rc, mult_tol)
    m = U1.shape[1]
    if m == 0:
        return False, f"no null direction (smallest relative singular value {sv1[0]:.1e})", []
    # quick test first: at a true eigenvalue the other height is singular at Rc too (up to
    # |Rc - R| ~ 1e-13); spurious roots of the truncated system depend on Y and are not
    sv_other = sys2.null_space(Rc, mult_tol)[0]
    if sv_other[m - 1] > _QUICK_REJECT:
        return False, f"the other height is regular here (singular value {sv_other[m - 1]:.1e})", []
    R_tol = max(1e-8, settings.R_tol * max(1.0, Rc))
    R2 = _root_near(sys2, Rc, max(1e-7, 1e3 * R_tol), odd=bool(m % 2))
    if R2 is None:
        return False, f"multiplicity {m} at the scan height but no matching root at the other height", []
    dR = abs(R2 - Rc)
    if dR > R_tol:
        return False, f"roots at the two heights differ by {dR:.2e}", []
    sv2, U2 = sys2.null_space(R2, mult_tol)
    if U2.shape[1] != m:
        return False, f"multiplicity {m} at the scan height but {U2.shape[1]} at the other height", []
    mask = _good_mask(sys1, Rc)[:, : min(sys1.params.M0, sys2.params.M0)]
    mask &= _good_mask(sys2, R2)[:, : mask.shape[1]]
    M = mask.shape[1]
    C1 = sys1.coefficients(U1)[:, :, :M]
    C2 = sys2.coefficients(U2)[:, :, :M]
    gap = _subspace_gap(C1, C2, mask)
    if not np.isfinite(gap) or gap > settings.coeff_tol:
        return False, f"null spaces at the two heights differ (sin angle {gap:.2e})", []

    # storage height: a low Y gives n_coeffs accurate coefficients
    Ys = min(sys1.params.Y, sys1.params.Y * sys1.params.M0 / (3.0 * settings.n_coeffs))
    ps_a = choose_params(Rc + 0.5, Ys, settings.eps)
    ps_b = choose_params(Rc + 0.5, 0.9 * Ys, settings.eps)
    sa = MultiCuspSystem(group, parity, ps_a)
    sb = MultiCuspSystem(group, parity, ps_b)
    Ua, sva = _forced_null(sa, Rc, m)
    Ub, svb = _forced_null(sb, Rc, m)
    worst = max(sva[m - 1], svb[m - 1])
    if worst > mult_tol:
        return False, f"eigenspace of dimension {m} not found at the storage height (sv {worst:.1e})", []
    Ms = min(settings.n_coeffs, ps_a.M0, ps_b.M0)
    Ca = sa.coefficients(Ua)[:, :, :Ms]
    Cb = sb.coefficients(Ub)[:, :, :Ms]
    good_a = _good_mask(sa, Rc)[:, :Ms] & _good_mask(sb, Rc)[:, :Ms]
    K = int(np.sum(np.cumprod(good_a[0])))  # leading well-determined coefficients at infinity
    B = Ca[:, 0, :K].real.T  # (K, m); infinity is self-conjugate with shift 0: real
    if K < max(2 * m + 4, 8):
        return False, f"only {K} well-determined coefficients at infinity", []
    clusters = _hecke_clusters(B, group.level)
    if not clusters[0].eigenvalues:
        return False, f"no Hecke operator T_p could be fitted on {K} coefficients at infinity", []
    members: list[tuple[np.ndarray, bool, dict[int, float]]] = []  # (weights, is_eigenform, lambda)
    for cl in clusters:
        Bc = B @ cl.weights
        if cl.weights.shape[1] == 1 and abs(Bc[0, 0]) > 1e-6 * np.max(np.abs(Bc)):
            members.append((cl.weights[:, 0] / Bc[0, 0], True, cl.eigenvalues))
        else:
            Wr = cl.weights @ _rref_weights(Bc)
            for i in range(Wr.shape[1]):
                members.append((Wr[:, i], False, cl.eigenvalues))
    members.sort(key=lambda t: int(np.argmax(np.abs(B @ t[0]) > 1e-8 * np.max(np.abs(B @ t[0])))))

    if group.level == 1:
        old = (0, [])
    elif classify:
        old = _old_dimension(group, parity, Rc, m, settings, mult_tol)
    else:
        old = None
    forms = []
    hecke_nmax = min(settings.hecke_nmax, K)
    # second-height realisation of each member: closest element of span(Cb) on good entries
    Xb = _real_rows(Cb, good_a)
    for idx, (w, eig, lam) in enumerate(members):
        coeffs = np.tensordot(w, Ca, axes=(0, 0))
        # exact normalisation: c_inf(1) = 1 (eigenforms) or 1 at the echelon pivot
        piv = int(np.argmax(np.abs(coeffs[0].real) > 1e-8 * np.max(np.abs(coeffs[0].real))))
        coeffs = coeffs / coeffs[0, piv].real
        target = _real_rows(coeffs[None], good_a)[:, 0]
        x, *_ = np.linalg.lstsq(Xb, target, rcond=None)
        coeffs_b = np.tensordot(x, Cb, axes=(0, 0))
        errs = np.abs(coeffs - coeffs_b)
        c_inf = coeffs[0].real
        res_eig = _eigen_residual(c_inf, lam, hecke_nmax)
        hres = max(res_eig, hecke_residual(c_inf, group.level, hecke_nmax)) if eig else res_eig
        if hres > settings.hecke_tol:
            return False, f"Hecke residual {hres:.2e} above {settings.hecke_tol:.0e} (basis member {idx})", []
        if not np.iscomplexobj(coeffs) or np.max(np.abs(coeffs.imag)) == 0.0:
            coeffs = coeffs.real.copy() if np.iscomplexobj(coeffs) else coeffs
            errs = errs.real if np.iscomplexobj(errs) else errs
        is_new = _member_is_new(old, m, eig, lam)
        extra = {
            "hecke_eigenform": bool(eig),
            "hecke_eigenvalues": {str(p): v for p, v in lam.items()},
            "well_determined_at_infinity": K,
            "hecke_residual_kind": "multiplicative+eigen" if eig else "eigen (T_p, p not dividing N)",
            "singular_values_scan": [float(v) for v in sv1[: m + 1]],
            "singular_values_store": [float(v) for v in sva[: m + 1]],
            "coefficient_subspace_gap": gap,
            "basis": "hecke" if eig else "echelon",
        }
        if old is not None:
            extra["old_dimension"] = int(old[0])
        forms.append(
            Form(
                level=group.level,
                R=float(Rc),
                symmetry=SymmetryClass(parity),
                coeffs=coeffs,
                coeff_errors=np.asarray(errs, dtype=float),
                R_error=float(max(dR, 1e-15 * Rc)),
                hecke_residual=float(hres),
                params=ps_a,
                is_new=is_new,
                multiplicity=m,
                basis_index=idx,
                extra=extra,
            )
        )
    return True, f"confirmed, multiplicity {m}", forms


def _forced_null(system: MultiCuspSystem, R: float, m: int) -> tuple[np.ndarray, np.ndarray]:
    """The m smallest singular directions (as unknown vectors) and all singular values."""
    sv, U = system.null_space(R, count=m)
    return U, sv


def _old_dimension(group, parity, R, m, settings, mult_tol):
    """(oldform dimension at level N, T_p eigenvalue sets of lower levels) at R."""
    from maasscomp.groups import gamma0

    N = group.level
    mult: dict[int, int] = {}
    lam_lower: list[dict[int, float]] = []
    for M in divisors(N)[:-1]:
        G = gamma0(M)
        Y = 0.9 * G.fundamental_domain_height
        ps = choose_params(R + 1.0, Y, settings.eps)
        sysM = MultiCuspSystem(G, parity, ps)
        sv, U = sysM.null_space(R, mult_tol)
        mult[M] = U.shape[1]
        if U.shape[1]:
            good = _good_mask(sysM, R)
            C = sysM.coefficients(U)
            K = int(np.sum(np.cumprod(good[0])))
            if K >= 8:
                for cl in _hecke_clusters(C[:, 0, :K].real.T, N):
                    lam_lower.append(cl.eigenvalues)
    new: dict[int, int] = {}
    for M in divisors(N)[:-1]:
        new[M] = mult[M] - sum(new[Mp] * len(divisors(M // Mp)) for Mp in divisors(M)[:-1])
    old = sum(new[M] * len(divisors(N // M)) for M in new)
    return old, lam_lower


def _member_is_new(old, m, eig, lam):
    if old is None:
        return None
    old_dim, lam_lower = old
    if old_dim == 0:
        return True
    if old_dim >= m:
        return False
    # mixed eigenspace: a member whose T_p eigenvalues match a lower-level form is old
    for ll in lam_lower:
        common = set(ll) & set(lam)
        if common and all(abs(ll[p] - lam[p]) < 1e-5 for p in common):
            return False
    return True if eig else None
