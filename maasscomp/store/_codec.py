"""Encoding of free-form values (a Form's ``extra`` dict, attachments) into HDF5 objects.

``extra`` is stored as JSON text with numpy arrays moved into datasets, so the JSON stays
small and readable while arrays round-trip bit for bit.  JSON cannot hold tuples or complex
numbers; these are written as one-key tag objects (see :mod:`maasscomp.store.schema`).
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


def encode_extra(extra: dict[str, Any]) -> tuple[str, dict[str, np.ndarray]]:
    """Turn ``extra`` into (JSON text, arrays to store under ``extra_arrays``).

    Allowed values: None, bool, int, float (also nan/inf), str, complex, numpy scalars of
    those kinds (read back as Python scalars), numpy arrays of kinds bool/int/uint/float/
    complex (read back bit-identical, same dtype and shape), and lists, tuples and dicts
    with str keys nesting these.

    Raises
    ------
    InputError
        Naming the path of the first value that cannot be stored.
    """
    if not isinstance(extra, dict):
        raise InputError(f"extra must be a dict, got {type(extra).__name__}")
    arrays: dict[str, np.ndarray] = {}

    def enc(v: Any, path: str) -> Any:
        if v is None or isinstance(v, (bool, str)):
            return v
        if isinstance(v, (int, float)) and not isinstance(v, bool):
            return v
        if isinstance(v, np.ndarray):
            _check_array(v, f"extra{path}")
            name = f"a{len(arrays)}"
            arrays[name] = v
            return {S.TAG_NDARRAY: name}
        if isinstance(v, np.generic):
            if v.dtype.kind in "biuf":
                return v.item()
            if v.dtype.kind == "c":
                return enc(complex(v), path)
            raise InputError(f"extra{path}: numpy scalar of dtype {v.dtype} cannot be stored")
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
                        f"extra{path}: dict key {k!r} is not allowed; keys must be str"
                    )
                if k in S.EXTRA_TAGS:
                    raise InputError(
                        f"extra{path}: dict key {k!r} is reserved; "
                        f"keys {', '.join(S.EXTRA_TAGS)} cannot be used"
                    )
                out[k] = enc(x, f"{path}[{k!r}]")
            return out
        raise InputError(
            f"extra{path}: value of type {type(v).__name__} cannot be stored; allowed are "
            "None, bool, int, float, complex, str, numpy scalars and arrays, list, tuple, dict"
        )

    doc = enc(extra, "")
    return json.dumps(doc, allow_nan=True, separators=(",", ":")), arrays


def decode_extra(text: str, arrays: h5py.Group | None) -> dict[str, Any]:
    """Inverse of :func:`encode_extra`."""

    def dec(v: Any) -> Any:
        if isinstance(v, list):
            return [dec(x) for x in v]
        if isinstance(v, dict):
            if len(v) == 1:
                (k, x), = v.items()
                if k == S.TAG_NDARRAY:
                    return arrays[x][...]  # type: ignore[index]
                if k == S.TAG_TUPLE:
                    return tuple(dec(y) for y in x)
                if k == S.TAG_COMPLEX:
                    return complex(x[0], x[1])
            return {k: dec(x) for k, x in v.items()}
        return v

    return dec(json.loads(text))


# ---------------------------------------------------------------- attachments


def write_mapping(group: h5py.Group, data: dict[str, Any], where: str) -> None:
    """Write a dict of arrays and scalars into ``group``.

    Arrays (and lists, converted by numpy) become datasets; int, float, bool, complex and str
    scalars become attributes; None becomes an attribute with a null dataspace;
    nested dicts become subgroups.
    """
    if not isinstance(data, dict):
        raise InputError(f"{where} must be a dict, got {type(data).__name__}")
    for k, v in data.items():
        S.check_member_name(k, f"{where} entry name")
        w = f"{where}[{k!r}]"
        if isinstance(v, dict):
            write_mapping(group.create_group(k), v, w)
        elif isinstance(v, (np.ndarray, list, tuple)):
            arr = np.asarray(v)
            _check_array(arr, w)
            group.create_dataset(k, data=arr)
        elif v is None:
            # an attribute with a null dataspace
            group.attrs[k] = h5py.Empty("f8")
        elif isinstance(v, str):
            group.attrs[k] = v
        elif isinstance(v, (bool, int, float, complex, np.generic)):
            arr = np.asarray(v)
            _check_array(arr, w)
            group.attrs[k] = arr
        else:
            raise InputError(
                f"{w}: value of type {type(v).__name__} cannot be stored; allowed are numpy "
                "arrays, lists of numbers, int, float, bool, complex, str, None and dicts"
            )


def read_mapping(group: h5py.Group) -> dict[str, Any]:
    """Inverse of :func:`write_mapping` (scalars come back as Python scalars)."""
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
        out[k] = read_mapping(obj) if isinstance(obj, h5py.Group) else obj[...]
    return out


# ---------------------------------------------------------------- export helpers


def to_plain_json(v: Any) -> Any:
    """Value -> plain JSON (numpy -> lists, tuples -> lists, complex -> {re, im}).

    Non-finite floats become the strings ``"nan"``, ``"inf"``, ``"-inf"`` because strict JSON
    has no token for them.
    """
    if v is None or isinstance(v, (bool, str)):
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
