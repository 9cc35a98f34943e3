"""The texts every face of tocsin shares: the caution line (DESIGN.md §9), the version, and an error
as one line.

One home each: the forecast and profile sheets, the command's help and the demo print the caution; the
refresh fingerprints record :data:`VERSION` (a new version recomputes every job once); the reports and
the command describe errors with :func:`describe`. This module is light (no numpy), so the command can
import it at start (and it reads no package metadata: that import alone took ~25 ms).
"""
from __future__ import annotations

__all__ = ["CAUTION", "VERSION", "describe"]

CAUTION = ("Caution: these are statistical forecasts from past data, not a substitute for official "
           "warnings, clinical or engineering judgement, or the procedures that apply where you work.")


#: The version of tocsin: its one home (pyproject.toml reads it from here when building).
VERSION = "0.1.0"


def describe(exc: BaseException) -> str:
    """An error as one line for a report or the terminal: a file error names the file and the reason,
    any other error is its message."""
    if isinstance(exc, FileNotFoundError):
        return f"{exc.filename}: no such file"
    if isinstance(exc, PermissionError):
        return f"{exc.filename}: permission denied"
    if isinstance(exc, OSError):
        return f"{exc.filename or ''}: {exc.strerror or exc}".lstrip(": ")
    return str(exc)
