"""Command-line interface: ``maasscomp <command> ...`` (also ``python -m maasscomp``).

User errors (bad config, bad arguments, missing or foreign files) print one line on
stderr and exit with code 2; no traceback.
"""

from __future__ import annotations

import argparse
import math
import sys
from pathlib import Path
from typing import Sequence

from maasscomp import __version__
from maasscomp.errors import InputError, MaasscompError, StoreError


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> None:  # argparse exits 2 on usage errors already
        raise InputError(message)


def _cmd_run(args: argparse.Namespace) -> int:
    from maasscomp.config import load
    from maasscomp.pipeline.job import run_job

    cfg = load(args.config)
    say = (lambda _m: None) if args.quiet else print
    summary = run_job(cfg, say=say, show_progress=not args.quiet)
    total = sum(summary.forms_per_class.values())
    if not args.quiet:
        print(f"{total} forms stored in {summary.output} ({summary.rejected} candidates rejected, "
              f"{summary.seconds:.1f} s)")
    return 0


def _cmd_list(args: argparse.Namespace) -> int:
    from maasscomp.store import Store

    with Store.open(args.store, "r") as st:
        rows = st.summary_rows(n_coeffs=args.coeffs)
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
            line += f" {'':>14}" if c is None else f" {c.real if isinstance(c, complex) else c:>14.10f}"
        print(line)
    print(f"{len(rows)} forms")
    return 0


def _cmd_export(args: argparse.Namespace) -> int:
    from maasscomp.store import Store, export_csv, export_json

    if not (args.json or args.csv):
        raise InputError("export needs at least one of --json PATH or --csv PATH")
    Store.open(args.store, "r").close()  # clear error for a missing or foreign file
    if args.json:
        n = export_json(args.store, args.json)
        print(f"wrote {n} forms to {args.json}")
    if args.csv:
        n = export_csv(args.store, args.csv, n_coeffs=args.coeffs, coeffs_path=args.coeffs_csv)
        print(f"wrote {n} forms to {args.csv}")
    return 0


def _cmd_keys(args: argparse.Namespace) -> int:
    from maasscomp.config import KEYS

    print("| section | key | type | default | meaning |")
    print("|---|---|---|---|---|")
    for sec, key, typ, default, meaning in KEYS:
        d = "required" if default is None and "absent" not in typ else repr(default)
        print(f"| [{sec}] | `{key}` | {typ} | {d} | {meaning} |")
    return 0


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(prog="maasscomp", description="Maass cusp forms on Gamma0(N): eigenvalues, coefficients, sup-norms.")
    p.add_argument("--version", action="version", version=f"maasscomp {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    r = sub.add_parser("run", help="run a TOML job config and store the forms found")
    r.add_argument("config", help="path of the TOML job config")
    r.add_argument("-q", "--quiet", action="store_true", help="print nothing but errors")
    r.set_defaults(func=_cmd_run)

    ls = sub.add_parser("list", help="list the forms in a store file")
    ls.add_argument("store", help="HDF5 store file")
    ls.add_argument("--coeffs", type=int, default=3, help="number of coefficients c(n) to show (default 3)")
    ls.set_defaults(func=_cmd_list)

    ex = sub.add_parser("export", help="export a store file to JSON and/or CSV")
    ex.add_argument("store", help="HDF5 store file")
    ex.add_argument("--json", metavar="PATH", help="write one JSON document with every field")
    ex.add_argument("--csv", metavar="PATH", help="write one CSV row per form")
    ex.add_argument("--coeffs-csv", metavar="PATH", help="also write all coefficients in long CSV format")
    ex.add_argument("--coeffs", type=int, default=10, help="coefficients per row in --csv (default 10)")
    ex.set_defaults(func=_cmd_export)

    k = sub.add_parser("keys", help="print the table of config keys")
    k.set_defaults(func=_cmd_keys)

    for modname in ("maasscomp.supnorm.commands", "maasscomp.pipeline.commands"):
        try:
            mod = __import__(modname, fromlist=["add_commands"])
        except ModuleNotFoundError as exc:
            if exc.name != modname:
                raise
            continue
        mod.add_commands(sub)
    return p


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point; returns the exit code (2 for user errors)."""
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
        if not getattr(args, "command", None):
            parser.print_help()
            return 2
        for name in ("coeffs",):
            v = getattr(args, name, None)
            if v is not None and v < 0:
                raise InputError(f"--{name}={v} is not allowed; use an integer >= 0")
        return int(args.func(args) or 0)
    except (InputError, StoreError) as exc:
        print(f"maasscomp: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("maasscomp: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
