"""The value model: the chance that the number behind an event rule lands on the event side.

Most events are a number crossing a line: ``>1150`` passengers, a ``fall%>5`` in weekly sales. The
logistic model sees only whether the line was crossed; the value model forecasts the number the rule
compares -- the value itself, its change, or its percent change against the previous observed value
-- and turns that forecast into a probability (DESIGN.md §11):

1. the *quantity* q[t] (:func:`quantity`) is regressed by ordinary least squares on the logistic
   model's design (:mod:`sheetfns._logit.design`) with lags of q in place of the event lags;
2. the forecast for row t is Student's t with n - k degrees of freedom, centred on the point
   forecast x_t'b, with the standard error of a new observation as its scale,

   .. math:: \\mathrm{scale}_t = s \\sqrt{1 + x_t' (X'X)^{-1} x_t}, \\qquad s^2 = \\frac{SSR}{n - k}

   (the predictive distribution of a new observation in the normal linear model; the same number as
   statsmodels' ``get_prediction(...).se_obs``);
3. P(event at t) is the t mass on the event side of the threshold.

References
----------
1. Greene, W. H. (2003). *Econometric Analysis* (5th ed.), §6.6 Prediction. Prentice Hall.
2. Wilks, D. S. (2011). *Statistical Methods in the Atmospheric Sciences* (3rd ed.), §7.2 and §7.6.
   Academic Press. (Probability of a threshold event from a regression forecast.)
"""
from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from functools import cached_property
from typing import Any

import numpy as np

from sheetfns._logit import design as _design
from sheetfns._ols import rolling as _rolling
from sheetfns._ols.normal import OLSFit
from sheetfns._ols.tdist import t_cdf
from sheetfns.checks import as_cycle, as_int, as_series, last_observed, weekday_needs_dates
from sheetfns.errors import InputError
from sheetfns.events import Criterion, approx_equal, change, parse_criterion
from sheetfns.events import _coerce as _read_column  # the reading of a column events.flag uses
from sheetfns.logistic import parse_refit

__all__ = ["ValueForecast", "forecast", "quantity", "COEFFICIENT_COLUMNS"]

#: Columns of the coefficient table (the logistic model's, with t for z).
COEFFICIENT_COLUMNS = ("term", "estimate", "std_error", "t", "p")

_LAG_LABEL = {"value": "value", "change": "change", "percent change": "% change"}


@dataclass(frozen=True)
class ValueForecast:
    """Result of :func:`forecast`; arrays are aligned to the target row and have the input's length.

    ``prob`` P(event), ``mean`` the point forecast of the quantity, ``scale`` the scale of its
    predictive t (s sqrt(1 + x'(X'X)^-1 x)), ``dof`` its degrees of freedom (NaN where there is no
    forecast), ``coefficients`` the table (a pandas DataFrame: term, estimate, std_error, t, p; its
    ``attrs`` hold ``residual_scale``, ``dof`` and ``nobs``; made from ``fit`` when first asked for,
    so that a caller who writes the numbers elsewhere never imports pandas), ``notes``.

    Beyond the contract: ``applies`` (False where the rule is not a numeric threshold; every array is
    then NaN and the first note says why), ``quantity`` ("value", "change" or "percent change"),
    ``event`` (the event side in words, e.g. "change < -2"), ``residual_scale`` (s of the table's
    fit), ``fit`` and ``future_fit`` (:class:`~sheetfns._ols.normal.OLSFit`), ``terms``, ``refits``.
    """

    prob: np.ndarray
    mean: np.ndarray
    scale: np.ndarray
    dof: np.ndarray
    notes: tuple[str, ...] = ()
    applies: bool = True
    quantity: str = ""
    event: str = ""
    residual_scale: float = math.nan
    fit: OLSFit | None = None
    future_fit: OLSFit | None = None
    terms: tuple[str, ...] = ()
    refits: int = 0

    @cached_property
    def coefficients(self):
        """The coefficient table of ``fit`` (an empty table without one)."""
        if self.fit is not None:
            return self.fit.table()
        import pandas as pd  # lazy: pandas adds ~0.3 s to start-up (DEVELOPERS.md, The core)

        return pd.DataFrame({c: pd.Series(dtype=object if c == "term" else float)
                             for c in COEFFICIENT_COLUMNS})


def _criterion(criterion: Any) -> Criterion:
    return criterion if isinstance(criterion, Criterion) else parse_criterion(criterion)


def _numeric(values: Any) -> np.ndarray:
    """The column as numbers, read as :func:`sheetfns.events.flag` reads it (text cells missing)."""
    x, _text = _read_column(values)
    if x.size == 0:
        raise InputError("`values` must not be empty; got 0 rows", argument="values", value=values)
    return x


def quantity(values: Any, criterion: str | Criterion) -> tuple[np.ndarray, str]:
    """The number a rule compares, per row, and its name.

    * a comparison (``>1150``): the value itself, ``"value"``;
    * ``rise`` / ``fall`` with a threshold in units: the change ``x[t] - x[p]`` against the previous
      observed value x[p] (interior blanks skipped; the first observation has none), ``"change"``;
    * ``rise%`` / ``fall%``: the percent change ``100 (x[t] - x[p]) / |x[p]|``, NaN where x[p] is 0,
      ``"percent change"``.

    The change is signed for both directions (a fall of 2 is a change of -2), exactly as
    :func:`sheetfns.events.flag` measures it: ``flag(values, "fall>2")`` is 1 where the change is
    below -2. Text rules have no quantity (:class:`~sheetfns.errors.InputError`).

    Examples
    --------
    >>> [round(v, 6) for v in quantity([4.0, 3.8, None, 4.18], "fall%>5")[0].tolist()]
    [nan, -5.0, nan, 10.0]
    """
    crit = _criterion(criterion)
    if crit.kind == "text":
        raise InputError(f"criterion {crit.text!r} compares text: it has no number to forecast",
                         argument="criterion", value=crit.text)
    x = _numeric(values)
    if crit.kind == "compare":
        return x, "value"
    return change(x, percent=crit.percent), "percent change" if crit.percent else "change"


def _event_side(crit: Criterion) -> tuple[float, float, bool]:
    """(side, cut, strict): the event is side * (q - cut) > 0 (>= 0 unless strict)."""
    thr = float(crit.threshold)  # type: ignore[arg-type]
    strict = crit.op in (">", "<")
    if crit.kind == "compare":
        return (1.0 if crit.op in (">", ">=") else -1.0), thr, strict
    return (1.0, thr, strict) if crit.direction == "rise" else (-1.0, 0.0 - thr, strict)  # never -0


def _not_applicable(crit: Criterion, min_run: int) -> str | None:
    if crit.kind == "text":
        return f"the rule {crit.text!r} compares text: there is no number to forecast"
    if crit.op in ("=", "<>"):
        return (f"the rule {crit.text!r} asks for equality: a forecast number equals a given value "
                f"with probability 0 (use '>=' or '<=')")
    if min_run > 1:
        return (f"min_run is {min_run}: the event needs the rule to hold on {min_run} periods in a row, "
                f"which one forecast number does not describe")
    return None


def _absent(n: int, why: str) -> ValueForecast:
    nan = np.full(n, np.nan)
    return ValueForecast(nan, nan.copy(), nan.copy(), nan.copy(), (f"value model not used: {why}",),
                         applies=False)


def _check_lengths(n: int, predictors: Any, known_ahead: Any, dates: Any) -> None:
    """Shapes named for this function's arguments (the design builder speaks of `y`)."""
    for arg, mapping in (("predictors", predictors), ("known_ahead", known_ahead)):
        if mapping is None:
            continue
        if not isinstance(mapping, Mapping):
            raise InputError(f"`{arg}` must be a mapping of name -> 1-D array; got {type(mapping).__name__}",
                             argument=arg, value=mapping)
        for name, col in mapping.items():
            label = f"{arg}[{name!r}]"
            size = as_series(col, label).size
            if size != n:
                raise InputError(f"`{label}` must have one value per row of `values`; got {size} values "
                                 f"for {n} rows", argument=label, value=col)
    if dates is not None and not isinstance(dates, str) and hasattr(dates, "__len__") and len(dates) != n:
        raise InputError(f"`dates` must have one date per row of `values`; got {len(dates)} dates for "
                         f"{n} rows", argument="dates", value=dates)


def forecast(values: Any, criterion: str | Criterion, *, predictors: Mapping[str, Any] | None = None,
             known_ahead: Mapping[str, Any] | None = None, dates: Any = None,
             train_size: int | None = None, horizon: int = 1, lags: int = 1,
             cycle: float | None = None, harmonics: int = 2, weekday: bool = False,
             trend: bool = False, refit: str = "fixed", min_run: int = 1) -> ValueForecast:
    """Probability of a threshold event from a least-squares forecast of the number behind it.

    Parameters
    ----------
    values : array_like, shape (n,)
        The numeric column the events come from (blanks NaN; text cells count as blanks, as in
        :func:`sheetfns.events.flag`). Trailing rows without a quantity are future periods.
    criterion : str or Criterion
        The event rule (DESIGN.md §5). The model applies to ``>``, ``>=``, ``<``, ``<=`` and to the
        change rules ``rise`` / ``fall`` (in units or percent).
    predictors, known_ahead, dates, train_size, horizon, cycle, harmonics, weekday, trend, refit
        As for :func:`sheetfns.logistic.forecast`: the same design, estimation samples, refit schemes
        and rows with a forecast.
    lags : int, default 1
        Lags q[t-horizon], ..., q[t-horizon-lags+1] of the quantity, in place of the event lags. A
        comparison's quantity is the value, whose lag is the design's value term: the model has at
        least that one lag (no term twice). A change rule keeps the value term beside its lags.
    min_run : int, default 1
        The rule's ``min_run``; above 1 the model does not apply.

    Returns
    -------
    ValueForecast
        ``prob``, ``mean``, ``scale``, ``dof`` (length n), ``coefficients``, ``notes`` and more.

    Raises
    ------
    CriterionError
        ``criterion`` does not parse.
    InputError
        A bad argument (the message names it), too few rows, or a training period too short to fit.

    Notes
    -----
    With the quantity's predictive distribution ``mean + scale * T`` (T Student's t with ``dof``
    degrees of freedom): an event "q > c" (or >=) has P = F((mean - c) / scale), an event "q < c"
    (or <=) has P = F((c - mean) / scale), F the t distribution function (our own, without scipy:
    :mod:`sheetfns._ols.tdist`). ``rise>c`` is q > c on the change, ``fall>c`` is q < -c (``rise``
    and ``fall`` alone: c = 0). Strict and non-strict rules differ only where ``scale`` is 0 (a
    perfect fit), where P is 1 or 0 by the rule itself.

    The model does not apply (``applies`` False, every array NaN, a note) to text rules, ``=`` and
    ``<>`` comparisons, ``min_run`` > 1 and a 0/1 column (TRUE/FALSE included).

    Refits: each window's ``X'X``, ``X'y`` and ``y'y`` are the previous window's plus the rows that
    entered; see :mod:`sheetfns._ols.normal` for the solve. Training rows get no forecast.

    Examples
    --------
    >>> import numpy as np
    >>> x = 100 + np.sin(np.arange(60)) * 5 + np.arange(60) % 7
    >>> res = forecast(np.r_[x, np.nan], ">104", train_size=40)
    >>> bool(np.isnan(res.prob[:40]).all()), bool(np.isfinite(res.prob[40:]).all())
    (True, True)
    >>> list(res.coefficients["term"])
    ['constant', 'value t-1']
    """
    crit = _criterion(criterion)
    horizon = as_int(horizon, "horizon", minimum=1)
    lags = as_int(lags, "lags", minimum=0)
    harmonics = as_int(harmonics, "harmonics", minimum=0)
    run_length = as_int(min_run, "min_run", minimum=1)
    cycle = as_cycle(cycle)
    weekday_needs_dates(weekday, dates)
    every = parse_refit(refit)
    x = _numeric(values)
    n = x.size
    seen = x[~np.isnan(x)]
    if seen.size and np.isin(seen, (0.0, 1.0)).all():   # the first reason: no rule would make it apply
        return _absent(n, "the column holds only 0 and 1 (or TRUE/FALSE): an event series, not a "
                          "number to forecast (the logistic model and the chain use it)")
    why = _not_applicable(crit, run_length)
    if why is not None:
        return _absent(n, why)
    if n < 2:
        raise InputError(f"`values` must have at least 2 rows to forecast from its past; got {n}",
                         argument="values", value=values)
    q, what = quantity(x, crit)
    last = last_observed(q)
    if last < 0:
        need = "a value" if crit.kind == "compare" else "two observed values (a change needs a previous one)"
        raise InputError(f"`values` has no {what} to learn from: it needs {need}; got {seen.size} "
                         f"observed of {n} rows", argument="values", value=values)
    n_lags = max(lags, 1) if crit.kind == "compare" else lags
    if horizon + max(n_lags, 1) - 1 > last:
        longest = last - max(n_lags, 1) + 1
        raise InputError(f"`horizon` is longer than the data: with {last + 1} rows up to the last "
                         f"observed {what} and lags={lags} it can be at most {max(longest, 0)}; "
                         f"got {horizon}", argument="horizon", value=horizon)
    if train_size is not None:
        train_size = as_int(train_size, "train_size", minimum=1, maximum=n)
    _check_lengths(n, predictors, known_ahead, dates)
    design = _design.build(q, values=x if crit.kind == "change" else None, predictors=predictors,
                           known_ahead=known_ahead, dates=dates, horizon=horizon, lags=n_lags,
                           cycle=cycle, harmonics=harmonics, weekday=bool(weekday), trend=bool(trend))
    label = _LAG_LABEL[what]
    design.terms = [f"{label} {t[len('event '):]}" if t.startswith("event t-") else t for t in design.terms]
    if len(set(design.terms)) < len(design.terms):
        twice = next(t for t in design.terms if design.terms.count(t) > 1)
        raise InputError(f"term names must be unique; got {twice!r} twice (rename the predictor)",
                         argument="predictors", value=twice)
    res = _rolling.run(q, design, last=last, horizon=horizon, train_size=train_size, every=every)
    side, cut, strict = _event_side(crit)
    prob = _probability(res.mean, res.scale, res.dof, side, cut, strict)
    event = f"{what} {'>' if side > 0 else '<'}{'' if strict else '='} {cut:g}"
    notes = [f"value model: the {what} is forecast by least squares and P(event) = P({event}) under "
             f"its predictive Student t (n - k degrees of freedom, scale s sqrt(1 + x'(X'X)^-1 x))"]
    notes += res.notes
    scale = res.table_fit.scale if res.table_fit is not None else math.nan
    return ValueForecast(prob, res.mean, res.scale, res.dof, tuple(notes), True, what, event,
                         scale, res.table_fit, res.future_fit, tuple(design.terms), res.refits)


def _probability(mean: np.ndarray, scale: np.ndarray, dof: np.ndarray, side: float, cut: float,
                 strict: bool) -> np.ndarray:
    """P(side * (Q - cut) > 0) for Q = mean + scale * T, T ~ t(dof); the rule itself where scale is 0."""
    prob = np.full(mean.size, np.nan)
    ok = np.isfinite(mean) & np.isfinite(scale) & np.isfinite(dof)
    spread = ok & (scale > 0)
    if spread.any():
        prob[spread] = t_cdf(side * (mean[spread] - cut) / scale[spread], dof[spread])
    point = ok & (scale == 0)
    if point.any():
        d = side * (mean[point] - cut)
        tie = approx_equal(mean[point], cut)               # equal as a spreadsheet decides
        prob[point] = np.where(tie, 0.0 if strict else 1.0, np.where(d > 0, 1.0, 0.0))
    return prob
