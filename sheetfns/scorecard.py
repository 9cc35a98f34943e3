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
``logistic``       logistic              probability from the logit model; 0/1 = probability >
                                         cutoff
=================  ====================  ==========================================================

A 0/1 forecast used as a probability gives a Brier score equal to its error rate (common practice),
so the deterministic benchmarks stay comparable with the probability forecasts on every row of the
scorecard.
"""
from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from sheetfns import benchmarks, logistic, scores
from sheetfns.checks import last_observed

METHOD_LABELS: dict[str, str] = {
    "naive": "naive",
    "naive_roll": "rolling naive",
    "seasonal": "seasonal naive",
    "seasonal_roll": "rolling seasonal naive",
    "majority": "majority vote",
    "majority_roll": "rolling majority",
    "logistic": "logistic",
}

# The methods whose forecast is a probability (DESIGN.md §8): the majority share is one, a vote or a
# naive forecast is not, so those report only their 0/1 forecast, never a chance.
PROBABILITY_METHODS = frozenset({"majority", "majority_roll", "logistic", "value_model", "markov"})

_PREFERENCE = ("majority", "majority_roll", "naive_roll", "naive", "seasonal_roll", "seasonal", "logistic")

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
    best: str | None  # method key with the lowest validation Brier score
    comparisons: dict[str, float]  # McNemar / Diebold-Mariano of logistic vs best benchmark etc.
    verdict: str
    coefficients: Any  # the logistic coefficient table
    notes: tuple[str, ...] = field(default_factory=tuple)
    reliability: Any = None  # reliability table of the logistic validation probabilities
    roc: Any = None  # ROC points of the logistic validation probabilities
    horizon: int = 1

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


def run_methods(events: np.ndarray, *, train_size: int, settings: Settings, dates: Any = None,
                values: np.ndarray | None = None, predictors: dict[str, np.ndarray] | None = None,
                known_ahead: dict[str, np.ndarray] | None = None) -> tuple[list[Method], Any, list[str]]:
    """Every method's forecasts for every row; returns (methods, logistic coefficients, notes)."""
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
    notes: list[str] = []
    coefficients = None
    inputs = {"the value series": values, **{f"predictor {k!r}": v for k, v in (predictors or {}).items()},
              **{f"known-ahead input {k!r}": v for k, v in (known_ahead or {}).items()}}
    problem = model_scale_problem(inputs)
    if problem is not None:  # never hand overflowing data to the linear algebra
        notes.append(f"logistic model not fitted: {problem}")
        return methods, coefficients, notes
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", RuntimeWarning)
        try:
            fc = logistic.forecast(
                events, values=values, predictors=predictors, known_ahead=known_ahead, dates=dates,
                train_size=train_size, horizon=h, lags=settings.lags, cycle=settings.cycle,
                harmonics=settings.harmonics, weekday=settings.weekday, refit=settings.refit)
        except ValueError as exc:  # the data do not allow a logistic model: say so, keep the benchmarks
            fc = None
            notes.append(f"logistic model not fitted: {exc}")
    numeric = [w for w in caught if issubclass(w.category, RuntimeWarning)]
    for w in caught:
        if not issubclass(w.category, RuntimeWarning):  # not ours to judge: pass it on
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    if numeric:
        notes.append(f"logistic model: the numerical computation warned ({numeric[0].message}"
                     f"{f'; {len(numeric) - 1} more warnings' if len(numeric) > 1 else ''}); "
                     f"read its probabilities with care")
    if fc is not None:
        coefficients = fc.coefficients
        notes.extend(fc.notes)
        prob = np.asarray(fc.prob, dtype=float)
        methods.append(Method("logistic", METHOD_LABELS["logistic"], _cutoff(prob, settings.cutoff), prob))
    return methods, coefficients, notes


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
             known_ahead: dict[str, Any] | None = None) -> Evaluation:
    """Run every method and score it on the validation rows ``train_size .. last observed``.

    Parameters
    ----------
    events : array of shape (n,)
        The 0/1 event series (NaN = missing; trailing NaN rows are future periods).
    train_size : int
        Rows in the training period (see :func:`sheetfns.partition.split`).
    settings : Settings
        Horizon, season, logistic options, cutoff and costs.
    dates, values, predictors, known_ahead
        Passed on to :func:`sheetfns.logistic.forecast`.
    """
    settings = settings or Settings()
    y = np.asarray(events, dtype=float)
    n = y.size
    last = last_observed(y)
    methods, coefficients, notes = run_methods(
        y, train_size=train_size, settings=settings, dates=dates, values=values,
        predictors=predictors, known_ahead=known_ahead)
    valid = slice(train_size, last + 1)
    actual = y[valid]
    byname = {m.key: m for m in methods}
    reference = byname["majority"].prob[valid]
    card = {m.key: _score(actual, _slice(m, valid), reference, settings) for m in methods}

    def usable(k: str) -> bool:
        return not math.isnan(card[k]["brier"])

    # On a tie the simpler method wins: a model must beat the reference to be named best.
    ranked = sorted((k for k in card if usable(k)), key=lambda k: (card[k]["brier"], _PREFERENCE.index(k)))
    best = ranked[0] if ranked else None
    comparisons: dict[str, float] = {}
    reliability = roc = None
    if "logistic" in byname:
        bench = [k for k in ranked if k != "logistic"]
        if bench:
            b = byname[bench[0]]
            lg = byname["logistic"]
            comparisons.update(_compare(actual, lg, b, valid, settings.horizon, prefix="logistic_vs_best"))
            comparisons["best_benchmark"] = bench[0]  # type: ignore[assignment]
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            ok = ~np.isnan(actual) & ~np.isnan(byname["logistic"].prob[valid])
            if ok.sum() >= 2:
                reliability = scores.brier_decomposition(actual[ok], byname["logistic"].prob[valid][ok])
                roc = scores.roc_points(actual[ok], byname["logistic"].prob[valid][ok])
    if best is not None and best != "majority":
        comparisons.update(_compare(actual, byname[best], byname["majority"], valid, settings.horizon,
                                    prefix="best_vs_share"))
    verdict = _verdict(best, card, comparisons)
    return Evaluation(n=n, train_size=train_size, last_observed=last, methods=tuple(methods),
                      scorecard=card, best=best, comparisons=comparisons, verdict=verdict,
                      coefficients=coefficients, notes=tuple(notes), reliability=reliability, roc=roc,
                      horizon=settings.horizon)


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


def _verdict(best: str | None, card: dict[str, dict[str, float]], comparisons: dict[str, float]) -> str:
    """The plain-words verdict of the header block."""
    if best is None:
        return "No method could be scored: the validation period holds no usable rows."
    label = METHOD_LABELS[best]
    brier = card[best]["brier"]
    if best == "majority":
        return (f"Best on the validation period: {label} (Brier {brier:.3f}). No method beat the "
                f"majority share, so the share itself is the forecast to use.")
    bss = card[best]["brier_skill"]
    p = comparisons.get("best_vs_share_dm_p", math.nan)
    if math.isnan(p):
        sig = "the significance of the difference could not be tested"
    elif p < 0.05:
        sig = f"the difference is significant at 5% (Diebold-Mariano p = {p:.3f})"
    else:
        sig = f"the difference is not significant at 5% (Diebold-Mariano p = {p:.3f})"
    skill = "n/a" if math.isnan(bss) else f"{bss:+.1%}"
    return (f"Best on the validation period: {label} (Brier {brier:.3f}, skill {skill} against the "
            f"majority share); {sig}.")
