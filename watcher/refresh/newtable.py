"""``tocsin init``: add a job table with one job to a workbook (the user's sheet from then on).

The date column, when not given, is guessed only from cells that are dates (date cells, or ISO date
text such as ``2024-03-01``): a column of plain numbers is never taken for dates, even though the
reader would read numbers in a named date column as serial dates. With no such column the job has no
date column (rows are periods) and ``init`` says so.
"""
from __future__ import annotations

import datetime as dt
from pathlib import Path
from typing import NamedTuple

from sheetfns.events import parse_criterion
from watcher.refresh.cells import text_stamp
from watcher.refresh.columns import blank
from watcher.refresh.errors import JobError
from watcher.refresh.jobs import TABLE_SHEET, job_table_rows
from watcher.refresh.reader import Book, Header
from watcher.xlsx import package
from watcher.xlsx.spec import Cells, SheetSpec

__all__ = ["NewJob", "init_workbook", "guess_date_column"]

_DATE_HEADERS = ("date", "day", "week", "month", "period", "time")
DATE_SHARE = 0.9
"""The share of a column's filled cells that must be dates for it to be guessed as the date column."""


class NewJob(NamedTuple):
    """What ``init`` wrote: the job's name and its date column (None: the job has no dates, and
    ``guessed`` tells whether that was a guess)."""

    name: str
    date_column: str | None
    guessed: bool


def init_workbook(path: Path | str, *, sheet: str, value: str, event: str, date: str | None = None,
                  job: str | None = None) -> NewJob:
    """Add a job table with one job to the workbook; return the job's name and date column. Refuses
    when the workbook already has a sheet named 'tocsin'. ``date`` None guesses the date column
    (:func:`guess_date_column`); '' means none."""
    path = Path(path)
    parse_criterion(event)
    pkg = package.Package.open(path)
    if any(s.casefold() == TABLE_SHEET for s in pkg.sheet_names):
        raise JobError(f"{path.name} already has a job table (sheet {TABLE_SHEET!r}); edit it to add jobs",
                       sheet=TABLE_SHEET)
    guessed = date is None
    with Book(path) as book:
        data_sheet = book.resolve_sheet(sheet)
        header = book.header(data_sheet)
        header.find(value, what="--value")
        if date is None:
            date = guess_date_column(book, data_sheet, header)
        elif date:
            header.find(date, what="--date")
    name = job or f"{value} {event}".strip()
    rows = job_table_rows([{"job": name, "data_sheet": data_sheet, "date_column": date,
                            "value_column": value, "event": event}])
    cells = tuple(tuple((v, "header" if i == 0 else "text" if isinstance(v, str) else "general")
                        for v in row) for i, row in enumerate(rows))
    spec = SheetSpec(TABLE_SHEET, (Cells(0, 0, cells),), col_widths={0: 24, 1: 16, 3: 16, 4: 12})
    package.write(path, [spec], state=pkg.state, expect=pkg.fingerprint, owned=False)
    return NewJob(name, date or None, guessed)


def _is_date(v: object) -> bool:
    return isinstance(v, (dt.date, dt.datetime)) or (isinstance(v, str) and text_stamp(v) is not None)


def _holds_dates(cells: list[object]) -> bool:
    """Whether more than :data:`DATE_SHARE` of the filled cells (at least two) are dates or date text."""
    filled = [v for v in cells if not blank(v)]
    return len(filled) >= 2 and sum(map(_is_date, filled)) > DATE_SHARE * len(filled)


def guess_date_column(book: Book, sheet: str, header: Header) -> str | None:
    """The date column of ``sheet``, or None: the first column whose header says 'date' / 'day' /
    'week' / 'month' / 'period' / 'time' and whose cells are dates, else the first column whose cells
    are dates (date cells or ISO date text; numbers never count)."""
    named = [j for j, t in enumerate(header.texts) if t and t.strip().casefold() in _DATE_HEADERS]
    others = [j for j, t in enumerate(header.texts) if t and j not in named]
    for j in named + others:
        if _holds_dates(book.column_cells(sheet, j)):
            return header.texts[j]
    return None
