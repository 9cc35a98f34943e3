"""What a sheet tocsin writes contains, without any XML: small immutable values the package writer turns
into a worksheet part (:mod:`watcher.xlsx.worksheet`) and chart parts (:mod:`watcher.xlsx.chart`).

A :class:`SheetSpec` is a name plus *blocks*, rectangles of cells placed at a 0-based ``(row, col)``:

* :class:`Table` -- an optional header row, then columns of equal length. A :class:`Column` holds a numpy
  float array (NaN and infinity are written as blank cells), a numpy ``datetime64`` array (NaT is blank;
  written as serial numbers in the workbook's own date system), or a sequence of ``str`` / ``None`` /
  numbers / dates / booleans. ``fmt`` names a cell format (see :data:`FORMATS`); ``bold`` is an optional
  boolean mask that sets single cells bold (the best value of a scorecard row).
* :class:`Cells` -- a few rows of ``(value, fmt)`` pairs, for header blocks (title, status, verdict).

Charts (:class:`ChartSpec`) refer to cells of the same sheet through :class:`Ref` (first row, column, last
row; 0-based, inclusive); ``Table.ref(j)`` gives the data cells of column ``j`` and ``Table.header_ref(j)``
its header cell, so charting a table column is one call. ``color_scales`` are cell ranges
(:class:`Range`) that get a three-colour scale (white, light amber, amber).

Cell formats (:data:`FORMATS`):

========== ==================================================================
general    the spreadsheet's General format
integer    ``0``
dec3       ``0.000``
percent    ``0.0%``
date       ``yyyy-mm-dd`` (a ``datetime64`` column with format ``general`` gets this)
datetime   ``yyyy-mm-dd hh:mm``
text       ``@`` (text)
bold       General, bold
italic     General, italic (the caution line)
title      bold, larger
header     bold with a thin bottom border (a table's header row)
warning    dark red text on a light red fill (a failed status)
good       dark green text on a light green fill
========== ==================================================================

Every value here is checked when it is built: a bad spec raises :class:`~watcher.xlsx.errors.SpecError`
naming the sheet, block and what is wrong, long before any file is touched. Sheet-name rules of the
format (:func:`check_sheet_name`): not empty, at most 31 characters, none of ``[]:*?/\\``, not starting
or ending with an apostrophe, not the reserved name ``History`` (common practice of spreadsheet programs).
"""
from __future__ import annotations

import datetime as _dt
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from watcher.xlsx.errors import SheetNameError, SpecError

__all__ = [
    "FORMATS",
    "MAX_COLS",
    "MAX_ROWS",
    "MAX_SHEET_NAME",
    "MAX_TEXT",
    "SHEET_NAME_FORBIDDEN",
    "Cells",
    "ChartSpec",
    "Column",
    "Range",
    "Ref",
    "Series",
    "SheetSpec",
    "Table",
    "cell_name",
    "check_sheet_name",
    "col_letter",
]

MAX_ROWS = 1_048_576
"""Rows in a worksheet (ECMA-376 Part 1, §18.3.1.73: row index 1..1,048,576)."""
MAX_COLS = 16_384
"""Columns in a worksheet (A..XFD)."""
MAX_TEXT = 32_767
"""Characters (UTF-16 code units) a cell may hold; longer text is cut and ends with an ellipsis."""
MAX_SHEET_NAME = 31
"""Characters a sheet name may have (common practice of spreadsheet programs)."""
SHEET_NAME_FORBIDDEN = frozenset("[]:*?/\\")
"""Characters a sheet name must not contain (common practice of spreadsheet programs)."""

FORMATS = ("general", "integer", "dec3", "percent", "date", "datetime", "text", "bold", "italic",
           "title", "header", "warning", "good")

_SERIES_STYLES = ("auto", "line", "marker", "line+marker", "reference")

Value = str | float | int | bool | None | _dt.date | _dt.datetime | np.datetime64


def col_letter(col: int) -> str:
    """Column letters of a 0-based column index: 0 -> 'A', 25 -> 'Z', 26 -> 'AA', 16383 -> 'XFD'."""
    if not 0 <= col < MAX_COLS:
        raise SpecError(f"column index must be in 0..{MAX_COLS - 1}; got {col}")
    out = ""
    col += 1
    while col:
        col, rem = divmod(col - 1, 26)
        out = chr(65 + rem) + out
    return out


def cell_name(row: int, col: int) -> str:
    """A1-style name of a 0-based cell: (0, 0) -> 'A1'."""
    return f"{col_letter(col)}{row + 1}"


def check_sheet_name(name: Any) -> str:
    """Return ``name`` if it is a valid worksheet name, else raise :class:`SheetNameError` saying which
    rule fails (its ``rule`` attribute names it)."""
    if not isinstance(name, str):
        raise SheetNameError(f"sheet name must be text; got {name!r}", name=name, rule="type")
    if not name.strip():
        raise SheetNameError(f"sheet name must not be empty; got {name!r}", name=name, rule="empty")
    if len(name) > MAX_SHEET_NAME:
        raise SheetNameError(f"sheet name '{name}' must be <= {MAX_SHEET_NAME} characters; got {len(name)}",
                             name=name, rule="length", limit=MAX_SHEET_NAME)
    bad = sorted({ch for ch in name if ch in SHEET_NAME_FORBIDDEN})
    if bad:
        raise SheetNameError(f"sheet name '{name}' must not contain any of []:*?/\\; got {''.join(bad)!r}",
                             name=name, rule="characters")
    if any(ord(ch) < 32 for ch in name):
        raise SheetNameError(f"sheet name {name!r} must not contain control characters", name=name,
                             rule="control")
    if name.startswith("'") or name.endswith("'"):
        raise SheetNameError(f"sheet name '{name}' must not start or end with an apostrophe", name=name,
                             rule="apostrophe")
    if name.casefold() == "history":
        raise SheetNameError("sheet name 'History' is reserved by spreadsheet programs; choose another",
                             name=name, rule="reserved")
    return name


def _check_fmt(fmt: Any, where: str) -> str:
    if fmt not in FORMATS:
        raise SpecError(f"{where}: cell format must be one of {', '.join(FORMATS)}; got {fmt!r}", where=where)
    return fmt


def _check_pos(row: Any, col: Any, where: str) -> None:
    for label, v, top in (("row", row, MAX_ROWS), ("col", col, MAX_COLS)):
        if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or not 0 <= v < top:
            raise SpecError(f"{where}: `{label}` must be an integer in 0..{top - 1}; got {v!r}", where=where)


def _frozen_array(arr: np.ndarray) -> np.ndarray:
    out = np.array(arr, copy=True)
    out.flags.writeable = False
    return out


@dataclass(frozen=True)
class Ref:
    """Cells ``first_row..last_row`` (0-based, inclusive) of column ``col`` of the same sheet."""

    first_row: int
    col: int
    last_row: int

    def __post_init__(self) -> None:
        _check_pos(self.first_row, self.col, "Ref")
        _check_pos(self.last_row, self.col, "Ref")
        if self.last_row < self.first_row:
            raise SpecError(f"Ref: `last_row` must be >= `first_row`; got {self.last_row} < "
                            f"{self.first_row}")

    @property
    def n(self) -> int:
        return self.last_row - self.first_row + 1

    def a1(self) -> str:
        """Absolute A1 reference without the sheet: '$B$2:$B$9' (or '$B$2' for one cell)."""
        letter = col_letter(self.col)
        first = f"${letter}${self.first_row + 1}"
        return first if self.n == 1 else f"{first}:${letter}${self.last_row + 1}"


@dataclass(frozen=True)
class Range:
    """A rectangle of cells, 0-based and inclusive."""

    first_row: int
    first_col: int
    last_row: int
    last_col: int

    def __post_init__(self) -> None:
        _check_pos(self.first_row, self.first_col, "Range")
        _check_pos(self.last_row, self.last_col, "Range")
        if self.last_row < self.first_row or self.last_col < self.first_col:
            raise SpecError(f"Range: last cell must not be above or left of the first; got {self!r}")

    def a1(self) -> str:
        first = cell_name(self.first_row, self.first_col)
        last = cell_name(self.last_row, self.last_col)
        return first if first == last else f"{first}:{last}"


@dataclass(frozen=True, eq=False)
class Column:
    """One column of a :class:`Table`: values, a cell format and an optional bold mask."""

    values: Any
    fmt: str = "general"
    bold: Any = None

    def __post_init__(self) -> None:
        values = self.values
        if not isinstance(values, np.ndarray) and hasattr(values, "to_numpy"):  # pandas Series / Index
            values = values.to_numpy()
        if isinstance(values, np.ndarray):
            if values.ndim != 1:
                raise SpecError(f"Column values must be one-dimensional; got shape {values.shape}")
            kind = values.dtype.kind
            if kind in "iub":
                values = values.astype(float)
            elif kind == "f":
                values = values.astype(np.float64, copy=False)
            elif kind == "M":
                values = values.astype("datetime64[ms]")  # ms: years 0..9999 fit, spreadsheets keep ms
            elif kind in "OUS":
                values = tuple(values.tolist())
            else:
                raise SpecError(f"Column values must be numbers, dates or text; got dtype {values.dtype}")
            if isinstance(values, np.ndarray):
                values = _frozen_array(values)
        elif isinstance(values, (str, bytes)) or not isinstance(values, Sequence):
            try:
                values = tuple(values)
            except TypeError as exc:
                raise SpecError(f"Column values must be a sequence; got {type(values).__name__}") from exc
        else:
            values = tuple(values)
        fmt = self.fmt
        if isinstance(values, np.ndarray) and values.dtype.kind == "M" and fmt == "general":
            fmt = "date"
        _check_fmt(fmt, "Column")
        bold = self.bold
        if bold is not None:
            bold = np.asarray(bold, dtype=bool)
            if bold.shape != (len(values),):
                raise SpecError(f"Column `bold` mask must have {len(values)} entries; "
                                f"got shape {bold.shape}")
            bold = _frozen_array(bold) if bold.any() else None
        object.__setattr__(self, "values", values)
        object.__setattr__(self, "fmt", fmt)
        object.__setattr__(self, "bold", bold)

    def __len__(self) -> int:
        return len(self.values)


@dataclass(frozen=True, eq=False)
class Table:
    """A header row (optional) and columns of equal length, the first cell at ``(row, col)``."""

    row: int
    col: int
    header: tuple[str, ...] | None
    columns: tuple[Column, ...]
    header_fmt: str = "header"

    def __post_init__(self) -> None:
        _check_pos(self.row, self.col, "Table")
        cols = tuple(self.columns)
        if not cols:
            raise SpecError(f"Table at {cell_name(self.row, self.col)} must have at least one column")
        if not all(isinstance(c, Column) for c in cols):
            raise SpecError(f"Table at {cell_name(self.row, self.col)}: every column must be a Column")
        lengths = {len(c) for c in cols}
        if len(lengths) != 1:
            raise SpecError(f"Table at {cell_name(self.row, self.col)}: columns must have equal length; "
                            f"got lengths {sorted(lengths)}")
        header = self.header
        if header is not None:
            header = tuple("" if h is None else str(h) for h in header)
            if len(header) != len(cols):
                raise SpecError(f"Table at {cell_name(self.row, self.col)}: {len(cols)} columns but "
                                f"{len(header)} header cells")
        _check_fmt(self.header_fmt, "Table header")
        object.__setattr__(self, "columns", cols)
        object.__setattr__(self, "header", header)
        if self.row + self.height > MAX_ROWS or self.col + self.width > MAX_COLS:
            raise SpecError(f"Table at {cell_name(self.row, self.col)} of {self.height} rows x "
                            f"{self.width} columns does not fit in a worksheet "
                            f"({MAX_ROWS:,} rows x {MAX_COLS:,} columns)")

    @property
    def n_rows(self) -> int:
        """Number of data rows (the header row not counted)."""
        return len(self.columns[0])

    @property
    def width(self) -> int:
        return len(self.columns)

    @property
    def height(self) -> int:
        return self.n_rows + (self.header is not None)

    @property
    def first_data_row(self) -> int:
        return self.row + (self.header is not None)

    def ref(self, j: int) -> Ref:
        """The data cells of column ``j`` (0-based within the table)."""
        if not 0 <= j < self.width or self.n_rows == 0:
            raise SpecError(f"Table column {j} has no data cells (table has {self.width} columns, "
                            f"{self.n_rows} rows)")
        return Ref(self.first_data_row, self.col + j, self.first_data_row + self.n_rows - 1)

    def header_ref(self, j: int) -> Ref:
        """The header cell of column ``j``."""
        if self.header is None or not 0 <= j < self.width:
            raise SpecError(f"Table column {j} has no header cell")
        return Ref(self.row, self.col + j, self.row)


@dataclass(frozen=True)
class Cells:
    """A few rows of ``(value, fmt)`` pairs; the first cell at ``(row, col)``. A row may be shorter than
    others; ``None`` with format ``general`` leaves the cell out. A row given as one bare ``(value, fmt)``
    pair is a row of one cell, so ``Cells(0, 0, (("Title", "title"), ("status: ok", "good")))`` is a
    column of two cells."""

    row: int
    col: int
    rows: tuple[tuple[tuple[Value, str], ...], ...]

    def __post_init__(self) -> None:
        _check_pos(self.row, self.col, "Cells")
        rows = []
        for i, r in enumerate(self.rows):
            if (isinstance(r, tuple) and len(r) == 2 and isinstance(r[1], str) and r[1] in FORMATS
                    and not isinstance(r[0], tuple)):
                r = (r,)
            cells = []
            for j, pair in enumerate(r):
                if not isinstance(pair, tuple) or len(pair) != 2:
                    raise SpecError(f"Cells at {cell_name(self.row, self.col)}: row {i + 1}, cell {j + 1} "
                                    f"must be a (value, fmt) pair; got {pair!r}")
                _check_fmt(pair[1], f"Cells at {cell_name(self.row, self.col)}, row {i + 1}, cell {j + 1}")
                cells.append(pair)
            rows.append(tuple(cells))
        object.__setattr__(self, "rows", tuple(rows))
        if self.row + self.height > MAX_ROWS or self.col + self.width > MAX_COLS:
            raise SpecError(f"Cells at {cell_name(self.row, self.col)} do not fit in a worksheet")

    @property
    def height(self) -> int:
        return len(self.rows)

    @property
    def width(self) -> int:
        return max((len(r) for r in self.rows), default=0)


Block = Table | Cells


@dataclass(frozen=True)
class Series:
    """One series of a chart: a name (literal text or a one-cell :class:`Ref`), its values, and for a
    scatter chart its x values (else the chart's). ``style``: ``auto`` (line for line charts, line with
    markers for scatter charts), ``line``, ``marker``, ``line+marker``, or ``reference`` (a thin dashed
    grey line without markers, e.g. the diagonal of a reliability diagram)."""

    name: str | Ref
    values: Ref
    x: Ref | None = None
    style: str = "auto"

    def __post_init__(self) -> None:
        if not isinstance(self.name, (str, Ref)):
            raise SpecError(f"Series name must be text or a Ref; got {self.name!r}")
        if isinstance(self.name, Ref) and self.name.n != 1:
            raise SpecError("Series name Ref must be a single cell")
        if not isinstance(self.values, Ref):
            raise SpecError(f"Series values must be a Ref; got {self.values!r}")
        if self.x is not None and (not isinstance(self.x, Ref) or self.x.n != self.values.n):
            raise SpecError(f"Series x must be a Ref with {self.values.n} cells like its values")
        if self.style not in _SERIES_STYLES:
            raise SpecError(f"Series style must be one of {', '.join(_SERIES_STYLES)}; got {self.style!r}")


@dataclass(frozen=True)
class ChartSpec:
    """A native chart placed over the sheet, top-left corner at cell ``anchor`` (row, col), spanning
    ``size`` (rows, cols) cells. ``kind`` 'line' plots each series against ``categories`` (labels or
    dates); 'scatter' plots each series against its ``x`` (or the chart's ``x``). ``series`` may be given
    as :class:`Series` or as ``(name, ref)`` pairs. ``x_range`` / ``y_range`` fix an axis to (min, max);
    ``y_fmt`` / ``x_fmt`` name a cell format for the axis labels (e.g. 'percent')."""

    kind: str
    title: str
    anchor: tuple[int, int]
    series: tuple[Series, ...]
    categories: Ref | None = None
    x: Ref | None = None
    x_axis_title: str = ""
    y_axis_title: str = ""
    size: tuple[int, int] = (18, 9)
    x_range: tuple[float, float] | None = None
    y_range: tuple[float, float] | None = None
    x_fmt: str = "general"
    y_fmt: str = "general"
    legend: bool = True

    def __post_init__(self) -> None:
        if self.kind not in ("line", "scatter"):
            raise SpecError(f"ChartSpec kind must be 'line' or 'scatter'; got {self.kind!r}")
        _check_pos(self.anchor[0], self.anchor[1], f"chart '{self.title}' anchor")
        if (len(self.size) != 2 or not all(isinstance(v, int) and v >= 1 for v in self.size)):
            raise SpecError(f"chart '{self.title}': size must be (rows, cols) >= 1; got {self.size!r}")
        series = []
        for s in self.series:
            if isinstance(s, Series):
                series.append(s)
            elif isinstance(s, tuple) and len(s) == 2:
                series.append(Series(s[0], s[1]))
            else:
                raise SpecError(f"chart '{self.title}': a series must be a Series or (name, ref); got {s!r}")
        if not series:
            raise SpecError(f"chart '{self.title}' must have at least one series")
        if self.kind == "line":
            if self.categories is not None and not isinstance(self.categories, Ref):
                raise SpecError(f"chart '{self.title}': categories must be a Ref")
            for s in series:
                if self.categories is not None and s.values.n != self.categories.n:
                    raise SpecError(f"chart '{self.title}': series '{s.name}' has {s.values.n} values but "
                                    f"there are {self.categories.n} categories")
        else:
            for s in series:
                xs = s.x or self.x
                if xs is None:
                    raise SpecError(f"chart '{self.title}': scatter series '{s.name}' needs x values")
                if xs.n != s.values.n:
                    raise SpecError(f"chart '{self.title}': series '{s.name}' has {s.values.n} values but "
                                    f"{xs.n} x values")
        for label, rng in (("x_range", self.x_range), ("y_range", self.y_range)):
            if rng is not None and (len(rng) != 2 or not float(rng[0]) < float(rng[1])):
                raise SpecError(f"chart '{self.title}': {label} must be (min, max) with min < max; "
                                f"got {rng!r}")
        _check_fmt(self.x_fmt, f"chart '{self.title}' x_fmt")
        _check_fmt(self.y_fmt, f"chart '{self.title}' y_fmt")
        object.__setattr__(self, "series", tuple(series))


def _norm_widths(widths: Any) -> tuple[tuple[int, float], ...]:
    if widths is None:
        return ()
    items = widths.items() if isinstance(widths, Mapping) else enumerate(widths)
    out = []
    for col, w in items:
        _check_pos(0, col, "col_widths")
        if w is None:
            continue
        w = float(w)
        if not 0 < w <= 255:
            raise SpecError(f"col_widths: width of column {col_letter(col)} must be in (0, 255]; got {w}")
        out.append((int(col), w))
    return tuple(sorted(out))


def _spans(block: Block) -> tuple[int, int, int, int]:
    return block.row, block.col, block.row + block.height, block.col + block.width


@dataclass(frozen=True, eq=False)
class SheetSpec:
    """One sheet tocsin writes. See the module docstring."""

    name: str
    blocks: tuple[Block, ...]
    col_widths: Any = ()
    freeze: tuple[int, int] | None = None
    charts: tuple[ChartSpec, ...] = ()
    color_scales: tuple[Range, ...] = ()
    tab_color: str | None = None
    _extent: tuple[int, int] = field(init=False, repr=False)

    def __post_init__(self) -> None:
        check_sheet_name(self.name)
        blocks = tuple(self.blocks)
        for b in blocks:
            if not isinstance(b, (Table, Cells)):
                raise SpecError(f"sheet '{self.name}': a block must be a Table or Cells; "
                                f"got {type(b).__name__}")
        spans = sorted((_spans(b), i) for i, b in enumerate(blocks) if b.height and b.width)
        for a in range(len(spans)):
            (r0, c0, r1, c1), _ = spans[a]
            for b in range(a + 1, len(spans)):
                (s0, d0, s1, d1), _ = spans[b]
                if s0 >= r1:
                    break
                if d0 < c1 and c0 < d1:
                    raise SpecError(f"sheet '{self.name}': blocks at {cell_name(r0, c0)} and "
                                    f"{cell_name(s0, d0)} overlap")
        object.__setattr__(self, "blocks", blocks)
        object.__setattr__(self, "col_widths", _norm_widths(self.col_widths))
        if self.freeze is not None:
            rows, cols = self.freeze
            _check_pos(rows, cols, f"sheet '{self.name}' freeze")
            if rows == 0 and cols == 0:
                object.__setattr__(self, "freeze", None)
            else:
                object.__setattr__(self, "freeze", (int(rows), int(cols)))
        charts = tuple(self.charts)
        if not all(isinstance(c, ChartSpec) for c in charts):
            raise SpecError(f"sheet '{self.name}': charts must be ChartSpec values")
        object.__setattr__(self, "charts", charts)
        scales = tuple(r if isinstance(r, Range) else Range(*r) for r in self.color_scales)
        object.__setattr__(self, "color_scales", scales)
        if self.tab_color is not None:
            tc = str(self.tab_color).lstrip("#").upper()
            if len(tc) != 6 or any(ch not in "0123456789ABCDEF" for ch in tc):
                raise SpecError(f"sheet '{self.name}': tab_color must be 'RRGGBB'; got {self.tab_color!r}")
            object.__setattr__(self, "tab_color", tc)
        last_row = max((r1 for (_, _, r1, _), _ in spans), default=0)
        last_col = max((c1 for (_, _, _, c1), _ in spans), default=0)
        object.__setattr__(self, "_extent", (last_row, last_col))

    @property
    def extent(self) -> tuple[int, int]:
        """(rows, cols) covered by the blocks: one past the last used row and column."""
        return self._extent

    def value_at(self, row: int, col: int) -> Any:
        """The value written at a 0-based cell (None for a blank), as given in the spec: a float, a
        ``numpy.datetime64``, a str, ... Used for the cached values of chart series."""
        for b in self.blocks:
            if not (b.row <= row < b.row + b.height and b.col <= col < b.col + b.width):
                continue
            j = col - b.col
            if isinstance(b, Cells):
                r = b.rows[row - b.row]
                return r[j][0] if j < len(r) else None
            if b.header is not None and row == b.row:
                return b.header[j]
            v = b.columns[j].values[row - b.first_data_row]
            return v.item() if isinstance(v, np.generic) and not isinstance(v, np.datetime64) else v
        return None
