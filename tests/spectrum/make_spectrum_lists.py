"""Compute complete eigenvalue lists on fine grids for the completeness tests.

PROJECT COMPUTATION (not an outside source).  Every list is the union of two independent
searches of the same window with different grids and different pairs of sample heights
("runs"), each with the present search code:

:func:`maasscomp.spectrum.search.search_forms` (every symmetry class: Atkin--Lehner
classes at squarefree levels, parity classes of the multi-cusp system elsewhere; local
linear pencils at a lattice of expansion points, Newton roots at two sample heights with
equal null spaces, multiplicities, Hecke relations).  The runs of one list differ in the
lattice offset and the sample heights.

A form found by only one run is reported on the terminal and marked in the file
(``found_by``), so that a disagreement is visible rather than silently merged.  The
windows are searched in chunks, each written to ``<workdir>/<tag>/<lo>_<hi>.json`` as
soon as it is finished, so an interrupted run resumes where it stopped.

Usage::

    # one run (repeat with another tag, step and heights for the second run)
    python tests/spectrum/make_spectrum_lists.py run --level 1 --lo 998 --hi 1002 \
        --step 1e-4 --y1 0.92 --y2 0.80 --chunk 0.1 --tag A --workdir /tmp/lists
    # merge runs into a CSV under data/reference/
    python tests/spectrum/make_spectrum_lists.py merge --level 1 --lo 998 --hi 1002 \
        --tags A,B --workdir /tmp/lists --out data/reference/psl2z_R1000_window.csv

The settings of every run are recorded in the file header together with the commit.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
SCRIPT = "tests/spectrum/make_spectrum_lists.py"
SAME_R = 1e-7  # two finds of one eigenvalue by different runs agree to about R_error


def _commit() -> str:
    try:
        out = subprocess.run(["git", "-C", str(ROOT), "rev-parse", "--short=12", "HEAD"],
                             capture_output=True, text=True, check=True).stdout.strip()
        dirty = subprocess.run(["git", "-C", str(ROOT), "status", "--porcelain", "--", "maasscomp"],
                               capture_output=True, text=True).stdout.strip()
        return out + ("+modified" if dirty else "")
    except Exception:  # pragma: no cover - outside a git checkout
        return "unknown"


SEARCH_CODE = ("maasscomp/special", "maasscomp/groups", "maasscomp/hejhal", "maasscomp/spectrum/search.py",
               "maasscomp/spectrum/pencil.py", "maasscomp/spectrum/confirm.py", "maasscomp/spectrum/eigenspace.py",
               "maasscomp/spectrum/hecke.py", "maasscomp/spectrum/classify.py", "maasscomp/spectrum/form.py")


def _search_code_unchanged(commit: str) -> str:
    """'yes' if the search code of ``commit`` equals the working tree now, else 'no'."""
    c = commit.split("+")[0]
    try:
        r = subprocess.run(["git", "-C", str(ROOT), "diff", "--quiet", c, "--", *SEARCH_CODE])
        return "yes" if r.returncode == 0 else "no"
    except Exception:  # pragma: no cover
        return "unknown"


def _form_row(f) -> dict:
    ce = np.asarray(f.coeff_errors)
    return {
        "R": float(f.R),
        "label": f.symmetry.label,
        "parity": f.symmetry.parity,
        "R_error": float(f.R_error),
        "hecke_residual": float(f.hecke_residual),
        # largest difference of c(2..8) at infinity between the two final solve heights
        "coeff_diff": float(np.max(np.abs(ce[0, 1:8]))) if ce.shape[1] > 1 else float("nan"),
        "is_new": f.is_new,
        "old_from_level": f.extra.get("old_from_level"),
        "multiplicity": int(f.multiplicity),
        "basis_index": int(f.basis_index),
    }


def run(args: argparse.Namespace) -> int:
    from maasscomp.groups import gamma0
    from maasscomp.spectrum.search import SearchSettings, search_forms

    g = gamma0(args.level)
    settings = SearchSettings(Y1_frac=args.y1, Y2_frac=args.y2, offset=args.offset,
                              steps_per_spacing=args.steps_per_spacing, lfunction_check=False)
    wd = Path(args.workdir) / f"N{args.level}" / args.tag
    wd.mkdir(parents=True, exist_ok=True)
    meta = {"level": args.level, "offset": args.offset, "steps_per_spacing": args.steps_per_spacing,
            "y1": args.y1, "y2": args.y2, "chunk": args.chunk, "commit": _commit(),
            "method": "search_forms"}
    meta["lo"], meta["hi"] = args.lo, args.hi
    # one settings file per run (range), so runs of one tag over different ranges coexist
    (wd / f"settings_{args.lo:.6f}_{args.hi:.6f}.json").write_text(json.dumps(meta))
    n = max(1, int(round((args.hi - args.lo) / args.chunk)))
    edges = np.linspace(args.lo, args.hi, n + 1)
    for a, b in zip(edges[:-1], edges[1:]):
        out = wd / f"{a:.6f}_{b:.6f}.json"
        if out.exists():
            continue
        t0, c0 = time.perf_counter(), time.process_time()
        res = search_forms(g, float(a), float(b), settings=settings)
        # the window is closed at both ends: a form on a chunk edge belongs to the chunk above
        forms = [f for f in res.forms if f.R > a or a == edges[0]]
        rejected = len(res.rejected)
        rec = {"lo": float(a), "hi": float(b), "forms": [_form_row(f) for f in forms],
               "rejected": rejected, "wall": time.perf_counter() - t0,
               "cpu": time.process_time() - c0, "settings": meta}
        tmp = out.with_suffix(".tmp")
        tmp.write_text(json.dumps(rec))
        os.replace(tmp, out)
        print(f"[{args.tag}] N={args.level} ({a:.4f}, {b:.4f}]: {len(forms)} forms, "
              f"{rejected} rejected, {rec['wall']:.0f} s wall, {rec['cpu']:.0f} s cpu", flush=True)
    return 0


def _settings_for(wd: Path, a: float, b: float) -> dict:
    """Settings of the run that wrote chunk (a, b]: the smallest run range containing it."""
    best = None
    for p in wd.glob("settings_*.json"):
        m = json.loads(p.read_text())
        if m["lo"] - 1e-9 <= a and b <= m["hi"] + 1e-9:
            if best is None or m["hi"] - m["lo"] < best["hi"] - best["lo"]:
                best = m
    if best is None:
        raise SystemExit(f"no settings file in {wd} covers the chunk ({a}, {b}]")
    return best


def _load(wd: Path, lo: float, hi: float) -> tuple[list[dict], list[dict], float, float]:
    rows, wall, cpu = [], 0.0, 0.0
    covered = []
    used: list[dict] = []
    for p in sorted(wd.glob("*.json")):
        if p.name.startswith("settings"):
            continue
        rec = json.loads(p.read_text())
        if rec["hi"] <= lo + 1e-9 or rec["lo"] >= hi - 1e-9:
            continue
        covered.append((rec["lo"], rec["hi"]))
        wall += rec["wall"]
        cpu += rec["cpu"]
        rows += [r for r in rec["forms"] if lo <= r["R"] <= hi]
        m = rec.get("settings") or _settings_for(wd, rec["lo"], rec["hi"])
        key = {k: m.get(k) for k in ("step", "offset", "steps_per_spacing", "y1", "y2", "chunk", "commit", "method")}
        if key not in used:
            used.append(key)
    covered.sort()
    pos = lo
    for a, b in covered:
        if a > pos + 1e-9:
            break
        pos = max(pos, b)
    if pos < hi - 1e-9:
        raise SystemExit(f"run {wd.name} does not cover [{lo}, {hi}] (covered up to {pos})")
    return used, rows, wall, cpu


def _dedup(rows: list[dict]) -> list[dict]:
    """One row per (class, basis index, eigenvalue): chunk ends are searched twice."""
    rows = sorted(rows, key=lambda r: (r["label"], r["basis_index"], r["R"]))
    out: list[dict] = []
    for r in rows:
        if out and (out[-1]["label"], out[-1]["basis_index"]) == (r["label"], r["basis_index"]) \
                and abs(out[-1]["R"] - r["R"]) <= SAME_R * max(1.0, r["R"]):
            if r["R_error"] < out[-1]["R_error"]:
                out[-1] = r
            continue
        out.append(r)
    return out


def merge(args: argparse.Namespace) -> int:
    from maasscomp.spectrum.weyl import expected_in_window

    tags = args.tags.split(",")
    runs = {}
    for t in tags:
        runs[t] = _load(Path(args.workdir) / f"N{args.level}" / t, args.lo, args.hi)
    per_run = {t: _dedup(rows) for t, (_, rows, _, _) in runs.items()}
    pool = sorted([dict(r, run=t) for t, rs in per_run.items() for r in rs],
                  key=lambda r: (r["label"], r["basis_index"], r["R"]))
    merged: list[dict] = []
    for r in pool:
        m = merged[-1] if merged else None
        if m and (m["label"], m["basis_index"]) == (r["label"], r["basis_index"]) \
                and abs(m["R"] - r["R"]) <= SAME_R * max(1.0, r["R"]):
            m["found_by"] = "".join(sorted(set(m["found_by"] + r["run"])))
            m["run_diff"] = max(m.get("run_diff", 0.0), abs(m["R"] - r["R"]))
            if r["R_error"] < m["R_error"]:
                keep = {k: m[k] for k in ("found_by", "run_diff")}
                m.update(r)
                m.update(keep)
            continue
        merged.append(dict(r, found_by=r["run"], run_diff=0.0))
    merged.sort(key=lambda r: (r["R"], r["label"], r["basis_index"]))
    lonely = [r for r in merged if len(set(r["found_by"])) < len(tags)]
    for r in lonely:
        print(f"found by {r['found_by']} only: R = {r['R']:.9f} {r['label']} "
              f"hecke {r['hecke_residual']:.1e} coeff_diff {r['coeff_diff']:.1e}")
    n_all = sum(1 for _ in merged)
    exp = float(expected_in_window(args.level, args.lo, args.hi))
    same_class = {}
    for r in merged:
        same_class.setdefault(r["label"], []).append(r["R"])
    min_gaps = sorted((float(np.min(np.diff(sorted(v)))), k) for k, v in same_class.items() if len(v) > 1)
    header = [
        f"# PROJECT COMPUTATION (not an outside source): every Maass cusp form on Gamma0({args.level}) "
        f"with {args.lo:g} <= R <= {args.hi:g}, all symmetry classes,",
        f"# computed here with maasscomp ({meta_method(runs)}), script {SCRIPT}, as the union of "
        f"{len(tags)} independent runs:",
    ]
    for t, (metas, rows, wall, cpu) in runs.items():
        desc = "; ".join((f"grid step {m['step']:g}, " if m.get("step") is not None else
                          f"expansion points {m['steps_per_spacing']:g} per mean spacing, lattice offset {m['offset']:g}, ")
                         + f"heights Y1 = {m['y1']} Y0 and Y2 = {m['y2']} Y0, "
                         f"chunks of {m['chunk']:g}, commit {m['commit']}" for m in metas)
        header.append(f"#   run {t}: {desc}; {len(per_run[t])} forms, {cpu / 3600:.2f} CPU h")
    header += [
        "# '+modified' marks uncommitted changes in the worktree at run time; the search code ("
        + ", ".join(SEARCH_CODE) + ") of every run's commit equals that of "
        + _commit().split("+")[0] + ": "
        + ", ".join(f"run {t} " + "/".join(_search_code_unchanged(m["commit"]) for m in v[0])
                    for t, v in runs.items()) + ".",
        "# Every form passed the search's confirmation: Newton roots of the Hejhal system at two heights "
        "with equal null spaces, agreement of the",
        "# coefficients solved at two heights (coeff_diff: largest |c(2..8)| difference at the final "
        "heights) and the Hecke relations",
        "# (hecke_residual).  found_by: the runs that found the form (a form found by one run only is "
        "listed; inspect it).",
        f"# Forms: {n_all}; Weyl's law (maasscomp.spectrum.weyl, docs/theory.md §2) expects "
        f"{exp:.2f} in this window; found only by one run: {len(lonely)}.",
        "# Smallest same-class gaps: " + ", ".join(f"{k} {v:.2e}" for v, k in min_gaps[:4]) + ".",
        "R,label,parity,R_error,hecke_residual,coeff_diff,is_new,old_from_level,multiplicity,"
        "basis_index,found_by,run_diff",
    ]
    out = Path(args.out)
    tmp = out.with_suffix(".tmp")
    with open(tmp, "w") as fh:
        fh.write("\n".join(header) + "\n")
        for r in merged:
            isn = "" if r["is_new"] is None else ("1" if r["is_new"] else "0")
            old = "" if r["old_from_level"] is None else str(r["old_from_level"])
            fh.write(f"{r['R']:.10f},{r['label']},{r['parity']},{r['R_error']:.1e},"
                     f"{r['hecke_residual']:.1e},{r['coeff_diff']:.1e},{isn},{old},"
                     f"{r['multiplicity']},{r['basis_index']},{r['found_by']},{r['run_diff']:.1e}\n")
    os.replace(tmp, out)
    print(f"wrote {out}: {n_all} forms, Weyl expects {exp:.2f}; {len(lonely)} found by one run only")
    return 0


def meta_method(runs: dict) -> str:
    m = {meta["method"] for metas, _, _, _ in runs.values() for meta in metas}
    names = {"search_classes": "maasscomp.spectrum.search.search_classes",
             "search_window_general": "maasscomp.spectrum.general.search_window_general",
             "search_forms": "maasscomp.spectrum.search.search_forms"}
    return ", ".join(names[x] for x in sorted(m))


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    sub = ap.add_subparsers(dest="cmd", required=True)
    r = sub.add_parser("run")
    r.add_argument("--level", type=int, required=True)
    r.add_argument("--lo", type=float, required=True)
    r.add_argument("--hi", type=float, required=True)
    r.add_argument("--offset", type=float, default=0.0,
                   help="shift of the lattice of expansion points, in point spacings (differs per run)")
    r.add_argument("--steps-per-spacing", type=float, default=1.0)
    r.add_argument("--y1", type=float, default=0.92)
    r.add_argument("--y2", type=float, default=0.80)
    r.add_argument("--chunk", type=float, default=0.1)
    r.add_argument("--tag", required=True)
    r.add_argument("--workdir", required=True)
    m = sub.add_parser("merge")
    m.add_argument("--level", type=int, required=True)
    m.add_argument("--lo", type=float, required=True)
    m.add_argument("--hi", type=float, required=True)
    m.add_argument("--tags", required=True)
    m.add_argument("--workdir", required=True)
    m.add_argument("--out", required=True)
    a = ap.parse_args(argv)
    return run(a) if a.cmd == "run" else merge(a)


if __name__ == "__main__":
    sys.exit(main())
