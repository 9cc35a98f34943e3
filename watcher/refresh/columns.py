"""Converting the cells of one column into numbers or dates, with a warning per cell read as missing.

The rules (the reader's module docstring tells them from the user's side):

* numbers: numbers as they are, TRUE/FALSE as 1.0/0.0, blanks as NaN, text that is a plain decimal
  number as that number (:func:`watcher.refresh.cells.plain_number`); other text, dates and times are
  missing with a warning naming the cell, unless the column's text is wanted (a text criterion);
* dates: date cells as they are; ISO text as a date (:func:`watcher.refresh.cells.text_stamp`); numbers
  as serial dates of the workbook's date system (:func:`watcher.refresh.cells.serial_stamps`), except
  that a column of whole numbers all between 1000 and 2999 is read as years. Date cells and numbers are
  converted in one vectorised step each (a Python loop over a million dates took about a second).
"""
from __future__ import annotations

import datetime as dt
import itertools
import re
import sys
from collections.abc import Callable
from typing import Any

import numpy as np

from sheetfns.errors import InputError
from watcher.refresh.cells import plain_number, serial_stamps, show, text_stamp

__all__ = ["MAX_COLUMNS", "column_index", "is_letter", "blank", "numbers_of", "dates_of", "prefetch_pandas"]

MAX_COLUMNS = 16_384          # columns A..XFD
_LETTERS = re.compile(r"[A-Za-z]{1,3}")
_EPOCH = dt.datetime(1970, 1, 1)
_EPOCH_ORDINAL = _EPOCH.toordinal()
_CODES = {float: 0, int: 1, bool: 2, dt.datetime: 3, dt.date: 4, str: 5, type(None): 6}
_OTHER = 7
_NUMERIC_TYPES = (0, 1, 2)
_NUMBER_TYPES = (0, 1)
_STAMP_TYPES = (3, 4)
_TEXT_TYPE = (5,)
_NONE_TYPE = (6,)


def _type_of(col: list[Any]) -> np.ndarray:
    """The exact type of every cell as a small code (``_CODES``; 7 for any other type): one dict
    look-up per cell, then every test below is on integers (the object array of types and its
    element-wise comparisons cost twice as much)."""
    return np.fromiter(map(_CODES.get, map(type, col), itertools.repeat(_OTHER)), dtype=np.int8,
                       count=len(col))


def _of_type(kinds: np.ndarray, types: tuple[int, ...]) -> np.ndarray:
    """Which cells (their codes, as ``_type_of`` gives them) are of one of ``types``."""
    out = kinds == types[0]
    for t in types[1:]:
        out |= kinds == t
    return out


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
    kinds = _type_of(col)
    numeric = _of_type(kinds, _NUMERIC_TYPES)
    out = np.full(n, np.nan)
    if numeric.any():
        out[numeric] = obj[numeric].astype(float)
    odd = np.flatnonzero(~numeric & ~_of_type(kinds, _NONE_TYPE))
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


def _seconds(stamp: dt.date) -> int:
    """Seconds since 1970-01-01 of a date or a naive date-time (to the nearest second)."""
    if stamp.__class__ is dt.date:
        return (stamp.toordinal() - _EPOCH_ORDINAL) * 86400
    return ((stamp.toordinal() - _EPOCH_ORDINAL) * 86400 + stamp.hour * 3600 + stamp.minute * 60
            + stamp.second + (stamp.microsecond >= 500_000))


def _years(obj: np.ndarray, kinds: np.ndarray) -> bool:
    """Whether every filled cell is a whole number from 1000 to 2999 (a column of years)."""
    filled = ~_of_type(kinds, _NONE_TYPE)
    for i in np.flatnonzero(_of_type(kinds, _TEXT_TYPE)).tolist():
        if obj[i].strip():
            return False
        filled[i] = False       # a blank text cell
    if not filled.any() or not _of_type(kinds[filled], _NUMBER_TYPES).all():
        return False
    x = obj[filled].astype(float)
    return bool(((x == np.floor(x)) & (x >= 1000) & (x <= 2999)).all())


def _to_seconds(us: np.ndarray) -> np.ndarray:
    """datetime64[us] to seconds since 1970, to the nearest second (half a second up)."""
    return (us.astype(np.int64) + 500_000) // 1_000_000


PANDAS_FROM = 100_000
"""Date cells from which pandas converts them (in C: 0.3 s for a million, where the cell-by-cell loop
takes 0.8 s). Below it, or while pandas is not yet imported for a smaller column, the loop: importing
pandas costs 0.6-1.5 s, more than the loop over a small column, and the watcher's no-op refresh of an
unchanged workbook never needs pandas otherwise (measured with bench/refresh.py: 0.5 s against 1.5 s
for the ferry sample when every read imported it). A refresh that computes imports pandas anyway."""


def _use_pandas(cells: int) -> bool:
    return cells >= PANDAS_FROM or "pandas" in sys.modules


PREFETCH_FROM = 4 * 2**20
"""Workbook size (bytes) from which reading a dated job's columns first starts importing pandas in a
thread (:func:`prefetch_pandas`): calamine parses a sheet without holding the GIL (2.5 s for a
full-height sheet of 24 MiB), so the import (0.3-0.7 s), which the conversion of a date column of
:data:`PANDAS_FROM` cells or more needs next, runs meanwhile on another core. Below it the parse is
too short to hide the import (and the column is too short to need pandas). The computation itself
needs no pandas."""


def prefetch_pandas() -> None:
    """Start importing pandas in a daemon thread unless it is imported (or being imported) already; a
    later ``import pandas`` waits for that import to finish (Python's per-module import lock)."""
    if "pandas" in sys.modules:
        return
    import importlib
    import threading

    def run() -> None:
        try:
            importlib.import_module("pandas")
        except Exception:  # noqa: BLE001 - the later import in the main thread reports it
            pass

    threading.Thread(target=run, name="tocsin-import-pandas", daemon=True).start()


def _stamp_seconds(values: np.ndarray) -> np.ndarray:
    """``date`` / ``datetime`` objects as seconds since 1970, to the nearest second (half up)."""
    if _use_pandas(values.size):
        import pandas as pd  # lazy: see PANDAS_FROM (and DEVELOPERS.md, The core)
        try:
            return _to_seconds(pd.to_datetime(values).to_numpy().astype("datetime64[us]"))
        except (ValueError, OverflowError, TypeError):   # beyond pandas 2's nanosecond range
            pass
    return np.fromiter(map(_seconds, values), dtype=np.int64, count=values.size)


def dates_of(col: list[Any], letter: str, first: int, date1904: Callable[[], bool],
          max_warnings: int) -> tuple[np.ndarray, list[str]]:
    """The date column as datetime64[s] (NaT where missing) and its warnings. ``date1904`` is asked
    (once) when a cell holds a serial number.

    Date cells (the bulk of a date column) are converted in one vectorised step (see
    :data:`PANDAS_FROM`), serial numbers too; text cells are read one by one."""
    n = len(col)
    obj = np.empty(n, dtype=object)
    obj[:] = col
    kinds = _type_of(col)
    secs = np.zeros(n, dtype=np.int64)
    valid = np.zeros(n, dtype=bool)
    bad = np.zeros(n, dtype=bool)
    stamp = _of_type(kinds, _STAMP_TYPES)
    if stamp.any():
        secs[stamp] = _stamp_seconds(obj[stamp])
        valid |= stamp
    number = _of_type(kinds, _NUMBER_TYPES)
    serials = 0
    system: bool | None = None
    if number.any():
        x = obj[number].astype(float)
        if _years(obj, kinds):
            years = (x.astype(np.int64) - 1970).astype("datetime64[Y]")     # 1 January of each year
            secs[number] = _to_seconds(years.astype("datetime64[us]"))
            valid |= number
        else:
            system = bool(date1904())
            when = serial_stamps(x, date1904=system)
            ok = ~np.isnat(when)
            at = np.flatnonzero(number)
            secs[at[ok]] = _to_seconds(when[ok])
            valid[at[ok]] = True
            bad[at[~ok]] = True
            serials = int(ok.sum())
    for i in np.flatnonzero(~stamp & ~number).tolist():
        v = col[i]
        if v is None or (v.__class__ is str and not v.strip()):
            continue
        when_ = text_stamp(v) if v.__class__ is str else None
        if when_ is None:
            bad[i] = True
            continue
        secs[i] = _seconds(when_)
        valid[i] = True
    out = secs.astype("datetime64[s]")
    out[~valid] = np.datetime64("NaT")
    found = [(i, col[i]) for i in np.flatnonzero(bad).tolist()]
    msgs = _capped(found, letter, first, max_warnings, "is not a date (read as missing)")
    if serials:
        msgs.insert(0, f"date column {letter}: {serials:,} cells hold numbers, not dates; read them as "
                       f"serial dates of the {'1904' if system else '1900'} date system (format the "
                       f"cells as dates to make this explicit)")
    return out, msgs
