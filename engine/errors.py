"""Domain exceptions of drillaxis.

Each subclasses the built-in exception that fits, so callers may catch either. A message says what is
wrong, quotes the value, the file, the line and up to five hole ids where they apply, and says how to
fix it. The command line turns any of these into one clear message and exit code 1 (bad data) or 2
(bad usage); any other exception is a bug and keeps its traceback.
"""

from __future__ import annotations


class DrillaxisError(Exception):
    """Base class of every error drillaxis raises on purpose."""

    exit_code = 1


class TableError(DrillaxisError, ValueError):
    """A table cannot be read or lacks what is needed (file, columns, rows)."""


class ValidationError(DrillaxisError, ValueError):
    """The tables hold errors and the command was not told to skip bad rows."""

    def __init__(self, message: str, findings=None):
        super().__init__(message)
        self.findings = findings


class SurveyError(DrillaxisError, ValueError):
    """Survey stations cannot be turned into a hole trace."""


class FitError(DrillaxisError, RuntimeError):
    """The data cannot support a variogram fit (too few pairs or lags, no variance)."""


class UsageError(DrillaxisError, ValueError):
    """The command was called wrongly (option values, missing files)."""

    exit_code = 2


def shorten(text, limit: int = 60) -> str:
    """``text`` cut to ``limit`` characters with an ellipsis: a hole id or cell of megabytes is quoted,
    not echoed whole."""
    text = str(text)
    return text if len(text) <= limit else text[:limit - 1] + "…"


def list_some(items, limit: int = 5) -> str:
    """Quote up to ``limit`` items (each shortened), and say how many more there are."""
    items = [str(i) for i in items]
    shown = ", ".join(repr(shorten(i)) for i in items[:limit])
    if len(items) > limit:
        shown += f" and {len(items) - limit} more"
    return shown
