"""Export of a store to one JSON document holding every stored field (written atomically:
temp file + rename). The document is described by ``docs/export-schema.json`` (JSON Schema,
draft 2020-12); tables (CSV, plain text, LaTeX) are written by :mod:`maasscomp.report.export`.

Floats are written as the shortest decimal string that reads back to the same double (as
``repr`` does; exponents may read ``1e16`` rather than ``1e+16``), so exported numbers parse
back bit-identical.  Strict JSON has no
token for nan/inf; they are written as the strings ``"nan"``, ``"inf"``, ``"-inf"``
(in CSV they appear as ``nan``, ``inf``, ``-inf``, which ``float()`` reads).  Complex
coefficients are ``{"re": .., "im": ..}`` objects in JSON and Python literals such as
``(0.5-1.25j)`` in CSV, which ``complex()`` reads.

Every form carries its character and the data of the cusps its coefficient rows belong to
(name, representative a/c, width, scaling matrix), so coefficients at N > 1 can be used
without knowing this package's cusp order.  Damaged forms are left out and named.
"""

from __future__ import annotations

import json
import os
import tomllib
from pathlib import Path
from typing import Any, Iterable

import numpy as np
import orjson

from maasscomp import __version__
from maasscomp.errors import StoreError
from maasscomp.store import _atomic
from maasscomp.store._codec import to_plain_json
from maasscomp.store.store import FormRecord, Store, _text_id, utc_now_iso, warn_damaged

#: ``format`` field of an exported JSON document.
JSON_FORMAT = "maasscomp-export"
#: Version 2: attachments (scans, norms) always, configs parsed into objects and referenced
#: by id from each form's provenance.
JSON_FORMAT_VERSION = 2


def parse_config_text(text: str) -> dict[str, Any] | None:
    """A stored config text as a JSON object: the job record a run stores is JSON, the config
    a form was made with is TOML; None when the text is empty or neither."""
    if not text:
        return None
    try:
        v = json.loads(text)
        if isinstance(v, dict):
            return v
    except ValueError:
        pass
    try:
        return tomllib.loads(text)
    except (tomllib.TOMLDecodeError, ValueError):
        return None


def keys_of(st: Store, keys: Iterable[str] | None) -> list[str]:
    if keys is None:
        return st.keys()
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


def _dumps(rec: dict[str, Any]) -> str:
    """Compact JSON text of one record. orjson writes the shortest round-trip floats, as
    ``repr`` does, about ten times faster than ``json``; integers beyond 64 bits (which it
    refuses) go through ``json``."""
    try:
        return orjson.dumps(rec).decode()
    except TypeError:
        return json.dumps(rec, allow_nan=False, separators=(",", ":"))


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
        "provenance": {**{k: v for k, v in rec.provenance.items() if k != "config"},
                       "config_id": _text_id(rec.provenance["config"]) if rec.provenance["config"] else None},
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
                keys: Iterable[str] | None = None, *, attachments: bool = True,
                indent: int | None = 1, damaged: list[tuple[str, str]] | None = None) -> int:
    """Write one JSON document with everything the store holds.

    The document (``docs/export-schema.json``) is ``{"format": "maasscomp-export",
    "format_version": 2, "source", "store": {root attributes}, "runs": {id: {run_id,
    created_utc, package_version, config (the run's job record as an object), config_text,
    n_tasks_done, done_tasks}}, "configs": {id: {"text", "parsed"}}, "exported_utc",
    "package_version", "forms": [record, ...], "damaged": [{"key", "reason"}, ...]}``. Each
    record (:func:`record_of`) holds every field of a form, its character and cusp data, its
    provenance (the config it was made with by ``config_id`` into ``configs``) and, with
    ``attachments`` (the default), everything stored beside it (L2 norm, peak scan).
    Coefficient arrays are nested lists ``[cusp][n-1]``; complex numbers ``{"re", "im"}``.
    The document is written record by record (one form per line), so memory does not grow
    with the store.

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
        ks = keys_of(st, keys)
        runs = {}
        for r in st.runs():
            info = st.run_info(r)
            text = info.pop("config")
            runs[r] = {**info, "config": parse_config_text(text), "config_text": text,
                       "done_tasks": st.done_tasks(r)}
        head = {
            "format": JSON_FORMAT,
            "format_version": JSON_FORMAT_VERSION,
            "source": str(Path(store_path)),
            "store": to_plain_json(st.metadata),
            "runs": to_plain_json(runs),
            "exported_utc": utc_now_iso(),
            "package_version": __version__,
        }
        bad: dict[str, str] = {}
        configs: dict[str, dict[str, Any]] = {}
        with _atomic.atomic_text_writer(out_path) as fh:
            text = json.dumps(head, indent=indent, allow_nan=False)
            fh.write(text[:-1].rstrip() + ',\n "forms": [')
            first = True
            for fr in st.iter_records(ks):
                rec = record_of(fr)
                cfg = fr.provenance["config"]
                if cfg and rec["provenance"]["config_id"] not in configs:
                    configs[rec["provenance"]["config_id"]] = {"text": cfg, "parsed": parse_config_text(cfg)}
                if attachments:
                    atts = {}
                    for name in st.attachments(fr.key):
                        try:
                            atts[name] = st.get_attachment(fr.key, name)
                        except StoreError as exc:
                            bad[f"{fr.key} [attachment {name}]"] = str(exc)
                    rec["attachments"] = to_plain_json(atts)
                fh.write(("\n  " if first else ",\n  ") + _dumps(rec))
                first = False
                n += 1
            for k, why in st.damaged().items():
                bad.setdefault(k, why)
            fh.write("\n ],\n \"configs\": ")
            fh.write(json.dumps(to_plain_json(configs), allow_nan=False))
            fh.write(",\n \"damaged\": ")
            fh.write(json.dumps([{"key": k, "reason": why} for k, why in bad.items()]))
            fh.write("\n}\n")
    _report(bad, damaged, store_path)
    return n


def _report(bad: dict[str, str], damaged: list | None, path: Any) -> None:
    if damaged is not None:
        damaged.extend(bad.items())
    else:
        warn_damaged(bad, path)
