"""The settings of the job table, one parser each: the header row, then every setting of one row.

The table and its settings are described in :mod:`watcher.refresh.jobs`; this module reads the cells.
Every problem is a :class:`~watcher.refresh.errors.JobError` whose message has one shape (what was
expected, what came, where) and whose fields name the row, the setting and the value::

    `validation` must be a number of periods or a date; got 'soon' in row 3 of sheet tocsin

:func:`parse_row` collects the problems of one row (one per setting) rather than stopping at the first,
so a user fixes a row in one go.
"""
from __future__ import annotations

import datetime as dt
import difflib
import math
import re
from collections.abc import Callable, Mapping
from typing import Any

from sheetfns.events import Criterion, parse_criterion
from sheetfns.logistic import parse_refit
from sheetfns.scorecard import METHOD_LABELS
from sheetfns.scores import cost_cutoff
from watcher.alert.errors import AlertSettingError
from watcher.alert.state import alert_setting
from watcher.refresh.cells import cell_text, plain_number, show, text_stamp
from watcher.refresh.errors import JobError, ReaderError
from watcher.refresh.sheetnames import output_names, sheet_name_problem
from watcher.xlsx.spec import col_letter

__all__ = ["SETTINGS", "DEFAULTS", "IGNORED_COLUMNS", "Row", "parse_enabled", "parse_header",
           "parse_row", "row_label"]

SETTINGS = ("job", "data_sheet", "date_column", "value_column", "event", "min_run", "season", "cycle",
            "harmonics", "validation", "horizon", "lags", "predictors", "known_ahead", "refit", "alert",
            "cutoff", "cost_false_alarm", "cost_miss", "output_sheet", "enabled")
#: Defaults of the settings that have a fixed one (season, cycle, validation and cutoff depend on
#: the data or on other settings; see :mod:`watcher.refresh.jobs`).
DEFAULTS: Mapping[str, Any] = {"min_run": 1, "harmonics": 2, "horizon": 1, "lags": 1, "refit": "fixed",
                               "alert": "best", "cost_false_alarm": 1.0, "cost_miss": 1.0, "enabled": True}
IGNORED_COLUMNS = frozenset({"note", "notes", "comment", "comments"})
_TRUE = {"true", "yes", "1", "y", "on"}
_FALSE = {"false", "no", "0", "n", "off"}
_CRITERION_EXAMPLES = "a criterion such as '>=1150', 'fall' or '=alarm'"


class Row:
    """The cells of one job row, by setting, with the message helpers."""

    def __init__(self, cells: dict[str, Any], row: int, sheet: str) -> None:
        self.cells, self.row, self.sheet = cells, row, sheet
        self.where = f"in row {row} of sheet {sheet}"

    def get(self, name: str) -> Any:
        v = self.cells.get(name)
        if isinstance(v, str) and not v.strip():
            return None
        return v

    def bad(self, name: str, expected: str, value: Any = ..., hint: str = "") -> JobError:
        """The error of setting ``name``: '`name` <expected>; got <value> in row R of sheet S; <hint>'."""
        v = self.cells.get(name) if value is ... else value
        tail = f"; {hint}" if hint else ""
        return JobError(f"`{name}` {expected}; got {show(v)} {self.where}{tail}", row=self.row, setting=name,
                        value=v, sheet=self.sheet)

    def blank(self, name: str, expected: str, hint: str = "") -> JobError:
        """The error of a setting left blank."""
        tail = f"; {hint}" if hint else ""
        return JobError(f"`{name}` {expected}; got a blank {self.where}{tail}", row=self.row, setting=name,
                        sheet=self.sheet)


# ------------------------------------------------------------------------------------ typed settings

def _text(r: Row, name: str, *, required: bool = False) -> str | None:
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


def _name(r: Row) -> str | None:
    """The job's name: text without control characters (it names sheets and reports)."""
    name = _text(r, "job", required=True)
    if name is not None and any(ord(ch) < 32 or 0x7F <= ord(ch) < 0xA0 for ch in name):
        raise r.bad("job", "must be plain text without control characters", value=name,
                    hint="retype the name: it holds an invisible character")
    return name


def _number(r: Row, name: str) -> float | None:
    v = r.get(name)
    if v is None:
        return None
    if isinstance(v, bool):
        raise r.bad(name, "must be a number")
    if isinstance(v, str):
        number = plain_number(v)
        if number is None:
            raise r.bad(name, "must be a number")
        v = number
    if not isinstance(v, (int, float)) or not math.isfinite(float(v)):
        raise r.bad(name, "must be a number")
    return float(v)


def _whole(r: Row, name: str, minimum: int) -> int | None:
    v = r.get(name)
    if v is None:
        return None
    expected = f"must be a whole number >= {minimum}"
    try:
        f = _number(r, name)
    except JobError:
        raise r.bad(name, expected) from None
    if f is None or not f.is_integer() or f < minimum:
        raise r.bad(name, expected)
    return int(f)


def parse_enabled(r: Row) -> bool:
    """The row's `enabled` setting (blank = TRUE)."""
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


def _criterion(r: Row) -> tuple[str, Criterion]:
    v = r.get("event")
    if v is None:
        raise r.blank("event", "is required", hint=(
            "give a criterion such as '>=1150', 'fall' or '=alarm' (one that starts with = is typed "
            "after an apostrophe, '=alarm: typed plainly it becomes a formula, whose error result reads "
            "as a blank)"))
    if isinstance(v, bool):
        text = "=TRUE" if v else "=FALSE"
    elif isinstance(v, (int, float)):
        text = f"={show(float(v))}"           # a typed '=1' arrives as the number 1
    elif isinstance(v, str):
        text = v.strip()
    else:
        raise r.bad("event", f"must be {_CRITERION_EXAMPLES}")
    try:
        return text, parse_criterion(text)
    except ValueError as exc:       # the core's CriterionError: its message is the hint shown
        raise r.bad("event", f"must be {_CRITERION_EXAMPLES}", value=text, hint=str(exc)) from None


def _validation(r: Row, has_dates: bool) -> int | dt.date | None:
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
        number = plain_number(text)
        if number is not None and number.is_integer() and number >= 1:
            return int(number)
        when = text_stamp(text)
        if when is None:
            raise r.bad("validation", expected)
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


def _cycle(r: Row) -> tuple[float | None, bool]:
    """(cycle, was_blank); 'none' switches the Fourier terms off."""
    v = r.get("cycle")
    if v is None:
        return None, True
    if isinstance(v, str) and v.strip().lower() in ("none", "off", "no"):
        return None, False
    expected = "must be a number of periods > 0, or none"
    try:
        f = _number(r, "cycle")
    except JobError:
        raise r.bad("cycle", expected) from None
    if f is None or f <= 0:
        raise r.bad("cycle", expected)
    return f, False


def _refit(r: Row) -> str | None:
    v = r.get("refit")
    if v is None:
        return None
    text = " ".join(str(v).split()).lower() if isinstance(v, str) else v
    try:
        parse_refit(text)
    except ValueError:
        raise r.bad("refit", "must be 'fixed', 'roll' or 'roll N' (N a whole number >= 1)") from None
    return text


def _alert(r: Row) -> str:
    """The method whose forecast rings (DESIGN.md §13): ``best`` (blank), ``off`` or a method key."""
    try:
        return alert_setting(r.get("alert"), methods=METHOD_LABELS)
    except AlertSettingError:
        raise r.bad("alert", f"must be best, off or a method key ({', '.join(METHOD_LABELS)})") from None


def _columns_list(r: Row, name: str) -> tuple[str, ...]:
    v = r.get(name)
    if v is None:
        return ()
    if not isinstance(v, str):
        v = _text(r, name)
    parts = [" ".join(p.split()) for p in str(v).split(",")]
    if any(not p for p in parts):
        raise r.bad(name, "must be column names separated by commas (a header text or a letter each)")
    return tuple(dict.fromkeys(parts))


def _output(r: Row) -> str | None:
    """An explicit output sheet name, refused (with the writer's reason) where the writer would refuse
    it or the profile sheet named after it."""
    output = _text(r, "output_sheet")
    if output is None:
        return None
    for name in output_names("", output):
        why = sheet_name_problem(name)
        if why is not None:
            raise r.bad("output_sheet", "must be a sheet name the workbook can hold", value=output, hint=why)
    return output


# ---------------------------------------------------------------------------------------- the header

def _norm_setting(text: Any) -> str:
    return re.sub(r"[\s\-]+", "_", str(text).strip()).lower() if text is not None else ""


def parse_header(cells: list[Any], row: int, sheet: str
                 ) -> tuple[dict[int, str], dict[int, str], list[JobError]]:
    """Map column index -> setting; also the unknown/duplicate columns (index -> problem) and their
    errors (``row`` set, ``setting`` None for an unknown one)."""
    known: dict[int, str] = {}
    bad: dict[int, str] = {}
    errors: list[JobError] = []
    seen: dict[str, int] = {}
    for j, v in enumerate(cells):
        if v is None or (isinstance(v, str) and not v.strip()):
            continue
        key = _norm_setting(v)
        ref = f"{col_letter(j)}{row}"
        if key in IGNORED_COLUMNS:
            continue
        if key not in SETTINGS:
            close = difflib.get_close_matches(key, SETTINGS, n=1, cutoff=0.6)
            hint = f"; did you mean {close[0]!r}?" if close else \
                f"; the settings are {', '.join(SETTINGS)}"
            msg = f"unknown setting {str(v).strip()!r} in cell {ref} of sheet {sheet}{hint}"
            bad[j] = msg
            errors.append(JobError(msg, row=row, value=v, sheet=sheet))
        elif key in seen:
            msg = (f"setting {key!r} appears twice in the header row of sheet {sheet}: cells "
                   f"{col_letter(seen[key])}{row} and {ref}")
            bad[j] = msg
            errors.append(JobError(msg, row=row, setting=key, value=v, sheet=sheet))
        else:
            seen[key] = j
            known[j] = key
    return known, bad, errors


# ------------------------------------------------------------------------------------------- one row

def _check_columns(r: Row, header: Any, name: str, value: Any) -> None:
    """Check that a column setting names columns of the data sheet's header row."""
    for col in (value if isinstance(value, tuple) else (value,)):
        if col is None:
            continue
        index, problem = header.locate(col)
        if index is None:
            hint = problem.hint.lstrip("; ") if problem.kind == "missing" else \
                f"it {problem.reason}{problem.hint}"
            raise r.bad(name, f"must name a column of sheet {header.sheet!r} (a header text or a "
                              f"column letter)", value=col, hint=hint)


def _check_roles(r: Row, header: Any, columns: Mapping[str, Any]) -> None:
    """A column plays one role: the value, the date, a predictor or a known-ahead input."""
    where: dict[int, str] = {}
    for role, cols in columns.items():
        for c in (cols if isinstance(cols, tuple) else (cols,)):
            if c is None:
                continue
            j = header.find(c)
            if j in where:
                first = where[j]
                extra = "its lag is already a term of the model" if first == "value_column" and \
                    role == "predictors" else ""
                raise r.bad(role, f"must not repeat the column already given as `{first}`", value=c,
                            hint=extra)
            where[j] = role


def _data_sheet(r: Row, book: Any, sheet: str, problems: list[JobError]) -> str | None:
    """The workbook's spelling of the data sheet, or None (with the problem noted)."""
    try:
        sheet = book.resolve_sheet(sheet)
    except ReaderError as exc:
        problems.append(r.bad("data_sheet", "must name a sheet of the workbook", value=sheet,
                              hint=exc.hint.lstrip("; ")))
        return None
    if sheet.casefold() == r.sheet.casefold():
        problems.append(r.bad("data_sheet", "must be a data sheet, not the job table", value=sheet))
        return None
    return sheet


def parse_row(r: Row, book: Any) -> tuple[dict[str, Any] | None, list[JobError]]:
    """Every setting of one enabled row: ``(fields of a Job, [])``, or ``(None, problems)`` with one
    problem per setting at fault."""
    problems: list[JobError] = []

    def take(fn: Callable[..., Any], *args: Any, **kwargs: Any) -> Any:
        try:
            return fn(*args, **kwargs)
        except JobError as exc:
            problems.append(exc)
            return None

    name = take(_name, r)
    sheet = take(_text, r, "data_sheet", required=True)
    value_column = take(_text, r, "value_column", required=True)
    date_column = take(_text, r, "date_column")
    event = take(_criterion, r)
    values: dict[str, Any] = {
        "min_run": take(_whole, r, "min_run", 1), "season": take(_whole, r, "season", 1),
        "harmonics": take(_whole, r, "harmonics", 0), "horizon": take(_whole, r, "horizon", 1),
        "lags": take(_whole, r, "lags", 0), "refit": take(_refit, r), "alert": take(_alert, r),
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
    output = take(_output, r)

    if sheet is not None:
        sheet = _data_sheet(r, book, sheet, problems)
    if sheet is not None:
        try:
            header = book.header(sheet)
        except ValueError as exc:       # the reader's errors: an empty, damaged or unreadable sheet
            problems.append(r.bad("data_sheet", "must name a sheet with a header row and data", value=sheet,
                                  hint=str(exc)))
        else:
            columns = {"value_column": value_column, "date_column": date_column,
                       "predictors": values["predictors"], "known_ahead": values["known_ahead"]}
            for setting, named in columns.items():
                take(_check_columns, r, header, setting, named)
            if not problems:
                take(_check_roles, r, header, columns)
    if problems:
        return None, problems

    assert name is not None and sheet is not None and value_column is not None and event is not None
    cfa = costs["cost_false_alarm"] if costs["cost_false_alarm"] is not None else DEFAULTS["cost_false_alarm"]
    cmiss = costs["cost_miss"] if costs["cost_miss"] is not None else DEFAULTS["cost_miss"]
    if cutoff is None:
        cutoff = float(cost_cutoff(cfa, cmiss))
    forecast_sheet, profile_sheet = output_names(name, output)
    defaults = frozenset(s for s in SETTINGS if r.get(s) is None)
    if not cycle_blank:
        defaults = defaults - {"cycle"}
    def given(setting: str) -> Any:
        return values[setting] if values[setting] is not None else DEFAULTS[setting]

    return dict(
        name=name, row=r.row, data_sheet=sheet, value_column=value_column, event=event[0],
        criterion=event[1], date_column=date_column, min_run=given("min_run"), season=values["season"],
        cycle=cycle, harmonics=given("harmonics"), validation=values["validation"], horizon=given("horizon"),
        lags=given("lags"), predictors=values["predictors"], known_ahead=values["known_ahead"],
        refit=given("refit"), alert=values["alert"], cutoff=float(cutoff), cost_false_alarm=cfa,
        cost_miss=cmiss, output_sheet=forecast_sheet, profile_sheet=profile_sheet, enabled=True,
        defaults=defaults,
        settings=tuple((s, cell_text(r.cells.get(s))) for s in SETTINGS)), []


def row_label(cells: Mapping[str, Any]) -> str | None:
    """The name a row goes by in reports before it validates: its `job` cell as one line of text."""
    raw = cells.get("job")
    if raw is None or (isinstance(raw, str) and not raw.strip()):
        return None
    return " ".join(cell_text(raw).split())

