"""Reading and validating the job table (the sheet ``tocsin``) into frozen :class:`Job` objects.

The table (DESIGN.md §7) is a header row of setting names followed by one row per forecast job; the
table ends at the first fully blank row, so a note may sit below it after a blank row. A column headed
``notes`` (or ``note``, ``comment``, ``comments``) is the user's and is ignored. Setting names match
case-insensitively, with spaces or hyphens read as underscores (``Cost miss`` = ``cost_miss``).

Settings (blank = default)
--------------------------
========================  =====================================================================
``job``                   required; unique (case-insensitively, as sheet names are)
``data_sheet``            required; a sheet of the workbook (case-insensitive), not ``tocsin``
``date_column``           header text or column letter; blank = no dates (rows are periods)
``value_column``          required; header text or column letter
``event``                 required criterion (``sheetfns.events.parse_criterion``); a number or
                          TRUE/FALSE in the cell (what a spreadsheet makes of a typed ``=1``) is
                          read as ``=number``
``min_run``               whole number >= 1; default 1
``season``                whole number >= 1; default from the date frequency (7 daily, 52 weekly,
                          12 monthly, 4 quarterly, 1 otherwise or without dates)
``cycle``                 number > 0, or ``none``; default from the date frequency (365.25 daily,
                          52.18 weekly, 12 monthly, none otherwise)
``harmonics``             whole number >= 0; default 2
``validation``            whole number of periods >= 1, or the first validation date (a date cell or
                          ISO text, needs ``date_column``); default the last 20% of the observed rows
``horizon``               whole number >= 1; default 1
``lags``                  whole number >= 0; default 1
``predictors``            comma-separated column names (lagged by the horizon); default none
``known_ahead``           comma-separated column names (not lagged); default none
``refit``                 ``fixed``, ``roll`` or ``roll N``; default ``fixed``
``alert``                 the method whose next-period forecast rings (DESIGN.md §13): ``best``
                          (default), a method key (``naive``, ``logistic``, ...) or ``off``
``cutoff``                number in (0, 1); default ``cost_false_alarm / (cost_false_alarm +
                          cost_miss)``, which is 0.5 with the default costs
``cost_false_alarm``      number > 0; default 1 (also used for the expected cost in the scorecard)
``cost_miss``             number > 0; default 1
``output_sheet``          default ``"<job> forecast"``
``enabled``               TRUE/FALSE (also 1/0, yes/no); default TRUE
========================  =====================================================================

Sheet names follow the writer's rule and the defaults of :mod:`watcher.refresh.sheetnames`. Every
output name must differ (case-insensitively) from every other job's output names and from ``tocsin``;
a job's output may not be its own data sheet, and a job whose data sheet is another job's output sheet
is an error of the reading job (the writing job is written as usual).

Two stages
----------
:func:`read_job_table` checks everything the workbook's structure tells: settings, types, ranges,
criteria, sheet and column names (against the header row of the data sheet); the per-setting parsers
are in :mod:`watcher.refresh.settings`. :func:`resolve` then
checks a job against its data (read by :mod:`watcher.refresh.reader`) and fills the defaults that
depend on it:
``season`` and ``cycle`` from the frequency of the dates (``sheetfns.partition.infer_frequency``), and
the training / validation split, which must leave rows on both sides (``sheetfns.partition.split``).
Errors name the row, the setting and the value::

    `validation` must be a number of periods or a date; got 'soon' in row 3 of sheet tocsin

and one bad job never stops the others: :class:`JobTable` holds the good jobs and a list of
:class:`RowError` for the bad rows. A disabled row (``enabled`` FALSE) is not validated beyond its name;
it is listed in ``JobTable.disabled``.
"""
from __future__ import annotations

import dataclasses
import datetime as dt
import difflib
from collections.abc import Collection, Iterable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from sheetfns.errors import PartitionError
from sheetfns.events import Criterion, flag
from sheetfns.partition import default_cycle, default_season, infer_frequency, split, time_order
from watcher.refresh.cells import show
from watcher.refresh.errors import JobError, ReaderError
from watcher.refresh.periods import show_stamp
from watcher.refresh.reader import Book
from watcher.refresh.settings import SETTINGS, Row, parse_enabled, parse_header, parse_row, row_label
from watcher.xlsx import package
from watcher.xlsx.spec import col_letter

__all__ = ["TABLE_SHEET", "SETTINGS", "TABLE_NOTE", "Job", "RowError", "DisabledJob",
           "JobTable", "read_job_table", "resolve", "job_table_rows"]

TABLE_SHEET = "tocsin"
TABLE_NOTE = ("Blank settings take their defaults. One row per forecast job; the table ends at the first "
              "blank row. See the README, section 'The job table'.")


# ------------------------------------------------------------------------------------------ results

@dataclass(frozen=True)
class Job:
    """One validated forecast job (a row of the job table). Settings as in the module docstring;
    ``season`` and ``cycle`` are None until :func:`resolve` fills them where they were left blank."""

    name: str
    row: int
    data_sheet: str
    value_column: str
    event: str
    criterion: Criterion
    date_column: str | None = None
    min_run: int = 1
    season: int | None = None
    cycle: float | None = None
    harmonics: int = 2
    validation: int | dt.date | None = None
    horizon: int = 1
    lags: int = 1
    predictors: tuple[str, ...] = ()
    known_ahead: tuple[str, ...] = ()
    refit: str = "fixed"
    alert: str = "best"
    cutoff: float = 0.5
    cost_false_alarm: float = 1.0
    cost_miss: float = 1.0
    output_sheet: str = ""
    profile_sheet: str = ""
    enabled: bool = True
    #: the settings left blank (they took a default)
    defaults: frozenset[str] = frozenset()
    #: (setting, cell text) for every setting of the row, for fingerprints and reports
    settings: tuple[tuple[str, str], ...] = ()
    #: filled by :func:`resolve`: the date frequency, the rows of the training period and what the dates
    #: call for saying (gaps, holidays, irregular dates; :func:`sheetfns.partition.split`'s notes)
    frequency: str | None = None
    train_size: int | None = None
    date_notes: tuple[str, ...] = ()
    resolved: bool = False

    @property
    def columns(self) -> tuple[str, ...]:
        """The value, predictor and known-ahead columns (what to ask the reader for), in that order."""
        return tuple(dict.fromkeys((self.value_column, *self.predictors, *self.known_ahead)))

    @property
    def text_columns(self) -> tuple[str, ...]:
        """The columns whose text matters: the value column under a text criterion (``=alarm``)."""
        return (self.value_column,) if self.criterion.kind == "text" else ()


@dataclass(frozen=True)
class RowError:
    """An error in the job table: the job's name (None when unknown), the sheet row, the setting
    (None for a row-wide problem), the message and the value the cell held."""

    job: str | None
    row: int
    setting: str | None
    message: str
    value: Any = None

    def __str__(self) -> str:
        return self.message

    @classmethod
    def of(cls, job: str | None, exc: JobError) -> RowError:
        """The record of a :class:`JobError` raised for the row of ``job``."""
        return cls(job, exc.row if exc.row is not None else 0, exc.setting, str(exc), exc.value)


@dataclass(frozen=True)
class DisabledJob:
    """A row with ``enabled`` FALSE (not validated further)."""

    name: str | None
    row: int


@dataclass(frozen=True)
class JobTable:
    """The job table of a workbook: the valid enabled jobs, the errors, the disabled rows."""

    book: str
    sheet: str
    jobs: tuple[Job, ...]
    errors: tuple[RowError, ...]
    disabled: tuple[DisabledJob, ...] = ()
    header_row: int = 1

    @property
    def ok(self) -> bool:
        return not self.errors

    def failed(self) -> dict[int, list[RowError]]:
        """The errors grouped by sheet row."""
        out: dict[int, list[RowError]] = {}
        for e in self.errors:
            out.setdefault(e.row, []).append(e)
        return out


# ---------------------------------------------------------------------------------------- the table

def read_job_table(book: Any, *, sheet: str = TABLE_SHEET, user_sheets: Collection[str] | None = None
                   ) -> JobTable:
    """Read and validate the job table of a workbook.

    Parameters
    ----------
    book : path-like or watcher.refresh.reader.Book
        The workbook, or an open :class:`~watcher.refresh.reader.Book` (pass the book the refresh reads the
        data from: each sheet is parsed once).
    sheet : str, default 'tocsin'
        The name of the job table's sheet (matched case-insensitively).
    user_sheets : collection of str, optional
        The sheets that are the user's (not tocsin's); default: as the package records them. When one
        job's output sheet is another job's data sheet, the writing job is at fault if that sheet is the
        user's, else the reading job (it reads tocsin's output).

    Returns
    -------
    JobTable
        The valid enabled jobs in table order, the errors per row, the disabled rows.

    Raises
    ------
    JobError
        The workbook has no job table sheet, or the sheet is empty.
    """
    if isinstance(book, (str, Path)):
        with Book(book) as opened:
            return read_job_table(opened, sheet=sheet, user_sheets=user_sheets)
    try:
        table = book.resolve_sheet(sheet)
    except ReaderError:
        raise JobError(f"{book.name} has no job table: add a sheet named {sheet!r} with a header row of "
                       f"settings and one row per job (or run `tocsin init`)", sheet=sheet) from None
    try:
        rows = book.cells(table)
        top = book.first_row(table)
    except ReaderError as exc:
        raise JobError(f"the job table (sheet {table!r}) of {book.name} is empty: {exc}",
                       sheet=table) from None
    known, bad_cols, header_errors = parse_header(rows[0], top, table)
    errors = [RowError.of(None, e) for e in header_errors]
    if "job" not in known.values():
        errors.append(RowError(None, top, "job", f"the job table (sheet {table!r}) has no `job` column "
                                                 f"in its header row (row {top})"))
    jobs: list[Job] = []
    disabled: list[DisabledJob] = []
    names: dict[str, int] = {}
    outputs: dict[str, tuple[str, int]] = {}
    for offset, cells in enumerate(rows[1:], start=1):
        if all(v is None for v in cells):
            break                                       # the table ends at the first blank row
        if isinstance(cells[0], str) and cells[0].strip() == TABLE_NOTE and \
                all(v is None for v in cells[1:]):
            break                       # tocsin init's note, reached when a job filled the blank row
        row = top + offset
        r = Row({known[j]: v for j, v in enumerate(cells) if j in known}, row, table)
        label = row_label(r.cells)
        row_errors: list[RowError] = []
        try:
            enabled = parse_enabled(r)
        except JobError as exc:
            row_errors.append(RowError.of(label, exc))
            enabled = True
        if not enabled and not row_errors:
            disabled.append(DisabledJob(label, row))
            continue
        for j, msg in bad_cols.items():
            if j < len(cells) and cells[j] is not None:
                row_errors.append(RowError(label, row, None,
                                           f"cell {col_letter(j)}{row} holds {show(cells[j])} under an "
                                           f"invalid header ({msg}); the job is not run until the "
                                           f"header is fixed or the cell cleared", cells[j]))
        if label is not None:
            key = label.casefold()
            if key in names:
                row_errors.append(RowError.of(label, r.bad("job", f"must be unique (row {names[key]} has "
                                                                  f"the same name)", value=label)))
            else:
                names[key] = row
        fields, problems = parse_row(r, book)
        row_errors += [RowError.of(label, p) for p in problems]
        job = Job(**fields) if fields is not None else None
        if job is not None and not row_errors:
            for out in (job.output_sheet, job.profile_sheet):
                key = out.casefold()
                if key in outputs and outputs[key][1] != row:
                    other, other_row = outputs[key]
                    row_errors.append(RowError.of(label, r.bad(
                        "output_sheet", f"must give each job its own sheets: {out!r} is also the "
                        f"{other} sheet of the job in row {other_row}",
                        value=job.output_sheet if "output_sheet" not in job.defaults else out,
                        hint="set `output_sheet` to tell them apart")))
                outputs[key] = ("forecast" if out == job.output_sheet else "profile", row)
        if row_errors:
            errors += row_errors
        elif job is not None:
            jobs.append(job)
    if user_sheets is None:
        user_sheets = _user_sheets(book)
    keep, clashes = _sheet_roles(jobs, table, user_sheets)
    errors += clashes
    if len(rows) == 1 or (len(rows) > 1 and all(v is None for v in rows[1])):
        errors.append(RowError(None, top + 1, None, f"the job table (sheet {table!r}) has no jobs: add "
                                                    f"one row per job below the header row"))
    return JobTable(book=book.name, sheet=table, jobs=tuple(keep),
                    errors=tuple(sorted(errors, key=lambda e: e.row)), disabled=tuple(disabled),
                    header_row=top)


def _user_sheets(book: Any) -> Collection[str] | None:
    """The user's sheets of ``book`` by tocsin's record in the package (None when it cannot be read)."""
    try:
        pkg = package.Package.open(book.path)
    except (ValueError, OSError):
        return None
    owned = {s.casefold() for s in pkg.owned}
    return [s for s in pkg.sheet_names if s.casefold() not in owned]


def _sheet_roles(jobs: list[Job], table: str, user_sheets: Collection[str] | None
                 ) -> tuple[list[Job], list[RowError]]:
    """Each sheet one role: an output sheet is not the job table nor its own job's data sheet; a job
    does not read another job's output (its error), and a job does not write over a user's sheet that
    another job reads (the writer's error)."""
    users = None if user_sheets is None else {s.casefold() for s in user_sheets}
    written = {s.casefold(): (job, kind) for job in jobs
               for s, kind in ((job.output_sheet, "forecast"), (job.profile_sheet, "profile"))}
    keep: list[Job] = []
    errors: list[RowError] = []
    for job in jobs:
        r = Row(dict(job.settings), job.row, table)
        own = {table.casefold(), job.data_sheet.casefold()}
        clash = next((s for s in (job.output_sheet, job.profile_sheet) if s.casefold() in own), None)
        writer = written.get(job.data_sheet.casefold())
        readers = [other for other in jobs if other is not job and users is not None
                   and other.data_sheet.casefold() in users
                   and other.data_sheet.casefold() in {job.output_sheet.casefold(),
                                                       job.profile_sheet.casefold()}]
        if clash is not None or readers:
            clash = clash if clash is not None else readers[0].data_sheet
            errors.append(RowError.of(job.name, r.bad(
                "output_sheet", f"must not be a data sheet or the job table: {clash!r} is one", value=clash)))
        elif writer is not None and writer[0] is not job and (users is None
                                                              or job.data_sheet.casefold() not in users):
            other, kind = writer
            errors.append(RowError.of(job.name, r.bad(
                "data_sheet", f"must be a sheet of data, not tocsin's output: {job.data_sheet!r} is the "
                f"{kind} sheet of the job in row {other.row}", value=job.data_sheet,
                hint="point `data_sheet` at the sheet that holds the data")))
        else:
            keep.append(job)
    return keep, errors


# ---------------------------------------------------------------------------------- against the data

def resolve(job: Job, data: Any, *, sheet: str = TABLE_SHEET) -> Job:
    """Check ``job`` against its data and fill the data-dependent defaults.

    Parameters
    ----------
    job : Job
        From :func:`read_job_table`.
    data : watcher.refresh.reader.SheetData
        The job's columns: ``job.columns`` read with ``date_column=job.date_column`` and
        ``text_columns=job.text_columns``.
    sheet : str
        The job table's sheet name (for messages).

    Returns
    -------
    Job
        A copy with ``season``/``cycle`` filled where they were blank (from the date frequency, see
        the module docstring), ``frequency`` and ``train_size`` set, ``resolved`` True.

    Raises
    ------
    JobError
        The message (and the fields) name the row, the setting and the value: a date column with a
        blank or unsorted dates, too few observed rows, a validation period that leaves no training or
        validation rows, a horizon, lags or season longer than the data, a predictor without numbers.
    """
    r = Row(dict(job.settings), job.row, sheet)

    def fail(setting: str, expected: str, value: Any, hint: str = "") -> JobError:
        return r.bad(setting, expected, value=value, hint=hint)

    column = f"column {data.letters[job.value_column]} of sheet {data.sheet!r}"
    values = data.raw[job.value_column] if job.text_columns else data.columns[job.value_column]
    events = flag(values, job.criterion, job.min_run)
    observed = int((~(events != events)).sum())
    if observed == 0:
        raise fail("value_column", f"must hold values the event can be read from; {column} has none",
                   job.value_column)
    last = int(np.flatnonzero(events == events)[-1])      # the last observed row
    if last + 1 < 2:
        raise fail("value_column", f"must hold at least 2 rows of data up to the last observation (one to "
                   f"train on, one to validate); {column} has {last + 1}", job.value_column,
                   hint="the data have too few rows for a forecast")
    index: Any = data.nrows
    freq = None
    if job.date_column is not None:
        dates = data.dates
        nat = dates != dates
        if nat.any():
            i = int(nat.nonzero()[0][0])
            cell = data.cell(job.date_column, i)
            raise fail("date_column", f"must hold a date in every data row; cell {cell} of sheet "
                       f"{data.sheet!r} has none", job.date_column)
        try:
            order = time_order(dates)
        except PartitionError as exc:           # name the cells (partition only knows positions)
            i = int(exc.location) - 1
            a, b = data.cell(job.date_column, i - 1), data.cell(job.date_column, i)
            shown = [show_stamp(d) for d in (dates[i - 1], dates[i])]
            way = "earlier" if dates[1] > dates[0] else "later"
            problem = (f"cells {a} and {b} of sheet {data.sheet!r} both hold {shown[1]}"
                       if dates[i] == dates[i - 1] else
                       f"cell {b} ({shown[1]}) of sheet {data.sheet!r} is {way} than cell {a} ({shown[0]}): "
                       f"sort the rows oldest first")
            raise fail("date_column", "must hold increasing dates", job.date_column, hint=problem) from None
        if order < 0:                           # the refresh reads these oldest first before resolving
            raise fail("date_column", "must hold increasing dates", job.date_column,
                       hint="the dates run newest first: sort the rows oldest first")
        index = dates
        freq = infer_frequency(dates) if dates.size >= 2 else None
    for name in job.predictors + job.known_ahead:
        col = data.columns[name]
        if not (col == col).any():
            setting = "predictors" if name in job.predictors else "known_ahead"
            raise fail(setting, f"must name columns holding numbers; column {data.letters[name]} "
                       f"({data.names[name]!r}) has none", name)
    try:
        parts = split(index, job.validation, events=events)
    except ValueError as exc:   # with two observed rows and ordered dates only the validation can fail
        raise fail("validation", "must leave rows for both training and validation", job.validation,
                   hint=str(exc)) from None
    season = job.season if job.season is not None else default_season(freq)
    cycle = job.cycle if "cycle" not in job.defaults else default_cycle(freq)
    if job.horizon > last:
        raise fail("horizon", f"must be shorter than the data: {last + 1} rows up to the last "
                   f"observation allow at most {last} with lags=1", job.horizon)
    if job.horizon + max(job.lags, 1) - 1 > last:
        raise fail("lags", f"must be shorter than the data: {last + 1} rows up to the last observation "
                   f"allow at most {last - job.horizon + 1} with horizon={job.horizon}", job.lags)
    if season >= parts.train_size + parts.valid_size:
        n = parts.train_size + parts.valid_size
        if job.season is None:                  # the default, not the user's: say where it came from
            raise r.blank("season", f"must be shorter than the {n} observed rows", hint=(
                f"the default for {freq} data is {season}: give a shorter season (1 for none) or add "
                f"data"))
        raise fail("season", f"must be shorter than the {n} observed rows", season)
    return dataclasses.replace(job, season=season, cycle=cycle, frequency=freq,
                               train_size=parts.train_size, date_notes=parts.notes, resolved=True)


# ----------------------------------------------------------------------------------- writing a table

def job_table_rows(jobs: Iterable[Mapping[str, Any]], *, note: bool = True) -> list[list[Any]]:
    """The cells of a job table: the header row of every setting, one row per job (a mapping
    setting -> value; missing settings blank), and, with ``note``, a blank row and the note.

    For ``tocsin init``. Unknown settings raise :class:`~watcher.refresh.errors.JobError`. A criterion
    starting with ``=`` must be written as text (not as a formula) by the caller.

    >>> job_table_rows([{"job": "a", "data_sheet": "S", "value_column": "B", "event": ">0"}],
    ...                note=False)[1][:5]
    ['a', 'S', None, 'B', '>0']
    """
    out: list[list[Any]] = [list(SETTINGS)]
    for spec in jobs:
        unknown = [k for k in spec if k not in SETTINGS]
        if unknown:
            close = difflib.get_close_matches(unknown[0], SETTINGS, n=1, cutoff=0.6)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            raise JobError(f"unknown setting {unknown[0]!r}{hint}", setting=unknown[0])
        out.append([spec.get(s) for s in SETTINGS])
    if note:
        out += [[None] * len(SETTINGS), [TABLE_NOTE] + [None] * (len(SETTINGS) - 1)]
    return out
