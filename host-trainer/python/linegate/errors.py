"""Linegate's errors as Python exceptions.

Every exception the package raises for Linegate's own reasons derives from
:class:`LinegateError`. The command line's exit codes map onto them: exit 1 (a check ran
and failed) is :class:`CheckFailed`; exit 2 is :class:`UsageError` (flags, settings),
:class:`LogError` (a log, model file, sheet or key file that cannot be read, with its
file, line and column) or :class:`LinegateError` itself (an output that cannot be
written). :class:`ReleaseError` is a blob, key and model that do not belong together.
"""

from __future__ import annotations

from typing import Any, Optional

__all__ = ["LinegateError", "LogError", "UsageError", "CheckFailed", "ReleaseError"]


class LinegateError(Exception):
    """Base of every Linegate error; ``message`` is the text ``linegate`` would print."""

    def __init__(self, message: str) -> None:
        super().__init__(message)
        self.message = message


class LogError(LinegateError):
    """A log (or a model file, channel sheet, key file) that cannot be read.

    Attributes:
        file: the file, or ``"<DataFrame>"`` / ``"<array>"`` for data given in memory.
        line: a text log's line (counted from 1, as editors count), a Parquet log's row
            within the file (from 0), or a frame's or array's row (from 0, the unit index
            of :meth:`Decisions.lines`); ``None`` when the error is not about one row.
        column: the column's (or channel's) name; ``None`` when not about one column.
    """

    def __init__(
        self,
        message: str,
        file: Optional[str] = None,
        line: Optional[int] = None,
        column: Optional[str] = None,
    ) -> None:
        super().__init__(message)
        self.file = file
        self.line = line
        self.column = column


class UsageError(LinegateError):
    """A usage error of the command line: unknown or conflicting flags, a value a flag
    refuses, a setting that is missing (exit 2 of ``linegate``)."""


class CheckFailed(LinegateError):
    """A check ran and failed (exit 1 of ``linegate``): an audit gate, ``compare``'s
    NO-GO→GO gate, a drift alarm, a log that is not separable, a blob that does not match.

    Attributes:
        result: the command's typed result when it wrote one (the failed audit's
            :class:`~linegate.results.AuditResult`, say), else ``None``.
    """

    def __init__(self, message: str, result: Any = None) -> None:
        super().__init__(message)
        self.result = result


class ReleaseError(LinegateError):
    """A blob that is damaged, not made from the given model, unsigned, signed by another
    key or changed after signing."""
