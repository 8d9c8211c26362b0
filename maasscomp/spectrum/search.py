"""Locate, refine and confirm every eigenvalue of one symmetry class in an R window.

Method (formulas ref. §1.4). With Y, M0 and Q held fixed over the window (M0 chosen for
its top), the sign of det A(R) of the square Hejhal system is scanned on a grid whose step
is a small fraction of the mean spacing of the class predicted by Weyl's law; interior
minima of log|det A(R)| without a sign change are examined for root pairs inside one cell. det A(R) is
continuous in R, so unlike the classical two-Y comparison (Hejhal 1999; Strömberg 2005)
it has no poles; it changes sign at every eigenvalue and at spurious points where the
truncated system is singular. Each sign change is refined by Brent's method, and a
candidate is accepted only when it is confirmed independently:

1. the root of det A(R) at a second height Y2 agrees (the eigenvalue is independent of Y,
   a spurious root is not), giving the error estimate of R;
2. the normalised coefficients a(2..) solved at Y1 and at Y2 agree;
3. the Hecke relations hold (a(mn) = a(m) a(n), a(p^2) = a(p)^2 - 1, ...).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Callable

import numpy as np
from scipy.optimize import brentq

from maasscomp.errors import InputError
from maasscomp.hejhal.params import choose_params
from maasscomp.hejhal.system import HejhalSystem
from maasscomp.hejhal.types import SolverParams, SymmetryClass
from maasscomp.spectrum.form import Form
from maasscomp.spectrum.classify import classify
from maasscomp.spectrum.hecke import hecke_residual


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
        Largest accepted difference between the det roots at Y1 and Y2.
    n_coeffs : int
        Number of coefficients stored per form (the final solve uses a height low enough
        for these to be accurate).
    hecke_nmax : int
        Range of the Hecke check stored with each form.
    """

    eps: float = 1e-14
    Y1_frac: float = 0.92
    Y2_frac: float = 0.80
    steps_per_spacing: float = 12.0
    max_step: float = 0.02
    coeff_tol: float = 1e-6
    hecke_tol: float = 1e-6
    R_tol: float = 1e-8
    n_coeffs: int = 60
    hecke_nmax: int = 30

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

    N(T) ~ index T^2 / 12 (formulas ref. §2), shared among ``n_classes`` classes.
    """
    return 6.0 * n_classes / (index * max(R, 1.0))


def _det_function(system: HejhalSystem, ref: float) -> Callable[[float], float]:
    def g(R: float) -> float:
        s, ld = system.log_det(R)
        return s * math.exp(max(ld - ref, -700.0)) if s != 0 else 0.0

    return g


def _refine_root(system: HejhalSystem, a: float, b: float) -> float:
    sa, la = system.log_det(a)
    sb, lb = system.log_det(b)
    g = _det_function(system, max(la, lb))
    return float(brentq(g, a, b, xtol=1e-15, rtol=4 * np.finfo(float).eps, maxiter=200))


def _root_near(system: HejhalSystem, R: float, width: float) -> float | None:
    """Root of det A at this system's Y within R +- width (None if no sign change)."""
    for w in (width, 4 * width, 16 * width):
        a, b = R - w, R + w
        if system.log_det(a)[0] * system.log_det(b)[0] < 0:
            return _refine_root(system, a, b)
    return None


def _hidden_pairs(system: HejhalSystem, grid: np.ndarray, signs: np.ndarray,
                  logs: np.ndarray) -> list[tuple[float, float]]:
    """Brackets of root pairs that fall inside one grid cell.

    Between two roots |det A| has a maximum, so an interior local minimum of log|det A|
    with no sign change around it marks either a near miss or two roots closer than the
    grid step. The minimum is located by bounded minimisation; if the sign there differs
    from its neighbours, both roots are bracketed.
    """
    from scipy.optimize import minimize_scalar

    out = []
    for i in range(1, len(grid) - 1):
        if not (logs[i] < logs[i - 1] and logs[i] < logs[i + 1]):
            continue
        if signs[i - 1] != signs[i] or signs[i] != signs[i + 1]:
            continue  # the sign changes are bracketed already
        a, b = float(grid[i - 1]), float(grid[i + 1])
        res = minimize_scalar(lambda R: system.log_det(R)[1], bounds=(a, b), method="bounded",
                              options={"xatol": 1e-12 * max(1.0, b)})
        m = float(res.x)
        # the minimiser may stop right at one of the two roots: probe both sides of it
        for p in (m, m - 1e-9 * (b - a), m + 1e-9 * (b - a)):
            if a < p < b and system.log_det(p)[0] != signs[i]:
                out += [(a, p), (p, b)]
                break
    return out


def _store_height(R: float, n_coeffs: int, p1: SolverParams) -> float:
    """A height whose truncation M0 is about 3 n_coeffs.

    Coefficients up to about M0/3 are accurate to near the truncation target in double
    precision (formulas ref. §1.3); M0 grows like 1/Y at fixed R.
    """
    return min(p1.Y, p1.Y * p1.M0 / (3.0 * n_coeffs))


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

    Parameters
    ----------
    group : Gamma0
        From :func:`maasscomp.groups.gamma0` (squarefree level).
    symmetry : SymmetryClass
    R_min, R_max : float
        The window, 0 < R_min < R_max.
    settings : SearchSettings, optional
    step : float, optional
        Grid step override (default: mean spacing / steps_per_spacing, capped by max_step).
    progress : callable(done, total), optional
        Called after each grid point.

    Returns
    -------
    SearchResult
        Accepted forms sorted by R, and every candidate with the reason it was kept or
        rejected.
    """
    settings = settings or SearchSettings()
    for name, v in (("R_min", R_min), ("R_max", R_max)):
        if not (isinstance(v, (int, float)) and math.isfinite(v) and v > 0):
            raise InputError(f"{name}={v!r} is not allowed; it must be a positive finite number")
    if R_min >= R_max:
        raise InputError(f"R_min={R_min!r} must be smaller than R_max={R_max!r}")
    n_classes = 2 * 2 ** len(group.primes)
    if step is None:
        step = min(settings.max_step, mean_spacing(group.level, n_classes, R_max, group.index) / settings.steps_per_spacing)
    if not (step > 0 and math.isfinite(step)):
        raise InputError(f"grid step={step!r} is not allowed; it must be a positive finite number")

    Y0 = group.fundamental_domain_height
    Y1, Y2 = settings.Y1_frac * Y0, settings.Y2_frac * Y0
    # one set of parameters for the whole scan: a jump of M0 would flip the sign of det
    p1 = choose_params(R_max + 1.0, Y1, settings.eps)
    p2 = choose_params(R_max + 1.0, Y2, settings.eps)
    sys1 = HejhalSystem(group, symmetry, p1)
    sys2 = HejhalSystem(group, symmetry, p2)

    n = max(2, int(math.ceil((R_max - R_min) / step)) + 1)
    grid = np.linspace(R_min, R_max, n)
    signs = np.empty(n)
    logs = np.empty(n)
    for i, R in enumerate(grid):
        signs[i], logs[i] = sys1.log_det(float(R))
        if progress is not None:
            progress(i + 1, n)

    brackets = [(float(grid[i]), float(grid[i + 1])) for i in np.nonzero(signs[:-1] * signs[1:] < 0)[0]]
    brackets += _hidden_pairs(sys1, grid, signs, logs)

    candidates: list[Candidate] = []
    forms: list[Form] = []
    for a, b in sorted(brackets):
        Rc = _refine_root(sys1, a, b)
        ok, reason, form = _confirm(group, symmetry, Rc, sys1, sys2, settings, step)
        candidates.append(Candidate(R=Rc, accepted=ok, reason=reason))
        if ok:
            forms.append(form)
    return SearchResult(
        level=group.level,
        symmetry=symmetry,
        R_min=float(R_min),
        R_max=float(R_max),
        forms=tuple(sorted(forms, key=lambda f: f.R)),
        candidates=tuple(candidates),
        grid_step=float(step),
        params=p1,
    )


def _confirm(group, symmetry, Rc, sys1, sys2, settings: SearchSettings, step: float):
    """Independent confirmation of a det root; returns (ok, reason, Form | None)."""
    R2 = _root_near(sys2, Rc, max(1e-7, 1e3 * settings.R_tol))
    if R2 is None:
        return False, "no det root at the second height Y2", None
    dR = abs(R2 - Rc)
    if dR > settings.R_tol:
        return False, f"det roots at Y1 and Y2 differ by {dR:.2e}", None
    a1 = sys1.solve(Rc)
    a2 = sys2.solve(Rc)
    k = min(8, sys1.params.M0 // 2, sys2.params.M0 // 2)
    dcoef = float(np.max(np.abs(a1[1:k] - a2[1:k])))
    if not np.isfinite(dcoef) or dcoef > settings.coeff_tol:
        return False, f"coefficients at Y1 and Y2 differ by {dcoef:.2e}", None

    # final solve at a height giving n_coeffs accurate coefficients, and a second height
    # for their error estimate
    Ys = _store_height(Rc, settings.n_coeffs, sys1.params)
    ps_a = choose_params(Rc + 0.5, Ys, settings.eps)
    ps_b = choose_params(Rc + 0.5, 0.9 * Ys, settings.eps)
    ca = HejhalSystem(group, symmetry, ps_a).solve(Rc)
    cb = HejhalSystem(group, symmetry, ps_b).solve(Rc)
    m = min(settings.n_coeffs, ca.size, cb.size)
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
    # expansion is eps_Q times the one at infinity (formulas ref. §1.1)
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
    signs = np.array([sys1.log_det(float(t), exceptional=True)[0] for t in grid])
    candidates: list[Candidate] = []
    for i in np.nonzero(signs[:-1] * signs[1:] < 0)[0]:
        ref = max(sys1.log_det(float(grid[i]), exceptional=True)[1],
                  sys1.log_det(float(grid[i + 1]), exceptional=True)[1])

        def g(t: float, ref: float = ref) -> float:
            s, ld = sys1.log_det(t, exceptional=True)
            return s * math.exp(max(ld - ref, -700.0))

        tc = float(brentq(g, grid[i], grid[i + 1], xtol=1e-14))
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
