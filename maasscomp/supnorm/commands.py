"""Command-line hooks of the supnorm stage: ``scan`` and ``figures``.

``maasscomp/cli.py`` calls :func:`add_commands` with its subparsers object. Each command
function returns an exit code; user errors raise InputError/StoreError, which the top-level
CLI prints as one line (exit code 2).
"""

from __future__ import annotations

import argparse
import sys

from maasscomp.config import arg_int, arg_positive_float
from maasscomp.errors import InputError


def cmd_scan(args: argparse.Namespace) -> int:
    """Normalise and scan the selected forms of a store; results go into the store."""
    from maasscomp.supnorm.batch import scan_store
    from maasscomp.supnorm.scan import ScanSettings
    from maasscomp.supnorm.stats import table_rows, write_csv

    settings = ScanSettings(Y_c=args.Y_cusp, rtol=args.rtol)

    def show(key, res, reused):
        if args.quiet:
            return
        cp = res.cusp_peak
        print(f"{key:<34} R={res.R:<14.10g} cusp {cp.value:9.5f}  compact {res.compact_peak.value:9.5f}  "
              f"max in {res.global_region:<8} {'(stored)' if reused else f'{res.elapsed:6.1f} s'}", flush=True)

    skipped: list[tuple[str, str]] = []
    results = scan_store(args.store, keys=args.key or None, level=args.level, R_min=args.R_min, R_max=args.R_max,
                         settings=settings, overwrite=args.overwrite, progress=show, skipped=skipped)
    for key, msg in skipped:
        print(f"maasscomp: skipped {key}: {msg}", file=sys.stderr)
    if not results and not skipped:
        raise InputError(f"no forms in {args.store} match the selection")
    if args.table and results:
        write_csv(table_rows(results), args.table)
    if not args.quiet:
        n_cusp = sum(r.global_region != "compact" for r in results)
        print(f"{len(results)} forms scanned; global maximum in a cusp for {n_cusp}; results stored in {args.store}"
              + (f"; table {args.table}" if args.table else ""))
    if skipped:
        print(f"maasscomp: {len(skipped)} form(s) could not be scanned (see above)", file=sys.stderr)
        return 1
    return 0


def cmd_figures(args: argparse.Namespace) -> int:
    """Draw the sup-norm figures and tables of a store (or of selected forms) into a folder."""
    from maasscomp.supnorm.figures import make_figures

    paths = make_figures(args.store, args.out, keys=args.key or None, per_form=args.per_form)
    print(f"wrote {len(paths)} files to {args.out}", file=sys.stdout)
    return 0


def add_commands(subparsers) -> None:
    """Register ``scan`` and ``figures`` on the top-level CLI's subparsers."""
    s = subparsers.add_parser("scan", help="L2-normalise and scan stored forms for their maxima (cusp vs compact)")
    s.add_argument("store", help="HDF5 store file (results are written into it)")
    s.add_argument("--key", action="append", metavar="KEY", help="scan this form (repeatable; default: all)")
    s.add_argument("--level", type=arg_int(1), help="only forms of this level")
    s.add_argument("--R-min", dest="R_min", type=arg_positive_float, help="only forms with R >= this")
    s.add_argument("--R-max", dest="R_max", type=arg_positive_float, help="only forms with R <= this")
    s.add_argument("--Y-cusp", dest="Y_cusp", type=arg_positive_float, default=1.0,
                   help="height (>= 1, in each cusp's coordinate) where the cusp regions start (default 1)")
    s.add_argument("--rtol", type=arg_positive_float, default=1e-3,
                   help="relative accuracy of each maximum guaranteed by the grid bound (default 1e-3)")
    s.add_argument("--overwrite", action="store_true", help="rescan forms that already carry a scan")
    s.add_argument("--table", metavar="CSV", help="also write the results table to this CSV file")
    s.add_argument("-q", "--quiet", action="store_true", help="print nothing but errors")
    s.set_defaults(func=cmd_scan)

    f = subparsers.add_parser("figures", help="draw sup-norm figures and tables of scanned forms into a folder")
    f.add_argument("store", help="HDF5 store file with scanned forms")
    f.add_argument("out", help="output folder (created if missing)")
    f.add_argument("--key", action="append", metavar="KEY",
                   help="only this form (repeatable); draws its map of |f| as well")
    f.add_argument("--per-form", action="store_true", help="draw a map of |f| for every selected form")
    f.set_defaults(func=cmd_figures)
