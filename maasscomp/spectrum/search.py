"""Every eigenvalue of the symmetry classes of any Gamma0(N) in an R window, with multiplicities.

The one search of the project (docs/theory.md §7). For
each class the square Hejhal matrix A(R) (:mod:`maasscomp.hejhal.family` picks the
Atkin--Lehner one-cusp system at squarefree levels and the multi-cusp system elsewhere) is
singular exactly at the eigenvalues of the class and at spurious points of the truncated
system, which move when the sample height Y changes. The search:

1. lays expansion points c_j on a lattice fixed by the level and R alone (the expected count
   of one class advances by 1/``steps_per_spacing`` from one point to the next, capped by
   ``max_step``); point j owns the R in [e_j, e_{j+1}) between the lattice's edges, so any two
   windows that share an R see it through the same expansion point;
2. at every c_j and at both heights Y1 > Y2 solves the linearised problem
   (A(c) + d A'(c)) v = 0 (:func:`maasscomp.spectrum.pencil.pencil_roots`): its eigenvalues d
   near 0 are all the roots of det A near c at once, however close (a pair 1e-5 apart gives
   two, an m-fold eigenvalue m of them). A' comes from the R-derivative of the Chebyshev
   interpolant of Kt in R (:class:`maasscomp.hejhal.kinterp.KSource`);
3. polishes each by Newton's method on A(R) v = 0 and counts the null space at the root
   (:func:`maasscomp.spectrum.pencil.null_basis`); if more pencil eigenvalues of one point
   arrive at a root than its null space has dimensions, a close neighbour was skipped and
   the problem is linearised again at that root, where the neighbour is near;
4. an eigenvalue is a root of both heights' systems with the same multiplicity and the same
   null space (principal angles of the coefficient subspaces); a root of one height only is
   a spurious root of that truncated system and is never proposed;
5. each eigenvalue is confirmed and turned into forms by :mod:`maasscomp.spectrum.confirm`.

A window [R_min, R_max] keeps the eigenvalues R = (R1 + R2)/2 with R_min <= R <= R_max;
splitting a window, shifting the lattice (``offset``) or calling through the pipeline gives
the same set (tested).
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field
from typing import Callable, Sequence

import numpy as np
import scipy.linalg as sla

from maasscomp.errors import InputError
from maasscomp.hejhal.family import SystemFamily, build_family, check_classes, default_kind
from maasscomp.hejhal.kinterp import KSource
from maasscomp.hejhal.params import choose_params
from maasscomp.hejhal.types import PARITIES, SymmetryClass
from maasscomp.spectrum import pencil as pn
from maasscomp.spectrum.confirm import Root, build_forms
from maasscomp.spectrum.eigenspace import subspace_gap
from maasscomp.spectrum.form import Form

#: Expansion points per chunk: the points of a chunk share solver parameters and the
#: interpolant of Kt in R.
PATCHES_PER_CHUNK = 64

#: The null spaces of the two heights are compared on the coefficients whose column scale
#: is within this factor of the best one (errors amplified at most this much). Measured at
#: level 12: a two-dimensional eigenspace whose double root is split by 5e-11 at one height
#: gives angles 8e-9 (factor 1e3), 8e-8 (1e4) and 3e-6 (1e6).
COMPARE_AMPLIFICATION = 1e4

#: Pencil eigenvalues are collected up to (1/2 + OVERLAP) point spacings from the point
#: (the linearisation moves roots by O(d^2); neighbouring points overlap).
OVERLAP = 0.35


@dataclass(frozen=True)
class SearchSettings:
    """Knobs of the eigenvalue search (all have sensible defaults).

    Attributes
    ----------
    eps : float
        Truncation target of every system.
    Y1_frac, Y2_frac : float
        The two sample heights as fractions of the group's Y0.
    steps_per_spacing : float
        Expansion points per mean eigenvalue spacing of one class (Weyl's law, leading
        term). Pairs closer than the point spacing are found all the same; the density only
        trades the cost of the local eigenvalue problems against Newton steps.
    max_step : float
        Largest distance between expansion points. The linearisation moves a root at distance
        d from its point by about kappa d^2 (kappa about 0.5 at R = 1000, up to about 6 at
        small R); a point whose observed kappa times its width exceeds
        :data:`KAPPA_WIDTH_MAX` is searched again as two halves, so every root stays inside
        the collection interval of a point.
    offset : float
        Shift of the lattice of expansion points, in point spacings, in [0, 1). The set of
        eigenvalues found does not depend on it (a check of the search, used by tests and
        by the re-search of flagged windows).
    coeff_tol : float
        Largest accepted sine of the angle between the null spaces at the two heights.
    hecke_tol : float
        Largest accepted Hecke residual at confirmation.
    R_tol : float
        Largest accepted distance, relative to max(1, R), between the roots at the two heights
        (measured: below 3e-15 relative for R <= 1000; spurious roots of the two heights
        meet this closely with probability about R_tol R times the density of roots).
    mult_tol : float
        Relative singular values (equilibrated matrix) below this count as zero. At a
        refined eigenvalue the null ones lie between 1e-17 and 3e-13 (levels 1-30, R <= 1000);
        a second eigenvalue at distance d gives about 0.1 d.
    n_coeffs : int
        Least number of coefficients stored per form (Atkin--Lehner systems store more when
        evaluating the form anywhere in the fundamental domain needs them).
    hecke_nmax : int
        Range of the Hecke check stored with each form.
    lfunction_check : bool
        Check the functional equation of the standard L-function of every newform (Hecke
        eigenform) of squarefree level, and of every newform with a character (root number
        fitted and compared with the Fricke pseudo-eigenvalue), and store the outcome in
        ``Form.extra["lfunction"]``.
    """

    eps: float = 1e-14
    Y1_frac: float = 0.92
    Y2_frac: float = 0.80
    steps_per_spacing: float = 1.0
    max_step: float = 0.25
    offset: float = 0.0
    coeff_tol: float = 1e-6
    hecke_tol: float = 1e-6
    R_tol: float = 1e-11
    mult_tol: float = 1e-8
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
        if not (self.steps_per_spacing > 0 and math.isfinite(self.steps_per_spacing)):
            raise InputError(f"steps_per_spacing={self.steps_per_spacing!r} is not allowed; it must be positive")
        if not (self.max_step > 0 and math.isfinite(self.max_step)):
            raise InputError(f"max_step={self.max_step!r} is not allowed; it must be positive")
        if not (0.0 <= self.offset < 1.0):
            raise InputError(f"offset={self.offset!r} is not allowed; it must lie in [0, 1)")
        if not (0 < self.mult_tol < 1e-3):
            raise InputError(f"mult_tol={self.mult_tol!r} is not allowed; it must lie in (0, 1e-3)")


@dataclass(frozen=True)
class Candidate:
    """A root of both heights' systems that failed confirmation, or a root of one height only.

    Attributes
    ----------
    R : float
    symmetry : SymmetryClass
    accepted : bool
    reason : str
    """

    R: float
    symmetry: SymmetryClass
    accepted: bool
    reason: str


@dataclass(frozen=True)
class SearchResult:
    """Outcome of :func:`search_forms`.

    Attributes
    ----------
    level : int
    classes : tuple of SymmetryClass
    R_min, R_max : float
    forms : tuple of Form
        Sorted by R, then class label, then basis index.
    candidates : tuple of Candidate
        Every eigenvalue proposed (a root of both heights), accepted or not, with the
        reason; roots of one height only are counted in ``stats`` (``spurious``) and not
        proposed.
    system : str
        ``"atkin-lehner"``, ``"multi-cusp"`` or ``"character"``.
    grid_step : float
        Largest distance between expansion points used.
    stats : dict
        Counts: expansion points, pencil eigenvalues, Newton steps (factorisations),
        relinearisations, starts that led nowhere, roots found at one height by testing the
        other height's root, spurious roots (roots of one height only). With a nontrivial
        character also ``character`` (its label), ``singular_cusps`` (names of the cusps
        with kappa_j = 0) and ``cusp_shifts`` (kappa_j per cusp name).
    """

    level: int
    classes: tuple[SymmetryClass, ...]
    R_min: float
    R_max: float
    forms: tuple[Form, ...]
    candidates: tuple[Candidate, ...]
    system: str
    grid_step: float
    stats: dict = field(default_factory=dict)

    def for_class(self, symmetry: SymmetryClass) -> tuple[Form, ...]:
        """The forms of one class."""
        return tuple(f for f in self.forms if f.symmetry == symmetry)

    @property
    def rejected(self) -> tuple[Candidate, ...]:
        return tuple(c for c in self.candidates if not c.accepted)


def mean_spacing(level: int, n_classes: int, R: float, index: int) -> float:
    """Mean eigenvalue spacing of one symmetry class near R (leading Weyl term).

    N(T) ~ index T^2 / 12 (docs/theory.md §2), shared among ``n_classes`` classes.
    """
    return 6.0 * n_classes / (index * max(R, 1.0))


def symmetry_classes(group, parities: Sequence[str] = ("even", "odd"), system: str | None = None) -> list[SymmetryClass]:
    """All symmetry classes searched at a level: parities times Atkin--Lehner signs.

    With the Atkin--Lehner system (squarefree levels) each prime p | N gets a sign
    eps_p = +-1 (2^omega(N) sign patterns per parity); the multi-cusp system (other levels)
    splits by parity only.
    """
    for p in parities:
        if p not in PARITIES:
            raise InputError(f"parity {p!r} is not allowed; use 'even' or 'odd'")
    kind = system or default_kind(group)
    if kind != "atkin-lehner":
        return [SymmetryClass(p) for p in dict.fromkeys(parities)]
    primes = sorted(group.primes)
    return [
        SymmetryClass(par, tuple(zip(primes, signs)))
        for par in dict.fromkeys(parities)
        for signs in itertools.product((1, -1), repeat=len(primes))
    ]


def _check_window(R_min: float, R_max: float) -> None:
    for name, v in (("R_min", R_min), ("R_max", R_max)):
        if not (isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v) and v > 0):
            raise InputError(f"{name}={v!r} is not allowed; it must be a positive finite number")
    if R_min >= R_max:
        raise InputError(f"R_min={R_min!r} must be smaller than R_max={R_max!r}")


# ----------------------------------------------------------------------------------------
# the lattice of expansion points
# ----------------------------------------------------------------------------------------


class PointLattice:
    """Expansion points and the R intervals they own.

    The distance between points is w(R) = min(a, H / max(R, 1)) with a = ``max_step`` and
    H = (mean spacing x R) / ``steps_per_spacing``; the edges are e_j = phi^{-1}(j + offset)
    with phi(R) = int_0^R dr / w(r), the point c_j = phi^{-1}(j + offset + 1/2) owns
    [e_j, e_{j+1}). Everything depends on the level, the number of classes and the settings,
    never on a window.
    """

    def __init__(self, H: float, a: float, offset: float) -> None:
        self.H, self.a, self.offset = float(H), float(a), float(offset)
        self.p0 = max(1.0 / self.a, 1.0 / self.H)
        self.rc = max(1.0, self.H / self.a)
        self.y1 = self.p0
        self.y2 = self.y1 + (self.rc - 1.0) / self.a

    def phi(self, R: float) -> float:
        if R <= 1.0:
            return self.p0 * R
        if R <= self.rc:
            return self.y1 + (R - 1.0) / self.a
        return self.y2 + (R * R - self.rc * self.rc) / (2.0 * self.H)

    def phi_inv(self, y: float) -> float:
        if y <= 0.0:
            return 0.0
        if y <= self.p0:
            return y / self.p0
        if y <= self.y2:
            return 1.0 + (y - self.y1) * self.a
        return math.sqrt(self.rc * self.rc + 2.0 * self.H * (y - self.y2))

    def edge(self, j: int) -> float:
        return self.phi_inv(j + self.offset)

    def center(self, j: int) -> float:
        return self.phi_inv(j + self.offset + 0.5)

    def index(self, R: float) -> int:
        """The point owning R."""
        return int(math.floor(self.phi(R) - self.offset))

    def width(self, j: int) -> float:
        return self.edge(j + 1) - self.edge(j)


def lattice_for(group, n_classes: int, settings: SearchSettings) -> PointLattice:
    """The lattice of expansion points of a level searched with ``n_classes`` classes."""
    H = 6.0 * n_classes / (group.index * settings.steps_per_spacing)
    return PointLattice(H, settings.max_step, settings.offset)


# ----------------------------------------------------------------------------------------
# one chunk of expansion points at one height
# ----------------------------------------------------------------------------------------


@dataclass
class _Counts:
    points: int = 0
    pencil: int = 0
    newton_steps: int = 0
    relinearised: int = 0
    lost: int = 0
    recovered: int = 0
    splits: int = 0


def _null_count(kind: str, size: int, level: int) -> int:
    """Block size of the null-space probe: above the largest multiplicity expected (one per
    class for Atkin--Lehner classes; the oldforms g(dz), d | N, and twists otherwise). The
    probe doubles it when every direction comes out null."""
    from maasscomp.groups import divisors

    return min(size, 3 if kind == "atkin-lehner" else 2 * len(divisors(level)) + 4)


def _examine(system, R: float, A: np.ndarray, dA: np.ndarray, lu, dc: np.ndarray, v: np.ndarray,
             k: int, settings: SearchSettings):
    """(m, sv, null vectors in unknowns, kappa) of a refined root."""
    while True:
        nb = pn.null_basis(A, lu, k)
        m = int(np.sum(nb.sv <= settings.mult_tol))
        if m < k or k >= A.shape[0]:
            break
        k = min(A.shape[0], 2 * k)
    kappa = pn.root_condition(A, dA, lu, v) if m == 1 else math.inf
    return m, nb.sv, dc[:, None] * nb.vectors[:, :m], kappa


#: Largest accepted kappa w, with kappa = max |start - root| / d^2 observed at a point of
#: width w: a root at d = w/2 then moves by at most 0.35 w / 2, half the overlap of the
#: collection intervals. A point above it is searched again as two halves.
KAPPA_WIDTH_MAX = 0.7

#: Levels of halving of one expansion point at most.
MAX_SPLITS = 4


def _scan_adaptive(system, ksrc: KSource, c: float, kdk, width: float, j: int, height: int,
                   settings: SearchSettings, counts: _Counts, group, kind: str, known: list[Root],
                   depth: int = 0) -> list[Root]:
    """:func:`_scan_point`, repeated on the two halves of the point where the linearisation
    was seen to be too coarse (observed kappa w above :data:`KAPPA_WIDTH_MAX`, or a start whose
    root was found only by linearising again). The decision depends on the point alone, so
    the result does not depend on the window."""
    k, dk = kdk if kdk is not None else ksrc.values_and_derivative(c)
    roots, kappa, trouble = _scan_point(system, ksrc, c, k, dk, width, j, height, settings, counts, group,
                                        kind, known)
    if depth < MAX_SPLITS and (trouble or kappa * width > KAPPA_WIDTH_MAX):
        counts.splits += 1
        for cc in (c - 0.25 * width, c + 0.25 * width):
            roots += _scan_adaptive(system, ksrc, cc, None, 0.5 * width, j, height, settings, counts, group,
                                    kind, known + roots, depth + 1)
    return roots


def _scan_point(system, ksrc: KSource, c: float, k: np.ndarray, dk: np.ndarray, width: float,
                j: int, height: int, settings: SearchSettings, counts: _Counts, group, kind: str,
                known: list[Root]) -> tuple[list[Root], float, bool]:
    """The roots of ``system`` near the expansion point c that are not in ``known``, the
    observed linearisation constant kappa = max |start - root| / d^2, and whether a start
    needed a second linearisation to reach its root.

    Every pencil eigenvalue within (1/2 + OVERLAP) widths of c is polished by Newton's
    method, except one that lies within 2 % of the width of a root found already (from
    this point or a neighbour): it counts as one more arrival at that root. A root reached
    by more pencil eigenvalues of this point than its null space has dimensions hides a
    neighbour, which the problem linearised at the root then shows.
    """
    radius = (0.5 + OVERLAP) * width
    A0 = system.matrix_from_k(k)
    A1 = system.matrix_from_k(dk)
    dr, dc = pn.scalings(A0)
    pr = pn.pencil_roots(pn.scale(A0, dr, dc), pn.scale(A1, dr, dc), radius)
    counts.pencil += pr.delta.size

    def mats(R: float):
        kk, dd = ksrc.values_and_derivative(R)
        return pn.scale(system.matrix_from_k(kk), dr, dc), pn.scale(system.matrix_from_k(dd), dr, dc)

    tol = 4e-16 * max(1.0, c)
    near_tol = 0.02 * width
    k_null = _null_count(kind, system.size, group.level)
    pool: list[Root] = [r for r in known if abs(r.R - c) <= 2.0 * radius]
    n_known = len(pool)
    members: dict[int, int] = {}  # index in pool -> pencil eigenvalues of this point there
    reach: dict[int, float] = {}  # index in pool -> farthest start that arrived there

    def find(R: float, within: float) -> int | None:
        best, bd = None, within
        for i, r in enumerate(pool):
            d = abs(r.R - R)
            if d <= bd:
                best, bd = i, d
        return best

    def arrive(i: int, start: float) -> None:
        members[i] = members.get(i, 0) + 1
        reach[i] = max(reach.get(i, 0.0), abs(start - pool[i].R))

    def polish(start: float, v: np.ndarray, max_move: float) -> bool:
        nr = pn.newton_root(mats, start, v, tol=tol, max_move=max_move)
        counts.newton_steps += nr.steps
        if not nr.converged:
            return False
        i = find(nr.R, 1e-10 * max(1.0, nr.R))
        if i is None:
            m, sv, U, kappa = _examine(system, nr.R, nr.A, nr.dA, nr.lu, dc, nr.vector, k_null, settings)
            pool.append(Root(R=nr.R, height=height, m=m, sv=sv, vectors=U, unknown_scale=dc, system=system,
                             kappa=kappa, steps=nr.steps, start=start, patch=j))
            i = len(pool) - 1
        arrive(i, start)
        return True

    retry: list[float] = []
    # nearest first: their starts are the most accurate, and their observed errors
    # |start - root| / d^2 calibrate how far the farther starts may be from their roots
    kappa_lin = 0.0
    for idx in np.argsort(np.abs(pr.delta)):
        d, v = pr.delta[idx], pr.vectors[:, idx]
        start = c + float(d.real)
        i = find(start, min(max(near_tol, 4.0 * kappa_lin * abs(d) ** 2), 0.25 * width))
        if i is not None:
            arrive(i, start)
            continue
        n_before = len(pool)
        if not polish(start, _start_vector(system, v), max_move=2.0 * radius):
            retry.append(start)
        elif len(pool) > n_before and abs(d) > 1e-3 * width:
            kappa_lin = max(kappa_lin, abs(pool[-1].R - start) / abs(d) ** 2)
    # a start that did not converge: linearise again there (its root is near, if any)
    trouble = False
    for start in retry:
        counts.relinearised += 1
        for s2, v2 in _local_pencil(mats, start, 0.5 * radius, system):
            if find(s2, 1e-9 * max(1.0, s2)) is not None:
                continue
            n_before = len(pool)
            if not polish(s2, v2, max_move=radius):
                counts.lost += 1
            elif len(pool) > n_before:
                trouble = True
    # more arrivals than null dimensions: a neighbour was skipped; look again from the root
    done: set[int] = set()
    for _round in range(4):
        todo = [i for i, n in members.items() if n > pool[i].m and i not in done]
        if not todo:
            break
        for i in todo:
            done.add(i)
            counts.relinearised += 1
            r = pool[i]
            # the skipped neighbour lies within the reach of the starts that arrived here
            look = min(2.0 * reach.get(i, 0.0) + near_tol, radius)
            for s2, v2 in _local_pencil(mats, r.R, look, system):
                if abs(s2 - r.R) <= 1e-9 * max(1.0, r.R) or find(s2, 1e-9 * max(1.0, s2)) is not None:
                    continue
                polish(s2, v2, max_move=2.0 * look)
    return pool[n_known:], kappa_lin, trouble


def _other_height(system, ksrc: KSource, r: Root, height: int, settings: SearchSettings, counts: _Counts,
                  group, kind: str) -> Root | None:
    """The root of ``system`` at r.R if the system is singular there (smallest relative
    singular value below 1e-9), refined by Newton's method; None otherwise."""
    k, dk = ksrc.values_and_derivative(r.R)
    A = system.matrix_from_k(k)
    dr, dc = pn.scalings(A)
    As = pn.scale(A, dr, dc)
    lu = sla.lu_factor(As, check_finite=False)
    counts.newton_steps += 1
    nb = pn.null_basis(As, lu, 2)
    if not nb.sv[0] <= 1e-9:
        return None

    def mats(R: float):
        kk, dd = ksrc.values_and_derivative(R)
        return pn.scale(system.matrix_from_k(kk), dr, dc), pn.scale(system.matrix_from_k(dd), dr, dc)

    tol = settings.R_tol * max(1.0, r.R)
    nr = pn.newton_root(mats, r.R, nb.vectors[:, 0], tol=4e-16 * max(1.0, r.R), max_move=tol)
    counts.newton_steps += nr.steps
    if not nr.converged:
        return None
    counts.recovered += 1
    k_null = _null_count(kind, system.size, group.level)
    m, sv, U, kappa = _examine(system, nr.R, nr.A, nr.dA, nr.lu, dc, nr.vector, k_null, settings)
    return Root(R=nr.R, height=height, m=m, sv=sv, vectors=U, unknown_scale=dc, system=system, kappa=kappa,
                steps=nr.steps, start=r.R, patch=r.patch)


def _local_pencil(mats, R: float, radius: float, system=None):
    """Starting points (and vectors) from the pencil linearised at R."""
    A0, A1 = mats(R)
    pr = pn.pencil_roots(A0, A1, radius)
    return [(R + float(d.real), _start_vector(system, v)) for d, v in zip(pr.delta, pr.vectors.T)]


def _start_vector(system, v: np.ndarray) -> np.ndarray:
    """Newton's starting vector: the pencil eigenvector (complex for a complex system, its
    real part for a real one)."""
    return np.asarray(v) if getattr(system, "is_complex", False) else np.real(v)


# ----------------------------------------------------------------------------------------
# the search
# ----------------------------------------------------------------------------------------


def search_forms(
    group,
    R_min: float,
    R_max: float,
    parities: Sequence[str] = ("even", "odd"),
    settings: SearchSettings | None = None,
    *,
    classes: Sequence[SymmetryClass] | None = None,
    system: str | None = None,
    progress: Callable[[int, int], None] | None = None,
    character=None,
) -> SearchResult:
    """Find every eigenvalue with R in [R_min, R_max] of the symmetry classes of Gamma0(N).

    Parameters
    ----------
    group : Gamma0
        From :func:`maasscomp.groups.gamma0`, any level.
    R_min, R_max : float
        The window, 0 < R_min < R_max (both ends included).
    parities : sequence of {"even", "odd"}
        Parities searched (all classes of each), unless ``classes`` is given.
    settings : SearchSettings, optional
    classes : sequence of SymmetryClass, optional
        Search only these classes (they must fit the system).
    system : {"atkin-lehner", "multi-cusp"}, optional
        The linear system (default: Atkin--Lehner classes at squarefree levels, the
        multi-cusp system elsewhere; the multi-cusp system also works at squarefree levels,
        with parity classes).
    progress : callable(done, total), optional
        Called after each expansion point (both heights count).
    character : maasscomp.groups.characters.DirichletCharacter, optional
        Forms with f(gamma z) = chi(d) f(z) (even chi modulo the level). A nontrivial
        character selects the complex character system (``system="character"``, parity
        classes; docs/theory.md §12); the trivial one the usual systems.

    Returns
    -------
    SearchResult
        One :class:`Form` per basis member of every confirmed eigenspace.
    """
    settings = settings or SearchSettings()
    _check_window(R_min, R_max)
    chi = _check_character(group, character, system)
    kind = system or ("character" if chi is not None and not chi.is_trivial else default_kind(group))
    if kind == "character" and chi is None:
        from maasscomp.groups.characters import DirichletCharacter

        chi = DirichletCharacter.trivial(group.level)
    if classes is None:
        classes = symmetry_classes(group, tuple(parities), kind)
    classes = list(dict.fromkeys(classes))
    if not classes:
        raise InputError("no symmetry class to search; give at least one")
    check_classes(group, classes, kind)
    n_classes = len(symmetry_classes(group, ("even", "odd"), kind))
    lattice = lattice_for(group, n_classes, settings)
    pad = 1e-8 * max(1.0, R_max)
    j_lo, j_hi = lattice.index(max(R_min - pad, 0.0)), lattice.index(R_max + pad)
    points = list(range(j_lo, j_hi + 1))
    chunks: dict[int, list[int]] = {}
    for j in points:
        chunks.setdefault(j // PATCHES_PER_CHUNK, []).append(j)

    Y0 = group.fundamental_domain_height
    fracs = (settings.Y1_frac, settings.Y2_frac)
    roots: dict[SymmetryClass, list[list[Root]]] = {c: [[], []] for c in classes}
    counts = _Counts()
    total = 2 * len(points)
    done = 0
    grid_step = 0.0
    for q, js in sorted(chunks.items()):
        # parameters and interpolants depend on the chunk (all its points), not on the window
        q0, q1 = q * PATCHES_PER_CHUNK, (q + 1) * PATCHES_PER_CHUNK - 1
        lo, hi = lattice.edge(q0), lattice.edge(q1 + 1)
        w_lo, w_hi = lattice.width(q0), lattice.width(q1)
        k_lo, k_hi = max(lo - 2.0 * w_lo, 0.5 * lo), hi + 2.0 * w_hi
        fams: list[SystemFamily] = []
        ksrcs: list[KSource] = []
        first: dict = {}
        for h, frac in enumerate(fracs):
            params = choose_params(k_hi + 0.5, frac * Y0, settings.eps)
            fams.append(build_family(group, classes, params, kind, chi))
            ksrcs.append(KSource(fams[h].k_points, k_lo, k_hi))
            for cls in classes:
                first[(cls, h)] = len(roots[cls][h])
            for j in js:
                c = lattice.center(j)
                w = lattice.width(j)
                grid_step = max(grid_step, w)
                kdk = ksrcs[h].values_and_derivative(c)
                counts.points += 1
                for cls in classes:
                    roots[cls][h].extend(
                        _scan_adaptive(fams[h].systems[cls], ksrcs[h], c, kdk, w, j, h + 1, settings, counts,
                                       group, kind, roots[cls][h][-64:]))
                done += 1
                if progress is not None:
                    progress(done, total)
        # a root of this chunk at one height only: is the other height's system singular
        # there too? (a pencil eigenvalue that Newton could not follow at that height)
        for cls in classes:
            for h in (0, 1):
                other = 1 - h
                theirs = np.array([r.R for r in roots[cls][other]])
                for r in list(roots[cls][h][first[(cls, h)]:]):
                    tol = settings.R_tol * max(1.0, r.R)
                    if theirs.size and np.min(np.abs(theirs - r.R)) <= tol:
                        continue
                    got = _other_height(fams[other].systems[cls], ksrcs[other], r, other + 1, settings,
                                        counts, group, kind)
                    if got is not None:
                        roots[cls][other].append(got)
                        theirs = np.append(theirs, got.R)

    fams = ksrcs = []  # the last chunk's tables are not needed any more

    # null spaces at a third height 0.9 Y2 for the coefficient errors, from an interpolant
    # per chunk built when the chunk holds an eigenvalue
    thirds: dict[int, tuple] = {}

    def third_for(cls: SymmetryClass, q: int):
        def get(R: float, m: int):
            if q not in thirds:
                q0, q1 = q * PATCHES_PER_CHUNK, (q + 1) * PATCHES_PER_CHUNK - 1
                lo, hi = lattice.edge(q0), lattice.edge(q1 + 1)
                k_lo, k_hi = max(lo - 2.0 * lattice.width(q0), 0.5 * lo), hi + 2.0 * lattice.width(q1)
                params = choose_params(k_hi + 0.5, 0.9 * fracs[1] * Y0, settings.eps)
                fam = build_family(group, classes, params, kind, chi)
                thirds[q] = (fam, KSource(fam.k_points, k_lo, k_hi))
            fam, ksrc = thirds[q]
            sy = fam.systems[cls]
            A = sy.matrix_from_k(ksrc.values(R))
            dr, dc = pn.scalings(A)
            As = pn.scale(A, dr, dc)
            lu = sla.lu_factor(As, check_finite=False)
            nb = pn.null_basis(As, lu, m + 2)
            return sy, nb.sv, dc[:, None] * nb.vectors[:, :m], dc
        return get

    forms: list[Form] = []
    candidates: list[Candidate] = []
    spurious = 0
    proposed = []
    for cls in classes:
        r1 = _dedupe(roots[cls][0], lattice)
        r2 = _dedupe(roots[cls][1], lattice)
        pairs, lone = _match(r1, r2, settings)
        spurious += lone
        proposed += [(b.patch // PATCHES_PER_CHUNK, cls, a, b) for a, b in pairs
                     if R_min <= 0.5 * (a.R + b.R) <= R_max]
    # chunk by chunk, so that one third-height interpolant is alive at a time
    proposed.sort(key=lambda t: (t[0], t[2].R))
    for q, cls, a, b in proposed:
        for old in [k for k in thirds if k != q]:
            del thirds[old]
        if kind == "character":
            from maasscomp.spectrum.charforms import accept_character

            ok, reason, new = accept_character(group, chi, cls, a, b, settings, third_for(cls, q))
        else:
            ok, reason, new = _accept(group, cls, kind, a, b, settings, third_for(cls, q))
        candidates.append(Candidate(R=0.5 * (a.R + b.R), symmetry=cls, accepted=ok, reason=reason))
        forms.extend(new)
    thirds.clear()
    forms.sort(key=lambda f: (f.R, f.symmetry.label, f.basis_index))
    stats = {
        "expansion_points": counts.points, "pencil_eigenvalues": counts.pencil,
        "newton_steps": counts.newton_steps, "relinearised": counts.relinearised,
        "halved_points": counts.splits,
        "lost_starts": counts.lost, "recovered_at_other_height": counts.recovered,
        "spurious_roots": spurious,
    }
    if kind == "character":
        from maasscomp.groups.characters import cusp_shifts

        kap = cusp_shifts(group, chi)
        stats["character"] = chi.label
        stats["singular_cusps"] = [c.name for c, k in zip(group.cusps, kap) if k == 0]
        stats["cusp_shifts"] = {c.name: str(k) for c, k in zip(group.cusps, kap)}
    return SearchResult(level=group.level, classes=tuple(classes), R_min=float(R_min), R_max=float(R_max),
                        forms=tuple(forms), candidates=tuple(sorted(candidates, key=lambda c: c.R)),
                        system=kind, grid_step=float(grid_step), stats=stats)


def _check_character(group, character, system):
    """The character of a search (None for none given), checked against the level."""
    if character is None:
        return None
    from maasscomp.groups.characters import DirichletCharacter

    if not isinstance(character, DirichletCharacter):
        raise InputError(f"character {character!r} is not allowed; give a DirichletCharacter")
    if character.modulus != group.level:
        raise InputError(f"character {character.label} has modulus {character.modulus}; the level is "
                         f"{group.level} (induce it with maasscomp.groups.characters.induce)")
    if not character.is_even:
        raise InputError(f"character {character.label} is odd (chi(-1) = -1); at weight 0 only even "
                         "characters have Maass forms")
    if not character.is_trivial and system not in (None, "character"):
        raise InputError(f"system {system!r} does not carry a character; a nontrivial character "
                         f"({character.label}) is searched with system='character'")
    return character


def _dedupe(roots: list[Root], lattice: PointLattice) -> list[Root]:
    """One root per distinct R (found from several expansion points): keep the one refined
    from the point that owns it."""
    out: list[Root] = []
    for r in sorted(roots, key=lambda r: r.R):
        if out and abs(out[-1].R - r.R) <= 1e-10 * max(1.0, r.R):
            if lattice.index(r.R) == r.patch and lattice.index(out[-1].R) != out[-1].patch:
                out[-1] = r
            continue
        out.append(r)
    return out


def _match(r1: list[Root], r2: list[Root], settings: SearchSettings):
    """Pairs (root at Y1, root at Y2) with the same R, and the roots of one height only."""
    pairs, used = [], set()
    R2 = np.array([r.R for r in r2])
    lone = 0
    for a in r1:
        if R2.size:
            i = int(np.argmin(np.abs(R2 - a.R)))
            if i not in used and abs(R2[i] - a.R) <= settings.R_tol * max(1.0, a.R):
                pairs.append((a, r2[i]))
                used.add(i)
                continue
        lone += 1
    lone += len(r2) - len(used)
    return pairs, lone


def _accept(group, cls: SymmetryClass, kind: str, a: Root, b: Root, settings: SearchSettings, third):
    """Check that the two heights see the same eigenspace; then build the forms."""
    if a.m != b.m:
        return False, f"null space of dimension {a.m} at Y1 but {b.m} at Y2", []
    if a.m == 0:
        return False, "no null direction", []
    sa, sb = a.system, b.system
    M = min(sa.params.M0, sb.params.M0)
    mask = ((sa.storage_scale(a.unknown_scale)[:, :M] <= COMPARE_AMPLIFICATION * a.unknown_scale.min())
            & (sb.storage_scale(b.unknown_scale)[:, :M] <= COMPARE_AMPLIFICATION * b.unknown_scale.min()))
    C1 = sa.coefficients(a.vectors)[:, :, :M]
    C2 = sb.coefficients(b.vectors)[:, :, :M]
    gap = subspace_gap(C1, C2, mask)
    if not (np.isfinite(gap) and gap <= settings.coeff_tol):
        return False, f"null spaces at the two heights differ (sin angle {gap:.2e})", []
    ok, reason, forms = build_forms(group, cls, kind, a, b, settings, third)
    for f in forms:
        f.extra["coefficient_subspace_gap"] = float(gap)
    return ok, reason, forms
