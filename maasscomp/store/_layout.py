"""Byte layouts of schema version 2: index rows, blobs, the file header and commit records.

A version-2 store is one file::

    [file header, 512 bytes][HDF5 image: the compacted base][commit record][commit record]...

The HDF5 image is an ordinary HDF5 file placed after a 512-byte user block (HDF5's own
mechanism for a foreign header, so any HDF5 tool opens the file and sees the base).  Every
transaction committed since the last compaction is a *commit record* appended after the
base; records are written once and never changed.  The layout of each part is documented
in ``docs/store-schema.md``; every name and magic string lives here or in
:mod:`maasscomp.store.schema`.
"""

from __future__ import annotations

import hashlib
import json
import struct
import zlib
from dataclasses import dataclass
from typing import Any

import numpy as np

from maasscomp.errors import InputError

# ---------------------------------------------------------------- file header (HDF5 user block)

USERBLOCK_SIZE = 512
#: First bytes of a version-2 store (the HDF5 superblock follows at byte 512).
FILE_MAGIC = b"maasscomp-store\n"
_HEADER = struct.Struct("<16sIIQ16s")  # magic, schema version, flags, base_end, store id
_HEADER_SUM_LEN = 16


def pack_file_header(schema_version: int, base_end: int, store_id: bytes) -> bytes:
    """The 512-byte header: magic, version, end of the HDF5 image, store id, checksum."""
    body = _HEADER.pack(FILE_MAGIC, schema_version, 0, base_end, store_id)
    out = body + digest(body)
    return out + b"\0" * (USERBLOCK_SIZE - len(out))


@dataclass(frozen=True)
class FileHeader:
    schema_version: int
    base_end: int
    store_id: bytes


def unpack_file_header(raw: bytes) -> FileHeader | None:
    """The header of a version-2 store, or None if ``raw`` does not start with one.

    Raises ValueError for a header whose magic is right but whose checksum is not.
    """
    if len(raw) < _HEADER.size + _HEADER_SUM_LEN or not raw.startswith(FILE_MAGIC):
        return None
    body = raw[:_HEADER.size]
    if digest(body) != raw[_HEADER.size:_HEADER.size + _HEADER_SUM_LEN]:
        raise ValueError("file header checksum does not match")
    _, ver, _, base_end, sid = _HEADER.unpack(body)
    return FileHeader(ver, base_end, sid)


def digest(*parts: bytes | memoryview) -> bytes:
    """First 16 bytes of SHA-256 over the concatenated parts."""
    h = hashlib.sha256()
    for p in parts:
        h.update(p)
    return h.digest()[:16]


# ---------------------------------------------------------------- index rows

#: Number of coefficients at infinity kept in every index row (listing reads only rows).
PREVIEW = 8

#: One row per form, the same in the base (dataset ``/forms/rows``) and in commit records.
#: ``*_at`` fields locate the form's bytes: in the base relative to the pools
#: ``/forms/values`` (float64 elements), ``/forms/meta`` and ``/forms/labels`` (bytes); in
#: a commit record relative to the record's data part (bytes).
ROW_DTYPE = np.dtype([
    ("seq", "<i8"), ("level", "<i8"), ("R", "<f8"), ("R_error", "<f8"),
    ("hecke_residual", "<f8"), ("solver_Y", "<f8"), ("solver_eps", "<f8"),
    ("solver_M0", "<i8"), ("solver_Q", "<i8"),
    ("multiplicity", "<i4"), ("basis_index", "<i4"), ("n_cusps", "<i4"), ("M", "<i4"),
    ("parity", "i1"), ("is_new", "i1"), ("coeffs_kind", "i1"), ("errors_kind", "i1"),
    ("pad", "<i4"),
    ("char_modulus", "<i8"), ("char_conductor", "<i8"),
    ("coeffs_at", "<i8"), ("errors_at", "<i8"), ("meta_at", "<i8"), ("meta_len", "<i8"),
    ("labels_at", "<i8"), ("labels_len", "<i8"),
    ("preview", "<f8", (2 * PREVIEW,)),
    ("data_sum", "u1", (16,)), ("row_sum", "u1", (16,)),
])
LOCATION_FIELDS = ("coeffs_at", "errors_at", "meta_at", "labels_at")

#: coeffs_kind / errors_kind: how the float64 values are read back.
KIND_REAL, KIND_COMPLEX = 0, 1
PARITY_CODES = {"even": 0, "odd": 1}
PARITY_NAMES = {0: "even", 1: "odd"}
#: A row's labels bytes are ``key TAB symmetry TAB character NEWLINE`` (UTF-8); the newline
#: lets a reader split a whole pool of labels at once.
LABEL_SEP = "\t"
LABEL_END = "\n"


def label_bytes(key: str, symmetry: str, character: str) -> bytes:
    return (LABEL_SEP.join((key, symmetry, character)) + LABEL_END).encode("utf-8")


def split_labels(raw: bytes) -> tuple[str, str, str]:
    text = raw.decode("utf-8")
    if not text.endswith(LABEL_END):
        raise ValueError("labels do not end with a newline")
    parts = text[:-1].split(LABEL_SEP)
    if len(parts) != 3 or LABEL_END in text[:-1]:
        raise ValueError("labels do not have three parts")
    return parts[0], parts[1], parts[2]


def _ranges(names: tuple[str, ...]) -> tuple[tuple[int, int], ...]:
    return tuple((ROW_DTYPE.fields[n][1], ROW_DTYPE.fields[n][0].itemsize) for n in names)


#: Byte ranges of a row left out of the per-form checksum (locations and the checksums).
_CONTENT_HOLES = _ranges(LOCATION_FIELDS + ("data_sum", "row_sum"))
_ROW_HOLES = _ranges(("row_sum",))


def _punched(row: np.ndarray | bytes, holes: tuple[tuple[int, int], ...]) -> bytearray:
    b = bytearray(row if isinstance(row, (bytes, bytearray, memoryview)) else row.tobytes())
    for off, size in holes:
        b[off:off + size] = bytes(size)
    return b


def content_digest(row: np.ndarray | bytes, labels: bytes, meta: bytes | memoryview,
                   coeffs: bytes | memoryview, errors: bytes | memoryview) -> bytes:
    """The per-form checksum: every stored field of the form, wherever it is placed.

    Covers the row without its locations and checksums, the labels, the metadata blob
    (symmetry, character, cusps, solver, extra, provenance) and the two arrays, so moving
    a form (compaction) keeps its checksum and any changed byte of the form changes it.
    ``row`` is one row of :data:`ROW_DTYPE` (or its bytes).
    """
    return digest(b"maasscomp-form-2\0", _punched(row, _CONTENT_HOLES), labels, meta, coeffs, errors)


def row_digest(row: np.ndarray | bytes, labels: bytes) -> bytes:
    """Checksum of one index row (as placed) and its labels: what a listing relies on."""
    return digest(b"maasscomp-row-2\0", _punched(row, _ROW_HOLES), labels)


# ---------------------------------------------------------------- blobs (JSON + raw arrays)

_ARRAY_KINDS = "biufc"
_BLOB_HEAD = struct.Struct("<4sI")  # magic, JSON length
_BLOB_MAGIC = b"MSB2"


def _align8(n: int) -> int:
    return (n + 7) & ~7


def pack_blob(doc: Any, arrays: dict[str, np.ndarray]) -> bytes:
    """A JSON document with numpy arrays stored raw after it (each 8-byte aligned).

    The JSON is ``{"doc": doc, "arrays": [[name, dtype, shape, offset, nbytes], ...]}``
    with offsets counted from the end of the padded JSON text.
    """
    table, chunks, pos = [], [], 0
    for name, arr in arrays.items():
        a = arr if arr.flags.c_contiguous else np.array(arr, order="C")  # keeps 0-d shapes
        if a.dtype.kind not in _ARRAY_KINDS:
            raise InputError(f"array {name!r} of dtype {a.dtype} cannot be stored")
        data = a.tobytes()
        table.append([name, a.dtype.str, list(a.shape), pos, len(data)])
        chunks.append(data + b"\0" * (_align8(len(data)) - len(data)))
        pos += _align8(len(data))
    text = json.dumps({"doc": doc, "arrays": table}, allow_nan=True,
                      separators=(",", ":")).encode("utf-8")
    head = _BLOB_HEAD.pack(_BLOB_MAGIC, len(text))
    pad = _align8(len(head) + len(text)) - len(head) - len(text)
    return b"".join([head, text, b"\0" * pad, *chunks])


def unpack_blob(raw: bytes | memoryview) -> tuple[Any, dict[str, np.ndarray]]:
    """Inverse of :func:`pack_blob` (arrays are fresh writable copies)."""
    raw = memoryview(raw)
    magic, n = _BLOB_HEAD.unpack_from(raw, 0)
    if magic != _BLOB_MAGIC:
        raise ValueError("not a blob")
    start = _BLOB_HEAD.size
    d = json.loads(bytes(raw[start:start + n]).decode("utf-8"))
    base = _align8(start + n)
    arrays = {}
    for name, dt, shape, off, nbytes in d["arrays"]:
        buf = raw[base + off: base + off + nbytes]
        if len(buf) != nbytes:
            raise ValueError(f"array {name!r} is cut short")
        arrays[name] = np.frombuffer(buf, dtype=np.dtype(dt)).reshape(tuple(shape)).copy()
    return d["doc"], arrays


# ---------------------------------------------------------------- commit records

#: ``magic, total length, index length, index checksum, header crc``
_REC_HEAD = struct.Struct("<8sQQ16sI4x")
_REC_TAIL = struct.Struct("<8sQ")
REC_MAGIC = b"MSREC2\r\n"
REC_END = b"MSEND2\r\n"
REC_HEAD_SIZE = _REC_HEAD.size
REC_TAIL_SIZE = _REC_TAIL.size


def pack_record(ops: list[dict], rows: np.ndarray, labels: bytes,
                data: list[bytes]) -> tuple[bytes, int]:
    """One commit record: header, index part (JSON ops, rows, labels), data part, trailer.

    The index part is covered by the header's checksum; the data part by the per-form and
    per-attachment checksums in the rows and ops; the trailer, written last, marks the
    record complete.  Returns the record and the length of its index part.
    """
    text = json.dumps({"ops": ops, "n_rows": int(len(rows))}, allow_nan=True,
                      separators=(",", ":")).encode("utf-8")
    tlen = struct.pack("<Q", len(text))
    text_pad = b"\0" * (_align8(len(tlen) + len(text)) - len(tlen) - len(text))
    rows_b = np.ascontiguousarray(rows, dtype=ROW_DTYPE).tobytes()
    lab_pad = b"\0" * (_align8(len(labels)) - len(labels))
    index = b"".join([tlen, text, text_pad, rows_b, labels, lab_pad])
    data_b = b"".join(data)
    total = REC_HEAD_SIZE + len(index) + len(data_b) + REC_TAIL_SIZE
    head_body = _REC_HEAD.pack(REC_MAGIC, total, len(index), digest(index), 0)
    crc = zlib.crc32(head_body[:-8])
    head = _REC_HEAD.pack(REC_MAGIC, total, len(index), digest(index), crc)
    return b"".join([head, index, data_b, _REC_TAIL.pack(REC_END, total)]), len(index)


@dataclass(frozen=True)
class RecordHead:
    total: int
    index_len: int
    index_sum: bytes


def unpack_record_head(raw: bytes) -> RecordHead | None:
    """The header at the start of ``raw``, or None if it is not a valid record header."""
    if len(raw) < REC_HEAD_SIZE or not raw.startswith(REC_MAGIC):
        return None
    magic, total, ilen, isum, crc = _REC_HEAD.unpack_from(raw, 0)
    if zlib.crc32(raw[:REC_HEAD_SIZE - 8]) != crc:
        return None
    if total < REC_HEAD_SIZE + REC_TAIL_SIZE + ilen:
        return None
    return RecordHead(total, ilen, isum)


def record_tail_ok(raw: bytes, total: int) -> bool:
    if len(raw) != REC_TAIL_SIZE:
        return False
    magic, t = _REC_TAIL.unpack(raw)
    return magic == REC_END and t == total


@dataclass(frozen=True)
class RecordIndex:
    ops: list[dict]
    rows: np.ndarray
    labels: bytes


def unpack_record_index(index: bytes) -> RecordIndex:
    """Ops, rows and labels of a record's index part (checked by the caller's checksum)."""
    (tlen,) = struct.unpack_from("<Q", index, 0)
    d = json.loads(index[8:8 + tlen].decode("utf-8"))
    pos = _align8(8 + tlen)
    n = int(d["n_rows"])
    rows = np.frombuffer(index, dtype=ROW_DTYPE, count=n, offset=pos).copy()
    pos += n * ROW_DTYPE.itemsize
    return RecordIndex(d["ops"], rows, bytes(index[pos:]))
