"""Export of a store to JSON and CSV (written atomically: temp file + rename).

Floats are written with Python's ``repr``, the shortest decimal string that reads back
to the same double, so exported numbers parse back bit-identical.  Strict JSON has no
token for nan/inf; they are written as the strings ``"nan"``, ``"inf"``, ``"-inf"``
(in CSV they appear as ``nan``, ``inf``, ``-inf``, which ``float()`` reads).  Complex
coefficients are ``{"re": .., "im": ..}`` objects in JSON and Python literals such as
``(0.5-1.25j)`` in CSV, which ``complex()`` reads.
"""

from __future__ import annotations

import csv
import json
import os
from pathlib import Path
from typing import Any, Iterable

from maasscomp import __version__
from maasscomp.errors import InputError, StoreError
from maasscomp.store import _atomic
from maasscomp.store._codec import to_plain_json
from maasscomp.store.store import Store, utc_now_iso

#: ``format`` field of an exported JSON document.
JSON_FORMAT = "maasscomp-export"
JSON_FORMAT_VERSION = 1

SUMMARY_COLUMNS = (
    "key", "level", "symmetry", "parity", "al_signs", "R", "R_error", "hecke_residual",
    "is_new", "multiplicity", "basis_index", "n_cusps", "M",
    "solver_Y", "solver_M0", "solver_Q", "solver_eps", "run_id", "created_utc", "extra",
)
COEFF_COLUMNS = ("key", "cusp", "n", "c", "error")


def _keys(st: Store, keys: Iterable[str] | None) -> list[str]:
    if keys is None:
        return st.keys()
    keys = list(keys)
    for k in keys:
        if k not in st:
            raise StoreError(f"no form with key {k!r} in store {st.path}")
    return keys


def form_record(st: Store, key: str, attachments: bool = False) -> dict[str, Any]:
    """All fields of one stored form as plain JSON-ready data."""
    f = st.get(key)
    prov = st.provenance(key)
    rec: dict[str, Any] = {
        "key": key,
        "level": f.level,
        "R": f.R,
        "eigenvalue": f.eigenvalue,
        "symmetry": {
            "label": f.symmetry.label,
            "parity": f.symmetry.parity,
            "al_signs": [list(ps) for ps in f.symmetry.al_signs],
        },
        "R_error": f.R_error,
        "hecke_residual": f.hecke_residual,
        "solver": f.params.as_dict(),
        "is_new": f.is_new,
        "multiplicity": f.multiplicity,
        "basis_index": f.basis_index,
        "n_cusps": int(f.coeffs.shape[0]),
        "M": int(f.coeffs.shape[1]),
        "extra": f.extra,
        "provenance": prov,
        "coeffs": f.coeffs,
        "coeff_errors": f.coeff_errors,
    }
    if attachments:
        rec["attachments"] = {name: st.get_attachment(key, name) for name in st.attachments(key)}
    return to_plain_json(rec)


def export_json(store_path: str | os.PathLike, out_path: str | os.PathLike,
                keys: Iterable[str] | None = None, *, attachments: bool = False,
                indent: int | None = 1) -> int:
    """Write one JSON document with the store's metadata and every field of its forms.

    The document is ``{"format": "maasscomp-export", "format_version": 1, "source": ...,
    "store": {root attributes}, "runs": {...}, "exported_utc": ..., "package_version": ...,
    "forms": [record, ...]}`` with records as built by :func:`form_record` (coefficient
    arrays as nested lists ``[cusp][n-1]``; complex numbers as ``{"re", "im"}``).

    Returns
    -------
    int
        Number of forms written.
    """
    with Store.open(store_path, "r") as st:
        ks = _keys(st, keys)
        doc = {
            "format": JSON_FORMAT,
            "format_version": JSON_FORMAT_VERSION,
            "source": str(Path(store_path)),
            "store": to_plain_json(st.metadata),
            "runs": to_plain_json({r: {**st.run_info(r), "done_tasks": st.done_tasks(r)}
                                   for r in st.runs()}),
            "exported_utc": utc_now_iso(),
            "package_version": __version__,
            "forms": [form_record(st, k, attachments) for k in ks],
        }
    with _atomic.atomic_text_writer(out_path) as fh:
        json.dump(doc, fh, indent=indent, allow_nan=False)
        fh.write("\n")
    return len(ks)


def _num(x: Any) -> str:
    """Full-precision text of a number for CSV (repr of float; complex as Python literal)."""
    if isinstance(x, float):
        return repr(x)
    if isinstance(x, complex):
        return repr(x)
    return str(x)


def export_csv(store_path: str | os.PathLike, out_path: str | os.PathLike,
               keys: Iterable[str] | None = None, n_coeffs: int = 10, *,
               coeffs_path: str | os.PathLike | None = None) -> int:
    """Write a CSV with one row per form, and optionally a long-format coefficient CSV.

    Parameters
    ----------
    store_path, out_path : path-like
    keys : iterable of str, optional
        Forms to export (default all, in write order).
    n_coeffs : int
        Number K of coefficients at infinity in columns ``c1`` .. ``cK`` of the summary
        (cells are empty for forms with fewer than K coefficients).
    coeffs_path : path-like, optional
        Also write every coefficient, one row each: ``key, cusp, n, c, error``.

    Summary columns: :data:`SUMMARY_COLUMNS` then ``c1..cK``.  ``al_signs`` is written as
    ``p:+1;q:-1``; ``is_new`` as ``true``/``false``/empty; ``extra`` as JSON text.

    Returns
    -------
    int
        Number of forms written.
    """
    if isinstance(n_coeffs, bool) or not isinstance(n_coeffs, int) or n_coeffs < 0:
        raise InputError(f"n_coeffs {n_coeffs!r} is not allowed; use an integer >= 0")
    with Store.open(store_path, "r") as st:
        ks = _keys(st, keys)
        with _atomic.atomic_text_writer(out_path, newline="") as fh:
            w = csv.writer(fh)
            w.writerow(list(SUMMARY_COLUMNS) + [f"c{n}" for n in range(1, n_coeffs + 1)])
            for k in ks:
                f = st.get(k)
                prov = st.provenance(k)
                row = [
                    k, f.level, f.symmetry.label, f.symmetry.parity,
                    ";".join(f"{p}:{s:+d}" for p, s in f.symmetry.al_signs),
                    _num(f.R), _num(f.R_error), _num(f.hecke_residual),
                    "" if f.is_new is None else ("true" if f.is_new else "false"),
                    f.multiplicity, f.basis_index, f.coeffs.shape[0], f.coeffs.shape[1],
                    _num(f.params.Y), f.params.M0, f.params.Q, _num(f.params.eps),
                    prov["run_id"], prov["created_utc"],
                    json.dumps(to_plain_json(f.extra), allow_nan=False, sort_keys=True),
                ]
                c0 = f.coeffs[0]
                row += [_num(c0[n].item()) if n < c0.size else "" for n in range(n_coeffs)]
                w.writerow(row)
        if coeffs_path is not None:
            with _atomic.atomic_text_writer(coeffs_path, newline="") as fh:
                w = csv.writer(fh)
                w.writerow(COEFF_COLUMNS)
                for k in ks:
                    f = st.get(k)
                    for j in range(f.coeffs.shape[0]):
                        cj, ej = f.coeffs[j].tolist(), f.coeff_errors[j].tolist()
                        for n in range(len(cj)):
                            w.writerow((k, j, n + 1, _num(cj[n]), _num(ej[n])))
    return len(ks)
