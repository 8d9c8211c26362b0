"""The store of Maass forms: one HDF5 file with an append-only commit log.

Design (schema version 2, ``docs/store-schema.md``)
--------------------------------------------------
The file is a 512-byte header, then an HDF5 image (the *base*: a columnar table of forms
with pools of coefficients and metadata), then the *commit records* of every transaction
made since the base was written.  A transaction appends one record at the end of the file
and fsyncs it; nothing that was committed is ever rewritten in place.  Hence:

* a process killed at any moment leaves the committed records intact and at most an
  unfinished record at the end, which readers ignore (its trailer is missing or its
  checksum fails) and the next writer cuts off;
* a commit costs what it writes, not the size of the file;
* the file keeps its identity (inode, mode, owner, group, hard links, a symlink's target)
  through every commit.

When the records have grown as large as the base, closing the writer *compacts*: it writes
a new base holding everything into a temporary file beside the store, gives it the mode,
owner and group of the old file, and renames it onto the store's real path (a symlink keeps
pointing to it).  Compaction is skipped, with a log message, whenever that identity could
not be kept or the space is missing; the store then simply keeps its records.

Every form carries a checksum over all its stored bytes (verified on every read) and every
index row a checksum of its own (verified when the store opens), so a damaged form is found,
named, and skipped by listings and exports instead of failing them.

Readers open one snapshot: they read the base and the records present when they opened,
through their own file descriptor, so neither appends nor a compaction change what they see.
"""

from __future__ import annotations

import bisect
import contextlib
import dataclasses
import functools
import json
import logging
import math
import os
import secrets
import warnings
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path
from typing import TYPE_CHECKING, Any, Iterable, Iterator

import h5py
import numpy as np

from maasscomp import __version__
from maasscomp.errors import (DamagedDataWarning, DamagedFormError, InputError, StoreError,
                              StoreWriteError)
from maasscomp.groups import DirichletCharacter, gamma0, unit_generators
from maasscomp.store import _atomic, _codec
from maasscomp.store import _layout as L
from maasscomp.store import schema as S

if TYPE_CHECKING:  # the form classes are imported where forms are built: listing needs none
    import maasscomp.groups.characters
    from maasscomp.spectrum.form import Form

#: Default absolute tolerance on R for duplicate detection.  Distinct eigenvalues of one
#: level and symmetry class closer than this are not expected in the ranges studied; a
#: recomputation of the same form typically agrees to far better than this.
DEFAULT_DUPLICATE_TOL = 1e-6

ON_DUPLICATE = ("skip", "replace", "error")
MODES = ("r", "a", "w")

#: Closing a writer compacts when the records hold more than this many bytes and more
#: bytes than the base (so the total copying stays proportional to what was written).
COMPACT_MIN_BYTES = 64 * 2**20
#: ... or more than this many forms and more forms than the base.
COMPACT_MIN_ROWS = 4000

_SRC_FILE, _SRC_PENDING, _SRC_V1 = 0, 1, 2
_STR = h5py.string_dtype("utf-8")
#: Forms read and written per block while compacting.
_COPY_BLOCK = 2048

log = logging.getLogger("maasscomp.store")

#: Form fields the store writes explicitly (``key`` is not written: the store gives it to a
#: form when it reads it); any other dataclass field of Form is stored generically (encoded
#: like ``extra``) and given back when Form still has it.
_KNOWN_FIELDS = {"level", "R", "symmetry", "coeffs", "coeff_errors", "R_error", "hecke_residual",
                 "params", "is_new", "multiplicity", "basis_index", "extra", "character", "key"}


def utc_now_iso() -> str:
    """Current time as ISO 8601 UTC with microseconds, e.g. ``2024-05-01T12:00:00.000001Z``."""
    return datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


def _attr_str(v: Any) -> str:
    return v.decode("utf-8") if isinstance(v, bytes) else str(v)


# ---------------------------------------------------------------- records handed out


@dataclass(frozen=True)
class CuspInfo:
    """One cusp of a stored form's expansion (row ``index`` of its coefficient array).

    ``name`` is the canonical name (``inf``, ``0``, ``a/c``; :attr:`maasscomp.groups.Cusp.name`),
    ``a, c`` the reduced representative as a point of P^1(Q) ((1, 0) is infinity), ``width``
    the cusp width and ``scaling`` the integer matrix M with sigma = M / sqrt(det M).
    """

    index: int
    name: str
    a: int
    c: int
    width: int
    scaling: tuple[tuple[int, int], tuple[int, int]]

    def as_dict(self) -> dict[str, Any]:
        return {"index": self.index, "name": self.name, "a": self.a, "c": self.c,
                "width": self.width, "scaling": [list(r) for r in self.scaling]}


@dataclass(frozen=True)
class StoredForm:
    """A form read back with everything stored beside it."""

    key: str
    form: Form
    character: maasscomp.groups.characters.DirichletCharacter  # full name: two classes share the short one
    cusps: tuple[CuspInfo, ...]
    provenance: dict[str, Any]
    #: Form fields stored by a newer version that this version's Form lacks.
    unknown_fields: dict[str, Any]

    @property
    def label(self) -> str:
        f = self.form
        return S.form_label(f.level, self.character.label, f.symmetry.label, f.R)

    def __repr__(self) -> str:
        f = self.form
        return (f"<StoredForm {self.key!r}: level {f.level}, {f.symmetry.label}, character "
                f"{self.character.label}, R = {float(f.R)!r}, {len(self.cusps)} cusp"
                f"{'s' if len(self.cusps) != 1 else ''}, run {self.provenance.get('run_id') or '-'}>")


@functools.lru_cache(maxsize=4096)
def _character_dict(modulus: int, exponents: tuple[int, ...]) -> dict[str, Any]:
    return _character(modulus, exponents).as_dict()


_RECORD_FIELDS = ("level", "R", "R_error", "hecke_residual", "solver_Y", "solver_eps", "solver_M0",
                  "solver_Q", "multiplicity", "basis_index", "n_cusps", "M", "parity", "is_new",
                  "coeffs_kind", "errors_kind", "seq")


@functools.lru_cache(maxsize=8)
def _record_positions(dtype: np.dtype) -> tuple[int, ...]:
    """Positions of :data:`_RECORD_FIELDS` in an index row of ``dtype``."""
    return tuple(dtype.names.index(f) for f in _RECORD_FIELDS)


@dataclass(frozen=True)
class FormRecord:
    """One stored form as plain values (what exports write), read without building a Form.

    ``fields`` holds every Form field stored generically (see :attr:`StoredForm.unknown_fields`).
    """

    key: str
    level: int
    R: float
    R_error: float
    hecke_residual: float
    parity: str
    al_signs: tuple[tuple[int, int], ...]
    symmetry: str
    character: dict[str, Any]
    cusps: tuple[CuspInfo, ...]
    solver: dict[str, Any]
    is_new: bool | None
    multiplicity: int
    basis_index: int
    coeffs: np.ndarray
    coeff_errors: np.ndarray
    extra: dict[str, Any]
    fields: dict[str, Any]
    provenance: dict[str, Any]

    @property
    def label(self) -> str:
        return S.form_label(self.level, self.character["label"], self.symmetry, self.R)

    @classmethod
    def from_parts(cls, key: str, sym: str, char: str, row: np.ndarray, doc: dict,
                   arrays: dict, cb: bytes, eb: bytes, text) -> "FormRecord":
        # one conversion of the whole index row (a field-by-field .item() costs 16 calls)
        t = row.item()
        (lev, R, Re, hr, Y, eps, M0, Q, mult, bi, nc, M, par, isn, ck, ek, seq) = (
            t[j] for j in _record_positions(row.dtype))

        def arr(b: bytes, kind: int) -> np.ndarray:
            dt = np.dtype("<c16") if kind == L.KIND_COMPLEX else np.dtype("<f8")
            return np.frombuffer(b, dtype=dt).reshape(nc, M)

        ch = doc[S.M_CHARACTER]
        p = doc[S.M_PROVENANCE]
        return cls(
            key=key, level=lev, R=R, R_error=Re, hecke_residual=hr,
            parity=doc[S.M_SYMMETRY]["parity"],
            al_signs=tuple((int(a), int(b)) for a, b in doc[S.M_SYMMETRY]["al_signs"]),
            symmetry=sym,
            character=_character_dict(int(ch["modulus"]), tuple(int(k) for k in ch["exponents"])),
            cusps=_cusp_infos(tuple(tuple(c) for c in doc[S.M_CUSPS])),
            solver={"Y": Y, "M0": M0, "Q": Q, "eps": eps},
            is_new=S.IS_NEW_FROM_CODE[isn], multiplicity=mult, basis_index=bi,
            coeffs=arr(cb, ck), coeff_errors=arr(eb, ek),
            extra=_codec.decode_tree(doc[S.M_EXTRA], arrays),
            fields={k: _codec.decode_tree(v, arrays) for k, v in doc.get(S.M_FIELDS, {}).items()},
            provenance={"package_version": p["package_version"], "created_utc": p["created_utc"],
                        "config": text(p["config_id"]), "run_id": p["run_id"],
                        "seq": seq},
        )

    @classmethod
    def from_stored(cls, sf: StoredForm) -> "FormRecord":
        f = sf.form
        fields = {fl.name: getattr(f, fl.name) for fl in dataclasses.fields(f)
                  if fl.name not in _KNOWN_FIELDS}
        fields.update(sf.unknown_fields)
        return cls(
            key=sf.key, level=f.level, R=f.R, R_error=f.R_error, hecke_residual=f.hecke_residual,
            parity=f.symmetry.parity, al_signs=tuple(f.symmetry.al_signs),
            symmetry=f.symmetry.label, character=sf.character.as_dict(), cusps=sf.cusps,
            solver=f.params.as_dict(), is_new=f.is_new, multiplicity=f.multiplicity,
            basis_index=f.basis_index, coeffs=f.coeffs, coeff_errors=f.coeff_errors,
            extra=f.extra, fields=fields, provenance=sf.provenance,
        )


@dataclass(frozen=True)
class SalvageReport:
    """What :func:`salvage` copied and what it left behind."""

    source: str
    target: str
    forms_copied: int
    attachments_copied: int
    damaged: tuple[tuple[str, str], ...]
    tasks_dropped: tuple[tuple[str, str], ...]


# ---------------------------------------------------------------- in-memory index


@dataclass
class _Att:
    src: int
    at: int
    length: int
    sum: bytes


@dataclass
class _Run:
    created_utc: str
    package_version: str
    config: str | None = None          # None: still in the base (read on demand)
    tasks: dict[str, tuple[str, list[str]]] | None = None
    base_tasks_ok: bool = True


class _Index:
    """Rows of every form in write order (columnar numpy), their labels and locations."""

    def __init__(self) -> None:
        self.buf = np.zeros(256, dtype=L.ROW_DTYPE)
        self.src = np.zeros(256, dtype=np.int8)
        self.alive = np.zeros(256, dtype=bool)
        self.n = 0
        self.keys: list[str] = []
        self.syms: list[str] = []
        self.chars: list[str] = []
        self.pos: dict[str, int] = {}
        self.damaged: dict[int, str] = {}     # position -> reason
        self.notes: dict[str, str] = {}       # damage without a form key
        self.atts: dict[int, dict[str, _Att]] = {}
        self.bad_atts: dict[tuple[int, str], str] = {}
        self.runs: dict[str, _Run] = {}
        self.texts: dict[str, str | None] = {}  # None: in the base
        self.next_seq = 0
        # duplicate detection: (level, symmetry, character, basis index) -> R-sorted
        # parallel lists (R values, positions), built on the first write
        self.buckets: dict[tuple, tuple[list[float], list[int]]] | None = None
        self.log_bytes = 0
        self.log_rows = 0
        self.base_bytes = 0
        self.base_rows = 0

    @property
    def rows(self) -> np.ndarray:
        return self.buf[:self.n]

    def append(self, row: np.ndarray, key: str, sym: str, char: str, src: int) -> int:
        if self.n == len(self.buf):
            cap = 2 * len(self.buf)
            for name in ("buf", "src", "alive"):
                old = getattr(self, name)
                new = np.zeros(cap, dtype=old.dtype)
                new[:self.n] = old[:self.n]
                setattr(self, name, new)
        i = self.n
        self.buf[i] = row
        self.src[i] = src
        self.alive[i] = True
        self.n += 1
        self.keys.append(key)
        self.syms.append(sym)
        self.chars.append(char)
        old = self.pos.get(key)
        if old is not None:  # a later record replaced the form without deleting it
            self.kill(old)
        self.pos[key] = i
        if self.buckets is not None:
            self._bucket_add(i)
        return i

    def bulk(self, rows: np.ndarray, keys: list[str], syms: list[str], chars: list[str],
             src: int) -> None:
        """Append many rows at once (loading)."""
        m = len(rows)
        need = self.n + m
        if need > len(self.buf):
            cap = max(need, 2 * len(self.buf))
            for name in ("buf", "src", "alive"):
                old = getattr(self, name)
                new = np.zeros(cap, dtype=old.dtype)
                new[:self.n] = old[:self.n]
                setattr(self, name, new)
        start = self.n
        self.buf[start:need] = rows
        self.src[start:need] = src
        self.alive[start:need] = True
        self.keys += keys
        self.syms += syms
        self.chars += chars
        self.n = need
        self.buckets = None
        pos = self.pos
        if len(set(keys)) == m and not any(k in pos for k in keys):  # all keys new
            pos.update(zip(keys, range(start, need)))
        else:  # a later row of a key replaces the earlier one
            for j, k in enumerate(keys):
                old = self.pos.get(k)
                if old is not None:
                    self.kill(old)
                self.pos[k] = start + j

    def kill(self, i: int) -> None:
        self.alive[i] = False
        self.atts.pop(i, None)
        self.damaged.pop(i, None)
        if self.pos.get(self.keys[i]) == i:
            del self.pos[self.keys[i]]
        if self.buckets is not None:
            b = self.buckets.get(self.bucket(i))
            if b is not None:
                R = float(self.buf[i]["R"])
                j = bisect.bisect_left(b[0], R)
                while j < len(b[0]) and b[0][j] == R:
                    if b[1][j] == i:
                        del b[0][j], b[1][j]
                        break
                    j += 1

    def bucket(self, i: int) -> tuple:
        r = self.buf[i]
        return (int(r["level"]), self.syms[i], self.chars[i], int(r["basis_index"]))

    def _bucket_add(self, i: int) -> None:
        Rs, ps = self.buckets.setdefault(self.bucket(i), ([], []))  # type: ignore[union-attr]
        R = float(self.buf[i]["R"])
        j = bisect.bisect_right(Rs, R)
        Rs.insert(j, R)
        ps.insert(j, i)

    def build_buckets(self) -> None:
        if self.buckets is None:
            live = np.flatnonzero(self.alive[:self.n])
            rows = self.buf[live]
            order = np.lexsort((live, rows["R"]))  # by R, then write order
            levels, Rs, bis = (rows[f][order].tolist() for f in ("level", "R", "basis_index"))
            self.buckets = {}
            for i, lev, R, b in zip(live[order].tolist(), levels, Rs, bis):
                Rl, pl = self.buckets.setdefault((lev, self.syms[i], self.chars[i], b), ([], []))
                Rl.append(R)
                pl.append(i)

    def near(self, key: tuple, R: float, tol: float) -> list[int]:
        """Positions of the bucket ``key`` with |R_i - R| <= tol."""
        self.build_buckets()
        b = self.buckets.get(key)  # type: ignore[union-attr]
        if not b:
            return []
        lo = bisect.bisect_left(b[0], R - tol)
        hi = bisect.bisect_right(b[0], R + tol)
        return b[1][lo:hi]

    def live_positions(self) -> np.ndarray:
        return np.flatnonzero(self.alive[:self.n])


class _Txn:
    def __init__(self, start_n: int, next_seq: int) -> None:
        self.depth = 1
        self.start_n = start_n
        self.next_seq0 = next_seq
        self.ops: list[dict] = []
        self.data = bytearray()
        self.rows: list[int] = []          # index positions of the forms added
        self.labels = bytearray()
        self.atts: list[_Att] = []         # attachments written in this transaction

    def put(self, b: bytes) -> int:
        """Append bytes to the data part (8-byte aligned); return their offset."""
        at = len(self.data)
        self.data += b
        pad = (-len(self.data)) % 8
        if pad:
            self.data += b"\0" * pad
        return at


# ---------------------------------------------------------------- validation and encoding


def _validate_form(form: Form) -> None:
    from maasscomp.hejhal.types import SolverParams, SymmetryClass
    from maasscomp.spectrum.form import Form

    if not isinstance(form, Form):
        raise InputError(f"expected a maasscomp Form, got {type(form).__name__}")
    if isinstance(form.level, bool) or not isinstance(form.level, (int, np.integer)) or form.level < 1:
        raise InputError(f"Form.level {form.level!r} is not allowed; use an integer >= 1")
    for name in ("R", "R_error", "hecke_residual"):
        v = getattr(form, name)
        if isinstance(v, bool) or not isinstance(v, (int, float, np.integer, np.floating)):
            raise InputError(f"Form.{name} {v!r} is not allowed; use a real number")
        if math.isnan(float(v)):
            raise InputError(f"Form.{name} {v!r} is not allowed; use a real number, not NaN")
    if not math.isfinite(float(form.R)):
        raise InputError(f"Form.R {form.R!r} is not allowed; use a finite real number")
    if not isinstance(form.symmetry, SymmetryClass):
        raise InputError(f"Form.symmetry {form.symmetry!r} is not allowed; use a SymmetryClass")
    if not isinstance(form.params, SolverParams):
        raise InputError(f"Form.params {form.params!r} is not allowed; use a SolverParams")
    for name in ("coeffs", "coeff_errors"):
        a = getattr(form, name)
        if (not isinstance(a, np.ndarray) or a.ndim != 2
                or a.dtype not in (np.dtype(np.float64), np.dtype(np.complex128))):
            desc = (f"array of shape {a.shape} and dtype {a.dtype}" if isinstance(a, np.ndarray)
                    else type(a).__name__)
            raise InputError(
                f"Form.{name} ({desc}) is not allowed; use a 2-d float64 or complex128 numpy "
                "array of shape (n_cusps, M)"
            )
        bad = ~np.isfinite(a) if name == "coeffs" else np.isnan(a)
        if bad.any():
            j, n = (int(x) for x in np.argwhere(bad)[0])
            what = "not finite" if name == "coeffs" else "NaN"
            raise InputError(
                f"Form.{name}[{j}, {n}] (cusp {j}, n = {n + 1}) is {a[j, n].item()!r} at level "
                f"{form.level}, R = {float(form.R)!r}: {what} values cannot be stored "
                f"({int(bad.sum())} such entries); the form was not computed to the end")
    if form.coeffs.shape != form.coeff_errors.shape:
        raise InputError(
            f"Form.coeff_errors shape {form.coeff_errors.shape} does not match "
            f"Form.coeffs shape {form.coeffs.shape}"
        )
    if form.coeffs.shape[0] < 1 or form.coeffs.shape[1] < 1:
        raise InputError(f"Form.coeffs of shape {form.coeffs.shape} is empty; store at least "
                         "c_inf(1)")
    if form.is_new not in (True, False, None):
        raise InputError(f"Form.is_new {form.is_new!r} is not allowed; use True, False or None")
    for name in ("multiplicity", "basis_index"):
        v = getattr(form, name)
        lo = 1 if name == "multiplicity" else 0
        if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < lo:
            raise InputError(f"Form.{name} {v!r} is not allowed; use an integer >= {lo}")
    char = getattr(form, "character", None)
    if char is not None and (not isinstance(char, DirichletCharacter) or char.modulus != form.level):
        raise InputError(f"Form.character {char!r} is not allowed; use a DirichletCharacter "
                         f"modulo the level {form.level}")


@functools.lru_cache(maxsize=4096)
def _character(modulus: int, exponents: tuple[int, ...]) -> DirichletCharacter:
    return DirichletCharacter(modulus, exponents)


@functools.lru_cache(maxsize=4096)
def _cusp_infos(rows: tuple[tuple, ...]) -> tuple[CuspInfo, ...]:
    return tuple(CuspInfo(j, str(c[0]), int(c[1]), int(c[2]), int(c[3]),
                          ((int(c[4]), int(c[5])), (int(c[6]), int(c[7]))))
                 for j, c in enumerate(rows))


def _character_of(form: Form) -> DirichletCharacter:
    char = getattr(form, "character", None)
    if char is not None:
        return char
    return _character(int(form.level), (0,) * len(unit_generators(int(form.level))))


def _cusps_of(level: int, n_cusps: int) -> list[list]:
    cusps = gamma0(int(level)).cusps
    if n_cusps > len(cusps):
        raise InputError(
            f"Form.coeffs has {n_cusps} rows, but Gamma0({level}) has only {len(cusps)} cusps; "
            "row j holds the expansion at cusp j of gamma0(level).cusps")
    out = []
    for c in cusps[:n_cusps]:
        a, cc = c.representative
        (m11, m12), (m21, m22) = c.scaling
        out.append([c.name, a, cc, int(c.width), m11, m12, m21, m22])
    return out


def _values_bytes(a: np.ndarray) -> tuple[bytes, int]:
    a = np.ascontiguousarray(a)
    if a.dtype == np.complex128:
        return a.astype("<c16", copy=False).tobytes(), L.KIND_COMPLEX
    return a.astype("<f8", copy=False).tobytes(), L.KIND_REAL


@dataclass(frozen=True)
class _Encoded:
    """A form ready to be placed: everything but the locations."""

    row: np.ndarray
    labels: bytes
    meta: bytes
    coeffs: bytes
    errors: bytes


def _encode_form(f: Form, key: str, seq: int, created_utc: str, run_id: str,
                 config_id: str, package_version: str) -> _Encoded:
    char = _character_of(f)
    n_cusps, M = (int(x) for x in f.coeffs.shape)
    extra_doc, extra_arrays = _codec.encode_extra(f.extra)
    fields_doc: dict[str, Any] = {}
    arrays = dict(extra_arrays)
    for fld in dataclasses.fields(f):  # fields added to Form later (or by a subclass)
        if fld.name in _KNOWN_FIELDS:
            continue
        doc, arrs = _codec.encode_tree(getattr(f, fld.name), f"Form.{fld.name}", f"f{fld.name}.")
        fields_doc[fld.name] = doc
        arrays.update(arrs)
    meta_doc = {
        S.M_SYMMETRY: {"parity": f.symmetry.parity,
                       "al_signs": [[int(p), int(s)] for p, s in f.symmetry.al_signs]},
        S.M_CHARACTER: {"modulus": char.modulus, "exponents": list(char.exponents)},
        S.M_CUSPS: _cusps_of(f.level, n_cusps),
        S.M_EXTRA: extra_doc,
        S.M_FIELDS: fields_doc,
        S.M_PROVENANCE: {"package_version": package_version, "created_utc": created_utc,
                         "run_id": run_id, "config_id": config_id},
    }
    meta = L.pack_blob(meta_doc, arrays)
    cb, ck = _values_bytes(f.coeffs)
    eb, ek = _values_bytes(f.coeff_errors)
    row = np.zeros((), dtype=L.ROW_DTYPE)
    row["seq"] = seq
    row["level"] = int(f.level)
    row["R"] = float(f.R)
    row["R_error"] = float(f.R_error)
    row["hecke_residual"] = float(f.hecke_residual)
    row["solver_Y"] = float(f.params.Y)
    row["solver_eps"] = float(f.params.eps)
    row["solver_M0"] = int(f.params.M0)
    row["solver_Q"] = int(f.params.Q)
    row["multiplicity"] = int(f.multiplicity)
    row["basis_index"] = int(f.basis_index)
    row["n_cusps"] = n_cusps
    row["M"] = M
    row["parity"] = L.PARITY_CODES[f.symmetry.parity]
    row["is_new"] = S.IS_NEW_CODES[f.is_new]
    row["coeffs_kind"] = ck
    row["errors_kind"] = ek
    row["char_modulus"] = char.modulus
    row["char_conductor"] = char.conductor
    row["meta_len"] = len(meta)
    row["labels_len"] = 0
    c0 = np.asarray(f.coeffs[0, :L.PREVIEW], dtype=np.complex128)
    prev = np.zeros(2 * L.PREVIEW)
    prev[0:2 * len(c0):2] = c0.real
    prev[1:2 * len(c0):2] = c0.imag
    row["preview"] = prev
    labels = L.label_bytes(key, f.symmetry.label, char.label)
    row["labels_len"] = len(labels)
    row["data_sum"] = np.frombuffer(L.content_digest(row, labels, meta, cb, eb), dtype=np.uint8)
    return _Encoded(row, labels, meta, cb, eb)


def _text_id(text: str) -> str:
    return L.digest(text.encode("utf-8")).hex()


# ---------------------------------------------------------------- file checks


def _check_root(h: h5py.File, path: Path) -> int:
    fmt = h.attrs.get(S.ROOT_FORMAT)
    if fmt is None or _attr_str(fmt) != S.FORMAT_NAME:
        found = "missing" if fmt is None else repr(_attr_str(fmt))
        raise StoreError(
            f"{path} is an HDF5 file but not a maasscomp store: root attribute "
            f"{S.ROOT_FORMAT!r} is {found}, expected {S.FORMAT_NAME!r}"
        )
    ver = h.attrs.get(S.ROOT_SCHEMA_VERSION)
    try:
        v = int(ver)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        raise StoreError(
            f"{path}: root attribute {S.ROOT_SCHEMA_VERSION!r} is {ver!r}; expected an integer "
            f"between 1 and {S.SCHEMA_VERSION}"
        ) from None
    if v > S.SCHEMA_VERSION:
        raise StoreError(
            f"{path} has store schema version {v}, newer than version {S.SCHEMA_VERSION} "
            f"read by maasscomp {__version__}; upgrade maasscomp to read it"
        )
    if v not in S.READABLE_VERSIONS:
        raise StoreError(f"{path}: store schema version {v} is invalid; expected 1..{S.SCHEMA_VERSION}")
    for g in (S.FORMS_GROUP, S.RUNS_GROUP):
        if not isinstance(h.get(g), h5py.Group):
            raise StoreError(f"{path} is damaged: group /{g} of a maasscomp store is missing")
    return v


def _check_store_file(path: Path, shown: Path) -> None:
    """Raise StoreError unless ``path`` is a file that may be a maasscomp store."""
    if not path.exists():
        if os.path.islink(shown):
            raise StoreError(f"store file {shown} is a symlink to {path}, which does not exist")
        raise StoreError(f"store file {shown} does not exist")
    if path.is_dir():
        raise StoreError(f"store path {shown} is a directory; expected a maasscomp HDF5 store file")
    try:
        with open(path, "rb") as fh:
            head = fh.read(L.USERBLOCK_SIZE + 8)
    except OSError as exc:
        raise StoreError(f"cannot read store file {shown}: {_atomic.cause(exc)}") from exc
    if head.startswith(L.FILE_MAGIC):
        return
    try:
        ok = h5py.is_hdf5(path)
    except OSError as exc:
        raise StoreError(f"cannot read store file {shown}: {exc}") from exc
    if not ok:
        raise StoreError(
            f"{shown} is not an HDF5 file; expected a maasscomp store "
            f"(HDF5 file with root attribute {S.ROOT_FORMAT}={S.FORMAT_NAME!r})"
        )
    try:
        with h5py.File(path, "r", locking=False) as h:
            _check_root(h, shown)
    except StoreError:
        raise
    except OSError as exc:
        raise StoreError(f"cannot open store file {shown}: {exc}") from exc


# ---------------------------------------------------------------- the store


class Store:
    """A file of Maass forms with their provenance, attachments and run manifests.

    Open with :meth:`Store.open`; use as a context manager.  Reads see a consistent
    snapshot.  Writing (modes ``"a"`` and ``"w"``) takes an exclusive lock ``<path>.lock``
    beside the store's real path; each mutating call is its own transaction unless grouped
    with :meth:`transaction`::

        with Store.open("forms.h5", "a", create=True) as st:
            with st.transaction():          # one atomic commit
                keys = st.add_forms(forms, on_duplicate="skip", run_id=rid)
                st.mark_task_done(task_id, keys, run_id=rid)

    Damaged forms (checksum mismatch, undecodable data) are skipped by :meth:`select`,
    :meth:`summary_rows`, :meth:`iter_forms` and the exports, and listed by
    :meth:`damaged`; :meth:`get` raises :class:`~maasscomp.errors.DamagedFormError`.
    """

    # ------------------------------------------------------------------ opening

    def __init__(self, path: Path, real: Path, mode: str, durable: bool,
                 lock: _atomic.WriterLock | None) -> None:
        self._path = path
        self._real = real
        self._mode = mode
        self._durable = durable
        self._lock = lock
        self._fd = -1
        self._h5: h5py.File | None = None
        self._version = S.SCHEMA_VERSION
        self._header: L.FileHeader | None = None
        self._end = 0
        self._valid_end = 0
        self._idx = _Index()
        self._txn: _Txn | None = None
        self._broken = False
        self._closed = False
        self._root: dict[str, Any] = {}

    @classmethod
    def open(cls, path: str | os.PathLike, mode: str = "r", *, create: bool = False,
             durable: bool = True, lock_timeout: float = 0.0) -> "Store":
        """Open a store file.

        Parameters
        ----------
        path : path-like
            The store file (a symlink is followed; the store is its target).
        mode : {"r", "a", "w"}
            ``"r"`` read only (the file must exist; a read-only file is fine); ``"a"`` read
            and append to an existing store (``create=True``: make an empty store when the
            file is missing); ``"w"`` start an empty store, replacing an existing maasscomp
            store (a file that is not a store is never overwritten).
        create : bool
            With mode ``"a"``: create a missing store.  Nothing else creates one, so a
            mistyped path is an error instead of a new empty file.
        durable : bool
            fsync every committed transaction.  Crash safety against killed processes does
            not need it; safety against power loss does.
        lock_timeout : float
            Seconds to wait for another writer to release the store (write modes).

        Raises
        ------
        StoreError
            Missing file, not a store, a newer schema, locked by another writer, or (write
            modes) a store this user may not write.
        InputError
            Unknown mode.
        """
        if mode not in MODES:
            raise InputError(f"store mode {mode!r} is not allowed; use one of {', '.join(MODES)}")
        p = Path(os.fspath(path))
        try:
            real = _atomic.real_path(p)
        except OSError as exc:
            raise StoreError(f"cannot resolve store path {p}: {_atomic.cause(exc)}") from exc
        if mode == "r":
            _check_store_file(real, p)
            st = cls(p, real, mode, durable, None)
            try:
                st._load()
            except BaseException:
                st.close()
                raise
            return st
        if real.is_dir():
            raise StoreError(f"store path {p} is a directory; expected a maasscomp HDF5 store file")
        if not real.parent.is_dir():
            raise StoreError(f"cannot create store {p}: directory {real.parent} does not exist")
        exists = real.exists()
        if exists:
            _check_store_file(real, p)  # never clobber or append to a foreign file
            denied = _atomic.write_denied(real)
            if denied:
                raise StoreError(f"store {p} is not writable by this user: {denied}; open it "
                                 "read-only, or write to a copy")
            ident = _atomic.identity_of(real)
            if ident.nlink > 1:
                raise StoreError(
                    f"store {p} has {ident.nlink} hard links; two names of one file would not "
                    "exclude each other's writers; remove the other link or write to a copy")
        elif mode == "a" and not create:
            raise StoreError(f"store file {p} does not exist (only a run creates a store; "
                             "check the path)")
        elif not os.access(real.parent, os.W_OK | os.X_OK):
            raise StoreError(f"cannot create store {p}: directory {real.parent} is not writable")
        lock = _atomic.WriterLock(real, lock_timeout)
        st = cls(p, real, mode, durable, lock)
        try:
            for stale in _atomic.stale_temps(real):
                with contextlib.suppress(OSError):
                    stale.unlink()
            if mode == "w" or not real.exists():
                st._create_empty()
            st._load()
            if st._idx.notes and st._version == 2:
                raise StoreError(
                    f"store {p} is damaged ({'; '.join(st._idx.notes.values())}); it can be read "
                    f"but not written: copy its intact forms with `maasscomp salvage {p} NEW`")
            if st._version == 1:
                st._migrate()
            elif st._valid_end < os.fstat(st._fd).st_size:
                st._cut_unfinished_tail()
            return st
        except BaseException:
            st.close()
            raise

    def _create_empty(self) -> None:
        _atomic.check_room(self._real, 64 * 1024, 64 * 1024, "a new empty store")
        tmp = _atomic.temp_path_for(self._real)
        ident = _atomic.identity_of(self._real) if self._real.exists() else None
        sid = secrets.token_bytes(16)
        try:
            _write_base(tmp, root={S.ROOT_CREATED_UTC: utc_now_iso(), S.ROOT_NEXT_SEQ: 0,
                                   S.ROOT_STORE_ID: sid.hex()},
                        store_id=sid, source=None, positions=np.zeros(0, dtype=np.int64),
                        runs={}, texts={})
            if ident is not None:
                _atomic.apply_identity(tmp, ident)
            _atomic.commit_temp(tmp, self._real, self._durable)
        except OSError as exc:
            with contextlib.suppress(OSError):
                tmp.unlink()
            raise StoreWriteError(f"cannot create store {self._path}: {_atomic.cause(exc)}") from exc
        except BaseException:
            with contextlib.suppress(OSError):
                tmp.unlink()
            raise

    def close(self, *, compact: bool = True) -> None:
        """Close the store (an open explicit transaction is rolled back).

        A writer whose commit records have grown as large as the base compacts first
        (``compact=False`` skips it; see :meth:`compact`).
        """
        if self._closed:
            return
        try:
            if self._txn is not None:
                self._txn = None
            elif compact and self._lock is not None and self._fd >= 0 and self._should_compact():
                try:
                    self.compact()
                except (StoreError, OSError) as exc:
                    log.warning("store %s: compaction skipped: %s", self._path, exc)
        finally:
            self._close_handles()
            if self._lock is not None:
                self._lock.release()
                self._lock = None
            self._closed = True

    def _close_handles(self) -> None:
        if self._h5 is not None:
            with contextlib.suppress(Exception):
                self._h5.close()
            self._h5 = None
        if self._fd >= 0:
            with contextlib.suppress(OSError):
                os.close(self._fd)
            self._fd = -1

    def __enter__(self) -> "Store":
        return self

    def __exit__(self, *exc: Any) -> None:
        self.close()

    def __del__(self) -> None:  # pragma: no cover - best effort
        with contextlib.suppress(Exception):
            self.close(compact=False)

    def __repr__(self) -> str:
        state = "closed" if self._closed else f"mode={self._mode!r}"
        return f"Store({str(self._path)!r}, {state})"

    @property
    def path(self) -> Path:
        """The path the store was opened with."""
        return self._path

    @property
    def real_path(self) -> Path:
        """The file the store lives in (symlinks resolved)."""
        return self._real

    @property
    def mode(self) -> str:
        return self._mode

    # ------------------------------------------------------------------ loading

    def _load(self) -> None:
        """Read the index of the file (base and records, or a version-1 file)."""
        self._close_handles()
        self._idx = _Index()
        flags = os.O_RDWR if self._mode != "r" else os.O_RDONLY
        for _ in range(8):
            try:
                fd = os.open(self._real, flags)
            except OSError as exc:
                raise StoreError(f"cannot open store file {self._path}: {_atomic.cause(exc)}") from exc
            self._fd = fd
            head = os.pread(fd, L.USERBLOCK_SIZE, 0)
            try:
                self._header = L.unpack_file_header(head)
                header_bad = False
            except ValueError:
                self._header, header_bad = None, True
            try:
                h = h5py.File(self._real, "r", locking=False)
            except OSError as exc:
                if head.startswith(L.FILE_MAGIC):
                    # the HDF5 part is unreadable: keep what the records hold
                    self._h5 = None
                    self._version = 2
                    self._idx.notes["base"] = f"the HDF5 part cannot be opened ({exc})"
                    self._replay(self._find_log_start(header_bad))
                    return
                raise StoreError(f"cannot open store file {self._path}: {exc}") from exc
            if os.fstat(h.id.get_vfd_handle()).st_ino == os.fstat(fd).st_ino:
                self._h5 = h
                break
            h.close()  # compacted between the two opens: try again
            os.close(fd)
            self._fd = -1
        else:  # pragma: no cover - needs a compaction at every attempt
            raise StoreError(f"store {self._path} kept changing while being opened; retry")
        self._version = _check_root(self._h5, self._path)
        self._root = {k: (_attr_str(v) if isinstance(v, (str, bytes)) else np.asarray(v).item())
                      for k, v in self._h5.attrs.items()}
        if self._version == 1:
            self._load_v1()
            return
        if header_bad:
            self._idx.notes["header"] = "the file header fails its checksum"
        elif self._header is None:
            self._idx.notes["header"] = "the file header is missing"
        self._load_base()
        self._replay(self._find_log_start(self._header is None))

    def _find_log_start(self, scan: bool) -> int:
        if not scan and self._header is not None:
            return self._header.base_end
        # no usable header: the first record after the HDF5 part starts with its magic
        size = os.fstat(self._fd).st_size
        pos, chunk = L.USERBLOCK_SIZE, 4 * 2**20
        while pos < size:
            buf = os.pread(self._fd, chunk + 8, pos)
            j = buf.find(L.REC_MAGIC)
            while j >= 0:
                if L.unpack_record_head(os.pread(self._fd, L.REC_HEAD_SIZE, pos + j)) is not None:
                    return pos + j
                j = buf.find(L.REC_MAGIC, j + 1)
            pos += chunk
        return size

    def _load_base(self) -> None:
        h, idx = self._h5, self._idx
        assert h is not None
        idx.next_seq = int(self._root.get(S.ROOT_NEXT_SEQ, 0))
        try:
            rows = h[S.D_ROWS][...]
            labels = h[S.D_LABELS][...].tobytes()
            if rows.dtype != L.ROW_DTYPE:
                raise ValueError(f"dataset /{S.D_ROWS} has an unexpected type")
        except (KeyError, OSError, ValueError, TypeError) as exc:
            idx.notes["rows"] = f"the form table cannot be read ({exc})"
            rows, labels = np.zeros(0, dtype=L.ROW_DTYPE), b""
        n = len(rows)
        good = np.ones(n, dtype=bool)
        try:
            sums = h[S.D_BLOCK_SUMS][...]
        except (KeyError, OSError):
            sums = None
        for b0 in range(0, n, S.BLOCK_ROWS):
            b1 = min(n, b0 + S.BLOCK_ROWS)
            blk = rows[b0:b1]
            l0 = int(blk["labels_at"][0])
            l1 = int(blk["labels_at"][-1] + blk["labels_len"][-1])
            ok = (sums is not None and b0 // S.BLOCK_ROWS < len(sums) and 0 <= l0 <= l1 <= len(labels)
                  and L.digest(blk.tobytes(), labels[l0:l1]) == bytes(sums[b0 // S.BLOCK_ROWS]))
            if not ok:  # find the damaged rows of this block
                for i in range(b0, b1):
                    a, m = int(rows["labels_at"][i]), int(rows["labels_len"][i])
                    lab = labels[a:a + m] if 0 <= a <= a + m <= len(labels) else b""
                    good[i] = L.row_digest(rows[i], lab) == bytes(rows["row_sum"][i])
        keys, syms, chars = _split_all_labels(rows, labels, good)
        reasons = {int(i): "its index row fails its checksum" for i in np.flatnonzero(~good)}
        try:
            voff = _offset(h[S.D_VALUES])
            moff = _offset(h[S.D_META])
        except (KeyError, OSError) as exc:
            voff = moff = None
            for i in range(n):
                reasons.setdefault(i, f"the coefficient pools cannot be read ({exc})")
        rows = rows.copy()
        if voff is not None:
            rows["coeffs_at"] = voff + 8 * rows["coeffs_at"]
            rows["errors_at"] = voff + 8 * rows["errors_at"]
            rows["meta_at"] = moff + rows["meta_at"]
        start = idx.n
        idx.bulk(rows, keys, syms, chars, _SRC_FILE)
        for i, why in reasons.items():
            idx.damaged[start + i] = why
        idx.base_rows = n
        idx.base_bytes = self._header.base_end if self._header else os.fstat(self._fd).st_size
        by_seq = dict(zip(rows["seq"].tolist(), range(start, start + n)))
        # attachments
        try:
            arows = h[S.D_ATT_ROWS][...]
            names = h[S.D_ATT_NAMES][...].tobytes()
            boff = _offset(h[S.D_ATT_BLOBS])
            for r in arows:
                pos = by_seq.get(int(r["form_seq"]))
                if pos is None:
                    continue
                a, m = int(r["name_at"]), int(r["name_len"])
                name = names[a:a + m].decode("utf-8", "replace")
                idx.atts.setdefault(pos, {})[name] = _Att(
                    _SRC_FILE, (boff or 0) + int(r["blob_at"]), int(r["blob_len"]), bytes(r["sum"]))
        except (KeyError, OSError, ValueError) as exc:
            idx.notes["attachments"] = f"the attachment table cannot be read ({exc})"
        # runs and texts (contents read on demand)
        for rid, g in h[S.RUNS_GROUP].items():
            try:
                idx.runs[rid] = _Run(_attr_str(g.attrs[S.RUN_A_CREATED_UTC]),
                                     _attr_str(g.attrs[S.RUN_A_PACKAGE_VERSION]))
            except (KeyError, OSError) as exc:
                idx.runs[rid] = _Run("", "", config="", tasks={}, base_tasks_ok=False)
                idx.notes[f"run {rid}"] = f"the record of run {rid!r} is damaged ({exc})"
        tg = h.get(S.TEXTS_GROUP)
        if isinstance(tg, h5py.Group):
            for tid in tg:
                idx.texts[tid] = None

    def _replay(self, start: int) -> None:
        """Apply the commit records from ``start`` to the end of the file."""
        idx = self._idx
        fd = self._fd
        size = os.fstat(fd).st_size
        off = start
        self._valid_end = start
        while off < size:
            rh = L.unpack_record_head(os.pread(fd, L.REC_HEAD_SIZE, off))
            complete = (rh is not None and off + rh.total <= size
                        and L.record_tail_ok(os.pread(fd, L.REC_TAIL_SIZE,
                                                      off + rh.total - L.REC_TAIL_SIZE), rh.total))
            if not complete:
                nxt = self._next_record(off + 1, size)
                if nxt is None:
                    break  # an unfinished commit at the end: not part of the store
                idx.notes[f"bytes {off}"] = (f"{nxt - off} bytes at offset {off} are not a "
                                             "commit record; the forms in them are lost")
                off = nxt
                continue
            assert rh is not None
            index = os.pread(fd, rh.index_len, off + L.REC_HEAD_SIZE)
            if L.digest(index) != rh.index_sum:
                idx.notes[f"record {off}"] = (f"the commit record at offset {off} fails its "
                                              "checksum; the forms it added are lost")
            else:
                try:
                    self._apply(L.unpack_record_index(index),
                                off + L.REC_HEAD_SIZE + rh.index_len, _SRC_FILE)
                except (ValueError, KeyError, TypeError, IndexError) as exc:
                    idx.notes[f"record {off}"] = (f"the commit record at offset {off} cannot be "
                                                  f"decoded ({exc}); its changes are lost")
            idx.log_bytes += rh.total
            off += rh.total
            self._valid_end = off
        self._end = self._valid_end

    def _next_record(self, pos: int, size: int) -> int | None:
        chunk = 4 * 2**20
        while pos < size:
            buf = os.pread(self._fd, chunk + 8, pos)
            j = buf.find(L.REC_MAGIC)
            while j >= 0:
                rh = L.unpack_record_head(os.pread(self._fd, L.REC_HEAD_SIZE, pos + j))
                if rh is not None and pos + j + rh.total <= size and L.record_tail_ok(
                        os.pread(self._fd, L.REC_TAIL_SIZE, pos + j + rh.total - L.REC_TAIL_SIZE),
                        rh.total):
                    return pos + j
                j = buf.find(L.REC_MAGIC, j + 1)
            pos += chunk
        return None

    def _apply(self, rec: L.RecordIndex, data_start: int, src: int) -> None:
        """Apply the ops of one record (data offsets relative to ``data_start``)."""
        idx = self._idx
        rows = rec.rows.copy()
        rows["coeffs_at"] += data_start
        rows["errors_at"] += data_start
        rows["meta_at"] += data_start
        batch: list[int] = []

        def flush() -> None:
            if not batch:
                return
            if batch == list(range(len(rec.rows))):  # the whole record: split at once
                good = np.ones(len(batch), dtype=bool)
                ks, ss, cs = _split_all_labels(rec.rows, rec.labels.rstrip(b"\0"), good)
                if good.all():
                    idx.bulk(rows, ks, ss, cs, src)
                    idx.log_rows += len(batch)
                    batch.clear()
                    return
            ks, ss, cs = [], [], []
            for i in batch:
                r = rec.rows[i]
                a, m = int(r["labels_at"]), int(r["labels_len"])
                k, s_, c = L.split_labels(rec.labels[a:a + m])
                ks.append(k)
                ss.append(s_)
                cs.append(c)
            idx.bulk(rows[batch], ks, ss, cs, src)
            idx.log_rows += len(batch)
            batch.clear()

        for op in rec.ops:
            kind = op.get("op")
            if kind == "form":
                batch.append(int(op["row"]))
                continue
            flush()
            if kind == "delete":
                pos = idx.pos.get(op["key"])
                if pos is not None:
                    idx.kill(pos)
            elif kind == "attach":
                pos = idx.pos.get(op["key"])
                if pos is not None:
                    idx.atts.setdefault(pos, {})[op["name"]] = _Att(
                        src, data_start + int(op["at"]), int(op["len"]), bytes.fromhex(op["sum"]))
            elif kind == "run":
                idx.runs.setdefault(op["id"], _Run(op["created_utc"], op["package_version"],
                                                   config=op["config"], tasks={}))
            elif kind == "task":
                idx.runs.setdefault(op["run"], _Run(op["utc"], __version__, config="", tasks={}))
                self._run_tasks(op["run"])[op["id"]] = (op["utc"], list(op["keys"]))
            elif kind == "text":
                idx.texts[op["id"]] = op["text"]
            elif kind == "seq":
                idx.next_seq = max(idx.next_seq, int(op["next"]))
        flush()

    def _load_v1(self) -> None:
        """Index of a schema-version-1 file: one HDF5 group per form."""
        h, idx = self._h5, self._idx
        assert h is not None
        idx.next_seq = int(self._root.get(S.ROOT_NEXT_SEQ, 0))
        entries = []
        for key in h[S.FORMS_GROUP]:
            row = np.zeros((), dtype=L.ROW_DTYPE)
            sym = char = ""
            why = None
            try:
                g = h[S.FORMS_GROUP][key]
                a = g.attrs
                row["seq"] = int(a[S.A_SEQ])
                row["level"] = int(a[S.A_LEVEL])
                row["R"] = float(a[S.A_R])
                row["R_error"] = float(a[S.A_R_ERROR])
                row["hecke_residual"] = float(a[S.A_HECKE_RESIDUAL])
                row["is_new"] = int(a[S.A_IS_NEW])
                row["multiplicity"] = int(a[S.A_MULTIPLICITY])
                row["basis_index"] = int(a[S.A_BASIS_INDEX])
                row["parity"] = L.PARITY_CODES[_attr_str(a[S.A_PARITY])]
                sym = _attr_str(a[S.A_SYMMETRY_LABEL])
                char = DirichletCharacter.trivial(int(row["level"])).label
                shape = g[S.D_COEFFS].shape
                row["n_cusps"], row["M"] = shape
                row["coeffs_kind"] = int(g[S.D_COEFFS].dtype.kind == "c")
                row["errors_kind"] = int(g[S.D_COEFF_ERRORS].dtype.kind == "c")
                c0 = np.asarray(g[S.D_COEFFS][0, :L.PREVIEW], dtype=np.complex128)
                prev = np.zeros(2 * L.PREVIEW)
                prev[0:2 * len(c0):2] = c0.real
                prev[1:2 * len(c0):2] = c0.imag
                row["preview"] = prev
            except (KeyError, OSError, ValueError, TypeError, IndexError, RuntimeError) as exc:
                why = f"cannot read its index fields ({type(exc).__name__}: {exc})"
            entries.append((int(row["seq"]) if why is None else 2**62 + len(entries), key, row, sym, char, why))
        entries.sort(key=lambda e: e[0])
        for _, key, row, sym, char, why in entries:
            pos = idx.append(row, key, sym, char, _SRC_V1)
            if why is not None:
                idx.damaged[pos] = why
        idx.base_rows = len(entries)
        idx.base_bytes = os.fstat(self._fd).st_size
        for rid, g in h[S.RUNS_GROUP].items():
            try:
                tasks = {}
                for tg in g[S.RUN_TASKS_GROUP].values():
                    tasks[_attr_str(tg.attrs[S.TASK_A_ID])] = (
                        _attr_str(tg.attrs[S.TASK_A_DONE_UTC]),
                        json.loads(_attr_str(tg.attrs[S.TASK_A_FORM_KEYS])))
                idx.runs[rid] = _Run(_attr_str(g.attrs[S.RUN_A_CREATED_UTC]),
                                     _attr_str(g.attrs[S.RUN_A_PACKAGE_VERSION]),
                                     config=g[S.RUN_D_CONFIG].asstr()[()], tasks=tasks)
            except (KeyError, OSError, ValueError, TypeError) as exc:
                idx.runs[rid] = _Run("", "", config="", tasks={}, base_tasks_ok=False)
                idx.notes[f"run {rid}"] = f"the record of run {rid!r} is damaged ({exc})"
        for pos in range(idx.n):
            if pos in idx.damaged:
                continue
            with contextlib.suppress(KeyError, OSError):
                att = h[S.FORMS_GROUP][idx.keys[pos]].get(S.G_ATTACHMENTS)
                if att is not None:
                    idx.atts[pos] = {name: _Att(_SRC_V1, 0, 0, b"") for name in att}

    # ------------------------------------------------------------------ raw reads

    def _pread(self, src: int, at: int, n: int) -> bytes:
        if n == 0:
            return b""
        if src == _SRC_PENDING:
            assert self._txn is not None
            return bytes(self._txn.data[at:at + n])
        out = os.pread(self._fd, n, at)
        if len(out) != n:
            raise ValueError(f"{n - len(out)} bytes missing at the end of the file")
        return out

    def _form_parts(self, pos: int) -> tuple[np.ndarray, bytes, bytes, bytes, bytes]:
        """(row, labels, meta, coeffs bytes, errors bytes) of a version-2 form, verified."""
        idx = self._idx
        key = idx.keys[pos]
        if pos in idx.damaged:
            raise DamagedFormError(f"form {key!r} in {self._path} is damaged: {idx.damaged[pos]}",
                                   key)
        row = idx.buf[pos]
        src = int(idx.src[pos])
        try:
            nvals = int(row["n_cusps"]) * int(row["M"])
            cb = self._pread(src, int(row["coeffs_at"]), 8 * nvals * (1 + int(row["coeffs_kind"])))
            eb = self._pread(src, int(row["errors_at"]), 8 * nvals * (1 + int(row["errors_kind"])))
            meta = self._pread(src, int(row["meta_at"]), int(row["meta_len"]))
        except (OSError, ValueError) as exc:
            return self._damage(pos, f"its data cannot be read ({exc})")
        labels = L.label_bytes(key, idx.syms[pos], idx.chars[pos])
        if L.content_digest(row, labels, meta, cb, eb) != bytes(row["data_sum"]):
            return self._damage(pos, "its stored bytes fail the form's checksum")
        return row, labels, meta, cb, eb

    def _damage(self, pos: int, why: str):
        self._idx.damaged[pos] = why
        key = self._idx.keys[pos]
        raise DamagedFormError(f"form {key!r} in {self._path} is damaged: {why}", key)

    def _read(self, pos: int) -> StoredForm:
        idx = self._idx
        if int(idx.src[pos]) == _SRC_V1:
            return self._read_v1(pos)
        row, _, meta, cb, eb = self._form_parts(pos)
        key = idx.keys[pos]
        try:
            return _decode_form(key, row, meta, cb, eb, self._text)
        except (ValueError, KeyError, TypeError, IndexError, InputError) as exc:
            return self._damage(pos, f"its metadata cannot be decoded ({exc})")

    def _text(self, tid: str) -> str:
        t = self._idx.texts.get(tid)
        if t is not None:
            return t
        if tid == "":
            return ""
        if self._h5 is None:
            raise KeyError(f"config text {tid}")
        t = self._h5[S.TEXTS_GROUP][tid].asstr()[()]
        self._idx.texts[tid] = t
        return t

    def _read_v1(self, pos: int) -> StoredForm:
        from maasscomp.hejhal.types import SolverParams, SymmetryClass
        from maasscomp.spectrum.form import Form

        idx = self._idx
        key = idx.keys[pos]
        if pos in idx.damaged:
            raise DamagedFormError(f"form {key!r} in {self._path} is damaged: {idx.damaged[pos]}", key)
        try:
            g = self._h5[S.FORMS_GROUP][key]  # type: ignore[index]
            a = g.attrs
            al = g[S.D_AL_SIGNS][...]
            sym = SymmetryClass(_attr_str(a[S.A_PARITY]), tuple((int(p), int(s)) for p, s in al))
            params = SolverParams(Y=float(a[S.A_SOLVER_Y]), M0=int(a[S.A_SOLVER_M0]),
                                  Q=int(a[S.A_SOLVER_Q]), eps=float(a[S.A_SOLVER_EPS]))
            extra = _codec.decode_extra_text(g[S.D_EXTRA].asstr()[()], g.get(S.G_EXTRA_ARRAYS))
            if not isinstance(extra, dict):
                raise ValueError("extra is not a JSON object")
            coeffs = g[S.D_COEFFS][...]
            form = Form(
                level=int(a[S.A_LEVEL]), R=float(a[S.A_R]), symmetry=sym,
                coeffs=coeffs, coeff_errors=g[S.D_COEFF_ERRORS][...],
                R_error=float(a[S.A_R_ERROR]), hecke_residual=float(a[S.A_HECKE_RESIDUAL]),
                params=params, is_new=S.IS_NEW_FROM_CODE[int(a[S.A_IS_NEW])],
                multiplicity=int(a[S.A_MULTIPLICITY]), basis_index=int(a[S.A_BASIS_INDEX]),
                extra=extra, key=key,
            )
            prov = {"package_version": _attr_str(a[S.A_PACKAGE_VERSION]),
                    "created_utc": _attr_str(a[S.A_CREATED_UTC]),
                    "config": g[S.D_CONFIG].asstr()[()], "run_id": _attr_str(a[S.A_RUN_ID]),
                    "seq": int(a[S.A_SEQ])}
            cusps = tuple(CuspInfo(j, c[0], c[1], c[2], c[3], ((c[4], c[5]), (c[6], c[7])))
                          for j, c in enumerate(_cusps_of(form.level, coeffs.shape[0])))
        except (KeyError, OSError, ValueError, TypeError, IndexError, RuntimeError,
                InputError) as exc:
            return self._damage(pos, f"{type(exc).__name__}: {exc}")
        return StoredForm(key, form, DirichletCharacter.trivial(form.level), cusps, prov, {})

    # ------------------------------------------------------------------ transactions

    @contextlib.contextmanager
    def transaction(self) -> Iterator["Store"]:
        """Group every change made inside the block into one atomic commit.

        Nested blocks join the outermost one.  If the block raises, nothing of it is
        written.  A process killed inside the block leaves the store as before the block.
        """
        txn = self._begin()
        outermost = txn.depth == 1
        try:
            try:
                yield self
            except BaseException:
                self._abort()
                raise
            if self._txn is not txn:
                # an error inside the block rolled the transaction back and was caught
                self._abort()
                raise StoreError(
                    f"transaction on {self._path} was rolled back by an error inside it; "
                    "nothing of it was written"
                )
            self._end_txn()
        finally:
            if outermost:
                self._broken = False

    def _begin(self) -> _Txn:
        if self._closed:
            raise StoreError(f"store {self._path} is closed")
        if self._mode == "r":
            raise StoreError(f"store {self._path} is open read-only; open it with mode 'a' to write")
        if self._broken:
            raise StoreError(
                f"transaction on {self._path} was rolled back by an earlier error; "
                "leave the transaction block before writing again"
            )
        if self._txn is not None:
            self._txn.depth += 1
            return self._txn
        self._txn = _Txn(self._idx.n, self._idx.next_seq)
        return self._txn

    def _end_txn(self) -> None:
        txn = self._txn
        assert txn is not None
        txn.depth -= 1
        if txn.depth > 0:
            return
        try:
            if txn.ops:
                self._commit(txn)
        except BaseException:
            self._abort()
            raise
        self._txn = None

    def _abort(self) -> None:
        txn = self._txn
        self._txn = None
        if txn is None:
            return
        # inside an enclosing transaction block: refuse further writes until it is left
        self._broken = txn.depth > 1
        self._load()  # back to the committed state

    @contextlib.contextmanager
    def _write(self) -> Iterator[_Txn]:
        txn = self._begin()
        try:
            yield txn
        except BaseException:
            self._abort()
            raise
        self._end_txn()

    def _commit(self, txn: _Txn) -> None:
        idx = self._idx
        if idx.next_seq != txn.next_seq0:
            txn.ops.append({"op": "seq", "next": idx.next_seq})
        rows = idx.buf[txn.rows].copy() if txn.rows else np.zeros(0, dtype=L.ROW_DTYPE)
        rec, index_len = L.pack_record(txn.ops, rows, bytes(txn.labels), [bytes(txn.data)])
        start = self._end
        _atomic.check_room(self._real, start + len(rec), len(rec),
                           f"a commit of {len(txn.rows)} form(s)")
        try:
            _write_all(self._fd, rec, start)
            if self._durable:
                os.fsync(self._fd)
        except OSError as exc:
            with contextlib.suppress(OSError):
                os.ftruncate(self._fd, start)
            raise StoreWriteError(
                f"writing a commit of {len(txn.rows)} form(s) to {self._path} failed: "
                f"{_atomic.cause(exc)}; the store keeps every earlier commit and nothing of "
                "this one") from exc
        except BaseException:  # an interrupt inside the write: drop the partial record
            with contextlib.suppress(OSError):
                os.ftruncate(self._fd, start)
            raise
        data_start = start + L.REC_HEAD_SIZE + index_len
        for pos in txn.rows:
            r = idx.buf[pos]
            r["coeffs_at"] += data_start
            r["errors_at"] += data_start
            r["meta_at"] += data_start
        if txn.rows:
            idx.src[txn.rows] = _SRC_FILE
        for a in txn.atts:
            a.src = _SRC_FILE
            a.at += data_start
        self._end = self._valid_end = start + len(rec)
        idx.log_bytes += len(rec)
        idx.log_rows += len(txn.rows)

    def _cut_unfinished_tail(self) -> None:
        size = os.fstat(self._fd).st_size
        log.warning("store %s: removing %d bytes of an unfinished commit at its end",
                    self._path, size - self._valid_end)
        try:
            os.ftruncate(self._fd, self._valid_end)
        except OSError as exc:
            raise StoreWriteError(f"cannot remove the unfinished commit at the end of "
                                  f"{self._path}: {_atomic.cause(exc)}") from exc
        self._end = self._valid_end

    # ------------------------------------------------------------------ compaction

    def _should_compact(self) -> bool:
        idx = self._idx
        return ((idx.log_bytes > COMPACT_MIN_BYTES and idx.log_bytes > idx.base_bytes)
                or (idx.log_rows > COMPACT_MIN_ROWS and idx.log_rows > idx.base_rows))

    def compact(self) -> bool:
        """Fold the commit records into a new base (see the module docstring).

        Returns False (and logs why) when the store's identity could not be kept, space is
        missing or a form is damaged; the store is then unchanged.
        """
        if self._mode == "r" or self._closed:
            raise StoreError(f"store {self._path} is not open for writing")
        if self._txn is not None:
            raise StoreError(f"cannot compact {self._path} inside a transaction")
        why = _atomic.why_not_replaceable(self._real)
        if why is None and self._idx.damaged:
            why = f"{len(self._idx.damaged)} form(s) are damaged (`maasscomp salvage` copies the rest)"
        if why is not None:
            log.info("store %s: not compacted: %s", self._path, why)
            return False
        ident = _atomic.identity_of(self._real)
        self._rewrite(ident, "compaction")
        return True

    def _rewrite(self, ident: _atomic.Identity, what: str) -> None:
        """Write the whole store as a new base and put it in place of the file."""
        size = os.fstat(self._fd).st_size
        _atomic.check_room(self._real, size, size, what)
        tmp = _atomic.temp_path_for(self._real)
        sid = (self._header.store_id if self._header is not None
               else bytes.fromhex(str(self._root.get(S.ROOT_STORE_ID, ""))) or secrets.token_bytes(16))
        try:
            runs = self._all_runs()
            texts = {tid: self._text(tid) for tid in list(self._idx.texts)}
            _write_base(tmp, root={S.ROOT_CREATED_UTC: self._root.get(S.ROOT_CREATED_UTC, utc_now_iso()),
                                   S.ROOT_NEXT_SEQ: self._idx.next_seq, S.ROOT_STORE_ID: sid.hex()},
                        store_id=sid, source=self, positions=self._idx.live_positions(),
                        runs=runs, texts=texts)
            _atomic.apply_identity(tmp, ident)
            _atomic.commit_temp(tmp, self._real, self._durable)
        except DamagedFormError as exc:
            with contextlib.suppress(OSError):
                tmp.unlink()
            raise StoreError(f"{what} of {self._path} stopped: {exc}") from exc
        except OSError as exc:
            with contextlib.suppress(OSError):
                tmp.unlink()
            if isinstance(exc, StoreError):
                raise
            raise StoreWriteError(f"{what} of {self._path} failed: {_atomic.cause(exc)}; the "
                                  "store was not changed") from exc
        except BaseException:
            with contextlib.suppress(OSError):
                tmp.unlink()
            raise
        log.info("store %s: %s wrote %d forms", self._path, what, len(self._idx.pos))
        self._load()

    def _migrate(self) -> None:
        why = _atomic.why_not_replaceable(self._real)
        if why is not None:
            raise StoreError(
                f"store {self._path} has schema version 1 and must be rewritten as version "
                f"{S.SCHEMA_VERSION} before writing, but {why}; open it read-only, or "
                f"copy it with `maasscomp salvage {self._path} NEW`")
        if self._idx.damaged:
            raise StoreError(
                f"store {self._path} has schema version 1 and {len(self._idx.damaged)} damaged "
                f"form(s); copy its intact forms with `maasscomp salvage {self._path} NEW`")
        self._rewrite(_atomic.identity_of(self._real), "migration to schema version 2")

    def _all_runs(self) -> dict[str, dict[str, Any]]:
        out = {}
        for rid in self._idx.runs:
            info = self.run_info(rid)
            out[rid] = {"created_utc": info["created_utc"],
                        "package_version": info["package_version"],
                        "config": info["config"], "tasks": self._run_tasks(rid)}
        return out

    # ------------------------------------------------------------------ reading

    @property
    def metadata(self) -> dict[str, Any]:
        """Root attributes (format, schema_version, created_utc, package_version, next_seq,
        store_id) as they stand now."""
        out = dict(self._root)
        out[S.ROOT_SCHEMA_VERSION] = self._version
        out[S.ROOT_NEXT_SEQ] = self._idx.next_seq
        return out

    @property
    def schema_version(self) -> int:
        return self._version

    def _ordered(self, pos: np.ndarray) -> np.ndarray:
        """Positions sorted by (level, R, basis index), ties in write order."""
        pos = np.asarray(pos, dtype=np.int64)
        if pos.size < 2:
            return pos
        rows = self._idx.rows[pos]
        return pos[np.lexsort((pos, rows["basis_index"], rows["R"], rows["level"]))]

    def keys(self, order: str = "level") -> list[str]:
        """Keys of every stored form (damaged ones too).

        ``order="level"`` (default): sorted by (level, R, basis index); ``order="written"``:
        in the order the forms were written (the order of the commit records).
        """
        if order not in ("level", "written"):
            raise InputError(f"order={order!r} is not allowed; use 'level' or 'written'")
        idx = self._idx
        pos = idx.live_positions()
        if order == "level":
            pos = self._ordered(pos)
        return [idx.keys[i] for i in pos.tolist()]

    def __len__(self) -> int:
        return len(self._idx.pos)

    def __contains__(self, key: object) -> bool:
        return key in self._idx.pos

    def __iter__(self) -> Iterator[str]:
        """The keys, sorted by (level, R) (as :meth:`keys`): the store reads like a mapping
        ``key -> Form`` (``store[key]``, ``store.values()``, ``store.items()``)."""
        return iter(self.keys())

    def __getitem__(self, key: str) -> Form:
        """The form stored under ``key`` (it knows its key: ``store[k].key == k``)."""
        if not isinstance(key, str):
            raise StoreError(f"store keys are strings such as {self._example_key()!r}; got "
                             f"{type(key).__name__} {key!r}")
        return self.get(key)

    def _example_key(self) -> str:
        ks = self._idx.keys
        return next((ks[i] for i in self._idx.live_positions()[:1].tolist()), "N1_odd_R9.533695")

    def values(self) -> Iterator[Form]:
        """The intact forms, sorted by (level, R) (damaged ones are skipped, see
        :meth:`damaged`)."""
        for sf in self.iter_forms():
            yield sf.form

    def items(self) -> Iterator[tuple[str, Form]]:
        """(key, form) of the intact forms, sorted by (level, R)."""
        for sf in self.iter_forms():
            yield sf.key, sf.form

    def levels(self) -> list[int]:
        """The levels of the intact forms, ascending."""
        rows = self._idx.rows
        return sorted(set(rows["level"][self._intact()].tolist()))

    def _position(self, key: str) -> int:
        if self._closed:
            raise StoreError(f"store {self._path} is closed")
        pos = self._idx.pos.get(key)
        if pos is None:
            raise StoreError(f"no form with key {key!r} in store {self._path}")
        return pos

    def get(self, key: str) -> Form:
        """The form stored under ``key`` (arrays bit-identical to what was written).

        Raises DamagedFormError if the form fails its checksum or cannot be decoded.
        """
        return self._read(self._position(key)).form

    def read(self, key: str) -> StoredForm:
        """The form with its character, cusps and provenance (see :class:`StoredForm`)."""
        return self._read(self._position(key))

    def provenance(self, key: str) -> dict[str, Any]:
        """package_version, created_utc, config text, run_id and write sequence of a form."""
        return self._read(self._position(key)).provenance

    def damaged(self) -> dict[str, str]:
        """Damaged forms found so far (key -> reason), and damage outside any form.

        Index damage is found when the store opens; damage to a form's data when it is read
        (:meth:`verify` reads everything).
        """
        idx = self._idx
        out = {idx.keys[i]: why for i, why in sorted(idx.damaged.items()) if idx.alive[i]}
        for (i, name), why in sorted(idx.bad_atts.items()):
            if idx.alive[i] and name in idx.atts.get(i, {}):
                out[f"{idx.keys[i]} [attachment {name}]"] = why
        for where, why in idx.notes.items():
            out[f"({where})"] = why
        return out

    def verify(self, keys: Iterable[str] | None = None) -> dict[str, str]:
        """Read and check every form (or the given ones) and its attachments; return
        :meth:`damaged`."""
        for k in (self.keys() if keys is None else list(keys)):
            pos = self._position(k)
            v1 = int(self._idx.src[pos]) == _SRC_V1
            with contextlib.suppress(DamagedFormError):
                # a version-2 form whose bytes pass the checksum decodes (the writer made
                # them); a version-1 form has no checksum and is decoded whole
                self._read(pos) if v1 else self._form_parts(pos)
                for name in list(self._idx.atts.get(pos, {})):
                    try:
                        self.get_attachment(k, name) if v1 else self._att_blob(pos, name)
                    except DamagedFormError as exc:
                        self._idx.bad_atts[(pos, name)] = str(exc)
        return self.damaged()

    def iter_forms(self, keys: Iterable[str] | None = None) -> Iterator[StoredForm]:
        """The intact forms among ``keys`` (default: all, sorted by (level, R)).

        A damaged form is skipped and recorded in :meth:`damaged`; the iteration goes on.
        This is the reader to use for listings, exports and reports.
        """
        for k in (self.keys() if keys is None else list(keys)):
            pos = self._position(k)
            if pos in self._idx.damaged:
                continue
            try:
                yield self._read(pos)
            except DamagedFormError:
                continue

    def iter_records(self, keys: Iterable[str] | None = None) -> Iterator[FormRecord]:
        """Like :meth:`iter_forms`, but yields :class:`FormRecord` (plain values, no Form
        object): the fast reader for exports of whole stores."""
        for k in (self.keys() if keys is None else list(keys)):
            pos = self._position(k)
            if pos in self._idx.damaged:
                continue
            try:
                if int(self._idx.src[pos]) == _SRC_V1:
                    yield FormRecord.from_stored(self._read_v1(pos))
                    continue
                row, _, meta, cb, eb = self._form_parts(pos)
                try:
                    doc, arrays = L.unpack_blob(meta)
                    yield FormRecord.from_parts(k, self._idx.syms[pos], self._idx.chars[pos],
                                                row, doc, arrays, cb, eb, self._text)
                except (ValueError, KeyError, TypeError, IndexError, InputError) as exc:
                    self._damage(pos, f"its metadata cannot be decoded ({exc})")
            except DamagedFormError:
                continue

    def _intact(self) -> np.ndarray:
        idx = self._idx
        ok = idx.alive[:idx.n].copy()
        if idx.damaged:
            ok[list(idx.damaged)] = False
        return ok

    def select(self, level: int | None = None, parity: str | None = None,
               R_min: float | None = None, R_max: float | None = None,
               symmetry: str | None = None, character: str | None = None) -> list[str]:
        """Keys of the intact forms matching every given filter (R bounds inclusive), sorted
        by (level, R)."""
        if parity is not None and parity not in ("even", "odd"):
            raise InputError(f"parity {parity!r} is not allowed; use 'even' or 'odd'")
        idx = self._idx
        rows = idx.rows
        m = self._intact()
        if level is not None:
            m &= rows["level"] == level
        if parity is not None:
            m &= rows["parity"] == L.PARITY_CODES[parity]
        if R_min is not None:
            m &= rows["R"] >= R_min
        if R_max is not None:
            m &= rows["R"] <= R_max
        pos = self._ordered(np.flatnonzero(m)).tolist()
        if symmetry is not None:
            pos = [i for i in pos if idx.syms[i] == symmetry]
        if character is not None:
            pos = [i for i in pos if idx.chars[i] == character]
        return [idx.keys[i] for i in pos]

    def forms(self, level: int | None = None, parity: str | None = None,
              R_min: float | None = None, R_max: float | None = None,
              symmetry: str | None = None) -> list[Form]:
        """Intact forms matching every given filter, sorted by (level, R) (see :meth:`select`).

        Each form knows its key (``form.key``)."""
        return [sf.form for sf in self.iter_forms(self.select(level, parity, R_min, R_max, symmetry))]

    def listing(self, n_coeffs: int = 3, keys: Iterable[str] | None = None) -> dict[str, list]:
        """The columns of a listing of the intact forms (default all, sorted by (level, R)).

        Keys: key, level, symmetry, character, R, R_error, hecke_residual, is_new,
        multiplicity, basis_index, n_cusps, M (one list each, one entry per form) and ``c``
        (per form the list of c_inf(1..min(n_coeffs, M)), floats or complex).  Up to 8
        coefficients come from the index; more are read from each form (which verifies it;
        a damaged form is then left out).
        """
        if isinstance(n_coeffs, bool) or not isinstance(n_coeffs, int) or n_coeffs < 0:
            raise InputError(f"n_coeffs {n_coeffs!r} is not allowed; use an integer >= 0")
        idx = self._idx
        if keys is None:
            pos = self._ordered(np.flatnonzero(self._intact()))
        else:
            pos = np.array([p for p in (self._position(k) for k in keys) if p not in idx.damaged],
                           dtype=np.int64)
        if n_coeffs > L.PREVIEW:  # read the forms: drop the ones found damaged
            cs, keep = [], []
            for i in pos.tolist():
                try:
                    c0 = self._read(i).form.coeffs[0]
                except DamagedFormError:
                    continue
                keep.append(i)
                cs.append([c0[n].item() for n in range(min(n_coeffs, c0.size))])
            pos = np.array(keep, dtype=np.int64)
        rows = idx.rows[pos]
        cols: dict[str, list] = {f: rows[f].tolist() for f in (
            "level", "R", "R_error", "hecke_residual", "multiplicity", "basis_index",
            "n_cusps", "M")}
        p = pos.tolist()
        cols["key"] = [idx.keys[i] for i in p]
        cols["symmetry"] = [idx.syms[i] for i in p]
        cols["character"] = [idx.chars[i] for i in p]
        cols["is_new"] = [S.IS_NEW_FROM_CODE[v] for v in rows["is_new"].tolist()]
        if n_coeffs <= L.PREVIEW:
            K0 = n_coeffs
            cs = rows["preview"][:, 0:2 * K0:2].tolist()  # real parts: the common case
            cplx = rows["coeffs_kind"] == L.KIND_COMPLEX
            for j in np.flatnonzero(cplx | (rows["M"] < K0)).tolist():
                pv = rows["preview"][j].tolist()
                K = min(K0, int(rows["M"][j]))
                cs[j] = ([complex(pv[2 * n], pv[2 * n + 1]) for n in range(K)] if cplx[j]
                         else pv[0:2 * K:2])
        cols["c"] = cs
        return cols

    def summary_rows(self, n_coeffs: int = 3, keys: Iterable[str] | None = None) -> list[dict[str, Any]]:
        """One dict per intact form for listings, read from the index (see :meth:`listing`).

        Keys of each dict: key, level, symmetry, character, R, R_error, hecke_residual,
        is_new, multiplicity, basis_index, n_cusps, M, and ``c1`` .. ``c<n_coeffs>``
        (coefficients at infinity; fewer if M is smaller).
        """
        cols = self.listing(n_coeffs, keys)
        names = ("key", "level", "symmetry", "character", "R", "R_error", "hecke_residual",
                 "is_new", "multiplicity", "basis_index", "n_cusps", "M")
        out = []
        for j, vals in enumerate(zip(*(cols[n] for n in names))):
            row = dict(zip(names, vals))
            for n, c in enumerate(cols["c"][j]):
                row[f"c{n + 1}"] = c
            out.append(row)
        return out

    def find_duplicate(self, form: Form, tol: float = DEFAULT_DUPLICATE_TOL) -> str | None:
        """Key of a stored form with the same level, symmetry class, character and basis
        index as ``form`` and ``|R - R_stored| <= tol`` (the closest one), or None.
        Damaged forms are included (a recomputation replaces them, see :meth:`add_forms`)."""
        if not (tol >= 0):
            raise InputError(f"duplicate tolerance {tol!r} is not allowed; use a number >= 0")
        pos = self._find_dup(form, tol, _character_of(form).label)
        return None if pos is None else self._idx.keys[pos]

    def _find_dup(self, form: Form, tol: float, char: str) -> int | None:
        idx = self._idx
        best, best_d = None, math.inf
        R = float(form.R)
        for i in idx.near((int(form.level), form.symmetry.label, char, int(form.basis_index)), R, tol):
            d = abs(float(idx.buf[i]["R"]) - R)
            if d <= tol and (d < best_d or (d == best_d and i < best)):  # type: ignore[operator]
                best, best_d = i, d
        return best

    # ------------------------------------------------------------------ writing forms

    def add_form(self, form: Form, **kw: Any) -> str:
        """Add one form; see :meth:`add_forms`."""
        return self.add_forms([form], **kw)[0]

    def add_forms(self, forms: Iterable[Form], *, on_duplicate: str = "error",
                  tol: float = DEFAULT_DUPLICATE_TOL, config_text: str = "",
                  run_id: str = "", added: list[str] | None = None) -> list[str]:
        """Add forms in one transaction (or in the enclosing :meth:`transaction`).

        Parameters
        ----------
        forms : iterable of Form
            Coefficients must be float64 or complex128 and finite (errors not NaN).
        on_duplicate : {"error", "skip", "replace"}
            What to do when :meth:`find_duplicate` finds a stored form (or one earlier in
            this batch): raise StoreError, keep the stored form, or delete it (with its
            attachments) and store the new one.  A damaged duplicate is always replaced.
        tol : float
            Absolute R tolerance of duplicate detection.
        config_text : str
            The TOML/JSON text of the configuration that produced the forms (may be empty;
            stored once per distinct text).
        run_id : str
            Id of the run that produced them ("" if none).
        added : list, optional
            The keys of the forms this call stored (not the skipped ones) are appended.

        Returns
        -------
        list of str
            One key per input form: the new key, or the stored form's key when skipped.
        """
        if on_duplicate not in ON_DUPLICATE:
            raise InputError(
                f"on_duplicate {on_duplicate!r} is not allowed; use one of {', '.join(ON_DUPLICATE)}"
            )
        if not isinstance(config_text, str):
            raise InputError(f"config_text must be str, got {type(config_text).__name__}")
        if not isinstance(run_id, str):
            raise InputError(f"run_id must be str, got {type(run_id).__name__}")
        forms = list(forms)
        for f in forms:  # validate everything before touching the store
            _validate_form(f)
            _codec.encode_extra(f.extra)
            for fld in dataclasses.fields(f):
                if fld.name not in _KNOWN_FIELDS:
                    _codec.encode_tree(getattr(f, fld.name), f"Form.{fld.name}", "")
            _cusps_of(f.level, f.coeffs.shape[0])
        keys: list[str] = []
        with self._write() as txn:
            idx = self._idx
            tid = _text_id(config_text) if config_text else ""
            if tid and tid not in idx.texts:
                idx.texts[tid] = config_text
                txn.ops.append({"op": "text", "id": tid, "text": config_text})
            now = utc_now_iso()
            for f in forms:
                char = _character_of(f).label
                dup = self._find_dup(f, tol, char)
                if dup is not None:
                    damaged = dup in idx.damaged
                    if on_duplicate == "skip" and not damaged:
                        keys.append(idx.keys[dup])
                        continue
                    if on_duplicate == "error" and not damaged:
                        raise StoreError(
                            f"form at level {f.level}, symmetry {f.symmetry.label}, R={f.R!r}, "
                            f"basis_index {f.basis_index} duplicates stored form "
                            f"{idx.keys[dup]!r} in {self._path} (|dR| <= {tol}); pass "
                            "on_duplicate='skip' or 'replace'")
                    txn.ops.append({"op": "delete", "key": idx.keys[dup]})
                    idx.kill(dup)
                base = S.form_key_base(f.level, f.symmetry.label, f.R, f.basis_index,
                                       f.multiplicity, char)
                key, n = base, 1
                while key in idx.pos:
                    n += 1
                    key = f"{base}_v{n}"
                enc = _encode_form(f, key, idx.next_seq, now, run_id, tid, __version__)
                self._place(txn, enc, key, f.symmetry.label, char)
                idx.next_seq += 1
                keys.append(key)
                if added is not None:
                    added.append(key)
        return keys

    def _place(self, txn: _Txn, enc: _Encoded, key: str, sym: str, char: str) -> int:
        """Put an encoded form into the transaction (data part offsets) and the index."""
        row = enc.row.copy()
        row["coeffs_at"] = txn.put(enc.coeffs)
        row["errors_at"] = txn.put(enc.errors)
        row["meta_at"] = txn.put(enc.meta)
        row["labels_at"] = len(txn.labels)
        txn.labels += enc.labels
        row["row_sum"] = np.frombuffer(L.row_digest(row, enc.labels), dtype=np.uint8)
        pos = self._idx.append(row, key, sym, char, _SRC_PENDING)
        txn.ops.append({"op": "form", "row": len(txn.rows)})
        txn.rows.append(pos)
        return pos

    def delete_form(self, key: str) -> None:
        """Remove a form and its attachments."""
        with self._write() as txn:
            pos = self._position(key)
            txn.ops.append({"op": "delete", "key": key})
            self._idx.kill(pos)

    # ------------------------------------------------------------------ attachments

    def put_attachment(self, form_key: str, name: str, data: dict[str, Any], *,
                       overwrite: bool = True) -> None:
        """Store ``data`` beside a form (appended; a replaced attachment is dropped at the
        next compaction).

        ``data`` maps names to numpy arrays (or lists of numbers), scalars (int, float, bool,
        complex, str, None) or nested dicts of the same.  Arrays read back bit-identical.
        An existing attachment of that name is replaced (``overwrite=True``) or refused.
        """
        S.check_member_name(name, "attachment name")
        if not isinstance(data, dict):
            raise InputError(f"attachment {name!r} must be a dict, got {type(data).__name__}")
        doc, arrays = _codec.encode_mapping(data, f"attachment {name!r}")
        blob = L.pack_blob(doc, arrays)
        with self._write() as txn:
            pos = self._position(form_key)
            atts = self._idx.atts.setdefault(pos, {})
            if name in atts and not overwrite:
                raise StoreError(
                    f"form {form_key!r} in {self._path} already has attachment {name!r}; "
                    "pass overwrite=True to replace it"
                )
            seq = int(self._idx.buf[pos]["seq"])
            s = _att_digest(seq, name, blob)
            at = txn.put(blob)
            atts[name] = _Att(_SRC_PENDING, at, len(blob), s)
            txn.atts.append(atts[name])
            txn.ops.append({"op": "attach", "key": form_key, "name": name, "at": at,
                            "len": len(blob), "sum": s.hex()})

    def _att_blob(self, pos: int, name: str) -> bytes:
        a = self._idx.atts[pos][name]
        key = self._idx.keys[pos]
        try:
            blob = self._pread(a.src, a.at, a.length)
        except (OSError, ValueError) as exc:
            raise DamagedFormError(f"attachment {name!r} of form {key!r} in {self._path} cannot "
                                   f"be read ({exc})", key) from exc
        if _att_digest(int(self._idx.buf[pos]["seq"]), name, blob) != a.sum:
            raise DamagedFormError(f"attachment {name!r} of form {key!r} in {self._path} is "
                                   "damaged: it fails its checksum", key)
        return blob

    def get_attachment(self, form_key: str, name: str) -> dict[str, Any]:
        """The dict stored by :meth:`put_attachment` (DamagedFormError if it is damaged)."""
        pos = self._position(form_key)
        atts = self._idx.atts.get(pos, {})
        if name not in atts:
            have = sorted(atts)
            raise StoreError(
                f"form {form_key!r} in {self._path} has no attachment {name!r}"
                + (f"; it has {', '.join(have)}" if have else "")
            )
        if atts[name].src == _SRC_V1:
            try:
                return _codec.read_mapping_v1(
                    self._h5[S.FORMS_GROUP][form_key][S.G_ATTACHMENTS][name])  # type: ignore[index]
            except (KeyError, OSError, ValueError, TypeError) as exc:
                raise DamagedFormError(f"attachment {name!r} of form {form_key!r} in "
                                       f"{self._path} cannot be read ({exc})", form_key) from exc
        try:
            blob = self._att_blob(pos, name)
            try:
                doc, arrays = L.unpack_blob(blob)
                return _codec.decode_mapping(doc, arrays)
            except (ValueError, KeyError, TypeError) as exc:
                raise DamagedFormError(f"attachment {name!r} of form {form_key!r} in "
                                       f"{self._path} cannot be decoded ({exc})", form_key) from exc
        except DamagedFormError as exc:
            self._idx.bad_atts[(pos, name)] = str(exc)
            raise

    def attachments(self, form_key: str) -> list[str]:
        """Names of the attachments of a form."""
        return sorted(self._idx.atts.get(self._position(form_key), {}))

    def iter_attachments(self, name: str, keys: Iterable[str] | None = None,
                         damaged: list[tuple[str, str]] | None = None
                         ) -> Iterator[tuple[str, dict[str, Any]]]:
        """(key, data) of every intact form (default all) that has an intact attachment
        ``name``; damaged ones are skipped and appended to ``damaged`` as (key, reason)."""
        for k in (self.keys() if keys is None else list(keys)):
            pos = self._position(k)
            if pos in self._idx.damaged or name not in self._idx.atts.get(pos, {}):
                continue
            if (pos, name) in self._idx.bad_atts:
                if damaged is not None:
                    damaged.append((k, self._idx.bad_atts[(pos, name)]))
                continue
            try:
                yield k, self.get_attachment(k, name)
            except DamagedFormError as exc:
                if damaged is not None:
                    damaged.append((k, str(exc)))

    # ------------------------------------------------------------------ runs

    def begin_run(self, run_id: str | None = None, config_text: str = "") -> str:
        """Record a run (config text, package version, start time) and return its id.

        A new id is made from the UTC time when ``run_id`` is None.  An existing run is left
        unchanged, so resuming a run calls this again with the same id.
        """
        if run_id is None:
            run_id = datetime.now(timezone.utc).strftime("%Y%m%dT%H%M%SZ") + "-" + secrets.token_hex(3)
        S.check_member_name(run_id, "run id")
        if not isinstance(config_text, str):
            raise InputError(f"config_text must be str, got {type(config_text).__name__}")
        if run_id in self._idx.runs:
            return run_id
        with self._write() as txn:
            self._new_run(txn, run_id, config_text)
        return run_id

    def _new_run(self, txn: _Txn, run_id: str, config_text: str) -> None:
        now = utc_now_iso()
        self._idx.runs[run_id] = _Run(now, __version__, config=config_text, tasks={})
        txn.ops.append({"op": "run", "id": run_id, "created_utc": now,
                        "package_version": __version__, "config": config_text})

    def runs(self) -> list[str]:
        """Ids of the recorded runs."""
        return sorted(self._idx.runs)

    def run_info(self, run_id: str) -> dict[str, Any]:
        """created_utc, package_version, config text and number of finished tasks of a run."""
        run = self._idx.runs.get(run_id)
        if run is None:
            raise StoreError(f"no run {run_id!r} in store {self._path}")
        if run.config is None:
            try:
                run.config = self._h5[S.RUNS_GROUP][run_id][S.RUN_D_CONFIG].asstr()[()]  # type: ignore[index]
            except (KeyError, OSError, TypeError) as exc:
                run.config = ""
                self._idx.notes[f"run {run_id}"] = f"the config of run {run_id!r} cannot be read ({exc})"
        return {
            "run_id": run_id,
            "created_utc": run.created_utc,
            "package_version": run.package_version,
            "config": run.config,
            "n_tasks_done": len(self._run_tasks(run_id)),
        }

    def _run_tasks(self, run_id: str) -> dict[str, tuple[str, list[str]]]:
        run = self._idx.runs[run_id]
        if run.tasks is None:
            run.tasks = {}
            if self._h5 is not None and run.base_tasks_ok:
                try:
                    text = self._h5[S.RUNS_GROUP][run_id][S.RUN_D_TASKS].asstr()[()]
                    run.tasks = {k: (v[0], list(v[1])) for k, v in json.loads(text).items()}
                except (KeyError, OSError, ValueError, TypeError, IndexError) as exc:
                    run.base_tasks_ok = False
                    self._idx.notes[f"run {run_id}"] = (
                        f"the task list of run {run_id!r} cannot be read ({exc}); its tasks "
                        "will be run again")
        return run.tasks

    def mark_task_done(self, task_id: str, form_keys: Iterable[str], run_id: str = "default") -> None:
        """Record that a task of a run finished and which forms it produced.

        Commit it in the same :meth:`transaction` as the forms so that a crash cannot leave
        forms without their task mark or a mark without its forms.  The run is created
        (with empty config) if :meth:`begin_run` was not called.
        """
        if not isinstance(task_id, str) or not task_id:
            raise InputError(f"task id {task_id!r} is not allowed; use a non-empty str")
        S.check_member_name(run_id, "run id")
        form_keys = [str(k) for k in form_keys]
        with self._write() as txn:
            for k in form_keys:
                self._position(k)
            if run_id not in self._idx.runs:
                self._new_run(txn, run_id, "")
            now = utc_now_iso()
            self._run_tasks(run_id)[task_id] = (now, form_keys)
            txn.ops.append({"op": "task", "run": run_id, "id": task_id, "utc": now,
                            "keys": form_keys})

    def done_tasks(self, run_id: str = "default") -> dict[str, list[str]]:
        """Finished tasks of a run: task id -> form keys (empty for an unknown run)."""
        if run_id not in self._idx.runs:
            return {}
        return {k: list(v[1]) for k, v in self._run_tasks(run_id).items()}

    # ------------------------------------------------------------------ size

    def info(self) -> dict[str, Any]:
        """Sizes: forms, damaged, bytes of the base and of the commit records."""
        idx = self._idx
        size = os.fstat(self._fd).st_size if self._fd >= 0 else 0
        return {"forms": len(idx.pos), "damaged": len(self.damaged()),
                "base_bytes": idx.base_bytes, "log_bytes": idx.log_bytes,
                "log_forms": idx.log_rows, "schema_version": self._version,
                "file_bytes": size, "unfinished_bytes": max(0, size - self._valid_end)
                if self._version == 2 else 0}


# ---------------------------------------------------------------- helpers


def _split_all_labels(rows: np.ndarray, labels: bytes,
                      good: np.ndarray) -> tuple[list[str], list[str], list[str]]:
    """Key, symmetry and character label of every row; rows whose labels do not decode are
    marked bad in ``good`` and get a placeholder key."""
    n = len(rows)
    at, ln = rows["labels_at"], rows["labels_len"]
    if n and labels.isascii() and at[0] == 0 and int(at[-1] + ln[-1]) == len(labels) \
            and (n == 1 or (at[1:] == at[:-1] + ln[:-1]).all()):
        # the usual pool: the rows' labels one after the other, ASCII: split it at once
        items = labels.decode("ascii").replace(L.LABEL_END, L.LABEL_SEP).split(L.LABEL_SEP)
        if len(items) == 3 * n + 1 and items[-1] == "":
            return items[0:3 * n:3], items[1:3 * n:3], items[2:3 * n:3]
    keys, syms, chars = [], [], []
    seqs = rows["seq"].tolist()
    for i, (a, m) in enumerate(zip(at.tolist(), ln.tolist())):
        try:
            if not (0 <= a and a + m <= len(labels)):
                raise ValueError("outside the pool")
            k, s, c = L.split_labels(labels[a:a + m])
        except (ValueError, UnicodeDecodeError):
            k, s, c = f"(form #{seqs[i]} of the base)", "", ""
            good[i] = False
        keys.append(k)
        syms.append(s)
        chars.append(c)
    return keys, syms, chars


def _offset(ds: h5py.Dataset) -> int | None:
    if ds.size == 0:
        return 0
    off = ds.id.get_offset()
    if off is None:
        raise OSError(f"dataset {ds.name} has no contiguous storage")
    return int(off)


def _write_all(fd: int, data: bytes, at: int) -> None:
    view = memoryview(data)
    while view:
        n = os.pwrite(fd, view, at)
        if n <= 0:  # pragma: no cover - pwrite raises instead
            raise OSError(28, "short write")
        view = view[n:]
        at += n


def _att_digest(seq: int, name: str, blob: bytes) -> bytes:
    return L.digest(b"maasscomp-attachment-2\0", int(seq).to_bytes(8, "little", signed=True),
                    name.encode("utf-8"), b"\0", blob)


@functools.lru_cache(maxsize=1)
def _form_fields() -> frozenset[str]:
    from maasscomp.spectrum.form import Form

    return frozenset(f.name for f in dataclasses.fields(Form))


def _decode_form(key: str, row: np.ndarray, meta: bytes, cb: bytes, eb: bytes, text) -> StoredForm:
    from maasscomp.hejhal.types import SolverParams, SymmetryClass
    from maasscomp.spectrum.form import Form

    doc, arrays = L.unpack_blob(meta)
    n_cusps, M = int(row["n_cusps"]), int(row["M"])

    def arr(b: bytes, kind: int) -> np.ndarray:
        dt = np.dtype("<c16") if kind == L.KIND_COMPLEX else np.dtype("<f8")
        return np.frombuffer(b, dtype=dt).astype(dt.newbyteorder("="), copy=True).reshape(n_cusps, M)

    sym = SymmetryClass(doc[S.M_SYMMETRY]["parity"],
                        tuple((int(p), int(s)) for p, s in doc[S.M_SYMMETRY]["al_signs"]))
    ch = doc[S.M_CHARACTER]
    char = _character(int(ch["modulus"]), tuple(int(k) for k in ch["exponents"]))
    extra = _codec.decode_tree(doc[S.M_EXTRA], arrays)
    kw: dict[str, Any] = {}
    unknown: dict[str, Any] = {}
    have = _form_fields()
    for name, d in doc.get(S.M_FIELDS, {}).items():
        (kw if name in have else unknown)[name] = _codec.decode_tree(d, arrays)
    if "character" in have:
        kw["character"] = char
    if "key" in have:
        kw["key"] = key
    form = Form(
        level=int(row["level"]), R=float(row["R"]), symmetry=sym,
        coeffs=arr(cb, int(row["coeffs_kind"])), coeff_errors=arr(eb, int(row["errors_kind"])),
        R_error=float(row["R_error"]), hecke_residual=float(row["hecke_residual"]),
        params=SolverParams(Y=float(row["solver_Y"]), M0=int(row["solver_M0"]),
                            Q=int(row["solver_Q"]), eps=float(row["solver_eps"])),
        is_new=S.IS_NEW_FROM_CODE[int(row["is_new"])], multiplicity=int(row["multiplicity"]),
        basis_index=int(row["basis_index"]), extra=extra, **kw,
    )
    p = doc[S.M_PROVENANCE]
    prov = {"package_version": p["package_version"], "created_utc": p["created_utc"],
            "config": text(p["config_id"]), "run_id": p["run_id"], "seq": int(row["seq"])}
    cusps = _cusp_infos(tuple(tuple(c) for c in doc[S.M_CUSPS]))
    return StoredForm(key, form, char, cusps, prov, unknown)


# ---------------------------------------------------------------- writing a base


def _write_base(tmp: Path, *, root: dict[str, Any], store_id: bytes, source: Store | None,
                positions: Iterable[int], runs: dict[str, dict[str, Any]],
                texts: dict[str, str]) -> tuple[int, int]:
    """Write a complete version-2 file holding the forms at ``positions`` of ``source``.

    Every form and attachment is read and verified while it is copied; a damaged one stops
    the write (DamagedFormError), so callers pass only positions known to be intact
    (:func:`salvage` verifies first; forms and attachments it found damaged are left out).
    Data are streamed in blocks, so memory stays bounded by the block size.
    Returns (forms written, attachments written).
    """
    idx = source._idx if source is not None else None
    chosen = [int(p) for p in positions]
    cache: dict[int, tuple] = {}
    # sizes and final places first: contiguous datasets need their size when created
    rows = np.zeros(len(chosen), dtype=L.ROW_DTYPE)
    n_vals = n_meta = n_lab = 0
    for j, pos in enumerate(chosen):
        assert idx is not None and source is not None
        if int(idx.src[pos]) == _SRC_FILE:
            r = idx.buf[pos]
            nv = int(r["n_cusps"]) * int(r["M"])
            lc, le = nv * (1 + int(r["coeffs_kind"])), nv * (1 + int(r["errors_kind"]))
            lm, ll = int(r["meta_len"]), int(r["labels_len"])
            rows[j] = r
        else:  # a version-1 form (migration) or a pending one: encode it now
            parts = _parts_for_copy(source, pos)
            cache[pos] = parts
            rows[j] = parts[0]
            lc, le, lm, ll = len(parts[3]) // 8, len(parts[4]) // 8, len(parts[2]), len(parts[1])
        rows[j]["coeffs_at"], rows[j]["errors_at"] = n_vals, n_vals + lc
        rows[j]["meta_at"], rows[j]["labels_at"], rows[j]["labels_len"] = n_meta, n_lab, ll
        n_vals += lc + le
        n_meta += lm
        n_lab += ll
    if source is not None:  # encoding version-1 forms above may have added config texts
        for tid in list(source._idx.texts):
            if tid not in texts:
                texts = {**texts, tid: source._text(tid)}
    atts = []  # (position, name, _Att or None, blob from the cache)
    n_names = n_blobs = 0
    for pos in chosen:
        assert idx is not None and source is not None
        for name, a in sorted(idx.atts.get(pos, {}).items()):
            if (pos, name) in idx.bad_atts:
                continue
            blob = None
            if a.src != _SRC_FILE:
                data = source.get_attachment(idx.keys[pos], name)
                doc, arrays = _codec.encode_mapping(data, f"attachment {name!r}")
                blob = L.pack_blob(doc, arrays)
            length = len(blob) if blob is not None else a.length
            atts.append((pos, name, a, blob, n_names, n_blobs, length))
            n_names += len(name.encode("utf-8"))
            n_blobs += length
    with h5py.File(tmp, "w", userblock_size=L.USERBLOCK_SIZE, locking=False) as h:
        for k, v in root.items():
            h.attrs[k] = np.int64(v) if isinstance(v, int) else v
        h.attrs[S.ROOT_FORMAT] = S.FORMAT_NAME
        h.attrs[S.ROOT_SCHEMA_VERSION] = np.int64(S.SCHEMA_VERSION)
        h.attrs[S.ROOT_PACKAGE_VERSION] = __version__
        h.attrs[S.ROOT_COMPACTED_UTC] = utc_now_iso()
        dv = h.create_dataset(S.D_VALUES, shape=(n_vals,), dtype="<f8")
        dm = h.create_dataset(S.D_META, shape=(n_meta,), dtype=np.uint8)
        labels = bytearray()
        v_at = m_at = 0
        row_bytes = rows.view(np.uint8).reshape(len(rows), L.ROW_DTYPE.itemsize)
        sum_at = L.ROW_DTYPE.fields["row_sum"][1]
        for b0 in range(0, len(chosen), _COPY_BLOCK):
            vals, metas = [], []
            for j in range(b0, min(len(chosen), b0 + _COPY_BLOCK)):
                pos = chosen[j]
                parts = cache.pop(pos, None) or _parts_for_copy(source, pos)
                _, lab, meta, cb, eb = parts
                row_bytes[j, sum_at:sum_at + 16] = np.frombuffer(
                    L.row_digest(row_bytes[j].tobytes(), lab), dtype=np.uint8)
                vals += [cb, eb]
                metas.append(meta)
                labels += lab
            vb = np.frombuffer(b"".join(vals), dtype="<f8")
            mb = np.frombuffer(b"".join(metas), dtype=np.uint8)
            dv[v_at:v_at + len(vb)] = vb
            dm[m_at:m_at + len(mb)] = mb
            v_at += len(vb)
            m_at += len(mb)
        h.create_dataset(S.D_ROWS, data=rows)
        h.create_dataset(S.D_LABELS, data=np.frombuffer(bytes(labels), dtype=np.uint8))
        sums = []
        for b0 in range(0, len(rows), S.BLOCK_ROWS):
            blk = rows[b0:b0 + S.BLOCK_ROWS]
            l0 = int(blk["labels_at"][0])
            l1 = int(blk["labels_at"][-1] + blk["labels_len"][-1])
            sums.append(np.frombuffer(L.digest(blk.tobytes(), bytes(labels[l0:l1])), dtype=np.uint8))
        h.create_dataset(S.D_BLOCK_SUMS, data=np.array(sums, dtype=np.uint8).reshape(-1, 16))
        # attachments
        arows = np.zeros(len(atts), dtype=S.ATTACHMENT_DTYPE)
        names = bytearray()
        db = h.create_dataset(S.D_ATT_BLOBS, shape=(n_blobs,), dtype=np.uint8)
        for j, (pos, name, a, blob, name_at, blob_at, length) in enumerate(atts):
            assert idx is not None and source is not None
            if blob is None:
                blob = source._att_blob(pos, name)
            seq = int(idx.buf[pos]["seq"])
            nb = name.encode("utf-8")
            arows[j]["form_seq"] = seq
            arows[j]["name_at"], arows[j]["name_len"] = name_at, len(nb)
            arows[j]["blob_at"], arows[j]["blob_len"] = blob_at, length
            arows[j]["sum"] = np.frombuffer(_att_digest(seq, name, blob), dtype=np.uint8)
            names += nb
            if length:
                db[blob_at:blob_at + length] = np.frombuffer(blob, dtype=np.uint8)
        h.create_dataset(S.D_ATT_ROWS, data=arows)
        h.create_dataset(S.D_ATT_NAMES, data=np.frombuffer(bytes(names), dtype=np.uint8))
        rg = h.create_group(S.RUNS_GROUP)
        for rid, run in runs.items():
            g = rg.create_group(rid)
            g.attrs[S.RUN_A_CREATED_UTC] = run["created_utc"]
            g.attrs[S.RUN_A_PACKAGE_VERSION] = run["package_version"]
            g.create_dataset(S.RUN_D_CONFIG, data=run["config"], dtype=_STR)
            g.create_dataset(S.RUN_D_TASKS, data=json.dumps(
                {k: [v[0], list(v[1])] for k, v in run["tasks"].items()}), dtype=_STR)
        tg = h.create_group(S.TEXTS_GROUP)
        for tid, text in texts.items():
            tg.create_dataset(tid, data=text, dtype=_STR)
    size = os.path.getsize(tmp)
    fd = os.open(tmp, os.O_WRONLY)
    try:
        _write_all(fd, L.pack_file_header(S.SCHEMA_VERSION, size, store_id), 0)
    finally:
        os.close(fd)
    return len(chosen), len(atts)


def _parts_for_copy(source: Store | None, pos: int) -> tuple[np.ndarray, bytes, bytes, bytes, bytes]:
    assert source is not None
    idx = source._idx
    if int(idx.src[pos]) == _SRC_V1:
        sf = source._read_v1(pos)
        f, prov = sf.form, sf.provenance
        tid = _text_id(prov["config"]) if prov["config"] else ""
        if tid:
            idx.texts.setdefault(tid, prov["config"])
        enc = _encode_form(f, sf.key, prov["seq"], prov["created_utc"], prov["run_id"], tid,
                           prov["package_version"])
        return enc.row, enc.labels, enc.meta, enc.coeffs, enc.errors
    return source._form_parts(pos)


# ---------------------------------------------------------------- salvage


def salvage(source: str | os.PathLike, target: str | os.PathLike, *,
            durable: bool = True) -> SalvageReport:
    """Verify every form of ``source`` and copy the intact ones into a new store ``target``.

    The source is only read (it may be read-only, damaged, or of schema version 1).  Forms
    and attachments that fail their checksum or cannot be decoded are left out and named
    in the report; task marks of runs that refer to a form left out are dropped, so that
    rerunning the config computes those tasks again.  ``target`` must not exist.
    """
    src_path, dst = Path(os.fspath(source)), Path(os.fspath(target))
    real_dst = _atomic.real_path(dst)
    if os.path.lexists(dst):
        raise StoreError(f"salvage target {dst} exists; give the name of a new file")
    if not real_dst.parent.is_dir():
        raise StoreError(f"cannot create {dst}: directory {real_dst.parent} does not exist")
    if _atomic.real_path(src_path) == real_dst:
        raise StoreError("salvage needs a new file as target, not the source")
    with Store.open(src_path, "r") as st:
        st.verify()
        positions = st._idx.live_positions()
        copied_keys = {st._idx.keys[int(p)] for p in positions if int(p) not in st._idx.damaged}
        runs = st._all_runs()
        dropped = []
        for rid, run in runs.items():
            keep = {}
            for tid, (utc, keys) in run["tasks"].items():
                missing = [k for k in keys if k not in copied_keys]
                if missing:
                    dropped.append((rid, tid))
                else:
                    keep[tid] = (utc, keys)
            run["tasks"] = keep
        texts = {}
        for tid in list(st._idx.texts):
            with contextlib.suppress(KeyError, OSError, TypeError):
                texts[tid] = st._text(tid)
        size = os.fstat(st._fd).st_size if st._fd >= 0 else 0
        _atomic.check_room(real_dst, size, size, "the salvaged copy")
        sid = secrets.token_bytes(16)
        tmp = _atomic.temp_path_for(real_dst)
        intact = [int(p) for p in positions if int(p) not in st._idx.damaged]
        try:
            n_forms, n_att = _write_base(
                tmp, root={S.ROOT_CREATED_UTC: st._root.get(S.ROOT_CREATED_UTC, utc_now_iso()),
                           S.ROOT_NEXT_SEQ: st._idx.next_seq, S.ROOT_STORE_ID: sid.hex()},
                store_id=sid, source=st, positions=intact, runs=runs, texts=texts)
            if os.path.lexists(dst):
                raise StoreError(f"salvage target {dst} appeared while copying; not replaced")
            _atomic.commit_temp(tmp, real_dst, durable)
        except OSError as exc:
            with contextlib.suppress(OSError):
                tmp.unlink()
            if isinstance(exc, StoreError):
                raise
            raise StoreWriteError(f"writing the salvaged copy {dst} failed: "
                                  f"{_atomic.cause(exc)}; nothing was written") from exc
        except BaseException:
            with contextlib.suppress(OSError):
                tmp.unlink()
            raise
        damaged = st.damaged()
    return SalvageReport(str(src_path), str(dst), n_forms, n_att, tuple(sorted(damaged.items())),
                         tuple(dropped))


def warn_damaged(damaged: dict[str, str] | list[tuple[str, str]], path: Any) -> None:
    """Emit one DamagedDataWarning summarising skipped damaged forms (nothing if none)."""
    items = list(damaged.items()) if isinstance(damaged, dict) else list(damaged)
    if items:
        names = ", ".join(k for k, _ in items[:5]) + (" ..." if len(items) > 5 else "")
        warnings.warn(f"{path}: {len(items)} damaged form(s) skipped: {names}",
                      DamagedDataWarning, stacklevel=3)
