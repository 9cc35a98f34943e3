"""The forecast sheet of a job that computed, as a :class:`SheetSpec`.

Two panels side by side, both starting in row 1::

    A ..  the left panel, read top to bottom                 then, after one blank column, the row table
    ------------------------------------------------------  --------------------------------------------
    title; status, refreshed at, data through, event       date | value | event | period |
    forecasts for the periods ahead: one row per future     one column per method (0/1) |
      period, made at its origin, each method's 0/1         each model's probability |
      forecast; then the probability of the methods that    the best method's residual
      make one                                              (header in row 1, frozen)
    verdict, warnings, caution, notes
    validation scorecard: measure x methods
    each model against the best benchmark (McNemar, Diebold-Mariano)
    logistic coefficients; value model coefficients and its residual scale

The left panel is as wide as its widest table (the scorecard, or the forecasts for the periods ahead:
period, made at, one column per method); the row table starts after it (:func:`table_col`). Only row 1
is frozen, so the row table keeps its header in view however far it is scrolled, while the header
block, the scorecard and the table stay on one screen at the top.

A 0/1 method is never shown as a probability: its forecast is 0 or 1 only, and the probability table
lists the methods of :data:`sheetfns.scorecard.PROBABILITY_METHODS` (the majority methods by their
share).
"""
from __future__ import annotations

import datetime as dt
import math
from typing import Any

import numpy as np

from sheetfns.scorecard import (
    METHOD_LABELS,
    MODEL_METHODS,
    PROBABILITY_LABELS,
    PROBABILITY_METHODS,
    SCORE_ROWS,
    Evaluation,
    best_mask,
    residual,
)
from watcher.refresh.layout import CAUTION, SheetContext, date_or_row, number, wrapped
from watcher.xlsx.spec import Cells, Column, SheetSpec, Table

__all__ = ["MAX_NOTES", "forecast_sheet", "panel_width", "table_col"]
MAX_NOTES = 16
_LABEL_WIDTH = 30   # column A: labels, periods, terms
_METHOD_WIDTH = 15  # the method columns of the left panel


def panel_width(ev: Evaluation) -> int:
    """Columns of the left panel: period, made at and one column per method (the scorecard, measure
    and one per method, is one narrower); at least the 8 the coefficient tables and texts need."""
    return max(8, 2 + len(ev.methods))


def table_col(ev: Evaluation) -> int:
    """The 0-based column where the row table starts: one blank column after the left panel."""
    return panel_width(ev) + 1


def _dates_fmt(values: list[Any]) -> str:
    return "datetime" if any(isinstance(v, dt.datetime) and v.time() != dt.time() for v in values) else "date"


def forecast_sheet(ctx: SheetContext, ev: Evaluation, *, dates: np.ndarray | None, values: np.ndarray,
                   events: np.ndarray) -> SheetSpec:
    """The forecast sheet of one job that computed."""
    blocks: list[Any] = []
    last_date = date_or_row(dates, ev.last_observed)
    head: list[tuple[tuple[Any, str], ...]] = [
        ((f"tocsin forecast: {ctx.job}", "title"),),
        (("status", "bold"), ("ok", "good")),
        (("refreshed at", "bold"), (ctx.refreshed_at, "datetime")),
        (("data through", "bold"), (last_date, "date" if isinstance(last_date, dt.date) else "general")),
        (("event", "bold"), (f"{ctx.event_text} (sheet {ctx.data_sheet}), horizon {ctx.horizon}",
                             "general")),
        (("periods", "bold"), (f"{ev.train_size} training, {ev.last_observed + 1 - ev.train_size} "
                               f"validation, {ev.n - ev.last_observed - 1} future", "general")),
    ]
    blocks.append(Cells(0, 0, tuple(head)))
    r = _periods_ahead(blocks, len(head) + 1, ev, dates)
    text_rows = wrapped("verdict", ev.verdict)
    for i, warning in enumerate(ev.warnings):
        text_rows += wrapped("warnings" if i == 0 else "", warning, "warning")
    text_rows += wrapped("caution", CAUTION, "italic")
    notes = list(ctx.notes) + list(ev.notes)
    for i, note in enumerate(notes[:MAX_NOTES]):
        text_rows += wrapped("notes" if i == 0 else "", note)
    if len(notes) > MAX_NOTES:
        text_rows.append((("", "general"), (f"... and {len(notes) - MAX_NOTES} more notes", "general")))
    blocks.append(Cells(r, 0, tuple(text_rows)))
    r += len(text_rows) + 1
    r = _scorecard(blocks, r, ev)
    r = _significance(blocks, r, ev)
    r = _logistic_coefficients(blocks, r, ev)
    _value_coefficients(blocks, r, ev)
    header, table = _row_table(ctx, ev, dates=dates, values=values, events=events)
    col = table_col(ev)
    blocks.append(table)
    widths = {0: _LABEL_WIDTH, **{c: _METHOD_WIDTH for c in range(1, panel_width(ev))},
              col - 1: 3, col: 12}
    for j in range(1, len(header)):
        widths[col + j] = max(10, min(30, len(header[j]) + 2))
    return SheetSpec(ctx.sheet, tuple(blocks), col_widths=widths, freeze=(1, 0))


def _periods_ahead(blocks: list[Any], r: int, ev: Evaluation, dates: np.ndarray | None) -> int:
    """The headline: one row per future period with the origin its forecasts were made at, every
    method's 0/1 forecast, then the probability of each method that makes one."""
    future = ev.future()
    if not future:
        hint = " (add the next date with a blank value)" if dates is not None else ""
        blocks.append(Cells(r, 0, ((("forecasts for the periods ahead: none, the data end with an observed "
                                     f"period{hint}", "bold"),),)))
        return r + 2
    periods = [date_or_row(dates, f.row) for f in future]
    origins = [date_or_row(dates, f.origin) for f in future]
    when = [Column(tuple(periods), _dates_fmt(periods)), Column(tuple(origins), _dates_fmt(origins))]
    blocks.append(Cells(r, 0, ((("forecasts for the periods ahead (1 = event; each made at the period in "
                                 "'made at')", "bold"),),)))
    cols = list(when)
    for m in ev.methods:
        f = np.array([f.forecasts[m.key][0] if m.key in f.forecasts else np.nan for f in future], dtype=float)
        cols.append(Column(f, "integer", bold=f == 1.0))
    t = Table(r + 1, 0, ("period", "made at", *(m.label for m in ev.methods)), tuple(cols))
    blocks.append(t)
    r += 1 + t.height + 1
    chance = [m for m in ev.methods if m.key in PROBABILITY_METHODS]
    blocks.append(Cells(r, 0, ((("probability of the event (only the methods that make one)", "bold"),),)))
    cols = list(when)
    for m in chance:
        cols.append(Column(np.array([_probability(f.forecasts.get(m.key)) for f in future], dtype=float),
                           "percent"))
    t = Table(r + 1, 0, ("period", "made at", *(PROBABILITY_LABELS[m.key] for m in chance)), tuple(cols))
    blocks.append(t)
    return r + 1 + t.height + 1


def _probability(pair: tuple[int, float | None] | None) -> float:
    return math.nan if pair is None or pair[1] is None else pair[1]


def _row_table(ctx: SheetContext, ev: Evaluation, *, dates: np.ndarray | None, values: np.ndarray,
               events: np.ndarray) -> tuple[list[str], Table]:
    """date | value | event | period | each method's 0/1 | each model's probability | the residual."""
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
    for m in ev.methods:
        if m.key in MODEL_METHODS:
            header.append(f"{PROBABILITY_LABELS[m.key]} probability")
            cols.append(Column(m.prob, "percent"))
    key = ev.residual_method
    m = ev.method(key)
    shown = PROBABILITY_LABELS[key] if key in PROBABILITY_METHODS else m.label
    header.append(f"residual ({shown})")
    cols.append(Column(residual(events, m), "dec3" if key in PROBABILITY_METHODS else "integer"))
    return header, Table(0, table_col(ev), tuple(header), tuple(cols))


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
    """McNemar (0/1 forecasts) and Diebold-Mariano (Brier loss) of each model against the best
    benchmark, one row per model."""
    c = ev.comparisons
    models = [m for m in ev.methods if f"{m.key}_vs_best_dm" in c]
    if not models:
        return r
    other = METHOD_LABELS.get(str(c.get("best_benchmark")), str(c.get("best_benchmark")))
    blocks.append(Cells(r, 0, (((f"each model against the best benchmark, {other} (validation period)",
                                 "bold"),),)))
    cols = [Column(tuple(m.label for m in models))]
    for test in ("mcnemar", "dm"):
        for suffix in ("", "_p"):
            cols.append(Column(np.array([number(c.get(f"{m.key}_vs_best_{test}{suffix}")) for m in models],
                                        dtype=float), "dec3"))
    header = ("method", "McNemar (0/1)", "p-value", "Diebold-Mariano", "p-value")
    t = Table(r + 1, 0, header, tuple(cols))
    blocks.append(t)
    r += 1 + t.height
    if np.isnan(cols[1].values).any() and not np.isnan(cols[3].values).all():
        blocks.append(Cells(r, 0, (((MCNEMAR_BLANK, "italic"),),)))
        r += 1
    return r + 1


MCNEMAR_BLANK = ("McNemar is blank where the two 0/1 forecasts agree on every validation period: with no "
                 "period where only one of them is right, the test is undefined.")


def _logistic_coefficients(blocks: list[Any], r: int, ev: Evaluation) -> int:
    fit = ev.logit_fit
    if fit is None or len(fit.terms) == 0:
        return r
    blocks.append(Cells(r, 0, (((f"logistic coefficients (fit on the {ev.train_size} training rows)",
                                 "bold"),),)))
    return _coefficient_table(blocks, r + 1, fit.terms, (fit.params, fit.bse, fit.z, fit.pvalues), "z")


def _value_coefficients(blocks: list[Any], r: int, ev: Evaluation) -> int:
    vm = ev.value_model
    fit = None if vm is None else vm.fit
    if fit is None or len(fit.terms) == 0:
        return r
    how = f"least squares on the first {fit.nobs} usable rows" if fit.nobs else "least squares"
    blocks.append(Cells(r, 0, (((f"value model coefficients ({how}; the {vm.quantity} is forecast, "
                                 f"the event is {vm.event})", "bold"),),)))
    r = _coefficient_table(blocks, r + 1, fit.terms, (fit.params, fit.bse, fit.tvalues, fit.pvalues), "t") - 1
    rows = ((("residual scale", "bold"), (number(vm.residual_scale), "dec3"),
             (f"(s, on {number(fit.dof) or 0:g} degrees of freedom: how far the {vm.quantity} "
              f"strays from its forecast)", "general")),)
    blocks.append(Cells(r, 0, rows))
    return r + 2


def _coefficient_table(blocks: list[Any], r: int, terms: Any, numbers: tuple[Any, ...], stat: str) -> int:
    """Term, estimate, std. error, the test statistic ``stat`` and its p-value, a row per term."""
    cols = [Column(tuple(str(t) for t in terms))] + [Column(np.asarray(x, dtype=float), "dec3")
                                                     for x in numbers]
    blocks.append(Table(r, 0, ("term", "estimate", "std. error", stat, "p"), tuple(cols)))
    return r + len(terms) + 2
