"""The exception family of tocsin. Every error is a ``ValueError`` so callers can catch broadly.

Message shape (one for the whole project): what was expected, what came, where.
    "`validation` must be a number of periods or a date; got 'soon' in row 3 of sheet tocsin"
"""
from __future__ import annotations


class TocsinError(ValueError):
    """Base class of every error tocsin raises on purpose."""


class InputError(TocsinError):
    """An argument has the wrong shape, type or value; the message names the argument and the value."""


class CriterionError(TocsinError):
    """A criterion (event rule) does not parse; the message quotes the text and says what was expected."""


class PartitionError(TocsinError):
    """Dates or sizes do not allow the requested training / validation split."""


class JobError(TocsinError):
    """A row of the job table is invalid; the message names the row, the setting and the value."""
