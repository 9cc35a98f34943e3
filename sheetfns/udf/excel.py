"""The xlwings face of tocsin's spreadsheet functions (Excel user-defined functions).

Point the xlwings add-in's "UDF Modules" setting at ``sheetfns.udf`` and import the functions; then
``=EVENT_FLAG(B2:B2930, ">=1150")`` spills a 0/1 column next to the passengers. Each function here is
the plain function of :mod:`sheetfns.udf.functions` with xlwings' decorators: the wizard text, the
argument help and the category come from the function list (:mod:`sheetfns.udf.registry`), and the
body is one line of delegation.

This is the only module of tocsin that imports xlwings. Off Windows xlwings' ``func`` / ``arg``
decorators register nothing, so the tests call these functions as plain functions, exactly as the
add-in does. The coercion is our own code, not xlwings' converters (which do nothing off Windows);
the one xlwings option used is ``ndim=2`` on range arguments, so that on the desktop a range always
arrives as a list of rows and a row range can be told from a column. Native dynamic arrays (Microsoft
365 / Excel 2021 and later) spill a returned list of rows without any return decorator.
"""
from __future__ import annotations

import inspect
from collections.abc import Callable
from typing import Any

try:
    import xlwings as xw
except ImportError as _exc:  # pragma: no cover - exercised in a subprocess test
    raise ImportError(
        "sheetfns.udf.excel (the Excel spreadsheet functions) needs xlwings, which is not installed; "
        "install it with: pip install 'tocsin[excel]'. The rest of tocsin (sheetfns.events, ..., the "
        "watcher, and the plain functions of sheetfns.udf) works without it.", name="xlwings") from _exc

from sheetfns.udf import functions as F
from sheetfns.udf.functions import Cells, Spill, Value
from sheetfns.udf.registry import CATEGORY, FUNCTIONS

__all__ = list(F.__all__)


def _face(wrapper: Callable[..., Any]) -> Callable[..., Any]:
    """Decorate ``wrapper`` for xlwings from the function list entry of the same name."""
    spec = FUNCTIONS[wrapper.__name__]
    ours = [(p.name, p.default) for p in inspect.signature(wrapper).parameters.values()]
    plain = [(p.name, p.default) for p in inspect.signature(spec.fn).parameters.values()]
    if ours != plain:
        raise TypeError(f"{spec.name}: the xlwings face takes {ours}, the plain function {plain}")
    wrapper.__doc__ = spec.help
    for a in reversed(spec.args):
        wrapper = xw.arg(a.name, ndim=2, doc=a.help)(wrapper) if a.is_range else \
            xw.arg(a.name, doc=a.help)(wrapper)
    return xw.func(category=CATEGORY, call_in_wizard=spec.call_in_wizard)(wrapper)


@_face
def EVENT_FLAG(values: Cells, criterion: Value, min_run: Value = 1) -> Spill:
    return F.EVENT_FLAG(values, criterion, min_run)


@_face
def EVENT_NAIVE(events: Cells, horizon: Value = 1, season: Value = 1, train_rows: Value = None) -> Spill:
    return F.EVENT_NAIVE(events, horizon, season, train_rows)


@_face
def EVENT_MAJORITY(events: Cells, window: Value = None, train_rows: Value = None,
                   horizon: Value = 1) -> Spill:
    return F.EVENT_MAJORITY(events, window, train_rows, horizon)


@_face
def EVENT_SHARE(events: Cells, window: Value = None, train_rows: Value = None, horizon: Value = 1) -> Spill:
    return F.EVENT_SHARE(events, window, train_rows, horizon)


@_face
def EVENT_LOGIT(events: Cells, predictors: Cells = None, train_rows: Value = None, horizon: Value = 1,
                lags: Value = 1, cycle: Value = None, harmonics: Value = 2, dates: Cells = None) -> Spill:
    return F.EVENT_LOGIT(events, predictors, train_rows, horizon, lags, cycle, harmonics, dates)


@_face
def EVENT_LOGIT_COEFS(events: Cells, predictors: Cells = None, train_rows: Value = None,
                      horizon: Value = 1, lags: Value = 1, cycle: Value = None, harmonics: Value = 2,
                      dates: Cells = None) -> Spill:
    return F.EVENT_LOGIT_COEFS(events, predictors, train_rows, horizon, lags, cycle, harmonics, dates)


@_face
def EVENT_VALUE_PROB(values: Cells, criterion: Value, predictors: Cells = None, train_rows: Value = None,
                     horizon: Value = 1, lags: Value = 1, cycle: Value = None, harmonics: Value = 2,
                     dates: Cells = None) -> Spill:
    return F.EVENT_VALUE_PROB(values, criterion, predictors, train_rows, horizon, lags, cycle, harmonics,
                              dates)


@_face
def EVENT_MARKOV(events: Cells, train_rows: Value = None, horizon: Value = 1) -> Spill:
    return F.EVENT_MARKOV(events, train_rows, horizon)


@_face
def EVENT_RATE_TABLE(dates: Cells, events: Cells, by: Value = "month") -> Spill:
    return F.EVENT_RATE_TABLE(dates, events, by)


@_face
def EVENT_SCORES(actual: Cells, forecast: Cells, probability: Cells = None, reference: Cells = None
                 ) -> Spill:
    return F.EVENT_SCORES(actual, forecast, probability, reference)


@_face
def EVENT_CONFUSION(actual: Cells, forecast: Cells) -> Spill:
    return F.EVENT_CONFUSION(actual, forecast)


@_face
def EVENT_BRIER(actual: Cells, probability: Cells) -> Spill:
    return F.EVENT_BRIER(actual, probability)


@_face
def EVENT_CUTOFF(cost_false_alarm: Value, cost_miss: Value) -> Spill:
    return F.EVENT_CUTOFF(cost_false_alarm, cost_miss)


@_face
def EVENT_COMPARE(actual: Cells, forecast_a: Cells, forecast_b: Cells) -> Spill:
    return F.EVENT_COMPARE(actual, forecast_a, forecast_b)
