"""``tocsin init``: add a job table with one job to a workbook (the user's sheet from then on)."""
from __future__ import annotations

from pathlib import Path
from typing import Any

from sheetfns.events import parse_criterion
from watcher.refresh.errors import JobError
from watcher.refresh.jobs import TABLE_SHEET, job_table_rows
from watcher.refresh.reader import Book, Header
from watcher.xlsx import package
from watcher.xlsx.spec import Cells, SheetSpec

__all__ = ["init_workbook", "guess_date_column"]

_DATE_HEADERS = ("date", "day", "week", "month", "period", "time")


def init_workbook(path: Path | str, *, sheet: str, value: str, event: str, date: str | None = None,
                  job: str | None = None) -> str:
    """Add a job table with one job to the workbook; return the job's name. Refuses when the
    workbook already has a sheet named 'tocsin'."""
    path = Path(path)
    parse_criterion(event)
    pkg = package.Package.open(path)
    if any(s.casefold() == TABLE_SHEET for s in pkg.sheet_names):
        raise JobError(f"{path.name} already has a job table (sheet {TABLE_SHEET!r}); edit it to add jobs",
                       sheet=TABLE_SHEET)
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
    return name


def guess_date_column(book: Book, sheet: str, header: Header) -> str | None:
    """The first column whose header says 'date' / 'day' / 'week' / 'month' / 'period' / 'time', else
    the first column holding dates (in more than 90% of its rows)."""
    for text in header.texts:
        if text and text.strip().casefold() in _DATE_HEADERS:
            return text
    for text in header.texts:
        if not text:
            continue
        try:
            data: Any = book.read(sheet, [], date_column=text)
        except ValueError:
            continue
        if data.dates is not None and data.nrows and (data.dates == data.dates).mean() > 0.9:
            return text
    return None
