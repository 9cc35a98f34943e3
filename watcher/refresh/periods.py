"""The periods of a job's data as the refresh lays them out: in time order, with the future rows added.

* :func:`in_time_order`: dates that strictly decrease (newest first, as many exports list them) are
  read oldest first, with a note (DESIGN.md §3); the data sheet is not touched, only the arrays read
  from it are turned round. Any other disorder is left for :func:`watcher.refresh.jobs.resolve`, whose
  error names the cells.
* :func:`with_future`: when the data end with an observation, the next ``horizon`` periods are added
  after them as future rows of the forecast sheet: dated at the data's own frequency
  (:func:`sheetfns.partition.next_periods`), or numbered rows when the job has no date column. Blank
  future rows already in the data are used as they are. The rule of time order and the calendar
  arithmetic are the core's (:mod:`sheetfns.partition`); this module applies them to a
  :class:`~watcher.refresh.reader.SheetData`.
"""
from __future__ import annotations

import dataclasses
from types import MappingProxyType
from typing import Any

import numpy as np

from sheetfns.errors import PartitionError
from sheetfns.partition import UNITS, next_periods, time_order
from watcher.refresh.reader import SheetData

__all__ = ["MAX_TABLE_ROWS", "in_time_order", "period_text", "with_future", "show_stamp"]

MAX_TABLE_ROWS = 1_048_575  # data rows below the row table's header (ECMA-376 Part 1, 18.3.1.73)


def show_stamp(d: np.datetime64) -> str:
    """A date as the notes show it: ``2024-03-01``, or ``2024-03-01 06:00`` with a time of day."""
    s = str(np.datetime_as_string(d.astype("datetime64[s]"), unit="m"))
    return s[:10] if s.endswith("T00:00") else s.replace("T", " ")


def period_text(dates: Any, t: int) -> str | None:
    """Row ``t``'s date as the report and the alerts name a period: ISO ``2024-03-01``, or
    ``2024-03-01T06:00:00`` with a time of day; None without dates or without a date in that row."""
    if dates is None or not 0 <= t < len(dates):
        return None
    stamp = np.datetime64(dates[t], "s")
    if np.isnat(stamp):
        return None
    day = stamp.astype("datetime64[D]")
    return str(day) if stamp == day else str(stamp)


def in_time_order(data: SheetData) -> tuple[SheetData, str | None]:
    """``data`` oldest first, and the note that says it was read newest first (None when it was not).

    Data without dates, with a blank date, or in any other disorder come back as they are (the job's
    checks report those, naming the cells)."""
    d = data.dates
    if d is None or d.size < 2 or np.isnat(d).any():
        return data, None
    try:
        if time_order(d) > 0:
            return data, None
    except PartitionError:
        return data, None
    turned = dataclasses.replace(
        data, dates=d[::-1].copy(),
        columns=MappingProxyType({k: v[::-1].copy() for k, v in data.columns.items()}),
        raw=MappingProxyType({k: v[::-1].copy() for k, v in data.raw.items()}),
        newest_first=True)
    first, last = data.cell(data.date_key, 0), data.cell(data.date_key, d.size - 1)
    note = (f"the dates run newest first ({show_stamp(d[0])} in cell {first} down to {show_stamp(d[-1])} "
            f"in cell {last} of sheet {data.sheet!r}): read in time order, oldest first; the data sheet "
            f"is unchanged")
    return turned, note


def with_future(data: SheetData, events: np.ndarray, *, horizon: int, frequency: str | None,
                dated: bool) -> tuple[SheetData, np.ndarray, str | None]:
    """``data`` and ``events`` with the future rows tocsin adds, and the note that says so.

    Rows are added only when the last row holds an observed event: then ``horizon`` rows (at most up
    to :data:`MAX_TABLE_ROWS`), dated by the data's frequency, or numbered without dates. Dates
    without a frequency (irregular) get none: the note says to add the next date with a blank value.
    """
    n = events.size
    if n == 0 or np.isnan(events[-1]):
        return data, events, None
    k = min(horizon, MAX_TABLE_ROWS - n)
    if k <= 0:
        return data, events, None
    if dated:
        if frequency is None:
            return data, events, ("no future period is added: the dates are irregular, so the next one is "
                                  "unknown (add the next date with a blank value)")
        stamps = next_periods(data.dates, frequency, k).astype(data.dates.dtype)
        dates = np.concatenate([data.dates, stamps])
        unit = UNITS[frequency]
        span = (f"the next {unit}, {show_stamp(stamps[0])}, is" if k == 1 else
                f"the next {k} {unit}s, {show_stamp(stamps[0])} to {show_stamp(stamps[-1])}, are")
        note = f"{span} added as future period{'s' * (k > 1)} after the last observation"
    else:
        dates = None
        rows = f"rows {n + 1}-{n + k}: the periods" if k > 1 else f"row {n + 1}: the period"
        note = f"{rows} after the last data row (the job has no date column)"

    def more(a: np.ndarray) -> np.ndarray:
        return np.concatenate([a, np.full(k, None if a.dtype == object else np.nan, dtype=a.dtype)])

    longer = dataclasses.replace(
        data, dates=dates, columns=MappingProxyType({key: more(v) for key, v in data.columns.items()}),
        raw=MappingProxyType({key: more(v) for key, v in data.raw.items()}), added=k)
    return longer, more(events), note
