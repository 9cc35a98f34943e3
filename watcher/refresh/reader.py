"""Reading the data columns of a workbook fast: the few columns a forecast job needs, as numpy arrays.

The reader opens a workbook with python-calamine (a Rust parser; on a sheet of 1,048,575 rows x 4
columns it is many times faster than openpyxl's read-only mode, see ``bench/reader.py``) and falls back
to openpyxl's read-only mode when calamine cannot read the file. Both give the same result.

What a sheet looks like to tocsin
---------------------------------
* The **header row** is the first row of the sheet that holds any cell; the data rows follow it.
* A **column** is named by its header text (case-insensitive, surrounding spaces ignored) or by its
  column letter (``A``, ``BC``). A header text wins over a letter: in a sheet whose header row holds
  ``ID``, the name ``ID`` means that column, not column ID.
* The data end at the last row where any of the requested columns (the date column included) holds a
  value: trailing blank rows are dropped, while a row with a date and a blank value is kept, because
  trailing dated rows with blank values are the **future periods** that forecasts fill.

How cells are read
------------------
* Numeric columns (``SheetData.columns``: float arrays, NaN = missing): numbers as they are,
  TRUE/FALSE as 1.0/0.0, blanks as NaN. Text that is a plain decimal number (``"1150"``, ``" -3.5 "``)
  is read as that number, as ``sheetfns`` does for spreadsheet ranges. Any other text, and a date or
  a time in a numeric column, is read as missing with a warning that names the cell
  (``B51: 'n/a' read as missing``), up to ``max_warnings`` cells per column, then a count.
  Error values (``#N/A``, ``#DIV/0!``) are missing; calamine reports them as blank cells, so they are
  not warned about (the openpyxl fallback warns about them as text).
* Text columns: a criterion such as ``=alarm`` needs the text. Columns named in ``text_columns`` are
  also returned in ``SheetData.raw`` as object arrays holding ``str`` (text as written), ``float``
  (numbers, TRUE/FALSE as 1.0/0.0) or ``None`` (blank): exactly what ``sheetfns.events.flag`` takes.
  Text in those columns is expected, so it gives no warning.
* The date column (``SheetData.dates``): ``datetime64[s]``, NaT where a cell holds no date. Date cells
  are read in the workbook's own date system (1900 or 1904; both parsers apply it). ISO text
  (``2024-03-01``, ``2024-03-01 06:00``) is read as a date. Plain numbers are spreadsheet serial dates
  whose cells lack a date format -- except that a column of whole numbers all between 1000 and 2999
  is read as years (1 January of each year). Anything else is NaT with a warning naming the cell.

Errors (:class:`~watcher.refresh.errors.ReaderError`) name the workbook, the sheet and the column, with
the closest header or sheet name when one is near: a missing sheet, a missing column, an empty sheet,
a sheet with a header row but no data, a sheet whose part is damaged or unsafe (then neither parser
reads it; the other sheets still read). A file that is missing, not a workbook, or encrypted raises
:class:`~watcher.refresh.errors.BookError`. The conversion of the cells is :mod:`watcher.refresh.columns`.
"""
from __future__ import annotations

import contextlib
import datetime as dt
import difflib
import gc
import re
import zipfile
from collections.abc import Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import Any

import numpy as np
import python_calamine

from sheetfns.errors import InputError
from watcher.refresh.columns import (
    PREFETCH_FROM,
    blank,
    column_index,
    dates_of,
    is_letter,
    numbers_of,
    prefetch_pandas,
)
from watcher.refresh.errors import BookError, ReaderError
from watcher.refresh.parts import header_cells, parts_of
from watcher.xlsx.spec import col_letter as column_letter  # one column-letter rule for reading and writing

__all__ = ["ReaderError", "Header", "SheetData", "Book", "open_book", "read_sheet", "read_header",
           "column_letter", "column_index"]



def _norm(text: str) -> str:
    return " ".join(text.split()).casefold()


@dataclass(frozen=True)
class Absent:
    """Why a name names no column: ``kind`` ('blank', 'ambiguous', 'outside' or 'missing'), ``reason``
    (the words, without the sheet and workbook) and ``hint`` ('; did you mean ...?' or '')."""

    kind: str
    reason: str
    hint: str = ""


@dataclass(frozen=True)
class Header:
    """The header row of a sheet.

    Attributes
    ----------
    book, sheet : str
        Workbook file name and sheet name (for messages).
    texts : tuple of str
        The header text of every column from A to the last used column ('' for a blank header cell).
    row : int
        The sheet row number (1-based) of the header row.
    """

    book: str
    sheet: str
    texts: tuple[str, ...]
    row: int

    def find(self, name: str, *, what: str = "column") -> int:
        """The 0-based index of the column called ``name`` (header text or letter).

        Raises :class:`ReaderError` naming the sheet and the closest header when there is none, or when
        the header text appears in more than one column. ``what`` names the setting in the message.
        """
        index, absent = self.locate(name)
        if index is not None:
            return index
        assert absent is not None
        where = f"sheet {self.sheet!r} in {self.book}"
        place = {"blank": f"in {where}", "ambiguous": f"in {where}", "outside": f"of {where}",
                 "missing": f"of {where}"}[absent.kind]
        raise ReaderError(f"{what} {name!r} {absent.reason} {place}{absent.hint}", book=self.book,
                          sheet=self.sheet, column=str(name), hint=absent.hint)

    def locate(self, name: str) -> tuple[int | None, Absent | None]:
        """``(index, None)`` for a column found, else ``(None, why)``."""
        key = _norm(str(name))
        if not key:
            return None, Absent("blank", "must name a column; got a blank")
        hits = [j for j, t in enumerate(self.texts) if _norm(t) == key]
        if len(hits) > 1:
            cols = " and ".join(column_letter(j) for j in hits[:2])
            return None, Absent("ambiguous", f"matches the header of columns {cols}",
                                "; rename one or give the column letter")
        if hits:
            return hits[0], None
        if is_letter(str(name)):
            j = column_index(str(name))
            if j < len(self.texts):
                return j, None
            hint = self.suggest(name)
            return None, Absent("outside", f"is outside the used columns "
                                           f"A:{column_letter(max(len(self.texts) - 1, 0))}",
                                hint if hint.startswith("; did you mean") else "")
        return None, Absent("missing", f"not found in the header row (row {self.row})", self.suggest(name))

    def suggest(self, name: str) -> str:
        """'; did you mean 'X'?' for the closest header text, or a list of the headers."""
        texts = [t for t in self.texts if t]
        folded = {_norm(t): t for t in texts}
        close = difflib.get_close_matches(_norm(str(name)), list(folded), n=1, cutoff=0.6)
        if close:
            return f"; did you mean {folded[close[0]]!r}?"
        shown = ", ".join(repr(t) for t in texts[:12]) + (", ..." if len(texts) > 12 else "")
        return f"; the headers are {shown}" if texts else "; the header row is blank"


# ------------------------------------------------------------------------------------------- the data

@dataclass(frozen=True)
class SheetData:
    """The columns read from one sheet, aligned row by row (row i is sheet row ``first_row + i``).

    Attributes
    ----------
    book, sheet : str
        Workbook file name and sheet name.
    header : Header
        The sheet's header row.
    columns : mapping of str to ndarray of float, length nrows
        Every requested value column, keyed by the name the caller gave (stripped), read as numbers:
        NaN is missing. The date column is in ``dates`` only (unless it was requested as a value too).
    raw : mapping of str to ndarray of object, length nrows
        The columns named in ``text_columns``: ``str``, ``float`` or ``None`` per cell.
    letters, names : mapping of str to str
        For each key (the date column's included): the column letter and the header text.
    dates : ndarray of datetime64[s] or None
        The date column (NaT where missing), or None when no date column was asked for.
    date_key : str or None
        The key of the date column.
    warnings : tuple of str
        One message per cell read as missing (capped per column), then counts.
    nrows : int
        Number of data rows (trailing blank rows dropped).
    first_row : int
        Sheet row number (1-based) of the first data row.
    backend : {'calamine', 'openpyxl'}
        The parser that read the sheet.
    newest_first : bool
        The arrays were turned round to run oldest first (the sheet lists the newest row first; see
        :mod:`watcher.refresh.periods`): row i of the arrays is sheet row ``first_row + nrows - 1 - i``.
    added : int
        Future rows tocsin appended after the data (:mod:`watcher.refresh.periods`); the arrays are
        ``nrows + added`` long. The sheet holds no cell for them.
    """

    book: str
    sheet: str
    header: Header
    columns: Mapping[str, np.ndarray]
    raw: Mapping[str, np.ndarray]
    letters: Mapping[str, str]
    names: Mapping[str, str]
    dates: np.ndarray | None
    date_key: str | None
    warnings: tuple[str, ...]
    nrows: int
    first_row: int
    backend: str = field(default="calamine")
    newest_first: bool = False
    added: int = 0

    @property
    def headers(self) -> tuple[str, ...]:
        """The header texts of the sheet (every used column)."""
        return self.header.texts

    def cell(self, key: str, i: int) -> str:
        """The cell reference (``B51``) of row ``i`` of column ``key``."""
        row = self.nrows - 1 - i if self.newest_first else i
        return f"{self.letters[key]}{self.first_row + row}"


@dataclass
class _Grid:
    """Raw cells of one sheet: rows (lists, absolute positions from A1) with None for blanks."""

    rows: list[list[Any]]      # row r of the sheet is rows[r - 1 - top]
    top: int                   # number of sheet rows above rows[0]
    header_row: int            # 1-based sheet row of the header
    texts: tuple[str, ...]


def _header_text(v: Any) -> str:
    if blank(v):
        return ""
    if isinstance(v, float) and v.is_integer():
        return str(int(v))
    if isinstance(v, (dt.date, dt.datetime)):
        return v.isoformat()
    return " ".join(str(v).split())


class Book:
    """An open workbook for reading. Use :func:`open_book` (a context manager)."""

    def __init__(self, path: str | Path, *, backend: str = "auto") -> None:
        self.path = Path(path)
        self.name = self.path.name
        if backend not in ("auto", "calamine", "openpyxl"):
            raise InputError(f"`backend` must be 'auto', 'calamine' or 'openpyxl'; got {backend!r}")
        if not self.path.is_file():
            raise BookError(f"workbook {str(self.path)!r} not found", book=self.name)
        self._cal = None
        self._opx = None
        self._grids: dict[str, _Grid] = {}
        self._quick: dict[str, Header | None] = {}
        self._date1904: bool | None = None
        self.backend = "openpyxl"
        if backend in ("auto", "calamine"):
            try:
                self._cal = python_calamine.CalamineWorkbook.from_path(str(self.path))
                self.backend = "calamine"
            except Exception as exc:   # calamine cannot: let openpyxl try, or explain
                if backend == "calamine" or _is_encrypted(exc):
                    raise self._book_error(exc) from exc
        if self._cal is None:
            self._open_openpyxl()

    # -- opening

    def _book_error(self, exc: BaseException) -> BookError:
        if _is_encrypted(exc):
            return BookError(f"{self.name} is encrypted (password protected); tocsin cannot read it",
                             book=self.name)
        if not zipfile.is_zipfile(self.path) and self.path.suffix.lower() in (".xlsx", ".xlsm"):
            return BookError(f"{self.name} is not a workbook (not a zip package)", book=self.name)
        return BookError(f"{self.name} cannot be read as a workbook: {_brief(exc)}", book=self.name)

    def _open_openpyxl(self) -> None:
        # Imported here, not at the top: openpyxl is the fallback parser and its import takes 0.2-0.35 s
        # (python -X importtime, three runs), paid only when calamine cannot read a file.
        import openpyxl

        try:
            self._opx = openpyxl.load_workbook(self.path, read_only=True, data_only=True)
        except Exception as exc:
            raise self._book_error(exc) from exc
        self._cal = None
        self.backend = "openpyxl"

    def close(self) -> None:
        """Release the file."""
        if self._cal is not None:
            self._cal.close()
        if self._opx is not None:
            self._opx.close()
        self._grids.clear()

    def __enter__(self) -> Book:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    # -- sheets

    @property
    def sheet_names(self) -> list[str]:
        """The names of the worksheets, in workbook order."""
        return list(self._cal.sheet_names) if self._cal is not None else list(self._opx.sheetnames)

    def resolve_sheet(self, sheet: str, *, what: str = "sheet") -> str:
        """The workbook's spelling of ``sheet`` (names match case-insensitively, as in spreadsheets)."""
        names = self.sheet_names
        if sheet in names:
            return sheet
        folded = {n.casefold(): n for n in names}
        key = str(sheet).strip().casefold()
        if key in folded:
            return folded[key]
        close = difflib.get_close_matches(key, list(folded), n=1, cutoff=0.6)
        hint = (f"; did you mean {folded[close[0]]!r}?" if close
                else f"; the sheets are {', '.join(repr(n) for n in names)}")
        raise ReaderError(f"{what} {sheet!r} not found in {self.name}{hint}", book=self.name,
                          sheet=str(sheet), hint=hint)

    def _size(self) -> int:
        try:
            return self.path.stat().st_size
        except OSError:
            return 0

    def date1904(self) -> bool:
        """Whether the workbook uses the 1904 date system (for serial numbers in date columns)."""
        if self._date1904 is None:
            if self._opx is not None:
                self._date1904 = self._opx.epoch == dt.datetime(1904, 1, 1)
            else:
                self._date1904 = _read_date1904(self.path)
        return self._date1904

    def _grid(self, sheet: str) -> _Grid:
        name = self.resolve_sheet(sheet)
        if name not in self._grids:
            try:
                self._grids[name] = self._load(name)
            except ReaderError:
                raise
            except Exception as first:
                # calamine failed on this sheet (a damaged part, say): openpyxl tries it; when it fails
                # too, the sheet is unreadable -- an error of the jobs that read it, not of the workbook
                if self._cal is None:
                    raise self._sheet_error(name, first) from first
                try:
                    self._open_openpyxl()
                    self._grids[name] = self._load(name)
                except BookError as exc:
                    raise self._sheet_error(name, first) from exc
                except ReaderError:
                    raise
                except Exception as exc:
                    raise self._sheet_error(name, exc) from exc
        return self._grids[name]

    def _sheet_error(self, name: str, exc: BaseException) -> ReaderError:
        return ReaderError(f"sheet {name!r} in {self.name} cannot be read: its part of the file is damaged "
                           f"or unsafe ({_brief(exc)})", book=self.name, sheet=name)

    def _load(self, name: str) -> _Grid:
        with _collector_paused():
            if self._cal is not None:
                # calamine reports a blank cell as '' (kept: every reader below treats '' as blank)
                rows = self._cal.get_sheet_by_name(name).to_python(skip_empty_area=False)
            else:
                ws = self._opx[name]
                rows = [list(r) for r in ws.iter_rows(values_only=True)]
        top = 0
        while top < len(rows) and all(blank(v) for v in rows[top]):
            top += 1
        if top == len(rows):
            raise ReaderError(f"sheet {name!r} in {self.name} is empty; expected a header row "
                              f"and data rows", book=self.name, sheet=name)
        width = max(len(rows[top]), len(rows[-1]))
        if blank(rows[top][-1]):                # trailing columns without a header: are they used?
            width = max(len(r) for r in rows)
            while width and all(len(r) < width or blank(r[width - 1]) for r in rows[top:]):
                width -= 1
        texts = tuple(_header_text(rows[top][j] if j < len(rows[top]) else None) for j in range(width))
        return _Grid(rows=rows[top:], top=top, header_row=top + 1, texts=texts)

    def header(self, sheet: str) -> Header:
        """The header row of ``sheet``. Before the sheet is read in full, the header row alone is read
        from the start of the sheet's part where that decides it (:func:`watcher.refresh.parts.header_cells`),
        so checking a job table does not load its data sheets."""
        name = self.resolve_sheet(sheet)
        if name not in self._grids:
            quick = self._quick_header(name)
            if quick is not None:
                return quick
        grid = self._grid(name)
        return Header(book=self.name, sheet=name, texts=grid.texts, row=grid.header_row)

    def _quick_header(self, name: str) -> Header | None:
        if name in self._quick:
            return self._quick[name]
        found = None
        if self._cal is not None and zipfile.is_zipfile(self.path):
            with zipfile.ZipFile(self.path) as z:
                parts = parts_of(z)
                cells = header_cells(z, parts, name) if parts is not None else None
            if cells is not None:
                found = Header(book=self.name, sheet=name, texts=tuple(_header_text(v) for v in cells[1]),
                               row=cells[0])
        self._quick[name] = found
        return found

    def cells(self, sheet: str) -> list[list[Any]]:
        """Every used row of ``sheet`` from the header row down, as lists of cell values (None for a
        blank; numbers as float or int; TRUE/FALSE as bool; dates as ``datetime``/``date``). For small
        tables such as the job table."""
        return [[None if blank(v) else v for v in r] for r in self._grid(sheet).rows]

    def column_cells(self, sheet: str, index: int) -> list[Any]:
        """The cells of column ``index`` (0-based) below the header row of ``sheet``, as the parser gives
        them ('' or None for a blank)."""
        return [r[index] if index < len(r) else None for r in self._grid(sheet).rows[1:]]

    def first_row(self, sheet: str) -> int:
        """The 1-based sheet row number of the header row of ``sheet``."""
        return self._grid(sheet).header_row

    def read(self, sheet: str, columns: Sequence[str], *, date_column: str | None = None,
             text_columns: Iterable[str] = (), max_warnings: int = 10) -> SheetData:
        """Read the named columns of ``sheet``; see :func:`read_sheet`."""
        if date_column is not None and self._cal is not None \
                and self.resolve_sheet(sheet) not in self._grids and self._size() >= PREFETCH_FROM:
            prefetch_pandas()   # imported while calamine parses (see columns.PREFETCH_FROM)
        grid = self._grid(sheet)
        name = self.resolve_sheet(sheet)
        head = Header(book=self.name, sheet=name, texts=grid.texts, row=grid.header_row)
        if isinstance(columns, str):
            columns = [columns]
        value_keys = list(dict.fromkeys(str(c).strip() for c in columns))
        date_key = str(date_column).strip() if date_column is not None else None
        if not value_keys and date_key is None:
            raise InputError("`columns` must name at least one column; got none")
        index = {k: head.find(k, what="column") for k in value_keys}
        if date_key is not None:
            index.setdefault(date_key, head.find(date_key, what="date column"))
        text_keys = {str(c).strip() for c in text_columns}
        data_rows = grid.rows[1:]
        try:                                     # rows are rectangular (both parsers pad them)
            cols = {k: [r[j] for r in data_rows] for k, j in index.items()}
        except IndexError:
            cols = {k: [r[j] if j < len(r) else None for r in data_rows] for k, j in index.items()}
        nrows = 0
        for col in cols.values():
            for i in range(len(col) - 1, nrows - 1, -1):
                if not blank(col[i]):
                    nrows = i + 1
                    break
        if nrows == 0:
            shown = ", ".join(repr(k) for k in index)
            raise ReaderError(f"sheet {head.sheet!r} in {self.name} has a header row but no data in "
                              f"column(s) {shown}", book=self.name, sheet=head.sheet)
        first = grid.header_row + 1
        warnings: list[str] = []
        floats: dict[str, np.ndarray] = {}
        raws: dict[str, np.ndarray] = {}
        dates = None
        if date_key is not None:
            dates, msgs = dates_of(cols[date_key][:nrows], column_letter(index[date_key]), first,
                                   self.date1904, max_warnings)
            warnings += msgs
        for k in value_keys:
            values, raw, msgs = numbers_of(cols[k][:nrows], column_letter(index[k]), first,
                                           keep_text=k in text_keys, max_warnings=max_warnings)
            warnings += msgs
            floats[k] = values
            if k in text_keys:
                raws[k] = raw
        return SheetData(
            book=self.name, sheet=head.sheet, header=head,
            columns=MappingProxyType(floats), raw=MappingProxyType(raws),
            letters=MappingProxyType({k: column_letter(j) for k, j in index.items()}),
            names=MappingProxyType({k: head.texts[j] for k, j in index.items()}),
            dates=dates, date_key=date_key, warnings=tuple(warnings), nrows=nrows, first_row=first,
            backend=self.backend)


@contextlib.contextmanager
def _collector_paused() -> Iterator[None]:
    """Python's cyclic garbage collector paused while a sheet becomes a list of row lists: a million
    new lists set off full collections over all of them again and again (0.45 of the 0.7 s that
    calamine's ``to_python`` took for a full-height sheet). Rows of cells hold no cycles; the
    collector runs again afterwards as before (it stays off if it was off). tocsin freezes nothing
    otherwise, so ``gc.unfreeze`` below undoes no freeze of its own."""
    was = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was:
            gc.freeze()     # the new lists join the oldest generation without being traversed
            gc.unfreeze()   # (the two young collections that follow would walk them twice more)
            gc.enable()


def _is_encrypted(exc: BaseException) -> bool:
    # calamine reports an encrypted package by its error text only (no class or field says it)
    return type(exc).__name__ == "PasswordError" or "encrypt" in str(exc).lower()


def _brief(exc: BaseException) -> str:
    """A parser's exception in one short line (its class when it has no words)."""
    text = " ".join(str(exc).split())
    text = text if len(text) <= 160 else text[:157] + "..."
    return text or type(exc).__name__


def _read_date1904(path: Path) -> bool:
    """The ``date1904`` flag of ``xl/workbook.xml`` (ECMA-376 Part 1, 18.2.28 workbookPr)."""
    try:
        with zipfile.ZipFile(path) as z:
            head = z.read("xl/workbook.xml")[:4096].decode("utf-8", "replace")
    except (OSError, KeyError, zipfile.BadZipFile):
        return False
    m = re.search(r"<(?:\w+:)?workbookPr\b[^>]*\bdate1904\s*=\s*[\"'](1|true)[\"']", head)
    return m is not None


# ------------------------------------------------------------------------------------------ shortcuts

def open_book(path: str | Path, *, backend: str = "auto") -> Book:
    """Open a workbook for reading (``with open_book(path) as book: ...``).

    ``backend``: 'auto' (calamine, falling back to openpyxl), 'calamine' or 'openpyxl'.
    """
    return Book(path, backend=backend)


def read_sheet(path: str | Path, sheet: str, columns: Sequence[str], *, date_column: str | None = None,
               text_columns: Iterable[str] = (), max_warnings: int = 10,
               backend: str = "auto") -> SheetData:
    """Read the named columns of one sheet.

    Parameters
    ----------
    path : path-like
        The workbook (.xlsx, .xlsm; calamine also reads .xls and .ods).
    sheet : str
        Sheet name (case-insensitive).
    columns : sequence of str
        Header texts or column letters of the columns to read.
    date_column : str, optional
        The column holding the dates (header text or letter); read into ``SheetData.dates``.
    text_columns : iterable of str
        Columns whose text is meaningful (a text criterion): returned in ``SheetData.raw`` too, and
        their text cells give no warning.
    max_warnings : int, default 10
        Cells named per column in the warnings before a count takes over.
    backend : {'auto', 'calamine', 'openpyxl'}
        The parser.

    Returns
    -------
    SheetData
    """
    with open_book(path, backend=backend) as book:
        return book.read(sheet, columns, date_column=date_column, text_columns=text_columns,
                         max_warnings=max_warnings)


def read_header(path: str | Path, sheet: str, *, backend: str = "auto") -> Header:
    """The header row of one sheet (to check column names before reading)."""
    with open_book(path, backend=backend) as book:
        return book.header(sheet)
