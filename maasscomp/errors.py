"""One exception family for the whole package.

Every error that a user can cause names the bad value and what is allowed; the CLI turns
:class:`InputError` and :class:`StoreError` into a one-line message and exit code 2.
"""

from __future__ import annotations

import re
from typing import Any

# numpy 2 writes scalars as np.float64(1.5) in repr(); messages show the plain number
_NUMPY_SCALAR = re.compile(r"\bnp\.(?:float|int|uint|complex|bool|str|bytes)_?\d*\((.*?)\)")


def plain_numbers(text: str) -> str:
    """``text`` with every ``np.float64(1.5)``-style numpy scalar repr written as its value."""
    return _NUMPY_SCALAR.sub(r"\1", text)


class MaasscompError(Exception):
    """Base class of all errors raised by maasscomp. Its message never shows a numpy scalar
    repr such as ``np.float64(1.5)``: numbers read as plain numbers."""

    def __str__(self) -> str:
        return plain_numbers(super().__str__())


class InputError(MaasscompError, ValueError):
    """A bad argument or configuration value (names the value and what is allowed)."""


class ConvergenceError(MaasscompError, RuntimeError):
    """A numerical method did not reach its target; ``best`` carries the best estimate."""

    def __init__(self, message: str, best: Any = None) -> None:
        super().__init__(message)
        self.best = best


class StoreError(MaasscompError, OSError):
    """A store file is missing, not a maasscomp store, or of an unsupported schema."""


class StoreWriteError(StoreError):
    """Writing a file failed (disk full, file size limit, quota, I/O error); nothing of the
    failed write was kept.  The CLI reports it in one line with exit code 1."""


class DamagedFormError(StoreError):
    """A stored form (or one of its attachments) fails its checksum or cannot be decoded;
    ``key`` names it.  Readers skip such forms and count them."""

    def __init__(self, message: str, key: str = "") -> None:
        super().__init__(message)
        self.key = key


class AccuracyWarning(UserWarning):
    """A soft failure: a result was produced but is less accurate than requested."""


class DamagedDataWarning(UserWarning):
    """Damaged forms were skipped while reading a store."""
