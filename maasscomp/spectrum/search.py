"""Locate, refine and confirm every eigenvalue of the symmetry classes of a level in an R window.

Method (docs/theory.md §1.4). With Y, M0 and Q held fixed over the window (M0 chosen for
its top), the sign of det A(R) of the square Hejhal system is scanned on a grid whose step
is a small fraction of the mean spacing of a class predicted by Weyl's law. det A(R) is
continuous in R, so unlike the classical two-Y comparison (Hejhal 1999; Strömberg 2005)
it has no poles; it changes sign at every eigenvalue and at spurious points where the
truncated system is singular. Interior minima of log|det A(R)| without a sign change are
examined for root pairs inside one grid cell. Each sign change is refined by Brent's
method, and a candidate is accepted only when it is confirmed independently:

1. the normalised coefficients a(2..) solved at a second height Y2 agree with those at Y1
   (an eigenvalue does not depend on Y, a spurious root does);
2. a secant step of the two-height difference (the classical test function of Hejhal's
   method) moves R by less than ``R_tol``; its size is the stored error estimate of R;
3. the Hecke relations hold (a(mn) = a(m) a(n), a(p^2) = a(p)^2 - 1, ...).

All classes of a level share the sample points and their pullbacks, hence the values of
Kt(R, x) the matrices need; those values come from a Chebyshev interpolant in R per chunk of
the window (:mod:`maasscomp.hejhal.kinterp`), which checks its own accuracy.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np
from scipy.optimize import brentq, minimize_scalar

from maasscomp.errors import InputError
from maasscomp.hejhal.kinterp import KInterpolator
from maasscomp.hejhal.params import choose_params, truncation_M0
from maasscomp.hejhal.system import HejhalSystem, SampleSet, normalised_solution, slogdet
from maasscomp.hejhal.types import SolverParams, SymmetryClass
from maasscomp.spectrum.classify import classify
from maasscomp.spectrum.form import Form
from maasscomp.spectrum.hecke import hecke_residual

# Beyond this many Kt points per R the direct per-R evaluation is used instead of
# interpolation in R (the interpolant's memory grows like nodes x points).
_INTERP_MAX_POINTS = 1_500_000


@dataclass(frozen=True)
class SearchSettings:
    """Knobs of the eigenvalue search (all have sensible defaults).

    Attributes
    ----------
    eps : float
        Truncation target of every system.
    Y1_frac, Y2_frac : float
        Scan and confirmation heights as fractions of the group's Y0.
    steps_per_spacing : float
        Grid points per mean eigenvalue spacing of the class (Weyl's law, leading terms).
    max_step : float
        Upper bound of the grid step.
    coeff_tol : float
        Largest accepted difference of a(2..) between the Y1 and Y2 solves.
    hecke_tol : float
        Largest accepted Hecke residual at confirmation.
    R_tol : float
        Largest accepted distance (relative to max(1, R)) between the root of det A at Y1
        and the root of the two-height difference it is polished to.
    n_coeffs : int
        Least number of coefficients stored per form; more are stored when evaluating the
        form anywhere in the fundamental domain needs them (the final solve uses a height
        low enough for all of them to be accurate).
    hecke_nmax : int
        Range of the Hecke check stored with each form.
    lfunction_check : bool
        Check the functional equation of the standard L-function of every newform and store
        the outcome in ``Form.extra["lfunction"]`` (skipped, with the reason, where it would
        need too many coefficients; see :mod:`maasscomp.spectrum.extend`).
    """

    eps: float = 1e-14
    Y1_frac: float = 0.92
    Y2_frac: float = 0.80
    steps_per_spacing: float = 12.0
    max_step: float = 0.02
    coeff_tol: float = 1e-6
    hecke_tol: float = 1e-6
    R_tol: float = 1e-9
    n_coeffs: int = 60
    hecke_nmax: int = 30
    lfunction_check: bool = True

    def __post_init__(self) -> None:
        if not (0 < self.eps < 1e-3):
            raise InputError(f"eps={self.eps!r} is not allowed; it must lie in (0, 1e-3)")
        if not (0 < self.Y2_frac < self.Y1_frac < 1):
            raise InputError(
                f"Y fractions Y1_frac={self.Y1_frac!r}, Y2_frac={self.Y2_frac!r} are not allowed; "
                "they must satisfy 0 < Y2_frac < Y1_frac < 1"
            )
        if self.n_coeffs < 10:
            raise InputError(f"n_coeffs={self.n_coeffs!r} is not allowed; it must be at least 10")


@dataclass(frozen=True)
class Candidate:
    """A sign change of det A(R) and what became of it."""

    R: float
    accepted: bool
    reason: str


@dataclass(frozen=True)
class SearchResult:
    """Outcome of a window search for one symmetry class."""

    level: int
    symmetry: SymmetryClass
    R_min: float
    R_max: float
    forms: tuple[Form, ...]
    candidates: tuple[Candidate, ...]
    grid_step: float
    params: SolverParams


def mean_spacing(level: int, n_classes: int, R: float, index: int) -> float:
    """Mean eigenvalue spacing of one symmetry class near R (leading Weyl term).

    N(T) ~ index T^2 / 12 (docs/theory.md §2), shared among ``n_classes`` classes.
    """
    return 6.0 * n_classes / (index * max(R, 1.0))


class _KSource:
    """Kt(R, x) at a sample set's points: interpolated in R per chunk, or direct."""

    def __init__(self, samples: SampleSet, Ra: float, Rb: float) -> None:
        self.samples = samples
        self.interp = None
        if samples.k_points.size <= _INTERP_MAX_POINTS and Rb > Ra:
            self.interp = KInterpolator(samples.k_points, Ra, Rb)

    def __call__(self, R: float) -> np.ndarray:
        if self.interp is not None and self.interp.Ra <= R <= self.interp.Rb:
            return self.interp(R)
        return self.samples.k_values(R)


def _chunks(grid: np.ndarray, samples: SampleSet) -> list[tuple[int, int]]:
    """Index ranges [i0, i1] (inclusive, consecutive ranges share an end point) such that
    the interpolant of each has a moderate number of nodes."""
    xmin = float(samples.k_points.min())
    omega = math.acosh(max(grid[-1] / xmin, 1.0))
    width = 50.0 / max(omega, 0.5)  # about 44 Chebyshev nodes per chunk
    out, i0 = [], 0
    while i0 < len(grid) - 1:
        i1 = int(np.searchsorted(grid, grid[i0] + width, side="right")) - 1
        i1 = min(max(i1, i0 + 2), len(grid) - 1)
        out.append((i0, i1))
        i0 = i1
    return out or [(0, len(grid) - 1)]


def _refine(det: Callable[[float], tuple[float, float]], a: float, b: float) -> float:
    """Root of det in the sign-change bracket [a, b] by Brent's method."""
    la, lb = det(a)[1], det(b)[1]
    ref = max(la, lb)

    def g(R: float) -> float:
        s, ld = det(R)
        return s * math.exp(max(ld - ref, -700.0))

    # the confirmation polishes the root with two-height secant steps on exact K values, so
    # a relative 1e-12 here is plenty (and saves determinant evaluations at large R)
    return float(brentq(g, a, b, xtol=1e-15, rtol=1e-12, maxiter=200))


def _hidden_pairs(det: Callable[[float], tuple[float, float]], grid: np.ndarray, signs: np.ndarray,
                  logs: np.ndarray, lo: int, hi: int) -> list[tuple[float, float]]:
    """Brackets of root pairs that fall inside one grid cell, for interior indices lo..hi-1.

    Between two roots |det A| has a maximum, so an interior local minimum of log|det A|
    with no sign change around it marks either a near miss or two roots closer than the
    grid step. The minimum is located by bounded minimisation; if the sign there (or just
    beside it: the minimiser may stop at one of the roots) differs from its neighbours,
    both roots are bracketed.
    """
    out = []
    for i in range(max(lo, 1), min(hi, len(grid) - 1)):
        if not (logs[i] < logs[i - 1] and logs[i] < logs[i + 1]):
            continue
        if signs[i - 1] != signs[i] or signs[i] != signs[i + 1]:
            continue
        a, b = float(grid[i - 1]), float(grid[i + 1])
        res = minimize_scalar(lambda R: det(R)[1], bounds=(a, b), method="bounded",
                              options={"xatol": 1e-6 * (b - a), "maxiter": 40})
        m = float(res.x)
        for p in (m, m - 1e-9 * (b - a), m + 1e-9 * (b - a)):
            if a < p < b and det(p)[0] != signs[i]:
                out += [(a, p), (p, b)]
                break
    return out


def _store_count(group, R: float, settings: SearchSettings) -> int:
    """Coefficients to store: at least ``n_coeffs``, and enough to evaluate the form to the
    truncation target anywhere in the fundamental domain (heights >= Y0 in every cusp)."""
    # a few per cent of margin: the evaluator rounds heights down and bounds whole tails
    need = truncation_M0(R, 0.97 * group.fundamental_domain_height, settings.eps)
    return max(settings.n_coeffs, int(math.ceil(1.03 * need)))


def _store_height(R: float, m: int, p1: SolverParams) -> float:
    """A height at which a(1..m) are all determined accurately.

    Row n of the system divides by Kt(2 pi n Y), which decays exponentially beyond the
    turning point 2 pi n Y = R (DLMF 10.40.2 / docs/theory.md §3.2); a(n) stays accurate
    while 2 pi n Y <= R + 2 R^{1/3} + 6 (measured on PSL(2,Z) at R = 10, 300, 1000).
    """
    return min(p1.Y, (R + 2.0 * R ** (1.0 / 3.0) + 6.0) / (2.0 * math.pi * m))


def _check_window(R_min: float, R_max: float) -> None:
    for name, v in (("R_min", R_min), ("R_max", R_max)):
        if not (isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v) and v > 0):
            raise InputError(f"{name}={v!r} is not allowed; it must be a positive finite number")
    if R_min >= R_max:
        raise InputError(f"R_min={R_min!r} must be smaller than R_max={R_max!r}")


def search_classes(
    group,
    classes: Sequence[SymmetryClass],
    R_min: float,
    R_max: float,
    settings: SearchSettings | None = None,
    *,
    step: float | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> dict[SymmetryClass, SearchResult]:
    """Find every eigenvalue of the given symmetry classes of a level with R in [R_min, R_max].

    Parameters
    ----------
    group : Gamma0
        From :func:`maasscomp.groups.gamma0` (squarefree level).
    classes : sequence of SymmetryClass
        Classes to search; they share the sample points and the K-Bessel values.
    R_min, R_max : float
        The window, 0 < R_min < R_max. A root exactly at R_max is reported; one exactly
        at R_min is reported too (callers that split a window de-duplicate).
    settings : SearchSettings, optional
    step : float, optional
        Grid step override (default: mean spacing / steps_per_spacing, capped by max_step).
    progress : callable(done, total), optional
        Called after each grid point.

    Returns
    -------
    dict
        One :class:`SearchResult` per class: accepted forms sorted by R, and every
        candidate with the reason it was kept or rejected.
    """
    settings = settings or SearchSettings()
    _check_window(R_min, R_max)
    classes = list(dict.fromkeys(classes))
    if not classes:
        raise InputError("no symmetry class to search; give at least one")
    n_classes = 2 * 2 ** len(group.primes)
    if step is None:
        step = min(settings.max_step, mean_spacing(group.level, n_classes, R_max, group.index) / settings.steps_per_spacing)
    if not (isinstance(step, (int, float)) and math.isfinite(step) and step > 0):
        raise InputError(f"grid step={step!r} is not allowed; it must be a positive finite number")

    Y0 = group.fundamental_domain_height
    # one set of parameters for the whole scan: a jump of M0 would flip the sign of det
    p1 = choose_params(R_max + 1.0, settings.Y1_frac * Y0, settings.eps)
    p2 = choose_params(R_max + 1.0, settings.Y2_frac * Y0, settings.eps)
    s1, s2 = SampleSet(group, p1), SampleSet(group, p2)
    sys1 = {c: HejhalSystem(group, c, p1, s1) for c in classes}
    sys2 = {c: HejhalSystem(group, c, p2, s2) for c in classes}

    n = max(3, int(math.ceil((R_max - R_min) / step)) + 1)
    grid = np.linspace(R_min, R_max, n)
    roots: dict[SymmetryClass, list[float]] = {c: [] for c in classes}
    # Both heights are scanned: a spurious root of the truncated system moves with Y, so a
    # true eigenvalue that shares a grid cell with spurious roots at one height (three roots
    # give one sign change) shows as a clean sign change at the other.
    scans = [(s1, sys1), (s2, sys2)]
    total = n * len(scans)
    done = 0
    for samples, systems in scans:
        signs = {c: np.empty(n) for c in classes}
        logs = {c: np.empty(n) for c in classes}
        for i0, i1 in _chunks(grid, samples):
            lo, hi = max(i0 - 1, 0), min(i1 + 1, n - 1)  # one cell of overlap for the minima test
            ksrc = _KSource(samples, float(grid[lo]), float(grid[hi]))
            for i in range(lo, hi + 1):
                k = ksrc(float(grid[i]))
                for c in classes:
                    signs[c][i], logs[c][i] = slogdet(systems[c].matrix_from_k(k))
                if i0 <= i < i1 or i == n - 1:
                    done += 1
                    if progress is not None:
                        progress(done, total)
            for c in classes:
                det = lambda R, c=c: slogdet(systems[c].matrix_from_k(ksrc(R)))  # noqa: E731
                sg = signs[c]
                for i in range(i0, i1):
                    if sg[i] * sg[i + 1] < 0:
                        roots[c].append(_refine(det, float(grid[i]), float(grid[i + 1])))
                for a, b in _hidden_pairs(det, grid, sg, logs[c], i0 if i0 > 0 else 1, i1):
                    roots[c].append(_refine(det, a, b))

    results = {}
    for c in classes:
        candidates: list[Candidate] = []
        forms: list[Form] = []
        for Rc in sorted(roots[c]):
            # the same eigenvalue is a root at both heights: confirm it once
            if any(abs(f.R - Rc) <= 1e-9 * max(1.0, Rc) for f in forms):
                continue
            ok, reason, form = _confirm(group, c, Rc, sys1[c], sys2[c], settings)
            if ok and any(abs(f.R - form.R) <= 1e-9 * max(1.0, form.R) for f in forms):
                ok, reason = False, "polished onto an eigenvalue confirmed already"
            candidates.append(Candidate(R=Rc, accepted=ok, reason=reason))
            if ok:
                forms.append(form)
        results[c] = SearchResult(
            level=group.level, symmetry=c, R_min=float(R_min), R_max=float(R_max),
            forms=tuple(sorted(forms, key=lambda f: f.R)), candidates=tuple(candidates),
            grid_step=float(step), params=p1,
        )
    return results


def search_window(
    group,
    symmetry: SymmetryClass,
    R_min: float,
    R_max: float,
    settings: SearchSettings | None = None,
    *,
    step: float | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> SearchResult:
    """Find every eigenvalue of one symmetry class with R in [R_min, R_max].

    See :func:`search_classes` (this is the one-class case).
    """
    return search_classes(group, [symmetry], R_min, R_max, settings, step=step, progress=progress)[symmetry]


def _confirm(group, symmetry: SymmetryClass, Rc: float, sys1: HejhalSystem, sys2: HejhalSystem,
             settings: SearchSettings):
    """Independent confirmation of a det root; returns (ok, reason, Form | None).

    The root Rc of det A at Y1 is first polished by the secant method on the two-height
    difference H(R) = a(2..k; Y1) - a(2..k; Y2) (least squares over its components), with
    exact K values; an eigenvalue makes H vanish and the iteration converges within a few
    steps close to Rc, while at a spurious root H stays large and the iteration wanders.
    """
    k = min(8, sys1.params.M0 // 2, sys2.params.M0 // 2)
    scale = max(1.0, Rc)
    R_start = Rc

    def H(R: float) -> np.ndarray:
        return sys1.solve(R)[1:k] - sys2.solve(R)[1:k]

    H0 = H(Rc)
    if not np.all(np.isfinite(H0)):
        return False, "singular system at the candidate", None
    R_prev, H_prev = Rc + 1e-9 * scale, None
    H_prev = H(R_prev)
    step = math.inf
    for _ in range(8):
        dH = H0 - H_prev
        denom = float(dH @ dH)
        if denom == 0.0:
            break
        step = -float(H0 @ dH) / denom * (Rc - R_prev)
        R_prev, H_prev = Rc, H0
        Rc += step
        if abs(Rc - R_start) > settings.R_tol * scale:
            return False, (f"two-height secant iteration left the root by {abs(Rc - R_start):.2e} "
                           f"(more than R_tol x max(1, R))"), None
        H0 = H(Rc)
        if abs(step) <= 8 * np.finfo(float).eps * scale:
            break
    dcoef = float(np.max(np.abs(H0)))
    if not np.isfinite(dcoef) or dcoef > settings.coeff_tol:
        return False, f"coefficients at Y1 and Y2 differ by {dcoef:.2e}", None
    dR = abs(step)

    # final solve at a height giving n_coeffs accurate coefficients, and a second height
    # for their error estimate
    m = _store_count(group, Rc, settings)
    Ys = _store_height(Rc, m, sys1.params)
    ps_a = choose_params(Rc + 0.5, Ys, settings.eps)
    ps_b = choose_params(Rc + 0.5, 0.9 * Ys, settings.eps)
    ca = HejhalSystem(group, symmetry, ps_a).solve(Rc)
    cb = HejhalSystem(group, symmetry, ps_b).solve(Rc)
    m = min(m, ca.size, cb.size)
    coeffs = ca[:m]
    errs = np.abs(ca[:m] - cb[:m])
    hres = hecke_residual(coeffs, group.level, min(settings.hecke_nmax, m))
    if hres > settings.hecke_tol:
        return False, f"Hecke residual {hres:.2e} above {settings.hecke_tol:.0e}", None

    al = dict(symmetry.al_signs)
    extra: dict = {"al_signs": {str(p): s for p, s in al.items()}}
    if group.level == 1:
        is_new = True
    else:
        cl = classify(group.level, symmetry, Rc, coeffs)
        is_new = cl.is_new
        extra["atkin_lehner_residual"] = cl.newform_residual
        if not cl.is_new:
            extra["old_from_level"] = cl.old_from_level
            extra["old_relation_residual"] = cl.old_relation_residual
        elif cl.newform_residual > 1e-6:
            # confirmed eigenvalue, but neither old nor a clean newform: keep it unlabelled
            is_new = None
            extra["classification_note"] = (
                f"not an eigenvalue at a divisor level, yet c(p) = -eps_p/sqrt(p) fails by "
                f"{cl.newform_residual:.2e}")
    # every cusp of a squarefree level is W_Q(infinity) with scaling W_Q/sqrt(Q), so its
    # expansion is eps_Q times the one at infinity (docs/theory.md §1.1)
    cusp_sign = np.array([symmetry.al_sign(c.atkin_lehner_Q) for c in group.cusps], dtype=float)
    form = Form(
        level=group.level,
        R=float(Rc),
        symmetry=symmetry,
        coeffs=cusp_sign[:, None] * coeffs[None, :],
        coeff_errors=np.repeat(errs[None, :], len(cusp_sign), axis=0),
        R_error=float(max(dR, 1e-15 * Rc)),
        hecke_residual=hres,
        params=ps_a,
        is_new=is_new,
        extra=extra,
    )
    if settings.lfunction_check and is_new:
        from maasscomp.spectrum.extend import lfunction_label

        extra["lfunction"] = lfunction_label(group, form)
    return True, "confirmed", form


def search_exceptional(group, symmetry: SymmetryClass, settings: SearchSettings | None = None,
                       *, n_grid: int = 400) -> SearchResult:
    """Search for exceptional eigenvalues lambda = 1/4 - t^2, t in (0, 1/2), of one class.

    The same determinant-sign scan and two-height confirmation as :func:`search_window`,
    on the system built with K_t of real order. Selberg's eigenvalue conjecture predicts
    none for congruence groups; it is proved for small levels (Huxley 1985; for squarefree
    N < 857 by Booker and Strömbergsson 2007 -- from memory), so every confirmed root here
    would be a failure of the solver. The returned forms carry R = t (read lambda = 1/4 - t^2).
    """
    settings = settings or SearchSettings()
    Y0 = group.fundamental_domain_height
    p1 = choose_params(1.0, settings.Y1_frac * Y0, settings.eps)
    p2 = choose_params(1.0, settings.Y2_frac * Y0, settings.eps)
    sys1 = HejhalSystem(group, symmetry, p1)
    sys2 = HejhalSystem(group, symmetry, p2)
    grid = np.linspace(0.002, 0.498, n_grid)
    det = lambda t: sys1.log_det(t, exceptional=True)  # noqa: E731
    signs = np.array([det(float(t))[0] for t in grid])
    candidates: list[Candidate] = []
    for i in np.nonzero(signs[:-1] * signs[1:] < 0)[0]:
        tc = _refine(det, float(grid[i]), float(grid[i + 1]))
        a1 = sys1.solve(tc, exceptional=True)
        a2 = sys2.solve(tc, exceptional=True)
        d = float(np.max(np.abs(a1[1:6] - a2[1:6])))
        ok = bool(np.isfinite(d) and d < settings.coeff_tol)
        candidates.append(Candidate(R=tc, accepted=ok, reason="confirmed" if ok else f"coefficients at Y1 and Y2 differ by {d:.2e}"))
    return SearchResult(level=group.level, symmetry=symmetry, R_min=0.0, R_max=0.5, forms=(),
                        candidates=tuple(candidates), grid_step=float(grid[1] - grid[0]), params=p1)


def symmetry_classes(group, parities: tuple[str, ...] = ("even", "odd")) -> list[SymmetryClass]:
    """All symmetry classes searched at a level: parities times Atkin--Lehner signs.

    For squarefree levels each prime p | N gets a sign eps_p = +-1 (2^omega(N) sign
    patterns per parity); other levels are split by parity only.
    """
    import itertools

    if not group.is_squarefree:
        return [SymmetryClass(p) for p in parities]
    primes = sorted(group.primes)
    return [
        SymmetryClass(par, tuple(zip(primes, signs)))
        for par in parities
        for signs in itertools.product((1, -1), repeat=len(primes))
    ]
