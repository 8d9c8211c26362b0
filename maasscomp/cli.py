"""Command-line interface: ``maasscomp <command> ...`` (also ``python -m maasscomp``).

Start-up is kept short: this module imports only the standard library at start; each
command imports the stages it needs when it runs, so ``--help`` and ``keys`` never load
numpy, scipy or h5py (``tests/cli/test_cli_startup.py``, ``benchmarks/bench_cli_startup.py``).

Exit codes: 0 success; 1 the run finished but some tasks failed (rerun to retry them), a
listing or export skipped damaged forms, or writing a file failed (disk full, file size
limit; the store keeps every earlier commit); 2 user error (bad config, bad arguments,
missing, foreign or read-only files, an unreachable scheduler), printed as one line (or one
line per config problem) on stderr without a traceback; 130 interrupted (Ctrl-C); 143
terminated (SIGTERM).  After 130 or 143 the finished tasks are stored: rerun to resume.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Sequence

from maasscomp import __version__
from maasscomp.errors import InputError, StoreError, StoreWriteError


class Terminated(KeyboardInterrupt):
    """SIGTERM, turned into an interrupt so that a run stops as after Ctrl-C."""


def arg_int(minimum: int):
    """An argparse ``type`` accepting integers >= ``minimum`` with a clear message."""

    def parse_int(text: str) -> int:
        try:
            v = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not an integer") from None
        if v < minimum:
            raise argparse.ArgumentTypeError(f"{v} is not allowed; use an integer >= {minimum}")
        return v

    return parse_int


def arg_positive_float(text: str) -> float:
    """An argparse ``type`` accepting finite numbers > 0 with a clear message."""
    try:
        v = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if not (0 < v < float("inf")):
        raise argparse.ArgumentTypeError(f"{v:g} is not allowed; use a positive number")
    return v


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> None:  # usage errors: one line, exit code 2
        raise InputError(f"{self.prog}: {message}")


def _load_config(args: argparse.Namespace):
    from maasscomp.config import load

    cfg = load(args.config)
    if getattr(args, "backend", None) or getattr(args, "workers", None):
        cfg = cfg.with_executor(backend=args.backend, workers=args.workers)
    if getattr(args, "no_size_limits", False):
        cfg = cfg.without_size_limits()
    return cfg


def _cmd_run(args: argparse.Namespace) -> int:
    from maasscomp.pipeline.job import run_job

    if args.quiet and args.verbose:
        raise InputError("--quiet and --verbose exclude each other")
    cfg = _load_config(args)
    summary = run_job(cfg, quiet=args.quiet, verbose=args.verbose, show_progress=args.progress)
    if not args.quiet:
        print(summary.as_text())
    if not summary.ok:
        print(f"maasscomp: {len(summary.failures)} task(s) failed"
              + (f"; stopped early ({summary.aborted})" if summary.aborted else "")
              + f"; see {summary.log_path}; rerun the same config to retry", file=sys.stderr)
        return 1
    return 0


def _cmd_check(args: argparse.Namespace) -> int:
    from maasscomp.pipeline.job import preflight

    cfg = _load_config(args)
    plan = preflight(cfg)
    ex = cfg.executor
    where = (f"the Dask scheduler at {ex.address}" if ex.address else
             "this process" if ex.backend == "serial" else f"{ex.workers} {ex.backend} worker(s)")
    print(f"{cfg.source_path}: valid; output {cfg.job.output}; tasks run on {where}")
    print(plan.describe())
    return 0


def _warn_damaged(store: str, damaged: dict[str, str] | list[tuple[str, str]]) -> int:
    """Print the damaged forms (a few by name) on stderr; return the exit code (0 or 1)."""
    items = list(damaged.items()) if isinstance(damaged, dict) else list(damaged)
    if not items:
        return 0
    for key, why in items[:10]:
        print(f"maasscomp: warning: skipped {key}: {why}", file=sys.stderr)
    if len(items) > 10:
        print(f"maasscomp: warning: ... and {len(items) - 10} more", file=sys.stderr)
    print(f"maasscomp: {len(items)} damaged item(s) in {store} skipped; "
          f"`maasscomp salvage {store} NEW` copies every intact form into a new file",
          file=sys.stderr)
    return 1


def _fmt_real(x: float) -> str:
    t = f"{x:14.10f}"
    return t.replace("-0.0000000000", " 0.0000000000") if t.endswith("0.0000000000") else t


def _fmt_coeff(v) -> str:
    if v is None:
        return f" {'':>14}"
    if isinstance(v, complex):
        if v.imag == 0.0:  # a complex-stored coefficient that is real prints as a real
            return " " + _fmt_real(v.real)
        return f" {_fmt_real(v.real)}{v.imag:+.3e}i"
    return " " + _fmt_real(v)


def _parent_text(extra: dict) -> str:
    """The parent of an oldform from its labels (``old_parents`` or ``old_from_level``)."""
    ps = extra.get("old_parents") or []
    if ps:
        p = ps[0]
        more = f" and {len(ps) - 1} more" if len(ps) > 1 else ""
        return f"old from level {p['level']}, R {float(p['R']):.10f} ({p.get('parity', '')}){more}"
    if extra.get("old_from_level") is not None:
        return f"old from level {extra['old_from_level']} (same R)"
    return ""


def _no_match(store: str, st, args) -> str:
    """An honest one-line answer when a listing selects nothing."""
    if not len(st):
        return f"{store}: no forms"
    levels = st.levels()
    have = ", ".join(map(str, levels))
    if args.level is not None and args.level not in levels:
        return f"no forms at level {args.level}; {store} has level{'s' if len(levels) > 1 else ''} {have}"
    keys = st.select(level=args.level)
    if args.symmetry is not None:
        syms = sorted(set(st.listing(0, keys)["symmetry"]))
        if not _symmetry_keys(st, keys, args.symmetry):
            where = f" at level {args.level}" if args.level is not None else ""
            return (f"no forms of class {args.symmetry!r}{where}; {store} has class"
                    f"{'es' if len(syms) > 1 else ''} {', '.join(syms)}{where}")
        keys = _symmetry_keys(st, keys, args.symmetry)
    rows = st.listing(0, keys)
    lo, hi = min(rows["R"]), max(rows["R"])
    rng = (f"{args.R_min:g} <= R" if args.R_min is not None else "R") + (
        f" <= {args.R_max:g}" if args.R_max is not None else "")
    sel = " and ".join(x for x in (f"level {args.level}" if args.level is not None else "",
                                   f"class {args.symmetry!r}" if args.symmetry else "") if x)
    return (f"no forms with {rng}" + (f" among those of {sel}" if sel else "")
            + f"; their R lie in [{lo:.10g}, {hi:.10g}]")


def _symmetry_keys(st, keys: list[str], symmetry: str) -> list[str]:
    """Keys of class ``symmetry``: an exact class label, or a parity ("even", "odd")."""
    cols = st.listing(0, keys)
    if symmetry in ("even", "odd"):
        return [k for k, lab in zip(cols["key"], cols["symmetry"]) if lab.split("_")[0].split(",")[0] == symmetry]
    return [k for k, lab in zip(cols["key"], cols["symmetry"]) if lab == symmetry]


def _cmd_list(args: argparse.Namespace) -> int:
    from maasscomp.store import Store

    if args.R_min is not None and args.R_max is not None and args.R_min > args.R_max:
        raise InputError(f"--R-min {args.R_min:g} is larger than --R-max {args.R_max:g}; nothing can match")
    with Store.open(args.store, "r") as st:
        if args.verify:
            st.verify()
        filtered = any(v is not None for v in (args.level, args.R_min, args.R_max, args.symmetry))
        keys = None
        if filtered:
            keys = st.select(level=args.level, R_min=args.R_min, R_max=args.R_max)
            if args.symmetry is not None:
                keys = _symmetry_keys(st, keys, args.symmetry)
        cols = st.listing(n_coeffs=args.coeffs, keys=keys)
        # oldforms name their parent (read as plain records: no Form, no numerical stage)
        old = [cols["key"][j] for j, isn in enumerate(cols["is_new"]) if isn is False]
        texts = {fr.key: _parent_text(fr.extra) for fr in st.iter_records(old)}
        parents = {j: texts.get(k, "") for j, k in enumerate(cols["key"]) if k in texts}
        empty = _no_match(args.store, st, args) if not cols["key"] else ""
        damaged = st.damaged()
        unfinished = st.info()["unfinished_bytes"]
    if unfinished:
        print(f"maasscomp: note: {args.store} ends in {unfinished} bytes of an unfinished commit "
              "(a writer was stopped, or is writing now); it is not part of the store",
              file=sys.stderr)
    if not cols["key"]:
        print(empty)
        return _warn_damaged(args.store, damaged)
    K = args.coeffs
    head = (f"{'key':<40} {'N':>3} {'class':<12} {'char':<8} {'R':>20} {'R err':>8} "
            f"{'Hecke':>8} {'new':>5}")
    head += "".join(f" {'c(' + str(n) + ')':>14}" for n in range(1, K + 1))
    base = "%-40s %3d %-12s %-8s %20.14f %8.1e %8.1e %5s"
    new = {True: "yes", False: "old", None: "?"}
    isn = [new[v] for v in cols["is_new"]]
    c = cols["c"]
    # the usual line (K real coefficients) in one formatting call per line
    plain = [len(x) == K and not (x and isinstance(x[0], complex)) for x in c]
    if all(plain) and (K == 0 or c):
        cs = zip(*c) if K else ()
        out = [head, *map((base + " %14.10f" * K).__mod__,
                          zip(cols["key"], cols["level"], cols["symmetry"], cols["character"],
                              cols["R"], cols["R_error"], cols["hecke_residual"], isn, *cs))]
        if K:  # no negative zeros: a coefficient that rounds to zero prints unsigned
            out = [ln.replace(" -0.0000000000", "  0.0000000000") for ln in out]
    else:
        out = [head]
        for j in range(len(c)):
            line = base % (cols["key"][j], cols["level"][j], cols["symmetry"][j],
                           cols["character"][j], cols["R"][j], cols["R_error"][j],
                           cols["hecke_residual"][j], isn[j])
            line += "".join(_fmt_coeff(c[j][n] if n < len(c[j]) else None) for n in range(K))
            out.append(line)
    for j, text in parents.items():
        if text:
            out[j + 1] += f"  {text}"
    out.append(f"{len(cols['key'])} forms")
    sys.stdout.write("\n".join(out) + "\n")
    return _warn_damaged(args.store, damaged)


#: What ``export --out DIR`` writes (file or folder names inside DIR).
EXPORT_NAMES = {"json": "forms.json", "csv": "forms.csv", "coeffs_csv": "coefficients.csv",
                "scans_csv": "scans.csv", "checks_csv": "checks.csv", "text": "coefficients",
                "latex": "latex"}


def _cmd_export(args: argparse.Namespace) -> int:
    from maasscomp.report import export as E
    from maasscomp.store import Store, export_json

    wanted = {k: getattr(args, k) for k in EXPORT_NAMES}
    if args.out:
        out = Path(args.out)
        if out.exists() and not out.is_dir():
            raise InputError(f"--out {out} exists and is not a folder")
        if not out.parent.resolve().is_dir():
            raise InputError(f"cannot write {out}: directory {out.parent} does not exist")
        out.mkdir(exist_ok=True)
        for k, name in EXPORT_NAMES.items():
            wanted[k] = wanted[k] or str(out / name)
    if not any(wanted.values()):
        raise InputError("export needs --out DIR (everything) or at least one of --json, --csv, "
                         "--coeffs-csv, --scans-csv, --checks-csv, --text, --latex")
    Store.open(args.store, "r").close()  # clear error for a missing or foreign file
    for k in ("json", "csv", "coeffs_csv", "scans_csv", "checks_csv"):
        p = wanted[k]
        if p and not Path(p).parent.resolve().is_dir():
            raise InputError(f"cannot write {p}: directory {Path(p).parent} does not exist")
    for k in ("text", "latex"):
        p = wanted[k]
        if p and not Path(p).resolve().parent.is_dir():
            raise InputError(f"cannot write into {p}: directory {Path(p).parent} does not exist")
    bad: list[tuple[str, str]] = []
    if wanted["json"]:
        n = export_json(args.store, wanted["json"], damaged=bad)
        print(f"wrote {n} forms with every stored field to {wanted['json']}")
    if wanted["csv"]:
        print(E.export_forms_csv(args.store, wanted["csv"], n_coeffs=args.coeffs, damaged=bad).describe(""))
    if wanted["coeffs_csv"]:
        print(E.export_coeffs_csv(args.store, wanted["coeffs_csv"], damaged=bad).describe("coefficients"))
    if wanted["scans_csv"]:
        w = E.export_scans_csv(args.store, wanted["scans_csv"])
        print(w.describe("") + ("" if w.forms else " (no form of the store is scanned: `maasscomp scan STORE`)"))
    if wanted["checks_csv"]:
        print(E.export_checks_csv(args.store, wanted["checks_csv"], damaged=bad).describe(""))
    if wanted["text"]:
        w = E.export_coeff_texts(args.store, wanted["text"], damaged=bad)
        print(f"wrote {w.rows} coefficient tables of {w.forms} forms to {wanted['text']}"
              + (f" ({w.paths[0].name}, ...)" if w.paths else ""))
    if wanted["latex"]:
        w = E.export_latex(args.store, wanted["latex"], n_coeffs=min(args.coeffs, 8), damaged=bad)
        print(f"wrote LaTeX tables of {w.forms} forms to {', '.join(str(p) for p in w.paths)}")
    return _warn_damaged(args.store, list(dict(bad).items()))


def _cmd_salvage(args: argparse.Namespace) -> int:
    from maasscomp.store import salvage

    rep = salvage(args.store, args.new)
    print(f"{rep.target}: {rep.forms_copied} intact forms and {rep.attachments_copied} "
          f"attachments copied from {rep.source}")
    for key, why in rep.damaged:
        print(f"  left out {key}: {why}")
    for rid, tid in rep.tasks_dropped:
        print(f"  task {tid} of run {rid} is no longer marked done (its forms were left out); "
              "rerunning the config computes it again")
    if rep.damaged:
        print(f"{len(rep.damaged)} damaged item(s) left out")
    return 0


def _cmd_keys(args: argparse.Namespace) -> int:
    from maasscomp.config import keys_markdown

    sys.stdout.write(keys_markdown())
    return 0


def _default_out(store: str, suffix: str) -> Path:
    return Path(store).with_name(Path(store).stem + suffix)


def _cmd_report(args: argparse.Namespace) -> int:
    from maasscomp.report import make_report

    out = Path(args.out) if args.out else _default_out(args.store, "-report")
    rep = make_report(args.store, out)
    print(f"report written to {rep.folder} ({', '.join(rep.files)})")
    return 0


def _cmd_scan(args: argparse.Namespace) -> int:
    """Normalise and scan the selected forms of a store; results go into the store."""
    from maasscomp.report.peaks import FORM_COLUMNS, form_rows
    from maasscomp.report.tables import write_csv
    from maasscomp.supnorm.batch import scan_store
    from maasscomp.supnorm.scan import ScanSettings

    if args.table and not Path(args.table).parent.resolve().is_dir():
        raise InputError(f"cannot write {args.table}: directory {Path(args.table).parent} does not exist")
    settings = ScanSettings(Y_omega=args.Y_omega, rtol=args.rtol)

    def show(key, res, reused):
        if args.quiet:
            return
        print(f"{key:<34} R={res.R:<14.10g} transition {res.transition.value:8.4f}  Omega {res.omega.value:8.4f}  "
              f"bulk {res.bulk_value:8.4f}  max in {res.global_region:<16} "
              f"{'(stored)' if reused else f'{res.elapsed:6.1f} s'}", flush=True)

    skipped: list[tuple[str, str]] = []
    results = scan_store(args.store, keys=args.key or None, level=args.level, R_min=args.R_min, R_max=args.R_max,
                         settings=settings, overwrite=args.overwrite, progress=show, skipped=skipped)
    for key, msg in skipped:
        print(f"maasscomp: skipped {key}: {msg}", file=sys.stderr)
    if not results and not skipped:
        raise InputError(f"no forms in {args.store} match the selection")
    if args.table and results:
        write_csv(args.table, FORM_COLUMNS, form_rows(results))
    if not args.quiet:
        kinds = {k: sum(r.global_kind == k for r in results) for k in ("transition", "omega", "intermediate")}
        print(f"{len(results)} forms scanned; global maximum in a transition zone for {kinds['transition']}, on "
              f"Omega for {kinds['omega']}, in between for {kinds['intermediate']}; results stored in {args.store}"
              + (f"; table {args.table}" if args.table else ""))
    if skipped:
        print(f"maasscomp: {len(skipped)} form(s) could not be scanned (see above)", file=sys.stderr)
        return 1
    return 0


def _cmd_figures(args: argparse.Namespace) -> int:
    """Draw the sup-norm figures and tables of a store (or of selected forms) into a folder."""
    from maasscomp.report import write_peak_files

    out = Path(args.out) if args.out else _default_out(args.store, "-figures")
    paths = write_peak_files(args.store, out, keys=args.key or None, per_form=args.per_form)
    print(f"wrote {len(paths)} files to {out}")
    return 0


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(prog="maasscomp",
                description="Maass cusp forms on Gamma0(N): eigenvalues, coefficients, sup-norms.")
    p.add_argument("--version", action="version", version=f"maasscomp {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    r = sub.add_parser("run", help="run (or resume) a TOML job config and store the forms found")
    r.add_argument("config", help="path of the TOML job config")
    g = r.add_mutually_exclusive_group()
    g.add_argument("-q", "--quiet", action="store_true", help="print nothing but errors")
    g.add_argument("-v", "--verbose", action="store_true", help="print every task as it finishes")
    r.add_argument("--backend", choices=("serial", "joblib", "dask"),
                   help="override [executor] backend (does not change results)")
    r.add_argument("--workers", type=arg_int(1), help="override [executor] workers")
    r.add_argument("--no-size-limits", action="store_true",
                   help="run a job beyond the size limits (as [job] size_limits = false)")
    r.add_argument("--progress", action=argparse.BooleanOptionalAction, default=None,
                   help="progress bars on stderr (default: only when stderr is a terminal, never with -q)")
    r.set_defaults(func=_cmd_run)

    c = sub.add_parser("check", help="validate a job config and print its tasks without running")
    c.add_argument("config", help="path of the TOML job config")
    c.add_argument("--backend", choices=("serial", "joblib", "dask"), help="override [executor] backend")
    c.add_argument("--workers", type=arg_int(1), help="override [executor] workers")
    c.add_argument("--no-size-limits", action="store_true",
                   help="accept a job beyond the size limits (as [job] size_limits = false)")
    c.set_defaults(func=_cmd_check)

    ls = sub.add_parser("list", help="list the forms in a store file, sorted by level and R")
    ls.add_argument("store", help="HDF5 store file")
    ls.add_argument("--coeffs", type=arg_int(0), default=3,
                    help="number of coefficients c(n) to show (default 3)")
    ls.add_argument("--level", type=arg_int(1), help="only forms of this level")
    ls.add_argument("--R-min", dest="R_min", type=arg_positive_float, help="only forms with R >= this")
    ls.add_argument("--R-max", dest="R_max", type=arg_positive_float, help="only forms with R <= this")
    ls.add_argument("--symmetry", metavar="CLASS",
                    help="only forms of this class: a label such as even_2p_3m, or a parity (even, odd)")
    ls.add_argument("--verify", action="store_true",
                    help="read every form and check its checksum (without it the listing "
                         "reads and checks only the index, which holds what it prints)")
    ls.set_defaults(func=_cmd_list)

    ex = sub.add_parser("export", help="write a store's forms as JSON, CSV, text and LaTeX tables")
    ex.add_argument("store", help="HDF5 store file")
    ex.add_argument("--out", metavar="DIR", help="write everything into this folder: "
                    + ", ".join(EXPORT_NAMES.values()) + " (the options below choose single files)")
    ex.add_argument("--json", metavar="PATH", help="one JSON document with every stored field "
                    "(docs/export-schema.json)")
    ex.add_argument("--csv", metavar="PATH", help="one CSV row per form")
    ex.add_argument("--coeffs-csv", metavar="PATH", help="every coefficient, one CSV row each")
    ex.add_argument("--scans-csv", metavar="PATH", help="one CSV row per scanned form (where it peaks)")
    ex.add_argument("--checks-csv", metavar="PATH", help="the verification data of each form (CSV)")
    ex.add_argument("--text", metavar="DIR", help="a plain-text coefficient table per form and cusp")
    ex.add_argument("--latex", metavar="DIR", help="LaTeX tables (booktabs) of eigenvalues and coefficients")
    ex.add_argument("--coeffs", type=arg_int(0), default=10,
                    help="coefficients per row in --csv (default 10; LaTeX shows up to 8)")
    ex.set_defaults(func=_cmd_export)

    rp = sub.add_parser("report", help="turn a store into a report folder (tables, Weyl's law, figures)")
    rp.add_argument("store", help="HDF5 store file")
    rp.add_argument("--out", metavar="DIR", help="report folder (default: <store name>-report)")
    rp.set_defaults(func=_cmd_report)

    sv = sub.add_parser("salvage", help="verify a store and copy every intact form into a new file")
    sv.add_argument("store", help="HDF5 store file (only read; may be damaged or read-only)")
    sv.add_argument("new", help="the new store file to write (must not exist)")
    sv.set_defaults(func=_cmd_salvage)

    k = sub.add_parser("keys", help="print the documentation of every config key (Markdown)")
    k.set_defaults(func=_cmd_keys)

    s = sub.add_parser("scan", help="L2-normalise and scan stored forms for their maxima (transition zones, "
                                    "the fixed compact set, in between)")
    s.add_argument("store", help="HDF5 store file (results are written into it)")
    s.add_argument("--key", action="append", metavar="KEY", help="scan this form (repeatable; default: all)")
    s.add_argument("--level", type=arg_int(1), help="only forms of this level")
    s.add_argument("--R-min", dest="R_min", type=arg_positive_float, help="only forms with R >= this")
    s.add_argument("--R-max", dest="R_max", type=arg_positive_float, help="only forms with R <= this")
    s.add_argument("--Y-omega", dest="Y_omega", type=arg_positive_float, default=2.0,
                   help="height (>= 1, in each cusp's coordinate) below which points form the fixed compact "
                        "set Omega (default 2)")
    s.add_argument("--rtol", type=arg_positive_float, default=1e-3,
                   help="relative accuracy of each maximum guaranteed by the grid bound (default 1e-3)")
    s.add_argument("--overwrite", action="store_true", help="rescan forms that already carry a scan")
    s.add_argument("--out", "--table", dest="table", metavar="CSV",
                   help="also write the results table to this CSV file (results always go into the store)")
    s.add_argument("-q", "--quiet", action="store_true", help="print nothing but errors")
    s.set_defaults(func=_cmd_scan)

    f = sub.add_parser("figures", help="draw sup-norm figures and tables of scanned forms into a folder")
    f.add_argument("store", help="HDF5 store file with scanned forms")
    f.add_argument("--out", metavar="DIR", help="output folder (created if missing; default: <store name>-figures)")
    f.add_argument("--key", action="append", metavar="KEY",
                   help="only this form (repeatable); draws its map of |f| as well")
    f.add_argument("--per-form", action="store_true", help="draw a map of |f| for every selected form")
    f.set_defaults(func=_cmd_figures)
    return p


def _on_sigterm(signum, frame) -> None:
    import signal

    signal.signal(signal.SIGTERM, signal.SIG_DFL)  # a second SIGTERM ends the process at once
    raise Terminated("terminated (SIGTERM)")


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point; returns the exit code (2 for user errors)."""
    import signal

    parser = build_parser()
    try:
        old = signal.signal(signal.SIGTERM, _on_sigterm)
    except ValueError:  # not the main thread: leave signals alone
        old = None
    try:
        args = parser.parse_args(argv)
        if not getattr(args, "command", None):
            parser.print_help(sys.stderr)
            return 2
        return int(args.func(args) or 0)
    except StoreWriteError as exc:
        print(f"maasscomp: error: {exc}", file=sys.stderr)
        return 1
    except (InputError, StoreError) as exc:
        print(f"maasscomp: error: {exc}", file=sys.stderr)
        return 2
    except SystemExit as exc:  # --help and --version
        return int(exc.code or 0) if not isinstance(exc.code, str) else 2
    except BrokenPipeError:  # output piped into head & co.
        import os

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 1
    except Terminated:
        print("maasscomp: terminated (SIGTERM); finished tasks are stored, rerun to resume",
              file=sys.stderr)
        return 143
    except KeyboardInterrupt:
        print("maasscomp: interrupted; finished tasks are stored, rerun to resume", file=sys.stderr)
        return 130
    finally:
        if old is not None:
            signal.signal(signal.SIGTERM, old)


if __name__ == "__main__":
    sys.exit(main())
