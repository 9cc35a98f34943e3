"""tocsin's spreadsheet functions: the core as formulas next to the data (xlwings user-defined functions).

Point the xlwings add-in's "UDF Modules" setting at ``sheetfns.udf`` and import the functions; then
``=EVENT_FLAG(B2:B2930, ">=1150")`` spills a 0/1 column next to the passengers. Each function is a
thin wrapper, in four steps: coerce the ranges (``sheetfns.udf.coerce``), call the core module, map NaN to
a blank cell, return a column of the input's height or a small table with a header row. Bad input
never raises into the spreadsheet: the cell shows ``#tocsin: `` and what to fix.

This is the only module of tocsin that imports xlwings. Off Windows xlwings' ``func`` / ``arg`` /
``ret`` decorators register nothing, so the tests call these functions as plain functions, exactly as
the add-in does. The coercion is our own code, not xlwings' converters (which do nothing off Windows);
the one xlwings option used is ``ndim=2`` on range arguments, so that on the desktop a range always
arrives as a list of rows and a row range can be told from a column. Native dynamic arrays (Microsoft
365 / Excel 2021 and later) spill a returned list of rows without any return decorator.

Type hints are ``Any`` aliases on purpose: xlwings turns an argument's type hint into a converter, and
only the plain value converter does what our coercion expects.
"""
from __future__ import annotations

from typing import Any

import numpy as np

try:
    import xlwings as xw
except ImportError as _exc:  # pragma: no cover - exercised in a subprocess test
    raise ImportError(
        "sheetfns.udf (the spreadsheet functions) needs xlwings, which is not installed; install it "
        "with: pip install 'tocsin[excel]'. The rest of tocsin (sheetfns.events, ..., the watcher) "
        "works without it.") from _exc

from sheetfns import benchmarks, events, logistic, partition, profile, scores
from sheetfns.checks import same_length
from sheetfns.errors import InputError
from sheetfns.udf import coerce as c

Cells = Any   # a range: a list of rows, a flat list (a column) or a single value
Value = Any   # a single cell or a literal typed into the formula; None when blank or omitted
Spill = Any   # a list of rows that spills, a single value, or a '#tocsin: ...' error text

CATEGORY = "tocsin"

__all__ = [
    "EVENT_FLAG", "EVENT_NAIVE", "EVENT_MAJORITY", "EVENT_SHARE", "EVENT_LOGIT", "EVENT_LOGIT_COEFS",
    "EVENT_SCORES", "EVENT_CONFUSION", "EVENT_BRIER", "EVENT_RATE_TABLE", "EVENT_CUTOFF", "EVENT_COMPARE",
]

# One-line descriptions for the function wizard (Excel shows at most 255 characters of each).
_ACTUAL = "What happened: a column of 1 (event), 0 (no event) or blank, e.g. the output of EVENT_FLAG."
_FORECAST = "The 0/1 forecast for the same rows, e.g. the output of EVENT_NAIVE or EVENT_MAJORITY."
_EVENTS = "The event column: 1 (event), 0 (no event) or blank; blanks at the end are future periods."
_HORIZON = "Optional: periods ahead, the forecast for row t is made at row t - horizon (default 1)."
_TRAIN_ROWS = ("Optional: the first train_rows rows are the training period and later forecasts are made "
               "from its end; blank = roll forward every period (default).")
_WINDOW = "Optional: how many of the latest observed periods count (default blank: all of them)."
_PROBABILITY = "Optional: the forecast probability for the same rows (0 to 1), e.g. from EVENT_LOGIT."


# ------------------------------------------------------------------------------------------- events
@xw.func(category=CATEGORY)
@xw.arg("values", ndim=2, doc="The data column: numbers, TRUE/FALSE or text, one cell per period.")
@xw.arg("criterion", doc='The event rule as text: ">=1150", "<0", "=alarm", "rise", "fall>2", "rise%>=5".')
@xw.arg("min_run", doc="Optional: the rule must hold this many periods in a row (default 1).")
@c.guarded
def EVENT_FLAG(values: Cells, criterion: Value, min_run: Value = 1) -> Spill:
    """Turn a column into events: 1 where the rule holds, 0 where it does not, blank where unknown.

    Spills a column of the same height. Example: =EVENT_FLAG(B2:B2930, ">=1150")."""
    x = c.number_column(values, "values", keep_text=True)
    rule = c.criterion_text(criterion)
    k = c.option_int(min_run, "min_run", 1, minimum=1)
    return c.to_column(events.flag(x, rule, k))


# --------------------------------------------------------------------------------------- benchmarks
@xw.func(category=CATEGORY)
@xw.arg("events", ndim=2, doc=_EVENTS)
@xw.arg("horizon", doc=_HORIZON)
@xw.arg("season", doc="Optional: the seasonal period, e.g. 7 for daily data with a weekly pattern "
                      "(default 1).")
@xw.arg("train_rows", doc=_TRAIN_ROWS)
@c.guarded
def EVENT_NAIVE(events: Cells, horizon: Value = 1, season: Value = 1, train_rows: Value = None) -> Spill:
    """Naive forecast: what happened last time (season 1) or one season ago (season m), blanks skipped.

    Spills a 0/1 column of the same height. Example: =EVENT_NAIVE(D2:D2930, 1, 7)."""
    y = c.event_column(events, "events")
    return c.to_column(benchmarks.naive(
        y, horizon=c.option_int(horizon, "horizon", 1, minimum=1),
        season=c.option_int(season, "season", 1, minimum=1),
        train_size=c.option_int(train_rows, "train_rows", None, minimum=1)))


def _majority_args(window: Value, train_rows: Value, horizon: Value) -> dict[str, Any]:
    return {"window": c.option_int(window, "window", None, minimum=1),
            "train_size": c.option_int(train_rows, "train_rows", None, minimum=1),
            "horizon": c.option_int(horizon, "horizon", 1, minimum=1)}


@xw.func(category=CATEGORY)
@xw.arg("events", ndim=2, doc=_EVENTS)
@xw.arg("window", doc=_WINDOW)
@xw.arg("train_rows", doc=_TRAIN_ROWS)
@xw.arg("horizon", doc=_HORIZON)
@c.guarded
def EVENT_MAJORITY(events: Cells, window: Value = None, train_rows: Value = None,
                   horizon: Value = 1) -> Spill:
    """Majority vote: 1 when more than half of the periods so far (or in the window) had the event.

    An exact tie repeats the latest value. Spills a 0/1 column. Example: =EVENT_MAJORITY(D2:D2930, 28)."""
    y = c.event_column(events, "events")
    return c.to_column(benchmarks.majority_vote(y, **_majority_args(window, train_rows, horizon)))


@xw.func(category=CATEGORY)
@xw.arg("events", ndim=2, doc=_EVENTS)
@xw.arg("window", doc=_WINDOW)
@xw.arg("train_rows", doc=_TRAIN_ROWS)
@xw.arg("horizon", doc=_HORIZON)
@c.guarded
def EVENT_SHARE(events: Cells, window: Value = None, train_rows: Value = None,
                horizon: Value = 1) -> Spill:
    """Share of periods so far (or in the window) that had the event: the majority method's probability.

    Spills a column of probabilities. Example: =EVENT_SHARE(D2:D2930, , 2343)."""
    y = c.event_column(events, "events")
    return c.to_column(benchmarks.majority_share(y, **_majority_args(window, train_rows, horizon)))


# ----------------------------------------------------------------------------------------- logistic
def _logit(events: Cells, predictors: Cells, train_rows: Value, horizon: Value, lags: Value,
           cycle: Value, harmonics: Value, dates: Cells) -> logistic.LogitForecast:
    y = c.event_column(events, "events")
    named = None
    if not c.omitted(predictors):
        x, labels = c.number_table(predictors, "predictors", rows=y.size)
        named = {label: x[:, j] for j, label in enumerate(labels)}
    d = None
    if not c.omitted(dates):
        d = c.date_column(dates, "dates")
        same_length(events=y, dates=d)
    return logistic.forecast(
        y, predictors=named, dates=d,
        weekday=d is not None and partition.infer_frequency(d) == "daily",
        train_size=c.option_int(train_rows, "train_rows", None, minimum=1),
        horizon=c.option_int(horizon, "horizon", 1, minimum=1),
        lags=c.option_int(lags, "lags", 1, minimum=0),
        cycle=c.option_float(cycle, "cycle", None, positive=True),
        harmonics=c.option_int(harmonics, "harmonics", 2, minimum=0))


def _logit_args(f: Any) -> Any:
    """The argument descriptions shared by EVENT_LOGIT and EVENT_LOGIT_COEFS."""
    for name, doc in reversed([
        ("events", _EVENTS),
        ("predictors", "Optional: columns of other data for the same rows, read `horizon` periods "
                       "earlier; a header row on top names them."),
        ("train_rows", _TRAIN_ROWS),
        ("horizon", _HORIZON),
        ("lags", "Optional: how many past events enter the model (default 1; 0 for none)."),
        ("cycle", "Optional: the length of a yearly (or other) cycle in rows, e.g. 365.25 for daily "
                  "data; blank = no cycle."),
        ("harmonics", "Optional: sine/cosine pairs describing the cycle (default 2)."),
        ("dates", "Optional: the date column; the cycle then follows the calendar, and daily data get "
                  "weekday terms, as on the watcher's forecast sheet."),
    ]):
        f = xw.arg(name, ndim=2, doc=doc)(f) if name in ("events", "predictors", "dates") else \
            xw.arg(name, doc=doc)(f)
    return f


@xw.func(category=CATEGORY, call_in_wizard=False)
@_logit_args
@c.guarded
def EVENT_LOGIT(events: Cells, predictors: Cells = None, train_rows: Value = None, horizon: Value = 1,
                lags: Value = 1, cycle: Value = None, harmonics: Value = 2, dates: Cells = None) -> Spill:
    """Probability of the event from a logistic regression on past events, predictors and a cycle.

    Spills a column of probabilities, blank where it cannot forecast.
    Example: =EVENT_LOGIT(D2:D2930, , 2343)."""
    fc = _logit(events, predictors, train_rows, horizon, lags, cycle, harmonics, dates)
    if np.isnan(fc.prob).all():          # a column of blanks would not say why: show the notes
        raise InputError("no row could be forecast: " + "; ".join(fc.notes))
    return c.to_column(fc.prob)


@xw.func(category=CATEGORY, call_in_wizard=False)
@_logit_args
@c.guarded
def EVENT_LOGIT_COEFS(events: Cells, predictors: Cells = None, train_rows: Value = None,
                      horizon: Value = 1, lags: Value = 1, cycle: Value = None, harmonics: Value = 2,
                      dates: Cells = None) -> Spill:
    """The coefficients behind EVENT_LOGIT (same arguments): term, estimate, std_error, z, p, then notes.

    Spills a table with a header row. Example: =EVENT_LOGIT_COEFS(D2:D2930, , 2343)."""
    fc = _logit(events, predictors, train_rows, horizon, lags, cycle, harmonics, dates)
    t = fc.coefficients
    cols = ["term", "estimate", "std_error", "z", "p"]
    rows = [list(r) for r in t[cols].itertuples(index=False)]
    rows += [[f"note: {note}", None, None, None, None] for note in fc.notes]
    return c.to_table(cols, rows)


# ------------------------------------------------------------------------------------------- profile
@xw.func(category=CATEGORY)
@xw.arg("dates", ndim=2, doc="The date column, one date per row.")
@xw.arg("events", ndim=2, doc="The event column for the same rows: 1, 0 or blank (blanks are left out).")
@xw.arg("by", doc='Optional: rows of the table, "month" (default), "week", "weekday" or "quarter".')
@c.guarded
def EVENT_RATE_TABLE(dates: Cells, events: Cells, by: Value = "month") -> Spill:
    """Share of periods with the event, by month (or week, weekday, quarter) down and year across.

    Then the pooled share, events and rows. Example: =EVENT_RATE_TABLE(A2:A2930, D2:D2930, "month")."""
    d = c.date_column(dates, "dates")
    y = c.event_column(events, "events")
    same_length(dates=d, events=y)
    t = profile.rate_table(d, y, by=c.option_text(by, "by", "month"))
    return c.to_table([t.index.name, *t.columns], [[label, *row] for label, row in
                                                     zip(t.index, t.itertuples(index=False), strict=True)])


# ------------------------------------------------------------------------------------------- scores
def _pair(actual: Cells, forecast: Cells, forecast_name: str = "forecast"
          ) -> tuple[Any, Any]:
    a = c.event_column(actual, "actual")
    f = c.event_column(forecast, forecast_name)
    same_length(actual=a, **{forecast_name: f})
    return a, f


@xw.func(category=CATEGORY)
@xw.arg("actual", ndim=2, doc=_ACTUAL)
@xw.arg("forecast", ndim=2, doc=_FORECAST)
@xw.arg("probability", ndim=2, doc=_PROBABILITY)
@xw.arg("reference", ndim=2, doc="Optional: the reference of brier_skill, a probability or a column of "
                                 "them, e.g. EVENT_SHARE over the training rows (default: the share of "
                                 "events in the scored rows).")
@c.guarded
def EVENT_SCORES(actual: Cells, forecast: Cells, probability: Cells = None, reference: Cells = None
                 ) -> Spill:
    """Score a 0/1 forecast (and optionally a probability) against what happened; blank rows skipped.

    Spills a two-column table: measure, value. Example: =EVENT_SCORES(C2000:C2930, D2000:D2930)."""
    a, f = _pair(actual, forecast)
    table = scores.categorical(a, f)
    if not c.omitted(probability):
        p = c.prob_column(probability, "probability")
        same_length(actual=a, probability=p)
        ref = None
        if not c.omitted(reference):
            cells = c.column_cells(reference, "reference")
            if len(cells) == 1:
                ref = c.option_float(cells[0], "reference", None)
            else:
                ref = c.prob_column(reference, "reference")
                same_length(actual=a, reference=ref)
        table.update(scores.probabilistic(a, p, reference=ref))
    elif not c.omitted(reference):
        raise InputError("`reference` needs `probability`: brier_skill compares a probability forecast "
                         "with the reference; give the probability column too")
    return c.to_table(["measure", "value"], table.items())


@xw.func(category=CATEGORY)
@xw.arg("actual", ndim=2, doc=_ACTUAL)
@xw.arg("forecast", ndim=2, doc=_FORECAST)
@c.guarded
def EVENT_CONFUSION(actual: Cells, forecast: Cells) -> Spill:
    """Count hits, false alarms, misses and correct negatives of a 0/1 forecast; blank rows skipped.

    Spills a 3 x 3 table: forecast down the side, actual across. Example: =EVENT_CONFUSION(C2:C99, D2:D99)."""
    t = scores.confusion(*_pair(actual, forecast))
    return c.to_table(["forecast \\ actual", "event", "no event"],
                      [["event", t.hits, t.false_alarms], ["no event", t.misses, t.correct_negatives]])


@xw.func(category=CATEGORY)
@xw.arg("actual", ndim=2, doc=_ACTUAL)
@xw.arg("probability", ndim=2, doc="The forecast probability for the same rows (0 to 1).")
@c.guarded
def EVENT_BRIER(actual: Cells, probability: Cells) -> Spill:
    """Brier score of a probability forecast and its parts: reliability, resolution, uncertainty.

    Spills a two-column table: measure, value (10 probability bins). Example: =EVENT_BRIER(C2:C99, E2:E99)."""
    a = c.event_column(actual, "actual")
    p = c.prob_column(probability, "probability")
    same_length(actual=a, probability=p)
    d = scores.brier_decomposition(a, p)
    return c.to_table(["measure", "value"],
                      [[k, d[k]] for k in ("brier", "reliability", "resolution", "uncertainty", "n")])


@xw.func(category=CATEGORY)
@xw.arg("cost_false_alarm", doc="The cost of one false alarm (acting when nothing happens), >= 0.")
@xw.arg("cost_miss", doc="The cost of one miss (not acting when the event happens), >= 0.")
@c.guarded
def EVENT_CUTOFF(cost_false_alarm: Value, cost_miss: Value) -> Spill:
    """The probability above which warning costs less on average: cost_false_alarm / (sum of both).

    Returns one number. Example: =EVENT_CUTOFF(1, 4) gives 0.2."""
    cfa = c.required_float(cost_false_alarm, "cost_false_alarm", "the cost of one false alarm")
    cmiss = c.required_float(cost_miss, "cost_miss", "the cost of one miss")
    return c.cell(scores.cost_cutoff(cfa, cmiss))


@xw.func(category=CATEGORY)
@xw.arg("actual", ndim=2, doc=_ACTUAL)
@xw.arg("forecast_a", ndim=2, doc="The first 0/1 forecast for the same rows.")
@xw.arg("forecast_b", ndim=2, doc="The second 0/1 forecast for the same rows.")
@c.guarded
def EVENT_COMPARE(actual: Cells, forecast_a: Cells, forecast_b: Cells) -> Spill:
    """McNemar's test: are two 0/1 forecasts right equally often? A small p_value says they differ.

    Spills a two-column table: statistic, p_value. Example: =EVENT_COMPARE(C2:C99, D2:D99, E2:E99)."""
    a = c.event_column(actual, "actual")
    fa = c.event_column(forecast_a, "forecast_a")
    fb = c.event_column(forecast_b, "forecast_b")
    same_length(actual=a, forecast_a=fa, forecast_b=fb)
    stat, pvalue = scores.mcnemar(a, fa, fb)
    return c.to_table(["measure", "value"], [["statistic", stat], ["p_value", pvalue]])
