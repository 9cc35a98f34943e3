"""The refresh layer's exceptions. Every one is a ``ValueError`` (through ``sheetfns.errors.TocsinError``),
so callers can still catch broadly; each carries the fields its message was built from, so no caller
has to read the message text.

* :class:`JobError`: a job of the job table cannot run as set up. Fields: ``row`` (sheet row of the
  job), ``setting`` (the setting at fault, or None for the whole row), ``value`` (what the cell held),
  ``sheet`` (the job table's sheet).
* :class:`ReaderError`: a sheet or a column cannot be read as asked. Fields: ``book``, ``sheet``,
  ``column`` and ``hint`` (the closest name, or the names there are: "; did you mean 'Flag'?").
* :class:`BookError`: the workbook itself cannot be read (missing, not a workbook, encrypted, damaged).
"""
from __future__ import annotations

from typing import Any

from sheetfns.errors import InputError, TocsinError

__all__ = ["RefreshError", "JobError", "ReaderError", "BookError"]


class RefreshError(TocsinError):
    """Base class of the refresh layer's errors."""


class JobError(RefreshError):
    """A row of the job table is invalid, or its job cannot run on its data; the message names the row,
    the setting and the value, and so do the fields."""

    def __init__(self, message: str, *, row: int | None = None, setting: str | None = None,
                 value: Any = None, sheet: str | None = None) -> None:
        super().__init__(message)
        self.row, self.setting, self.value, self.sheet = row, setting, value, sheet


class ReaderError(RefreshError, InputError):
    """A sheet or column cannot be read as asked; the message names workbook, sheet and column."""

    def __init__(self, message: str, *, book: str | None = None, sheet: str | None = None,
                 column: str | None = None, hint: str = "") -> None:
        super().__init__(message)
        self.book, self.sheet, self.column, self.hint = book, sheet, column, hint


class BookError(ReaderError):
    """The workbook cannot be read at all: missing, not a workbook package, encrypted or damaged."""
