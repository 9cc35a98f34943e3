"""The exception family of tocsin. Every error is a ``ValueError`` so callers can catch broadly.

Message shape (one for the whole project): what was expected, what came, where.
    "`validation` must be a number of periods or a date; got 'soon' in row 3 of sheet tocsin"
"""
from __future__ import annotations

from typing import Any


class TocsinError(ValueError):
    """Base class of every error tocsin raises on purpose."""


class InputError(TocsinError):
    """An argument has the wrong shape, type or value; the message names the argument and the value.

    The same facts as fields, so a caller never parses the message (each None where it does not apply):

    ``argument``
        The name of the argument at fault, as the core spells it (``"horizon"``, ``"actual"``).
    ``value``
        What came: the argument as it was given, or, where one element of a series is at fault, that
        element.
    ``location``
        Where in the argument: the 1-based position (row) of the offending element of a series.

    Examples
    --------
    >>> from sheetfns.checks import as_int
    >>> try:
    ...     as_int(0, "horizon", minimum=1)
    ... except InputError as exc:
    ...     (exc.argument, exc.value, exc.location, str(exc))
    ('horizon', 0, None, '`horizon` must be an integer >= 1; got 0')
    """

    def __init__(self, message: str, *, argument: str | None = None, value: Any = None,
                 location: int | None = None) -> None:
        super().__init__(message)
        self.argument = argument
        self.value = value
        self.location = location


class CriterionError(InputError):
    """A criterion (event rule) does not parse; the message quotes the text and says what was expected.

    ``argument`` is ``"criterion"`` and ``value`` the text as written."""


class PartitionError(InputError):
    """Dates or sizes do not allow the requested training / validation split; ``location`` is the
    1-based row of the first offending date where there is one."""
