"""tocsin's spreadsheet functions, defined once as plain functions.

Each function takes what a spreadsheet hands over (a range as a list of rows, one cell as a scalar, a
blank as None or empty text) and returns what a spreadsheet shows (a column of the input's height or a
small table, as a list of rows; None for a blank), in four steps: coerce the ranges
(:mod:`sheetfns.udf.coerce`), call the core module, map NaN to a blank, return. Bad input never raises:
the cell shows ``#tocsin: `` and what to fix.

The decorator :func:`~sheetfns.udf.registry.sheet_function` enters each function, with one line of
help per argument, in the one function list (:data:`~sheetfns.udf.registry.FUNCTIONS`) that the
faces are built from: the xlwings face (:mod:`sheetfns.udf.excel`) and the LibreOffice Calc add-in
(:mod:`sheetfns.udf.calc`). This module imports neither xlwings nor anything of LibreOffice.

Type hints are ``Any`` aliases on purpose: xlwings turns an argument's type hint into a converter, and
only the plain value converter does what our coercion expects.
"""
from __future__ import annotations

from typing import Any

import numpy as np

from sheetfns import benchmarks, events, logistic, markov, partition, profile, scores, valuemodel
from sheetfns.checks import same_length
from sheetfns.errors import InputError
from sheetfns.scorecard import weekday_terms
from sheetfns.udf import coerce as c
from sheetfns.udf.registry import cells, sheet_function, value

Cells = Any   # a range: a list of rows, a flat list (a column) or a single value
Value = Any   # a single cell or a literal typed into the formula; None when blank or omitted
Spill = Any   # a list of rows that spills, a single value, or a '#tocsin: ...' error text

__all__ = [
    "EVENT_FLAG", "EVENT_NAIVE", "EVENT_MAJORITY", "EVENT_SHARE", "EVENT_LOGIT", "EVENT_LOGIT_COEFS",
    "EVENT_VALUE_PROB", "EVENT_MARKOV", "EVENT_SCORES", "EVENT_CONFUSION", "EVENT_BRIER", "EVENT_RATE_TABLE",
    "EVENT_CUTOFF", "EVENT_COMPARE",
]

# One-line help shared by several arguments (a wizard shows at most 255 characters of each).
_ACTUAL = cells("What happened: a column of 1 (event), 0 (no event) or blank, e.g. the output of EVENT_FLAG.")
_FORECAST = cells("The 0/1 forecast for the same rows, e.g. the output of EVENT_NAIVE or EVENT_MAJORITY.")
_EVENTS = cells("The event column: 1 (event), 0 (no event) or blank; blanks at the end are future periods.")
_HORIZON = value("Optional: periods ahead, the forecast for row t is made at row t - horizon (default 1).")
_TRAIN_ROWS = value("Optional: the first train_rows rows are the training period and later forecasts are "
                    "made from its end; blank = roll forward every period (default).")
_WINDOW = value("Optional: how many of the latest observed periods count (default blank: all of them).")
_PROBABILITY = cells("Optional: the forecast probability for the same rows (0 to 1), e.g. from EVENT_LOGIT.")


# ------------------------------------------------------------------------------------------- events
@sheet_function(
    values=cells("The data column: numbers, TRUE/FALSE or text, one cell per period."),
    criterion=value('The event rule as text: ">=1150", "<0", "=alarm", "rise", "fall>2", "rise%>=5".'),
    min_run=value("Optional: the rule must hold this many periods in a row (default 1)."))
def EVENT_FLAG(values: Cells, criterion: Value, min_run: Value = 1) -> Spill:
    """Turn a column into events: 1 where the rule holds, 0 where it does not, blank where unknown.

    Spills a column of the same height. Example: =EVENT_FLAG(B2:B2930, ">=1150")."""
    x = c.number_column(values, "values", keep_text=True)
    rule = c.criterion_text(criterion)
    k = c.option_int(min_run, "min_run", 1, minimum=1)
    return c.to_column(events.flag(x, rule, k))


# --------------------------------------------------------------------------------------- benchmarks
@sheet_function(
    events=_EVENTS, horizon=_HORIZON,
    season=value("Optional: the seasonal period, e.g. 7 for daily data with a weekly pattern (default 1)."),
    train_rows=_TRAIN_ROWS)
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


@sheet_function(events=_EVENTS, window=_WINDOW, train_rows=_TRAIN_ROWS, horizon=_HORIZON)
def EVENT_MAJORITY(events: Cells, window: Value = None, train_rows: Value = None,
                   horizon: Value = 1) -> Spill:
    """Majority vote: 1 when more than half of the periods so far (or in the window) had the event.

    An exact tie repeats the latest value. Spills a 0/1 column. Example: =EVENT_MAJORITY(D2:D2930, 28)."""
    y = c.event_column(events, "events")
    return c.to_column(benchmarks.majority_vote(y, **_majority_args(window, train_rows, horizon)))


@sheet_function(events=_EVENTS, window=_WINDOW, train_rows=_TRAIN_ROWS, horizon=_HORIZON)
def EVENT_SHARE(events: Cells, window: Value = None, train_rows: Value = None,
                horizon: Value = 1) -> Spill:
    """Share of periods so far (or in the window) that had the event: the majority method's probability.

    Spills a column of probabilities. Example: =EVENT_SHARE(D2:D2930, , 2343)."""
    y = c.event_column(events, "events")
    return c.to_column(benchmarks.majority_share(y, **_majority_args(window, train_rows, horizon)))


# ----------------------------------------------------------------------------------------- logistic
def _model_args(n: int, series: str, predictors: Cells, train_rows: Value, horizon: Value, lags: Value,
                cycle: Value, harmonics: Value, dates: Cells) -> dict[str, Any]:
    """The options the logistic model and the value model share, coerced; ``series`` names the column
    the other ranges must match."""
    named = None
    if not c.omitted(predictors):
        x, labels = c.number_table(predictors, "predictors", rows=n, of=f"the {series}")
        named = {label: x[:, j] for j, label in enumerate(labels)}
    d = None
    if not c.omitted(dates):
        d = c.date_column(dates, "dates")
        same_length(**{series: np.empty(n), "dates": d})
    return {"predictors": named, "dates": d,
            "weekday": d is not None and weekday_terms(partition.infer_frequency(d)),
            "train_size": c.option_int(train_rows, "train_rows", None, minimum=1),
            "horizon": c.option_int(horizon, "horizon", 1, minimum=1),
            "lags": c.option_int(lags, "lags", 1, minimum=0),
            "cycle": c.option_float(cycle, "cycle", None, positive=True),
            "harmonics": c.option_int(harmonics, "harmonics", 2, minimum=0)}


def _logit(events: Cells, predictors: Cells, train_rows: Value, horizon: Value, lags: Value,
           cycle: Value, harmonics: Value, dates: Cells) -> logistic.LogitForecast:
    y = c.event_column(events, "events")
    return logistic.forecast(y, **_model_args(y.size, "events", predictors, train_rows, horizon, lags, cycle,
                                              harmonics, dates))


_LOGIT_ARGS = {
    "events": _EVENTS,
    "predictors": cells("Optional: columns of other data for the same rows, read `horizon` periods "
                        "earlier; a header row on top names them."),
    "train_rows": _TRAIN_ROWS,
    "horizon": _HORIZON,
    "lags": value("Optional: how many past events enter the model (default 1; 0 for none).",
                  zero_is_blank=False),
    "cycle": value("Optional: the length of a yearly (or other) cycle in rows, e.g. 365.25 for daily "
                   "data; blank = no cycle."),
    "harmonics": value("Optional: sine/cosine pairs describing the cycle (default 2).", zero_is_blank=False),
    "dates": cells("Optional: the date column; the cycle then follows the calendar, and daily data get "
                   "weekday terms, as on the watcher's forecast sheet."),
}


@sheet_function(call_in_wizard=False, **_LOGIT_ARGS)
def EVENT_LOGIT(events: Cells, predictors: Cells = None, train_rows: Value = None, horizon: Value = 1,
                lags: Value = 1, cycle: Value = None, harmonics: Value = 2, dates: Cells = None) -> Spill:
    """Probability of the event from a logistic regression on past events, predictors and a cycle.

    Spills a column of probabilities, blank where it cannot forecast.
    Example: =EVENT_LOGIT(D2:D2930, , 2343)."""
    fc = _logit(events, predictors, train_rows, horizon, lags, cycle, harmonics, dates)
    if np.isnan(fc.prob).all():          # a column of blanks would not say why: show the notes
        raise InputError("no row could be forecast: " + "; ".join(fc.notes))
    return c.to_column(fc.prob)


@sheet_function(call_in_wizard=False, **_LOGIT_ARGS)
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


# ----------------------------------------------------------------------- value model, two-state chain
@sheet_function(
    call_in_wizard=False,
    values=cells("The data column the event rule reads: numbers, one cell per period; blanks at the end "
                 "are future periods."),
    criterion=value('The event rule as text, a threshold or a change: ">=1150", "<0", "rise", "fall>2", '
                    '"fall%>5" (not "=" or text rules).'),
    predictors=_LOGIT_ARGS["predictors"], train_rows=_TRAIN_ROWS, horizon=_HORIZON,
    lags=value("Optional: how many past values (or changes) enter the model (default 1).",
               zero_is_blank=False),
    cycle=_LOGIT_ARGS["cycle"], harmonics=_LOGIT_ARGS["harmonics"], dates=_LOGIT_ARGS["dates"])
def EVENT_VALUE_PROB(values: Cells, criterion: Value, predictors: Cells = None, train_rows: Value = None,
                     horizon: Value = 1, lags: Value = 1, cycle: Value = None, harmonics: Value = 2,
                     dates: Cells = None) -> Spill:
    """Probability that the number crosses the rule's line: a least-squares forecast of the value (or its
    change) and its Student t spread.

    Spills a column of probabilities. Example: =EVENT_VALUE_PROB(B2:B2930, ">=1150", , 2343)."""
    x = c.number_column(values, "values", keep_text=True)
    rule = c.criterion_text(criterion)
    fc = valuemodel.forecast(x, rule, **_model_args(x.size, "values", predictors, train_rows, horizon, lags,
                                                     cycle, harmonics, dates))
    if not fc.applies:
        raise InputError(fc.notes[0])
    if np.isnan(fc.prob).all():          # a column of blanks would not say why: show the notes
        raise InputError("no row could be forecast: " + "; ".join(fc.notes))
    return c.to_column(fc.prob)


@sheet_function(events=_EVENTS, train_rows=_TRAIN_ROWS, horizon=_HORIZON)
def EVENT_MARKOV(events: Cells, train_rows: Value = None, horizon: Value = 1) -> Spill:
    """Two-state chain: the share of events after periods in the same state (event or not) as the
    period `horizon` rows back.

    Spills a column of probabilities. Example: =EVENT_MARKOV(D2:D2930, 2343)."""
    y = c.event_column(events, "events")
    return c.to_column(markov.forecast(y, train_size=c.option_int(train_rows, "train_rows", None, minimum=1),
                                       horizon=c.option_int(horizon, "horizon", 1, minimum=1)))


# ------------------------------------------------------------------------------------------- profile
@sheet_function(
    dates=cells("The date column, one date per row."),
    events=cells("The event column for the same rows: 1, 0 or blank (blanks are left out)."),
    by=value('Optional: rows of the table, "month" (default), "week", "weekday" or "quarter".'))
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


@sheet_function(
    actual=_ACTUAL, forecast=_FORECAST, probability=_PROBABILITY,
    reference=cells("Optional: the reference of brier_skill, a probability or a column of them, e.g. "
                    "EVENT_SHARE over the training rows (default: the share of events in the scored rows)."))
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


@sheet_function(actual=_ACTUAL, forecast=_FORECAST)
def EVENT_CONFUSION(actual: Cells, forecast: Cells) -> Spill:
    """Count hits, false alarms, misses and correct negatives of a 0/1 forecast; blank rows skipped.

    Spills a 3 x 3 table: forecast down the side, actual across. Example: =EVENT_CONFUSION(C2:C99, D2:D99)."""
    t = scores.confusion(*_pair(actual, forecast))
    return c.to_table(["forecast \\ actual", "event", "no event"],
                      [["event", t.hits, t.false_alarms], ["no event", t.misses, t.correct_negatives]])


@sheet_function(actual=_ACTUAL, probability=cells("The forecast probability for the same rows (0 to 1)."))
def EVENT_BRIER(actual: Cells, probability: Cells) -> Spill:
    """Brier score of a probability forecast and its parts: reliability, resolution, uncertainty.

    Spills a two-column table: measure, value (10 probability bins). Example: =EVENT_BRIER(C2:C99, E2:E99)."""
    a = c.event_column(actual, "actual")
    p = c.prob_column(probability, "probability")
    same_length(actual=a, probability=p)
    d = scores.brier_parts(a, p)
    return c.to_table(["measure", "value"],
                      [[k, d[k]] for k in ("brier", "reliability", "resolution", "uncertainty", "n")])


@sheet_function(
    cost_false_alarm=value("The cost of one false alarm (acting when nothing happens), >= 0."),
    cost_miss=value("The cost of one miss (not acting when the event happens), >= 0."))
def EVENT_CUTOFF(cost_false_alarm: Value, cost_miss: Value) -> Spill:
    """The probability above which warning costs less on average: cost_false_alarm / (sum of both).

    Returns one number. Example: =EVENT_CUTOFF(1, 4) gives 0.2."""
    cfa = c.required_float(cost_false_alarm, "cost_false_alarm", "the cost of one false alarm")
    cmiss = c.required_float(cost_miss, "cost_miss", "the cost of one miss")
    return c.cell(scores.cost_cutoff(cfa, cmiss))


@sheet_function(actual=_ACTUAL, forecast_a=cells("The first 0/1 forecast for the same rows."),
                forecast_b=cells("The second 0/1 forecast for the same rows."))
def EVENT_COMPARE(actual: Cells, forecast_a: Cells, forecast_b: Cells) -> Spill:
    """McNemar's test: are two 0/1 forecasts right equally often? A small p_value says they differ.

    Spills a two-column table: statistic, p_value. Example: =EVENT_COMPARE(C2:C99, D2:D99, E2:E99)."""
    a = c.event_column(actual, "actual")
    fa = c.event_column(forecast_a, "forecast_a")
    fb = c.event_column(forecast_b, "forecast_b")
    same_length(actual=a, forecast_a=fa, forecast_b=fb)
    stat, pvalue = scores.mcnemar(a, fa, fb)
    return c.to_table(["measure", "value"], [["statistic", stat], ["p_value", pvalue]])
