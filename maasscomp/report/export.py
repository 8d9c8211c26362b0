"""Tables of a store for other programs and papers: CSV per table, plain-text coefficient
tables, LaTeX tables (the JSON document with every field is :func:`maasscomp.store.export_json`).

Every function opens the store read-only, leaves damaged forms out (appending (key, reason) to
``damaged`` when a list is given, else one DamagedDataWarning), writes atomically and returns
what it wrote (:class:`Written`), so that callers can name the files.

* :func:`export_csv` / :func:`export_forms_csv`: one row per form (``FORM_TABLE``);
* :func:`export_coeffs_csv`: every coefficient at every cusp, one row each (``COEFF_TABLE``);
* :func:`export_scans_csv`: one row per scanned form (``maasscomp.report.peaks.FORM_COLUMNS``);
* :func:`export_checks_csv`: the verification data of each form (``CHECK_TABLE``);
* :func:`export_coeff_texts`: per form and cusp a text file of ``n re im err`` rows with 17
  significant digits under ``#`` header lines (level, R, symmetry, character, cusp);
* :func:`export_latex`: booktabs tables of eigenvalues and of coefficients.

Numbers in CSV keep full precision (the shortest text that reads back to the same double,
complex numbers as Python literals such as ``(0.5-1.25j)``), see :mod:`maasscomp.report.tables`.
"""

from __future__ import annotations

import json
import math
import os
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterable, Iterator

import numpy as np

from maasscomp.errors import InputError
from maasscomp.report.tables import Column, write_csv_rows, write_text
from maasscomp.store import Store
from maasscomp.store._codec import to_plain_json
from maasscomp.store.export import keys_of
from maasscomp.store.store import FormRecord, warn_damaged


@dataclass(frozen=True)
class Written:
    """What one export wrote: the files, and how many forms (and rows) they hold."""

    paths: tuple[Path, ...]
    forms: int
    rows: int = 0

    def describe(self, what: str) -> str:
        """One line for the user, e.g. ``wrote 3 forms (180 coefficients) to c.csv``."""
        where = (str(self.paths[0]) if len(self.paths) == 1 else
                 f"{len(self.paths)} files in {self.paths[0].parent}" if self.paths else "no file")
        rows = f" ({self.rows} {what})" if self.rows and what else ""
        return f"wrote {self.forms} form{'s' if self.forms != 1 else ''}{rows} to {where}"


FORM_TABLE: list[Column] = [
    Column("key", "store key"), Column("level", "N"), Column("symmetry", "class label"),
    Column("parity", "even or odd"), Column("al_signs", "Atkin-Lehner signs p:+1;q:-1"),
    Column("R", "spectral parameter"), Column("R_error", "error estimate of R"),
    Column("hecke_residual", "largest Hecke-relation residual"),
    Column("is_new", "true, false or empty (unclassified)"), Column("multiplicity", ""),
    Column("basis_index", ""), Column("n_cusps", ""), Column("M", "coefficients per cusp"),
    Column("solver_Y", ""), Column("solver_M0", ""), Column("solver_Q", ""), Column("solver_eps", ""),
    Column("run_id", ""), Column("created_utc", ""), Column("extra", "labels as JSON text"),
    Column("character", "character label"), Column("conductor", ""),
    Column("cusps", "cusp names of the coefficient rows, ;-separated"),
]
#: Names of :data:`FORM_TABLE` (the columns before ``c1 .. cK``).
SUMMARY_COLUMNS = tuple(c.name for c in FORM_TABLE)
COEFF_TABLE: list[Column] = [Column("key"), Column("cusp"), Column("n"), Column("c"), Column("error"),
                             Column("cusp_name")]
COEFF_COLUMNS = tuple(c.name for c in COEFF_TABLE)
CHECK_TABLE: list[Column] = [
    Column("key", "store key"), Column("level", "N"), Column("symmetry", "class label"),
    Column("R", "spectral parameter"),
    Column("R_error", "max(two_height_spread, rounding_bound, 4 u R)"),
    Column("two_height_spread", "|R1 - R2|: the roots at the two sample heights"),
    Column("rounding_bound", "8 u kappa: rounding amplified by the condition number"),
    Column("condition", "condition of the root (kappa)"),
    Column("hecke_residual", "largest Hecke-relation residual"),
    Column("hecke_eigenform", "the stored basis member is a Hecke eigenform"),
    Column("atkin_lehner_residual", "residual of the Atkin-Lehner relations that fit the form's type"),
    Column("atkin_lehner_relations", "which relations that residual checks"),
    Column("old_relation_residual", "oldforms: |c(p) - a_g(p) - eps_p sqrt p| over p | N/M"),
    Column("lfunction_sign", "root number fitted from the L-function's functional equation"),
    Column("lfunction_predicted_sign", "root number predicted from the Atkin-Lehner signs"),
    Column("lfunction_residual", "functional-equation residual"),
    Column("lfunction_passed", ""),
    Column("coefficient_subspace_gap", "distance of the two heights' coefficient spaces"),
    Column("max_coeff_error", "largest estimated error of c_inf(n), n <= 10"),
    Column("is_new", "true, false or empty"), Column("multiplicity", ""),
]


def _report(bad: dict[str, str], damaged: list | None, path: Any) -> None:
    if damaged is not None:
        damaged.extend(bad.items())
    else:
        warn_damaged(bad, path)


def _check_dir(path: str | os.PathLike) -> Path:
    p = Path(path)
    if not p.parent.resolve().is_dir():
        raise InputError(f"cannot write {p}: directory {p.parent} does not exist")
    return p


def _records(st: Store, keys: Iterable[str] | None) -> Iterator[FormRecord]:
    return st.iter_records(keys_of(st, keys))


# ------------------------------------------------------------------------------------------ CSV


def _form_row(fr: FormRecord, n_coeffs: int) -> list[Any]:
    prov = fr.provenance
    c0 = fr.coeffs[0]
    return [
        fr.key, fr.level, fr.symmetry, fr.parity, ";".join(f"{p}:{s:+d}" for p, s in fr.al_signs),
        fr.R, fr.R_error, fr.hecke_residual, fr.is_new, fr.multiplicity, fr.basis_index,
        fr.coeffs.shape[0], fr.coeffs.shape[1], fr.solver["Y"], fr.solver["M0"], fr.solver["Q"],
        fr.solver["eps"], prov["run_id"], prov["created_utc"],
        json.dumps(to_plain_json(fr.extra), allow_nan=False, sort_keys=True),
        fr.character["label"], fr.character["conductor"], ";".join(c.name for c in fr.cusps),
    ] + [c0[n].item() if n < c0.size else None for n in range(n_coeffs)]


def export_forms_csv(store_path: str | os.PathLike, out_path: str | os.PathLike,
                     keys: Iterable[str] | None = None, n_coeffs: int = 10, *,
                     damaged: list[tuple[str, str]] | None = None) -> Written:
    """One row per form: :data:`SUMMARY_COLUMNS` then ``c1 .. cK`` (K = ``n_coeffs``, the
    coefficients at infinity; empty cells beyond a form's M). ``al_signs`` reads ``p:+1;q:-1``,
    ``is_new`` ``true``/``false``/empty, ``extra`` is JSON text, ``cusps`` the cusp names of the
    coefficient rows."""
    if isinstance(n_coeffs, bool) or not isinstance(n_coeffs, int) or n_coeffs < 0:
        raise InputError(f"n_coeffs {n_coeffs!r} is not allowed; use an integer >= 0")
    out = _check_dir(out_path)
    with Store.open(store_path, "r") as st:
        cols = FORM_TABLE + [Column(f"c{n}") for n in range(1, n_coeffs + 1)]
        path, n = write_csv_rows(out, cols, (_form_row(fr, n_coeffs) for fr in _records(st, keys)))
        bad = st.damaged()
    _report(bad, damaged, store_path)
    return Written((path,), n, n)


def export_coeffs_csv(store_path: str | os.PathLike, out_path: str | os.PathLike,
                      keys: Iterable[str] | None = None, *,
                      damaged: list[tuple[str, str]] | None = None) -> Written:
    """Every coefficient, one row each: ``key, cusp, n, c, error, cusp_name``."""
    out = _check_dir(out_path)
    count = {"forms": 0}

    def rows():
        for fr in _records(st, keys):
            count["forms"] += 1
            for j in range(fr.coeffs.shape[0]):
                cj, ej = fr.coeffs[j].tolist(), fr.coeff_errors[j].tolist()
                name = fr.cusps[j].name
                for m in range(len(cj)):
                    yield (fr.key, j, m + 1, cj[m], ej[m], name)

    with Store.open(store_path, "r") as st:
        path, n = write_csv_rows(out, COEFF_TABLE, rows())
        bad = st.damaged()
    _report(bad, damaged, store_path)
    return Written((path,), count["forms"], n)


def export_csv(store_path: str | os.PathLike, out_path: str | os.PathLike | None,
               keys: Iterable[str] | None = None, n_coeffs: int = 10, *,
               coeffs_path: str | os.PathLike | None = None,
               damaged: list[tuple[str, str]] | None = None) -> int:
    """The forms table (``out_path``) and/or the long coefficient table (``coeffs_path``);
    returns the number of forms written (see :func:`export_forms_csv`, :func:`export_coeffs_csv`)."""
    if out_path is None and coeffs_path is None:
        raise InputError("export_csv needs out_path or coeffs_path")
    bad: list[tuple[str, str]] = []
    n = 0
    if out_path is not None:
        n = export_forms_csv(store_path, out_path, keys, n_coeffs, damaged=bad).forms
    if coeffs_path is not None:
        n = export_coeffs_csv(store_path, coeffs_path, keys, damaged=bad).forms
    _report(dict(bad), damaged, store_path)
    return n


def export_scans_csv(store_path: str | os.PathLike, out_path: str | os.PathLike,
                     keys: Iterable[str] | None = None) -> Written:
    """One row per scanned form (``peaks.csv`` of the report: where the global maximum lies,
    each region's peak beside its prediction, exponents, L(1, sym^2 f)). Forms without a scan
    are left out."""
    from maasscomp.report.peaks import FORM_COLUMNS, form_rows
    from maasscomp.supnorm.batch import load_scans

    out = _check_dir(out_path)
    res = load_scans(store_path, keys)
    path, n = write_csv_rows(out, FORM_COLUMNS, form_rows(res))
    return Written((path,), n, n)


def _check_row(fr: FormRecord) -> dict[str, Any]:
    x = fr.extra
    parts = x.get("R_error_parts") or {}
    lf = x.get("lfunction") if isinstance(x.get("lfunction"), dict) else {}
    err = np.asarray(fr.coeff_errors[0][:10])
    return {
        "key": fr.key, "level": fr.level, "symmetry": fr.symmetry, "R": fr.R, "R_error": fr.R_error,
        "two_height_spread": parts.get("two_height_spread"), "rounding_bound": parts.get("rounding_bound"),
        "condition": parts.get("condition"), "hecke_residual": fr.hecke_residual,
        "hecke_eigenform": x.get("hecke_eigenform"),
        "atkin_lehner_residual": x.get("atkin_lehner_residual"),
        "atkin_lehner_relations": x.get("atkin_lehner_relations"),
        "old_relation_residual": x.get("old_relation_residual"),
        "lfunction_sign": lf.get("sign"), "lfunction_predicted_sign": lf.get("predicted_sign"),
        "lfunction_residual": lf.get("residual"), "lfunction_passed": lf.get("passed"),
        "coefficient_subspace_gap": x.get("coefficient_subspace_gap"),
        "max_coeff_error": float(np.max(np.abs(err))) if err.size else None,
        "is_new": fr.is_new, "multiplicity": fr.multiplicity,
    }


def export_checks_csv(store_path: str | os.PathLike, out_path: str | os.PathLike,
                      keys: Iterable[str] | None = None, *,
                      damaged: list[tuple[str, str]] | None = None) -> Written:
    """The verification data of each form (``CHECK_TABLE``): the parts of R_error, the Hecke,
    Atkin-Lehner and L-function residuals, coefficient errors. Empty cells: the check does
    not apply to the form (e.g. no Atkin-Lehner relation at level 1)."""
    out = _check_dir(out_path)
    with Store.open(store_path, "r") as st:
        path, n = write_csv_rows(out, CHECK_TABLE, (_check_row(fr) for fr in _records(st, keys)))
        bad = st.damaged()
    _report(bad, damaged, store_path)
    return Written((path,), n, n)


# ------------------------------------------------------------------------------ plain text


def _safe(name: str) -> str:
    return re.sub(r"[^A-Za-z0-9_.+-]", "_", name)


def coeff_text(fr: FormRecord, cusp: int = 0) -> str:
    """The plain-text coefficient table of one form at one cusp.

    ``#`` header lines give key, level, R (with R_error), symmetry, character and cusp; then one
    row ``n re im err`` per coefficient, each number with 17 significant digits (``%.16e``:
    every double reads back exactly). ``re + i im`` is c_cusp(n) in the convention of
    ``maasscomp.spectrum.form.Form``; ``err`` its estimated absolute error.
    """
    c = fr.cusps[cusp]
    ch = fr.character
    C = np.asarray(fr.coeffs[cusp])
    E = np.abs(np.asarray(fr.coeff_errors[cusp]))
    re, im = C.real.astype(float), (C.imag.astype(float) if np.iscomplexobj(C) else np.zeros(C.size))
    head = [
        "# maasscomp coefficient table",
        f"# key: {fr.key}",
        f"# level: {fr.level}",
        f"# R: {fr.R!r}",
        f"# R_error: {fr.R_error!r}",
        f"# eigenvalue: {0.25 + fr.R * fr.R!r}",
        f"# symmetry: {fr.symmetry} (parity {fr.parity}"
        + (", Atkin-Lehner signs " + ", ".join(f"{p}:{s:+d}" for p, s in fr.al_signs) if fr.al_signs else "")
        + ")",
        f"# character: {ch['label']} (modulus {ch['modulus']}, conductor {ch['conductor']})",
        f"# cusp: {c.name} (index {c.index}, representative {c.a}/{c.c}, width {c.width}, "
        f"scaling matrix {[list(r) for r in c.scaling]})",
        f"# new: {'unknown' if fr.is_new is None else ('yes' if fr.is_new else 'no')}",
        "# columns: n re im err  (c(n) = re + i im; err = estimated absolute error of c(n))",
    ]
    body = "".join(f"{n + 1} {re[n]:.16e} {im[n]:.16e} {E[n]:.16e}\n" for n in range(C.size))
    return "\n".join(head) + "\n" + body


def coeff_text_name(key: str, cusp: int) -> str:
    """File name of a coefficient table: ``<key>.txt`` at infinity, ``<key>.cusp<j>.txt`` else."""
    return f"{_safe(key)}.txt" if cusp == 0 else f"{_safe(key)}.cusp{cusp}.txt"


def export_coeff_texts(store_path: str | os.PathLike, out_dir: str | os.PathLike,
                       keys: Iterable[str] | None = None, *,
                       damaged: list[tuple[str, str]] | None = None) -> Written:
    """One plain-text coefficient table per form and cusp (:func:`coeff_text`) in ``out_dir``
    (created if missing)."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    paths = []
    n = 0
    with Store.open(store_path, "r") as st:
        for fr in _records(st, keys):
            n += 1
            for j in range(fr.coeffs.shape[0]):
                paths.append(write_text(out / coeff_text_name(fr.key, j), coeff_text(fr, j)))
        bad = st.damaged()
    _report(bad, damaged, store_path)
    return Written(tuple(paths), n, len(paths))


# ---------------------------------------------------------------------------------- LaTeX


def _tex_num(x: float, decimals: int) -> str:
    if not math.isfinite(x):
        return "--"
    s = f"{x:.{decimals}f}"
    return ("$-$" + s[1:]) if s.startswith("-") else s


def _R_decimals(R_error: float, cap: int = 14) -> int:
    """Decimals of R that its error estimate supports (at least 3, at most ``cap``)."""
    if not (R_error > 0 and math.isfinite(R_error)):
        return cap
    return int(min(cap, max(3, math.floor(-math.log10(R_error)))))


def _tex_escape(s: str) -> str:
    return s.replace("_", r"\_").replace("&", r"\&").replace("%", r"\%").replace("#", r"\#")


def latex_tables(records: list[FormRecord], n_coeffs: int = 6, digits: int = 10) -> tuple[str, str]:
    """(eigenvalue table, coefficient table) as LaTeX ``tabular`` with booktabs rules.

    Eigenvalues: level, class, R with the decimals its error estimate supports, the error,
    lambda = 1/4 + R^2, new/old. Coefficients: c(2) .. c(n_coeffs + 1) at infinity with
    ``digits`` decimals (real parts; a complex coefficient shows ``re + im i``).
    """
    head = ("% needs \\usepackage{booktabs}\n")
    eig = [head, "\\begin{tabular}{rlllll}", "\\toprule",
           "$N$ & class & $R$ & error & $\\lambda = \\frac14 + R^2$ & new \\\\", "\\midrule"]
    for fr in records:
        d = _R_decimals(fr.R_error)
        new = {True: "yes", False: "no", None: "?"}[fr.is_new]
        eig.append(f"{fr.level} & {_tex_escape(fr.symmetry)} & {_tex_num(fr.R, d)} & "
                   f"{fr.R_error:.1e} & {_tex_num(0.25 + fr.R * fr.R, max(d - 2, 3))} & {new} \\\\")
    eig += ["\\bottomrule", "\\end{tabular}", ""]
    ns = list(range(2, n_coeffs + 2))
    co = [head, "\\begin{tabular}{rll" + "r" * len(ns) + "}", "\\toprule",
          "$N$ & class & $R$ & " + " & ".join(f"$c({n})$" for n in ns) + " \\\\", "\\midrule"]
    for fr in records:
        c0 = fr.coeffs[0]
        cells = []
        for n in ns:
            if n > c0.size:
                cells.append("")
                continue
            v = complex(c0[n - 1])
            cells.append(_tex_num(v.real, digits) if v.imag == 0 else
                         f"{_tex_num(v.real, digits)}{'+' if v.imag >= 0 else '$-$'}{abs(v.imag):.{digits}f}$i$")
        co.append(f"{fr.level} & {_tex_escape(fr.symmetry)} & {_tex_num(fr.R, _R_decimals(fr.R_error, 8))} & "
                  + " & ".join(cells) + " \\\\")
    co += ["\\bottomrule", "\\end{tabular}", ""]
    return "\n".join(eig), "\n".join(co)


def export_latex(store_path: str | os.PathLike, out_dir: str | os.PathLike,
                 keys: Iterable[str] | None = None, n_coeffs: int = 6, *,
                 damaged: list[tuple[str, str]] | None = None) -> Written:
    """``eigenvalues.tex`` and ``coefficients.tex`` in ``out_dir`` (see :func:`latex_tables`)."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    with Store.open(store_path, "r") as st:
        recs = list(_records(st, keys))
        bad = st.damaged()
    eig, co = latex_tables(recs, n_coeffs)
    paths = (write_text(out / "eigenvalues.tex", eig), write_text(out / "coefficients.tex", co))
    _report(bad, damaged, store_path)
    return Written(paths, len(recs), len(recs))
