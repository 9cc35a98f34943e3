"""What a cell value means to tocsin and how a message shows it: one home for each of these rules.

* :func:`plain_number` (its home is :func:`sheetfns.checks.plain_number`, shared with the spreadsheet
  functions): text that is a plain decimal number (``"1150"``, ``" -3.5 "``, ``"2e3"``) is read as that
  number, in the job table and in data columns alike; anything else (``"1,150"``, ``"12%"``) stays
  text, because its meaning depends on the locale or the user.
* :func:`text_stamp`: ISO text (``2024-03-01``, ``2024-03-01 06:00``) as a date or a date-time.
* :func:`serial_stamp`: a spreadsheet serial number as a date-time in the workbook's date system
  (ECMA-376 Part 1, 18.17.4.1: serial 0 is 1899-12-30 in the 1900 system for serials >= 61, and
  1904-01-01 in the 1904 system).
* :func:`show`: a cell value as messages quote it (``'soon'``, ``TRUE``, ``2024-03-01``, ``60``).
"""
from __future__ import annotations

import datetime as dt
from typing import Any

import numpy as np

from sheetfns.checks import plain_number

__all__ = ["plain_number", "text_stamp", "serial_stamp", "serial_stamps", "show", "cell_text"]

_SERIAL_ORIGIN = {False: dt.datetime(1899, 12, 30), True: dt.datetime(1904, 1, 1)}
SHOW_TEXT_MAX = 50
"""Characters of a text value a message quotes before it is cut with '...'."""


def text_stamp(text: str) -> dt.datetime | dt.date | None:
    """ISO text as a ``date`` (no time given) or a naive ``datetime``; None when it is not ISO text.

    >>> text_stamp("2024-03-01"), text_stamp("2024-03-01 06:00"), text_stamp("03/01/2024")
    (datetime.date(2024, 3, 1), datetime.datetime(2024, 3, 1, 6, 0), None)
    """
    text = text.strip()
    try:
        stamp = dt.datetime.fromisoformat(text)
    except ValueError:
        return None
    if "T" in text or " " in text or ":" in text:
        return stamp.replace(tzinfo=None)
    return stamp.date()


def serial_stamp(serial: float, *, date1904: bool = False) -> dt.datetime | None:
    """The date-time of a spreadsheet serial number, or None when it is outside the calendar.

    >>> serial_stamp(45352.25)
    datetime.datetime(2024, 3, 1, 6, 0)
    """
    try:
        return _SERIAL_ORIGIN[bool(date1904)] + dt.timedelta(days=float(serial))
    except (OverflowError, ValueError):
        return None


_SERIAL_ORIGIN_US = {k: np.datetime64(v, "us") for k, v in _SERIAL_ORIGIN.items()}
_CALENDAR_US = (np.datetime64("0001-01-01T00:00:00", "us"), np.datetime64("9999-12-31T23:59:59.999999", "us"))


def serial_stamps(serials: np.ndarray, *, date1904: bool = False) -> np.ndarray:
    """:func:`serial_stamp` of many numbers at once: ``datetime64[us]``, NaT outside the calendar.

    >>> serial_stamps(np.array([45352.25, 1e9])).astype(str).tolist()
    ['2024-03-01T06:00:00.000000', 'NaT']
    """
    us = np.asarray(serials, dtype=float) * 86_400e6
    ok = np.isfinite(us) & (np.abs(us) < 4e17)           # within +-12,000 years of the origin
    step = np.round(np.where(ok, us, 0.0)).astype(np.int64).astype("timedelta64[us]")
    out = _SERIAL_ORIGIN_US[bool(date1904)] + step
    ok &= (out >= _CALENDAR_US[0]) & (out <= _CALENDAR_US[1])
    out[~ok] = np.datetime64("NaT")
    return out


def show(value: Any) -> str:
    """A cell value as a message quotes it: text in quotes (cut after :data:`SHOW_TEXT_MAX` characters),
    TRUE / FALSE, dates in ISO form, whole numbers without '.0'.

    >>> [show(v) for v in ("soon", True, dt.date(2024, 3, 1), 60.0, 0.2)]
    ["'soon'", 'TRUE', '2024-03-01', '60', '0.2']
    """
    if isinstance(value, bool):
        return "TRUE" if value else "FALSE"
    if isinstance(value, dt.datetime):
        midnight = (value.hour, value.minute, value.second, value.microsecond) == (0, 0, 0, 0)
        return value.date().isoformat() if midnight else value.isoformat(sep=" ")
    if isinstance(value, (dt.date, dt.time)):
        return value.isoformat()
    if isinstance(value, dt.timedelta):
        return f"the duration {value}"
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    if isinstance(value, str):
        return repr(value if len(value) <= SHOW_TEXT_MAX else value[:SHOW_TEXT_MAX - 3] + "...")
    return repr(value)


def cell_text(value: Any) -> str:
    """A cell as plain text (for fingerprints and names): text as written, anything else as shown."""
    if value is None:
        return ""
    return value if isinstance(value, str) else show(value)
