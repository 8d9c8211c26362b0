"""The HDF5 store of Maass forms: crash-safe copy-on-write writer and reader.

Every change happens in a *transaction*: the store file is copied byte for byte to a
temporary file beside it, the changes are written into the copy with h5py, the copy is
closed, fsynced, and renamed onto the store (``os.replace``), and the directory is fsynced.
HDF5 has no journal, so a process killed while h5py writes can leave a file unreadable; with
this scheme only the temporary file can be damaged, and the next writer deletes it.  A
``kill -9`` at any moment therefore leaves a store holding exactly the transactions
committed before the kill.  When a transaction deletes objects (replacing a duplicate or an
attachment) the copy is repacked into a fresh file so freed space does not accumulate.

Layout and names: :mod:`maasscomp.store.schema`; prose: ``docs/store-schema.md``.
"""

from __future__ import annotations

import contextlib
import json
import math
import os
import secrets
import shutil
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path
from typing import Any, Iterable, Iterator

import h5py
import numpy as np

from maasscomp import __version__
from maasscomp.errors import InputError, StoreError
from maasscomp.hejhal.types import SolverParams, SymmetryClass
from maasscomp.spectrum.form import Form
from maasscomp.store import _atomic, _codec
from maasscomp.store import schema as S

#: Default absolute tolerance on R for duplicate detection.  Distinct eigenvalues of one
#: level and symmetry class closer than this are not expected in the ranges studied; a
#: recomputation of the same form typically agrees to far better than this.
DEFAULT_DUPLICATE_TOL = 1e-6

ON_DUPLICATE = ("skip", "replace", "error")
MODES = ("r", "a", "w")

_STR = h5py.string_dtype("utf-8")


def utc_now_iso() -> str:
    """Current time as ISO 8601 UTC with microseconds, e.g. ``2024-05-01T12:00:00.000001Z``."""
    return datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


@dataclass(frozen=True)
class _Entry:
    """What duplicate detection, filtering and ordering need, cached per form."""

    level: int
    label: str
    parity: str
    R: float
    basis_index: int
    seq: int

    @property
    def bucket(self) -> tuple[int, str, int]:
        """Forms that can duplicate each other share (level, symmetry label, basis index)."""
        return (self.level, self.label, self.basis_index)


def _attr_str(v: Any) -> str:
    return v.decode("utf-8") if isinstance(v, bytes) else str(v)


def _read_text(ds: h5py.Dataset) -> str:
    return ds.asstr()[()]


def _check_store_file(path: Path) -> None:
    """Raise StoreError unless ``path`` is a maasscomp store this version can read."""
    if not path.exists():
        raise StoreError(f"store file {path} does not exist")
    if path.is_dir():
        raise StoreError(f"store path {path} is a directory; expected a maasscomp HDF5 store file")
    try:
        ok = h5py.is_hdf5(path)
    except OSError as exc:
        raise StoreError(f"cannot read store file {path}: {exc}") from exc
    if not ok:
        raise StoreError(
            f"{path} is not an HDF5 file; expected a maasscomp store "
            f"(HDF5 file with root attribute {S.ROOT_FORMAT}={S.FORMAT_NAME!r})"
        )
    try:
        with h5py.File(path, "r") as h:
            _check_root(h, path)
    except StoreError:
        raise
    except OSError as exc:
        raise StoreError(f"cannot open store file {path}: {exc}") from exc


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
    if v < 1:
        raise StoreError(f"{path}: store schema version {v} is invalid; expected 1..{S.SCHEMA_VERSION}")
    for g in (S.FORMS_GROUP, S.RUNS_GROUP):
        if not isinstance(h.get(g), h5py.Group):
            raise StoreError(f"{path} is damaged: group /{g} of a maasscomp store is missing")
    return v


def _validate_form(form: Form) -> None:
    if not isinstance(form, Form):
        raise InputError(f"expected a maasscomp Form, got {type(form).__name__}")
    if isinstance(form.level, bool) or not isinstance(form.level, (int, np.integer)) or form.level < 1:
        raise InputError(f"Form.level {form.level!r} is not allowed; use an integer >= 1")
    for name in ("R", "R_error", "hecke_residual"):
        v = getattr(form, name)
        if isinstance(v, bool) or not isinstance(v, (int, float, np.integer, np.floating)):
            raise InputError(f"Form.{name} {v!r} is not allowed; use a real number")
    if not math.isfinite(float(form.R)):
        raise InputError(f"Form.R {form.R!r} is not allowed; use a finite real number")
    if not isinstance(form.symmetry, SymmetryClass):
        raise InputError(f"Form.symmetry {form.symmetry!r} is not allowed; use a SymmetryClass")
    if not isinstance(form.params, SolverParams):
        raise InputError(f"Form.params {form.params!r} is not allowed; use a SolverParams")
    for name in ("coeffs", "coeff_errors"):
        a = getattr(form, name)
        if not isinstance(a, np.ndarray) or a.ndim != 2 or a.dtype.kind not in "fc":
            desc = f"array of shape {a.shape} and dtype {a.dtype}" if isinstance(a, np.ndarray) else type(a).__name__
            raise InputError(
                f"Form.{name} ({desc}) is not allowed; use a 2-d float or complex numpy array "
                "of shape (n_cusps, M)"
            )
    if form.coeffs.shape != form.coeff_errors.shape:
        raise InputError(
            f"Form.coeff_errors shape {form.coeff_errors.shape} does not match "
            f"Form.coeffs shape {form.coeffs.shape}"
        )
    if form.is_new not in (True, False, None):
        raise InputError(f"Form.is_new {form.is_new!r} is not allowed; use True, False or None")
    for name in ("multiplicity", "basis_index"):
        v = getattr(form, name)
        if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < (1 if name == "multiplicity" else 0):
            lo = 1 if name == "multiplicity" else 0
            raise InputError(f"Form.{name} {v!r} is not allowed; use an integer >= {lo}")


class _Txn:
    def __init__(self, tmp: Path, h: h5py.File) -> None:
        self.tmp = tmp
        self.h = h
        self.depth = 1
        self.deleted = False


class Store:
    """A file of Maass forms with their provenance, scan attachments and run manifests.

    Open with :meth:`Store.open`; use as a context manager.  Reads see a consistent
    snapshot: the file a reader opened is never modified, writers replace it whole.

    Writing (modes ``"a"`` and ``"w"``) takes an exclusive lock ``<path>.lock``; each
    mutating call is its own transaction unless grouped with :meth:`transaction`::

        with Store.open("forms.h5", "a") as st:
            with st.transaction():          # one atomic commit
                keys = st.add_forms(forms, on_duplicate="skip", run_id=rid)
                st.mark_task_done(task_id, keys, run_id=rid)
    """

    # ------------------------------------------------------------------ opening

    def __init__(self, path: Path, mode: str, durable: bool, lock: _atomic.WriterLock | None) -> None:
        self._path = path
        self._mode = mode
        self._durable = durable
        self._lock = lock
        self._rh: h5py.File | None = None
        self._txn: _Txn | None = None
        self._index: dict[str, _Entry] | None = None
        self._buckets: dict[tuple[int, str, int], set[str]] = {}
        self._broken = False
        self._closed = False

    @classmethod
    def open(cls, path: str | os.PathLike, mode: str = "r", *, durable: bool = True,
             lock_timeout: float = 0.0) -> "Store":
        """Open a store file.

        Parameters
        ----------
        path : path-like
            The HDF5 store file.
        mode : {"r", "a", "w"}
            ``"r"`` read only (the file must exist); ``"a"`` read and append, creating an
            empty store if the file is missing; ``"w"`` start an empty store, replacing an
            existing maasscomp store (a file that is not a store is never overwritten).
        durable : bool
            fsync every committed transaction (file and directory).  Crash safety against
            killed processes does not need it; safety against power loss does.
        lock_timeout : float
            Seconds to wait for another writer to release the store (write modes).

        Raises
        ------
        StoreError
            Missing file (mode "r"), not HDF5, HDF5 but not a maasscomp store, a newer
            schema version, or the store is locked by another writer.
        InputError
            Unknown mode.
        """
        if mode not in MODES:
            raise InputError(f"store mode {mode!r} is not allowed; use one of {', '.join(MODES)}")
        p = Path(os.fspath(path))
        if mode == "r":
            _check_store_file(p)
            st = cls(p, mode, durable, None)
            st._reader()
            return st
        if p.is_dir():
            raise StoreError(f"store path {p} is a directory; expected a maasscomp HDF5 store file")
        if not p.parent.is_dir():
            raise StoreError(f"cannot create store {p}: directory {p.parent} does not exist")
        lock = _atomic.WriterLock(p, lock_timeout)
        try:
            for stale in _atomic.stale_temps(p):
                with contextlib.suppress(OSError):
                    stale.unlink()
            if p.exists():
                _check_store_file(p)  # never clobber or append to a foreign file
            if mode == "w" or not p.exists():
                cls._create_empty(p, durable)
            st = cls(p, mode, durable, lock)
            st._reader()
            return st
        except BaseException:
            lock.release()
            raise

    @staticmethod
    def _create_empty(p: Path, durable: bool) -> None:
        tmp = _atomic.temp_path_for(p)
        try:
            with h5py.File(tmp, "w") as h:
                h.attrs[S.ROOT_FORMAT] = S.FORMAT_NAME
                h.attrs[S.ROOT_SCHEMA_VERSION] = np.int64(S.SCHEMA_VERSION)
                h.attrs[S.ROOT_CREATED_UTC] = utc_now_iso()
                h.attrs[S.ROOT_PACKAGE_VERSION] = __version__
                h.attrs[S.ROOT_NEXT_SEQ] = np.int64(0)
                h.create_group(S.FORMS_GROUP)
                h.create_group(S.RUNS_GROUP)
            _atomic.commit_temp(tmp, p, durable)
        except BaseException:
            with contextlib.suppress(OSError):
                tmp.unlink()
            raise

    def close(self) -> None:
        """Close the store (an open explicit transaction is rolled back)."""
        if self._closed:
            return
        if self._txn is not None:
            self._abort()
        if self._rh is not None:
            self._rh.close()
            self._rh = None
        if self._lock is not None:
            self._lock.release()
            self._lock = None
        self._closed = True

    def __enter__(self) -> "Store":
        return self

    def __exit__(self, *exc: Any) -> None:
        self.close()

    def __del__(self) -> None:  # pragma: no cover - best effort
        with contextlib.suppress(Exception):
            self.close()

    def __repr__(self) -> str:
        state = "closed" if self._closed else f"mode={self._mode!r}"
        return f"Store({str(self._path)!r}, {state})"

    @property
    def path(self) -> Path:
        return self._path

    @property
    def mode(self) -> str:
        return self._mode

    # ------------------------------------------------------------------ handles

    def _h(self) -> h5py.File:
        """The handle reads go to: the open transaction's copy, else the committed file."""
        if self._closed:
            raise StoreError(f"store {self._path} is closed")
        if self._txn is not None:
            return self._txn.h
        return self._reader()

    def _reader(self) -> h5py.File:
        if self._rh is None:
            try:
                h = h5py.File(self._path, "r")
            except OSError as exc:
                raise StoreError(f"cannot open store file {self._path}: {exc}") from exc
            try:
                _check_root(h, self._path)
            except BaseException:
                h.close()
                raise
            self._rh = h
        return self._rh

    def _forms_group(self) -> h5py.Group:
        return self._h()[S.FORMS_GROUP]

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
            self._end()
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
        tmp = _atomic.temp_path_for(self._path)
        try:
            shutil.copyfile(self._path, tmp)
            h = h5py.File(tmp, "r+")
        except BaseException as exc:
            with contextlib.suppress(OSError):
                tmp.unlink()
            if isinstance(exc, OSError):
                raise StoreError(f"cannot start a transaction on {self._path}: {exc}") from exc
            raise
        self._txn = _Txn(tmp, h)
        return self._txn

    def _end(self) -> None:
        txn = self._txn
        assert txn is not None
        txn.depth -= 1
        if txn.depth > 0:
            return
        try:
            if txn.deleted:
                self._repack(txn)
            txn.h.close()
            _atomic.commit_temp(txn.tmp, self._path, self._durable)
        except BaseException:
            self._abort()
            raise
        self._txn = None
        if self._rh is not None:
            self._rh.close()
            self._rh = None

    def _abort(self) -> None:
        txn = self._txn
        self._txn = None
        self._index = None  # rebuilt from the committed file on demand
        if txn is None:
            return
        # inside an enclosing transaction block: refuse further writes until it is left
        self._broken = txn.depth > 1
        with contextlib.suppress(Exception):
            txn.h.close()
        with contextlib.suppress(OSError):
            txn.tmp.unlink()

    def _repack(self, txn: _Txn) -> None:
        """Copy the transaction's file into a fresh one so deleted objects free their space."""
        tmp2 = _atomic.temp_path_for(self._path)
        try:
            with h5py.File(tmp2, "w") as dst:
                for k, v in txn.h.attrs.items():
                    dst.attrs[k] = v
                for name in txn.h:
                    txn.h.copy(txn.h[name], dst, name)
        except BaseException:
            with contextlib.suppress(OSError):
                tmp2.unlink()
            raise
        txn.h.close()
        with contextlib.suppress(OSError):
            txn.tmp.unlink()
        txn.tmp = tmp2
        txn.h = h5py.File(tmp2, "r+")

    @contextlib.contextmanager
    def _write(self) -> Iterator[h5py.File]:
        self._begin()
        try:
            yield self._txn.h  # type: ignore[union-attr]
        except BaseException:
            self._abort()
            raise
        self._end()

    # ------------------------------------------------------------------ index

    def _idx(self) -> dict[str, _Entry]:
        if self._index is None:
            entries = []
            for key, g in self._forms_group().items():
                a = g.attrs
                entries.append((key, _Entry(
                    level=int(a[S.A_LEVEL]), label=_attr_str(a[S.A_SYMMETRY_LABEL]),
                    parity=_attr_str(a[S.A_PARITY]), R=float(a[S.A_R]),
                    basis_index=int(a[S.A_BASIS_INDEX]), seq=int(a[S.A_SEQ]))))
            entries.sort(key=lambda kv: kv[1].seq)
            self._index = dict(entries)
            self._buckets = {}
            for key, e in entries:
                self._buckets.setdefault(e.bucket, set()).add(key)
        return self._index

    def _index_add(self, key: str, e: _Entry) -> None:
        self._idx()[key] = e
        self._buckets.setdefault(e.bucket, set()).add(key)

    def _index_remove(self, key: str) -> None:
        e = self._idx().pop(key)
        self._buckets[e.bucket].discard(key)

    # ------------------------------------------------------------------ reading

    @property
    def metadata(self) -> dict[str, Any]:
        """Root attributes (format, schema_version, created_utc, package_version, next_seq)."""
        out = {}
        for k, v in self._h().attrs.items():
            out[k] = _attr_str(v) if isinstance(v, (str, bytes)) else np.asarray(v).item()
        return out

    @property
    def schema_version(self) -> int:
        return int(self._h().attrs[S.ROOT_SCHEMA_VERSION])

    def keys(self) -> list[str]:
        """Form keys in the order the forms were written."""
        return list(self._idx())

    def __len__(self) -> int:
        return len(self._idx())

    def __contains__(self, key: object) -> bool:
        return key in self._idx()

    def __iter__(self) -> Iterator[Form]:
        for key in self.keys():
            yield self.get(key)

    def _group(self, key: str) -> h5py.Group:
        if key not in self._idx():
            raise StoreError(f"no form with key {key!r} in store {self._path}")
        return self._forms_group()[key]

    def get(self, key: str) -> Form:
        """The form stored under ``key`` (arrays bit-identical to what was written)."""
        g = self._group(key)
        a = g.attrs
        al = g[S.D_AL_SIGNS][...]
        sym = SymmetryClass(_attr_str(a[S.A_PARITY]), tuple((int(p), int(s)) for p, s in al))
        params = SolverParams(Y=float(a[S.A_SOLVER_Y]), M0=int(a[S.A_SOLVER_M0]),
                              Q=int(a[S.A_SOLVER_Q]), eps=float(a[S.A_SOLVER_EPS]))
        extra = _codec.decode_extra(_read_text(g[S.D_EXTRA]), g.get(S.G_EXTRA_ARRAYS))
        return Form(
            level=int(a[S.A_LEVEL]), R=float(a[S.A_R]), symmetry=sym,
            coeffs=g[S.D_COEFFS][...], coeff_errors=g[S.D_COEFF_ERRORS][...],
            R_error=float(a[S.A_R_ERROR]), hecke_residual=float(a[S.A_HECKE_RESIDUAL]),
            params=params, is_new=S.IS_NEW_FROM_CODE[int(a[S.A_IS_NEW])],
            multiplicity=int(a[S.A_MULTIPLICITY]), basis_index=int(a[S.A_BASIS_INDEX]),
            extra=extra,
        )

    def provenance(self, key: str) -> dict[str, Any]:
        """package_version, created_utc, config text, run_id and write sequence of a form."""
        g = self._group(key)
        a = g.attrs
        return {
            "package_version": _attr_str(a[S.A_PACKAGE_VERSION]),
            "created_utc": _attr_str(a[S.A_CREATED_UTC]),
            "config": _read_text(g[S.D_CONFIG]),
            "run_id": _attr_str(a[S.A_RUN_ID]),
            "seq": int(a[S.A_SEQ]),
        }

    def select(self, level: int | None = None, parity: str | None = None,
               R_min: float | None = None, R_max: float | None = None,
               symmetry: str | None = None) -> list[str]:
        """Keys of the forms matching every given filter (R bounds inclusive)."""
        if parity is not None and parity not in ("even", "odd"):
            raise InputError(f"parity {parity!r} is not allowed; use 'even' or 'odd'")
        out = []
        for k, e in self._idx().items():
            if level is not None and e.level != level:
                continue
            if parity is not None and e.parity != parity:
                continue
            if symmetry is not None and e.label != symmetry:
                continue
            if R_min is not None and e.R < R_min:
                continue
            if R_max is not None and e.R > R_max:
                continue
            out.append(k)
        return out

    def forms(self, level: int | None = None, parity: str | None = None,
              R_min: float | None = None, R_max: float | None = None,
              symmetry: str | None = None) -> list[Form]:
        """Forms matching every given filter, in write order (see :meth:`select`)."""
        return [self.get(k) for k in self.select(level, parity, R_min, R_max, symmetry)]

    def summary_rows(self, n_coeffs: int = 3, keys: Iterable[str] | None = None) -> list[dict[str, Any]]:
        """One dict per form for listings.

        Keys of each dict: key, level, symmetry, R, R_error, hecke_residual, is_new,
        multiplicity, basis_index, n_cusps, M, and ``c1`` .. ``c<n_coeffs>`` (coefficients at
        infinity; fewer if M is smaller).
        """
        if n_coeffs < 0:
            raise InputError(f"n_coeffs {n_coeffs!r} is not allowed; use an integer >= 0")
        rows = []
        for key in (self.keys() if keys is None else list(keys)):
            g = self._group(key)
            a = g.attrs
            ds = g[S.D_COEFFS]
            K = min(n_coeffs, ds.shape[1])
            first = ds[0, :K] if K else np.zeros(0)
            row: dict[str, Any] = {
                "key": key, "level": int(a[S.A_LEVEL]), "symmetry": _attr_str(a[S.A_SYMMETRY_LABEL]),
                "R": float(a[S.A_R]), "R_error": float(a[S.A_R_ERROR]),
                "hecke_residual": float(a[S.A_HECKE_RESIDUAL]),
                "is_new": S.IS_NEW_FROM_CODE[int(a[S.A_IS_NEW])],
                "multiplicity": int(a[S.A_MULTIPLICITY]), "basis_index": int(a[S.A_BASIS_INDEX]),
                "n_cusps": int(ds.shape[0]), "M": int(ds.shape[1]),
            }
            for n in range(K):
                row[f"c{n + 1}"] = first[n].item()
            rows.append(row)
        return rows

    def find_duplicate(self, form: Form, tol: float = DEFAULT_DUPLICATE_TOL) -> str | None:
        """Key of a stored form with the same level, symmetry class and basis index as
        ``form`` and ``|R - R_stored| <= tol`` (the closest one), or None."""
        if not (tol >= 0):
            raise InputError(f"duplicate tolerance {tol!r} is not allowed; use a number >= 0")
        idx = self._idx()
        best, best_d = None, math.inf
        for k in self._buckets.get((int(form.level), form.symmetry.label, int(form.basis_index)), ()):
            d = abs(idx[k].R - float(form.R))
            if d <= tol and (d < best_d or (d == best_d and idx[k].seq < idx[best].seq)):  # type: ignore[index]
                best, best_d = k, d
        return best

    # ------------------------------------------------------------------ writing forms

    def add_form(self, form: Form, **kw: Any) -> str:
        """Add one form; see :meth:`add_forms`."""
        return self.add_forms([form], **kw)[0]

    def add_forms(self, forms: Iterable[Form], *, on_duplicate: str = "error",
                  tol: float = DEFAULT_DUPLICATE_TOL, config_text: str = "",
                  run_id: str = "") -> list[str]:
        """Add forms in one transaction (or in the enclosing :meth:`transaction`).

        Parameters
        ----------
        forms : iterable of Form
        on_duplicate : {"error", "skip", "replace"}
            What to do when :meth:`find_duplicate` finds a stored form (or one earlier in
            this batch): raise StoreError, keep the stored form, or delete it (with its
            attachments) and store the new one.
        tol : float
            Absolute R tolerance of duplicate detection.
        config_text : str
            The TOML/JSON text of the configuration that produced the forms (may be empty).
        run_id : str
            Id of the run that produced them ("" if none).

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
        encoded = []
        for f in forms:  # validate everything before touching the file
            _validate_form(f)
            encoded.append(_codec.encode_extra(f.extra))
        keys: list[str] = []
        with self._write() as h:
            self._idx()
            fg = h[S.FORMS_GROUP]
            seq = int(h.attrs[S.ROOT_NEXT_SEQ])
            now = utc_now_iso()
            for f, (extra_json, arrays) in zip(forms, encoded):
                dup = self.find_duplicate(f, tol)
                if dup is not None:
                    if on_duplicate == "skip":
                        keys.append(dup)
                        continue
                    if on_duplicate == "error":
                        raise StoreError(
                            f"form at level {f.level}, symmetry {f.symmetry.label}, R={f.R!r}, "
                            f"basis_index {f.basis_index} duplicates stored form {dup!r} in "
                            f"{self._path} (|dR| <= {tol}); pass on_duplicate='skip' or 'replace'"
                        )
                    del fg[dup]
                    self._index_remove(dup)
                    self._txn.deleted = True  # type: ignore[union-attr]
                label = f.symmetry.label
                base = S.form_key_base(f.level, label, f.R, f.basis_index, f.multiplicity)
                key, n = base, 1
                while key in fg:
                    n += 1
                    key = f"{base}_v{n}"
                self._write_form(fg, key, f, extra_json, arrays, seq, now, config_text, run_id)
                self._index_add(key, _Entry(int(f.level), label, f.symmetry.parity, float(f.R),
                                            int(f.basis_index), seq))
                seq += 1
                keys.append(key)
            h.attrs[S.ROOT_NEXT_SEQ] = np.int64(seq)
        return keys

    @staticmethod
    def _write_form(fg: h5py.Group, key: str, f: Form, extra_json: str,
                    arrays: dict[str, np.ndarray], seq: int, now: str,
                    config_text: str, run_id: str) -> None:
        g = fg.create_group(key)
        a = g.attrs
        a[S.A_LEVEL] = np.int64(f.level)
        a[S.A_R] = np.float64(f.R)
        a[S.A_R_ERROR] = np.float64(f.R_error)
        a[S.A_HECKE_RESIDUAL] = np.float64(f.hecke_residual)
        a[S.A_PARITY] = f.symmetry.parity
        a[S.A_SYMMETRY_LABEL] = f.symmetry.label
        a[S.A_SOLVER_Y] = np.float64(f.params.Y)
        a[S.A_SOLVER_M0] = np.int64(f.params.M0)
        a[S.A_SOLVER_Q] = np.int64(f.params.Q)
        a[S.A_SOLVER_EPS] = np.float64(f.params.eps)
        a[S.A_IS_NEW] = np.int8(S.IS_NEW_CODES[f.is_new])
        a[S.A_MULTIPLICITY] = np.int64(f.multiplicity)
        a[S.A_BASIS_INDEX] = np.int64(f.basis_index)
        a[S.A_PACKAGE_VERSION] = __version__
        a[S.A_CREATED_UTC] = now
        a[S.A_SEQ] = np.int64(seq)
        a[S.A_RUN_ID] = run_id
        g.create_dataset(S.D_COEFFS, data=f.coeffs)
        g.create_dataset(S.D_COEFF_ERRORS, data=f.coeff_errors)
        al = np.array(f.symmetry.al_signs, dtype=np.int64).reshape(-1, 2)
        g.create_dataset(S.D_AL_SIGNS, data=al)
        g.create_dataset(S.D_EXTRA, data=extra_json, dtype=_STR)
        if arrays:
            ag = g.create_group(S.G_EXTRA_ARRAYS)
            for name, arr in arrays.items():
                ag.create_dataset(name, data=arr)
        g.create_dataset(S.D_CONFIG, data=config_text, dtype=_STR)

    def delete_form(self, key: str) -> None:
        """Remove a form and its attachments."""
        with self._write() as h:
            self._group(key)
            del h[S.FORMS_GROUP][key]
            self._index_remove(key)
            self._txn.deleted = True  # type: ignore[union-attr]

    # ------------------------------------------------------------------ attachments

    def put_attachment(self, form_key: str, name: str, data: dict[str, Any], *,
                       overwrite: bool = True) -> None:
        """Store ``data`` beside a form, under ``forms/<key>/attachments/<name>``.

        ``data`` maps names to numpy arrays (or lists of numbers), scalars (int, float, bool,
        complex, str, None) or nested dicts of the same.  Arrays read back bit-identical.
        An existing attachment of that name is replaced (``overwrite=True``) or refused.
        """
        S.check_member_name(name, "attachment name")
        if not isinstance(data, dict):
            raise InputError(f"attachment {name!r} must be a dict, got {type(data).__name__}")
        with self._write():
            g = self._group(form_key)
            att = g.require_group(S.G_ATTACHMENTS)
            if name in att:
                if not overwrite:
                    raise StoreError(
                        f"form {form_key!r} in {self._path} already has attachment {name!r}; "
                        "pass overwrite=True to replace it"
                    )
                del att[name]
                self._txn.deleted = True  # type: ignore[union-attr]
            _codec.write_mapping(att.create_group(name), data, f"attachment {name!r}")

    def get_attachment(self, form_key: str, name: str) -> dict[str, Any]:
        """The dict stored by :meth:`put_attachment`."""
        g = self._group(form_key)
        att = g.get(S.G_ATTACHMENTS)
        if att is None or name not in att:
            have = sorted(att) if att is not None else []
            raise StoreError(
                f"form {form_key!r} in {self._path} has no attachment {name!r}"
                + (f"; it has {', '.join(have)}" if have else "")
            )
        return _codec.read_mapping(att[name])

    def attachments(self, form_key: str) -> list[str]:
        """Names of the attachments of a form."""
        att = self._group(form_key).get(S.G_ATTACHMENTS)
        return sorted(att) if att is not None else []

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
        if run_id in self._h()[S.RUNS_GROUP]:
            return run_id
        with self._write() as h:
            self._new_run(h, run_id, config_text)
        return run_id

    @staticmethod
    def _new_run(h: h5py.File, run_id: str, config_text: str) -> h5py.Group:
        g = h[S.RUNS_GROUP].create_group(run_id)
        g.attrs[S.RUN_A_CREATED_UTC] = utc_now_iso()
        g.attrs[S.RUN_A_PACKAGE_VERSION] = __version__
        g.create_dataset(S.RUN_D_CONFIG, data=config_text, dtype=_STR)
        g.create_group(S.RUN_TASKS_GROUP)
        return g

    def runs(self) -> list[str]:
        """Ids of the recorded runs."""
        return sorted(self._h()[S.RUNS_GROUP])

    def run_info(self, run_id: str) -> dict[str, Any]:
        """created_utc, package_version, config text and number of finished tasks of a run."""
        g = self._h()[S.RUNS_GROUP].get(run_id)
        if g is None:
            raise StoreError(f"no run {run_id!r} in store {self._path}")
        return {
            "run_id": run_id,
            "created_utc": _attr_str(g.attrs[S.RUN_A_CREATED_UTC]),
            "package_version": _attr_str(g.attrs[S.RUN_A_PACKAGE_VERSION]),
            "config": _read_text(g[S.RUN_D_CONFIG]),
            "n_tasks_done": len(g[S.RUN_TASKS_GROUP]),
        }

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
        with self._write() as h:
            for k in form_keys:
                self._group(k)
            rg = h[S.RUNS_GROUP].get(run_id)
            if rg is None:
                rg = self._new_run(h, run_id, "")
            tg = rg[S.RUN_TASKS_GROUP].require_group(S.escape_name(task_id))
            tg.attrs[S.TASK_A_ID] = task_id
            tg.attrs[S.TASK_A_DONE_UTC] = utc_now_iso()
            tg.attrs[S.TASK_A_FORM_KEYS] = json.dumps(form_keys)

    def done_tasks(self, run_id: str = "default") -> dict[str, list[str]]:
        """Finished tasks of a run: task id -> form keys (empty for an unknown run)."""
        rg = self._h()[S.RUNS_GROUP].get(run_id)
        if rg is None:
            return {}
        out = {}
        for tg in rg[S.RUN_TASKS_GROUP].values():
            out[_attr_str(tg.attrs[S.TASK_A_ID])] = json.loads(_attr_str(tg.attrs[S.TASK_A_FORM_KEYS]))
        return out
