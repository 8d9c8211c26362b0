"""Checks of a job's files and scheduler before any work: everything here only reads.

* the store (``[job] output``): a maasscomp store this user may write, or a new file in a
  writable directory; not the config file; a path the file system accepts;
* the log (``[job] log``): a writable file or a new file in a writable directory; not the
  config file, not the store or its lock file, not an HDF5 file;
* a Dask scheduler address: something must answer there, and as a Dask scheduler, within
  the connect timeout (:func:`maasscomp.pipeline.executors.probe_dask_scheduler`).

Each problem raises :class:`~maasscomp.errors.InputError` with one line naming the path.
"""

from __future__ import annotations

import os
from pathlib import Path

from maasscomp.config import Config
from maasscomp.errors import InputError, StoreError

_HDF5_SIGNATURE = b"\x89HDF\r\n\x1a\n"


def _limits(directory: Path) -> tuple[int, int]:
    """(NAME_MAX, PATH_MAX) of the file system holding ``directory`` (255/4096 if unknown)."""
    d = directory
    while not os.path.isdir(d) and d != d.parent:  # os.path: False for over-long paths
        d = d.parent
    try:
        return os.pathconf(d, "PC_NAME_MAX"), os.pathconf(d, "PC_PATH_MAX")
    except (OSError, ValueError):
        return 255, 4096


def check_path_length(what: str, path: Path) -> None:
    """InputError if a component or the whole of ``path`` is longer than the file system allows."""
    name_max, path_max = _limits(path.parent)
    text = os.fsencode(str(path))
    if len(text) >= path_max:
        raise InputError(f"{what}: the path is {len(text)} bytes long; this file system allows "
                         f"{path_max - 1}")
    for part in path.parts:
        n = len(os.fsencode(part))
        if n > name_max:
            short = part if len(part) <= 40 else part[:37] + "..."
            raise InputError(f"{what}: the name {short!r} is {n} bytes long; this file system "
                             f"allows {name_max} per name")


def _real(p: Path) -> Path:
    return Path(os.path.realpath(p))


def _writable_dir(what: str, d: Path) -> None:
    if not d.is_dir():
        raise InputError(f"{what}: directory {d} does not exist")
    if not os.access(d, os.W_OK | os.X_OK):
        raise InputError(f"{what}: directory {d} is not writable by this user")


def check_store_path(cfg: Config) -> None:
    """The store can be created or appended to by this user (see the module docstring)."""
    from maasscomp.store._atomic import identity_of, write_denied

    out = cfg.job.output
    what = f"[job] output={str(out)!r}"
    check_path_length(what, out)
    real = _real(out)
    check_path_length(what, real)
    if cfg.source_path is not None and real == _real(cfg.source_path):
        raise InputError(f"{what} is the config file itself; give the path of the HDF5 store")
    if real.is_dir():
        raise InputError(f"{what} is a directory; give the path of the HDF5 store file")
    if real.exists():
        why = write_denied(real)
        if why:
            raise StoreError(f"{what}: the store is not writable by this user: {why}; a run "
                             "needs to append to it (use a copy, or another output)")
        if identity_of(real).nlink > 1:
            raise StoreError(f"{what}: the store has several hard links; give it a single name")
        return
    _writable_dir(what, real.parent)


def check_log_path(cfg: Config) -> None:
    """The log can be appended to by this user and is neither the config nor the store."""
    log, out = cfg.job.log, cfg.job.output
    what = f"[job] log={str(log)!r}"
    check_path_length(what, log)
    real = _real(log)
    check_path_length(what, real)
    if cfg.source_path is not None and real == _real(cfg.source_path):
        raise InputError(f"{what} is the config file itself; log lines would be appended to the "
                         "config; give another file name")
    store = _real(out)
    if real == store:
        raise InputError(f"{what} is the store ([job] output); give another file name")
    if real == store.with_name(store.name + ".lock"):
        raise InputError(f"{what} is the lock file of the store; give another file name")
    if real.is_dir():
        raise InputError(f"{what} is a directory; give a file name")
    if real.exists():
        if not os.access(real, os.W_OK):
            raise InputError(f"{what}: the log file is not writable by this user")
        try:
            with open(real, "rb") as fh:
                head = fh.read(520)
        except OSError as exc:
            raise InputError(f"{what}: cannot read the log file ({exc.strerror or exc})") from None
        if head.startswith(_HDF5_SIGNATURE) or _HDF5_SIGNATURE in head[512:520] \
                or head.startswith(b"maasscomp-store\n"):
            raise InputError(f"{what} is an HDF5 file; log lines would damage it; give a text "
                             "file name")
        return
    _writable_dir(what, real.parent)
