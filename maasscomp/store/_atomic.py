"""Files: atomic replacement, durability, free space, file identity and the writer lock.

Exports and compactions never modify a finished file in place: they write a temporary file
in the same directory, flush it to disk, give it the identity of the file it replaces (mode
bits, group, owner), and ``os.replace`` it onto the target (atomic on POSIX within one file
system), then fsync the directory so the rename itself survives a power failure.  A process
killed at any moment leaves either the old or the new target.
"""

from __future__ import annotations

import contextlib
import errno
import os
import secrets
import stat
import time
from dataclasses import dataclass
from pathlib import Path
from typing import IO, Iterator

from maasscomp.errors import StoreError, StoreWriteError
from maasscomp.store import schema as S

#: Free space kept untouched on the device by every write (bytes), beside the write itself.
RESERVE_BYTES = 4 * 2**20

_ERRNO_CAUSE = {
    errno.ENOSPC: "no space left on the device",
    errno.EFBIG: "the file size limit of this process (ulimit -f) was reached",
    errno.EDQUOT: "the disk quota was exceeded",
    errno.EIO: "an input/output error of the device",
    errno.EROFS: "the file system is read-only",
    errno.EACCES: "permission denied",
    errno.EPERM: "operation not permitted",
    errno.ENAMETOOLONG: "the path is too long",
}


def cause(exc: BaseException) -> str:
    """A plain-words cause of an OSError (errno), else the exception text."""
    if isinstance(exc, OSError) and exc.errno in _ERRNO_CAUSE:
        return _ERRNO_CAUSE[exc.errno]
    if isinstance(exc, OSError) and exc.strerror:
        return exc.strerror
    return str(exc) or type(exc).__name__


def real_path(path: str | os.PathLike) -> Path:
    """The path with every symlink resolved (a missing final name is kept as given), so two
    names of one store are one store for the lock and for every write."""
    return Path(os.path.realpath(os.fspath(path)))


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


# ---------------------------------------------------------------- free space and limits


def free_bytes(directory: Path) -> int:
    """Bytes an unprivileged writer may still use on the device of ``directory``."""
    st = os.statvfs(directory)
    return st.f_bavail * st.f_frsize


def file_size_limit() -> int | None:
    """The soft RLIMIT_FSIZE of this process in bytes (None when unlimited)."""
    try:
        import resource
    except ImportError:  # pragma: no cover - non-POSIX
        return None
    soft, _ = resource.getrlimit(resource.RLIMIT_FSIZE)
    return None if soft == resource.RLIM_INFINITY else int(soft)


def check_room(target: Path, new_size: int, growth: int, what: str) -> None:
    """Raise StoreWriteError unless ``growth`` more bytes fit on the device of ``target``
    and a file of ``new_size`` bytes stays within this process's file size limit."""
    limit = file_size_limit()
    if limit is not None and new_size > limit:
        raise StoreWriteError(
            f"cannot write {what} to {target}: the file would reach {new_size / 2**20:.1f} MB, "
            f"beyond the file size limit of this process ({limit / 2**20:.1f} MB, ulimit -f); "
            "nothing was written")
    try:
        free = free_bytes(target.parent)
    except OSError:
        return
    if growth + RESERVE_BYTES > free:
        raise StoreWriteError(
            f"cannot write {what} to {target}: it needs {growth / 2**20:.1f} MB and "
            f"{free / 2**20:.1f} MB are free on the device (keeping {RESERVE_BYTES // 2**20} MB "
            "in reserve); free some space and rerun; nothing was written")


# ---------------------------------------------------------------- file identity


@dataclass(frozen=True)
class Identity:
    """What a replacement file must keep: permission bits, owner and group."""

    mode: int
    uid: int
    gid: int
    nlink: int


def identity_of(path: Path) -> Identity:
    st = os.stat(path)
    return Identity(stat.S_IMODE(st.st_mode), st.st_uid, st.st_gid, st.st_nlink)


def why_not_replaceable(path: Path) -> str | None:
    """Why ``path`` cannot be replaced by a new file with the same identity (None if it can).

    A replacement needs a writable directory, a single link (a second hard link would keep
    the old content), and the right to give the new file the old owner and group.
    """
    try:
        ident = identity_of(path)
    except OSError as exc:
        return f"cannot stat {path}: {cause(exc)}"
    if ident.nlink > 1:
        return f"{path} has {ident.nlink} hard links"
    if not os.access(path.parent, os.W_OK | os.X_OK):
        return f"directory {path.parent} is not writable"
    euid = os.geteuid()
    if euid != 0:
        if ident.uid != euid:
            return f"{path} belongs to another user (uid {ident.uid})"
        if ident.gid not in os.getgroups() and ident.gid != os.getegid():
            return f"{path} belongs to group {ident.gid}, which this user is not a member of"
    return None


def apply_identity(tmp: Path, ident: Identity, *, strict: bool = True) -> None:
    """Give ``tmp`` the owner, group and mode bits of the file it will replace.

    ``strict=False``: keep going when the owner or group cannot be given (the mode bits are
    always set, after the ownership, which may clear set-id bits).
    """
    st = os.stat(tmp)
    if (st.st_uid, st.st_gid) != (ident.uid, ident.gid):
        try:
            os.chown(tmp, ident.uid if os.geteuid() == 0 else -1, ident.gid)
        except OSError:
            if strict:
                raise
    os.chmod(tmp, ident.mode)


def write_denied(path: Path) -> str | None:
    """Why this user may not write the existing file ``path`` (None if writing is allowed).

    A file without any write permission bit is read-only for every user, also for root:
    its owner marked it so.
    """
    try:
        st = os.stat(path)
    except OSError as exc:
        return cause(exc)
    mode = stat.S_IMODE(st.st_mode)
    if not os.access(path, os.W_OK):
        return f"permission denied (mode {mode:04o}, owner uid {st.st_uid})"
    if os.geteuid() == 0 and not mode & 0o222:
        return f"it is marked read-only (mode {mode:04o})"
    return None


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
    """Open a temporary text file; on success it replaces ``target``, on error it is removed.

    An existing target keeps its mode bits and group.
    """
    target = real_path(target)
    if target.is_dir():
        raise StoreError(f"output path {target} is a directory; expected a file name")
    tmp = temp_path_for(target)
    try:
        fh = open(tmp, "w", encoding="utf-8", newline=newline)
    except OSError as exc:
        raise StoreError(f"cannot write {target}: {cause(exc)}") from exc
    try:
        try:
            with fh:
                yield fh
                fh.flush()
            if target.exists():
                apply_identity(tmp, identity_of(target), strict=False)
            commit_temp(tmp, target, durable)
        except OSError as exc:
            raise StoreWriteError(f"cannot write {target}: {cause(exc)}; the file was not "
                                  "changed") from exc
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


class WriterLock:
    """Exclusive advisory lock ``<store>.lock`` held while a store is open for writing.

    The lock file sits beside the store's real path (symlinks resolved), so every name of
    one store takes the same lock.  ``flock`` locks vanish with the process, so a killed
    writer never leaves the store locked.  The holder removes the file when it releases the
    lock (no empty files are left beside a store); a waiter that then obtains the lock on
    the removed file sees that the path no longer names the file it locked and tries again,
    so two writers never both hold "the" lock.  A killed writer leaves its empty lock file,
    which the next writer takes over and removes.
    """

    def __init__(self, target: Path, timeout: float) -> None:
        import fcntl

        self.path = target.with_name(target.name + S.LOCK_SUFFIX)
        deadline = time.monotonic() + max(0.0, timeout)
        while True:
            try:
                self._fd = os.open(self.path, os.O_RDWR | os.O_CREAT, 0o644)
            except OSError as exc:
                try:
                    self._fd = os.open(self.path, os.O_RDONLY)
                except OSError:
                    raise StoreError(f"cannot create lock file {self.path}: {cause(exc)}") from exc
            try:
                fcntl.flock(self._fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except OSError as exc:
                os.close(self._fd)
                self._fd = -1
                if exc.errno not in (errno.EAGAIN, errno.EACCES, errno.EWOULDBLOCK):
                    raise StoreError(f"cannot lock {self.path}: {cause(exc)}") from exc
                if time.monotonic() >= deadline:
                    raise StoreError(
                        f"store {target} is open for writing by another process "
                        f"(lock file {self.path}); close it or open the store read-only"
                    ) from None
                time.sleep(0.05)
                continue
            if self._names_locked_file():
                return
            os.close(self._fd)  # the holder removed it meanwhile: lock the current file
            self._fd = -1

    def _names_locked_file(self) -> bool:
        try:
            a, b = os.fstat(self._fd), os.stat(self.path)
        except OSError:
            return False
        return (a.st_dev, a.st_ino) == (b.st_dev, b.st_ino)

    def release(self) -> None:
        import fcntl

        if self._fd >= 0:
            with contextlib.suppress(OSError):  # removed while still held (see class notes)
                os.unlink(self.path)
            with contextlib.suppress(OSError):
                fcntl.flock(self._fd, fcntl.LOCK_UN)
            os.close(self._fd)
            self._fd = -1
