"""Turn a store into a report folder.

Contents (file names fixed, so scripts can rely on them):

``README.md``
    What the store holds and what the runs did (config, package version, tasks,
    time stamps), the summary table, the Weyl's-law table, links to every figure.
``summary.csv``, ``summary.md``
    One row per level and symmetry class: forms, new/old/unclassified, R range,
    largest R error and Hecke residual.
``weyl.csv``, ``weyl_N<level>.png``
    For every level whose searched R range covers all symmetry classes: forms found
    against Weyl's law (:func:`maasscomp.spectrum.weyl.completeness`) window by window,
    and a figure of N(T) and W(T) with the remainder N(T) - W(T).
``peaks.csv``, ``regions.csv``, ``shares.csv``, ``fits.csv``, ``beats.csv``, ``peaks.md``, the figures of :data:`PEAK_FIGURES` and ``form_<key>.png`` maps
    The peak study of the sup-norm scans (where the maximum lies, predictions, fits, the
    fraction of forms whose transition peak beats the bulk), when the store holds scans; the
    same files as ``maasscomp figures`` writes (:func:`write_peak_files`).
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Sequence

import numpy as np

from maasscomp import __version__
from maasscomp.errors import InputError
from maasscomp.report.tables import Column, markdown_table, write_csv, write_markdown

SUMMARY_COLUMNS = (Column("level"), Column("class"), Column("forms"), Column("new"), Column("old"),
                   Column("unclassified"), Column("R_min", digits=12), Column("R_max", digits=12),
                   Column("max_R_error", digits=2), Column("max_hecke_residual", digits=2))
WEYL_COLUMNS = (Column("level"), Column("T_lo"), Column("T_hi"), Column("found"), Column("expected", fixed=2),
                Column("deficit", fixed=2), Column("remainder_end", fixed=3), Column("drop_score", fixed=3),
                Column("turing_integral", fixed=4), Column("turing_bound", fixed=4), Column("missing_min"),
                Column("missing_max"), Column("n_gaps"), Column("small_gaps"),
                Column("small_gaps_expected", fixed=3), Column("spacing_p"), Column("flagged"),
                Column("reasons"), Column("research"))


@dataclass
class Report:
    folder: Path
    files: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)


def _merge(intervals: list[tuple[float, float]], gap: float = 1e-9) -> list[tuple[float, float]]:
    out: list[list[float]] = []
    for a, b in sorted(intervals):
        if out and a <= out[-1][1] + gap:
            out[-1][1] = max(out[-1][1], b)
        else:
            out.append([a, b])
    return [(a, b) for a, b in out]


def _intersect(x: list[tuple[float, float]], y: list[tuple[float, float]]) -> list[tuple[float, float]]:
    out = []
    for a, b in x:
        for c, d in y:
            lo, hi = max(a, c), min(b, d)
            if hi > lo:
                out.append((lo, hi))
    return _merge(out)


def searched_coverage(st) -> dict[int, dict[str, list[tuple[float, float]]]]:
    """R intervals searched per level and class label, from the finished tasks of every run."""
    from maasscomp.pipeline.tasks import parse_task_id

    cov: dict[int, dict[str, list]] = defaultdict(lambda: defaultdict(list))
    for rid in st.runs():
        for tid in st.done_tasks(rid):
            p = parse_task_id(tid)
            if p is not None:
                cov[p["level"]][p["label"]].append((p["lo"], p["hi"]))
    return {N: {lab: _merge(iv) for lab, iv in d.items()} for N, d in cov.items()}


def all_class_labels(level: int) -> list[str]:
    """Every symmetry class of a level (both parities; Atkin-Lehner signs if squarefree)."""
    from maasscomp.groups import gamma0
    from maasscomp.spectrum.search import symmetry_classes

    return [s.label for s in symmetry_classes(gamma0(level), ("even", "odd"))]


def summary_rows(st) -> list[dict[str, Any]]:
    """One row per (level, class) of the stored forms."""
    groups: dict[tuple[int, str], list[dict]] = defaultdict(list)
    for r in st.summary_rows(n_coeffs=0):
        groups[(r["level"], r["symmetry"])].append(r)
    rows = []
    for (N, lab), rs in sorted(groups.items()):
        R = [r["R"] for r in rs]
        rows.append({
            "level": N, "class": lab, "forms": len(rs),
            "new": sum(r["is_new"] is True for r in rs),
            "old": sum(r["is_new"] is False for r in rs),
            "unclassified": sum(r["is_new"] is None for r in rs),
            "R_min": min(R), "R_max": max(R),
            "max_R_error": max(r["R_error"] for r in rs),
            "max_hecke_residual": max(r["hecke_residual"] for r in rs),
        })
    return rows


def _weyl_figure(level: int, R: np.ndarray, T_lo: float, T_hi: float, path: Path) -> None:
    from matplotlib.figure import Figure

    from maasscomp.spectrum.weyl import weyl_count

    T = np.linspace(T_lo, T_hi, 800)
    T = np.union1d(T, R)
    W = np.asarray(weyl_count(level, T), dtype=float)
    base = 0.0 if T_lo <= 1.0 else float(weyl_count(level, T_lo))
    N = base + np.searchsorted(np.sort(R), T, side="right")
    fig = Figure(figsize=(7.5, 5.2), layout="constrained")
    ax1, ax2 = fig.subplots(2, 1, sharex=True, height_ratios=(2, 1))
    ax1.step(T, N, where="post", color="C0", label="N(T): forms found (+ W(T_min))")
    ax1.plot(T, W, color="C1", label="W(T): Weyl's law with lower-order terms")
    ax1.set_ylabel("count")
    ax1.set_title(f"Gamma0({level}): eigenvalues found against Weyl's law")
    ax1.legend(loc="upper left", fontsize=8)
    ax2.step(T, N - W, where="post", color="C2")
    ax2.axhline(0.0, color="0.5", lw=0.8)
    ax2.set_xlabel("T (spectral parameter R)")
    ax2.set_ylabel("N(T) - W(T)")
    fig.savefig(path, dpi=110)


def _weyl_section(st, folder: Path, rep: Report, cov) -> tuple[list[dict], list[str]]:
    """Completeness of every level whose searched range covers all its symmetry classes.

    Per window: the count against Weyl's law, the Turing-style integral with its bound and the
    bounds on missing forms it gives, and the small-gap test against the Poisson expectation
    (:func:`maasscomp.spectrum.weyl.completeness`; docs/theory.md §8.4-8.6).
    """
    from maasscomp.groups import DirichletCharacter
    from maasscomp.hejhal.types import SymmetryClass
    from maasscomp.spectrum.complete import FormSummary
    from maasscomp.spectrum.weyl import LIMITATIONS, completeness

    rows: list[dict] = []
    text: list[str] = []
    table: list[str] = []
    levels = sorted(set(cov) | set(st.levels()))
    for N in levels:
        labels = all_class_labels(N)
        per_class = cov.get(N, {})
        missing = [lab for lab in labels if lab not in per_class]
        if missing:
            text.append(f"- level {N}: skipped; Weyl's law counts all symmetry classes and the runs "
                        f"in this store did not search {', '.join(missing)}.")
            continue
        full = per_class[labels[0]]
        for lab in labels[1:]:
            full = _intersect(full, per_class[lab])
        if not full:
            text.append(f"- level {N}: skipped; no R range was searched in every symmetry class.")
            continue
        # Weyl's law of the trivial character: forms with a character are counted elsewhere
        keys = st.select(level=N, character=DirichletCharacter.trivial(N).label)
        forms_N = [FormSummary(r["R"], SymmetryClass.from_label(r["symmetry"]), r["is_new"],
                               r["multiplicity"], r["basis_index"])
                   for r in st.summary_rows(n_coeffs=0, keys=keys)]
        for T_lo, T_hi in full:
            sel = [f for f in forms_N if T_lo <= f.R <= T_hi]
            R = np.array(sorted(f.R for f in sel))
            # no cusp form of these levels has R below 1 (as in the run summary)
            c = completeness(N, sel, T_lo, T_hi, count_below=0 if T_lo <= 1.0 else None)
            for w in c.windows:
                rows.append({"level": N, **w.as_row()})
                mm = "" if w.missing_max is None else f"{w.missing_max}"
                table.append(f"| {N} | {w.T_lo:.4f} | {w.T_hi:.4f} | {w.found} | {w.expected:.2f} | "
                             f"{w.turing_integral:+.3f} | {w.turing_bound:.3f} | {w.missing_min} | {mm or '–'} | "
                             f"{w.small_gaps} | {w.small_gaps_expected:.2f} | {w.spacing_p:.3g} | "
                             f"{'yes: ' + ', '.join(w.reasons) if w.flagged else 'no'} |")
            name = f"weyl_N{N}.png" if len(full) == 1 else f"weyl_N{N}_{T_lo:.10g}-{T_hi:.10g}.png"
            _weyl_figure(N, R, T_lo, T_hi, folder / name)
            rep.files.append(name)
            flag = ("windows flagged as probably incomplete: "
                    + ", ".join(f"({w.T_lo:.3f}, {w.T_hi:.3f}]" for w in c.flagged)
                    + "; search again: " + ", ".join(f"[{a:.4f}, {b:.4f}]" for a, b in c.research_intervals())
                    if c.flagged else "no window flagged")
            text.append(f"- level {N}, R in [{T_lo:.10g}, {T_hi:.10g}]: {c.total_found} forms found, "
                        f"{c.total_expected:.2f} expected; remainder mean {c.mean_remainder:+.3f}, "
                        f"rms {c.rms_remainder:.3f}; {flag}. Figure: [{name}]({name})")
    if table:
        text += ["", "Per window: the count against Weyl's law W; the Turing-style integral of N - W over "
                 "the window against its bound B, with the bounds it gives on forms missing below the "
                 "window's top (min) and, when the list is complete beyond it, at most (max); same-class "
                 "gaps below 0.1 mean spacing against the Poisson expectation, with its p-value.", "",
                 "| level | T_lo | T_hi | found | W | ∫(N − W) | B | missing ≥ | missing ≤ | small gaps | "
                 "expected | p | flagged |",
                 "|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---|", *table, "",
                 "```text", LIMITATIONS.rstrip(), "```"]
    return rows, text


#: Figures of the peak study, in the order they appear in the report.
PEAK_FIGURES = ("peaks_vs_lambda.png", "region_share.png", "transition_vs_bulk.png", "sym2.png",
                "value_distribution.png", "equidistribution.png", "peak_heights.png")
#: R values at which the fraction "transition peak beats the bulk" is modelled.
EXTRAP_R = (10.0, 20.0, 50.0, 100.0, 200.0, 500.0, 1000.0, 2000.0, 5000.0, 1e4, 3e4, 1e5, 1e6)


def _load_results(st, keys: Sequence[str] | None):
    """(keys, results, notes) of the scanned forms among ``keys`` (default: all)."""
    from maasscomp.supnorm.batch import select_keys
    from maasscomp.supnorm.scan import SCAN_ATTACHMENT, ScanResult

    ks = select_keys(st, keys) if keys else st.keys()
    scanned = [k for k in ks if SCAN_ATTACHMENT in st.attachments(k)]
    if keys:
        missing = [k for k in ks if k not in scanned]
        if missing:
            raise InputError(f"form {missing[0]!r} has not been scanned yet; run 'maasscomp scan "
                             f"{st.path} --key {missing[0]}' first")
    out_k, out_r, notes = [], [], []
    for k in scanned:
        try:
            out_r.append(ScanResult.from_dict(st.get_attachment(k, SCAN_ATTACHMENT)))
            out_k.append(k)
        except InputError as exc:
            notes.append(f"{k}: {exc}")
    return out_k, out_r, notes


def write_peak_files(store_path: str | Path, out_dir: str | Path, *, keys: Sequence[str] | None = None,
                     per_form: bool = False, maps: int = 3) -> list[Path]:
    """Tables and figures of the scanned forms of a store, written into ``out_dir``.

    Writes ``peaks.csv`` (one row per form), ``regions.csv`` (one row per form and region),
    ``shares.csv``, ``fits.csv``, ``beats.csv``, ``peaks.md`` (every table with its legend, the
    figures) and the figures :data:`PEAK_FIGURES`, plus a map ``form_<key>.png`` of |f| for the
    ``maps`` forms with the largest global peaks, for every form given in ``keys`` and, with
    ``per_form``, for every form. Returns the written paths (tables first).

    Raises
    ------
    StoreError
        Missing store or unknown key.
    InputError
        The output folder cannot be created, or no selected form has been scanned yet.
    """
    from maasscomp.report import figures as F
    from maasscomp.store import Store

    with Store.open(store_path, "r") as st:
        out = _prepare_folder(out_dir)
        scanned, results, notes = _load_results(st, keys)
        if not results:
            raise InputError(f"no scanned forms in {store_path}; run 'maasscomp scan {store_path}' first"
                             + (f" ({notes[0]})" if notes else ""))
        study = peak_study(results)
        figs = [F.plot_peaks_vs_lambda(results, out / PEAK_FIGURES[0]),
                F.plot_region_share(results, out / PEAK_FIGURES[1]),
                F.plot_transition_vs_bulk(results, study["extrapolation"], out / PEAK_FIGURES[2]),
                F.plot_sym2(results, out / PEAK_FIGURES[3]),
                F.plot_value_distribution(results, out / PEAK_FIGURES[4]),
                F.plot_equidistribution(results, out / PEAK_FIGURES[5]),
                F.plot_peak_heights(results, out / PEAK_FIGURES[6])]
        order = sorted(range(len(results)), key=lambda i: -results[i].global_value)
        chosen = list(range(len(results))) if (keys or per_form) else order[:maps]
        map_names = []
        for i in chosen:
            name = f"form_{_safe(scanned[i])}.png"
            figs.append(F.plot_form_map(st.get(scanned[i]), results[i], out / name))
            map_names.append(name)
    from maasscomp.report import peaks as P

    tables = [write_csv(out / "peaks.csv", P.FORM_COLUMNS, P.form_rows(results)),
              write_csv(out / "regions.csv", P.REGION_COLUMNS, P.region_rows(results)),
              write_csv(out / "shares.csv", [Column("by")] + P.SHARE_COLUMNS,
                        [dict(r, by="band") for r in study["share_band"]]
                        + [dict(r, by="level") for r in study["share_level"]]),
              write_csv(out / "fits.csv", P.FIT_COLUMNS, P.fit_rows(study["fits"])),
              write_csv(out / "beats.csv", P.BEATS_COLUMNS, study["beats"])]
    text = "\n".join(["# Where do the forms peak?", "", *peak_summary(results, study, map_names, notes,
                                                                           detail=True)])
    tables.append(write_markdown(out / "peaks.md", text + "\n"))
    return tables + figs


def peak_study(results) -> dict:
    """Every statistic of the peak study (see :mod:`maasscomp.report.peaks`)."""
    from maasscomp.report import peaks as P

    return {"share_band": P.region_share(results, "band"), "share_level": P.region_share(results, "level"),
            "fits": P.peak_fits(results), "beats": P.transition_beats_bulk(results),
            "extrapolation": P.extrapolate_beats_bulk(results, EXTRAP_R), "sym2": P.sym2_summary(results),
            "equi": P.equidistribution(results)}


def peak_summary(results, study: dict, map_names: Sequence[str], notes: Sequence[str] = (),
                 detail: bool = False) -> list[str]:
    """Markdown lines of the peak study: what was measured, the tables, the figures."""
    from maasscomp.report import peaks as P

    n = len(results)
    Yo = sorted({r.Y_omega for r in results})
    levels = sorted({r.level for r in results})
    kinds = {k: sum(r.global_kind == k for r in results) for k in P.KINDS}
    marked = sum(r.overlap for r in results)
    lines = [
        f"{n} forms scanned (levels {', '.join(map(str, levels))}, R from {min(r.R for r in results):.4g} to "
        f"{max(r.R for r in results):.5g}). Values are max |f|/‖f‖ with ‖f‖² = ∫ |f|² dμ over Γ0(N)\\H.",
        "",
        "Regions, for each cusp in its own period-1 coordinate (docs/theory.md §11.1): the **fixed "
        f"compact set Ω** = points whose highest representative has height ≤ Y_Ω = {', '.join(f'{y:g}' for y in Yo)}; "
        "the **transition zone** of cusp j = heights ≥ Y_T = (R − c_T R^(1/3)) / (2π n0), c_T = |a_1| 2^(−1/3) = "
        "1.8558 (a_1 the first zero of Ai, DLMF Table 9.9.1; n0 the first non-zero frequency), where the first "
        "non-zero Fourier term dominates; the **intermediate region** in between. Where Y_T < Y_Ω (small R) Ω "
        f"keeps its points and the transition zone starts at Y_Ω; such forms are marked ({marked} here).",
        "",
        f"Global maximum: in a transition zone for {kinds['transition']}, on Ω for {kinds['omega']}, in an "
        f"intermediate region for {kinds['intermediate']} forms.",
        "",
        "### Share of global maxima by region, per band of R",
        "",
        _md(P.SHARE_COLUMNS, study["share_band"], legend=detail),
        "### Per level",
        "",
        _md(P.SHARE_COLUMNS, study["share_level"]),
        "### Transition peak against the bulk",
        "",
        "Bulk = everything but the transition zones (Ω and the intermediate regions). Per band, the forms whose "
        "transition peak is above their bulk peak, with the Wilson 95% interval:",
        "",
        _md(P.BEATS_COLUMNS, study["beats"], legend=detail),
    ]
    ex = study["extrapolation"]
    if ex is not None:
        lines += [
            f"Model (level 1, {ex.forms} forms): the transition peak is the first-term prediction "
            "2 max|A_1| √((1 + e^(−2πR)) / L) with L drawn from the measured L(1, sym² f), the bulk peak is the "
            f"fitted trend {ex.alpha:.3f} + {ex.beta:.3f} √(log λ) plus a measured residual; 95% intervals from "
            "400 bootstrap resamples of the forms. **Rows marked 'extrapolated' lie beyond the data: they assume "
            "that the distribution of L(1, sym² f) and the bulk trend stay as measured.**",
            "",
            _md(P.EXTRAP_COLUMNS, P.extrapolation_rows(ex), legend=detail),
        ]
    else:
        lines += ["(Too few level-1 forms with L(1, sym² f) for the model of this fraction.)", ""]
    lines += ["### Peaks against λ", "",
              "log(peak) = a + b log λ by least squares over the forms without a cut transition zone, with the 95% "
              "interval of b:", "", _md(P.FIT_COLUMNS, P.fit_rows(study["fits"]), legend=detail)]
    s2 = study["sym2"]
    if s2["forms"]:
        lines += ["### L(1, sym² f)", "",
                  f"From the norm by Rankin–Selberg for {s2['forms']} newforms: median {s2['median']:.4g}, "
                  f"5%–95% range {s2['q05']:.4g}–{s2['q95']:.4g}, min {s2['min']:.4g}, max {s2['max']:.4g}. "
                  + (f"Checked against the value from the coefficients (approximate functional equation) for "
                     f"{s2['checked']} forms: largest relative difference {s2['max_rel_diff']:.1e}."
                     if s2["checked"] else "No form stores enough coefficients for the value from the coefficients."),
                  ""]
    lines += ["### Mass of Ω (equidistribution)", "",
              "vol × (mean of |f|²/‖f‖² over Ω); quantum unique ergodicity predicts 1 as λ → ∞ (a limit "
              "statement: no finite-λ bound is claimed). Spread over the forms of each band:", "",
              _md(P.EQUI_COLUMNS, study["equi"], legend=detail)]
    lines += ["### Figures", ""]
    captions = {
        "peaks_vs_lambda.png": "Peak of each region against λ, with the first-term and random-wave predictions.",
        "region_share.png": "Where the global maximum lies, per band of R and per level.",
        "transition_vs_bulk.png": "Fraction of forms whose transition peak beats the bulk, with the model.",
        "sym2.png": "L(1, sym² f) and the transition peak against 1/√L(1, sym² f).",
        "value_distribution.png": "Values on Ω against the Gaussian of the random wave model.",
        "equidistribution.png": "Mass of Ω per unit area.",
        "peak_heights.png": "Heights of the maxima relative to Y_T; Y_T/n is the transition of the n-th term.",
    }
    for name in PEAK_FIGURES:
        lines += [f"**{captions[name]}**", "", f"![{name}]({name})", ""]
    if map_names:
        lines += ["Maps of |f|/‖f‖ over the fundamental domain (regions shaded, peaks marked) for the forms with "
                  "the largest peaks:", ""]
        lines += [f"![{m}]({m})" for m in map_names] + [""]
    if detail:
        lines += ["### Columns of peaks.csv", ""]
        lines += [f"* `{c.name}`: {c.meaning}" for c in P.FORM_COLUMNS] + [""]
        lines += ["Per region in [regions.csv](regions.csv); the tables above in shares.csv, beats.csv, "
                  "fits.csv.", ""]
    if notes:
        lines += ["Scans that could not be read: " + "; ".join(notes), ""]
    return lines


def _md(columns, rows, legend: bool = False) -> str:
    return markdown_table(columns, rows, legend=legend) if rows else "(none)\n"


def _safe(key: str) -> str:
    return "".join(ch if ch.isalnum() or ch in "._-" else "_" for ch in key)


def _prepare_folder(out_dir: str | Path) -> Path:
    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise InputError(f"output folder {out} exists and is not a folder")
    if not out.parent.resolve().is_dir():
        raise InputError(f"cannot create {out}: folder {out.parent} does not exist")
    out.mkdir(exist_ok=True)
    return out


def _peaks_section(st, folder: Path, rep: Report) -> list[str]:
    """Peak statistics of the sup-norm scans stored beside the forms."""
    from maasscomp.supnorm.scan import SCAN_ATTACHMENT

    if not any(SCAN_ATTACHMENT in st.attachments(k) for k in st.keys()):
        return ["No sup-norm scan statistics: the store holds no scans (set `[scan] enabled = "
                "true` in the config and rerun it, or run `maasscomp scan`)."]
    _, results, notes = _load_results(st, None)
    if not results:
        return ["No sup-norm scan statistics: every stored scan was made by an older scanner ("
                + notes[0] + ")."]
    made = write_peak_files(st.path, folder)
    rep.files += [p.name for p in made]
    maps = [p.name for p in made if p.name.startswith("form_")]
    return ["Every table below with its column legend, and the per-form table, in [peaks.md](peaks.md) "
            "and [peaks.csv](peaks.csv).", "", *peak_summary(results, peak_study(results), maps, notes)]


def make_report(store_path: str | Path, out_dir: str | Path) -> Report:
    """Write the report folder of a store (see the module docstring).

    Raises
    ------
    StoreError
        Missing file or not a maasscomp store (nothing is created then).
    InputError
        ``out_dir`` exists and is not a folder.
    """
    from maasscomp.pipeline.job import read_run_record
    from maasscomp.store import Store

    store_path = Path(store_path)
    folder = Path(out_dir)
    with Store.open(store_path, "r") as st:
        if folder.exists() and not folder.is_dir():
            raise InputError(f"report folder {folder} exists and is not a folder")
        if not folder.parent.exists():
            raise InputError(f"cannot create report folder {folder}: {folder.parent} does not exist")
        folder.mkdir(exist_ok=True)
        rep = Report(folder=folder)

        srows = summary_rows(st)
        write_csv(folder / "summary.csv", SUMMARY_COLUMNS, srows)
        smd = markdown_table(SUMMARY_COLUMNS, srows) if srows else "(no forms)\n"
        write_markdown(folder / "summary.md", smd)
        rep.files += ["summary.csv", "summary.md"]

        cov = searched_coverage(st)
        wrows, wtext = _weyl_section(st, folder, rep, cov)
        write_csv(folder / "weyl.csv", WEYL_COLUMNS, wrows)
        rep.files.append("weyl.csv")

        runs_text = []
        for rid in st.runs():
            info = st.run_info(rid)
            rec = read_run_record(info["config"])
            done = st.done_tasks(rid)
            n_forms = len({k for ks in done.values() for k in ks})
            runs_text.append(f"### Run `{rid}`\n")
            runs_text.append(f"- started {info['created_utc']} with maasscomp {info['package_version']}")
            runs_text.append(f"- {len(done)} tasks finished, {n_forms} forms recorded by them")
            if rec is not None:
                runs_text.append(f"- config fingerprint `{rec['fingerprint']}` (result-affecting "
                                 "settings: " + ", ".join(
                                     f"{k} = {v!r}" for k, v in _fp(rec).items()) + ")")
                if rec.get("source_path"):
                    runs_text.append(f"- config file: `{rec['source_path']}`")
                runs_text.append("\nConfig as given when the run was first started (later runs of the "
                                 "same name may have changed levels, windows or the executor):"
                                 "\n\n```toml\n" + rec.get("toml", "").rstrip() + "\n```\n")
            elif info["config"]:
                runs_text.append("\nConfig text:\n\n```\n" + info["config"].rstrip() + "\n```\n")
        if cov:
            cov_text = [f"- level {N}, {lab}: " + ", ".join(f"[{a:g}, {b:g}]" for a, b in iv)
                        for N, d in sorted(cov.items()) for lab, iv in sorted(d.items())]
        else:
            cov_text = ["(no search tasks recorded)"]
        meta = st.metadata
        n_forms = len(st)
        peaks_text = _peaks_section(st, folder, rep)

    md = [
        f"# Report on `{store_path.name}`",
        "",
        f"Made by maasscomp {__version__} from `{store_path}` (store schema "
        f"{meta.get('schema_version')}, created {meta.get('created_utc')} by maasscomp "
        f"{meta.get('package_version')}). The store holds {n_forms} forms.",
        "",
        "## What the runs did",
        "",
        *runs_text,
        "R ranges searched (finished tasks), per level and symmetry class:",
        "",
        *cov_text,
        "",
        "## Forms per level and class",
        "",
        "Also as [summary.csv](summary.csv).",
        "",
        smd,
        "",
        "## Spectrum against Weyl's law",
        "",
        "Found against expected counts per window in [weyl.csv](weyl.csv); N(T) counts the forms "
        "found from W(T_min) on, so the remainder N(T) - W(T) starts at 0.",
        "",
        *(wtext or ["(no level to compare)"]),
        "",
        "## Sup-norm peak statistics",
        "",
        *peaks_text,
        "",
    ]
    write_markdown(folder / "README.md", "\n".join(md))
    rep.files.insert(0, "README.md")
    return rep


def _fp(rec: dict) -> dict:
    from maasscomp.config import fingerprint_settings

    return fingerprint_settings(rec["normalised"])
