"""What a forecast sheet and a profile sheet contain and look like, as :class:`SheetSpec` values.

Forecast sheet (one per job)::

    A..H  the left panel, read top to bottom        J..   the row-by-row table
    ----------------------------------------------  ------------------------------------
    title                                           date | value | event | period |
    status / refreshed at / data through / event    one column per method (0/1) |
    next-period forecast: method | forecast | prob  logistic probability
    verdict, caution, notes                         (header in row 1, frozen)
    validation scorecard: measure x methods
    significance of the logistic model
    logistic coefficients

Row 1 holds both the title and the header of the row table, and only row 1 is frozen, so the row
table keeps its header in view however far it is scrolled, while the header block, the scorecard and
the table stay on one screen at the top. (A vertical stack with a frozen table header would freeze
thirty rows.)

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

from sheetfns.scorecard import METHOD_LABELS, SCORE_ROWS, Evaluation, best_mask
from watcher.refresh.texts import CAUTION
from watcher.xlsx.spec import Cells, ChartSpec, Column, Range, Ref, Series, SheetSpec, Table

__all__ = ["CAUTION", "TABLE_COL", "SheetContext", "forecast_sheet", "failed_sheet", "profile_sheet"]
TABLE_COL = 9  # column J: the row-by-row table
MAX_NOTES = 12
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


def _num(x: Any) -> float | None:
    try:
        f = float(x)
    except (TypeError, ValueError):
        return None
    return None if math.isnan(f) or math.isinf(f) else f


def _date_or_row(dates: np.ndarray | None, i: int) -> Any:
    if i < 0:
        return None
    if dates is not None and i < len(dates) and not np.isnat(dates[i]):
        return dates[i].astype("datetime64[s]").astype(dt.datetime)
    return f"row {i + 1}"


def _fmt_date_cell(v: Any) -> tuple[Any, str]:
    return (v, "date") if isinstance(v, (dt.date, dt.datetime)) else (v, "general")


def _wrapped(label: str, text: str, fmt: str = "general", width: int = WRAP) -> list[tuple[Any, ...]]:
    """A labelled text as rows of at most ``width`` characters, so it stays clear of the row table."""
    lines = textwrap.wrap(text, width) or [""]
    return [((label if i == 0 else "", "bold"), (line, fmt)) for i, line in enumerate(lines)]


def forecast_sheet(ctx: SheetContext, ev: Evaluation, *, dates: np.ndarray | None, values: np.ndarray,
                   events: np.ndarray) -> SheetSpec:
    """The forecast sheet of one job that computed."""
    blocks: list[Any] = []
    last_date = _date_or_row(dates, ev.last_observed)
    next_date = _date_or_row(dates, ev.last_observed + 1) if ev.last_observed + 1 < ev.n else None
    head: list[tuple[tuple[Any, str], ...]] = [
        ((f"tocsin forecast: {ctx.job}", "title"),),
        (("status", "bold"), ("ok", "good")),
        (("refreshed at", "bold"), (ctx.refreshed_at, "datetime")),
        (("data through", "bold"), _fmt_date_cell(last_date)),
        (("event", "bold"), (f"{ctx.event_text} (sheet {ctx.data_sheet}), horizon {ctx.horizon}",
                             "general")),
        (("periods", "bold"), (f"{ev.train_size} training, {ev.last_observed + 1 - ev.train_size} "
                               f"validation, {ev.n - ev.last_observed - 1} future", "general")),
    ]
    blocks.append(Cells(0, 0, tuple(head)))
    r = len(head) + 1
    # Headline: the next-period forecast per method.
    if next_date is None:
        when = ": none, the data end with an observed period" + (
            " (add the next date with a blank value)" if dates is not None else "")
    else:
        when = f" for {next_date:%Y-%m-%d}" if isinstance(next_date, dt.date) else f" for {next_date}"
    blocks.append(Cells(r, 0, (((f"next-period forecast{when}", "bold"),),)))
    r += 1
    headline = ev.headline()
    labels = [m.label for m in ev.methods]
    fc = [headline[m.key][0] for m in ev.methods]
    pr = [headline[m.key][1] for m in ev.methods]
    words = ["" if math.isnan(f) else ("event" if f == 1 else "no event") for f in fc]
    blocks.append(Table(r, 0, ("method", "forecast", "probability"),
                        (Column(tuple(labels)), Column(tuple(words)),
                         Column(np.asarray(pr, dtype=float), "percent"))))
    r += len(labels) + 2
    text_rows = _wrapped("verdict", ev.verdict) + _wrapped("caution", CAUTION, "italic")
    notes = list(ctx.notes) + list(ev.notes)
    for i, note in enumerate(notes[:MAX_NOTES]):
        text_rows += _wrapped("notes" if i == 0 else "", note)
    if len(notes) > MAX_NOTES:
        text_rows.append((("", "general"), (f"... and {len(notes) - MAX_NOTES} more notes", "general")))
    blocks.append(Cells(r, 0, tuple(text_rows)))
    r += len(text_rows) + 1
    r = _scorecard(blocks, r, ev)
    r = _significance(blocks, r, ev)
    _coefficients(blocks, r, ev)
    # The row-by-row table.
    n = ev.n
    header = ["date" if dates is not None else "row", ctx.value_name, "event", "period"]
    cols = [Column(dates if dates is not None else np.arange(1, n + 1, dtype=float),
                   "date" if dates is not None else "integer"),
            Column(values if getattr(values, "dtype", None) is np.dtype(object)
                   else np.asarray(values, dtype=float)),
            Column(np.asarray(events, dtype=float), "integer"),
            Column(tuple(ev.period.tolist()))]
    for m in ev.methods:
        header.append(m.label)
        cols.append(Column(m.forecast, "integer"))
    if any(m.key == "logistic" for m in ev.methods):
        header.append("logistic probability")
        cols.append(Column(ev.method("logistic").prob, "percent"))
    blocks.append(Table(0, TABLE_COL, tuple(header), tuple(cols)))
    widths = {0: 30, **{c: 15 for c in range(1, 8)}, 8: 3, TABLE_COL: 12}
    for j in range(1, len(header)):
        widths[TABLE_COL + j] = max(10, min(22, len(header[j]) + 2))
    return SheetSpec(ctx.sheet, tuple(blocks), col_widths=widths, freeze=(1, 0))


def _scorecard(blocks: list[Any], r: int, ev: Evaluation) -> int:
    """Methods as columns; rows grouped by cell format (counts, rates, scores), each group a table
    whose best value per row is bold."""
    keys = [m.key for m in ev.methods]
    blocks.append(Cells(r, 0, (((f"validation scorecard ({ev.last_observed + 1 - ev.train_size} periods; "
                                 "best value of each row in bold)", "bold"),),)))
    r += 1
    first = True
    for fmt in ("integer", "percent", "dec3"):
        rows = [row for row in SCORE_ROWS if row[2] == fmt]
        if not rows:
            continue
        table = np.array([[ev.scorecard[k].get(key, math.nan) for k in keys] for key, *_ in rows],
                         dtype=float)
        best = np.array([best_mask(table[i], better) for i, (*_, better) in enumerate(rows)])
        cols = [Column(tuple(label for _, label, _, _ in rows))]
        cols += [Column(table[:, j], fmt, bold=best[:, j]) for j in range(len(keys))]
        header = ("measure", *(m.label for m in ev.methods)) if first else None
        t = Table(r, 0, header, tuple(cols))
        blocks.append(t)
        r += t.height
        first = False
    return r + 1


def _significance(blocks: list[Any], r: int, ev: Evaluation) -> int:
    c = ev.comparisons
    if "logistic_vs_best_dm" not in c:
        return r
    other = METHOD_LABELS.get(str(c.get("best_benchmark")), str(c.get("best_benchmark")))
    rows = (((f"logistic vs {other} (validation period)", "bold"),),
            (("test", "header"), ("statistic", "header"), ("p-value", "header")),
            (("McNemar (0/1 forecasts)", "general"), (_num(c.get("logistic_vs_best_mcnemar")), "dec3"),
             (_num(c.get("logistic_vs_best_mcnemar_p")), "dec3")),
            (("Diebold-Mariano (Brier loss)", "general"), (_num(c.get("logistic_vs_best_dm")), "dec3"),
             (_num(c.get("logistic_vs_best_dm_p")), "dec3")))
    blocks.append(Cells(r, 0, rows))
    return r + len(rows) + 1


def _coefficients(blocks: list[Any], r: int, ev: Evaluation) -> int:
    coef = ev.coefficients
    if coef is None or len(coef) == 0:
        return r
    blocks.append(Cells(r, 0, (((f"logistic coefficients (fit on the {ev.train_size} training rows)",
                                 "bold"),),)))
    r += 1
    terms = tuple(str(t) for t in coef["term"])
    cols = [Column(terms)] + [Column(np.asarray(coef[k], dtype=float), "dec3")
                              for k in ("estimate", "std_error", "z", "p")]
    blocks.append(Table(r, 0, ("term", "estimate", "std. error", "z", "p"), tuple(cols)))
    return r + len(terms) + 2


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
                                        f"{table.index.name} and year", "general"),),
                                      ((CAUTION, "italic"),)))]
    charts: list[ChartSpec] = []
    years = [c for c in table.columns if isinstance(c, (int, np.integer))]
    by = str(table.index.name)
    labels = tuple(_period_label(by, p) for p in table.index)
    cols = [Column(labels)]
    header = [by]
    for y in years:
        header.append(str(y))
        cols.append(Column(table[y].to_numpy(dtype=float), "percent"))
    header.append("all years")
    cols.append(Column(table["all years"].to_numpy(dtype=float), "percent"))
    if trend is not None:  # a polynomial fit may leave [0, 1]; a share shown below 0% misleads
        header.append("trend")
        cols.append(Column(np.clip(np.asarray(trend, dtype=float), 0.0, 1.0), "percent"))
    header += ["events", "rows"]
    cols += [Column(table["events"].to_numpy(dtype=float), "integer"),
             Column(table["rows"].to_numpy(dtype=float), "integer")]
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
    tab = ev.reliability["table"]
    tab = tab[tab["count"] > 0]
    title = "reliability of the logistic probabilities (validation period)"
    blocks.append(Cells(r, 0, (((title, "bold"),),)))
    t = Table(r + 1, 0, ("bin from", "bin to", "mean forecast", "observed frequency", "count", "diagonal"),
              (Column(tab["lower"].to_numpy(dtype=float), "percent"),
               Column(tab["upper"].to_numpy(dtype=float), "percent"),
               Column(tab["mean_forecast"].to_numpy(dtype=float), "percent"),
               Column(tab["observed_frequency"].to_numpy(dtype=float), "percent"),
               Column(tab["count"].to_numpy(dtype=float), "integer"),
               Column(np.concatenate([_DIAGONAL, np.full(max(len(tab) - 2, 0), np.nan)])[:max(len(tab), 2)]
                      if len(tab) >= 2 else np.full(len(tab), np.nan), "percent")))
    blocks.append(t)
    if len(tab) >= 1:
        series: list[Series] = [Series("logistic", t.ref(3), x=t.ref(2), style="line+marker")]
        if len(tab) >= 2:
            diag = Ref(t.first_data_row, 5, t.first_data_row + 1)
            series.append(Series("perfect reliability", diag, x=diag, style="reference"))
        charts.append(ChartSpec("scatter", "Reliability diagram", (r, 7), tuple(series),
                                x_axis_title="forecast probability", y_axis_title="observed frequency",
                                x_range=(0.0, 1.0), y_range=(0.0, 1.0), x_fmt="percent", y_fmt="percent",
                                size=(18, 9)))
    return r + max(len(tab) + 3, 20)


def _roc(blocks: list[Any], charts: list[ChartSpec], r: int, ev: Evaluation) -> int:
    roc = ev.roc
    far = np.asarray(roc.false_alarm_rate, dtype=float)
    hit = np.asarray(roc.hit_rate, dtype=float)
    thr = np.asarray(roc.threshold, dtype=float)
    if len(far) > MAX_ROC_POINTS:  # a readable table: evenly spaced points, both ends kept
        keep = np.unique(np.linspace(0, len(far) - 1, MAX_ROC_POINTS).round().astype(int))
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

