"""Split a job into independent tasks and run one task (in any process).

A search task is one level x one symmetry class x one R chunk. Tasks are small frozen
dataclasses that pickle cheaply; :func:`execute` runs one of them and never raises for a
numerical failure: it returns a :class:`TaskOutcome` with the error text, so one bad
task cannot stop a sweep.

Chunk boundaries (exact, tested in ``tests/pipeline``)
----------------------------------------------------
The R windows are cut at the multiples of ``chunk_width`` (so chunk ids survive a change
of window). A chunk [a, b] is searched on the slightly larger closed window
[a - OVERLAP, b + OVERLAP]; it keeps the confirmed forms with

    a - ETA <= R <= b + ETA     (ETA only at inner chunk edges; outer window ends are exact).

Two neighbouring chunks compute the same eigenvalue r with estimates r1, r2 that differ
by far less than ETA (both are confirmed to ``R_tol`` = 1e-8 at two heights). If r lies
within ETA of the shared edge both chunks keep it, and the store's duplicate detection
(|dR| <= 1e-6, same level and class) stores it once; otherwise both chunks agree on
which side of the edge r lies, and exactly one keeps it. An eigenvalue is lost only if
r1 > b + ETA and r2 < b - ETA, i.e. |r1 - r2| > 2 ETA, which confirmation rules out. The
overlap OVERLAP >> ETA keeps every kept root well inside the searched window, away from
the window ends where a sign change could be missed.
"""

from __future__ import annotations

import math
import re
import time
import traceback
from dataclasses import dataclass, field
from typing import Any

from maasscomp.arith import is_squarefree, prime_factors
from maasscomp.config import Config
from maasscomp.errors import InputError

#: Extra R searched on each side of a chunk.
OVERLAP = 1e-3
#: Half-width of the band around an inner chunk edge in which both neighbours keep a form.
ETA = 1e-7

_ID_RE = re.compile(r"^search:N=(?P<N>\d+):(?P<label>[^:]+):(?:chi=(?P<chi>[^:]+):)?"
                    r"\[(?P<a>[^,]+),(?P<b>[^\]]+)\]$")


def _fmt(x: float) -> str:
    return repr(float(x))


@dataclass(frozen=True)
class Chunk:
    """A piece [lo, hi] of an R window; ``inner_lo``/``inner_hi`` mark edges shared with a
    neighbouring chunk (where the ETA band applies)."""

    lo: float
    hi: float
    inner_lo: bool
    inner_hi: bool

    @property
    def keep_lo(self) -> float:
        return self.lo - ETA if self.inner_lo else self.lo

    @property
    def keep_hi(self) -> float:
        return self.hi + ETA if self.inner_hi else self.hi

    def keeps(self, R: float) -> bool:
        """True if a form found at R belongs to this chunk (see module docstring)."""
        return self.keep_lo <= R <= self.keep_hi

    @property
    def search_lo(self) -> float:
        return max(self.lo - OVERLAP, 0.5 * self.lo)

    @property
    def search_hi(self) -> float:
        return self.hi + OVERLAP


def chunk_window(R_min: float, R_max: float, width: float) -> list[Chunk]:
    """Cut [R_min, R_max] at the multiples of ``width`` strictly inside it."""
    if not (0 < R_min < R_max) or not (width > 0):
        raise InputError(f"cannot chunk window [{R_min!r}, {R_max!r}] with width {width!r}")
    edges = [float(R_min)]
    k = math.floor(R_min / width) + 1
    tiny = 1e-9 * max(1.0, R_max)
    while True:
        e = round(k * width, 12)
        if e >= R_max - tiny:
            break
        if e > R_min + tiny:
            edges.append(e)
        k += 1
    edges.append(float(R_max))
    n = len(edges) - 1
    return [Chunk(edges[i], edges[i + 1], i > 0, i < n - 1) for i in range(n)]


def search_settings(eps: float, n_coeffs: int, step: float | None):
    """The search settings of a job: the config's ``step`` caps the distance between the
    expansion points of the search (its default is the search's own rule)."""
    from maasscomp.spectrum.search import SearchSettings

    if step is None:
        return SearchSettings(eps=eps, n_coeffs=n_coeffs)
    return SearchSettings(eps=eps, n_coeffs=n_coeffs, max_step=float(step))


@dataclass(frozen=True)
class SearchTask:
    """Search one symmetry class of one level in one R chunk."""

    level: int
    label: str
    chunk: Chunk
    eps: float
    n_coeffs: int
    step: float | None
    general: bool = False  # non-squarefree level: the search picks the multi-cusp system
    #: label of a nontrivial character (``X7.2``); "" for the trivial one
    character: str = ""
    #: also store the forms of the conjugate character, derived from this task's forms
    derive_conjugate: bool = False

    stage = "search"

    @property
    def task_id(self) -> str:
        chi = f"chi={self.character}:" if self.character else ""
        return f"search:N={self.level}:{self.label}:{chi}[{_fmt(self.chunk.lo)},{_fmt(self.chunk.hi)}]"

    @property
    def chi(self):
        """The task's DirichletCharacter (None for the trivial one)."""
        if not self.character:
            return None
        from maasscomp.groups import DirichletCharacter

        return DirichletCharacter.from_label(self.character)

    def run(self) -> "SearchOutput":
        from maasscomp.groups import gamma0
        from maasscomp.hejhal.types import SymmetryClass
        from maasscomp.spectrum.search import search_forms

        c = self.chunk
        res = search_forms(gamma0(self.level), c.search_lo, c.search_hi,
                     settings=search_settings(self.eps, self.n_coeffs, self.step),
                     classes=[SymmetryClass.from_label(self.label)], character=self.chi)
        return self.output_from(res)

    def output_from(self, res) -> "SearchOutput":
        """The forms and rejected candidates of this task's class in a search result that
        belong to this chunk (with the derived forms of the conjugate character when asked)."""
        from maasscomp.hejhal.types import SymmetryClass

        c = self.chunk
        sym = SymmetryClass.from_label(self.label)
        kept = tuple(f for f in res.forms if f.symmetry == sym and c.keeps(f.R))
        if self.derive_conjugate and kept:
            from maasscomp.groups import gamma0
            from maasscomp.spectrum.charforms import conjugate_form

            G = gamma0(self.level)
            kept = kept + tuple(conjugate_form(G, f) for f in kept)
        rejected = tuple((cand.R, cand.reason) for cand in res.candidates
                         if cand.symmetry == sym and not cand.accepted and c.keeps(cand.R))
        return SearchOutput(forms=kept, rejected=rejected, grid_step=float(res.grid_step))


@dataclass(frozen=True)
class RecheckTask:
    """Search a window flagged by Weyl's law again, in every class of a level, with the
    settings of re-search round 1 (:func:`maasscomp.spectrum.complete.research_settings`:
    shifted lattice, twice the expansion points, lower sample heights), as
    :func:`maasscomp.spectrum.complete.complete_search` does."""

    level: int
    labels: tuple[str, ...]
    lo: float
    hi: float
    eps: float
    n_coeffs: int
    step: float | None

    stage = "recheck"

    @property
    def task_id(self) -> str:
        return f"recheck:N={self.level}:[{_fmt(self.lo)},{_fmt(self.hi)}]"

    def run(self) -> "SearchOutput":
        from maasscomp.groups import gamma0
        from maasscomp.hejhal.types import SymmetryClass
        from maasscomp.spectrum.complete import research_settings
        from maasscomp.spectrum.search import search_forms

        settings = research_settings(search_settings(self.eps, self.n_coeffs, self.step), 1)
        syms = [SymmetryClass.from_label(lab) for lab in self.labels]
        res = search_forms(gamma0(self.level), max(self.lo - OVERLAP, 0.5 * self.lo), self.hi + OVERLAP,
                     settings=settings, classes=syms)
        forms = tuple(f for f in res.forms if self.lo <= f.R <= self.hi)
        rejected = tuple((c.R, c.reason) for c in res.candidates
                         if not c.accepted and self.lo <= c.R <= self.hi)
        return SearchOutput(forms=forms, rejected=rejected, grid_step=0.0)


@dataclass(frozen=True)
class ScanTask:
    """Sup-norm scan of one stored form (the form travels with the task: workers never
    open the store)."""

    form_key: str
    form: Any
    Y_omega: float
    rtol: float
    samples_per_wavelength: float

    stage = "scan"

    @property
    def task_id(self) -> str:
        return f"scan:{self.form_key}"

    def run(self) -> "ScanOutput":
        from maasscomp.supnorm.evaluate import FormEvaluator
        from maasscomp.supnorm.norm import l2_norm
        from maasscomp.supnorm.scan import ScanSettings, scan_form

        settings = ScanSettings(Y_omega=self.Y_omega, rtol=self.rtol,
                                samples_per_wavelength=self.samples_per_wavelength)
        ev = FormEvaluator(self.form, tol=settings.eval_tol)
        norm = l2_norm(self.form, evaluator=ev)
        res = scan_form(self.form, settings=settings, norm=norm, form_key=self.form_key, evaluator=ev)
        return ScanOutput(form_key=self.form_key, data=_plain(res.as_dict()),
                          norm=_plain(norm.as_dict()), region=res.global_region,
                          value=float(res.global_value), ratio=float(res.transition.value / res.bulk_value))


def _plain(d: dict) -> dict:
    # the store keeps numbers, arrays of numbers and strings: a list of strings becomes one
    # newline-separated string (the scanner's own encoding of its notes)
    return {k: ("\n".join(v) if isinstance(v, (list, tuple)) and all(isinstance(t, str) for t in v)
                else v) for k, v in d.items()}


@dataclass(frozen=True)
class ScanOutput:
    form_key: str
    data: dict
    norm: dict
    region: str
    value: float
    ratio: float


@dataclass(frozen=True)
class SearchOutput:
    forms: tuple
    rejected: tuple[tuple[float, str], ...]
    grid_step: float


@dataclass(frozen=True)
class TaskOutcome:
    """What comes back from a worker: the output, or the error that stopped the task."""

    task_id: str
    ok: bool
    output: Any = None
    error: str = ""
    detail: str = ""
    seconds: float = 0.0
    worker: str = ""


def execute(task) -> TaskOutcome:
    """Run one task; numerical and input errors become a failed :class:`TaskOutcome`."""
    import os
    import socket

    t0 = time.perf_counter()
    where = f"{socket.gethostname()}:{os.getpid()}"
    try:
        out = task.run()
    except Exception as exc:  # noqa: BLE001 - reported per task, the sweep goes on
        return TaskOutcome(task.task_id, False, None, f"{type(exc).__name__}: {exc}",
                           traceback.format_exc(), time.perf_counter() - t0, where)
    return TaskOutcome(task.task_id, True, out, "", "", time.perf_counter() - t0, where)


@dataclass(frozen=True)
class TaskGroup:
    """Tasks run one after the other by one worker: the classes of one level and R chunk.

    The classes of a level are searched on the same R grid and share the sample points
    and K-Bessel values (:func:`execute_group`), so one worker searching all classes of a
    chunk does several times less work at levels with many classes than workers that
    search one class each. Every task keeps its own id, result and done mark.
    """

    tasks: tuple

    @property
    def group_id(self) -> str:
        return self.tasks[0].task_id if len(self.tasks) == 1 else \
            f"{self.tasks[0].task_id} (+{len(self.tasks) - 1} classes)"


def group_tasks(tasks) -> list[TaskGroup]:
    """Group tasks by level and chunk, keeping the order of first appearance."""
    groups: dict[tuple, list] = {}
    for t in tasks:
        groups.setdefault((t.level, t.chunk, getattr(t, "character", "")), []).append(t)
    return [TaskGroup(tuple(g)) for g in groups.values()]


def execute_group(group: TaskGroup) -> list[TaskOutcome]:
    """Run the tasks of a group in this process (see :class:`TaskGroup`).

    The classes of a level and chunk are searched together by
    :func:`maasscomp.spectrum.search.search_forms`, which shares the sample points and K-Bessel
    values between them (the result of each class is the one a search of that class alone
    gives: the expansion points depend on the level, not on the classes searched); the
    time of the joint search is shared equally among the tasks.
    """
    import os
    import socket

    tasks = group.tasks
    first = tasks[0]
    joint = (len(tasks) > 1 and all(isinstance(t, SearchTask) for t in tasks)
             and len({(t.level, t.chunk, t.eps, t.n_coeffs, t.step, t.character) for t in tasks}) == 1)
    if not joint:
        return [execute(t) for t in tasks]
    from maasscomp.groups import gamma0
    from maasscomp.hejhal.types import SymmetryClass
    from maasscomp.spectrum.search import search_forms

    t0 = time.perf_counter()
    where = f"{socket.gethostname()}:{os.getpid()}"
    syms = [SymmetryClass.from_label(t.label) for t in tasks]
    c = first.chunk
    try:
        res = search_forms(gamma0(first.level), c.search_lo, c.search_hi,
                     settings=search_settings(first.eps, first.n_coeffs, first.step), classes=syms,
                     character=first.chi)
        outs = [t.output_from(res) for t in tasks]
    except Exception as exc:  # noqa: BLE001 - reported per task, the sweep goes on
        dt = (time.perf_counter() - t0) / len(tasks)
        err, detail = f"{type(exc).__name__}: {exc}", traceback.format_exc()
        return [TaskOutcome(t.task_id, False, None, err, detail, dt, where) for t in tasks]
    dt = (time.perf_counter() - t0) / len(tasks)
    return [TaskOutcome(t.task_id, True, o, "", "", dt, where) for t, o in zip(tasks, outs)]


def parse_task_id(task_id: str) -> dict[str, Any] | None:
    """Level, class label and chunk [lo, hi] of a search task id, with "character" for a task
    of a nontrivial character (None for other ids)."""
    m = _ID_RE.match(task_id)
    if not m:
        return None
    out = {"level": int(m["N"]), "label": m["label"], "lo": float(m["a"]), "hi": float(m["b"])}
    if m["chi"]:
        out["character"] = m["chi"]  # only for tasks of a nontrivial character
    return out


# ---------------------------------------------------------------- planning


def class_labels(level: int, parities: tuple[str, ...], atkin_lehner: str) -> list[str]:
    """Symmetry-class labels searched at a level (see :func:`maasscomp.spectrum.search.symmetry_classes`)."""
    from maasscomp.groups import gamma0
    from maasscomp.spectrum.search import symmetry_classes

    out = []
    for sym in symmetry_classes(gamma0(level), tuple(parities)):
        signs = [s for _, s in sym.al_signs]
        if atkin_lehner == "plus" and any(s < 0 for s in signs):
            continue
        if atkin_lehner == "minus" and any(s > 0 for s in signs):
            continue
        out.append(sym.label)
    return out


def estimate_task_memory(level: int, R_max: float, eps: float, n_coeffs: int) -> tuple[float, dict]:
    """Bytes one search task at this level up to R_max needs, and the sizes behind it.

    The largest arrays of a Hejhal system are Q x M (K-Bessel and phase tables, about
    eight of them alive at once while the matrix is built) and M x M (the matrix and its
    factorisation), with M = n_cusps * M0 for the multi-cusp system. M0 follows the
    truncation rule of :func:`maasscomp.hejhal.params.truncation_M0` (its starting guess,
    an upper bound), and the final solve for the stored coefficients needs M0 of about
    3 n_coeffs (:mod:`maasscomp.spectrum.confirm`). The search also keeps a Chebyshev table
    of Kt in R at three heights (about 20 nodes times Q M0 values each, at most
    :data:`maasscomp.hejhal.kinterp.INTERP_MAX_BYTES`).
    """
    from maasscomp.groups import gamma0

    g = gamma0(level)
    Y = 0.80 * g.fundamental_domain_height  # the lower of the two search heights
    L = math.log(1.0 / eps)
    R = R_max + 1.0
    guess = R + 3.0 * (1.5 * L / math.sqrt(2)) ** (2 / 3) * max(R, 1.0) ** (1 / 3) + L + math.pi * R / 2
    M0 = max(int(math.ceil(guess / (2 * math.pi * Y))) + 4, 3 * n_coeffs)
    cusps = 1 if g.is_squarefree else len(g.cusps)
    M = cusps * M0
    Q = M + max(8, M // 8)
    from maasscomp.hejhal.kinterp import INTERP_MAX_BYTES

    table = min(8.0 * 20 * Q * M0, INTERP_MAX_BYTES)
    nbytes = 8.0 * (8 * Q * M + 3 * M * M) + 3 * table
    return nbytes, {"M0": M0, "Q": Q, "n_cusps": cusps, "Y": Y}


def supported_R_max() -> float:
    """Largest R the K-Bessel function supports: ``maasscomp.special.R_MAX`` (10^4 when a
    version of the special stage does not expose it)."""
    import maasscomp.special as special

    return float(getattr(special, "R_MAX", 1e4))


def _index(N: int) -> int:
    """[SL2(Z) : Gamma0(N)] = N prod_{p | N} (1 + 1/p) (Diamond & Shurman 2005, §1.2)."""
    out = N
    for p in prime_factors(N):
        out = out // p * (p + 1)
    return out


def _classes_searched(N: int, parities: tuple[str, ...], atkin_lehner: str) -> tuple[int, int]:
    """(classes searched, classes of the level) without building the group (the rule of
    :func:`class_labels` and :func:`maasscomp.spectrum.search.symmetry_classes`)."""
    if not is_squarefree(N):
        return len(parities), 2
    k = len(prime_factors(N))
    per_parity = 2 ** k if (atkin_lehner == "all" or N == 1) else 1
    return len(parities) * per_parity, 2 * 2 ** k


def _n_chunks(a: float, b: float, w: float) -> int:
    # chunk edges sit at the multiples of w strictly inside (a, b) (chunk_window)
    return max(1, math.ceil(b / w) - math.floor(a / w))


@dataclass(frozen=True)
class JobSize:
    """How big a job is, estimated from the config alone (no group is built)."""

    levels: int
    max_level: int
    tasks: int
    grid_points: float          # determinant evaluations, summed over classes
    max_task_points: float      # grid points of the largest task (per class)


def estimate_size(cfg: Config) -> JobSize:
    """Tasks and grid points of a job by Weyl's law, without building any group.

    The grid step of the search is min(0.02, mean spacing / 12) with the mean spacing
    6 n_classes / (index R) of one class (:func:`maasscomp.spectrum.search.mean_spacing`),
    unless ``step`` is given; grid points are summed over the classes searched.
    """
    s = cfg.search
    tasks = 0
    points = 0.0
    worst = 0.0
    n_chunks = sum(_n_chunks(a, b, s.chunk_width) for a, b in s.windows)
    for N in s.levels:
        searched, total_classes = _classes_searched(N, s.parities, s.atkin_lehner)
        tasks += searched * n_chunks
        c = 2.0 * _index(N) / total_classes  # 1/step = max(50, c R) for the default step
        for a, b in s.windows:
            if s.step is not None:
                per_class = (b - a) / s.step
                top = min(s.chunk_width, b - a) / s.step
            else:
                # integral of max(50, c R) dR over [a, b]
                r0 = 50.0 / c
                lo, hi = a, b
                flat = max(0.0, min(hi, r0) - lo)
                lo2 = max(lo, r0)
                per_class = 50.0 * flat + (0.5 * c * (hi * hi - lo2 * lo2) if hi > lo2 else 0.0)
                top = min(s.chunk_width, b - a) * max(50.0, c * b)
            points += searched * per_class
            worst = max(worst, top)
    return JobSize(len(s.levels), max(s.levels) if s.levels else 0, tasks, points, worst)


def _size_problems(cfg: Config) -> tuple[JobSize | None, list[str]]:
    """Hard limits (never lifted) and size limits (lifted by ``[job] size_limits = false``)."""
    from maasscomp.config import (MAX_GRID_POINTS, MAX_GRID_POINTS_PER_TASK, MAX_JOB_LEVELS,
                                  MAX_PLANNED_LEVEL, MAX_TASKS)

    s = cfg.search
    hard = []
    r_top = supported_R_max() - OVERLAP
    if s.R_max > r_top:
        hard.append(f"[search] R_max={s.R_max:g} is beyond the supported range: every chunk is "
                    f"searched up to R_max + {OVERLAP:g}, and the K-Bessel function supports "
                    f"R <= {supported_R_max():g}; use R_max <= {r_top:.10g}")
    if s.step is not None and s.step < 1e-10 * max(1.0, s.R_max):
        hard.append(f"[search] step={s.step!r} is below the resolution of R near "
                    f"R_max={s.R_max:g}; use step >= {1e-10 * max(1.0, s.R_max):.3g} "
                    "(or leave step out for the search's own rule)")
    if hard:
        return None, hard
    size = estimate_size(cfg)
    if not cfg.job.size_limits:
        return size, []
    lift = "; or set [job] size_limits = false (--no-size-limits) to run it anyway"
    out = []
    if size.levels > MAX_JOB_LEVELS:
        out.append(f"[search] levels: {size.levels} levels, more than the {MAX_JOB_LEVELS} of "
                   f"one job; split the levels over several jobs{lift}")
    if size.max_level > MAX_PLANNED_LEVEL:
        out.append(f"[search] levels: level {size.max_level} is above {MAX_PLANNED_LEVEL}, where "
                   f"setting up Gamma0(N) alone takes minutes{lift}")
    if size.tasks > MAX_TASKS:
        out.append(f"the job has {size.tasks:,} search tasks, more than {MAX_TASKS:,}; raise "
                   f"[search] chunk_width or narrow the windows{lift}")
    if size.max_task_points > MAX_GRID_POINTS_PER_TASK:
        out.append(f"one task would scan {size.max_task_points:.3g} grid points, more than "
                   f"{MAX_GRID_POINTS_PER_TASK:,}; "
                   + ("raise [search] step" if s.step is not None else "lower [search] chunk_width")
                   + lift)
    if size.grid_points > MAX_GRID_POINTS:
        out.append(f"the job would scan {size.grid_points:.3g} grid points, more than "
                   f"{MAX_GRID_POINTS:,}; narrow the windows or the levels"
                   + (", or raise [search] step" if s.step is not None else "") + lift)
    return size, out


@dataclass(frozen=True)
class Plan:
    """Every task of a job, in a fixed order, with what the planner checked."""

    tasks: tuple[SearchTask, ...]
    classes: dict[int, tuple[str, ...]] = field(default_factory=dict)
    memory_gb: dict[int, float] = field(default_factory=dict)
    scan: bool = False
    size: JobSize | None = None
    cpu_hours: float = 0.0
    #: (level, character label) -> parity classes searched with that nontrivial character
    char_classes: dict[tuple[int, str], tuple[str, ...]] = field(default_factory=dict)
    #: (level, character label) -> label of the character whose forms are derived from its
    char_derived: dict[tuple[int, str], str] = field(default_factory=dict)

    def describe(self) -> str:
        nl = len(self.classes)
        lines = [f"{len(self.tasks)} search tasks over {nl} level{'s' if nl != 1 else ''}"
                 + (", then a sup-norm scan of every form found" if self.scan else "")]
        if self.size is not None:
            lines.append(f"  about {self.size.grid_points:.3g} determinant evaluations (largest "
                         f"task {self.size.max_task_points:.3g} grid points); CPU time of the "
                         f"search: {_fmt_hours(self.cpu_hours)} (order of magnitude; scans "
                         "not included)")
        for N, labels in self.classes.items():
            n = sum(t.level == N and not t.character for t in self.tasks)
            lines.append(f"  level {N:>4}: {len(labels)} classes ({', '.join(labels)}), {n} tasks, "
                         f"about {1024 * self.memory_gb[N]:.0f} MB per task")
        source = {(N, d): c for (N, c), d in self.char_derived.items()}
        for (N, chi), labels in self.char_classes.items():
            if (N, chi) in source:
                lines.append(f"  level {N:>4}, character {chi}: {len(labels)} classes ({', '.join(labels)}), "
                             f"derived by conjugation from the forms of {source[(N, chi)]}")
                continue
            n = sum(t.level == N and t.character == chi for t in self.tasks)
            conj = self.char_derived.get((N, chi))
            lines.append(f"  level {N:>4}, character {chi}: {len(labels)} classes ({', '.join(labels)}), "
                         f"{n} tasks" + (f"; forms of {conj} derived by conjugation" if conj else ""))
        return "\n".join(lines)


def _fmt_hours(h: float) -> str:
    if h < 1 / 60:
        return "under a minute"
    if h < 1 / 6:
        return f"{60 * h:.0f} min"
    if h < 1:
        return f"{60 * h:.0f} min"
    if h < 48:
        return f"{h:.1f} h"
    return f"{h / 24:.0f} days"


#: Floating-point rate assumed for the time estimate of a determinant evaluation.
_FLOPS = 2e9


def build_plan(cfg: Config) -> Plan:
    """All tasks of a validated config; raise InputError for what cannot be run.

    First, without building any group: R inside the supported range, a grid step R can
    resolve, and the size limits (:func:`estimate_size`). Then the checks that need the
    groups: the systems of one task must fit in ``[executor] memory_limit_gb``. Touches no file.
    """
    s = cfg.search
    where = f"{cfg.source_path}: " if cfg.source_path else ""
    size, problems = _size_problems(cfg)
    if problems:
        if len(problems) == 1:
            raise InputError(where + problems[0])
        raise InputError(where + f"{len(problems)} problems in the config:\n  - " + "\n  - ".join(problems))
    problems: list[str] = []
    tasks: list[SearchTask] = []
    classes: dict[int, tuple[str, ...]] = {}
    char_classes: dict[tuple[int, str], tuple[str, ...]] = {}
    char_derived: dict[tuple[int, str], str] = {}
    mem: dict[int, float] = {}
    chunks = [c for (a, b) in s.windows for c in chunk_window(a, b, s.chunk_width)]
    limit = cfg.executor.memory_limit_gb
    hours = 0.0
    for N in s.levels:
        general = not is_squarefree(N)
        nbytes, info = estimate_task_memory(N, s.R_max, s.eps, s.n_coeffs)
        mem[N] = nbytes / 2**30
        if mem[N] > limit:
            problems.append(
                f"level {N} up to R={s.R_max:g}: one task needs about {mem[N]:.1f} GB "
                f"(M0={info['M0']}, Q={info['Q']}, {info['n_cusps']} expansion(s)), more than "
                f"[executor] memory_limit_gb = {limit:.3g}; lower R_max or n_coeffs, or raise "
                "memory_limit_gb")
            continue
        try:
            chars = _characters_of(s.characters, N)
        except InputError as exc:
            problems.append(f"level {N}: {exc}")
            continue
        if any(chi.is_trivial for chi in chars):
            labels = tuple(class_labels(N, s.parities, s.atkin_lehner))
            if not labels:
                problems.append(f"level {N}: no symmetry class left after parities={list(s.parities)} "
                                f"and atkin_lehner={s.atkin_lehner!r}")
                continue
            classes[N] = labels
            for lab in labels:
                for c in chunks:
                    tasks.append(SearchTask(N, lab, c, s.eps, s.n_coeffs, s.step, general))
        for chi, conj in _character_pairs(chars):
            if 8 * mem[N] > limit:
                problems.append(f"level {N} with character {chi.label} up to R={s.R_max:g}: one task "
                                f"needs about {8 * mem[N]:.1f} GB (complex system), more than "
                                f"[executor] memory_limit_gb = {limit:.3g}")
                continue
            labels = tuple(dict.fromkeys(s.parities))
            char_classes[(N, chi.label)] = labels
            if conj is not None:
                char_classes[(N, conj.label)] = labels
                char_derived[(N, chi.label)] = conj.label
            for lab in labels:
                for c in chunks:
                    tasks.append(SearchTask(N, lab, c, s.eps, s.n_coeffs, s.step, general, chi.label,
                                            conj is not None))
        if size is not None:
            # two heights, an LU of the M x M matrix and its assembly per grid point, with
            # the truncation the scan uses at the lower height
            from maasscomp.hejhal.params import truncation_M0

            M = info["n_cusps"] * truncation_M0(s.R_max + 1.0, info["Y"], s.eps)
            hours += _level_points(cfg, N) * 2 * (2 / 3 * M**3 + 10 * M * M) / _FLOPS / 3600
    if problems:
        if len(problems) == 1:
            raise InputError(where + problems[0])
        raise InputError(where + f"{len(problems)} problems in the config:\n  - " + "\n  - ".join(problems))
    return Plan(tasks=tuple(tasks), classes=classes, memory_gb=mem, scan=cfg.scan.enabled,
                size=size, cpu_hours=hours, char_classes=char_classes, char_derived=char_derived)


def _characters_of(spec, N: int):
    """The characters modulo N named by ``[search] characters`` (raises InputError)."""
    from maasscomp.groups.characters import characters_for_level

    if isinstance(spec, tuple):
        spec = list(spec)
    return characters_for_level(spec, N)


def _character_pairs(chars):
    """(chi, conj) for every nontrivial character to search: conj is its complex conjugate
    when that is also wanted (and different), whose forms are then derived by conjugation
    (docs/theory.md §12.3); each pair is searched once, at the character with
    the smaller exponent tuple."""
    from maasscomp.groups.characters import conjugate

    wanted = [c for c in chars if not c.is_trivial]
    out = []
    for chi in wanted:
        cb = conjugate(chi)
        if cb != chi and cb in wanted:
            if cb.exponents < chi.exponents:
                continue
            out.append((chi, cb))
        else:
            out.append((chi, None))
    return out


def _level_points(cfg: Config, N: int) -> float:
    """Grid points of one level (see :func:`estimate_size`)."""
    from dataclasses import replace

    return estimate_size(replace(cfg, search=replace(cfg.search, levels=(N,)))).grid_points
