"""Scanning the forms of a store file and keeping the results beside them.

For every selected form two attachments are written (``Store.put_attachment``), each in its
own transaction so that an interrupted batch keeps what it finished and resumes:

* ``l2_norm``: :class:`~maasscomp.supnorm.norm.NormResult` (||F||^2, the scale factor 1/||F||
  that makes the Kt-scaled form L2-normalised, ln ||f||, the Rankin--Selberg check);
* ``supnorm_scan``: :class:`~maasscomp.supnorm.scan.ScanResult`.
"""

from __future__ import annotations

import math
import os
from typing import Callable, Iterable

from maasscomp.errors import InputError, StoreError
from maasscomp.supnorm.evaluate import FormEvaluator
from maasscomp.supnorm.norm import NormResult, l2_norm
from maasscomp.supnorm.scan import (NORM_ATTACHMENT, SCAN_ATTACHMENT, ScanResult, ScanSettings,
                                    check_coefficients, scan_form)


def select_keys(store, keys: Iterable[str] | None = None, level: int | None = None,
                R_min: float | None = None, R_max: float | None = None) -> list[str]:
    """Keys of the forms to work on: the given keys (checked) filtered by level and R range."""
    for name, v in (("R_min", R_min), ("R_max", R_max)):
        if v is not None and not (isinstance(v, (int, float)) and math.isfinite(v) and v > 0):
            raise InputError(f"{name}={v!r} is not allowed; it must be a positive number")
    if R_min is not None and R_max is not None and R_min > R_max:
        raise InputError(f"R_min={R_min!r} must not exceed R_max={R_max!r}")
    chosen = store.select(level=level, R_min=R_min, R_max=R_max)
    if keys:
        keys = list(keys)
        missing = [k for k in keys if k not in store]
        if missing:
            raise StoreError(f"no form with key {missing[0]!r} in {store.path}")
        chosen_set = set(chosen)
        chosen = [k for k in keys if k in chosen_set]
    return chosen


def scan_store(path: str | os.PathLike, *, keys: Iterable[str] | None = None, level: int | None = None,
               R_min: float | None = None, R_max: float | None = None,
               settings: ScanSettings | None = None, overwrite: bool = False,
               progress: Callable[[str, ScanResult, bool], None] | None = None,
               skipped: list[tuple[str, str]] | None = None) -> list[ScanResult]:
    """Normalise and scan the selected forms of a store; write the results into the store.

    Parameters
    ----------
    path : path-like
        Store file (opened for appending).
    keys, level, R_min, R_max
        Selection (all forms when nothing is given).
    settings : ScanSettings, optional
    overwrite : bool
        Rescan forms that already carry a scan made with the same Y_omega and rtol (otherwise the
        stored result is returned).
    progress : callable(key, result, reused), optional
        Called after each form.
    skipped : list, optional
        When given, forms that cannot be scanned (InputError, e.g. too few stored
        coefficients) are appended as (key, message) and the batch goes on; otherwise the
        error is raised.

    Returns
    -------
    list of ScanResult
        In the order of the selection.
    """
    from maasscomp.store import Store

    st = settings or ScanSettings()
    out = []
    Store.open(path, "r").close()  # a missing or foreign file is an error, never a new store
    with Store.open(path, "a") as store:
        for key in select_keys(store, keys, level, R_min, R_max):
            if not overwrite and SCAN_ATTACHMENT in store.attachments(key):
                stored = store.get_attachment(key, SCAN_ATTACHMENT)
                old = ScanResult.from_dict(stored) if "regions" in stored else None
                if old is not None and old.Y_omega == st.Y_omega and old.rtol == st.rtol:
                    out.append(old)
                    if progress is not None:
                        progress(key, old, True)
                    continue
            form = store.get(key)
            try:
                ev = FormEvaluator(form, tol=st.eval_tol)
                check_coefficients(ev, st)
                norm = l2_norm(form, evaluator=ev)
                res = scan_form(form, settings=st, norm=norm, form_key=key, evaluator=ev)
            except InputError as exc:
                if skipped is None:
                    raise
                skipped.append((key, str(exc)))
                continue
            with store.transaction():
                store.put_attachment(key, NORM_ATTACHMENT, norm.as_dict())
                store.put_attachment(key, SCAN_ATTACHMENT, res.as_dict())
            out.append(res)
            if progress is not None:
                progress(key, res, False)
    return out


def load_scans(path: str | os.PathLike, keys: Iterable[str] | None = None) -> list[ScanResult]:
    """Stored scan results (forms without a scan, or with a scan of an older format, are skipped)."""
    from maasscomp.store import Store

    out = []
    with Store.open(path, "r") as store:
        ks = select_keys(store, keys) if keys else store.keys()
        for k in ks:
            if SCAN_ATTACHMENT not in store.attachments(k):
                continue
            d = store.get_attachment(k, SCAN_ATTACHMENT)
            if "regions" in d:
                out.append(ScanResult.from_dict(d))
    return out


def load_norm(path: str | os.PathLike, key: str) -> NormResult:
    """The stored L2 norm of one form."""
    from maasscomp.store import Store

    with Store.open(path, "r") as store:
        return NormResult.from_dict(store.get_attachment(key, NORM_ATTACHMENT))
