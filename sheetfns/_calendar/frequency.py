"""The frequency of a date column and the arithmetic of its periods, on ``datetime64[us]`` arrays.

Frequencies (DESIGN.md §3): ``hourly``, ``daily``, ``business`` (Monday to Friday), ``weekly``,
``monthly``, ``quarterly``, ``yearly``. A column has the frequency F when every step between
consecutive dates is a whole number of F's periods and at least half of the steps are exactly one
period (gaps are allowed). Further:

* business days: every date falls on Monday to Friday at one time of day, and at least one step
  crosses a weekend (otherwise nothing tells them from daily data). A Friday is followed by a Monday;
  a weekday without a row is a missing business day (a holiday), not a weekend gap. The calendar is
  numpy's business-day calendar (``numpy.busday_count``, ``numpy.busday_offset``, weekmask
  Monday-Friday, no holiday list).
* months, quarters and years: the dates fall on the same day of the month (clamped to the month's
  length: the 31st is the 30th in April and the 28th or 29th in February) or all on month ends, at the
  same time of day. The periods that follow keep that rule.

Every function takes dates strictly increasing (checked by the caller, :mod:`sheetfns.partition`).
"""
from __future__ import annotations

import numpy as np

FREQUENCIES = ("hourly", "daily", "business", "weekly", "monthly", "quarterly", "yearly")
UNITS = {"hourly": "hour", "daily": "day", "business": "business day", "weekly": "week",
         "monthly": "month", "quarterly": "quarter", "yearly": "year"}
_HOUR = np.timedelta64(3600_000_000, "us")
_DAY = np.timedelta64(86_400_000_000, "us")
_FIXED = {"hourly": _HOUR, "daily": _DAY, "weekly": 7 * _DAY}
_MONTHS = {"monthly": 1, "quarterly": 3, "yearly": 12}


def _days(d: np.ndarray) -> np.ndarray:
    return d.astype("datetime64[D]")


def _month_parts(d: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Month count since 1970, day of the month, the month's length and the time of day."""
    days = _days(d)
    months = d.astype("datetime64[M]")
    first = months.astype("datetime64[D]")
    day = (days - first).astype(np.int64) + 1
    length = ((months + 1).astype("datetime64[D]") - first).astype(np.int64)
    tod = d - days.astype(d.dtype)
    return months.astype(np.int64), day, length, tod


def _business(d: np.ndarray, diffs: np.ndarray) -> bool:
    if (diffs % _DAY).any():
        return False
    days = _days(d)
    if not np.is_busday(days).all():
        return False
    count = np.busday_count(days[:-1], days[1:])
    crosses = (diffs // _DAY) > count           # calendar days beyond the business days: a weekend
    return bool(crosses.any()) and np.mean(count == 1) >= 0.5


def detect(d: np.ndarray) -> str | None:
    """The frequency of strictly increasing dates, or None (fewer than two, irregular, another
    frequency)."""
    if d.size < 2:
        return None
    diffs = np.diff(d)
    if (diffs <= np.timedelta64(0, "us")).any():
        return None
    if _business(d, diffs):
        return "business"
    for freq, base in _FIXED.items():
        if not (diffs % base).any() and np.mean(diffs == base) >= 0.5:
            return freq
    months, day, length, tod = _month_parts(d)
    anchored = (day == np.minimum(day[0], length)).all() or (day == length).all()
    if not anchored or (tod != tod[0]).any():
        return None
    dm = np.diff(months)
    for freq in ("yearly", "quarterly", "monthly"):
        m = _MONTHS[freq]
        if not (dm % m).any() and np.mean(dm == m) >= 0.5:
            return freq
    return None


def steps(d: np.ndarray, freq: str) -> np.ndarray:
    """The steps between consecutive dates in periods of ``freq`` (1 where no period is missing)."""
    if freq in _FIXED:
        return (np.diff(d) // _FIXED[freq]).astype(np.int64)
    if freq == "business":
        days = _days(d)
        return np.busday_count(days[:-1], days[1:]).astype(np.int64)
    months = d.astype("datetime64[M]").astype(np.int64)
    return np.diff(months) // _MONTHS[freq]


def following(d: np.ndarray, freq: str, k: int) -> np.ndarray:
    """The ``k`` periods of ``freq`` that follow the last date, as ``datetime64[us]``."""
    last = d[-1]
    i = np.arange(1, k + 1)
    if freq in _FIXED:
        return last + i * _FIXED[freq]
    day0 = last.astype("datetime64[D]")
    tod = last - day0.astype(d.dtype)
    if freq == "business":
        return np.busday_offset(day0, i, roll="forward").astype(d.dtype) + tod
    months, day, length, _ = _month_parts(d)
    month_end = bool((day == length).all())
    anchor = int(day.max())
    target = (months[-1] + i * _MONTHS[freq]).astype("datetime64[M]")
    first = target.astype("datetime64[D]")
    size = ((target + 1).astype("datetime64[D]") - first).astype(np.int64)
    dom = size if month_end else np.minimum(anchor, size)
    return (first + (dom - 1)).astype(d.dtype) + tod


def missing_business_days(d: np.ndarray, limit: int = 3) -> tuple[int, np.ndarray]:
    """How many business days between the first and the last date have no row, and the first
    ``limit`` of them (``datetime64[D]``)."""
    days = _days(d)
    count = np.busday_count(days[:-1], days[1:])
    where = np.flatnonzero(count > 1)
    total = int((count[where] - 1).sum())
    first: list[np.datetime64] = []
    for i in where:
        if len(first) >= limit:
            break
        extra = np.arange(1, min(int(count[i]), limit - len(first) + 1))
        first.extend(np.busday_offset(days[i], extra, roll="forward"))
    return total, np.array(first, dtype="datetime64[D]")
