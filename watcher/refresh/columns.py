"""Converting the cells of one column into numbers or dates, with a warning per cell read as missing.

The rules (the reader's module docstring tells them from the user's side):

* numbers: numbers as they are, TRUE/FALSE as 1.0/0.0, blanks as NaN, text that is a plain decimal
  number as that number (:func:`watcher.refresh.cells.plain_number`); other text, dates and times are
  missing with a warning naming the cell, unless the column's text is wanted (a text criterion);
* dates: date cells as they are; ISO text as a date (:func:`watcher.refresh.cells.text_stamp`); numbers
  as serial dates of the workbook's date system (:func:`watcher.refresh.cells.serial_stamp`), except
  that a column of whole numbers all between 1000 and 2999 is read as years.
"""
from __future__ import annotations

import datetime as dt
import re
from collections.abc import Callable
from typing import Any

import numpy as np

from sheetfns.errors import InputError
from watcher.refresh.cells import plain_number, serial_stamp, show, text_stamp

__all__ = ["MAX_COLUMNS", "column_index", "is_letter", "blank", "numbers_of", "dates_of"]

MAX_COLUMNS = 16_384          # columns A..XFD
_LETTERS = re.compile(r"[A-Za-z]{1,3}")
_EPOCH = dt.datetime(1970, 1, 1)
_EPOCH_ORDINAL = _EPOCH.toordinal()
_type_of = np.frompyfunc(type, 1, 1)
_NUMERIC_TYPES = [float, int, bool]
_NONE_TYPE = [type(None)]


def column_index(letter: str) -> int:
    """The 0-based index of the column ``letter`` ('A' -> 0, 'xfd' -> 16383)."""
    if not isinstance(letter, str) or not _LETTERS.fullmatch(letter.strip()):
        raise InputError(f"`letter` must be a column letter such as 'A' or 'BC'; got {letter!r}")
    index = 0
    for ch in letter.strip().upper():
        index = index * 26 + ord(ch) - 64
    if index > MAX_COLUMNS:
        raise InputError(f"`letter` must be a column from A to XFD; got {letter!r}")
    return index - 1


def is_letter(name: str) -> bool:
    """Whether ``name`` has the form of a column letter (``A``, ``bc``)."""
    return _LETTERS.fullmatch(name.strip()) is not None


def blank(v: Any) -> bool:
    """A blank cell: None, or text of spaces only (calamine's blank is '')."""
    return v is None or (v.__class__ is str and not v.strip())


def _capped(found: list[tuple[int, Any]], letter: str, first: int, cap: int, what: str) -> list[str]:
    msgs = [f"{letter}{first + i}: {show(v)} {what}" for i, v in found[:cap]]
    if len(found) > cap:
        msgs.append(f"... and {len(found) - cap:,} more cells in column {letter} {what}")
    return msgs


def numbers_of(col: list[Any], letter: str, first: int, *, keep_text: bool,
            max_warnings: int) -> tuple[np.ndarray, np.ndarray | None, list[str]]:
    """Float view (and, with ``keep_text``, the object view) of one column, with warnings.

    ``letter`` and ``first`` (the sheet row of ``col[0]``) name the cells in the warnings."""
    n = len(col)
    obj = np.empty(n, dtype=object)
    obj[:] = col
    kinds = _type_of(obj)
    numeric = np.isin(kinds, _NUMERIC_TYPES)
    out = np.full(n, np.nan)
    if numeric.any():
        out[numeric] = obj[numeric].astype(float)
    odd = np.flatnonzero(~numeric & ~np.isin(kinds, _NONE_TYPE))
    found: list[tuple[int, Any]] = []
    text_at: list[int] = []
    for i in odd.tolist():
        v = col[i]
        if isinstance(v, str):
            if not v.strip():
                continue
            number = plain_number(v)
            if number is not None:
                out[i] = number
                continue
            text_at.append(i)
            if not keep_text:
                found.append((i, v))
        elif isinstance(v, (np.floating, np.integer)):
            out[i] = float(v)
        else:
            found.append((i, v))
    raw = None
    if keep_text:
        raw = np.empty(n, dtype=object)
        raw[:] = None
        ok = ~np.isnan(out)
        raw[ok] = out[ok].tolist() if ok.any() else []
        for i in text_at:
            raw[i] = col[i]
    return out, raw, _capped(found, letter, first, max_warnings, "read as missing")


def _years(col: list[Any]) -> bool:
    """Whether every filled cell is a whole number from 1000 to 2999 (a column of years)."""
    seen = False
    for v in col:
        if blank(v):
            continue
        if v.__class__ not in (int, float) or not float(v).is_integer() or not 1000 <= v <= 2999:
            return False
        seen = True
    return seen


def _seconds(stamp: dt.date) -> int:
    """Seconds since 1970-01-01 of a date or a naive date-time (to the nearest second)."""
    if stamp.__class__ is dt.date:
        return (stamp.toordinal() - _EPOCH_ORDINAL) * 86400
    return ((stamp.toordinal() - _EPOCH_ORDINAL) * 86400 + stamp.hour * 3600 + stamp.minute * 60
            + stamp.second + (stamp.microsecond >= 500_000))


def dates_of(col: list[Any], letter: str, first: int, date1904: Callable[[], bool],
          max_warnings: int) -> tuple[np.ndarray, list[str]]:
    """The date column as datetime64[s] (NaT where missing) and its warnings. ``date1904`` is asked
    (once) when a cell holds a serial number."""
    n = len(col)
    secs = np.zeros(n, dtype=np.int64)
    valid = np.zeros(n, dtype=bool)
    found: list[tuple[int, Any]] = []
    serials = 0
    as_years = _years(col)
    system: bool | None = None
    for i, v in enumerate(col):
        cls = v.__class__
        if cls is dt.date or cls is dt.datetime:
            stamp = v
        elif v is None or (cls is str and not v.strip()):
            continue
        elif cls is float or cls is int:
            if as_years:
                stamp = dt.date(int(v), 1, 1)
            else:
                if system is None:
                    system = bool(date1904())
                stamp = serial_stamp(v, date1904=system)
                if stamp is None:
                    found.append((i, v))
                    continue
                serials += 1
        elif cls is str:
            stamp = text_stamp(v)
            if stamp is None:
                found.append((i, v))
                continue
        else:
            found.append((i, v))
            continue
        secs[i] = _seconds(stamp)
        valid[i] = True
    out = secs.astype("datetime64[s]")
    out[~valid] = np.datetime64("NaT")
    msgs = _capped(found, letter, first, max_warnings, "is not a date (read as missing)")
    if serials:
        msgs.insert(0, f"date column {letter}: {serials:,} cells hold numbers, not dates; read them as "
                       f"serial dates of the {'1904' if system else '1900'} date system (format the "
                       f"cells as dates to make this explicit)")
    return out, msgs
