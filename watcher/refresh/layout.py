"""What the sheets of a job contain and look like, as :class:`SheetSpec` values: the parts every sheet
shares (:class:`SheetContext`, the caution, the cell helpers), the failed job's sheet and the profile
sheet. The forecast sheet of a job that computed is :mod:`watcher.refresh.forecast_sheet`.

Profile sheet: the event rate by period of year and year (colour scale) with a line chart (one line
per year and the pooled share), the reliability table of the logistic validation probabilities with a
reliability diagram, and the ROC points with the ROC curve.
"""
from __future__ import annotations

import datetime as dt
import math
import textwrap
from dataclasses import dataclass
from typing import Any

import numpy as np

from sheetfns.scorecard import Evaluation
from watcher.refresh.texts import CAUTION
from watcher.xlsx.spec import Cells, ChartSpec, Column, Range, Ref, Series, SheetSpec, Table

__all__ = ["CAUTION", "SheetContext", "date_or_row", "failed_sheet", "number", "profile_sheet", "wrapped"]
WRAP = 105  # characters of text per row in the left panel (columns B..H)
MAX_ROC_POINTS = 60


@dataclass(frozen=True)
class SheetContext:
    """What the sheets say about the job besides the computed numbers."""

    job: str
    sheet: str  # the forecast sheet's name
    profile_sheet: str
    data_sheet: str
    value_name: str
    event_text: str  # e.g. "Passengers >=1150"
    horizon: int
    refreshed_at: dt.datetime
    notes: tuple[str, ...] = ()


def number(x: Any) -> float | None:
    """A finite number, or None (a blank cell) for NaN, infinity and what is not a number."""
    try:
        f = float(x)
    except (TypeError, ValueError):
        return None
    return None if math.isnan(f) or math.isinf(f) else f


def date_or_row(dates: np.ndarray | None, i: int) -> Any:
    """Row ``i`` as the sheets name it: its date (a datetime), else "row <i + 1>"."""
    if i < 0:
        return None
    if dates is not None and i < len(dates) and not np.isnat(dates[i]):
        return dates[i].astype("datetime64[s]").astype(dt.datetime)
    return f"row {i + 1}"


def wrapped(label: str, text: str, fmt: str = "general", width: int = WRAP) -> list[tuple[Any, ...]]:
    """A labelled text as rows of at most ``width`` characters, so it stays clear of the row table."""
    lines = textwrap.wrap(text, width) or [""]
    return [((label if i == 0 else "", "bold"), (line, fmt)) for i, line in enumerate(lines)]


def failed_sheet(ctx: SheetContext, message: str) -> SheetSpec:
    """The forecast sheet of a job that failed: the error in the status line (red fill)."""
    rows = [((f"tocsin forecast: {ctx.job}", "title"),),
            (("status", "bold"), (f"failed: {message}", "warning")),
            (("refreshed at", "bold"), (ctx.refreshed_at, "datetime")),
            (("what to do", "bold"), ("Correct the job row in sheet 'tocsin' or the data, then save: the "
                                      "sheet is rewritten on the next refresh.", "general")),
            (("caution", "bold"), (CAUTION, "italic"))]
    rows += [(("notes" if i == 0 else "", "bold"), (n, "general")) for i, n in enumerate(ctx.notes)]
    return SheetSpec(ctx.sheet, (Cells(0, 0, tuple(rows)),), col_widths={0: 30, 1: 100})


def profile_sheet(ctx: SheetContext, table: Any, trend: Any, ev: Evaluation | None) -> SheetSpec:
    """The profile sheet: rate table + line chart, reliability table + diagram, ROC points + curve."""
    blocks: list[Any] = [Cells(0, 0, (((f"tocsin profile: {ctx.job}", "title"),),
                                      ((f"share of periods with the event ({ctx.event_text}) by "
                                        f"{table.by} and year", "general"),),
                                      ((CAUTION, "italic"),)))]
    charts: list[ChartSpec] = []
    years = table.years
    by = table.by
    labels = tuple(_period_label(by, p) for p in table.labels)
    cols = [Column(labels)]
    header = [by]
    for j, y in enumerate(years):
        header.append(str(y))
        cols.append(Column(np.asarray(table.share[:, j], dtype=float), "percent"))
    header.append("all years")
    cols.append(Column(np.asarray(table.pooled, dtype=float), "percent"))
    if trend is not None:  # a polynomial fit may leave [0, 1]; a share shown below 0% misleads
        header.append("trend")
        cols.append(Column(np.clip(np.asarray(trend, dtype=float), 0.0, 1.0), "percent"))
    header += ["events", "rows"]
    cols += [Column(table.events.astype(float), "integer"), Column(table.rows.astype(float), "integer")]
    top = 4
    rate = Table(top, 0, tuple(header), tuple(cols))
    blocks.append(rate)
    n_per = len(labels)
    scales: list[Range] = []
    if years:
        scales.append(Range(top + 1, 1, top + n_per, len(years)))
    series = [Series(rate.header_ref(j), rate.ref(j)) for j in range(1, len(years) + 1)]
    series.append(Series(rate.header_ref(len(years) + 1), rate.ref(len(years) + 1), style="line+marker"))
    chart_row = top + n_per + 2
    charts.append(ChartSpec("line", f"Event rate by {by} and year", (chart_row, 0), tuple(series),
                            categories=rate.ref(0), x_axis_title=by, y_axis_title="share of periods",
                            y_fmt="percent", size=(20, 10)))
    r = chart_row + 22
    if ev is not None and ev.reliability is not None:
        r = _reliability(blocks, charts, r, ev)
    if ev is not None and ev.roc is not None:
        r = _roc(blocks, charts, r, ev)
    widths = {0: 14, **{j: 11 for j in range(1, len(header))}}
    for block in blocks:  # every table header readable: a column as wide as its longest header
        if isinstance(block, Table) and block.header is not None:
            for j, h in enumerate(block.header):
                col = block.col + j
                widths[col] = max(widths.get(col, 11), min(len(h) + 2, 20))
    return SheetSpec(ctx.profile_sheet, tuple(blocks), col_widths=widths, charts=tuple(charts),
                     color_scales=tuple(scales))


_DIAGONAL = np.array([0.0, 1.0])


def _reliability(blocks: list[Any], charts: list[ChartSpec], r: int, ev: Evaluation) -> int:
    bins = ev.reliability["bins"]
    used = np.asarray(bins["count"]) > 0
    tab = {k: np.asarray(v, dtype=float)[used] for k, v in bins.items()}
    shown = int(used.sum())
    title = "reliability of the logistic probabilities (validation period)"
    blocks.append(Cells(r, 0, (((title, "bold"),),)))
    t = Table(r + 1, 0, ("bin from", "bin to", "mean forecast", "observed frequency", "count", "diagonal"),
              (Column(tab["lower"], "percent"),
               Column(tab["upper"], "percent"),
               Column(tab["mean_forecast"], "percent"),
               Column(tab["observed_frequency"], "percent"),
               Column(tab["count"], "integer"),
               Column(np.concatenate([_DIAGONAL, np.full(max(shown - 2, 0), np.nan)])[:max(shown, 2)]
                      if shown >= 2 else np.full(shown, np.nan), "percent")))
    blocks.append(t)
    if shown >= 1:
        series: list[Series] = [Series("logistic", t.ref(3), x=t.ref(2), style="line+marker")]
        if shown >= 2:
            diag = Ref(t.first_data_row, 5, t.first_data_row + 1)
            series.append(Series("perfect reliability", diag, x=diag, style="reference"))
        charts.append(ChartSpec("scatter", "Reliability diagram", (r, 7), tuple(series),
                                x_axis_title="forecast probability", y_axis_title="observed frequency",
                                x_range=(0.0, 1.0), y_range=(0.0, 1.0), x_fmt="percent", y_fmt="percent",
                                size=(18, 9)))
    return r + max(shown + 3, 20)


def _roc(blocks: list[Any], charts: list[ChartSpec], r: int, ev: Evaluation) -> int:
    roc = ev.roc
    far = np.asarray(roc.false_alarm_rate, dtype=float)
    hit = np.asarray(roc.hit_rate, dtype=float)
    thr = np.asarray(roc.threshold, dtype=float)
    if len(far) > MAX_ROC_POINTS:  # a readable table: evenly spaced points, both ends kept
        idx = np.linspace(0, len(far) - 1, MAX_ROC_POINTS).round().astype(int)   # increasing
        keep = idx[np.concatenate(([True], np.diff(idx) > 0))]  # (np.unique would import numpy.ma)
        far, hit, thr = far[keep], hit[keep], thr[keep]
    blocks.append(Cells(r, 0, ((("ROC points of the logistic probabilities (validation period)", "bold"),),)))
    diag = np.full(len(far), np.nan)
    diag[:2] = _DIAGONAL[:min(2, len(far))]
    t = Table(r + 1, 0, ("threshold", "false alarm rate", "hit rate", "diagonal"),
              (Column(thr, "dec3"), Column(far, "percent"), Column(hit, "percent"), Column(diag, "percent")))
    blocks.append(t)
    series = [Series("logistic", t.ref(2), x=t.ref(1), style="line")]
    if len(far) >= 2:
        d = Ref(t.first_data_row, 3, t.first_data_row + 1)
        series.append(Series("no skill", d, x=d, style="reference"))
    charts.append(ChartSpec("scatter", f"ROC curve (area {ev.scorecard['logistic']['roc_auc']:.3f})",
                            (r, 7), tuple(series), x_axis_title="false alarm rate",
                            y_axis_title="hit rate", x_range=(0.0, 1.0), y_range=(0.0, 1.0),
                            x_fmt="percent", y_fmt="percent", size=(18, 9)))
    return r + max(len(far) + 3, 20)


_MONTHS = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")
_DAYS = ("Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun")


def _period_label(by: str, p: Any) -> str:
    if by == "month":
        return _MONTHS[int(p) - 1]
    if by == "weekday":
        return _DAYS[int(p)] if isinstance(p, (int, np.integer)) and 0 <= int(p) < 7 else str(p)
    if by == "quarter":
        return f"Q{int(p)}"
    if by == "week":
        return f"W{int(p):02d}"
    return str(p)

