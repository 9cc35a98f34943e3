"""A worksheet part (SpreadsheetML, ECMA-376 Part 1, §18.3) streamed from a :class:`SheetSpec`.

:func:`worksheet_chunks` yields the part as UTF-8 byte chunks, never as one tree, and writes its child
elements in schema order (CT_Worksheet: sheetPr, dimension, sheetViews, sheetFormatPr, cols, sheetData,
conditionalFormatting, pageMargins, drawing). The cell XML of a table is produced in bulk: each column
of a chunk of rows is formatted at once (small integer ranges through a lookup table, other numbers
through :func:`~watcher.xlsx.xmlwriter.number_texts`, one C call per column), then the pieces of all
columns (row numbers, constant markup, number texts) are laid out in one object array and joined, so
there is no Python call per cell and no string built per cell.

Values:

* numbers are written with round-trip precision: integers exactly, other doubles as Python's ``repr``
  (the shortest string that reads back as the same double); NaN and infinity become blank cells (a cell
  with its format and no value), never numbers;
* dates are serial numbers in the workbook's own date system (:func:`date_serials`): 1900 (serial 1 is
  1900-01-01, the fictitious 1900-02-29 is serial 60, so 1900-03-01 is 61) or 1904 (serial 0 is
  1904-01-01), ECMA-376 Part 1, §18.17.4.1. A date the system cannot hold (before its first day, after
  9999-12-31) is written as ISO text so nothing is lost silently;
* text is an inline string (``t="inlineStr"``), so the shared-strings part stays untouched; it is
  escaped per the standard (:func:`escape_text`: ``&<>``, characters XML cannot carry and a literal
  ``_xHHHH_`` as ``_xHHHH_`` escapes, ``xml:space="preserve"`` where white space matters) and cut to
  32,767 characters;
* booleans are ``t="b"`` cells.
"""
from __future__ import annotations

import datetime as _dt
import math
from collections.abc import Iterator, Mapping

import numpy as np

from watcher.xlsx.opc import NS
from watcher.xlsx.spec import MAX_TEXT, Cells, Column, SheetSpec, Table, col_letter
from watcher.xlsx.xmlwriter import XMLWriter, escape_data, number_text, number_texts

__all__ = ["CHUNK_ROWS", "date_serials", "escape_text", "style_keys", "worksheet_chunks"]

CHUNK_ROWS = 32_768
_FEW_LABELS = 256  # a text column with at most this many distinct values is coded once, not per chunk
_SCALE_COLORS = ("FFFFFFFF", "FFFBE3B2", "FFEFA23A")  # white -> light amber -> amber
_MAX_SERIAL = 2_958_465  # 9999-12-31 in the 1900 system
_MS_PER_DAY = 86_400_000
_EPOCH_1900 = np.datetime64("1899-12-30", "ms").astype(np.int64)
_EPOCH_1904 = np.datetime64("1904-01-01", "ms").astype(np.int64)
_NAT = np.iinfo(np.int64).min
_TWO_53 = 2.0**53


# -- values --------------------------------------------------------------------------------------
def escape_text(text: str) -> tuple[str, bool]:
    """Escape cell text for XML; return ``(escaped, preserve)`` where ``preserve`` says the text needs
    ``xml:space="preserve"``. Text longer than 32,767 UTF-16 code units is cut and ends with '…'."""
    if len(text) > MAX_TEXT // 2:
        units = len(text) + sum(1 for ch in text if ord(ch) > 0xFFFF)
        if units > MAX_TEXT:
            out, used = [], 0
            for ch in text:
                w = 2 if ord(ch) > 0xFFFF else 1
                if used + w > MAX_TEXT - 1:
                    break
                out.append(ch)
                used += w
            text = "".join(out) + "\u2026"
    text = escape_data(text)
    preserve = bool(text) and (text[0].isspace() or text[-1].isspace() or "\n" in text or "\t" in text
                               or "  " in text)
    return text, preserve


def date_serials(values: np.ndarray, date1904: bool) -> tuple[np.ndarray, np.ndarray]:
    """Serial numbers of a ``datetime64`` array in the workbook's date system.

    Returns ``(serials, unrepresentable)``: float serials (NaN for NaT and for dates the system cannot
    hold) and a mask of the non-NaT dates it cannot hold.
    """
    ms = values.astype("datetime64[ms]").view(np.int64)
    nat = ms == _NAT
    if date1904:
        days, rem = np.divmod(ms - _EPOCH_1904, _MS_PER_DAY)
        top = _MAX_SERIAL - 1462
    else:
        days, rem = np.divmod(ms - _EPOCH_1900, _MS_PER_DAY)
        days = np.where(days < 61, days - 1, days)  # before 1900-03-01: no fictitious 1900-02-29 yet
        top = _MAX_SERIAL
    serial = days + rem / _MS_PER_DAY
    low = 0 if date1904 else 1
    bad = ~nat & ((days < low) | (days > top))
    serial = np.where(nat | bad, np.nan, serial)
    return serial, bad


def _scalar_serial(value, date1904: bool) -> float | None:
    arr = np.array([np.datetime64(value, "ms")])
    serial, bad = date_serials(arr, date1904)
    return None if bad[0] or math.isnan(serial[0]) else float(serial[0])


def _iso(value) -> str:
    """ISO text of a date a date system cannot hold: '1850-06-01' or '1850-06-01T12:30:00'."""
    text = str(np.datetime64(value, "s"))
    return text[:-9] if text.endswith("T00:00:00") else text


def _is_date(v) -> bool:
    return isinstance(v, (_dt.date, np.datetime64))


class _Styles:
    """Piece makers for one sheet: cell XML after ``<c r="A1`` for each kind of value and style."""

    def __init__(self, mapping: Mapping[tuple[str, bool], int], date1904: bool) -> None:
        self.mapping = mapping
        self.date1904 = date1904

    def sid(self, fmt: str, bold: bool = False) -> int:
        return self.mapping[(fmt, bold)]

    @staticmethod
    def number(sid: int, text: str) -> str:
        return f'" s="{sid}"><v>{text}</v></c>'

    @staticmethod
    def blank(sid: int) -> str:
        return f'" s="{sid}"/>'

    @staticmethod
    def text(sid: int, value: str) -> str:
        esc, preserve = escape_text(value)
        space = ' xml:space="preserve"' if preserve else ""
        return f'" s="{sid}" t="inlineStr"><is><t{space}>{esc}</t></is></c>'

    def scalar(self, value, fmt: str, bold: bool = False) -> str | None:
        """The piece of one value; None for a cell left out (None with format 'general')."""
        sid = self.sid(fmt, bold)
        if value is None:
            return None if fmt == "general" and not bold else self.blank(sid)
        if isinstance(value, str):
            return self.text(sid, value)
        if isinstance(value, (bool, np.bool_)):
            return f'" s="{sid}" t="b"><v>{int(value)}</v></c>'
        if _is_date(value):
            serial = _scalar_serial(value, self.date1904)
            if fmt not in ("date", "datetime"):
                fmt = "datetime" if _has_time(value) else "date"
                sid = self.sid(fmt, bold)
            if serial is None:
                if isinstance(value, np.datetime64) and np.isnat(value):
                    return self.blank(sid)
                return self.text(sid, _iso(value))
            return self.number(sid, number_text(serial))
        try:
            number = float(value)
        except (TypeError, ValueError):
            return self.text(sid, str(value))
        text = number_text(number)
        return self.blank(sid) if text is None else self.number(sid, text)


def _has_time(v) -> bool:
    if isinstance(v, np.datetime64):
        return not np.isnat(v) and v.astype("datetime64[ms]").astype(np.int64) % _MS_PER_DAY != 0
    return isinstance(v, _dt.datetime) and (v.hour, v.minute, v.second, v.microsecond) != (0, 0, 0, 0)


def style_keys(spec: SheetSpec) -> set[tuple[str, bool]]:
    """The ``(fmt, bold)`` cell formats a sheet needs."""
    keys: set[tuple[str, bool]] = {("general", False)}
    for b in spec.blocks:
        if isinstance(b, Cells):
            for row in b.rows:
                for value, fmt in row:
                    keys.add((fmt, False))
                    if _is_date(value) and fmt not in ("date", "datetime"):
                        keys.add(("datetime" if _has_time(value) else "date", False))
            continue
        if b.header is not None:
            keys.add((b.header_fmt, False))
        for col in b.columns:
            keys.add((col.fmt, False))
            if col.bold is not None:
                keys.add((col.fmt, True))
            if not isinstance(col.values, np.ndarray) and col.fmt not in ("date", "datetime"):
                kinds = set(map(type, col.values))
                if not any(issubclass(k, (_dt.date, np.datetime64)) for k in kinds):
                    continue
                dates = [v for v in col.values if _is_date(v)]
                for flag in (False, True) if col.bold is not None else (False,):
                    if any(not _has_time(v) for v in dates):
                        keys.add(("date", flag))
                    if any(_has_time(v) for v in dates):
                        keys.add(("datetime", flag))
    return keys


# -- columns in bulk ---------------------------------------------------------------------------------
def _numeric_slots(x: np.ndarray, sid: int, suffix: str, rows: list[str]) -> list:
    """The cells of a float column after their ``<c r="X``, as slots laid side by side (each a constant
    or one text per row): the row number, then the cell's markup around the number's text. Numbers have
    round-trip precision (:func:`~watcher.xlsx.xmlwriter.number_texts`); NaN and infinities are blank
    cells. Slots cost less than one string made per cell: they are only copied into the chunk's join."""
    pre, post = f'" s="{sid}"><v>', "</v></c>" + suffix
    blank = f'" s="{sid}"/>'
    finite = np.isfinite(x)
    all_finite = bool(finite.all())
    xf = x if all_finite else x[finite]
    if xf.size == 0:
        return [rows, blank + suffix]
    integral = bool(np.all(xf == np.trunc(xf))) and float(np.max(np.abs(xf))) <= _TWO_53
    if integral and np.any((xf == 0) & np.signbit(xf)):
        integral = False  # keep -0.0 as written by repr
    if integral:
        lo, hi = int(xf.min()), int(xf.max())
        span = hi - lo + 1
        if span <= 4096 and span * 4 <= len(x) + 16:
            table = np.array([f"{pre}{k}{post}" for k in range(lo, hi + 1)] + [blank + suffix], dtype=object)
            idx = np.full(len(x), span, dtype=np.intp)
            idx[finite] = (xf - lo).astype(np.intp)
            return [rows, table[idx]]
    texts = number_texts(x if all_finite else np.where(finite, x, 0.0))
    if all_finite:
        return [rows, pre, texts, post]
    gaps = ~finite
    texts[gaps] = ""
    # markup by table lookup (a 0/1 index per row): several times faster than numpy.full of an object
    # array and assigning the gaps after
    which = gaps.view(np.int8)
    before = np.array([pre, blank], dtype=object).take(which)
    after = np.array([post, suffix], dtype=object).take(which)
    return [rows, before, texts, after]


def _patch(slots: list, idx: np.ndarray, pieces: list[str]) -> list:
    """``slots`` with the cells at ``idx`` replaced by whole pieces (their suffix included): the first
    slot (the row number) stays, the second becomes the piece and the others empty."""
    n = len(slots[0])
    out = [slots[0]]
    for s in slots[1:]:
        arr = np.empty(n, dtype=object)
        arr[:] = s
        arr[idx] = ""
        out.append(arr)
    out[1][idx] = pieces
    return out


class _ColumnWriter:
    """Makes the cells of one table column for any row slice."""

    def __init__(self, col: Column, styles: _Styles) -> None:
        self.col = col
        self.styles = styles
        self.sid = styles.sid(col.fmt)
        self.bold_sid = styles.sid(col.fmt, True) if col.bold is not None else None
        values = col.values
        self.kind = "object"
        self.bad_dates = None
        self.size = len(values)
        self._windows: dict[str, tuple[int, int, list]] = {}  # suffix -> (start, stop, slots)
        self.labels: list | None = None   # a column of few texts: its distinct values and codes
        if not isinstance(values, np.ndarray) and len(values) > _FEW_LABELS \
                and set(map(type, values)) <= {str, type(None)}:
            labels = list(dict.fromkeys(values))
            if len(labels) <= _FEW_LABELS:
                code = {v: i for i, v in enumerate(labels)}
                self.labels = labels
                self.codes = np.fromiter(map(code.__getitem__, values), dtype=np.intp, count=len(values))
        if isinstance(values, np.ndarray):
            if values.dtype.kind == "M":
                self.serials, self.bad_dates = date_serials(values, styles.date1904)
                if not self.bad_dates.any():
                    self.bad_dates = None
                self.kind = "date"
            else:
                self.kind = "float"

    def slots(self, start: int, stop: int, suffix: str, rows: list[str]) -> list:
        """Rows ``start..stop-1`` of the column as slots (see :func:`_numeric_slots`).

        The slots are made for a window of up to :data:`CHUNK_ROWS` rows and sliced from it, so a
        table cut into many short row segments (the panel beside it starts and ends blocks) costs one
        pass over its numbers, not one per segment."""
        cached = self._windows.get(suffix)
        if cached is None or not (cached[0] <= start and stop <= cached[1]):
            end = min(self.size, max(stop, start + CHUNK_ROWS))
            made = self._slots(start, end, suffix, [""] * (end - start))[1:]
            cached = self._windows[suffix] = (start, end, made)
        i, j = start - cached[0], stop - cached[0]
        return [rows, *(s if isinstance(s, str) else s[i:j] for s in cached[2])]

    def _slots(self, start: int, stop: int, suffix: str, rows: list[str]) -> list:
        col = self.col
        if self.labels is not None:  # a piece per label, laid out by the codes
            blank = self.styles.blank(self.sid) + suffix
            table = np.array([blank if v is None else self.styles.text(self.sid, v) + suffix
                              for v in self.labels], dtype=object)
            out = [rows, table.take(self.codes[start:stop])]
        elif self.kind == "object":
            out = [rows, self._object_pieces(col.values[start:stop], suffix)]
        else:
            x = self.serials[start:stop] if self.kind == "date" else col.values[start:stop]
            out = _numeric_slots(x, self.sid, suffix, rows)
            if self.bad_dates is not None:
                bad = np.flatnonzero(self.bad_dates[start:stop])
                if bad.size:
                    out = _patch(out, bad, [self.styles.text(self.sid, _iso(col.values[start + i])) + suffix
                                            for i in bad.tolist()])
        if col.bold is not None:
            idx = np.flatnonzero(col.bold[start:stop])
            if idx.size:
                out = _patch(out, idx, [self._one(col.values[start + i], bold=True) + suffix
                                        for i in idx.tolist()])
        return out

    def pieces(self, start: int, stop: int, suffix: str) -> list[str]:
        """Rows ``start..stop-1`` as one piece per cell (the text after ``<c r="X1``)."""
        slots = self.slots(start, stop, suffix, [""] * (stop - start))
        arr = np.empty((stop - start, len(slots)), dtype=object)
        for j, s in enumerate(slots):
            arr[:, j] = s
        return list(map("".join, arr.tolist()))

    def _one(self, value, bold: bool) -> str:
        sid = self.bold_sid if bold else self.sid
        if isinstance(value, (float, np.floating)):
            text = number_text(float(value))
            return self.styles.blank(sid) if text is None else self.styles.number(sid, text)
        piece = self.styles.scalar(value.item() if isinstance(value, np.generic) and not
                                   isinstance(value, np.datetime64) else value, self.col.fmt, bold)
        return self.styles.blank(sid) if piece is None else piece

    def _object_pieces(self, values, suffix: str) -> list[str]:
        sid = self.sid
        blank = self.styles.blank(sid) + suffix
        if set(map(type, values)) <= {str, type(None)}:  # text and blanks only: a piece per distinct value
            cache = {v: self.styles.text(sid, v) + suffix for v in set(values) if v is not None}
            cache[None] = blank
            return list(map(cache.__getitem__, values))
        cache: dict = {}
        out = []
        append = out.append
        for v in values:
            if v is None:
                append(blank)
                continue
            t = type(v)
            if t is str:
                piece = cache.get(v)
                if piece is None:
                    piece = cache[v] = self.styles.text(sid, v) + suffix
                append(piece)
            elif t is float:
                text = number_text(v)
                append(blank if text is None else self.styles.number(sid, text) + suffix)
            else:
                append(self._one(v, False) + suffix)
        return out


# -- the part ------------------------------------------------------------------------------------
class _Band:
    """Rows ``start..stop-1`` of one block: a table's header row, a table's data rows, or Cells."""

    def __init__(self, kind: str, block, start: int, stop: int) -> None:
        self.kind, self.block, self.start, self.stop = kind, block, start, stop
        self.col = block.col


def _bands(spec: SheetSpec) -> list[_Band]:
    out = []
    for b in spec.blocks:
        if isinstance(b, Cells):
            if b.height:
                out.append(_Band("cells", b, b.row, b.row + b.height))
            continue
        if b.header is not None:
            out.append(_Band("header", b, b.row, b.row + 1))
        if b.n_rows:
            out.append(_Band("data", b, b.first_data_row, b.first_data_row + b.n_rows))
    return out


def _sheet_data(spec: SheetSpec, styles: _Styles, chunk_rows: int) -> Iterator[str]:
    bands = _bands(spec)
    writers = {id(b): [_ColumnWriter(c, styles) for c in b.columns] for b in spec.blocks
               if isinstance(b, Table)}
    cuts = sorted({x for band in bands for x in (band.start, band.stop)})
    for seg_start, seg_stop in zip(cuts, cuts[1:], strict=False):
        active = sorted((band for band in bands if band.start <= seg_start < band.stop), key=lambda b: b.col)
        if not active:
            continue
        if all(band.kind == "data" for band in active):
            yield from _bulk_rows(active, writers, seg_start, seg_stop, chunk_rows)
        else:
            yield from _generic_rows(active, writers, styles, seg_start, seg_stop)


def _bulk_rows(active: list[_Band], writers, seg_start: int, seg_stop: int,
               chunk_rows: int) -> Iterator[str]:
    cols = []  # (sheet column, writer, band)
    for band in active:
        for j, w in enumerate(writers[id(band.block)]):
            cols.append((band.col + j, w, band))
    letters = [col_letter(c) for c, _, _ in cols]
    suffixes = [f'<c r="{letters[k + 1]}' for k in range(len(cols) - 1)] + ["</row>"]
    for a in range(seg_start, seg_stop, chunk_rows):
        b = min(seg_stop, a + chunk_rows)
        rows = number_texts(np.arange(a + 1, b + 1, dtype=np.float64))
        slots = ['<row r="', rows, f'"><c r="{letters[0]}']
        for j, (_, w, band) in enumerate(cols):
            off = band.block.first_data_row
            slots.extend(w.slots(a - off, b - off, suffixes[j], rows))
        arr = np.empty((b - a, len(slots)), dtype=object)
        for j, s in enumerate(slots):
            arr[:, j] = s
        yield "".join(arr.ravel().tolist())


def _generic_rows(active: list[_Band], writers, styles: _Styles, seg_start: int,
                  seg_stop: int) -> Iterator[str]:
    per_band = []
    for band in active:
        if band.kind == "data":
            off = band.block.first_data_row
            per_band.append((band, [w.pieces(seg_start - off, seg_stop - off, "")
                                    for w in writers[id(band.block)]]))
        else:
            per_band.append((band, None))
    out = []
    for r in range(seg_start, seg_stop):
        cells = []
        for band, pieces in per_band:
            if band.kind == "data":
                i = r - seg_start
                cells.extend((band.col + j, p[i]) for j, p in enumerate(pieces))
            elif band.kind == "header":
                t = band.block
                sid = styles.sid(t.header_fmt)
                cells.extend((t.col + j, styles.text(sid, h) if h else styles.blank(sid))
                             for j, h in enumerate(t.header))
            else:
                for j, (value, fmt) in enumerate(band.block.rows[r - band.start]):
                    piece = styles.scalar(value, fmt)
                    if piece is not None:
                        cells.append((band.col + j, piece))
        if not cells:
            continue
        cells.sort(key=lambda t: t[0])
        row = str(r + 1)
        tall = any(band.kind == "cells" and any(fmt == "title" for _, fmt in band.block.rows[r - band.start])
                   for band, _ in per_band if band.kind == "cells")
        height = ' ht="19.5" customHeight="1"' if tall else ""
        out.append(f'<row r="{row}"{height}>' + "".join(f'<c r="{col_letter(c)}{row}{p}' for c, p in cells)
                   + "</row>")
    yield "".join(out)


class _WorksheetWriter(XMLWriter):
    """The parts of CT_Worksheet around the rows, one method per element in schema order; the rows of
    ``sheetData`` are made in bulk (:func:`_sheet_data`) and streamed between :meth:`head` and
    :meth:`tail`."""

    def __init__(self, spec: SheetSpec, *, selected: bool, drawing_rid: str | None) -> None:
        super().__init__()
        self.spec, self.selected, self.drawing_rid = spec, selected, drawing_rid

    def head(self) -> str:
        self._declaration()
        self._start("worksheet", (("xmlns", NS.main), ("xmlns:r", NS.r)))
        self._write_sheet_pr()
        self._write_dimension()
        self._write_sheet_views()
        self._empty("sheetFormatPr", (("defaultRowHeight", 15),))
        self._write_cols()
        self._start("sheetData")
        return self.take()

    def tail(self) -> str:
        self._end("sheetData")
        for priority, rng in enumerate(self.spec.color_scales, start=1):
            self._write_conditional_formatting(priority, rng.a1())
        self._empty("pageMargins", (("left", "0.7"), ("right", "0.7"), ("top", "0.75"), ("bottom", "0.75"),
                                    ("header", "0.3"), ("footer", "0.3")))
        if self.drawing_rid:
            self._empty("drawing", (("r:id", self.drawing_rid),))
        self._end("worksheet")
        return self.take()

    def _write_sheet_pr(self) -> None:
        if self.spec.tab_color:
            self._start("sheetPr")
            self._empty("tabColor", (("rgb", f"FF{self.spec.tab_color}"),))
            self._end("sheetPr")

    def _write_dimension(self) -> None:
        spec = self.spec
        rows, cols = spec.extent
        ref = "A1"
        if rows and cols:
            first_row = min(b.row for b in spec.blocks if b.height and b.width)
            first_col = min(b.col for b in spec.blocks if b.height and b.width)
            first, last = f"{col_letter(first_col)}{first_row + 1}", f"{col_letter(cols - 1)}{rows}"
            ref = first if first == last else f"{first}:{last}"
        self._empty("dimension", (("ref", ref),))

    def _write_sheet_views(self) -> None:
        self._start("sheetViews")
        view = (("tabSelected", 1),) if self.selected else ()
        view += (("workbookViewId", 0),)
        if self.spec.freeze is None:
            self._empty("sheetView", view)
        else:
            self._start("sheetView", view)
            self._write_pane()
            self._end("sheetView")
        self._end("sheetViews")

    def _write_pane(self) -> None:
        rows, cols = self.spec.freeze
        top_left = f"{col_letter(cols)}{rows + 1}"
        pane = "bottomRight" if rows and cols else ("bottomLeft" if rows else "topRight")
        attrs = (("xSplit", cols),) if cols else ()
        attrs += (("ySplit", rows),) if rows else ()
        self._empty("pane", attrs + (("topLeftCell", top_left), ("activePane", pane), ("state", "frozen")))
        self._empty("selection", (("pane", pane), ("activeCell", top_left), ("sqref", top_left)))

    def _write_cols(self) -> None:
        if not self.spec.col_widths:
            return
        self._start("cols")
        for c, w in self.spec.col_widths:
            self._empty("col", (("min", c + 1), ("max", c + 1), ("width", f"{w:g}"), ("customWidth", 1)))
        self._end("cols")

    def _write_conditional_formatting(self, priority: int, sqref: str) -> None:
        self._start("conditionalFormatting", (("sqref", sqref),))
        self._start("cfRule", (("type", "colorScale"), ("priority", priority)))
        self._start("colorScale")
        self._empty("cfvo", (("type", "min"),))
        self._empty("cfvo", (("type", "percentile"), ("val", 50)))
        self._empty("cfvo", (("type", "max"),))
        for rgb in _SCALE_COLORS:
            self._empty("color", (("rgb", rgb),))
        self._end("colorScale")
        self._end("cfRule")
        self._end("conditionalFormatting")


def worksheet_chunks(spec: SheetSpec, *, styles: Mapping[tuple[str, bool], int], date1904: bool,
                     drawing_rid: str | None = None, selected: bool = False,
                     chunk_rows: int = CHUNK_ROWS) -> Iterator[bytes]:
    """The worksheet part of ``spec`` as UTF-8 chunks.

    Parameters
    ----------
    spec : SheetSpec
    styles : mapping
        ``(fmt, bold)`` -> index into the workbook's ``cellXfs`` (see :func:`style_keys`).
    date1904 : bool
        The workbook's date system.
    drawing_rid : str, optional
        Relationship id of the sheet's drawing part (charts), if any.
    selected : bool
        Whether the sheet's tab is the selected one (the workbook's active sheet).
    """
    writer = _WorksheetWriter(spec, selected=selected, drawing_rid=drawing_rid)
    yield writer.head().encode("utf-8")
    for text in _sheet_data(spec, _Styles(styles, date1904), chunk_rows):
        if text:
            yield text.encode("utf-8", "surrogatepass")
    yield writer.tail().encode("utf-8")
