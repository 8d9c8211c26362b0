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
from typing import Any, Callable

from maasscomp.config import Config, is_squarefree
from maasscomp.errors import InputError

#: Extra R searched on each side of a chunk.
OVERLAP = 1e-3
#: Half-width of the band around an inner chunk edge in which both neighbours keep a form.
ETA = 1e-7

_ID_RE = re.compile(r"^search:N=(?P<N>\d+):(?P<label>[^:]+):\[(?P<a>[^,]+),(?P<b>[^\]]+)\]$")


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


@dataclass(frozen=True)
class SearchTask:
    """Search one symmetry class of one level in one R chunk."""

    level: int
    label: str
    chunk: Chunk
    eps: float
    n_coeffs: int
    step: float | None
    general: bool = False  # non-squarefree level: multi-cusp search by parity

    stage = "search"

    @property
    def task_id(self) -> str:
        return f"search:N={self.level}:{self.label}:[{_fmt(self.chunk.lo)},{_fmt(self.chunk.hi)}]"

    def run(self) -> "SearchOutput":
        from maasscomp.groups import gamma0
        from maasscomp.hejhal.types import SymmetryClass
        from maasscomp.spectrum.search import SearchSettings

        group = gamma0(self.level)
        settings = SearchSettings(eps=self.eps, n_coeffs=self.n_coeffs)
        sym = SymmetryClass.from_label(self.label)
        c = self.chunk
        if self.general:
            search_window_general = general_search()
            assert search_window_general is not None
            res = search_window_general(group, sym.parity, c.search_lo, c.search_hi, settings,
                                        step=self.step)
        else:
            from maasscomp.spectrum.search import search_window

            res = search_window(group, sym, c.search_lo, c.search_hi, settings, step=self.step)
        return self.output_from(res)

    def output_from(self, res) -> "SearchOutput":
        """The forms and rejected candidates of a search result that belong to this chunk."""
        c = self.chunk
        kept = tuple(f for f in res.forms if c.keeps(f.R))
        rejected = tuple((cand.R, cand.reason) for cand in res.candidates
                         if not cand.accepted and c.keeps(cand.R))
        return SearchOutput(forms=kept, rejected=rejected, grid_step=float(res.grid_step))


@dataclass(frozen=True)
class RecheckTask:
    """Search a window flagged by Weyl's law again, in every class of a squarefree level,
    with a 4x finer grid and lower sample heights (as
    :func:`maasscomp.spectrum.complete.complete_search` does): a spurious root of the
    truncated system moves with the heights, so a true eigenvalue hidden next to one
    shows at the other heights."""

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
        from dataclasses import replace

        from maasscomp.groups import gamma0
        from maasscomp.hejhal.types import SymmetryClass
        from maasscomp.spectrum.search import SearchSettings, search_classes

        base = SearchSettings(eps=self.eps, n_coeffs=self.n_coeffs)
        finer = replace(base, steps_per_spacing=4 * base.steps_per_spacing, Y1_frac=0.86, Y2_frac=0.74)
        syms = [SymmetryClass.from_label(lab) for lab in self.labels]
        res = search_classes(gamma0(self.level), syms, max(self.lo - OVERLAP, 0.5 * self.lo),
                             self.hi + OVERLAP, finer,
                             step=None if self.step is None else self.step / 4)
        forms = tuple(f for r in res.values() for f in r.forms if self.lo <= f.R <= self.hi)
        rejected = tuple((c.R, c.reason) for r in res.values() for c in r.candidates
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


def scanner():
    """(scan attachment name, norm attachment name) of the sup-norm scanner, or None if
    this version lacks it."""
    try:
        from maasscomp.supnorm.norm import l2_norm  # noqa: F401
        from maasscomp.supnorm.scan import NORM_ATTACHMENT, SCAN_ATTACHMENT, scan_form  # noqa: F401
    except ImportError:
        return None
    return SCAN_ATTACHMENT, NORM_ATTACHMENT


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
        groups.setdefault((t.level, t.chunk), []).append(t)
    return [TaskGroup(tuple(g)) for g in groups.values()]


def execute_group(group: TaskGroup) -> list[TaskOutcome]:
    """Run the tasks of a group in this process (see :class:`TaskGroup`).

    The classes of a squarefree level are searched together by
    :func:`maasscomp.spectrum.search.search_classes`, which shares the sample points and
    K-Bessel values between them (its grid step depends on the level, not on the classes
    searched, so the result of each class is the one a search of that class alone gives);
    the time of the joint search is shared equally among the tasks.
    """
    import os
    import socket

    tasks = group.tasks
    first = tasks[0]
    joint = (len(tasks) > 1 and all(isinstance(t, SearchTask) and not t.general for t in tasks)
             and len({(t.level, t.chunk, t.eps, t.n_coeffs, t.step) for t in tasks}) == 1)
    if not joint:
        return [execute(t) for t in tasks]
    from maasscomp.groups import gamma0
    from maasscomp.hejhal.types import SymmetryClass
    from maasscomp.spectrum.search import SearchSettings, search_classes

    t0 = time.perf_counter()
    where = f"{socket.gethostname()}:{os.getpid()}"
    syms = [SymmetryClass.from_label(t.label) for t in tasks]
    c = first.chunk
    try:
        res = search_classes(gamma0(first.level), syms, c.search_lo, c.search_hi,
                             SearchSettings(eps=first.eps, n_coeffs=first.n_coeffs), step=first.step)
        outs = [t.output_from(res[sym]) for t, sym in zip(tasks, syms)]
    except Exception as exc:  # noqa: BLE001 - reported per task, the sweep goes on
        dt = (time.perf_counter() - t0) / len(tasks)
        err, detail = f"{type(exc).__name__}: {exc}", traceback.format_exc()
        return [TaskOutcome(t.task_id, False, None, err, detail, dt, where) for t in tasks]
    dt = (time.perf_counter() - t0) / len(tasks)
    return [TaskOutcome(t.task_id, True, o, "", "", dt, where) for t, o in zip(tasks, outs)]


def parse_task_id(task_id: str) -> dict[str, Any] | None:
    """Level, class label and chunk [lo, hi] of a search task id (None for other ids)."""
    m = _ID_RE.match(task_id)
    if not m:
        return None
    return {"level": int(m["N"]), "label": m["label"], "lo": float(m["a"]), "hi": float(m["b"])}


# ---------------------------------------------------------------- planning


def general_search() -> Callable | None:
    """The multi-cusp window search for non-squarefree levels, if this version has it."""
    try:
        from maasscomp.spectrum.general import search_window_general
    except ImportError:
        return None
    return search_window_general


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
    3 n_coeffs (:mod:`maasscomp.spectrum.search`).
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
    nbytes = 8.0 * (8 * Q * M + 3 * M * M)
    return nbytes, {"M0": M0, "Q": Q, "n_cusps": cusps, "Y": Y}


@dataclass(frozen=True)
class Plan:
    """Every task of a job, in a fixed order, with what the planner checked."""

    tasks: tuple[SearchTask, ...]
    classes: dict[int, tuple[str, ...]] = field(default_factory=dict)
    memory_gb: dict[int, float] = field(default_factory=dict)
    scan: bool = False

    def describe(self) -> str:
        nl = len(self.classes)
        lines = [f"{len(self.tasks)} search tasks over {nl} level{'s' if nl != 1 else ''}"
                 + (", then a sup-norm scan of every form found" if self.scan else "")]
        for N, labels in self.classes.items():
            n = sum(t.level == N for t in self.tasks)
            lines.append(f"  level {N:>4}: {len(labels)} classes ({', '.join(labels)}), {n} tasks, "
                         f"about {1024 * self.memory_gb[N]:.0f} MB per task")
        return "\n".join(lines)


def build_plan(cfg: Config) -> Plan:
    """All tasks of a validated config; raise InputError for what cannot be run.

    Checks that need the groups: non-squarefree levels need the multi-cusp search, and
    the systems of one task must fit in ``[executor] memory_limit_gb``. Touches no file.
    """
    s = cfg.search
    problems: list[str] = []
    have_general = general_search() is not None
    tasks: list[SearchTask] = []
    classes: dict[int, tuple[str, ...]] = {}
    mem: dict[int, float] = {}
    chunks = [c for (a, b) in s.windows for c in chunk_window(a, b, s.chunk_width)]
    nonsq = [N for N in s.levels if not is_squarefree(N)]
    if nonsq and not have_general:
        problems.append(
            f"[search] levels {', '.join(map(str, nonsq))} {'is' if len(nonsq) == 1 else 'are'} not "
            "squarefree: searches at non-squarefree levels are not yet supported by this "
            "version; use squarefree levels (e.g. levels = \"squarefree up to 50\")")
    limit = cfg.executor.memory_limit_gb
    for N in s.levels:
        general = not is_squarefree(N)
        if general and not have_general:
            continue
        nbytes, info = estimate_task_memory(N, s.R_max, s.eps, s.n_coeffs)
        mem[N] = nbytes / 2**30
        if mem[N] > limit:
            problems.append(
                f"level {N} up to R={s.R_max:g}: one task needs about {mem[N]:.1f} GB "
                f"(M0={info['M0']}, Q={info['Q']}, {info['n_cusps']} expansion(s)), more than "
                f"[executor] memory_limit_gb = {limit:.3g}; lower R_max or n_coeffs, or raise "
                "memory_limit_gb")
            continue
        labels = tuple(class_labels(N, s.parities, s.atkin_lehner))
        if not labels:
            problems.append(f"level {N}: no symmetry class left after parities={list(s.parities)} "
                            f"and atkin_lehner={s.atkin_lehner!r}")
            continue
        classes[N] = labels
        for lab in labels:
            for c in chunks:
                tasks.append(SearchTask(N, lab, c, s.eps, s.n_coeffs, s.step, general))
    if cfg.scan.enabled and scanner() is None:
        problems.append("[scan] enabled = true, but this version has no sup-norm scanner; "
                        "set enabled = false")
    if problems:
        where = f"{cfg.source_path}: " if cfg.source_path else ""
        if len(problems) == 1:
            raise InputError(where + problems[0])
        raise InputError(where + f"{len(problems)} problems in the config:\n  - " + "\n  - ".join(problems))
    return Plan(tasks=tuple(tasks), classes=classes, memory_gb=mem, scan=cfg.scan.enabled)
