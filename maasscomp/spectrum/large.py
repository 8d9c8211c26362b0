"""Locate and verify Maass forms at large R (thousands to 4e4 and beyond) within a memory budget.

At R = 4e4 on PSL(2,Z) one Hejhal matrix has M0 ~ 8,100 (0.5 GB), needs Kt at 7.4e7
points and one LU factorisation costs 3.5e11 flops (about 11 CPU seconds). A scan of the
sign of det A(R) on a grid of a dozen points per mean spacing, with Brent refinement and a
secant confirmation that re-evaluates Kt at every step, costs hundreds of such
factorisations and Kt evaluations. This module spends them where they are needed:

1. Matrices (:mod:`maasscomp.hejhal.blocked`): per window of a few mean spacings and per
   height, A(R) of every class is assembled at a handful of Chebyshev points in R (column
   blocks: no Q x M0 arrays) and interpolated in between; A(R) and dA/dR anywhere in the
   window then cost one pass over the stored node matrices.
2. Location (:mod:`maasscomp.hejhal.nonlinear`): at a few centres per mean spacing one LU
   factorisation of A(R_c) and a Krylov eigen-solve of A^{-1} A' predict every root of
   det A within a radius (local linearisation, Ruhe 1973); Newton steps on the
   linearisation polish each root (quadratic convergence, 2-5 LU factorisations) and give
   its null vector, i.e. the coefficients. Consistency check: between consecutive centres
   the number of roots found and the sign change of det A (known from the LU
   factorisations) must agree in parity; where they do not, a centre is added in between.
3. Verification (docs/theory.md §7.4 and §10.2, as in the window search): each root of the scan
   height Y1 is followed by Newton's method at a second height Y2 (an eigenvalue does not
   depend on Y, a spurious root of the truncated system does): the two roots must agree
   within ``R_tol`` (relative), the coefficients a(2..8) of the two solutions within
   ``coeff_tol``, and the Hecke relations (a(mn) = a(m) a(n) for coprime m, n,
   a(p^2) = a(p)^2 - 1, ...) must hold to ``hecke_tol``. The stored R is the Y1 root, its
   error estimate the distance to the Y2 root; the stored coefficients are those of the Y1
   solution (enough to evaluate the form anywhere in the fundamental domain: their count
   is the truncation at height 0.97 Y0), with errors from the Y2 solution. If more are
   needed than the Y1 solution determines, two further solves at lower heights supply
   them.

Entry points: :func:`locate_large`, with the same "k nearest forms" contract as
:func:`maasscomp.spectrum.near.nearest_forms` (windows around R0 are searched until the k-th
nearest confirmed form lies inside the searched interval), and :func:`forms_in_window_large`
(every form in an interval, all roots verified).
"""

from __future__ import annotations

import contextlib
import math
import time
from dataclasses import dataclass, field
from typing import Callable, Sequence

import numpy as np

from maasscomp.errors import ConvergenceError, InputError
from maasscomp.hejhal.blocked import BlockedSystem, RInterpolatedMatrices, interpolation_nodes_needed
from maasscomp.hejhal.nonlinear import linearise, refine_root
from maasscomp.hejhal.params import choose_params, truncation_M0
from maasscomp.hejhal.system import normalised_solution
from maasscomp.hejhal.types import SolverParams, SymmetryClass
from maasscomp.special import R_MAX
from maasscomp.spectrum.form import Form
from maasscomp.spectrum.hecke import hecke_residual


@dataclass(frozen=True)
class LargeSettings:
    """Knobs of :func:`locate_large` (defaults suit R from about 500 to 1e5).

    Attributes
    ----------
    eps : float
        Truncation target of every system.
    Y1_frac, Y2_frac : float
        Scan and confirmation heights as fractions of the group's Y0.
    centres_per_spacing : float
        Linearisation centres per mean eigenvalue spacing of one class (Weyl's law).
    R_tol : float
        Largest accepted distance between the Y1 and Y2 roots, relative to max(1, R).
    coeff_tol : float
        Largest accepted difference of a(2..8) between the Y1 and Y2 solutions.
    hecke_tol : float
        Largest accepted Hecke residual.
    n_coeffs : int
        Least number of coefficients stored per form.
    hecke_nmax : int
        Range of the Hecke check.
    workers : int
        Threads for the matrix assembly (the LU factorisations use the BLAS threads as
        configured by OPENBLAS_NUM_THREADS / OMP_NUM_THREADS).
    memory_limit : float
        Bytes the stored node matrices and working matrices may take; when all classes of
        a window together would exceed it, they are processed one at a time (the Kt
        values are then computed once per class).
    lfunction_check : bool
        Run the functional-equation check of :mod:`maasscomp.spectrum.extend` for newforms
        (skipped with a reason where it would need too many coefficients).
    """

    eps: float = 1e-14
    Y1_frac: float = 0.92
    Y2_frac: float = 0.80
    centres_per_spacing: float = 2.0
    R_tol: float = 1e-11
    coeff_tol: float = 1e-6
    hecke_tol: float = 1e-6
    n_coeffs: int = 60
    hecke_nmax: int = 30
    workers: int = 1
    memory_limit: float = 12e9
    lfunction_check: bool = True

    def __post_init__(self) -> None:
        if not (0 < self.eps < 1e-3):
            raise InputError(f"eps={self.eps!r} is not allowed; it must lie in (0, 1e-3)")
        if not (0 < self.Y2_frac < self.Y1_frac < 1):
            raise InputError(f"Y fractions Y1_frac={self.Y1_frac!r}, Y2_frac={self.Y2_frac!r} are not "
                             "allowed; they must satisfy 0 < Y2_frac < Y1_frac < 1")
        if not (0.5 <= self.centres_per_spacing <= 50):
            raise InputError(f"centres_per_spacing={self.centres_per_spacing!r} is not allowed; "
                             "it must lie in [0.5, 50]")
        for name in ("R_tol", "coeff_tol", "hecke_tol"):
            v = getattr(self, name)
            if not (0 < v < 1):
                raise InputError(f"{name}={v!r} is not allowed; it must lie in (0, 1)")
        if not (isinstance(self.n_coeffs, int) and self.n_coeffs >= 10):
            raise InputError(f"n_coeffs={self.n_coeffs!r} is not allowed; it must be an integer >= 10")
        if not (isinstance(self.hecke_nmax, int) and 6 <= self.hecke_nmax <= self.n_coeffs):
            raise InputError(f"hecke_nmax={self.hecke_nmax!r} is not allowed; it must be an integer in "
                             f"[6, n_coeffs={self.n_coeffs}]")
        if not (isinstance(self.workers, int) and not isinstance(self.workers, bool) and self.workers >= 1):
            raise InputError(f"workers={self.workers!r} is not allowed; it must be an integer >= 1")
        if not (self.memory_limit > 0):
            raise InputError(f"memory_limit={self.memory_limit!r} is not allowed; it must be > 0 bytes")


@dataclass(frozen=True)
class LargeCandidate:
    """A root of det A at the scan height and what became of it."""

    R: float
    symmetry: SymmetryClass
    accepted: bool
    reason: str
    R_Y2: float | None = None


@dataclass(frozen=True)
class LargeSearchResult:
    """Outcome of :func:`locate_large`.

    Attributes
    ----------
    forms : tuple of Form
        :func:`locate_large`: the k confirmed forms nearest to R0, sorted by distance;
        :func:`forms_in_window_large`: every confirmed form, sorted by R.
    R0 : float
    windows : tuple of (float, float)
        The R intervals searched; together they cover one interval.
    candidates : tuple of LargeCandidate
        Every root at the scan height, with the outcome of its verification (roots farther
        from R0 than the k nearest confirmed forms are left unexamined and say so).
    expected : float or None
        Weyl's law expectation for the union of the windows (all classes of the searched
        parities; None when unavailable for the level).
    parity_mismatches : int
        Intervals between linearisation centres where the number of roots found and the
        sign change of det A disagreed in parity even after subdivision (0 means the roots
        found are consistent with the determinant).
    stats : dict
        Costs: LU factorisations, Kt evaluations, seconds (wall and CPU) per stage, the
        largest set of stored node matrices in bytes, M0 at both heights.
    """

    forms: tuple[Form, ...]
    R0: float
    windows: tuple[tuple[float, float], ...]
    candidates: tuple[LargeCandidate, ...]
    expected: float | None
    parity_mismatches: int
    stats: dict = field(default_factory=dict)


class _Costs:
    """Counters and timers of one run (passed around, never global)."""

    def __init__(self) -> None:
        self.lu = 0
        self.kt_points = 0
        self.node_bytes_max = 0
        self.wall: dict[str, float] = {}
        self.cpu: dict[str, float] = {}
        self.M0: dict[str, int] = {}

    @contextlib.contextmanager
    def timed(self, stage: str):
        w, c = time.perf_counter(), time.process_time()
        try:
            yield
        finally:
            self.wall[stage] = self.wall.get(stage, 0.0) + time.perf_counter() - w
            self.cpu[stage] = self.cpu.get(stage, 0.0) + time.process_time() - c

    def as_dict(self) -> dict:
        return {"lu_factorisations": self.lu, "kt_evaluations": self.kt_points,
                "node_matrix_bytes_max": self.node_bytes_max, "wall_s": dict(self.wall),
                "cpu_s": dict(self.cpu), "M0": dict(self.M0)}


def _mean_spacing_class(group, n_classes: int, R: float) -> float:
    """Mean spacing of one symmetry class near R: N(T) ~ index T^2 / 12 shared by the classes
    (docs/theory.md §2)."""
    return 6.0 * n_classes / (group.index * max(R, 1.0))


def _n_classes_total(group) -> int:
    return 2 * 2 ** len(group.primes)


def store_count(group, R: float, eps: float, n_coeffs: int) -> int:
    """Coefficients to store: at least ``n_coeffs`` and enough to evaluate the form to ``eps``
    anywhere in the fundamental domain (truncation at height 0.97 Y0, with 3% margin)."""
    need = truncation_M0(R, 0.97 * group.fundamental_domain_height, eps)
    return max(n_coeffs, int(math.ceil(1.03 * need)))


def accurate_count(R: float, Y: float) -> int:
    """Coefficients a(n) a solve at height Y determines accurately: 2 pi n Y <= R + 2 R^{1/3} + 6.

    Row n of the system carries Kt(2 pi n Y), which decays exponentially beyond the turning
    point 2 pi n Y = R (DLMF 10.40.2 / docs/theory.md §3.2).
    """
    return int((R + 2.0 * R ** (1.0 / 3.0) + 6.0) / (2.0 * math.pi * Y))


class _Window:
    """Matrices of one window at one height for a group of classes."""

    def __init__(self, group, classes, params, a, b, settings: LargeSettings, costs: _Costs, label: str,
                 nodes: int | None = None):
        self.system = BlockedSystem(group, classes, params, workers=settings.workers)
        with costs.timed("assembly"):
            self.interp = RInterpolatedMatrices(self.system, a, b, nodes=nodes)
        costs.kt_points += self.interp.nodes * self.system.kt_points()
        costs.node_bytes_max = max(costs.node_bytes_max, self.interp.stored_bytes())
        costs.M0[label] = params.M0
        self.costs = costs
        self.a, self.b = a, b

    def pair(self, c, R):
        self.costs.lu += 1
        return self.interp.pair(c, R)

    def release(self):
        self.interp.release()


def _node_count(group, b: float, half_width: float, Y: float, least: int = 2) -> int:
    """Chebyshev nodes for an interval of the given half-width ending at b, at height Y."""
    omega = math.acosh(max(b / (2 * math.pi * Y), 1.0))
    return max(least, interpolation_nodes_needed(omega, half_width))


def _class_groups(classes, p1: SolverParams, p2: SolverParams, settings: LargeSettings, nodes1: int,
                  nodes2: int) -> list[list[SymmetryClass]]:
    """All classes of a window together if their node matrices at the scan height fit the
    memory limit, else one by one (the second height always holds one class at a time)."""
    w1, w2 = 8.0 * p1.M0 ** 2, 8.0 * p2.M0 ** 2
    working = 4  # A, dA, their stacked product, LU workspace
    second = (nodes2 + working) * w2
    for group_size in (len(classes), 1):
        if max((nodes1 * group_size + working) * w1, second) <= settings.memory_limit:
            return [list(classes)] if group_size == len(classes) else [[c] for c in classes]
    need = max((nodes1 + working) * w1, second)
    raise InputError(f"memory_limit={settings.memory_limit:.3g} bytes is too small at M0={p1.M0}/{p2.M0}: "
                     f"one class needs {need:.3g} bytes (node matrices and working space)")


def _scan_class(win: _Window, c: SymmetryClass, lo: float, hi: float, h: float, pad: float,
                costs: _Costs, log) -> tuple[list, int]:
    """Roots of det A of class c in [lo, hi] at one height: linearise at centres, refine, check parity."""
    centres = list(np.linspace(lo, hi, max(2, int(math.ceil((hi - lo) / h)) + 1)))
    lin = {}
    roots: list = []

    def add_centre(Rc: float) -> None:
        with costs.timed("linearise"):
            A, dA = win.pair(c, Rc)
            gap = (hi - lo) / max(len(centres) - 1, 1)
            lin[Rc] = linearise(A, dA, Rc, radius=0.75 * gap + pad)

    def refine_near(Rc: float, half: float) -> None:
        for rp in lin[Rc].roots:
            if not (Rc - half <= rp <= Rc + half):
                continue
            if any(abs(rp - r.R) <= 1e-9 * max(1.0, rp) for r in roots):
                continue
            with costs.timed("newton"):
                rr = refine_root(lambda R: win.pair(c, R), rp, lo=lo - pad, hi=hi + pad)
            if rr.converged and not any(abs(rr.R - r.R) <= 1e-9 * max(1.0, rr.R) for r in roots):
                roots.append(rr)

    for Rc in centres:
        add_centre(Rc)
    step = centres[1] - centres[0]
    for Rc in centres:
        refine_near(Rc, 0.5 * step + 1e-12 * max(1.0, Rc))
    # parity check between consecutive centres, subdividing where it fails
    mismatches = 0
    todo = [(centres[i], centres[i + 1], 0) for i in range(len(centres) - 1)]
    while todo:
        a, b, depth = todo.pop()
        inside = sum(1 for r in roots if a < r.R < b)
        change = lin[a].sign != lin[b].sign
        if (inside % 2 == 1) == change:
            continue
        if depth >= 3:
            mismatches += 1
            log(f"  {c.label}: roots in ({a:.10f}, {b:.10f}) do not match the sign change of det A")
            continue
        m = 0.5 * (a + b)
        add_centre(m)
        for Rc in (a, m, b):
            refine_near(Rc, 0.5 * (b - a))
        todo += [(a, m, depth + 1), (m, b, depth + 1)]
    inside = [r for r in roots if lo <= r.R <= hi]
    return sorted(inside, key=lambda r: r.R), mismatches


def _verify(group, c: SymmetryClass, r1, win2: _Window, Y1: float, settings: LargeSettings, costs: _Costs,
            lo: float, hi: float):
    """Second-height check of one Y1 root; returns (ok, reason, R2, root at Y2).

    Newton's method at Y2 starts at the Y1 root and must stay in [lo, hi], a neighbourhood a
    few times R_tol x max(1, R) wide: a spurious root of the Y1 system has no Y2 root there.
    """
    with costs.timed("newton"):
        r2 = refine_root(lambda R: win2.pair(c, R), r1.R, lo=lo, hi=hi)
    scale = max(1.0, r1.R)
    if not r2.converged:
        return (False, "no root at the second height near the root (Newton's method left the "
                f"neighbourhood of +-{0.5 * (hi - lo):.1e} or did not converge)", None, r2)
    if abs(r2.R - r1.R) > settings.R_tol * scale:
        return (False, f"the root at the second height lies {abs(r2.R - r1.R):.2e} away (more than "
                f"R_tol x max(1, R))", r2.R, r2)
    # a(2..8), or fewer where the scan-height solve determines fewer of them (small R)
    k = max(3, min(9, r1.vector.size, r2.vector.size, accurate_count(r1.R, Y1) + 1))
    d = float(np.max(np.abs(r1.vector[1:k] - r2.vector[1:k])))
    if not (d <= settings.coeff_tol):
        return False, f"coefficients at the two heights differ by {d:.2e}", r2.R, r2
    return True, "roots and coefficients agree at both heights", r2.R, r2


def _make_form(group, c: SymmetryClass, r1, r2, p1: SolverParams, p2: SolverParams, settings: LargeSettings,
               costs: _Costs) -> tuple[Form | None, str]:
    R = r1.R
    m = store_count(group, R, settings.eps, settings.n_coeffs)
    if m <= min(accurate_count(R, p1.Y), r1.vector.size) and m <= min(accurate_count(R, p2.Y), r2.vector.size):
        coeffs = r1.vector[:m].copy()
        errs = np.abs(r1.vector[:m] - r2.vector[:m])
        params = p1
    else:
        # more coefficients than the scan-height solve determines: two solves at lower heights
        with costs.timed("storage"):
            Ys = (R + 2.0 * R ** (1.0 / 3.0) + 6.0) / (2.0 * math.pi * m)
            ps_a = choose_params(R + 0.5, Ys, settings.eps)
            ps_b = choose_params(R + 0.5, 0.9 * Ys, settings.eps)
            sols = []
            for ps in (ps_a, ps_b):
                bs = BlockedSystem(group, [c], ps, workers=settings.workers)
                costs.kt_points += bs.kt_points()
                costs.lu += 1
                sols.append(normalised_solution(bs.matrix(c, R)))
        m = min(m, sols[0].size, sols[1].size)
        coeffs = sols[0][:m]
        errs = np.abs(sols[0][:m] - sols[1][:m])
        params = ps_a
    hres = hecke_residual(coeffs, group.level, min(settings.hecke_nmax, m))
    if not (hres <= settings.hecke_tol):
        return None, f"Hecke residual {hres:.2e} above {settings.hecke_tol:.0e}"
    extra: dict = {"al_signs": {str(p): s for p, s in c.al_signs},
                   "R_second_height": float(r2.R),
                   "verification": "Newton roots of det A at Y1 and Y2 (linearised, node-interpolated "
                                   "matrices), coefficient agreement, Hecke relations"}
    is_new: bool | None = True
    if group.level > 1:
        from maasscomp.spectrum.classify import classify

        cl = classify(group.level, c, R, coeffs)
        is_new = cl.is_new
        extra["atkin_lehner_residual"] = cl.newform_residual
        if not cl.is_new:
            extra["old_from_level"] = cl.old_from_level
        elif cl.newform_residual > 1e-6:
            is_new = None
            extra["classification_note"] = f"c(p) = -eps_p/sqrt(p) fails by {cl.newform_residual:.2e}"
    cusp_sign = np.array([c.al_sign(cu.atkin_lehner_Q) for cu in group.cusps], dtype=float)
    form = Form(level=group.level, R=float(R), symmetry=c,
                coeffs=cusp_sign[:, None] * coeffs[None, :],
                coeff_errors=np.repeat(errs[None, :], len(cusp_sign), axis=0),
                R_error=float(max(abs(r2.R - R), r1.last_step, 1e-16 * R)),
                hecke_residual=hres, params=params, is_new=is_new, extra=extra)
    if settings.lfunction_check and is_new:
        from maasscomp.spectrum.extend import lfunction_label

        with costs.timed("lfunction"):
            extra["lfunction"] = lfunction_label(group, form)
    return form, "confirmed"


def _search_window(group, classes, R0: float, lo: float, hi: float, k_left: float, settings: LargeSettings,
                   costs: _Costs, log) -> tuple[list[Form], list[LargeCandidate], int]:
    """All roots of the window at Y1, then verification in order of distance to R0 until
    k_left forms are confirmed."""
    Y0 = group.fundamental_domain_height
    p1 = choose_params(hi + 1.0, settings.Y1_frac * Y0, settings.eps)
    p2 = choose_params(hi + 1.0, settings.Y2_frac * Y0, settings.eps)
    spacing = _mean_spacing_class(group, _n_classes_total(group), hi)
    h = spacing / settings.centres_per_spacing
    pad = 0.25 * h
    a, b = lo - pad, hi + pad
    nodes1 = _node_count(group, b, 0.5 * (b - a), p1.Y)
    # the second height only follows single roots: a short interval around each, whose
    # half-width exceeds the accepted distance of the two roots
    w2 = max(4.0 * settings.R_tol, 1e-13) * max(1.0, hi)
    nodes2 = _node_count(group, b + w2, w2, p2.Y, least=3)
    forms: list[Form] = []
    cands: list[LargeCandidate] = []
    mism = 0
    for cls_group in _class_groups(classes, p1, p2, settings, nodes1, nodes2):
        log(f"window [{lo:.8f}, {hi:.8f}]: classes {[c.label for c in cls_group]}, M0 = {p1.M0} / {p2.M0}, "
            f"{nodes1} / {nodes2} nodes")
        win1 = _Window(group, cls_group, p1, a, b, settings, costs, "Y1", nodes1)
        found = {}
        for c in cls_group:
            roots, mm = _scan_class(win1, c, lo, hi, h, pad, costs, log)
            mism += mm
            found[c] = roots
            log(f"  {c.label}: roots at Y1 {[round(r.R, 9) for r in roots]}")
        win1.release()
        del win1
        order = sorted(((r, c) for c in cls_group for r in found[c]), key=lambda t: abs(t[0].R - R0))
        confirmed_here = 0
        for r1, c in order:
            if confirmed_here >= k_left:
                cands.append(LargeCandidate(r1.R, c, False, "not examined: farther from R0 than the "
                                                            "forms confirmed already"))
                continue
            win2 = _Window(group, [c], p2, r1.R - w2, r1.R + w2, settings, costs, "Y2", nodes2)
            ok, reason, R2, r2 = _verify(group, c, r1, win2, p1.Y, settings, costs, r1.R - w2, r1.R + w2)
            win2.release()
            del win2
            form = None
            if ok:
                form, reason = _make_form(group, c, r1, r2, p1, p2, settings, costs)
                ok = form is not None
            cands.append(LargeCandidate(r1.R, c, ok, reason, R2))
            log(f"  {c.label} R = {r1.R:.12f}: {reason}")
            if ok:
                forms.append(form)
                confirmed_here += 1
    return forms, cands, mism


def locate_large(
    group,
    R0: float,
    k: int = 1,
    parities: Sequence[str] = ("even", "odd"),
    settings: LargeSettings | None = None,
    *,
    log: Callable[[str], None] | None = None,
) -> LargeSearchResult:
    """The k confirmed forms nearest to R0, for R0 up to the K-Bessel range (about 1e5).

    Parameters
    ----------
    group : Gamma0
        From :func:`maasscomp.groups.gamma0` (squarefree level; level 1 is the main use).
    R0 : float
        Target, 1 <= R0 <= R_MAX - 1 (:data:`maasscomp.special.R_MAX`).
    k : int
        Number of forms wanted.
    parities : sequence of {"even", "odd"}
        Parities searched (all Atkin-Lehner classes of each).
    settings : LargeSettings, optional
    log : callable(str), optional
        Receives one line per window, class and candidate.

    Returns
    -------
    LargeSearchResult

    Notes
    -----
    Cost at R0 = 4e4 on PSL(2,Z) (measured by ``benchmarks/bench_large_R.py``): a window
    of three mean spacings needs about ten LU factorisations of size 8,100 per class at Y1,
    two to four per candidate at Y2, and Kt at 5-6 nodes per height; the node matrices take
    about 7 GB (both classes, Y2).
    """
    from maasscomp.spectrum.search import symmetry_classes

    settings = settings or LargeSettings()
    log = log or (lambda s: None)
    if not (isinstance(k, int) and not isinstance(k, bool) and k >= 1):
        raise InputError(f"k={k!r} is not allowed; it must be an integer >= 1")
    if isinstance(R0, bool) or not isinstance(R0, (int, float)) or not (1.0 <= R0 <= R_MAX - 1.0):
        raise InputError(f"R0={R0!r} is not allowed; it must be a number in [1, {R_MAX - 1:g}]")
    parities = _check_parities_and_group(group, parities)
    R0 = float(R0)
    classes = symmetry_classes(group, parities)
    costs = _Costs()
    w0, c0 = time.perf_counter(), time.process_time()
    spacing_all = _mean_spacing_class(group, 1, R0) * (2.0 / len(parities))
    d = max(1.5 * k * spacing_all, 1e-3 * spacing_all)
    lo, hi = max(R0 - d, 0.5), min(R0 + d, R_MAX - 0.5)
    forms, cands, mism = _search_window(group, classes, R0, lo, hi, k, settings, costs, log)
    windows = [(lo, hi)]
    for _ in range(60):
        near = sorted(forms, key=lambda f: abs(f.R - R0))
        reach = min(R0 - lo if lo > 0.5 else math.inf, hi - R0 if hi < R_MAX - 0.5 else math.inf)
        if len(near) >= k and abs(near[k - 1].R - R0) <= reach:
            break
        new = []
        if lo > 0.5:
            new.append((max(lo - d, 0.5), lo))
        if hi < R_MAX - 0.5:
            new.append((hi, min(hi + d, R_MAX - 0.5)))
        if not new:
            break
        for a, b in new:
            f2, c2, m2 = _search_window(group, classes, R0, a, b, k, settings, costs, log)
            forms += f2
            cands += c2
            mism += m2
            windows.append((a, b))
        lo, hi = min(lo, new[0][0]), max(hi, new[-1][1])
    else:  # pragma: no cover - 60 rings would mean a broken search
        raise ConvergenceError(f"fewer than {k} forms confirmed within {hi - R0:.3g} of R0={R0}", best=forms)
    return _result(group, parities, forms, cands, mism, windows, R0, k, costs, w0, c0)


def _check_parities_and_group(group, parities) -> tuple[str, ...]:
    parities = tuple(parities)
    if not parities or any(p not in ("even", "odd") for p in parities) or len(set(parities)) != len(parities):
        raise InputError(f"parities={parities!r} is not allowed; give 'even', 'odd' or both")
    if not group.is_squarefree:
        raise InputError(f"level {group.level} is not squarefree; the large-R search needs a squarefree level")
    return parities


def _result(group, parities, forms, cands, mism, windows, R0, k, costs, w0, c0) -> LargeSearchResult:
    # the same form can be confirmed from two windows that share an end point
    uniq: list[Form] = []
    for f in sorted(forms, key=lambda f: abs(f.R - R0)):
        if not any(g.symmetry == f.symmetry and abs(g.R - f.R) <= 1e-8 * max(1.0, f.R) for g in uniq):
            uniq.append(f)
    uniq_c: list[LargeCandidate] = []
    for c in sorted(cands, key=lambda c: (c.R, not c.accepted)):
        if not any(d.symmetry == c.symmetry and abs(d.R - c.R) <= 1e-8 * max(1.0, c.R) for d in uniq_c):
            uniq_c.append(c)
    lo, hi = min(a for a, _ in windows), max(b for _, b in windows)
    try:
        from maasscomp.spectrum.weyl import expected_in_window

        exp = float(expected_in_window(group.level, lo, hi)) * (len(parities) / 2.0)
    except InputError:
        exp = None
    stats = costs.as_dict()
    stats["wall_s"]["total"] = time.perf_counter() - w0
    stats["cpu_s"]["total"] = time.process_time() - c0
    kept = uniq[:k] if k is not None else sorted(uniq, key=lambda f: f.R)
    return LargeSearchResult(forms=tuple(kept), R0=R0, windows=tuple(sorted(windows)),
                             candidates=tuple(uniq_c), expected=exp, parity_mismatches=mism, stats=stats)


def forms_in_window_large(
    group,
    R_min: float,
    R_max: float,
    parities: Sequence[str] = ("even", "odd"),
    settings: LargeSettings | None = None,
    *,
    log: Callable[[str], None] | None = None,
) -> LargeSearchResult:
    """Every form of the given parities with R in [R_min, R_max], verified as in :func:`locate_large`.

    The interval is cut into sub-windows of about three mean spacings of a class (so that
    five or six node matrices interpolate A(R) on each); every root at the scan height is
    verified. ``forms`` of the result are sorted by R and ``R0`` is R_min.
    """
    from maasscomp.spectrum.search import symmetry_classes

    settings = settings or LargeSettings()
    log = log or (lambda s: None)
    for name, v in (("R_min", R_min), ("R_max", R_max)):
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not (1.0 <= v <= R_MAX - 0.5):
            raise InputError(f"{name}={v!r} is not allowed; it must be a number in [1, {R_MAX - 0.5:g}]")
    if not R_min < R_max:
        raise InputError(f"R_min={R_min!r} must be smaller than R_max={R_max!r}")
    parities = _check_parities_and_group(group, parities)
    classes = symmetry_classes(group, parities)
    costs = _Costs()
    w0, c0 = time.perf_counter(), time.process_time()
    width = 3.0 * _mean_spacing_class(group, _n_classes_total(group), R_max)
    n = max(1, int(math.ceil((R_max - R_min) / width)))
    edges = np.linspace(float(R_min), float(R_max), n + 1)
    forms, cands, mism = [], [], 0
    for a, b in zip(edges[:-1], edges[1:]):
        f, c, m = _search_window(group, classes, float(a), float(a), float(b), math.inf, settings, costs, log)
        forms += f
        cands += c
        mism += m
    windows = [(float(a), float(b)) for a, b in zip(edges[:-1], edges[1:])]
    return _result(group, parities, forms, cands, mism, windows, float(R_min), None, costs, w0, c0)
