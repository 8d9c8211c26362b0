"""One exception family for the whole package.

Every error that a user can cause names the bad value and what is allowed; the CLI turns
:class:`InputError` and :class:`StoreError` into a one-line message and exit code 2.
"""

from __future__ import annotations

from typing import Any


class MaasscompError(Exception):
    """Base class of all errors raised by maasscomp."""


class InputError(MaasscompError, ValueError):
    """A bad argument or configuration value (names the value and what is allowed)."""


class ConvergenceError(MaasscompError, RuntimeError):
    """A numerical method did not reach its target; ``best`` carries the best estimate."""

    def __init__(self, message: str, best: Any = None) -> None:
        super().__init__(message)
        self.best = best


class StoreError(MaasscompError, OSError):
    """A store file is missing, not a maasscomp store, or of an unsupported schema."""


class AccuracyWarning(UserWarning):
    """A soft failure: a result was produced but is less accurate than requested."""
