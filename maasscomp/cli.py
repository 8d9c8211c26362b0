"""Command-line interface: ``maasscomp <command> ...`` (also ``python -m maasscomp``).

Exit codes: 0 success; 1 the run finished but some tasks failed (rerun to retry them);
2 user error (bad config, bad arguments, missing or foreign files), printed as one line
(or one line per config problem) on stderr without a traceback; 130 interrupted.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Sequence

from maasscomp import __version__
from maasscomp.config import arg_int, arg_positive_float
from maasscomp.errors import InputError, StoreError


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> None:  # usage errors: one line, exit code 2
        raise InputError(f"{self.prog}: {message}")


def _load_config(args: argparse.Namespace):
    from maasscomp.config import load

    cfg = load(args.config)
    if getattr(args, "backend", None) or getattr(args, "workers", None):
        cfg = cfg.with_executor(backend=args.backend, workers=args.workers)
    return cfg


def _cmd_run(args: argparse.Namespace) -> int:
    from maasscomp.pipeline.job import run_job

    if args.quiet and args.verbose:
        raise InputError("--quiet and --verbose exclude each other")
    cfg = _load_config(args)
    summary = run_job(cfg, quiet=args.quiet, verbose=args.verbose)
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


def _cmd_list(args: argparse.Namespace) -> int:
    from maasscomp.store import Store

    with Store.open(args.store, "r") as st:
        keys = st.select(level=args.level) if args.level is not None else None
        rows = st.summary_rows(n_coeffs=args.coeffs, keys=keys)
    if not rows:
        print(f"{args.store}: no forms")
        return 0
    head = f"{'key':<34} {'N':>3} {'class':<12} {'R':>20} {'R err':>8} {'Hecke':>8} {'new':>5}"
    head += "".join(f" {'c(' + str(n) + ')':>14}" for n in range(1, args.coeffs + 1))
    print(head)
    for r in rows:
        new = {True: "yes", False: "old", None: "?"}[r["is_new"]]
        line = (f"{r['key']:<34} {r['level']:>3} {r['symmetry']:<12} {r['R']:>20.14f} "
                f"{r['R_error']:>8.1e} {r['hecke_residual']:>8.1e} {new:>5}")
        for n in range(1, args.coeffs + 1):
            c = r.get(f"c{n}")
            if c is None:
                line += f" {'':>14}"
            elif isinstance(c, complex):
                line += f" {c.real:>+14.10f}{c.imag:+.3e}i"
            else:
                line += f" {c:>14.10f}"
        print(line)
    print(f"{len(rows)} forms")
    return 0


def _cmd_export(args: argparse.Namespace) -> int:
    from maasscomp.store import Store, export_csv, export_json

    if not (args.json or args.csv):
        raise InputError("export needs at least one of --json PATH or --csv PATH")
    Store.open(args.store, "r").close()  # clear error for a missing or foreign file
    for p in (args.json, args.csv, args.coeffs_csv):
        if p and not Path(p).parent.resolve().is_dir():
            raise InputError(f"cannot write {p}: directory {Path(p).parent} does not exist")
    if args.json:
        n = export_json(args.store, args.json)
        print(f"wrote {n} forms to {args.json}")
    if args.csv:
        n = export_csv(args.store, args.csv, n_coeffs=args.coeffs, coeffs_path=args.coeffs_csv)
        print(f"wrote {n} forms to {args.csv}")
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
    r.set_defaults(func=_cmd_run)

    c = sub.add_parser("check", help="validate a job config and print its tasks without running")
    c.add_argument("config", help="path of the TOML job config")
    c.add_argument("--backend", choices=("serial", "joblib", "dask"), help="override [executor] backend")
    c.add_argument("--workers", type=arg_int(1), help="override [executor] workers")
    c.set_defaults(func=_cmd_check)

    ls = sub.add_parser("list", help="list the forms in a store file")
    ls.add_argument("store", help="HDF5 store file")
    ls.add_argument("--coeffs", type=arg_int(0), default=3,
                    help="number of coefficients c(n) to show (default 3)")
    ls.add_argument("--level", type=arg_int(1), help="only forms of this level")
    ls.set_defaults(func=_cmd_list)

    ex = sub.add_parser("export", help="export a store file to JSON and/or CSV")
    ex.add_argument("store", help="HDF5 store file")
    ex.add_argument("--json", metavar="PATH", help="write one JSON document with every field")
    ex.add_argument("--csv", metavar="PATH", help="write one CSV row per form")
    ex.add_argument("--coeffs-csv", metavar="PATH", help="also write all coefficients in long CSV format")
    ex.add_argument("--coeffs", type=arg_int(0), default=10,
                    help="coefficients per row in --csv (default 10)")
    ex.set_defaults(func=_cmd_export)

    rp = sub.add_parser("report", help="turn a store into a report folder (tables, Weyl's law, figures)")
    rp.add_argument("store", help="HDF5 store file")
    rp.add_argument("--out", metavar="DIR", help="report folder (default: <store name>-report)")
    rp.set_defaults(func=_cmd_report)

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
    s.add_argument("--table", metavar="CSV", help="also write the results table to this CSV file")
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


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point; returns the exit code (2 for user errors)."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
        if not getattr(args, "command", None):
            parser.print_help(sys.stderr)
            return 2
        return int(args.func(args) or 0)
    except (InputError, StoreError) as exc:
        print(f"maasscomp: error: {exc}", file=sys.stderr)
        return 2
    except SystemExit as exc:  # --help and --version
        return int(exc.code or 0) if not isinstance(exc.code, str) else 2
    except BrokenPipeError:  # output piped into head & co.
        import os

        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 1
    except KeyboardInterrupt:
        print("maasscomp: interrupted; finished tasks are stored, rerun to resume", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
