"""Atomic file replacement, durability and the writer lock.

The store and its exports never modify a finished file in place: they write a temporary
file in the same directory, flush it to disk, and ``os.replace`` it onto the target (atomic
on POSIX within one file system), then fsync the directory so the rename itself survives a
power failure.  A process killed at any moment leaves either the old or the new target.
"""

from __future__ import annotations

import contextlib
import errno
import os
import secrets
import time
from pathlib import Path
from typing import IO, Iterator

from maasscomp.errors import StoreError
from maasscomp.store import schema as S


def temp_path_for(target: Path) -> Path:
    """A fresh temporary name beside ``target``: ``.<name>.tmp.<pid>.<token>``."""
    return target.with_name(f".{target.name}{S.TMP_INFIX}{os.getpid()}.{secrets.token_hex(4)}")


def stale_temps(target: Path) -> list[Path]:
    """Temporary files of ``target`` left by killed writers (call only while holding the lock)."""
    prefix = f".{target.name}{S.TMP_INFIX}"
    try:
        return [p for p in target.parent.iterdir() if p.name.startswith(prefix)]
    except OSError:
        return []


def fsync_file(path: Path) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def fsync_dir(path: Path) -> None:
    """Make a rename inside ``path`` durable (no-op where directories cannot be opened)."""
    try:
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def commit_temp(tmp: Path, target: Path, durable: bool) -> None:
    """Move a finished temporary file onto ``target`` atomically."""
    if durable:
        fsync_file(tmp)
    os.replace(tmp, target)
    if durable:
        fsync_dir(target.parent)


@contextlib.contextmanager
def atomic_text_writer(target: str | os.PathLike, *, newline: str | None = None,
                       durable: bool = True) -> Iterator[IO[str]]:
    """Open a temporary text file; on success it replaces ``target``, on error it is removed."""
    target = Path(target)
    if target.is_dir():
        raise StoreError(f"output path {target} is a directory; expected a file name")
    tmp = temp_path_for(target)
    try:
        fh = open(tmp, "w", encoding="utf-8", newline=newline)
    except OSError as exc:
        raise StoreError(f"cannot write {target}: {exc.strerror or exc}") from exc
    try:
        with fh:
            yield fh
            fh.flush()
        commit_temp(tmp, target, durable)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


class WriterLock:
    """Exclusive advisory lock ``<store>.lock`` held while a store is open for writing.

    Copy-on-write transactions are only safe with one writer: two writers would each copy
    the same old file and the later rename would drop the other's forms.  ``flock`` locks
    vanish with the process, so a killed writer never leaves the store locked.
    """

    def __init__(self, target: Path, timeout: float) -> None:
        import fcntl

        self.path = target.with_name(target.name + S.LOCK_SUFFIX)
        try:
            self._fd = os.open(self.path, os.O_RDWR | os.O_CREAT, 0o644)
        except OSError as exc:
            raise StoreError(f"cannot create lock file {self.path}: {exc.strerror or exc}") from exc
        deadline = time.monotonic() + max(0.0, timeout)
        while True:
            try:
                fcntl.flock(self._fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
                return
            except OSError as exc:
                if exc.errno not in (errno.EAGAIN, errno.EACCES, errno.EWOULDBLOCK):
                    os.close(self._fd)
                    raise StoreError(f"cannot lock {self.path}: {exc.strerror or exc}") from exc
                if time.monotonic() >= deadline:
                    os.close(self._fd)
                    raise StoreError(
                        f"store {target} is open for writing by another process "
                        f"(lock file {self.path}); close it or open the store read-only"
                    ) from None
                time.sleep(0.05)

    def release(self) -> None:
        import fcntl

        if self._fd >= 0:
            with contextlib.suppress(OSError):
                fcntl.flock(self._fd, fcntl.LOCK_UN)
            os.close(self._fd)
            self._fd = -1
