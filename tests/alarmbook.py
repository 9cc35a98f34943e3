"""A small alarm-log workbook for the report and alert tests, and the edits a colleague makes to it.

The data are invented (a seeded generator; named so): a daily 0/1 alarm log, written by xlsxwriter (an
independent writer) through ``test_refresh.write_book``, and edited with openpyxl between refreshes, as a
colleague's spreadsheet program would save it.
"""
from __future__ import annotations

import datetime as dt
from pathlib import Path
from typing import Any

import numpy as np
import openpyxl
from test_refresh import job_table, write_book

FIRST_DAY = dt.date(2026, 1, 1)
ALARM_JOB = {"job": "pump alarm", "data_sheet": "Log", "date_column": "Day", "value_column": "Alarm",
             "event": "=1", "alert": "naive_roll"}


def alarm_values(n: int = 80, *, last: int = 0, seed: int = 15) -> list[Any]:
    """Invented 0/1 alarm days (about 30 % alarms), the last one ``last``."""
    rng = np.random.default_rng(seed)
    values: list[Any] = [int(v) for v in rng.random(n) < 0.3]
    values[-1] = last
    return values


def alarm_book(path: Path, *jobs: dict[str, Any], values: list[Any] | None = None, future: int = 1,
               dates: bool = True) -> Path:
    """The workbook: sheet "Log" (Day, Alarm; then ``future`` dated rows with a blank alarm: the future
    periods) and the job table (default: the pump alarm job, alert on the rolling naive forecast)."""
    values = alarm_values() if values is None else values
    rows: list[list[Any]] = [["Day", "Alarm"] if dates else ["Alarm"]]
    for i, v in enumerate([*values, *[None] * future]):
        rows.append([FIRST_DAY + dt.timedelta(days=i), v] if dates else [v])
    if not dates:
        rows = rows[:len(values) + 1]  # without dates the refresh adds the future periods itself
    return write_book(path, {"Log": rows, "tocsin": job_table(*(jobs or (ALARM_JOB,)))})


def day(i: int) -> str:
    """The ISO date of data row ``i`` (0-based)."""
    return (FIRST_DAY + dt.timedelta(days=i)).isoformat()


def observe(path: Path, value: Any) -> None:
    """A colleague fills in the future day's alarm and adds the next day with a blank alarm, then saves
    (openpyxl rewrites the file; tocsin's record, a custom document property, survives)."""
    wb = openpyxl.load_workbook(path)
    ws = wb["Log"]
    last = ws.max_row
    ws.cell(last, 2).value = value
    ws.append([ws.cell(last, 1).value + dt.timedelta(days=1), None])
    ws.cell(ws.max_row, 1).number_format = "yyyy-mm-dd"
    wb.save(path)
