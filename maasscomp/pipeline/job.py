"""Run a job config: plan the tasks, run them on an executor, commit results as they arrive.

Order of work (nothing is written before step 3):

1. validate the config and build the plan (:func:`maasscomp.pipeline.tasks.build_plan`);
2. if the store exists, open it read-only and refuse it when a run recorded in it used
   result-affecting settings different from this config (:func:`check_compatible`);
3. start the executor, open the store for writing, record the run, open the log file;
4. skip the tasks the run already finished, submit the rest (grouped by level and R
   chunk, :class:`maasscomp.pipeline.tasks.TaskGroup`), and commit each finished
   task's forms together with its done mark in ONE store transaction (one per group),
   in the main process, as results arrive.

A kill at any moment therefore loses only the tasks in flight; rerunning the same
config redoes exactly those.
"""

from __future__ import annotations

import json
import logging
import math
import sys
import time
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from maasscomp import __version__
from maasscomp.config import Config, fingerprint, fingerprint_changes
from maasscomp.errors import InputError, StoreError
from maasscomp.pipeline.executors import make_executor
from maasscomp.pipeline.tasks import Plan, TaskOutcome, build_plan, execute_group, group_tasks

RUN_RECORD_FORMAT = "maasscomp-job"

log = logging.getLogger("maasscomp.pipeline")


@dataclass
class JobSummary:
    """What a run did."""

    output: str
    run_id: str
    backend: str = ""
    workers: int = 1
    tasks_total: int = 0
    tasks_skipped: int = 0
    tasks_run: int = 0
    failures: list[tuple[str, str]] = field(default_factory=list)
    aborted: str = ""
    forms_new: int = 0
    forms_per_class: dict[tuple[int, str], int] = field(default_factory=dict)
    new_per_class: dict[tuple[int, str], int] = field(default_factory=dict)
    rejected: int = 0
    rechecks_run: int = 0
    recheck_new: int = 0
    weyl: list[str] = field(default_factory=list)
    scans_total: int = 0
    scans_skipped: int = 0
    scans_run: int = 0
    scan_regions: dict[str, int] = field(default_factory=dict)
    stage_seconds: dict[str, float] = field(default_factory=dict)
    seconds: float = 0.0
    task_seconds: float = 0.0
    commit_seconds: float = 0.0
    log_path: str = ""

    @property
    def ok(self) -> bool:
        return not self.failures and not self.aborted

    def as_text(self) -> str:
        total = sum(self.forms_per_class.values())
        lines = [
            f"run {self.run_id!r}: {self.tasks_run} tasks run, {self.tasks_skipped} already done, "
            f"{len(self.failures)} failed, in {self.seconds:.1f} s wall "
            f"({self.task_seconds:.1f} s in tasks on {self.workers} {self.backend} worker(s), "
            f"{self.commit_seconds:.1f} s writing the store)",
            f"{total} forms of this config in {self.output} ({self.forms_new} new this run, "
            f"{self.rejected} candidates rejected):",
            f"  {'level':>5}  {'class':<14} {'forms':>6} {'new':>5}",
        ]
        for (N, lab), n in sorted(self.forms_per_class.items()):
            lines.append(f"  {N:>5}  {lab:<14} {n:>6} {self.new_per_class.get((N, lab), 0):>5}")
        if self.rechecks_run:
            lines.append(f"windows searched again after Weyl's law flagged them: {self.rechecks_run} "
                         f"({self.recheck_new} new forms)")
        for w in self.weyl:
            lines.append("  " + w)
        if self.scans_total:
            names = {"transition": "in a transition zone", "omega": "on Omega", "intermediate": "in between"}
            where = ", ".join(f"{n} {names.get(r, r)}" for r, n in sorted(self.scan_regions.items()))
            lines.append(f"sup-norm scans: {self.scans_run} run, {self.scans_skipped} already done"
                         + (f"; global maximum {where}" if where else ""))
        if self.stage_seconds:
            lines.append("time per stage: " + ", ".join(f"{k} {v:.1f} s" for k, v in self.stage_seconds.items()))
        if self.failures:
            lines.append("failed tasks (rerun the same config to retry them):")
            for tid, err in self.failures:
                lines.append(f"  {tid}: {err}")
        if self.aborted:
            lines.append(f"run stopped early: {self.aborted}; rerun the same config to resume")
        if self.log_path:
            lines.append(f"log: {self.log_path}")
        return "\n".join(lines)


def run_record(cfg: Config) -> str:
    """The JSON text stored with the run: normalised config, fingerprint, original TOML."""
    norm = cfg.normalised()
    return json.dumps({
        "format": RUN_RECORD_FORMAT,
        "version": 1,
        "package_version": __version__,
        "fingerprint": fingerprint(norm),
        "normalised": norm,
        "toml": cfg.source_text,
        "source_path": str(cfg.source_path) if cfg.source_path else "",
    }, indent=1)


def read_run_record(text: str) -> dict[str, Any] | None:
    """Parse a run's config text written by :func:`run_record` (None for other texts)."""
    try:
        d = json.loads(text)
    except (ValueError, TypeError):
        return None
    if isinstance(d, dict) and d.get("format") == RUN_RECORD_FORMAT and isinstance(d.get("normalised"), dict):
        return d
    return None


def check_compatible(st, cfg: Config) -> None:
    """Raise InputError if a run in the store used different result-affecting settings."""
    new = cfg.normalised()
    for rid in st.runs():
        rec = read_run_record(st.run_info(rid)["config"])
        if rec is None:
            continue
        changes = fingerprint_changes(rec["normalised"], new)
        if changes:
            raise InputError(
                f"{st.path} holds results of run {rid!r} made with other settings: "
                + "; ".join(changes)
                + ". Mixing them would give a store of incompatible results; restore the old "
                "values or write to a new [job] output file")


def preflight(cfg: Config) -> Plan:
    """Everything that can fail before any file is written: config, plan, files, scheduler.

    See :mod:`maasscomp.pipeline.preflight` for the checks of the store and log paths and
    :func:`maasscomp.pipeline.executors.probe_dask_scheduler` for the scheduler address.
    """
    from maasscomp.pipeline.executors import probe_dask_scheduler
    from maasscomp.pipeline.preflight import check_log_path, check_store_path
    from maasscomp.store import Store

    check_store_path(cfg)
    check_log_path(cfg)
    plan = build_plan(cfg)
    out = cfg.job.output
    if out.exists():
        with Store.open(out, "r") as st:  # StoreError for a foreign or damaged file
            check_compatible(st, cfg)
    if cfg.executor.backend == "dask" and cfg.executor.address:
        probe_dask_scheduler(cfg.executor.address)
    return plan


def _task_order(plan: Plan) -> list:
    # expensive tasks first keeps the last wave of a parallel run short
    from maasscomp.groups import gamma0

    def cost(t) -> float:
        return (gamma0(t.level).index * t.chunk.hi) ** 2 * (t.chunk.hi - t.chunk.lo)

    return sorted(plan.tasks, key=lambda t: -cost(t))


class _LogHandler(logging.FileHandler):
    """A log file that never prints tracebacks of its own failures (a full disk would
    otherwise bury the one-line error of the run under them)."""

    def handleError(self, record: logging.LogRecord) -> None:
        pass


class _LogFile:
    """Attach a file handler for one run (and a stderr handler in verbose mode)."""

    def __init__(self, path: Path, verbose: bool) -> None:
        self.handlers: list[logging.Handler] = []
        try:
            fh = _LogHandler(path, encoding="utf-8")
        except OSError as exc:
            raise InputError(f"[job] log={str(path)!r}: cannot open the log file "
                             f"({exc.strerror or exc})") from None
        fh.setFormatter(logging.Formatter("%(asctime)s %(levelname)s %(message)s"))
        fh.setLevel(logging.DEBUG)
        self.handlers.append(fh)
        if verbose:
            sh = logging.StreamHandler(sys.stderr)
            sh.setFormatter(logging.Formatter("%(message)s"))
            sh.setLevel(logging.DEBUG)
            sh.addFilter(lambda rec: not getattr(rec, "file_only", False))
            self.handlers.append(sh)
        self._old_level = log.level
        log.setLevel(logging.DEBUG)
        for h in self.handlers:
            log.addHandler(h)

    def close(self) -> None:
        for h in self.handlers:
            log.removeHandler(h)
            h.close()
        log.setLevel(self._old_level)


def run_job(cfg: Config, *, quiet: bool = False, verbose: bool = False,
            show_progress: bool | None = None, executor=None,
            echo=None) -> JobSummary:
    """Run (or resume) a job.

    Parameters
    ----------
    cfg : Config
        A validated config (:func:`maasscomp.config.load`).
    quiet : bool
        No progress bar and no messages (the log file is still written).
    verbose : bool
        Also print every log line (task by task) on stderr.
    show_progress : bool, optional
        Progress bars on stderr (default: when not quiet and stderr is a terminal, so that a
        redirected log never receives the carriage returns of a bar).
    executor : optional
        An entered executor to use instead of the one named in the config (the caller
        starts and stops it, e.g. to share one cluster between jobs).
    echo : callable(str), optional
        Where messages go (default: print to stdout unless quiet).

    Returns
    -------
    JobSummary

    Raises
    ------
    InputError, StoreError
        Before any work: bad config, foreign store file, incompatible earlier run.
    """
    from tqdm import tqdm

    from maasscomp.store import Store

    if echo is None:
        echo = (lambda _m: None) if quiet else print
    if show_progress is None:
        show_progress = not quiet and sys.stderr.isatty()
    elif quiet:
        show_progress = False
    t0 = time.perf_counter()
    plan = preflight(cfg)
    run_id = cfg.job.name
    summary = JobSummary(output=str(cfg.job.output), run_id=run_id, tasks_total=len(plan.tasks),
                         log_path=str(cfg.job.log))

    own_executor = executor is None
    ex = make_executor(cfg.executor) if own_executor else executor
    entered = False
    logf = None
    st = None
    finished = False
    try:
        if own_executor:
            ex.__enter__()
            entered = True
        summary.backend, summary.workers = ex.name, ex.workers
        logf = _LogFile(cfg.job.log, verbose)
        st = Store.open(cfg.job.output, "a", create=True)
        check_compatible(st, cfg)  # again under the writer lock
        st.begin_run(run_id, config_text=run_record(cfg))
        done = _intact_done_tasks(st, run_id, echo)
        todo = [t for t in _task_order(plan) if t.task_id not in done]
        summary.tasks_skipped = len(plan.tasks) - len(todo)
        log.info("run %r of %s (maasscomp %s), fingerprint %s, store %s",
                 run_id, cfg.source_path or "<config>", __version__,
                 fingerprint(cfg.normalised()), cfg.job.output)
        log.info("plan: %s", plan.describe())
        log.info("%d tasks to run, %d already done; executor %s with %d worker(s)",
                 len(todo), summary.tasks_skipped, ex.name, ex.workers)
        echo(f"{cfg.job.name}: {len(plan.tasks)} tasks ({summary.tasks_skipped} already done), "
             f"{ex.name} executor with {ex.workers} worker(s) -> {cfg.job.output}")

        new_counts: Counter = Counter()
        ts = time.perf_counter()
        bar = tqdm(total=len(plan.tasks), initial=summary.tasks_skipped, desc="search",
                   unit="task", disable=not show_progress, file=sys.stderr, dynamic_ncols=True,
                   smoothing=0.1)
        try:
            for outcomes in ex.as_completed(execute_group, group_tasks(todo)):
                _commit(st, outcomes, cfg, run_id, summary, new_counts)
                bar.update(len(outcomes))
                bar.set_postfix(forms=summary.forms_new, failed=len(summary.failures), refresh=False)
        except (KeyboardInterrupt, InputError, StoreError):
            raise
        except Exception as exc:  # a worker died, the scheduler went away, ...
            summary.aborted = f"{type(exc).__name__}: {exc}"
            log.error("executor failure, stopping: %s", summary.aborted)
        finally:
            bar.close()
        summary.stage_seconds["search"] = time.perf_counter() - ts

        if cfg.search.recheck and not summary.aborted:
            ts = time.perf_counter()
            _recheck_stage(st, ex, cfg, plan, run_id, summary, show_progress, new_counts)
            summary.stage_seconds["recheck"] = time.perf_counter() - ts
        summary.weyl = _weyl_summary(st, cfg, plan, summary)

        if plan.scan and not summary.aborted:
            ts = time.perf_counter()
            _scan_stage(st, ex, cfg, plan, run_id, summary, show_progress)
            summary.stage_seconds["scan"] = time.perf_counter() - ts
        summary.new_per_class = dict(new_counts)
        summary.forms_per_class = _count_forms(st, cfg, plan)
        summary.seconds = time.perf_counter() - t0
        log.info("summary:\n%s", summary.as_text(), extra={"file_only": True})
        finished = True
        return summary
    except KeyboardInterrupt as exc:
        log.warning("%s; finished tasks are stored, rerun the same config to resume",
                    str(exc) or "interrupted")
        raise
    except StoreError as exc:
        log.error("stopped: %s", exc)
        raise
    finally:
        if st is not None:
            # an interrupted or failed run stops at once: no compaction on the way out
            st.close(compact=finished)
        if entered:
            ex.__exit__(None, None, None)
        if logf is not None:
            logf.close()


def _intact_done_tasks(st, run_id: str, echo) -> dict[str, list[str]]:
    """Finished tasks of the run whose forms are all intact.

    Every form is read and checked once (:meth:`maasscomp.store.Store.verify`); a task
    that produced a damaged form is run again, and the store replaces the damaged form
    by the recomputed one.
    """
    damaged = st.verify()
    if damaged:
        log.warning("%d damaged item(s) in %s: %s; the tasks that made them run again",
                    len(damaged), st.path, "; ".join(f"{k}: {v}" for k, v in damaged.items()))
        echo(f"warning: {len(damaged)} damaged item(s) in {st.path}; the tasks that made "
             "them run again")
    done = st.done_tasks(run_id)
    return {t: keys for t, keys in done.items() if not any(k in damaged for k in keys)}


def _store_outputs(st, outcomes: list[TaskOutcome], cfg: Config, run_id: str,
                   new_counts: Counter) -> dict[str, int]:
    """Store the forms of every successful outcome with its done mark, all in ONE
    transaction; return the number of new forms per task id."""
    good = [o for o in outcomes if o.ok]
    added: dict[str, int] = {}
    if not good:
        return added
    with st.transaction():
        for o in good:
            forms = o.output.forms
            stored: list[str] = []
            keys = st.add_forms(forms, on_duplicate="skip", config_text=cfg.source_text,
                                run_id=run_id, added=stored)
            st.mark_task_done(o.task_id, keys, run_id=run_id)
            fresh = set(stored)
            for f, k in zip(forms, keys):
                if k in fresh:
                    fresh.discard(k)
                    chi = getattr(f, "character", None)
                    lab = f.symmetry.label if chi is None or chi.is_trivial else f"{f.symmetry.label} {chi.label}"
                    new_counts[(f.level, lab)] += 1
            added[o.task_id] = len(stored)
    return added


def _log_outcome(o: TaskOutcome, n_new: int) -> None:
    if not o.ok:
        log.error("task %s failed after %.1f s on %s: %s\n%s", o.task_id, o.seconds, o.worker,
                  o.error, o.detail)
        return
    out = o.output
    log.info("task %s: %d forms (%d new), %d rejected candidates, %.2f s on %s",
             o.task_id, len(out.forms), n_new, len(out.rejected), o.seconds, o.worker)
    for R, reason in out.rejected:
        log.debug("  rejected candidate R=%.12f: %s", R, reason)


def _commit(st, outcomes: list[TaskOutcome], cfg: Config, run_id: str, summary: JobSummary,
            new_counts: Counter) -> None:
    """Store the forms of every finished task of a group with its done mark, in ONE
    transaction (a failed task gets no mark and is retried by the next run)."""
    t = time.perf_counter()
    added = _store_outputs(st, outcomes, cfg, run_id, new_counts)
    summary.commit_seconds += time.perf_counter() - t
    for o in outcomes:
        summary.tasks_run += 1
        summary.task_seconds += o.seconds
        if not o.ok:
            summary.failures.append((o.task_id, o.error))
        else:
            summary.forms_new += added[o.task_id]
            summary.rejected += len(o.output.rejected)
        _log_outcome(o, added.get(o.task_id, 0))


def _weyl_windows(st, cfg: Config, plan: Plan, summary: JobSummary):
    """(level, labels, window, completeness report) for every level of the plan searched in
    all its classes without failed tasks, where Weyl's law is available for the level."""
    from maasscomp.groups import gamma0
    from maasscomp.hejhal.types import SymmetryClass
    from maasscomp.spectrum.complete import FormSummary, weyl_report
    from maasscomp.spectrum.search import symmetry_classes

    failed = {int(tid.split(":")[1][2:]) for tid, _ in summary.failures if tid.startswith("search:")}
    out = []
    for N, labels in plan.classes.items():
        if set(labels) != {c.label for c in symmetry_classes(gamma0(N), ("even", "odd"))}:
            continue
        if N in failed:
            continue
        trivial = _trivial_label(N)
        for a, b in cfg.search.windows:
            keys = st.select(level=N, R_min=a, R_max=b, character=trivial)
            forms = [FormSummary(r["R"], SymmetryClass.from_label(r["symmetry"]), r["is_new"],
                                 r["multiplicity"], r["basis_index"])
                     for r in st.summary_rows(n_coeffs=0, keys=keys)]
            # no cusp form of these levels has R below 1 (Weyl's law gives W(1) < 0)
            rep = weyl_report(N, forms, a, b, count_below=0 if a <= 1.0 else None)
            if rep is None:
                # Weyl's law is not available for this level: nothing to compare with
                continue
            out.append((N, labels, (a, b), rep))
    return out


def _recheck_stage(st, ex, cfg: Config, plan: Plan, run_id: str, summary: JobSummary,
                   show_progress: bool, new_counts: Counter) -> None:
    """Search the windows that Weyl's law flags once more, with the settings of re-search
    round 1 (:func:`maasscomp.spectrum.complete.research_settings`: shifted lattice of
    expansion points, twice as many of them, lower sample heights). One round: a window
    still flagged afterwards is reported in the run summary."""
    from tqdm import tqdm

    from maasscomp.pipeline.tasks import RecheckTask, execute

    s = cfg.search
    done = st.done_tasks(run_id)
    tasks = []
    for N, labels, _, rep in _weyl_windows(st, cfg, plan, summary):
        for w in rep.flagged:
            t = RecheckTask(N, tuple(labels), w.T_lo, w.T_hi, s.eps, s.n_coeffs, s.step)
            log.info("level %d: window (%.4f, %.4f] flagged by Weyl's law (found %d, expected %.2f)%s",
                     N, w.T_lo, w.T_hi, w.found, w.expected,
                     "; searched again before" if t.task_id in done else
                     "; searching it again (re-search round 1: lattice shifted, twice the expansion "
                     "points, heights lowered by 0.06 Y0)")
            if t.task_id not in done:
                tasks.append(t)
    if not tasks:
        return
    bar = tqdm(total=len(tasks), desc="recheck", unit="window", disable=not show_progress,
               file=sys.stderr, dynamic_ncols=True)
    try:
        for o in ex.as_completed(execute, tasks):
            t = time.perf_counter()
            added = _store_outputs(st, [o], cfg, run_id, new_counts)
            summary.commit_seconds += time.perf_counter() - t
            summary.task_seconds += o.seconds
            summary.rechecks_run += 1
            if not o.ok:
                summary.failures.append((o.task_id, o.error))
            else:
                summary.forms_new += added[o.task_id]
                summary.recheck_new += added[o.task_id]
            _log_outcome(o, added.get(o.task_id, 0))
            bar.update(1)
    except (KeyboardInterrupt, InputError, StoreError):
        raise
    except Exception as exc:
        summary.aborted = f"{type(exc).__name__}: {exc}"
        log.error("executor failure in the recheck stage, stopping: %s", summary.aborted)
    finally:
        bar.close()


def _weyl_summary(st, cfg: Config, plan: Plan, summary: JobSummary) -> list[str]:
    lines = []
    for N, _, (a, b), rep in _weyl_windows(st, cfg, plan, summary):
        state = ("no window flagged" if not rep.flagged else "still flagged: " + ", ".join(
            f"({w.T_lo:.3f}, {w.T_hi:.3f}]" for w in rep.flagged))
        lines.append(f"level {N}, R in [{a:.10g}, {b:.10g}]: {rep.total_found} forms, "
                     f"{rep.total_expected:.2f} expected by Weyl's law; {state}")
        lines += _window_test_lines(rep)
        lines += ["  " + t for t in completeness_advice(N, a, b, rep.flagged, cfg.search.step)]
    for N, chi, (a, b), rep in _character_weyl_windows(st, cfg, plan, summary):
        state = ("no window flagged" if not rep.flagged else "flagged: " + ", ".join(
            f"({w.T_lo:.3f}, {w.T_hi:.3f}]" for w in rep.flagged) + " (not searched again)")
        lines.append(f"level {N}, character {chi}, R in [{a:.10g}, {b:.10g}]: {rep.total_found} forms, "
                     f"{rep.total_expected:.2f} expected by Weyl's law with the character; {state}")
    return lines


#: The run summary lists every window's tests up to this many windows per range (beyond it only
#: the flagged ones; the report lists all of them).
_SUMMARY_WINDOWS = 12


def _window_test_lines(rep) -> list[str]:
    """One line per window: Turing-style integral against its bound, the bounds on missing forms
    it gives, and the small-gap count against Poisson (docs/theory.md §8.4-8.5)."""
    ws = rep.windows if len(rep.windows) <= _SUMMARY_WINDOWS else rep.flagged
    out = []
    for w in ws:
        most = "" if w.missing_max is None else f", at most {w.missing_max}"
        out.append(f"  ({w.T_lo:.4f}, {w.T_hi:.4f}]: Turing integral {w.turing_integral:+.3f} "
                   f"(bound {w.turing_bound:.3f}): at least {w.missing_min} missing{most}; "
                   f"same-class gaps < {rep.gap_fraction:g} x mean spacing: {w.small_gaps} "
                   f"(Poisson {w.small_gaps_expected:.2f}, p = {w.spacing_p:.2g})"
                   + (f"; flagged: {', '.join(w.reasons)}" if w.flagged else ""))
    if len(rep.windows) > _SUMMARY_WINDOWS:
        out.append(f"  ({len(rep.windows)} windows; only flagged ones listed here, every one in "
                   "'maasscomp report')")
    return out


def _nice_up(x: float) -> float:
    """x rounded up to 1, 2 or 5 times a power of ten."""
    e = math.floor(math.log10(x))
    for m in (1.0, 2.0, 5.0, 10.0):
        if m * 10.0**e >= x * (1 - 1e-12):
            return m * 10.0**e
    return 10.0 ** (e + 1)


def completeness_advice(level: int, R_min: float, R_max: float, flagged, step: float | None) -> list[str]:
    """What to do about each window Weyl's law still flags after the recheck, one line each.

    A window at an end of the searched range is flagged most often because the Turing-style
    integral has no forms beyond the end to close its bound (docs/theory.md §8.4):
    the remedy is a wider window, by ``margin`` = max(1, 10 mean spacings) rounded up (finished
    tasks are kept, so the rerun costs only the new part). Inside the range a form is probably
    missing: the remedy is a finer lattice of expansion points ([search] step, half the mean
    spacing). ``flagged`` holds :class:`~maasscomp.spectrum.weyl.CompletenessWindow` objects.
    """
    out = []
    for w in flagged:
        width = max(w.T_hi - w.T_lo, 1e-9)
        density = max(w.expected / width, 1e-9)  # forms per unit of R near the window
        margin = _nice_up(max(1.0, 10.0 / density))
        where = f"level {level}: window ({w.T_lo:.3f}, {w.T_hi:.3f}] (found {w.found}, expected {w.expected:.2f})"
        if w.T_hi >= R_max - 1e-9 * max(1.0, R_max):
            out.append(f"{where} is flagged at the upper edge of the searched range: extend the window to "
                       f"R_max = {R_max + margin:g} (R_max + {margin:g}) and rerun the same config; "
                       "finished tasks are kept")
        elif w.T_lo <= R_min + 1e-9 * max(1.0, R_min) and R_min > margin:
            out.append(f"{where} is flagged at the lower edge of the searched range: extend the window to "
                       f"R_min = {R_min - margin:g} (R_min - {margin:g}) and rerun the same config; "
                       "finished tasks are kept")
        else:
            finer = min(0.5 / density, (step if step else 0.1) / 2)
            out.append(f"{where}: a form is probably missing there; search R in [{w.T_lo:.10g}, {w.T_hi:.10g}] "
                       f"again with a finer lattice, [search] step = {float(f'{finer:.2g}'):g}, in a config "
                       "with a new output store (a store keeps the step it was made with), or from Python "
                       f"with maasscomp.spectrum.complete_search(gamma0({level}), {w.T_lo:g}, {w.T_hi:g})")
    return out


def _character_weyl_windows(st, cfg: Config, plan: Plan, summary: JobSummary):
    """(level, character label, window, report) for every character searched in both
    parities without failed tasks where Weyl's law with a character is available (prime
    level, primitive character: maasscomp.spectrum.weyl_character)."""
    from maasscomp.groups import DirichletCharacter
    from maasscomp.spectrum.weyl import completeness

    failed = {tid for tid, _ in summary.failures if tid.startswith("search:")}
    out = []
    for (N, lab), labels in plan.char_classes.items():
        if set(labels) != {"even", "odd"}:
            continue
        if any(f":chi={lab}:" in tid or f"N={N}:" in tid and ":chi=" in tid for tid in failed):
            continue
        chi = DirichletCharacter.from_label(lab)
        for a, b in cfg.search.windows:
            keys = st.select(level=N, R_min=a, R_max=b, character=lab)
            R = [r["R"] for r in st.summary_rows(n_coeffs=0, keys=keys)]
            try:
                rep = completeness(N, R, a, b, count_below=0 if a <= 1.0 else None, character=chi)
            except InputError:
                break  # no Weyl's law with this character here
            out.append((N, lab, (a, b), rep))
    return out


def _plan_keys(st, cfg: Config, plan: Plan) -> list[str]:
    """Keys of the stored forms inside the plan's levels, classes and windows."""
    keys = []
    for N, labels in plan.classes.items():
        trivial = _trivial_label(N)
        for lab in labels:
            for a, b in cfg.search.windows:
                keys += st.select(level=N, symmetry=lab, R_min=a, R_max=b, character=trivial)
    return keys


def _trivial_label(N: int) -> str:
    """Label of the trivial character mod N (the store's character filter; forms with a
    nontrivial character are not compared with Weyl's law of the trivial character, nor
    scanned: the scanner evaluates real cusp expansions only)."""
    from maasscomp.groups import DirichletCharacter

    return DirichletCharacter.trivial(N).label


def _scan_stage(st, ex, cfg: Config, plan: Plan, run_id: str, summary: JobSummary,
                show_progress: bool) -> None:
    """Scan every form of the plan that has no scan yet; commit each scan with its mark."""
    from tqdm import tqdm

    from maasscomp.pipeline.tasks import ScanTask, execute
    from maasscomp.supnorm.scan import NORM_ATTACHMENT as norm_attachment
    from maasscomp.supnorm.scan import SCAN_ATTACHMENT as attachment

    keys = _plan_keys(st, cfg, plan)
    sc = cfg.scan

    def scanned(k: str) -> bool:
        # a scan made with other grid settings (e.g. by `maasscomp scan`) is redone
        if attachment not in st.attachments(k):
            return False
        try:
            old = st.get_attachment(k, attachment)
        except StoreError:  # a damaged scan is made again (and replaced)
            return False
        return (old.get("Y_omega") == sc.Y_omega and old.get("rtol") == sc.rtol
                and "regions" in old)

    todo = [k for k in keys if not scanned(k)]
    summary.scans_total = len(keys)
    summary.scans_skipped = len(keys) - len(todo)
    tasks = [ScanTask(k, st.get(k), sc.Y_omega, sc.rtol, sc.samples_per_wavelength) for k in todo]
    log.info("scan stage: %d forms, %d already scanned", len(keys), summary.scans_skipped)
    bar = tqdm(total=len(keys), initial=summary.scans_skipped, desc="scan", unit="form",
               disable=not show_progress, file=sys.stderr, dynamic_ncols=True, smoothing=0.1)
    regions: Counter = Counter()
    try:
        for o in ex.as_completed(execute, tasks):
            summary.scans_run += 1
            summary.task_seconds += o.seconds
            if not o.ok:
                summary.failures.append((o.task_id, o.error))
                log.error("task %s failed after %.1f s on %s: %s\n%s", o.task_id, o.seconds,
                          o.worker, o.error, o.detail)
            else:
                out = o.output
                t = time.perf_counter()
                with st.transaction():
                    st.put_attachment(out.form_key, norm_attachment, out.norm)
                    st.put_attachment(out.form_key, attachment, out.data)
                    st.mark_task_done(o.task_id, [out.form_key], run_id=run_id)
                summary.commit_seconds += time.perf_counter() - t
                regions[out.region.split()[0]] += 1
                log.info("task %s: global maximum %.6g in %s (transition/bulk %.4f), %.2f s on %s",
                         o.task_id, out.value, out.region, out.ratio, o.seconds, o.worker)
            bar.update(1)
    except (KeyboardInterrupt, InputError, StoreError):
        raise
    except Exception as exc:
        summary.aborted = f"{type(exc).__name__}: {exc}"
        log.error("executor failure in the scan stage, stopping: %s", summary.aborted)
    finally:
        bar.close()
    summary.scan_regions = dict(regions)


def _count_forms(st, cfg: Config, plan: Plan) -> dict[tuple[int, str], int]:
    counts = {}
    for N, labels in plan.classes.items():
        trivial = _trivial_label(N)
        for lab in labels:
            n = 0
            for a, b in cfg.search.windows:
                n += len(st.select(level=N, symmetry=lab, R_min=a, R_max=b, character=trivial))
            counts[(N, lab)] = n
    for (N, chi), labels in plan.char_classes.items():
        for lab in labels:
            n = 0
            for a, b in cfg.search.windows:
                n += len(st.select(level=N, symmetry=lab, R_min=a, R_max=b, character=chi))
            counts[(N, f"{lab} {chi}")] = n
    return counts
