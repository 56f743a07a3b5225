"""The one exception tree of the engine.

    DegreescopeError            base class: catch this one
    ├── IntakeError             a file or upload cannot be read as a numeric table
    │   └── FileTooLargeError   the input is over the configured size limit
    ├── ColumnError             a named column is missing or unusable
    └── FitError                the data cannot support the requested fit or sweep

Every message is a full sentence that says what to do next.
"""

from __future__ import annotations


class DegreescopeError(Exception):
    """Base class of every error the engine raises on purpose."""


class IntakeError(DegreescopeError):
    """A file or upload cannot be read as a numeric table."""


class FileTooLargeError(IntakeError):
    """The input is larger than the configured size limit.

    ``size`` and ``limit`` (bytes) are given when known; ``size_bytes`` and
    ``limit_bytes`` are the same numbers under their older names.
    """

    def __init__(self, message: str = "", *, size: int | None = None, limit: int | None = None) -> None:
        super().__init__(message)
        self.size = size
        self.limit = limit

    @property
    def size_bytes(self) -> int | None:
        return self.size

    @size_bytes.setter
    def size_bytes(self, value: int | None) -> None:
        self.size = value

    @property
    def limit_bytes(self) -> int | None:
        return self.limit

    @limit_bytes.setter
    def limit_bytes(self, value: int | None) -> None:
        self.limit = value


class ColumnError(DegreescopeError):
    """A named column does not exist, or holds no usable numbers."""


class FitError(DegreescopeError):
    """The data cannot support the requested fit or sweep."""


class RankWarning(UserWarning):
    """The design matrix is numerically rank deficient at the requested degree."""
