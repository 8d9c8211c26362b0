"""Encoding of free-form values (a Form's ``extra`` dict, attachments).

Values become a JSON document with numpy arrays moved out of it (stored raw beside the
JSON, :func:`maasscomp.store._layout.pack_blob`), so the JSON stays small and readable
while arrays round-trip bit for bit.  JSON cannot hold tuples or complex numbers; these
are written as one-key tag objects (see :mod:`maasscomp.store.schema`).
"""

from __future__ import annotations

import json
import math
from typing import Any

import h5py
import numpy as np

from maasscomp.errors import InputError
from maasscomp.store import schema as S

#: numpy dtype kinds that round-trip through HDF5 unchanged.
_ARRAY_KINDS = "biufc"


def _check_array(arr: np.ndarray, where: str) -> None:
    if arr.dtype.kind not in _ARRAY_KINDS:
        raise InputError(
            f"{where}: numpy array of dtype {arr.dtype} cannot be stored; "
            "allowed are bool, integer, float and complex arrays"
        )


def encode_tree(value: Any, where: str, prefix: str) -> tuple[Any, dict[str, np.ndarray]]:
    """Turn a value tree into (JSON-ready document, arrays stored beside it).

    Allowed values: None, bool, int, float (also nan/inf), str, complex, numpy scalars of
    those kinds (read back as Python scalars), numpy arrays of kinds bool/int/uint/float/
    complex (read back bit-identical, same dtype and shape), and lists, tuples and dicts
    with str keys nesting these.  Arrays are named ``<prefix>0``, ``<prefix>1``, ... and
    replaced in the document by ``{"__ndarray__": name}``.

    Raises
    ------
    InputError
        Naming the path of the first value that cannot be stored.
    """
    arrays: dict[str, np.ndarray] = {}

    def enc(v: Any, path: str) -> Any:
        if v is None or isinstance(v, (bool, str)):
            return v
        if isinstance(v, (int, float)) and not isinstance(v, bool):
            return v
        if isinstance(v, np.ndarray):
            _check_array(v, f"{where}{path}")
            name = f"{prefix}{len(arrays)}"
            arrays[name] = v
            return {S.TAG_NDARRAY: name}
        if isinstance(v, np.generic):
            if v.dtype.kind in "biuf":
                return v.item()
            if v.dtype.kind == "c":
                return enc(complex(v), path)
            raise InputError(f"{where}{path}: numpy scalar of dtype {v.dtype} cannot be stored")
        if isinstance(v, complex):
            return {S.TAG_COMPLEX: [v.real, v.imag]}
        if isinstance(v, tuple):
            return {S.TAG_TUPLE: [enc(x, f"{path}[{i}]") for i, x in enumerate(v)]}
        if isinstance(v, list):
            return [enc(x, f"{path}[{i}]") for i, x in enumerate(v)]
        if isinstance(v, dict):
            out = {}
            for k, x in v.items():
                if not isinstance(k, str):
                    raise InputError(
                        f"{where}{path}: dict key {k!r} is not allowed; keys must be str"
                    )
                if k in S.EXTRA_TAGS:
                    raise InputError(
                        f"{where}{path}: dict key {k!r} is reserved; "
                        f"keys {', '.join(S.EXTRA_TAGS)} cannot be used"
                    )
                out[k] = enc(x, f"{path}[{k!r}]")
            return out
        raise InputError(
            f"{where}{path}: value of type {type(v).__name__} cannot be stored; allowed are "
            "None, bool, int, float, complex, str, numpy scalars and arrays, list, tuple, dict"
        )

    return enc(value, ""), arrays


def decode_tree(doc: Any, arrays: Any) -> Any:
    """Inverse of :func:`encode_tree` (``arrays`` maps names to arrays or h5py datasets)."""

    def dec(v: Any) -> Any:
        if isinstance(v, list):
            return [dec(x) for x in v]
        if isinstance(v, dict):
            if len(v) == 1:
                (k, x), = v.items()
                if k == S.TAG_NDARRAY:
                    a = arrays[x]
                    return a if isinstance(a, np.ndarray) else a[...]
                if k == S.TAG_TUPLE:
                    return tuple(dec(y) for y in x)
                if k == S.TAG_COMPLEX:
                    return complex(x[0], x[1])
            return {k: dec(x) for k, x in v.items()}
        return v

    return dec(doc)


def encode_extra(extra: dict[str, Any]) -> tuple[Any, dict[str, np.ndarray]]:
    """``Form.extra`` as (document, arrays); see :func:`encode_tree`."""
    if not isinstance(extra, dict):
        raise InputError(f"extra must be a dict, got {type(extra).__name__}")
    return encode_tree(extra, "extra", "x")


def decode_extra_text(text: str, arrays: h5py.Group | None) -> dict[str, Any]:
    """``extra`` of a schema-version-1 form: JSON text with arrays in an HDF5 group."""
    return decode_tree(json.loads(text), arrays)


# ---------------------------------------------------------------- attachments


def encode_mapping(data: dict[str, Any], where: str) -> tuple[Any, dict[str, np.ndarray]]:
    """An attachment dict as (document, arrays).

    Arrays (and lists or tuples, converted by numpy) come back as arrays; int, float, bool,
    complex, numpy scalars and str as Python scalars; None as None; nested dicts as dicts.
    Entry names are plain link names (:func:`maasscomp.store.schema.check_member_name`).
    """
    arrays: dict[str, np.ndarray] = {}

    def enc(d: dict, w: str) -> dict:
        if not isinstance(d, dict):
            raise InputError(f"{w} must be a dict, got {type(d).__name__}")
        out = {}
        for k, v in d.items():
            S.check_member_name(k, f"{where} entry name")
            wk = f"{w}[{k!r}]"
            if isinstance(v, dict):
                out[k] = enc(v, wk)
            elif isinstance(v, (np.ndarray, list, tuple)):
                arr = np.asarray(v)
                _check_array(arr, wk)
                name = f"a{len(arrays)}"
                arrays[name] = arr
                out[k] = {S.TAG_NDARRAY: name}
            elif v is None or isinstance(v, str):
                out[k] = v
            elif isinstance(v, (bool, int, float, complex, np.generic)):
                arr = np.asarray(v)
                _check_array(arr, wk)
                x = arr.item()
                out[k] = {S.TAG_COMPLEX: [x.real, x.imag]} if isinstance(x, complex) else x
            else:
                raise InputError(
                    f"{wk}: value of type {type(v).__name__} cannot be stored; allowed are numpy "
                    "arrays, lists of numbers, int, float, bool, complex, str, None and dicts"
                )
        return out

    return enc(data, where), arrays


def decode_mapping(doc: Any, arrays: dict[str, np.ndarray]) -> dict[str, Any]:
    """Inverse of :func:`encode_mapping`."""
    return decode_tree(doc, arrays)


def read_mapping_v1(group: h5py.Group) -> dict[str, Any]:
    """An attachment of a schema-version-1 store (HDF5 group of datasets and attributes)."""
    out: dict[str, Any] = {}
    for k, v in group.attrs.items():
        if isinstance(v, h5py.Empty):
            out[k] = None
        elif isinstance(v, str):
            out[k] = v
        elif isinstance(v, bytes):
            out[k] = v.decode("utf-8")
        else:
            out[k] = np.asarray(v).item()
    for k, obj in group.items():
        out[k] = read_mapping_v1(obj) if isinstance(obj, h5py.Group) else obj[...]
    return out


# ---------------------------------------------------------------- export helpers


def to_plain_json(v: Any) -> Any:
    """Value -> plain JSON (numpy -> lists, tuples -> lists, complex -> {re, im}).

    Non-finite floats become the strings ``"nan"``, ``"inf"``, ``"-inf"`` because strict JSON
    has no token for them.
    """
    t = type(v)
    if t is str or t is int or t is bool or v is None:
        return v
    if t is float:
        if math.isfinite(v):
            return v
        return "nan" if math.isnan(v) else ("inf" if v > 0 else "-inf")
    if t is dict:
        return {str(k): to_plain_json(x) for k, x in v.items()}
    if t is list and all(type(x) is float for x in v) and all(map(math.isfinite, v)):
        return v
    if isinstance(v, (bool, str)):
        return v
    if isinstance(v, (np.ndarray, np.generic)):
        return to_plain_json(v.tolist())
    if isinstance(v, int):
        return v
    if isinstance(v, float):
        if math.isfinite(v):
            return v
        return "nan" if math.isnan(v) else ("inf" if v > 0 else "-inf")
    if isinstance(v, complex):
        return {"re": to_plain_json(v.real), "im": to_plain_json(v.imag)}
    if isinstance(v, (list, tuple)):
        return [to_plain_json(x) for x in v]
    if isinstance(v, dict):
        return {str(k): to_plain_json(x) for k, x in v.items()}
    return str(v)
