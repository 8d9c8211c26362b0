"""Export of a store to JSON and CSV (written atomically: temp file + rename).

Floats are written with Python's ``repr``, the shortest decimal string that reads back
to the same double, so exported numbers parse back bit-identical.  Strict JSON has no
token for nan/inf; they are written as the strings ``"nan"``, ``"inf"``, ``"-inf"``
(in CSV they appear as ``nan``, ``inf``, ``-inf``, which ``float()`` reads).  Complex
coefficients are ``{"re": .., "im": ..}`` objects in JSON and Python literals such as
``(0.5-1.25j)`` in CSV, which ``complex()`` reads.

Every form carries its character and the data of the cusps its coefficient rows belong to
(name, representative a/c, width, scaling matrix), so coefficients at N > 1 can be used
without knowing this package's cusp order.  Damaged forms are left out and named.
"""

from __future__ import annotations

import csv
import json
import os
from pathlib import Path
from typing import Any, Iterable

import numpy as np

from maasscomp import __version__
from maasscomp.errors import InputError, StoreError
from maasscomp.store import _atomic
from maasscomp.store._codec import to_plain_json
from maasscomp.store.store import FormRecord, Store, utc_now_iso, warn_damaged

#: ``format`` field of an exported JSON document.
JSON_FORMAT = "maasscomp-export"
JSON_FORMAT_VERSION = 1

SUMMARY_COLUMNS = (
    "key", "level", "symmetry", "parity", "al_signs", "R", "R_error", "hecke_residual",
    "is_new", "multiplicity", "basis_index", "n_cusps", "M",
    "solver_Y", "solver_M0", "solver_Q", "solver_eps", "run_id", "created_utc", "extra",
    "character", "conductor", "cusps",
)
COEFF_COLUMNS = ("key", "cusp", "n", "c", "error", "cusp_name")


def _keys(st: Store, keys: Iterable[str] | None) -> list[str]:
    if keys is None:
        return st.keys(order="written")
    keys = list(keys)
    for k in keys:
        if k not in st:
            raise StoreError(f"no form with key {k!r} in store {st.path}")
    return keys


def _plain_array(a: np.ndarray) -> list:
    """Nested lists of a float or complex array, fast for the common all-finite case."""
    if np.iscomplexobj(a):
        re, im = a.real, a.imag
        if np.isfinite(re).all() and np.isfinite(im).all():
            return [[{"re": x, "im": y} for x, y in zip(r.tolist(), i.tolist())]
                    for r, i in zip(re, im)]
        return to_plain_json(a)
    if np.isfinite(a).all():
        return a.tolist()
    return to_plain_json(a)


def record_of(rec: FormRecord) -> dict[str, Any]:
    """All fields of one stored form as plain JSON-ready data."""
    out: dict[str, Any] = {
        "key": rec.key,
        "label": rec.label,
        "level": rec.level,
        "R": rec.R,
        "eigenvalue": 0.25 + rec.R * rec.R,
        "symmetry": {
            "label": rec.symmetry,
            "parity": rec.parity,
            "al_signs": [list(ps) for ps in rec.al_signs],
        },
        "character": rec.character,
        "cusps": [c.as_dict() for c in rec.cusps],
        "R_error": rec.R_error,
        "hecke_residual": rec.hecke_residual,
        "solver": rec.solver,
        "is_new": rec.is_new,
        "multiplicity": rec.multiplicity,
        "basis_index": rec.basis_index,
        "n_cusps": int(rec.coeffs.shape[0]),
        "M": int(rec.coeffs.shape[1]),
        "extra": rec.extra,
        "provenance": rec.provenance,
    }
    if rec.fields:
        out["fields"] = rec.fields
    out = to_plain_json(out)
    out["coeffs"] = _plain_array(rec.coeffs)
    out["coeff_errors"] = _plain_array(rec.coeff_errors)
    return out


def form_record(st: Store, key: str, attachments: bool = False) -> dict[str, Any]:
    """All fields of the stored form ``key`` (DamagedFormError if it is damaged)."""
    out = record_of(FormRecord.from_stored(st.read(key)))
    if attachments:
        out["attachments"] = to_plain_json(
            {name: st.get_attachment(key, name) for name in st.attachments(key)})
    return out


def export_json(store_path: str | os.PathLike, out_path: str | os.PathLike,
                keys: Iterable[str] | None = None, *, attachments: bool = False,
                indent: int | None = 1, damaged: list[tuple[str, str]] | None = None) -> int:
    """Write one JSON document with the store's metadata and every field of its forms.

    The document is ``{"format": "maasscomp-export", "format_version": 1, "source": ...,
    "store": {root attributes}, "runs": {...}, "exported_utc": ..., "package_version": ...,
    "forms": [record, ...], "damaged": [{"key", "reason"}, ...]}`` with records as built
    by :func:`form_record` (coefficient arrays as nested lists ``[cusp][n-1]``; complex
    numbers as ``{"re", "im"}``).  The document is written record by record (one form per
    line), so memory does not grow with the store.

    Damaged forms (and damaged attachments of intact forms) are left out, listed in the
    document's ``damaged`` field, appended to ``damaged`` when a list is given, and
    otherwise reported by one DamagedDataWarning.

    Returns
    -------
    int
        Number of forms written.
    """
    n = 0
    with Store.open(store_path, "r") as st:
        ks = _keys(st, keys)
        head = {
            "format": JSON_FORMAT,
            "format_version": JSON_FORMAT_VERSION,
            "source": str(Path(store_path)),
            "store": to_plain_json(st.metadata),
            "runs": to_plain_json({r: {**st.run_info(r), "done_tasks": st.done_tasks(r)}
                                   for r in st.runs()}),
            "exported_utc": utc_now_iso(),
            "package_version": __version__,
        }
        bad: dict[str, str] = {}
        with _atomic.atomic_text_writer(out_path) as fh:
            text = json.dumps(head, indent=indent, allow_nan=False)
            fh.write(text[:-1].rstrip() + ',\n "forms": [')
            first = True
            for fr in st.iter_records(ks):
                rec = record_of(fr)
                if attachments:
                    atts = {}
                    for name in st.attachments(fr.key):
                        try:
                            atts[name] = st.get_attachment(fr.key, name)
                        except StoreError as exc:
                            bad[f"{fr.key} [attachment {name}]"] = str(exc)
                    rec["attachments"] = to_plain_json(atts)
                fh.write(("\n  " if first else ",\n  ")
                         + json.dumps(rec, allow_nan=False, separators=(",", ":")))
                first = False
                n += 1
            for k, why in st.damaged().items():
                bad.setdefault(k, why)
            fh.write("\n ],\n \"damaged\": ")
            fh.write(json.dumps([{"key": k, "reason": why} for k, why in bad.items()]))
            fh.write("\n}\n")
    _report(bad, damaged, store_path)
    return n


def _report(bad: dict[str, str], damaged: list | None, path: Any) -> None:
    if damaged is not None:
        damaged.extend(bad.items())
    else:
        warn_damaged(bad, path)


def _num(x: Any) -> str:
    """Full-precision text of a number for CSV (repr of float; complex as Python literal)."""
    if isinstance(x, float):
        return repr(x)
    if isinstance(x, complex):
        return repr(x)
    return str(x)


def export_csv(store_path: str | os.PathLike, out_path: str | os.PathLike,
               keys: Iterable[str] | None = None, n_coeffs: int = 10, *,
               coeffs_path: str | os.PathLike | None = None,
               damaged: list[tuple[str, str]] | None = None) -> int:
    """Write a CSV with one row per form, and optionally a long-format coefficient CSV.

    Parameters
    ----------
    store_path, out_path : path-like
    keys : iterable of str, optional
        Forms to export (default all, sorted by (level, R)).
    n_coeffs : int
        Number K of coefficients at infinity in columns ``c1`` .. ``cK`` of the summary
        (cells are empty for forms with fewer than K coefficients).
    coeffs_path : path-like, optional
        Also write every coefficient, one row each: ``key, cusp, n, c, error, cusp_name``.
    damaged : list, optional
        Damaged forms are left out and appended here as (key, reason); without a list
        they are reported by one DamagedDataWarning.

    Summary columns: :data:`SUMMARY_COLUMNS` then ``c1..cK``.  ``al_signs`` is written as
    ``p:+1;q:-1``; ``is_new`` as ``true``/``false``/empty; ``extra`` as JSON text;
    ``character`` as its label, ``cusps`` as the cusp names of the rows, ``;``-separated.

    Returns
    -------
    int
        Number of forms written.
    """
    if isinstance(n_coeffs, bool) or not isinstance(n_coeffs, int) or n_coeffs < 0:
        raise InputError(f"n_coeffs {n_coeffs!r} is not allowed; use an integer >= 0")
    n = 0
    with Store.open(store_path, "r") as st:
        ks = _keys(st, keys)
        written = []
        with _atomic.atomic_text_writer(out_path, newline="") as fh:
            w = csv.writer(fh)
            w.writerow(list(SUMMARY_COLUMNS) + [f"c{n}" for n in range(1, n_coeffs + 1)])
            for fr in st.iter_records(ks):
                prov = fr.provenance
                row = [
                    fr.key, fr.level, fr.symmetry, fr.parity,
                    ";".join(f"{p}:{s:+d}" for p, s in fr.al_signs),
                    _num(fr.R), _num(fr.R_error), _num(fr.hecke_residual),
                    "" if fr.is_new is None else ("true" if fr.is_new else "false"),
                    fr.multiplicity, fr.basis_index, fr.coeffs.shape[0], fr.coeffs.shape[1],
                    _num(fr.solver["Y"]), fr.solver["M0"], fr.solver["Q"], _num(fr.solver["eps"]),
                    prov["run_id"], prov["created_utc"],
                    json.dumps(to_plain_json(fr.extra), allow_nan=False, sort_keys=True),
                    fr.character["label"], fr.character["conductor"],
                    ";".join(c.name for c in fr.cusps),
                ]
                c0 = fr.coeffs[0]
                row += [_num(c0[n].item()) if n < c0.size else "" for n in range(n_coeffs)]
                w.writerow(row)
                written.append(fr.key)
                n += 1
        if coeffs_path is not None:
            with _atomic.atomic_text_writer(coeffs_path, newline="") as fh:
                w = csv.writer(fh)
                w.writerow(COEFF_COLUMNS)
                for fr in st.iter_records(written):
                    for j in range(fr.coeffs.shape[0]):
                        cj, ej = fr.coeffs[j].tolist(), fr.coeff_errors[j].tolist()
                        name = fr.cusps[j].name
                        w.writerows((fr.key, j, m + 1, _num(cj[m]), _num(ej[m]), name)
                                    for m in range(len(cj)))
        bad = st.damaged()
    _report(bad, damaged, store_path)
    return n
