"""Turning spreadsheet ranges into series and results back into cells, for ``sheetfns.udf``.

A spreadsheet add-in hands a function its arguments as plain Python values: a range as a list of rows
(each a list of cell values), a single cell as a scalar, a one-column range sometimes as a flat list;
blank and error cells as None; TRUE / FALSE as bools; dates as ``datetime``; numbers as floats. This
module is the one place that reads those values (pure Python and numpy: it never imports xlwings, so
the tests exercise exactly the conversion the add-in runs) and that shapes results for the sheet: a
column of one-element rows (None for a blank) that spills down next to the data, or a small table
with a header row.

The common case, a numeric column, is converted in one numpy call; only cells holding text or dates
are looked at one by one. Numbers stored as text are read as numbers when the text is a plain decimal
number ("1150", " -3.5 ", "2e3"); anything else ("1,150", "12%", "n/a") stays text, because its
meaning depends on the locale or the user.

Every error is an :class:`~sheetfns.errors.InputError` naming the argument, what was expected and
what came, so that ``udf`` can show it in the cell.
"""
from __future__ import annotations

import datetime as dt
import functools
import warnings
from collections.abc import Callable, Sequence
from typing import Any, TypeVar

import numpy as np

from sheetfns.checks import as_int, plain_number
from sheetfns.errors import InputError, TocsinError

ERROR_PREFIX = "#tocsin: "

_F = TypeVar("_F", bound=Callable[..., Any])
_EXCEL_EPOCH = np.datetime64("1899-12-30", "us")  # serial 0 of the 1900 date system (serials >= 61)
_US_PER_DAY = 86_400 * 10**6
_LAST_SERIAL = 2_958_465                            # 9999-12-31, the last date of the 1900 date system
_NONE = type(None)


def _show(value: Any) -> str:
    text = repr(value) if not isinstance(value, (dt.date, dt.datetime)) else value.isoformat()
    return text if len(text) <= 40 else text[:37] + "..."


def _is_numeric_type(kind: type) -> bool:
    return kind is _NONE or issubclass(kind, (float, int, np.number, np.bool_))


# --------------------------------------------------------------------------------------------------
# shapes
# --------------------------------------------------------------------------------------------------
def grid(value: Any, name: str) -> list[list[Any]]:
    """Return ``value`` as a rectangular list of rows.

    A scalar (a single cell, or a literal typed into the formula) is one row of one cell; a flat list
    is read as a column (that is how a one-column range arrives with the add-in's default converter);
    a list of lists is a range, which must be rectangular.
    """
    if isinstance(value, np.ndarray):
        if value.ndim > 2:
            raise InputError(f"`{name}` must be a range of cells; got an array of shape {value.shape}")
        value = value.tolist()
    if not isinstance(value, (list, tuple)):
        return [[value]]
    if len(value) == 0:
        return []
    first = value[0]
    if not isinstance(first, (list, tuple)):
        if any(isinstance(v, (list, tuple)) for v in value):
            raise InputError(f"`{name}` must be a range of cells; got a mixture of single values and rows")
        return [[v] for v in value]
    try:
        widths = set(map(len, value))
    except TypeError:
        raise InputError(f"`{name}` must be a range of cells; got a mixture of single values and rows"
                         ) from None
    if len(widths) > 1:
        row = next(i for i, r in enumerate(value) if len(r) != len(first))
        raise InputError(f"`{name}` must be a rectangular range; row {row + 1} has {len(value[row])} "
                         f"cells but row 1 has {len(first)}")
    return value if isinstance(value, list) else list(value)


def column_cells(value: Any, name: str) -> list[Any]:
    """Return the cells of a one-column range, top to bottom.

    A row of several cells, or a block several columns wide, is an error that says what was expected.
    """
    if isinstance(value, np.ndarray):
        value = value.tolist()
    if not isinstance(value, (list, tuple)):
        return [value]
    if value and not isinstance(value[0], (list, tuple, np.ndarray)):
        if any(isinstance(v, (list, tuple, np.ndarray)) for v in value):
            raise InputError(f"`{name}` must be a range of cells; got a mixture of single values and rows")
        return list(value)
    rows = grid(value, name)
    if not rows:
        return []
    width = len(rows[0])
    if width == 1:
        return [r[0] for r in rows]
    if len(rows) == 1:
        raise InputError(f"`{name}` must be a single column (one cell per period, top to bottom); got a "
                         f"row of {width} cells: select the cells down a column instead")
    raise InputError(f"`{name}` must be a single column (one cell per period); got a block of "
                     f"{len(rows)} rows x {width} columns")


# --------------------------------------------------------------------------------------------------
# cell values
# --------------------------------------------------------------------------------------------------
def _cell_error(name: str, row: int, what: str, got: Any) -> InputError:
    if isinstance(got, str):
        came = f"the text {_show(got)}"
    elif isinstance(got, (dt.date, dt.datetime)):
        came = f"the date {_show(got)}"
    else:
        came = _show(got)
    return InputError(f"`{name}` must hold {what}; got {came} in row {row + 1} of the range")


def numbers(cells: Sequence[Any], name: str, *, keep_text: bool = False) -> np.ndarray:
    """Return ``cells`` as a float array: None -> NaN, TRUE/FALSE -> 1/0, plain-number text -> number.

    With ``keep_text`` other text is kept (an object array mixing floats and str, for criteria such as
    ``=alarm``); without it, text that is not a number is an error naming the row. A date is always an
    error here (a date column belongs in a ``dates`` argument).
    """
    kinds = set(map(type, cells))
    if all(_is_numeric_type(k) for k in kinds):
        return np.array(cells, dtype=float).reshape(-1)
    if all(_is_numeric_type(k) or k is str for k in kinds):
        # numbers and text (blank text is how the add-in hands back another function's blanks):
        # look at the text cells only
        vals = list(cells)
        text_at = []
        for i in np.flatnonzero(np.fromiter((type(v) is str for v in cells), bool, len(cells))).tolist():
            num = plain_number(vals[i])
            if num is not None:
                vals[i] = num
            elif vals[i].strip() == "":
                vals[i] = None
            elif keep_text:
                text_at.append(i)
                vals[i] = None
            else:
                raise _cell_error(name, i, "numbers", cells[i])
        arr = np.array(vals, dtype=float).reshape(-1)
        if not text_at:
            return arr
        obj = arr.astype(object)
        obj[text_at] = [cells[i] for i in text_at]
        return obj
    out = np.empty(len(cells), dtype=object if keep_text else float)
    has_text = False
    for i, v in enumerate(cells):
        if v is None:
            out[i] = np.nan
        elif isinstance(v, str):
            num = plain_number(v)
            if num is not None:
                out[i] = num
            elif v.strip() == "":
                out[i] = np.nan
            elif keep_text:
                out[i] = v
                has_text = True
            else:
                raise _cell_error(name, i, "numbers", v)
        elif isinstance(v, (dt.date, dt.datetime, dt.time)):
            raise _cell_error(name, i, "numbers" + (" or text" if keep_text else ""), v)
        else:
            try:
                out[i] = float(v)
            except (TypeError, ValueError):
                raise _cell_error(name, i, "numbers", v) from None
    return out if has_text else out.astype(float)


def dates(cells: Sequence[Any], name: str) -> np.ndarray:
    """Return ``cells`` as a ``datetime64[us]`` array (NaT for blanks).

    Accepted: dates and date-times, date serial numbers of the 1900 date system (a date column that is
    formatted as numbers), and ISO text dates such as ``"2024-03-31"``.
    """
    kinds = set(map(type, cells))
    if kinds <= {dt.datetime, dt.date, _NONE}:
        return np.array(cells, dtype="datetime64[us]").reshape(-1)
    out = np.empty(len(cells), dtype="datetime64[us]")
    for i, v in enumerate(cells):
        if v is None or (isinstance(v, str) and v.strip() == ""):
            out[i] = np.datetime64("NaT")
        elif isinstance(v, (dt.datetime, dt.date)):
            out[i] = np.datetime64(v, "us")
        elif isinstance(v, (bool, np.bool_)):
            raise _cell_error(name, i, "dates", v)
        elif isinstance(v, (int, float, np.number)):
            if not (np.isfinite(v) and 0 <= v < _LAST_SERIAL + 1):
                raise _cell_error(name, i, "dates", v)
            out[i] = _EXCEL_EPOCH + np.timedelta64(int(round(float(v) * _US_PER_DAY)), "us")
        elif isinstance(v, str):
            try:
                out[i] = np.datetime64(dt.date.fromisoformat(v.strip()), "us")
            except ValueError:
                try:
                    out[i] = np.datetime64(dt.datetime.fromisoformat(v.strip()), "us")
                except ValueError:
                    raise _cell_error(name, i, "dates (or text dates like 2024-03-31)", v) from None
        else:
            raise _cell_error(name, i, "dates", v)
    return out


# --------------------------------------------------------------------------------------------------
# arguments
# --------------------------------------------------------------------------------------------------
def _require_rows(arr: np.ndarray, name: str) -> np.ndarray:
    if arr.size == 0:
        raise InputError(f"`{name}` must be a range with at least one row; got an empty range")
    return arr


def number_column(value: Any, name: str, *, keep_text: bool = False) -> np.ndarray:
    """A one-column range of numbers (see :func:`numbers`)."""
    return _require_rows(numbers(column_cells(value, name), name, keep_text=keep_text), name)


def _first_bad(arr: np.ndarray, bad: np.ndarray, name: str, what: str) -> None:
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise InputError(f"`{name}` must hold {what}; got {float(arr[i])!r} in row {i + 1} of the range")


def event_column(value: Any, name: str) -> np.ndarray:
    """A one-column range of events: each cell 0, 1, TRUE, FALSE or blank."""
    arr = number_column(value, name)
    _first_bad(arr, ~(np.isnan(arr) | (arr == 0.0) | (arr == 1.0)), name,
               "events: 1 (event), 0 (no event), TRUE, FALSE or blank")
    return arr


def prob_column(value: Any, name: str) -> np.ndarray:
    """A one-column range of probabilities in [0, 1] (blank allowed)."""
    arr = number_column(value, name)
    with np.errstate(invalid="ignore"):
        _first_bad(arr, (arr < 0.0) | (arr > 1.0) | np.isinf(arr), name, "probabilities between 0 and 1")
    return arr


def date_column(value: Any, name: str) -> np.ndarray:
    """A one-column range of dates (see :func:`dates`)."""
    return _require_rows(dates(column_cells(value, name), name), name)


def number_table(value: Any, name: str, *, rows: int, of: str = "the events") -> tuple[np.ndarray, list[str]]:
    """A block of numeric columns, each a series of ``rows`` periods (as many as ``of`` has), and a name
    for each column.

    The block may carry one extra row on top holding a text label in every column (its header row);
    the labels then name the columns, otherwise they are ``<name> 1``, ``<name> 2``, ...
    Returns an array of shape (rows, columns).
    """
    cells = grid(value, name)
    if not cells:
        raise InputError(f"`{name}` must be a range with at least one row; got an empty range")
    width = len(cells[0])
    labels = [f"{name} {j + 1}" for j in range(width)]
    first = cells[0]
    if (len(cells) == rows + 1 and all(isinstance(v, str) and plain_number(v) is None and v.strip()
                                       for v in first)):
        labels = [v.strip() for v in first]
        if len(set(labels)) < len(labels):
            raise InputError(f"`{name}` header row must name each column once; got {labels}")
        cells = cells[1:]
    if len(cells) != rows:
        raise InputError(f"`{name}` must cover the same rows as {of}; {of} have {rows} rows, `{name}` "
                         f"has {len(cells)}")
    out = np.empty((rows, width), dtype=float)
    for j in range(width):
        out[:, j] = numbers([r[j] for r in cells], f"{name}` column `{labels[j]}")
    return out, labels


def _single(value: Any, name: str) -> Any:
    """The one cell of a single-cell argument (a 1x1 range arrives as a scalar or as [[v]])."""
    if isinstance(value, np.ndarray):
        value = value.tolist()
    while isinstance(value, (list, tuple)):
        if len(value) != 1:
            raise InputError(f"`{name}` must be a single value; got a range of {len(value)} cells")
        value = value[0]
    return value


def _blank(value: Any) -> bool:
    return value is None or (isinstance(value, str) and value.strip() == "")


def option_int(value: Any, name: str, default: int | None, *, minimum: int | None = None) -> int | None:
    """An optional whole-number argument: blank or omitted gives ``default``."""
    value = _single(value, name)
    if _blank(value):
        return default
    if isinstance(value, str):
        num = plain_number(value)
        if num is None:
            raise InputError(f"`{name}` must be a whole number; got the text {_show(value)}")
        value = num
    return as_int(value, name, minimum=minimum)


def option_float(value: Any, name: str, default: float | None, *, positive: bool = False
                 ) -> float | None:
    """An optional number argument: blank or omitted gives ``default``."""
    value = _single(value, name)
    if _blank(value):
        return default
    num = plain_number(value) if isinstance(value, str) else value
    if num is None or isinstance(num, (bool, np.bool_, dt.date)):
        raise InputError(f"`{name}` must be a number; got {_show(value)}")
    try:
        f = float(num)
    except (TypeError, ValueError):
        raise InputError(f"`{name}` must be a number; got {_show(value)}") from None
    if not np.isfinite(f) or (positive and f <= 0):
        raise InputError(f"`{name}` must be a {'positive ' if positive else ''}number; got {_show(value)}")
    return f


def required_float(value: Any, name: str, what: str) -> float:
    """A required number argument; a blank says what the argument is for."""
    f = option_float(value, name, None)
    if f is None:
        raise InputError(f"`{name}` is required: {what}, a number; got a blank")
    return f


def omitted(value: Any) -> bool:
    """True for an optional range argument that was left out or points at a single blank cell."""
    try:
        return _blank(_single(value, "value"))
    except InputError:
        return False


def option_text(value: Any, name: str, default: str | None) -> str | None:
    """An optional text argument: blank or omitted gives ``default``."""
    value = _single(value, name)
    if _blank(value):
        return default
    if not isinstance(value, str):
        raise InputError(f"`{name}` must be text; got {_show(value)}")
    return value.strip()


def criterion_text(value: Any, name: str = "criterion") -> str:
    """The criterion argument as text. A bare number means equality, as in OpenFormula criteria
    (ISO/IEC 26300-2, "Criteria"): ``1`` is read as ``"=1"``, TRUE as ``"=1"``."""
    value = _single(value, name)
    if _blank(value):
        raise InputError(f"`{name}` is required: a rule such as \">=1150\", \"rise%>=5\" or \"=alarm\"; "
                         "got a blank")
    if isinstance(value, (bool, np.bool_)):
        return "=1" if value else "=0"
    if isinstance(value, (int, float, np.number)):
        if not np.isfinite(float(value)):
            raise InputError(f"`{name}` must be a rule such as \">=1150\" or a finite number; got "
                             f"{_show(value)}")
        return f"={float(value)!r}" if float(value) != int(value) else f"={int(value)}"
    if not isinstance(value, str):
        raise InputError(f"`{name}` must be text such as \">=1150\"; got {_show(value)}")
    return value


# --------------------------------------------------------------------------------------------------
# results
# --------------------------------------------------------------------------------------------------
def to_column(arr: np.ndarray) -> list[list[Any]]:
    """A series as a spilling column: one single-cell row per value, None where the value is NaN."""
    arr = np.asarray(arr, dtype=float).reshape(-1)
    return [[v] for v in np.where(np.isnan(arr), None, arr).tolist()]


def cell(value: Any) -> Any:
    """One result value as a cell: NaN and None become a blank, numpy scalars Python numbers."""
    if value is None:
        return None
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and np.isnan(value):
        return None
    return value


def to_table(header: Sequence[Any], rows: Sequence[Sequence[Any]]) -> list[list[Any]]:
    """A small table: the header row, then the rows, every value passed through :func:`cell`."""
    return [[cell(v) for v in header]] + [[cell(v) for v in row] for row in rows]


# The core's argument names where the spreadsheet functions call the argument differently.
_SHEET_NAMES = {"`y`": "`events`", "`train_size`": "`train_rows`", "`prob`": "`probability`"}


def error_value(exc: BaseException) -> str:
    """The text a cell shows for a failed call: ``#tocsin: `` then what to fix.

    Argument names in the core's messages are given their spreadsheet names (``train_size`` is
    ``train_rows`` in a formula)."""
    if isinstance(exc, TocsinError):
        text = str(exc)
        for core, sheet in _SHEET_NAMES.items():
            text = text.replace(core, sheet)
        return ERROR_PREFIX + text
    return (f"{ERROR_PREFIX}unexpected error ({type(exc).__name__}: {exc}); please report it with the "
            "inputs that caused it")


def guarded(fn: _F) -> _F:
    """Decorate a spreadsheet function so that it never raises: an exception becomes its error text.

    Warnings are silenced inside the call: a cell cannot show one, and what they report (an undefined
    score) already shows as a blank."""

    @functools.wraps(fn)
    def wrapper(*args: Any) -> Any:
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                return fn(*args)
        except Exception as exc:  # noqa: BLE001 - a cell must show a message, never a traceback
            return error_value(exc)

    return wrapper  # type: ignore[return-value]
