"""Native charts: DrawingML chart parts (ECMA-376 Part 1, §21.2) and the drawing part that places them
on a worksheet (§20.5, SpreadsheetML drawing).

:func:`chart_xml` writes one ``c:chartSpace`` for a :class:`~watcher.xlsx.spec.ChartSpec`: a line chart
(series over category labels or dates) or a scatter chart with straight lines (x/y pairs: reliability
diagrams, ROC curves). Each series refers to the cells of its sheet (``'Sheet'!$B$2:$B$9``) *and*
carries a cache of the values, so the chart shows even in a viewer that does not recalculate. Series
colours are left to the spreadsheet program's theme, except the ``reference`` style (a thin dashed grey
line, e.g. the no-skill diagonal). Element order follows the schema (CT_ChartSpace, CT_LineSer,
CT_ScatterSer, CT_CatAx, CT_ValAx, CT_Scaling).

:func:`drawing_xml` places the charts with two-cell anchors (top-left cell and bottom-right cell).
"""
from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from watcher.xlsx.opc import NS
from watcher.xlsx.spec import ChartSpec, Ref, Series, SheetSpec, Table
from watcher.xlsx.worksheet import date_serials
from watcher.xlsx.xmlwriter import XMLWriter, number_text

__all__ = ["chart_xml", "drawing_xml", "sheet_ref"]

_AXIS_CODES = {"general": "General", "integer": "0", "dec3": "0.000", "percent": "0%", "date": "yyyy-mm-dd",
               "datetime": "yyyy-mm-dd hh:mm", "text": "@"}
_AX1, _AX2 = 500000001, 500000002  # the ids of the two axes of every chart


def sheet_ref(sheet: str, ref: Ref) -> str:
    """A formula reference to ``ref`` on ``sheet``: ``'My sheet'!$B$2:$B$9`` (always quoted)."""
    return "'" + sheet.replace("'", "''") + "'!" + ref.a1()


def _values(spec: SheetSpec, ref: Ref) -> list:
    """The values of ``ref`` as the spec holds them (a column slice when a table column holds it)."""
    for b in spec.blocks:
        if (isinstance(b, Table) and b.col <= ref.col < b.col + b.width and b.n_rows
                and b.first_data_row <= ref.first_row and ref.last_row < b.first_data_row + b.n_rows):
            vals = b.columns[ref.col - b.col].values
            lo = ref.first_row - b.first_data_row
            return list(vals[lo:lo + ref.n]) if not isinstance(vals, np.ndarray) else vals[lo:lo + ref.n]
    return [spec.value_at(r, ref.col) for r in range(ref.first_row, ref.last_row + 1)]


def _numbers(values, date1904: bool) -> list[str | None]:
    if isinstance(values, np.ndarray) and values.dtype.kind == "M":
        values = date_serials(values, date1904)[0]
    out = []
    for v in (values.tolist() if isinstance(values, np.ndarray) else values):
        if isinstance(v, (np.datetime64,)) or hasattr(v, "isoformat"):
            s = date_serials(np.array([np.datetime64(v, "ms")]), date1904)[0][0]
            v = None if math.isnan(s) else float(s)
        if isinstance(v, (bool, np.bool_)):
            v = float(v)
        out.append(number_text(float(v)) if isinstance(v, (int, float, np.number)) else None)
    return out


def _is_dates(values) -> bool:
    if isinstance(values, np.ndarray):
        return values.dtype.kind == "M"
    return any(hasattr(v, "isoformat") or isinstance(v, np.datetime64) for v in values if v is not None)


class _ChartWriter(XMLWriter):
    """One chart part: ``c:chartSpace`` and its children, one method per element in schema order."""

    def __init__(self, chart: ChartSpec, spec: SheetSpec, date1904: bool) -> None:
        super().__init__()
        self.chart, self.spec, self.date1904 = chart, spec, date1904

    def write(self) -> bytes:
        chart = self.chart
        self._declaration()
        self._start("c:chartSpace", (("xmlns:c", NS.c), ("xmlns:a", NS.a), ("xmlns:r", NS.r)))
        if self.date1904:
            self._empty("c:date1904", (("val", 1),))
        self._empty("c:roundedCorners", (("val", 0),))
        self._start("c:chart")
        self._write_title(chart.title)
        self._empty("c:autoTitleDeleted", (("val", 0 if chart.title else 1),))
        self._start("c:plotArea")
        self._empty("c:layout")
        if chart.kind == "line":
            self._write_line_chart()
        else:
            self._write_scatter_chart()
        self._end("c:plotArea")
        if chart.legend:
            self._write_legend()
        self._empty("c:plotVisOnly", (("val", 1),))
        self._empty("c:dispBlanksAs", (("val", "gap"),))
        self._end("c:chart")
        self._end("c:chartSpace")
        return self.getvalue()

    # -- titles and text ---------------------------------------------------------------------------
    def _write_title(self, text: str, size: int = 1300) -> None:
        if not text:
            return
        self._start("c:title")
        self._write_rich(text, size)
        self._empty("c:overlay", (("val", 0),))
        self._end("c:title")

    def _write_rich(self, text: str, size: int) -> None:
        self._start("c:tx")
        self._start("c:rich")
        self._empty("a:bodyPr")
        self._empty("a:lstStyle")
        self._start("a:p")
        self._start("a:pPr")
        self._empty("a:defRPr", (("sz", size), ("b", 1)))
        self._end("a:pPr")
        self._start("a:r")
        self._empty("a:rPr", (("lang", "en-US"), ("sz", size), ("b", 1)))
        self._data("a:t", text)
        self._end("a:r")
        self._end("a:p")
        self._end("c:rich")
        self._end("c:tx")

    def _write_legend(self) -> None:
        self._start("c:legend")
        self._empty("c:legendPos", (("val", "r"),))
        self._empty("c:overlay", (("val", 0),))
        self._end("c:legend")

    # -- the plot --------------------------------------------------------------------------------
    def _write_line_chart(self) -> None:
        chart = self.chart
        self._start("c:lineChart")
        self._empty("c:grouping", (("val", "standard"),))
        self._empty("c:varyColors", (("val", 0),))
        for i, s in enumerate(chart.series):
            self._write_ser(i, s)
        self._empty("c:marker", (("val", 1),))
        self._empty("c:axId", (("val", _AX1),))
        self._empty("c:axId", (("val", _AX2),))
        self._end("c:lineChart")
        if self._categories_are_dates():
            self._write_date_ax()
        else:
            self._write_cat_ax()
        self._write_val_ax(_AX2, _AX1, "l", chart.y_axis_title, chart.y_range, chart.y_fmt, "between", True)

    def _write_scatter_chart(self) -> None:
        chart = self.chart
        self._start("c:scatterChart")
        self._empty("c:scatterStyle", (("val", "lineMarker"),))
        self._empty("c:varyColors", (("val", 0),))
        for i, s in enumerate(chart.series):
            self._write_ser(i, s)
        self._empty("c:axId", (("val", _AX1),))
        self._empty("c:axId", (("val", _AX2),))
        self._end("c:scatterChart")
        self._write_val_ax(_AX1, _AX2, "b", chart.x_axis_title, chart.x_range, chart.x_fmt, "midCat", False)
        self._write_val_ax(_AX2, _AX1, "l", chart.y_axis_title, chart.y_range, chart.y_fmt, "midCat", True)

    def _categories_are_dates(self) -> bool:
        cats = self.chart.categories
        return cats is not None and _is_dates(_values(self.spec, cats))

    # -- series (CT_LineSer, CT_ScatterSer) ---------------------------------------------------------
    def _write_ser(self, i: int, s: Series) -> None:
        chart = self.chart
        self._start("c:ser")
        self._empty("c:idx", (("val", i),))
        self._empty("c:order", (("val", i),))
        self._write_series_tx(s)
        self._write_series_look(s)
        if chart.kind == "line":
            if chart.categories is not None:
                self._write_cat()
            self._start("c:val")
            self._write_num_ref(s.values, "General")
            self._end("c:val")
        else:
            self._start("c:xVal")
            self._write_num_ref(s.x or chart.x, "General")
            self._end("c:xVal")
            self._start("c:yVal")
            self._write_num_ref(s.values, "General")
            self._end("c:yVal")
        self._empty("c:smooth", (("val", 0),))
        self._end("c:ser")

    def _write_series_tx(self, s: Series) -> None:
        self._start("c:tx")
        if isinstance(s.name, Ref):
            name = self.spec.value_at(s.name.first_row, s.name.col)
            self._write_str_ref(sheet_ref(self.spec.name, s.name), ["" if name is None else str(name)])
        else:
            self._data("c:v", s.name)
        self._end("c:tx")

    def _write_series_look(self, s: Series) -> None:
        style = s.style
        if style == "auto":
            style = "line" if self.chart.kind == "line" else "line+marker"
        if style == "reference":  # a thin dashed grey line without markers
            self._start("c:spPr")
            self._start("a:ln", (("w", 12700),))
            self._start("a:solidFill")
            self._empty("a:srgbClr", (("val", "8C8C8C"),))
            self._end("a:solidFill")
            self._empty("a:prstDash", (("val", "dash"),))
            self._end("a:ln")
            self._end("c:spPr")
            self._write_marker("none")
            return
        if style == "marker":  # markers only: no line
            self._start("c:spPr")
            self._start("a:ln", (("w", 28575),))
            self._empty("a:noFill")
            self._end("a:ln")
            self._end("c:spPr")
        self._write_marker("none" if style == "line" else "circle")

    def _write_marker(self, symbol: str) -> None:
        self._start("c:marker")
        self._empty("c:symbol", (("val", symbol),))
        if symbol != "none":
            self._empty("c:size", (("val", 5),))
        self._end("c:marker")

    def _write_cat(self) -> None:
        ref = self.chart.categories
        values = _values(self.spec, ref)
        self._start("c:cat")
        if _is_dates(values):
            self._write_num_ref(ref, "yyyy-mm-dd", values)
        elif all(isinstance(v, (int, float, np.number)) or v is None for v in
                 (values.tolist() if isinstance(values, np.ndarray) else values)):
            self._write_num_ref(ref, "General", values)
        else:
            self._write_str_ref(sheet_ref(self.spec.name, ref), ["" if v is None else v for v in values])
        self._end("c:cat")

    # -- cell references with their caches -----------------------------------------------------------
    def _write_num_ref(self, ref: Ref, code: str, values=None) -> None:
        if values is None:
            values = _values(self.spec, ref)
        numbers = _numbers(values, self.date1904)
        self._start("c:numRef")
        self._data("c:f", sheet_ref(self.spec.name, ref))
        self._start("c:numCache")
        self._data("c:formatCode", code)
        self._empty("c:ptCount", (("val", len(numbers)),))
        # the points: one template per point (a chart may cache a million of them)
        self._raw("".join(f'<c:pt idx="{i}"><c:v>{v}</c:v></c:pt>' for i, v in enumerate(numbers)
                          if v is not None))
        self._end("c:numCache")
        self._end("c:numRef")

    def _write_str_ref(self, formula: str, values: Sequence) -> None:
        self._start("c:strRef")
        self._data("c:f", formula)
        self._start("c:strCache")
        self._empty("c:ptCount", (("val", len(values)),))
        for i, v in enumerate(values):
            if v is not None and v == v:
                self._start("c:pt", (("idx", i),))
                self._data("c:v", str(v))
                self._end("c:pt")
        self._end("c:strCache")
        self._end("c:strRef")

    # -- axes (CT_CatAx, CT_DateAx, CT_ValAx) ---------------------------------------------------------
    def _write_scaling(self, rng) -> None:
        self._start("c:scaling")
        self._empty("c:orientation", (("val", "minMax"),))
        if rng is not None:
            self._empty("c:max", (("val", float(rng[1])),))
            self._empty("c:min", (("val", float(rng[0])),))
        self._end("c:scaling")

    def _write_axis_head(self, ax_id: int, pos: str, title: str) -> None:
        self._empty("c:axId", (("val", ax_id),))
        self._write_scaling(None)
        self._empty("c:delete", (("val", 0),))
        self._empty("c:axPos", (("val", pos),))
        self._write_title(title, 1000)

    def _write_ticks(self, label_pos: str) -> None:
        self._empty("c:majorTickMark", (("val", "out"),))
        self._empty("c:minorTickMark", (("val", "none"),))
        self._empty("c:tickLblPos", (("val", label_pos),))

    def _write_date_ax(self) -> None:
        self._start("c:dateAx")
        self._write_axis_head(_AX1, "b", self.chart.x_axis_title)
        self._empty("c:numFmt", (("formatCode", "yyyy-mm-dd"), ("sourceLinked", 0)))
        self._write_ticks("low")
        self._empty("c:crossAx", (("val", _AX2),))
        self._empty("c:crosses", (("val", "autoZero"),))
        self._empty("c:auto", (("val", 1),))
        self._empty("c:lblOffset", (("val", 100),))
        self._empty("c:baseTimeUnit", (("val", "days"),))
        self._end("c:dateAx")

    def _write_cat_ax(self) -> None:
        self._start("c:catAx")
        self._write_axis_head(_AX1, "b", self.chart.x_axis_title)
        self._empty("c:numFmt", (("formatCode", "General"), ("sourceLinked", 1)))
        self._write_ticks("low")
        self._empty("c:crossAx", (("val", _AX2),))
        self._empty("c:crosses", (("val", "autoZero"),))
        self._empty("c:auto", (("val", 1),))
        self._empty("c:lblAlgn", (("val", "ctr"),))
        self._empty("c:lblOffset", (("val", 100),))
        self._empty("c:noMultiLvlLbl", (("val", 0),))
        self._end("c:catAx")

    def _write_val_ax(self, ax_id: int, cross: int, pos: str, title: str, rng, fmt: str, between: str,
                      gridlines: bool) -> None:
        self._start("c:valAx")
        self._empty("c:axId", (("val", ax_id),))
        self._write_scaling(rng)
        self._empty("c:delete", (("val", 0),))
        self._empty("c:axPos", (("val", pos),))
        if gridlines:
            self._empty("c:majorGridlines")
        self._write_title(title, 1000)
        self._empty("c:numFmt", (("formatCode", _AXIS_CODES[fmt]), ("sourceLinked", 0)))
        self._write_ticks("nextTo")
        self._empty("c:crossAx", (("val", cross),))
        self._empty("c:crosses", (("val", "autoZero"),))
        self._empty("c:crossBetween", (("val", between),))
        self._end("c:valAx")


def chart_xml(chart: ChartSpec, spec: SheetSpec, *, date1904: bool) -> bytes:
    """The chart part of ``chart``, a chart over cells of ``spec``."""
    return _ChartWriter(chart, spec, date1904).write()


class _DrawingWriter(XMLWriter):
    """The drawing part (``xdr:wsDr``) placing charts with two-cell anchors."""

    def write(self, charts: Sequence[ChartSpec], rel_ids: Sequence[str]) -> bytes:
        self._declaration()
        self._start("xdr:wsDr", (("xmlns:xdr", NS.xdr), ("xmlns:a", NS.a), ("xmlns:r", NS.r)))
        for i, (chart, rid) in enumerate(zip(charts, rel_ids, strict=True)):
            self._write_two_cell_anchor(i, chart, rid)
        self._end("xdr:wsDr")
        return self.getvalue()

    def _write_two_cell_anchor(self, i: int, chart: ChartSpec, rid: str) -> None:
        row, col = chart.anchor
        rows, cols = chart.size
        self._start("xdr:twoCellAnchor", (("editAs", "oneCell"),))
        self._write_marker("xdr:from", row, col)
        self._write_marker("xdr:to", row + rows, col + cols)
        self._write_graphic_frame(i, chart, rid)
        self._empty("xdr:clientData")
        self._end("xdr:twoCellAnchor")

    def _write_marker(self, tag: str, row: int, col: int) -> None:
        self._start(tag)
        self._number("xdr:col", col)
        self._number("xdr:colOff", 0)
        self._number("xdr:row", row)
        self._number("xdr:rowOff", 0)
        self._end(tag)

    def _write_graphic_frame(self, i: int, chart: ChartSpec, rid: str) -> None:
        self._start("xdr:graphicFrame", (("macro", ""),))
        self._start("xdr:nvGraphicFramePr")
        self._empty("xdr:cNvPr", (("id", i + 2), ("name", f"Chart {i + 1}"), ("descr", chart.title)))
        self._empty("xdr:cNvGraphicFramePr")
        self._end("xdr:nvGraphicFramePr")
        self._start("xdr:xfrm")
        self._empty("a:off", (("x", 0), ("y", 0)))
        self._empty("a:ext", (("cx", 0), ("cy", 0)))
        self._end("xdr:xfrm")
        self._start("a:graphic")
        self._start("a:graphicData", (("uri", NS.c),))
        self._empty("c:chart", (("xmlns:c", NS.c), ("r:id", rid)))
        self._end("a:graphicData")
        self._end("a:graphic")
        self._end("xdr:graphicFrame")


def drawing_xml(charts: Sequence[ChartSpec], rel_ids: Sequence[str]) -> bytes:
    """The drawing part placing ``charts`` (their chart parts related as ``rel_ids``)."""
    return _DrawingWriter().write(charts, rel_ids)
