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
``cutoff``                number in (0, 1); default ``cost_false_alarm / (cost_false_alarm +
                          cost_miss)``, which is 0.5 with the default costs
``cost_false_alarm``      number > 0; default 1 (also used for the expected cost in the scorecard)
``cost_miss``             number > 0; default 1
``output_sheet``          default ``"<job> forecast"``
``enabled``               TRUE/FALSE (also 1/0, yes/no); default TRUE
========================  =====================================================================

Sheet names. A sheet name holds at most 31 characters and none of ``: \\ / ? * [ ]`` (and does not
start or end with an apostrophe). The default forecast sheet is ``"<job> forecast"`` and the profile
sheet ``"<job> profile"``, where forbidden characters of the job name become ``-`` and a job name
longer than 22 characters is cut to 22 (so both names fit and stay a pair). With an explicit
``output_sheet`` the profile sheet is that name with a trailing `` forecast`` replaced by
`` profile`` (or `` profile`` appended, the base cut to 23 characters). Every output name must differ
(case-insensitively) from every other job's output names, from the data sheets and from ``tocsin``.

Two stages
----------
:func:`read_job_table` checks everything the workbook's structure tells: settings, types, ranges,
criteria, sheet and column names (against the header row of the data sheet). :func:`resolve` then
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
import math
import re
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from sheetfns.errors import CriterionError, JobError, TocsinError
from sheetfns.events import Criterion, parse_criterion
from watcher.xlsx.errors import XlsxError

__all__ = ["TABLE_SHEET", "SETTINGS", "DEFAULTS", "TABLE_NOTE", "Job", "RowError", "DisabledJob",
           "JobTable", "read_job_table", "resolve", "job_table_rows", "output_names"]

TABLE_SHEET = "tocsin"
SETTINGS = ("job", "data_sheet", "date_column", "value_column", "event", "min_run", "season", "cycle",
            "harmonics", "validation", "horizon", "lags", "predictors", "known_ahead", "refit", "cutoff",
            "cost_false_alarm", "cost_miss", "output_sheet", "enabled")
REQUIRED = ("job", "data_sheet", "value_column", "event")
#: Defaults of the settings that have a fixed one (season, cycle, validation and cutoff depend on
#: the data or on other settings; see the module docstring).
DEFAULTS: Mapping[str, Any] = {"min_run": 1, "harmonics": 2, "horizon": 1, "lags": 1, "refit": "fixed",
                               "cost_false_alarm": 1.0, "cost_miss": 1.0, "enabled": True}
IGNORED_COLUMNS = frozenset({"note", "notes", "comment", "comments"})
TABLE_NOTE = ("Blank settings take their defaults. One row per forecast job; the table ends at the first "
              "blank row. See the README, section 'The job table'.")
SHEET_NAME_MAX = 31
_FORECAST, _PROFILE = " forecast", " profile"
_STEM_MAX = SHEET_NAME_MAX - len(_FORECAST)          # 22
_FORBIDDEN = re.compile(r"[:\\/?*\[\]]")
_PLAIN_NUMBER = re.compile(r"\s*[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?\s*")
_TRUE = {"true", "yes", "1", "y", "on"}
_FALSE = {"false", "no", "0", "n", "off"}


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
    #: filled by :func:`resolve`: the date frequency and the rows of the training period
    frequency: str | None = None
    train_size: int | None = None
    resolved: bool = False

    @property
    def columns(self) -> tuple[str, ...]:
        """The value, predictor and known-ahead columns (what to ask the reader for), in that order."""
        return tuple(dict.fromkeys((self.value_column, *self.predictors, *self.known_ahead)))

    @property
    def text_columns(self) -> tuple[str, ...]:
        """The columns whose text matters: the value column under a text criterion (``=alarm``)."""
        return (self.value_column,) if self.criterion.kind == "text" else ()

    @property
    def train_rows(self) -> int | None:
        """Alias of ``train_size`` (the spreadsheet functions' name)."""
        return self.train_size


@dataclass(frozen=True)
class RowError:
    """An error in the job table: the job's name (None when unknown), the sheet row, the setting
    (None for a row-wide problem) and the message."""

    job: str | None
    row: int
    setting: str | None
    message: str

    def __str__(self) -> str:
        return self.message


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


# --------------------------------------------------------------------------------------- formatting

def _show(v: Any) -> str:
    if isinstance(v, bool):
        return "TRUE" if v else "FALSE"
    if isinstance(v, dt.datetime):
        return v.isoformat(sep=" ") if (v.hour, v.minute, v.second) != (0, 0, 0) else v.date().isoformat()
    if isinstance(v, dt.date):
        return v.isoformat()
    if isinstance(v, float) and v.is_integer():
        return str(int(v))
    if isinstance(v, str):
        text = v if len(v) <= 50 else v[:47] + "..."
        return repr(text)
    return repr(v)


def _cell_text(v: Any) -> str:
    """A cell as plain text (for fingerprints)."""
    if v is None:
        return ""
    return _show(v) if not isinstance(v, str) else v


class _Bad(Exception):
    """One invalid setting of a row (collected, never escapes this module)."""

    def __init__(self, setting: str | None, message: str) -> None:
        super().__init__(message)
        self.setting = setting


class _Row:
    """The cells of one job row, by setting, with the message helpers."""

    def __init__(self, cells: dict[str, Any], row: int, sheet: str) -> None:
        self.cells, self.row, self.sheet = cells, row, sheet
        self.where = f"in row {row} of sheet {sheet}"

    def get(self, name: str) -> Any:
        v = self.cells.get(name)
        if isinstance(v, str) and not v.strip():
            return None
        return v

    def bad(self, name: str, expected: str, value: Any = ..., hint: str = "") -> _Bad:
        v = self.cells.get(name) if value is ... else value
        tail = f"; {hint}" if hint else ""
        return _Bad(name, f"`{name}` {expected}; got {_show(v)} {self.where}{tail}")

    def blank(self, name: str, expected: str, hint: str = "") -> _Bad:
        tail = f"; {hint}" if hint else ""
        return _Bad(name, f"`{name}` {expected}; got a blank {self.where}{tail}")


# ------------------------------------------------------------------------------------ typed settings

def _text(r: _Row, name: str, *, required: bool = False) -> str | None:
    v = r.get(name)
    if v is None:
        if required:
            raise r.blank(name, "is required")
        return None
    if isinstance(v, bool) or isinstance(v, (dt.date, dt.time, dt.timedelta)):
        raise r.bad(name, "must be text")
    if isinstance(v, float) and v.is_integer():
        return str(int(v))
    return " ".join(str(v).split())


def _number(r: _Row, name: str) -> float | None:
    v = r.get(name)
    if v is None:
        return None
    if isinstance(v, bool):
        raise r.bad(name, "must be a number")
    if isinstance(v, str):
        if not _PLAIN_NUMBER.fullmatch(v):
            raise r.bad(name, "must be a number")
        v = float(v)
    if not isinstance(v, (int, float)) or not math.isfinite(float(v)):
        raise r.bad(name, "must be a number")
    return float(v)


def _whole(r: _Row, name: str, minimum: int) -> int | None:
    v = r.get(name)
    if v is None:
        return None
    expected = f"must be a whole number >= {minimum}"
    try:
        f = _number(r, name)
    except _Bad:
        raise r.bad(name, expected) from None
    if f is None or not f.is_integer() or f < minimum:
        raise r.bad(name, expected)
    return int(f)


def _enabled(r: _Row) -> bool:
    v = r.get("enabled")
    if v is None:
        return True
    if isinstance(v, bool):
        return v
    if isinstance(v, (int, float)) and v in (0, 1):
        return bool(v)
    if isinstance(v, str) and v.strip().lower() in _TRUE | _FALSE:
        return v.strip().lower() in _TRUE
    raise r.bad("enabled", "must be TRUE or FALSE")


def _criterion(r: _Row) -> tuple[str, Criterion]:
    v = r.get("event")
    if v is None:
        raise r.blank("event", "is required", hint=(
            "give a criterion such as '>=1150', 'fall' or '=alarm' (one that starts with = is typed "
            "after an apostrophe, '=alarm: typed plainly it becomes a formula, whose error result reads "
            "as a blank)"))
    if isinstance(v, bool):
        text = "=TRUE" if v else "=FALSE"
    elif isinstance(v, (int, float)):
        text = f"={_show(float(v))}"           # a typed '=1' arrives as the number 1
    elif isinstance(v, str):
        text = v.strip()
    else:
        raise r.bad("event", "must be a criterion such as '>=1150', 'fall' or '=alarm'")
    try:
        return text, parse_criterion(text)
    except CriterionError as exc:
        raise r.bad("event", "must be a criterion such as '>=1150', 'fall' or '=alarm'", value=text,
                    hint=str(exc)) from None


def _validation(r: _Row, has_dates: bool) -> int | dt.date | None:
    v = r.get("validation")
    if v is None:
        return None
    expected = "must be a number of periods or a date"
    when: dt.date | None = None
    if isinstance(v, dt.datetime):
        when = v if (v.hour, v.minute, v.second, v.microsecond) != (0, 0, 0, 0) else v.date()
    elif isinstance(v, dt.date):
        when = v
    elif isinstance(v, str):
        text = v.strip()
        try:
            return _whole(_Row({"validation": text}, r.row, r.sheet), "validation", 1)
        except _Bad:
            pass
        try:
            stamp = dt.datetime.fromisoformat(text)
        except ValueError:
            raise r.bad("validation", expected) from None
        when = stamp if "T" in text or " " in text or ":" in text else stamp.date()
    elif isinstance(v, bool):
        raise r.bad("validation", expected)
    elif isinstance(v, (int, float)):
        if not float(v).is_integer():
            hint = ("for a share of the rows leave it blank (the default is the last 20%)"
                    if 0 < v < 1 else "")
            raise r.bad("validation", "must be a whole number of periods or a date", hint=hint)
        if v < 1:
            raise r.bad("validation", "must be a number of periods >= 1 or a date")
        return int(v)
    else:
        raise r.bad("validation", expected)
    if not has_dates:
        raise r.bad("validation", "can be a date only with a `date_column`",
                    hint="name the date column or give a number of periods")
    return when


def _cycle(r: _Row) -> tuple[float | None, bool]:
    """(cycle, was_blank); 'none' switches the Fourier terms off."""
    v = r.get("cycle")
    if v is None:
        return None, True
    if isinstance(v, str) and v.strip().lower() in ("none", "off", "no"):
        return None, False
    expected = "must be a number of periods > 0, or none"
    try:
        f = _number(r, "cycle")
    except _Bad:
        raise r.bad("cycle", expected) from None
    if f is None or f <= 0:
        raise r.bad("cycle", expected)
    return f, False


def _refit(r: _Row) -> str:
    v = r.get("refit")
    if v is None:
        return "fixed"
    from sheetfns.logistic import parse_refit

    text = " ".join(str(v).split()).lower() if isinstance(v, str) else v
    try:
        parse_refit(text)
    except TocsinError:
        raise r.bad("refit", "must be 'fixed', 'roll' or 'roll N' (N a whole number >= 1)") from None
    return text


def _cost_cutoff(cfa: float, cmiss: float) -> float:
    try:
        from sheetfns.scores import cost_cutoff
    except ImportError:     # pragma: no cover - scores.py is part of the core
        return cfa / (cfa + cmiss)
    return float(cost_cutoff(cfa, cmiss))


def _columns_list(r: _Row, name: str) -> tuple[str, ...]:
    v = r.get(name)
    if v is None:
        return ()
    if not isinstance(v, str):
        v = _text(r, name)
    parts = [" ".join(p.split()) for p in str(v).split(",")]
    if any(not p for p in parts):
        raise r.bad(name, "must be column names separated by commas (a header text or a letter each)")
    return tuple(dict.fromkeys(parts))


# -------------------------------------------------------------------------------------- sheet names

def _sheet_name_problem(name: str) -> str | None:
    if not name:
        return "must not be blank"
    if len(name) > SHEET_NAME_MAX:
        return f"must be a sheet name of at most {SHEET_NAME_MAX} characters (it has {len(name)})"
    if _FORBIDDEN.search(name):
        return "must be a sheet name without any of : \\ / ? * [ ]"
    if name.startswith("'") or name.endswith("'"):
        return "must be a sheet name that does not start or end with an apostrophe"
    return None


def _stem(job: str) -> str:
    s = _FORBIDDEN.sub("-", job).strip("'").strip()
    return s[:_STEM_MAX].rstrip() or "job"


def output_names(job: str, output_sheet: str | None = None) -> tuple[str, str]:
    """The forecast and profile sheet names of a job (the rules of the module docstring).

    >>> output_names("second sailing")
    ('second sailing forecast', 'second sailing profile')
    >>> output_names("pump station high level alarm")
    ('pump station high leve forecast', 'pump station high leve profile')
    >>> output_names("ferry", "Ferry forecast")
    ('Ferry forecast', 'Ferry profile')
    """
    if output_sheet is None:
        stem = _stem(job)
        return stem + _FORECAST, stem + _PROFILE
    base = output_sheet[:-len(_FORECAST)] if output_sheet.lower().endswith(_FORECAST) else output_sheet
    base = base[:SHEET_NAME_MAX - len(_PROFILE)].rstrip()
    return output_sheet, (base or "job") + _PROFILE


# ---------------------------------------------------------------------------------------- the table

def _norm_setting(text: Any) -> str:
    return re.sub(r"[\s\-]+", "_", str(text).strip()).lower() if text is not None else ""


def _letter(j: int) -> str:
    from watcher.refresh.reader import column_letter

    return column_letter(j)


def _parse_header(cells: list[Any], row: int, sheet: str
                  ) -> tuple[dict[int, str], dict[int, str], list[RowError]]:
    """Map column index -> setting; also the unknown/duplicate columns (index -> problem)."""
    known: dict[int, str] = {}
    bad: dict[int, str] = {}
    errors: list[RowError] = []
    seen: dict[str, int] = {}
    for j, v in enumerate(cells):
        if v is None or (isinstance(v, str) and not v.strip()):
            continue
        key = _norm_setting(v)
        ref = f"{_letter(j)}{row}"
        if key in IGNORED_COLUMNS:
            continue
        if key not in SETTINGS:
            close = difflib.get_close_matches(key, SETTINGS, n=1, cutoff=0.6)
            hint = f"; did you mean {close[0]!r}?" if close else \
                f"; the settings are {', '.join(SETTINGS)}"
            msg = f"unknown setting {str(v).strip()!r} in cell {ref} of sheet {sheet}{hint}"
            bad[j] = msg
            errors.append(RowError(None, row, None, msg))
        elif key in seen:
            msg = (f"setting {key!r} appears twice in the header row of sheet {sheet}: cells "
                   f"{_letter(seen[key])}{row} and {ref}")
            bad[j] = msg
            errors.append(RowError(None, row, key, msg))
        else:
            seen[key] = j
            known[j] = key
    return known, bad, errors


def _check_columns(r: _Row, header: Any, settings: Iterable[str], values: dict[str, Any]) -> None:
    """Check that every column setting names a column of the data sheet's header row."""
    for name in settings:
        for col in (values[name] if isinstance(values[name], tuple) else (values[name],)):
            if col is None:
                continue
            index, reason = header.locate(col)
            if index is None:
                if reason.startswith("not found"):
                    hint = header.suggest(col).lstrip("; ")
                else:
                    hint = "it " + reason.replace(f" in sheet {header.sheet!r} in {header.book}", "") \
                        .replace(f" of sheet {header.sheet!r} in {header.book}", "")
                raise r.bad(name, f"must name a column of sheet {header.sheet!r} (a header text or a "
                                  f"column letter)", value=col, hint=hint)


def _parse_row(r: _Row, book: Any, data_sheets: set[str]) -> Job:
    """Every setting of one enabled row; raises _Bad on the first problem of each kind."""
    problems: list[_Bad] = []

    def take(fn, *args, **kwargs):
        try:
            return fn(*args, **kwargs)
        except _Bad as exc:
            problems.append(exc)
            return None

    name = take(_text, r, "job", required=True)
    sheet = take(_text, r, "data_sheet", required=True)
    value_column = take(_text, r, "value_column", required=True)
    date_column = take(_text, r, "date_column")
    event = take(_criterion, r)
    values: dict[str, Any] = {
        "min_run": take(_whole, r, "min_run", 1), "season": take(_whole, r, "season", 1),
        "harmonics": take(_whole, r, "harmonics", 0), "horizon": take(_whole, r, "horizon", 1),
        "lags": take(_whole, r, "lags", 0), "refit": take(_refit, r),
        "predictors": take(_columns_list, r, "predictors") or (),
        "known_ahead": take(_columns_list, r, "known_ahead") or (),
        "validation": take(_validation, r, r.get("date_column") is not None),
    }
    cyc = take(_cycle, r)
    cycle, cycle_blank = cyc if cyc is not None else (None, False)
    costs = {}
    for c in ("cost_false_alarm", "cost_miss"):
        f = take(_number, r, c)
        if f is not None and f <= 0:
            problems.append(r.bad(c, "must be a number > 0"))
        costs[c] = f
    cutoff = take(_number, r, "cutoff")
    if cutoff is not None and not 0 < cutoff < 1:
        problems.append(r.bad("cutoff", "must be a number between 0 and 1 (exclusive)"))
    output = take(_text, r, "output_sheet")
    if output is not None and (why := _sheet_name_problem(output)):
        problems.append(r.bad("output_sheet", why))

    # the data sheet and its columns
    if sheet is not None:
        from watcher.refresh.reader import ReaderError

        try:
            sheet = book.resolve_sheet(sheet)
        except ReaderError as exc:
            hint = str(exc).split("; ", 1)[1] if "; " in str(exc) else ""
            problems.append(r.bad("data_sheet", "must name a sheet of the workbook", value=sheet, hint=hint))
            sheet = None
        if sheet is not None and sheet.casefold() == r.sheet.casefold():
            problems.append(r.bad("data_sheet", "must be a data sheet, not the job table", value=sheet))
            sheet = None
    if sheet is not None:
        try:
            header = book.header(sheet)
        except (TocsinError, XlsxError) as exc:
            problems.append(r.bad("data_sheet", "must name a sheet with a header row and data", value=sheet,
                                  hint=str(exc)))
        else:
            cols = {"value_column": value_column, "date_column": date_column,
                    "predictors": values["predictors"], "known_ahead": values["known_ahead"]}
            for setting in cols:
                try:
                    _check_columns(r, header, [setting], cols)
                except _Bad as exc:
                    problems.append(exc)
            if not problems:
                _check_roles(r, header, value_column, date_column, values)
    if problems:
        raise _Many(problems)

    assert name is not None and sheet is not None and value_column is not None and event is not None
    cfa = costs["cost_false_alarm"] if costs["cost_false_alarm"] is not None else 1.0
    cmiss = costs["cost_miss"] if costs["cost_miss"] is not None else 1.0
    if cutoff is None:
        cutoff = _cost_cutoff(cfa, cmiss)
    forecast_sheet, profile_sheet = output_names(name, output)
    defaults = frozenset(s for s in SETTINGS if r.get(s) is None)
    if not cycle_blank:
        defaults = defaults - {"cycle"}
    data_sheets.add(sheet.casefold())
    return Job(
        name=name, row=r.row, data_sheet=sheet, value_column=value_column, event=event[0],
        criterion=event[1], date_column=date_column,
        min_run=values["min_run"] if values["min_run"] is not None else 1,
        season=values["season"], cycle=cycle,
        harmonics=values["harmonics"] if values["harmonics"] is not None else 2,
        validation=values["validation"],
        horizon=values["horizon"] if values["horizon"] is not None else 1,
        lags=values["lags"] if values["lags"] is not None else 1,
        predictors=values["predictors"], known_ahead=values["known_ahead"], refit=values["refit"],
        cutoff=float(cutoff), cost_false_alarm=cfa, cost_miss=cmiss,
        output_sheet=forecast_sheet, profile_sheet=profile_sheet, enabled=True, defaults=defaults,
        settings=tuple((s, _cell_text(r.cells.get(s))) for s in SETTINGS))


def _check_roles(r: _Row, header: Any, value_column: str, date_column: str | None,
                 values: dict[str, Any]) -> None:
    """A column plays one role: the value, the date, a predictor or a known-ahead input."""
    where = {}
    for role, cols in (("value_column", (value_column,)), ("date_column", (date_column,)),
                       ("predictors", values["predictors"]), ("known_ahead", values["known_ahead"])):
        for c in cols:
            if c is None:
                continue
            j = header.find(c)
            if j in where:
                first = where[j]
                extra = "; its lag is already a term of the model" if first == "value_column" and \
                    role == "predictors" else ""
                raise r.bad(role, f"must not repeat the column already given as `{first}`", value=c,
                            hint=extra.lstrip("; "))
            where[j] = role


class _Many(Exception):
    def __init__(self, problems: list[_Bad]) -> None:
        super().__init__("; ".join(str(p) for p in problems))
        self.problems = problems


def read_job_table(book: Any, *, sheet: str = TABLE_SHEET) -> JobTable:
    """Read and validate the job table of a workbook.

    Parameters
    ----------
    book : path-like or watcher.refresh.reader.Book
        The workbook, or an open :class:`~watcher.refresh.reader.Book` (pass the book the refresh reads the
        data from: each sheet is parsed once).
    sheet : str, default 'tocsin'
        The name of the job table's sheet (matched case-insensitively).

    Returns
    -------
    JobTable
        The valid enabled jobs in table order, the errors per row, the disabled rows.

    Raises
    ------
    JobError
        The workbook has no job table sheet, or the sheet is empty.
    """
    from watcher.refresh.reader import Book, ReaderError

    if isinstance(book, (str, Path)):
        with Book(book) as opened:
            return read_job_table(opened, sheet=sheet)
    try:
        table = book.resolve_sheet(sheet)
    except ReaderError:
        raise JobError(f"{book.name} has no job table: add a sheet named {sheet!r} with a header row of "
                       f"settings and one row per job (or run `tocsin init`)") from None
    try:
        rows = book.cells(table)
        top = book.first_row(table)
    except ReaderError as exc:
        raise JobError(f"the job table (sheet {table!r}) of {book.name} is empty: {exc}") from None
    known, bad_cols, errors = _parse_header(rows[0], top, table)
    if "job" not in known.values():
        errors.append(RowError(None, top, "job", f"the job table (sheet {table!r}) has no `job` column "
                                                 f"in its header row (row {top})"))
    jobs: list[Job] = []
    disabled: list[DisabledJob] = []
    names: dict[str, int] = {}
    outputs: dict[str, tuple[str, int]] = {}
    data_sheets: set[str] = set()
    for offset, cells in enumerate(rows[1:], start=1):
        if all(v is None for v in cells):
            break                                       # the table ends at the first blank row
        if isinstance(cells[0], str) and cells[0].strip() == TABLE_NOTE and \
                all(v is None for v in cells[1:]):
            break                       # tocsin init's note, reached when a job filled the blank row
        row = top + offset
        values = {known[j]: v for j, v in enumerate(cells) if j in known}
        r = _Row(values, row, table)
        raw_name = r.get("job")
        label = None if raw_name is None else _cell_text(raw_name).strip()
        row_errors: list[RowError] = []
        try:
            enabled = _enabled(r)
        except _Bad as exc:
            row_errors.append(RowError(label, row, "enabled", str(exc)))
            enabled = True
        if not enabled and not row_errors:
            disabled.append(DisabledJob(label, row))
            continue
        for j, msg in bad_cols.items():
            if j < len(cells) and cells[j] is not None:
                row_errors.append(RowError(label, row, None,
                                           f"cell {_letter(j)}{row} holds {_show(cells[j])} under an "
                                           f"invalid header ({msg}); the job is not run until the "
                                           f"header is fixed or the cell cleared"))
        if label is not None:
            key = label.casefold()
            if key in names:
                row_errors.append(RowError(label, row, "job", r.bad("job", f"must be unique (row "
                                           f"{names[key]} has the same name)", value=label).args[0]))
            else:
                names[key] = row
        job = None
        try:
            job = _parse_row(r, book, data_sheets)
        except _Many as many:
            row_errors += [RowError(label, row, p.setting, str(p)) for p in many.problems]
        except _Bad as exc:
            row_errors.append(RowError(label, row, exc.setting, str(exc)))
        if job is not None and not row_errors:
            for out in (job.output_sheet, job.profile_sheet):
                key = out.casefold()
                if key in outputs and outputs[key][1] != row:
                    other, other_row = outputs[key]
                    row_errors.append(RowError(label, row, "output_sheet", r.bad(
                        "output_sheet", f"must give each job its own sheets: {out!r} is also the "
                        f"{other} sheet of the job in row {other_row}",
                        value=job.output_sheet if "output_sheet" not in job.defaults else out,
                        hint="set `output_sheet` to tell them apart").args[0]))
                outputs[key] = ("forecast" if out == job.output_sheet else "profile", row)
        if row_errors:
            errors += row_errors
        elif job is not None:
            jobs.append(job)
    # an output sheet may not be a data sheet or the table itself
    reserved = {table.casefold()} | data_sheets
    keep = []
    for job in jobs:
        clash = [s for s in (job.output_sheet, job.profile_sheet) if s.casefold() in reserved]
        if clash:
            errors.append(RowError(job.name, job.row, "output_sheet", _Row({}, job.row, table).bad(
                "output_sheet", f"must not be a data sheet or the job table: {clash[0]!r} is one",
                value=clash[0]).args[0]))
        else:
            keep.append(job)
    if len(rows) == 1 or (len(rows) > 1 and all(v is None for v in rows[1])):
        errors.append(RowError(None, top + 1, None, f"the job table (sheet {table!r}) has no jobs: add "
                                                    f"one row per job below the header row"))
    return JobTable(book=book.name, sheet=table, jobs=tuple(keep),
                    errors=tuple(sorted(errors, key=lambda e: e.row)), disabled=tuple(disabled),
                    header_row=top)


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
        The message names the row, the setting and the value: a date column with a blank or unsorted
        dates, a validation period that leaves no training or validation rows, a horizon or season
        longer than the data, a predictor without numbers.
    """
    from sheetfns.errors import InputError, PartitionError
    from sheetfns.events import flag
    from sheetfns.partition import default_cycle, default_season, infer_frequency, split

    r = _Row(dict(job.settings), job.row, sheet)

    def fail(setting: str, expected: str, value: Any, hint: str = "") -> JobError:
        return JobError(r.bad(setting, expected, value=value, hint=hint).args[0])

    values = data.raw[job.value_column] if job.text_columns else data.columns[job.value_column]
    events = flag(values, job.criterion, job.min_run)
    observed = int((~(events != events)).sum())
    if observed == 0:
        raise fail("value_column", f"must hold values the event can be read from; column "
                   f"{data.letters[job.value_column]} of sheet {data.sheet!r} has none", job.value_column)
    index: Any = data.nrows
    freq = None
    if job.date_column is not None:
        dates = data.dates
        nat = dates != dates
        if nat.any():
            i = int(nat.nonzero()[0][0])
            cell = data.cell(job.date_column, i)
            raise fail("date_column", f"must hold a date in every data row; cell {cell} of sheet "
                       f"{data.sheet!r} has none",
                       job.date_column)
        back = (dates[1:] <= dates[:-1]).nonzero()[0]
        if back.size:                           # name the cells (partition only knows positions)
            i = int(back[0]) + 1
            a, b = data.cell(job.date_column, i - 1), data.cell(job.date_column, i)
            shown = [str(d)[:10] if str(d).endswith("T00:00:00") else str(d).replace("T", " ")
                     for d in (dates[i - 1], dates[i])]
            problem = (f"cells {a} and {b} of sheet {data.sheet!r} both hold {shown[1]}"
                       if dates[i] == dates[i - 1] else
                       f"cell {b} ({shown[1]}) of sheet {data.sheet!r} is earlier than cell {a} ({shown[0]})")
            raise fail("date_column", "must hold increasing dates", job.date_column, hint=problem)
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
    except (PartitionError, InputError) as exc:
        text = str(exc).replace("`index`", f"the date column {job.date_column!r}")
        setting = "validation" if "`validation`" in str(exc) or job.validation is not None else "date_column"
        value = job.validation if setting == "validation" else job.date_column
        raise fail(setting, "must leave rows for both training and validation" if setting == "validation"
                   else "must hold increasing dates", value, hint=text) from None
    season = job.season if job.season is not None else default_season(freq)
    cycle = job.cycle if "cycle" not in job.defaults else default_cycle(freq)
    last = int(max(i for i in range(len(events)) if events[i] == events[i]))
    if job.horizon + max(job.lags, 1) - 1 > last:
        raise fail("horizon", f"must be shorter than the data: {last + 1} rows up to the last "
                   f"observation allow at most {max(last - max(job.lags, 1) + 1, 0)} with lags={job.lags}",
                   job.horizon)
    if season >= parts.train_size + parts.valid_size:
        n = parts.train_size + parts.valid_size
        if job.season is None:                  # the default, not the user's: say where it came from
            raise JobError(r.blank("season", f"must be shorter than the {n} observed rows", hint=(
                f"the default for {freq} data is {season}: give a shorter season (1 for none) or add "
                f"data")).args[0])
        raise fail("season", f"must be shorter than the {n} observed rows", season)
    return dataclasses.replace(job, season=season, cycle=cycle, frequency=freq,
                               train_size=parts.train_size, resolved=True)


# ----------------------------------------------------------------------------------- writing a table

def job_table_rows(jobs: Iterable[Mapping[str, Any]], *, note: bool = True) -> list[list[Any]]:
    """The cells of a job table: the header row of every setting, one row per job (a mapping
    setting -> value; missing settings blank), and, with ``note``, a blank row and the note.

    For ``tocsin init``. Unknown settings raise :class:`~sheetfns.errors.JobError`. A criterion
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
            raise JobError(f"unknown setting {unknown[0]!r}{hint}")
        out.append([spec.get(s) for s in SETTINGS])
    if note:
        out += [[None] * len(SETTINGS), [TABLE_NOTE] + [None] * (len(SETTINGS) - 1)]
    return out

