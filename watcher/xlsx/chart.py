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
from collections.abc import Callable, Sequence

import numpy as np

from watcher.xlsx.spec import ChartSpec, Ref, Series, SheetSpec
from watcher.xlsx.worksheet import _num_text, date_serials, escape_text

__all__ = ["chart_xml", "drawing_xml", "sheet_ref"]

_C = "http://schemas.openxmlformats.org/drawingml/2006/chart"
_A = "http://schemas.openxmlformats.org/drawingml/2006/main"
_R = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
_XDR = "http://schemas.openxmlformats.org/drawingml/2006/spreadsheetDrawing"
_AXIS_CODES = {"general": "General", "integer": "0", "dec3": "0.000", "percent": "0%", "date": "yyyy-mm-dd",
               "datetime": "yyyy-mm-dd hh:mm", "text": "@"}
_DECL = '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'


def sheet_ref(sheet: str, ref: Ref) -> str:
    """A formula reference to ``ref`` on ``sheet``: ``'My sheet'!$B$2:$B$9`` (always quoted)."""
    return "'" + sheet.replace("'", "''") + "'!" + ref.a1()


def _esc_attr(text: str) -> str:
    return escape_text(text)[0].replace('"', "&quot;")


def _values(spec: SheetSpec, ref: Ref) -> list:
    """The values of ``ref`` as the spec holds them (a column slice when a table column holds it)."""
    from watcher.xlsx.spec import Table

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
        out.append(_num_text(float(v)) if isinstance(v, (int, float, np.number)) else None)
    return out


def _is_dates(values) -> bool:
    if isinstance(values, np.ndarray):
        return values.dtype.kind == "M"
    return any(hasattr(v, "isoformat") or isinstance(v, np.datetime64) for v in values if v is not None)


def _num_ref(formula: str, values: list[str | None], code: str) -> str:
    pts = "".join(f'<c:pt idx="{i}"><c:v>{v}</c:v></c:pt>' for i, v in enumerate(values) if v is not None)
    return (f"<c:numRef><c:f>{escape_text(formula)[0]}</c:f><c:numCache><c:formatCode>{code}</c:formatCode>"
            f'<c:ptCount val="{len(values)}"/>{pts}</c:numCache></c:numRef>')


def _str_ref(formula: str, values: Sequence) -> str:
    pts = "".join(f'<c:pt idx="{i}"><c:v>{escape_text(str(v))[0]}</c:v></c:pt>'
                  for i, v in enumerate(values) if v is not None and v == v)
    return (f"<c:strRef><c:f>{escape_text(formula)[0]}</c:f><c:strCache>"
            f'<c:ptCount val="{len(values)}"/>{pts}</c:strCache></c:strRef>')


def _rich(text: str, size: int) -> str:
    return (f'<c:tx><c:rich><a:bodyPr/><a:lstStyle/><a:p><a:pPr><a:defRPr sz="{size}" b="1"/></a:pPr>'
            f'<a:r><a:rPr lang="en-US" sz="{size}" b="1"/><a:t>{escape_text(text)[0]}</a:t></a:r></a:p>'
            "</c:rich></c:tx>")


def _title(text: str, size: int = 1300) -> str:
    if not text:
        return ""
    return f'<c:title>{_rich(text, size)}<c:overlay val="0"/></c:title>'


def _series_tx(spec: SheetSpec, s: Series) -> str:
    if isinstance(s.name, Ref):
        name = spec.value_at(s.name.first_row, s.name.col)
        return f"<c:tx>{_str_ref(sheet_ref(spec.name, s.name), ['' if name is None else str(name)])}</c:tx>"
    return f"<c:tx><c:v>{escape_text(s.name)[0]}</c:v></c:tx>"


def _series_look(s: Series, kind: str) -> str:
    style = s.style
    if style == "auto":
        style = "line" if kind == "line" else "line+marker"
    if style == "reference":
        return ('<c:spPr><a:ln w="12700"><a:solidFill><a:srgbClr val="8C8C8C"/></a:solidFill>'
                '<a:prstDash val="dash"/></a:ln></c:spPr><c:marker><c:symbol val="none"/></c:marker>')
    line = "" if style != "marker" else '<c:spPr><a:ln w="28575"><a:noFill/></a:ln></c:spPr>'
    marker = ('<c:marker><c:symbol val="none"/></c:marker>' if style == "line"
              else '<c:marker><c:symbol val="circle"/><c:size val="5"/></c:marker>')
    return line + marker


def _axis_scaling(rng) -> str:
    out = '<c:scaling><c:orientation val="minMax"/>'
    if rng is not None:
        out += f'<c:max val="{_num_text(float(rng[1]))}"/><c:min val="{_num_text(float(rng[0]))}"/>'
    return out + "</c:scaling>"


def _val_ax(ax_id: int, cross: int, pos: str, title: str, rng, fmt: str, between: str,
            gridlines: bool) -> str:
    grid = "<c:majorGridlines/>" if gridlines else ""
    return (f'<c:valAx><c:axId val="{ax_id}"/>{_axis_scaling(rng)}<c:delete val="0"/>'
            f'<c:axPos val="{pos}"/>{grid}{_title(title, 1000)}'
            f'<c:numFmt formatCode="{_esc_attr(_AXIS_CODES[fmt])}" sourceLinked="0"/>'
            '<c:majorTickMark val="out"/><c:minorTickMark val="none"/><c:tickLblPos val="nextTo"/>'
            f'<c:crossAx val="{cross}"/><c:crosses val="autoZero"/><c:crossBetween val="{between}"/>'
            "</c:valAx>")


def chart_xml(chart: ChartSpec, spec: SheetSpec, *, date1904: bool) -> bytes:
    """The chart part of ``chart``, a chart over cells of ``spec``."""
    sers = []
    cat_is_date = False
    cat = ""
    if chart.kind == "line" and chart.categories is not None:
        cvals = _values(spec, chart.categories)
        f = sheet_ref(spec.name, chart.categories)
        if _is_dates(cvals):
            cat_is_date = True
            cat = f"<c:cat>{_num_ref(f, _numbers(cvals, date1904), 'yyyy-mm-dd')}</c:cat>"
        elif all(isinstance(v, (int, float, np.number)) or v is None for v in
                 (cvals.tolist() if isinstance(cvals, np.ndarray) else cvals)):
            cat = f"<c:cat>{_num_ref(f, _numbers(cvals, date1904), 'General')}</c:cat>"
        else:
            cat = f"<c:cat>{_str_ref(f, ['' if v is None else v for v in cvals])}</c:cat>"
    for i, s in enumerate(chart.series):
        numbers = _numbers(_values(spec, s.values), date1904)
        vals = _num_ref(sheet_ref(spec.name, s.values), numbers, "General")
        head = (f'<c:ser><c:idx val="{i}"/><c:order val="{i}"/>{_series_tx(spec, s)}'
                f"{_series_look(s, chart.kind)}")
        if chart.kind == "line":
            sers.append(f'{head}{cat}<c:val>{vals}</c:val><c:smooth val="0"/></c:ser>')
        else:
            xref = s.x or chart.x
            xs = _num_ref(sheet_ref(spec.name, xref), _numbers(_values(spec, xref), date1904), "General")
            sers.append(f'{head}<c:xVal>{xs}</c:xVal><c:yVal>{vals}</c:yVal><c:smooth val="0"/></c:ser>')
    ax1, ax2 = 500000001, 500000002
    if chart.kind == "line":
        plot = (f'<c:lineChart><c:grouping val="standard"/><c:varyColors val="0"/>{"".join(sers)}'
                f'<c:marker val="1"/><c:axId val="{ax1}"/><c:axId val="{ax2}"/></c:lineChart>')
        if cat_is_date:
            x_axis = (f'<c:dateAx><c:axId val="{ax1}"/>{_axis_scaling(None)}<c:delete val="0"/>'
                      f'<c:axPos val="b"/>{_title(chart.x_axis_title, 1000)}'
                      '<c:numFmt formatCode="yyyy-mm-dd" sourceLinked="0"/><c:majorTickMark val="out"/>'
                      '<c:minorTickMark val="none"/><c:tickLblPos val="low"/>'
                      f'<c:crossAx val="{ax2}"/><c:crosses val="autoZero"/><c:auto val="1"/>'
                      '<c:lblOffset val="100"/><c:baseTimeUnit val="days"/></c:dateAx>')
        else:
            x_axis = (f'<c:catAx><c:axId val="{ax1}"/>{_axis_scaling(None)}<c:delete val="0"/>'
                      f'<c:axPos val="b"/>{_title(chart.x_axis_title, 1000)}'
                      '<c:numFmt formatCode="General" sourceLinked="1"/><c:majorTickMark val="out"/>'
                      '<c:minorTickMark val="none"/><c:tickLblPos val="low"/>'
                      f'<c:crossAx val="{ax2}"/><c:crosses val="autoZero"/><c:auto val="1"/>'
                      '<c:lblAlgn val="ctr"/><c:lblOffset val="100"/><c:noMultiLvlLbl val="0"/></c:catAx>')
        y_axis = _val_ax(ax2, ax1, "l", chart.y_axis_title, chart.y_range, chart.y_fmt, "between", True)
    else:
        plot = (f'<c:scatterChart><c:scatterStyle val="lineMarker"/><c:varyColors val="0"/>{"".join(sers)}'
                f'<c:axId val="{ax1}"/><c:axId val="{ax2}"/></c:scatterChart>')
        x_axis = _val_ax(ax1, ax2, "b", chart.x_axis_title, chart.x_range, chart.x_fmt, "midCat", False)
        y_axis = _val_ax(ax2, ax1, "l", chart.y_axis_title, chart.y_range, chart.y_fmt, "midCat", True)
    system = '<c:date1904 val="1"/>' if date1904 else ""
    legend = '<c:legend><c:legendPos val="r"/><c:overlay val="0"/></c:legend>' if chart.legend else ""
    xml = (f'{_DECL}<c:chartSpace xmlns:c="{_C}" xmlns:a="{_A}" xmlns:r="{_R}">'
           f'{system}<c:roundedCorners val="0"/><c:chart>'
           f'{_title(chart.title)}<c:autoTitleDeleted val="{0 if chart.title else 1}"/>'
           f"<c:plotArea><c:layout/>{plot}{x_axis}{y_axis}</c:plotArea>{legend}"
           '<c:plotVisOnly val="1"/><c:dispBlanksAs val="gap"/></c:chart></c:chartSpace>')
    return xml.encode("utf-8")


def drawing_xml(charts: Sequence[ChartSpec], rel_ids: Sequence[str],
                name_of: Callable[[int], str] = lambda i: f"Chart {i + 1}") -> bytes:
    """The drawing part placing ``charts`` (their chart parts related as ``rel_ids``)."""
    anchors = []
    for i, (chart, rid) in enumerate(zip(charts, rel_ids, strict=True)):
        row, col = chart.anchor
        rows, cols = chart.size
        anchors.append(
            '<xdr:twoCellAnchor editAs="oneCell">'
            f"<xdr:from><xdr:col>{col}</xdr:col><xdr:colOff>0</xdr:colOff><xdr:row>{row}</xdr:row>"
            "<xdr:rowOff>0</xdr:rowOff></xdr:from>"
            f"<xdr:to><xdr:col>{col + cols}</xdr:col><xdr:colOff>0</xdr:colOff>"
            f"<xdr:row>{row + rows}</xdr:row>"
            "<xdr:rowOff>0</xdr:rowOff></xdr:to>"
            f'<xdr:graphicFrame macro=""><xdr:nvGraphicFramePr><xdr:cNvPr id="{i + 2}" '
            f'name="{_esc_attr(name_of(i))}" descr="{_esc_attr(chart.title)}"/><xdr:cNvGraphicFramePr/>'
            '</xdr:nvGraphicFramePr><xdr:xfrm><a:off x="0" y="0"/><a:ext cx="0" cy="0"/></xdr:xfrm>'
            f'<a:graphic><a:graphicData uri="{_C}"><c:chart xmlns:c="{_C}" r:id="{rid}"/>'
            "</a:graphicData></a:graphic></xdr:graphicFrame><xdr:clientData/></xdr:twoCellAnchor>")
    xml = (f'{_DECL}<xdr:wsDr xmlns:xdr="{_XDR}" xmlns:a="{_A}" xmlns:r="{_R}">{"".join(anchors)}'
           "</xdr:wsDr>")
    return xml.encode("utf-8")
