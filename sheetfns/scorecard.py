"""Every method on one event series, scored on the validation period: the computation behind a
forecast sheet and ``tocsin check``. Pure computation (arrays in, arrays and dicts out), no file I/O.

Methods (keys and sheet labels):

=================  ====================  ==========================================================
key                label                 forecast / probability
=================  ====================  ==========================================================
``naive``          naive                 fixed origin: the last training event, for every
                                         validation row; its probability is the 0/1 forecast itself
``naive_roll``     rolling naive         roll-forward: the last observed event at t - horizon
                                         (persistence)
``seasonal``       seasonal naive        fixed origin, the value one season back (only when
                                         ``season`` > 1)
``seasonal_roll``  rolling seasonal      roll-forward seasonal naive
                   naive
``majority``       majority vote         fixed origin: the training majority; probability = the
                                         training share (the *majority share*, the reference of
                                         every Brier skill score)
``majority_roll``  rolling majority      expanding window, roll-forward; probability = the share
``markov``         two-state chain       P(event | the state ``horizon`` periods back)
                                         (:mod:`sheetfns.markov`); 0/1 = probability > cutoff
``logistic``       logistic              probability from the logit model; 0/1 = probability >
                                         cutoff
``value_model``    value model           P(the number behind the rule lands on the event side)
                                         (:mod:`sheetfns.valuemodel`); 0/1 = probability > cutoff;
                                         only for numeric threshold rules (``criterion`` given)
=================  ====================  ==========================================================

A 0/1 forecast used as a probability gives a Brier score equal to its error rate (common practice),
so the deterministic benchmarks stay comparable with the probability forecasts on every row of the
scorecard.

The verdict (:mod:`sheetfns._scoring.verdict`) names a best method only when it beats the majority
share; a validation period unlike the training period, or with too few events, is flagged in it and in
:attr:`Evaluation.warnings`.
"""
from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

import numpy as np

from sheetfns import benchmarks, logistic, markov, scores, valuemodel
from sheetfns._scoring import verdict as _verdict
from sheetfns.checks import last_observed

METHOD_LABELS: dict[str, str] = {
    "naive": "naive",
    "naive_roll": "rolling naive",
    "seasonal": "seasonal naive",
    "seasonal_roll": "rolling seasonal naive",
    "majority": "majority vote",
    "majority_roll": "rolling majority",
    "markov": "two-state chain",
    "logistic": "logistic",
    "value_model": "value model",
}

# The methods whose forecast is a probability (DESIGN.md §8): the majority share is one, a vote or a
# naive forecast is not, so those report only their 0/1 forecast, never a chance.
PROBABILITY_METHODS = frozenset({"majority", "majority_roll", "logistic", "value_model", "markov"})

# What a probability method's probability is called where it is shown: a majority *vote* is never a
# chance, its share is.
PROBABILITY_LABELS: dict[str, str] = {"majority": "majority share", "majority_roll": "rolling share",
                                      "markov": "two-state chain", "logistic": "logistic",
                                      "value_model": "value model"}

# The models: each is compared with the best of the other (benchmark) methods by McNemar and
# Diebold-Mariano on the sheet.
MODEL_METHODS = ("markov", "logistic", "value_model")

# On a Brier tie the simpler method is named: the reference first, the models last.
_PREFERENCE = ("majority", "majority_roll", "naive_roll", "naive", "seasonal_roll", "seasonal", "markov",
               "logistic", "value_model")

# Scorecard rows: (key in the score dicts, label shown, kind) where kind picks the cell format and
# whether a higher or a lower value is better ("hi", "lo", or "" for neither).
SCORE_ROWS: tuple[tuple[str, str, str, str], ...] = (
    ("n", "validation periods", "integer", ""),
    ("events", "events", "integer", ""),
    ("hits", "hits", "integer", ""),
    ("false_alarms", "false alarms", "integer", ""),
    ("misses", "misses", "integer", ""),
    ("correct_negatives", "correct negatives", "integer", ""),
    ("accuracy", "accuracy", "percent", "hi"),
    ("sensitivity", "sensitivity (hit rate)", "percent", "hi"),
    ("specificity", "specificity", "percent", "hi"),
    ("precision", "precision", "percent", "hi"),
    ("false_alarm_ratio", "false alarm ratio", "percent", "lo"),
    ("peirce_skill", "Peirce skill", "dec3", "hi"),
    ("heidke_skill", "Heidke skill", "dec3", "hi"),
    ("brier", "Brier score", "dec3", "lo"),
    ("brier_skill", "Brier skill vs majority share", "dec3", "hi"),
    ("log_loss", "log loss", "dec3", "lo"),
    ("roc_auc", "ROC area", "dec3", "hi"),
    ("expected_cost", "expected cost per period", "dec3", "lo"),
)


@dataclass(frozen=True)
class Settings:
    """The job's model settings (DESIGN.md §7), already validated."""

    horizon: int = 1
    season: int = 1
    cycle: float | None = None
    harmonics: int = 2
    lags: int = 1
    refit: str = "fixed"
    cutoff: float = 0.5
    cost_false_alarm: float | None = None
    cost_miss: float | None = None
    weekday: bool = False


@dataclass(frozen=True)
class Method:
    key: str
    label: str
    forecast: np.ndarray  # 0/1 per target row, NaN where the method has no forecast
    prob: np.ndarray  # probability per target row


@dataclass(frozen=True)
class FuturePeriod:
    """One future period: its row, the row its forecasts were made at, and each method's forecast.

    ``forecasts`` maps a method key to ``(forecast, probability)``: the 0/1 forecast, and the
    probability for the methods of :data:`PROBABILITY_METHODS` (None for the others). A method with no
    forecast for the row is left out.
    """

    row: int
    origin: int
    forecasts: dict[str, tuple[int, float | None]]


@dataclass(frozen=True)
class Evaluation:
    """What a forecast sheet shows: every method row by row, the scorecard and the verdict."""

    n: int
    train_size: int
    last_observed: int  # index of the last observed event (rows after it are future periods)
    methods: tuple[Method, ...]
    scorecard: dict[str, dict[str, float]]  # method key -> score key -> value
    best: str | None  # the method the verdict names (lowest Brier with positive skill), or None
    comparisons: dict[str, float]  # McNemar / Diebold-Mariano of each model vs the best benchmark etc.
    verdict: str
    logit_fit: Any  # the LogitFit behind the logistic coefficient table (None without the model)
    notes: tuple[str, ...] = field(default_factory=tuple)
    reliability: Any = None  # scores.brier_parts of the logistic validation probabilities
    roc: Any = None  # ROC points of the logistic validation probabilities
    horizon: int = 1
    warnings: tuple[str, ...] = ()  # the validation period unlike the training period, too few events
    value_model: Any = None  # the value model's ValueForecast (coefficient table, residual scale)
    lowest: str | None = None  # the method with the lowest validation Brier score (ties: simpler)

    @cached_property
    def coefficients(self) -> Any:
        """The logistic coefficient table (a pandas DataFrame, made when first asked for), or None."""
        return None if self.logit_fit is None else logistic.coefficient_table(self.logit_fit)

    @property
    def residual_method(self) -> str:
        """The method of the residual column: the best, else the majority share (the base rate the
        verdict then says to use)."""
        return self.best or "majority"

    @property
    def period(self) -> np.ndarray:
        """'training', 'validation' or 'future' per row."""
        out = np.full(self.n, "training", dtype=object)
        out[self.train_size:self.last_observed + 1] = "validation"
        out[self.last_observed + 1:] = "future"
        return out

    def method(self, key: str) -> Method:
        return next(m for m in self.methods if m.key == key)

    def future(self) -> list[FuturePeriod]:
        """Every future period in time order, with its origin: the target row minus the horizon, or the
        last observed row for periods further ahead than the horizon (the benchmarks fill them from it).
        """
        out = []
        for t in range(self.last_observed + 1, self.n):
            forecasts: dict[str, tuple[int, float | None]] = {}
            for m in self.methods:
                f = float(m.forecast[t])
                if math.isnan(f):
                    continue
                p = float(m.prob[t]) if m.key in PROBABILITY_METHODS else None
                forecasts[m.key] = (int(f), None if p is None or math.isnan(p) else p)
            out.append(FuturePeriod(row=t, origin=min(t - self.horizon, self.last_observed),
                                    forecasts=forecasts))
        return out

    def headline(self) -> dict[str, tuple[float, float]]:
        """Per method, (0/1 forecast, probability) for the first future row (NaN when there is none)."""
        t = self.last_observed + 1
        if t >= self.n:
            return {m.key: (math.nan, math.nan) for m in self.methods}
        return {m.key: (float(m.forecast[t]), float(m.prob[t])) for m in self.methods}


def best_mask(row: Any, better: str) -> np.ndarray:
    """Which methods hold the best value of one scorecard row (``better``: "hi", "lo" or "").

    NaN never counts; a row where every method ties (or nothing is better) marks none."""
    row = np.asarray(row, dtype=float)
    finite = np.isfinite(row)
    if not better or not finite.any() or np.ptp(row[finite]) == 0:
        return np.zeros(row.shape, dtype=bool)
    target = np.max(row[finite]) if better == "hi" else np.min(row[finite])
    return finite & (row == target)


def residual(actual: Any, m: Method) -> np.ndarray:
    """Per row, what happened minus the method's forecast: the probability for the methods of
    :data:`PROBABILITY_METHODS`, the 0/1 forecast for the others (a vote is not a chance). NaN where
    either is missing.

    >>> m = Method("logistic", "logistic", np.array([1.0, 0.0]), np.array([0.8, 0.3]))
    >>> residual([1.0, 0.0], m).round(3).tolist()
    [0.2, -0.3]
    """
    forecast = m.prob if m.key in PROBABILITY_METHODS else m.forecast
    return np.asarray(actual, dtype=float) - forecast


# ---------------------------------------------------------------------------------- modelling policy
# Shared by the watcher's refresh and the spreadsheet functions, so the two faces give the same model.

MODEL_MAX_MAGNITUDE = 1e100
"""Largest absolute input value the logistic model takes. Its solver forms sums of squares over the
rows (X'WX); at 1e100 a million rows sum to 1e206, far inside the double range (about 1.8e308), while
values near 1e154 and beyond overflow and leave the linear algebra with infinities."""


def weekday_terms(frequency: str | None) -> bool:
    """Whether the logistic model gets weekday indicators: daily data and business days only (weekly
    patterns are the rule in daily operational data; common practice), with no setting to switch them.
    Business days get Tuesday to Friday against Monday (DESIGN.md §3): the design matrix makes a term
    for each weekday the data hold.

    ``frequency`` is :func:`sheetfns.partition.infer_frequency` of the dates (None without dates).

    >>> weekday_terms("daily"), weekday_terms("business"), weekday_terms("weekly"), weekday_terms(None)
    (True, True, False, False)
    """
    return frequency in ("daily", "business")


def model_values(values: Any) -> np.ndarray | None:
    """The value series as it enters the logistic model (as a lagged term), or None when it is itself
    a 0/1 series: an event defined on a 0/1 column would otherwise enter the model twice (as the lagged
    event and as the lagged value).

    >>> model_values([0.0, 1.0, float("nan"), 1.0]) is None, model_values([3.0, 0.0, 1.0]).tolist()
    (True, [3.0, 0.0, 1.0])
    """
    if values is None:
        return None
    arr = np.asarray(values, dtype=float)
    observed = arr[~np.isnan(arr)]
    if observed.size == 0 or np.isin(observed, (0.0, 1.0)).all():
        return None
    return arr


def profile_period(frequency: str | None) -> str:
    """The rows of the profile table (:func:`sheetfns.profile.rate_table` ``by``): quarters for
    quarterly data, months otherwise.

    >>> profile_period("quarterly"), profile_period("weekly"), profile_period("daily")
    ('quarter', 'month', 'month')
    """
    return "quarter" if frequency == "quarterly" else "month"


def model_scale_problem(inputs: dict[str, Any]) -> str | None:
    """Why the logistic model cannot take these inputs (a sentence naming the first input at fault, by
    its key), or None. An input must be finite where it is given (NaN is missing) and at most
    :data:`MODEL_MAX_MAGNITUDE` in absolute value, so the solver's sums of squares cannot overflow.

    >>> model_scale_problem({"the value series": [1.0, float("nan"), 2.0]}) is None
    True
    >>> model_scale_problem({"predictor 'Flow'": [1.0, -1e308]}).split(",")[0]
    "predictor 'Flow' reaches -1e+308"
    """
    for label, x in inputs.items():
        if x is None:
            continue
        arr = np.asarray(x, dtype=float)
        bad = np.isinf(arr) | (np.abs(np.nan_to_num(arr)) > MODEL_MAX_MAGNITUDE)
        if bad.any():
            worst = arr[bad][np.argmax(np.abs(arr[bad]))]
            return (f"{label} reaches {worst:g}, beyond the model's limit of {MODEL_MAX_MAGNITUDE:g} in "
                    f"absolute value (rescale the column, e.g. to thousands)")
    return None


def _cutoff(prob: np.ndarray, cutoff: float) -> np.ndarray:
    out = np.where(prob > cutoff, 1.0, 0.0)
    out[np.isnan(prob)] = np.nan
    return out


@dataclass
class _Runs:
    methods: list[Method]
    logit_fit: Any = None
    notes: list[str] = field(default_factory=list)
    value_model: Any = None


def _numbers(x: Any) -> np.ndarray:
    """A column as floats for the scale check (text cells are blanks, as the models read them)."""
    try:
        return np.asarray(x, dtype=float)
    except (TypeError, ValueError):
        out = np.full(len(x), np.nan)
        for i, v in enumerate(x):
            if isinstance(v, (int, float, np.number)) and not isinstance(v, bool):
                out[i] = float(v)
        return out


def _guarded(label: str, fit: Any, notes: list[str]) -> Any:
    """Call ``fit()``; a ValueError (the data do not allow the model) becomes the note "<label> not
    fitted: ..." and None, numeric warnings become one note. The benchmarks are kept either way."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", RuntimeWarning)
        try:
            out = fit()
        except ValueError as exc:
            out = None
            notes.append(f"{label} not fitted: {exc}")
    numeric = [w for w in caught if issubclass(w.category, RuntimeWarning)]
    for w in caught:
        if not issubclass(w.category, RuntimeWarning):  # not ours to judge: pass it on
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    if numeric:
        notes.append(f"{label}: the numerical computation warned ({numeric[0].message}"
                     f"{f'; {len(numeric) - 1} more warnings' if len(numeric) > 1 else ''}); "
                     f"read its probabilities with care")
    return out


def _prefixed(label: str, notes: Any) -> list[str]:
    """A model's notes, each saying which model it is about."""
    return [n if n.startswith(label) else f"{label}: {n}" for n in notes]


def _merge_notes(notes: list[str], more: list[str]) -> None:
    """Add the value model's notes; one that says what a logistic note says (the shared design, the
    estimation sample) is listed once, for both models."""
    both, head = "logistic model and value model: ", "logistic model: "
    for note in more:
        text = note[len("value model: "):]
        if head + text in notes:
            notes[notes.index(head + text)] = both + text
        else:
            notes.append(note)


def run_methods(events: np.ndarray, *, train_size: int, settings: Settings, dates: Any = None,
                values: np.ndarray | None = None, predictors: dict[str, np.ndarray] | None = None,
                known_ahead: dict[str, np.ndarray] | None = None, criterion: Any = None,
                raw_values: Any = None, min_run: int = 1) -> _Runs:
    """Every method's forecasts for every row, with the logistic coefficients, the value model and
    the notes. ``criterion`` and ``raw_values`` (the column the events came from) switch the value
    model on; where it does not apply its note says why and it is left out."""
    h = settings.horizon
    methods = []
    naive = benchmarks.naive(events, horizon=h, train_size=train_size)
    methods.append(Method("naive", METHOD_LABELS["naive"], naive, naive))
    naive_r = benchmarks.naive(events, horizon=h)
    methods.append(Method("naive_roll", METHOD_LABELS["naive_roll"], naive_r, naive_r))
    if settings.season > 1:
        seas = benchmarks.naive(events, horizon=h, season=settings.season, train_size=train_size)
        methods.append(Method("seasonal", METHOD_LABELS["seasonal"], seas, seas))
        seas_r = benchmarks.naive(events, horizon=h, season=settings.season)
        methods.append(Method("seasonal_roll", METHOD_LABELS["seasonal_roll"], seas_r, seas_r))
    vote = benchmarks.majority_vote(events, train_size=train_size, horizon=h)
    share = benchmarks.majority_share(events, train_size=train_size, horizon=h)
    methods.append(Method("majority", METHOD_LABELS["majority"], vote, share))
    vote_r = benchmarks.majority_vote(events, horizon=h)
    share_r = benchmarks.majority_share(events, horizon=h)
    methods.append(Method("majority_roll", METHOD_LABELS["majority_roll"], vote_r, share_r))
    out = _Runs(methods)

    def add(key: str, prob: Any) -> None:
        prob = np.asarray(prob, dtype=float)
        methods.append(Method(key, METHOD_LABELS[key], _cutoff(prob, settings.cutoff), prob))

    chain = _guarded("two-state chain", lambda: markov.forecast(
        events, train_size=train_size, horizon=h, refit=settings.refit), out.notes)
    if chain is not None:
        add("markov", chain)
    inputs = {**{f"predictor {k!r}": v for k, v in (predictors or {}).items()},
              **{f"known-ahead input {k!r}": v for k, v in (known_ahead or {}).items()}}
    problem = model_scale_problem({"the value series": values, **inputs})
    if problem is not None:  # never hand overflowing data to the linear algebra
        out.notes.append(f"logistic model not fitted: {problem}")
    else:
        fc = _guarded("logistic model", lambda: logistic.forecast(
            events, values=values, predictors=predictors, known_ahead=known_ahead, dates=dates,
            train_size=train_size, horizon=h, lags=settings.lags, cycle=settings.cycle,
            harmonics=settings.harmonics, weekday=settings.weekday, refit=settings.refit), out.notes)
        if fc is not None:
            out.logit_fit = fc.table_fit
            out.notes.extend(_prefixed("logistic model", fc.notes))
            add("logistic", fc.prob)
    if criterion is None or raw_values is None:
        return out
    problem = model_scale_problem({"the value series": _numbers(raw_values), **inputs})
    if problem is not None:
        out.notes.append(f"value model not fitted: {problem}")
        return out
    vm = _guarded("value model", lambda: valuemodel.forecast(
        raw_values, criterion, predictors=predictors, known_ahead=known_ahead, dates=dates,
        train_size=train_size, horizon=h, lags=settings.lags, cycle=settings.cycle,
        harmonics=settings.harmonics, weekday=settings.weekday, refit=settings.refit,
        min_run=min_run), out.notes)
    if vm is not None:
        _merge_notes(out.notes, _prefixed("value model", vm.notes))
        if vm.applies:
            out.value_model = vm
            add("value_model", vm.prob)
    return out


def _score(actual: np.ndarray, m: Method, reference: np.ndarray, settings: Settings) -> dict[str, float]:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # an undefined score is NaN; the sheet shows it blank
        sc = dict(scores.categorical(actual, m.forecast))
        sc.update(scores.probabilistic(actual, m.prob, reference=reference))
        if settings.cost_false_alarm is not None and settings.cost_miss is not None:
            sc["expected_cost"] = scores.expected_cost(sc, settings.cost_false_alarm, settings.cost_miss)
        else:
            sc["expected_cost"] = math.nan
    return sc


def evaluate(events: Any, *, train_size: int, settings: Settings | None = None, dates: Any = None,
             values: Any = None, predictors: dict[str, Any] | None = None,
             known_ahead: dict[str, Any] | None = None, criterion: Any = None, raw_values: Any = None,
             min_run: int = 1) -> Evaluation:
    """Run every method and score it on the validation rows ``train_size .. last observed``.

    Parameters
    ----------
    events : array of shape (n,)
        The 0/1 event series (NaN = missing; trailing NaN rows are future periods).
    train_size : int
        Rows in the training period (see :func:`sheetfns.partition.split`).
    settings : Settings
        Horizon, season, model options, cutoff and costs.
    dates, values, predictors, known_ahead
        Passed on to :func:`sheetfns.logistic.forecast` (and, but ``values``, to the value model).
    criterion, raw_values, min_run
        The event rule, the column it was applied to and its ``min_run``
        (:func:`sheetfns.events.flag`): with both of the first two the value model
        (:func:`sheetfns.valuemodel.forecast`) runs too. Without them it is left out, silently.

    The best method is the one with the lowest validation Brier score (on a tie the simpler) that
    beats the majority share; a 0/1 method that forecast one value for every validation period is
    passed over, and none is named with fewer than 10 validation events
    (:mod:`sheetfns._scoring.verdict`).
    """
    settings = settings or Settings()
    y = np.asarray(events, dtype=float)
    n = y.size
    last = last_observed(y)
    runs = run_methods(
        y, train_size=train_size, settings=settings, dates=dates, values=values,
        predictors=predictors, known_ahead=known_ahead, criterion=criterion, raw_values=raw_values,
        min_run=min_run)
    methods = runs.methods
    valid = slice(train_size, last + 1)
    actual = y[valid]
    byname = {m.key: m for m in methods}
    reference = byname["majority"].prob[valid]
    card = {m.key: _score(actual, _slice(m, valid), reference, settings) for m in methods}

    def usable(k: str) -> bool:
        return not math.isnan(card[k]["brier"])

    ranked = sorted((k for k in card if usable(k)), key=lambda k: (card[k]["brier"], _PREFERENCE.index(k)))
    check = _verdict.check_periods(y[:train_size], actual)
    constant = _constant_votes(methods, valid)
    best, passed = _verdict.choose(ranked, {k: card[k]["brier_skill"] for k in card}, constant, check)
    comparisons: dict[str, float] = {}
    reliability = roc = None
    bench = [k for k in ranked if k not in MODEL_METHODS]
    if bench:
        comparisons["best_benchmark"] = bench[0]  # type: ignore[assignment]
        for key in MODEL_METHODS:
            if key in byname:
                comparisons.update(_compare(actual, byname[key], byname[bench[0]], valid, settings.horizon,
                                            prefix=f"{key}_vs_best"))
    if "logistic" in byname:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            ok = ~np.isnan(actual) & ~np.isnan(byname["logistic"].prob[valid])
            if ok.sum() >= 2:
                reliability = scores.brier_parts(actual[ok], byname["logistic"].prob[valid][ok])
                roc = scores.roc_points(actual[ok], byname["logistic"].prob[valid][ok])
    if best is not None and best != "majority":
        comparisons.update(_compare(actual, byname[best], byname["majority"], valid, settings.horizon,
                                    prefix="best_vs_share"))
    lowest = ranked[0] if ranked else None
    verdict = _verdict.verdict_text(best, lowest, passed, METHOD_LABELS, card, constant, check,
                                    comparisons.get("best_vs_share_dm_p", math.nan))
    return Evaluation(n=n, train_size=train_size, last_observed=last, methods=tuple(methods),
                      scorecard=card, best=best, comparisons=comparisons, verdict=verdict,
                      logit_fit=runs.logit_fit, notes=tuple(runs.notes), reliability=reliability,
                      roc=roc, horizon=settings.horizon, warnings=check.warnings(),
                      value_model=runs.value_model, lowest=lowest)


def _constant_votes(methods: list[Method], valid: slice) -> dict[str, float]:
    """The 0/1 methods (not of :data:`PROBABILITY_METHODS`) whose forecast was one value on every
    scored validation row: method key -> that value."""
    out = {}
    for m in methods:
        if m.key in PROBABILITY_METHODS:
            continue
        f = m.forecast[valid]
        f = f[~np.isnan(f)]
        if f.size and (f == f[0]).all():
            out[m.key] = float(f[0])
    return out


def _slice(m: Method, sl: slice) -> Method:
    return Method(m.key, m.label, m.forecast[sl], m.prob[sl])


def _compare(actual: np.ndarray, a: Method, b: Method, valid: slice, horizon: int, *,
             prefix: str) -> dict[str, float]:
    pa, pb = a.prob[valid], b.prob[valid]
    fa, fb = a.forecast[valid], b.forecast[valid]
    out: dict[str, float] = {}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ok = ~(np.isnan(actual) | np.isnan(pa) | np.isnan(pb))
        try:
            out[f"{prefix}_dm"], out[f"{prefix}_dm_p"] = scores.diebold_mariano(
                actual[ok], pa[ok], pb[ok], horizon=horizon)
        except ValueError:
            out[f"{prefix}_dm"] = out[f"{prefix}_dm_p"] = math.nan
        ok = ~(np.isnan(actual) | np.isnan(fa) | np.isnan(fb))
        try:
            out[f"{prefix}_mcnemar"], out[f"{prefix}_mcnemar_p"] = scores.mcnemar(
                actual[ok], fa[ok], fb[ok])
        except ValueError:
            out[f"{prefix}_mcnemar"] = out[f"{prefix}_mcnemar_p"] = math.nan
    return out
