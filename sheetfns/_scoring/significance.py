"""Sampling uncertainty of scores: McNemar's test for two 0/1 forecasts, the Diebold-Mariano test
for two probability forecasts, the two-proportion z test for two event rates, and Wilson intervals
for proportions.

Public names are re-exported by :mod:`sheetfns.scores`; import them from there.
"""
from __future__ import annotations

import math
import warnings
from typing import Any

import numpy as np

from sheetfns._ols.tdist import t_sf
from sheetfns._scoring.base import Quotient, UndefinedScoreWarning, paired_prob
from sheetfns.checks import _show, as_events, as_int, as_nonnegative, same_length
from sheetfns.errors import InputError


def mcnemar(actual: Any, forecast_a: Any, forecast_b: Any, *, correction: bool = True
            ) -> tuple[float, float]:
    r"""McNemar's test that two 0/1 forecasts of the same rows are right equally often.

    Only the discordant rows count: b rows where forecast A was right and B wrong, c rows where
    B was right and A wrong. Under the null hypothesis a discordant row is as likely to go either
    way, and

    .. math:: \chi^2 = \frac{(\max(|b - c| - 1, 0))^2}{b + c}
              \quad\text{or, without correction,}\quad \frac{(b - c)^2}{b + c}

    is referred to chi-square with 1 degree of freedom (p-value = erfc(sqrt(chi2 / 2))). The
    continuity correction of Edwards (1948) is floored at 0, so b = c gives 0, not 1 / (b + c).

    Parameters
    ----------
    actual, forecast_a, forecast_b : sequence of {0, 1, NaN}, length n
        What happened and the two forecasts; rows where any is NaN are skipped.
    correction : bool, default True
        Apply the continuity correction (keyword only).

    Returns
    -------
    (statistic, pvalue) : tuple of float
        Both NaN, with an :class:`UndefinedScoreWarning`, when there is no discordant row
        (the forecasts were right on exactly the same rows).

    Raises
    ------
    InputError
        If a series holds a value outside {0, 1, NaN} or the lengths differ.

    References
    ----------
    .. [1] McNemar, Q. (1947). Note on the sampling error of the difference between correlated
       proportions or percentages. *Psychometrika*, 12, 153-157.
    .. [2] Edwards, A. L. (1948). Note on the "correction for continuity" in testing the
       significance of the difference between correlated proportions. *Psychometrika*, 13,
       185-187.
    .. [3] Agresti, A. (2013). *Categorical Data Analysis* (3rd ed.), section 11.1. Wiley.
    """
    y = as_events(actual, "actual")
    fa = as_events(forecast_a, "forecast_a")
    fb = as_events(forecast_b, "forecast_b")
    same_length(actual=y, forecast_a=fa, forecast_b=fb)
    keep = ~(np.isnan(y) | np.isnan(fa) | np.isnan(fb))
    ra, rb = fa[keep] == y[keep], fb[keep] == y[keep]
    b = int(np.count_nonzero(ra & ~rb))
    c = int(np.count_nonzero(~ra & rb))
    return _mcnemar_counts(b, c, correction)


def _mcnemar_counts(b: int, c: int, correction: bool) -> tuple[float, float]:
    if b + c == 0:
        q = Quotient()
        q.mark("mcnemar")
        q.warn("no discordant rows", stacklevel=4)
        return math.nan, math.nan
    diff = abs(b - c)
    if correction:
        diff = max(diff - 1, 0)
    stat = diff * diff / (b + c)
    return stat, math.erfc(math.sqrt(stat / 2.0))


def diebold_mariano(actual: Any, prob_a: Any, prob_b: Any, horizon: int = 1
                    ) -> tuple[float, float]:
    r"""Diebold-Mariano test of equal Brier (squared error) loss, with the small-sample
    correction of Harvey, Leybourne & Newbold (1997).

    With loss differential :math:`d_t = (p_{a,t} - o_t)^2 - (p_{b,t} - o_t)^2` over the T scored
    rows, mean :math:`\bar d` and autocovariances
    :math:`\hat\gamma_k = \frac1T \sum_{t=k+1}^{T} (d_t - \bar d)(d_{t-k} - \bar d)`,

    .. math::

        \hat V = \frac1T \Big(\hat\gamma_0 + 2 \sum_{k=1}^{h-1} \hat\gamma_k\Big), \quad
        DM = \frac{\bar d}{\sqrt{\hat V}}, \quad
        DM^* = DM \sqrt{\frac{T + 1 - 2h + h(h - 1)/T}{T}}

    (h-step forecast errors are at most MA(h - 1), so h - 1 autocovariances with equal weights, as
    in Diebold & Mariano 1995), and the two-sided p-value is taken from Student's t with T - 1
    degrees of freedom. A positive statistic means forecast A had the larger loss (B was better).

    If :math:`\hat V \le 0` (possible for h > 1 when the autocovariances are negative) the
    variance falls back to :math:`\hat\gamma_0 / T` with an :class:`UndefinedScoreWarning`.

    Parameters
    ----------
    actual : sequence of {0, 1, NaN}, length n
        What happened.
    prob_a, prob_b : sequence of float in [0, 1] or NaN, length n
        The two probability forecasts (0/1 forecasts are probabilities too). Rows where any of the
        three is NaN are dropped and the remaining rows treated as consecutive.
    horizon : int, default 1
        Forecast horizon h >= 1, less than the number of scored rows.

    Returns
    -------
    (statistic, pvalue) : tuple of float
        :math:`DM^*` and its p-value. Both NaN with an :class:`UndefinedScoreWarning` when fewer
        than two rows are scored or the losses do not vary (:math:`\hat\gamma_0 = 0`, for example
        identical forecasts).

    Raises
    ------
    InputError
        If a series is invalid, the lengths differ, or ``horizon`` is not an integer in
        [1, T - 1].

    References
    ----------
    .. [1] Diebold, F. X., & Mariano, R. S. (1995). Comparing predictive accuracy. *Journal of
       Business & Economic Statistics*, 13, 253-263.
    .. [2] Harvey, D., Leybourne, S., & Newbold, P. (1997). Testing the equality of prediction
       mean squared errors. *International Journal of Forecasting*, 13, 281-291.
    """
    h = as_int(horizon, "horizon", minimum=1)
    o, pa, pb = paired_prob(actual, prob_a=prob_a, prob_b=prob_b)
    t = o.size
    q = Quotient()
    if t < 2:
        q.mark("diebold_mariano")
        q.warn("fewer than 2 scored rows")
        return math.nan, math.nan
    if h >= t:
        raise InputError(f"`horizon` must be less than the number of scored rows ({t}); got {horizon}",
                         argument="horizon", value=horizon)
    d = (pa - o) ** 2 - (pb - o) ** 2
    e = d - d.mean()
    gamma0 = float(e @ e) / t
    if gamma0 <= 0.0:
        q.mark("diebold_mariano")
        q.warn("the loss differential does not vary")
        return math.nan, math.nan
    lrv = gamma0 + 2.0 * sum(float(e[k:] @ e[:-k]) / t for k in range(1, h))
    if lrv <= 0.0:
        warnings.warn(f"the long-run variance at horizon {h} is not positive (negative "
                      "autocovariances); the Diebold-Mariano test used the lag-0 variance instead",
                      UndefinedScoreWarning, stacklevel=2)
        lrv = gamma0
    stat = float(d.mean()) / math.sqrt(lrv / t)
    stat *= math.sqrt((t + 1 - 2 * h + h * (h - 1) / t) / t)
    # Student-t tail with t - 1 degrees of freedom from our own t distribution (no scipy on the
    # refresh path: importing scipy.special cost 0.23-0.4 s of a small workbook's command)
    return stat, float(2.0 * t_sf(abs(stat), t - 1))


def two_proportion(events_a: float, n_a: float, events_b: float, n_b: float) -> tuple[float, float]:
    r"""Two-proportion z test (pooled) that two independent samples have the same event rate.

    With rates :math:`\hat p_a = x_a / n_a`, :math:`\hat p_b = x_b / n_b` and the pooled rate
    :math:`\hat p = (x_a + x_b) / (n_a + n_b)`,

    .. math:: z = \frac{\hat p_a - \hat p_b}{\sqrt{\hat p (1 - \hat p) (1 / n_a + 1 / n_b)}}

    is referred to the standard normal; the two-sided p-value is erfc(|z| / sqrt 2). (The score
    test of equal proportions; its square is Pearson's chi-square of the 2 x 2 table without
    continuity correction.)

    Parameters
    ----------
    events_a, n_a : float
        Events and periods of the first sample (e.g. the training period).
    events_b, n_b : float
        Events and periods of the second sample (e.g. the validation period).

    Returns
    -------
    (statistic, pvalue) : tuple of float
        z (positive when the first rate is the higher) and its two-sided p-value. Both NaN with an
        :class:`UndefinedScoreWarning` when a sample is empty or the pooled rate is 0 or 1 (no
        variation to test).

    Raises
    ------
    InputError
        If a count is negative or not a number, or events exceed periods.

    References
    ----------
    .. [1] Agresti, A. (2013). *Categorical Data Analysis* (3rd ed.), section 3.1.2 (comparing two
       proportions: the score statistic with the pooled standard error). Wiley.

    Examples
    --------
    >>> z, p = two_proportion(30, 100, 15, 100)   # 30% against 15%
    >>> round(z, 3), round(p, 4)
    (2.54, 0.0111)
    """
    xa, na = _number(events_a, "events_a"), _number(n_a, "n_a")
    xb, nb = _number(events_b, "events_b"), _number(n_b, "n_b")
    for x, m, name in ((xa, na, "events_a"), (xb, nb, "events_b")):
        if x > m:
            raise InputError(f"`{name}` must not exceed its number of periods ({_show(m)}); got {_show(x)}",
                             argument=name, value=x)
    pooled = (xa + xb) / (na + nb) if na > 0 and nb > 0 else math.nan
    if not 0.0 < pooled < 1.0:
        q = Quotient()
        q.mark("two_proportion")
        q.warn("an empty sample, or a pooled rate of 0 or 1")
        return math.nan, math.nan
    z = (xa / na - xb / nb) / math.sqrt(pooled * (1.0 - pooled) * (1.0 / na + 1.0 / nb))
    return z, math.erfc(abs(z) / math.sqrt(2.0))


def wilson(successes: float, n: float, confidence: float = 0.95) -> tuple[float, float]:
    r"""Wilson score interval for a binomial proportion.

    With :math:`\hat p = x / n` and z the two-sided normal quantile of ``confidence``,

    .. math::

        \frac{\hat p + \frac{z^2}{2n} \pm z \sqrt{\frac{\hat p (1 - \hat p)}{n}
        + \frac{z^2}{4 n^2}}}{1 + \frac{z^2}{n}}

    It stays inside [0, 1] and keeps close to its nominal coverage for small n or p near 0 or 1,
    where the plain normal interval fails.

    Parameters
    ----------
    successes : float
        Count x of successes, 0 <= x <= n (for a score: its numerator, e.g. hits for sensitivity).
    n : float
        Number of trials (the score's denominator, e.g. hits + misses).
    confidence : float, default 0.95
        Coverage, strictly between 0 and 1.

    Returns
    -------
    (low, high) : tuple of float
        Both NaN with an :class:`UndefinedScoreWarning` when n = 0.

    Raises
    ------
    InputError
        If a count is negative or not a number, successes > n, or confidence is outside (0, 1).

    References
    ----------
    .. [1] Wilson, E. B. (1927). Probable inference, the law of succession, and statistical
       inference. *Journal of the American Statistical Association*, 22, 209-212.
    .. [2] Agresti, A., & Coull, B. A. (1998). Approximate is better than "exact" for interval
       estimation of binomial proportions. *The American Statistician*, 52, 119-126.

    Examples
    --------
    >>> low, high = wilson(28, 51)   # Finley's hits out of tornadoes observed
    >>> round(low, 3), round(high, 3)
    (0.414, 0.677)
    """
    x = _number(successes, "successes")
    m = _number(n, "n")
    if x > m:
        raise InputError(f"`successes` must not exceed `n` ({_show(n)}); got {_show(successes)}",
                         argument="successes", value=successes)
    try:
        conf = float(confidence)
    except (TypeError, ValueError) as exc:
        raise InputError(f"`confidence` must be a number strictly between 0 and 1; "
                         f"got {_show(confidence)}", argument="confidence", value=confidence) from exc
    if not 0.0 < conf < 1.0:
        raise InputError(f"`confidence` must be a number strictly between 0 and 1; got {_show(confidence)}",
                         argument="confidence", value=confidence)
    if m == 0:
        q = Quotient()
        q.mark("wilson interval")
        q.warn("n = 0")
        return math.nan, math.nan
    from statistics import NormalDist  # lazy: statistics imports decimal and fractions (~10 ms)

    z = NormalDist().inv_cdf(0.5 + conf / 2.0)
    p = x / m
    z2n = z * z / m
    centre = (p + z2n / 2.0) / (1.0 + z2n)
    half = z * math.sqrt(p * (1.0 - p) / m + z2n / (4.0 * m)) / (1.0 + z2n)
    return max(0.0, centre - half), min(1.0, centre + half)


def _number(value: Any, name: str) -> float:
    return as_nonnegative(value, name, what="a count")


#: Proportion scores with a Wilson interval: key -> (numerator, denominator) as count names.
_PROPORTIONS = {
    "accuracy": (("hits", "correct_negatives"), ("hits", "false_alarms", "misses", "correct_negatives")),
    "error_rate": (("false_alarms", "misses"), ("hits", "false_alarms", "misses", "correct_negatives")),
    "sensitivity": (("hits",), ("hits", "misses")),
    "specificity": (("correct_negatives",), ("false_alarms", "correct_negatives")),
    "precision": (("hits",), ("hits", "false_alarms")),
    "false_alarm_ratio": (("false_alarms",), ("hits", "false_alarms")),
    "false_alarm_rate": (("false_alarms",), ("false_alarms", "correct_negatives")),
    "critical_success_index": (("hits",), ("hits", "false_alarms", "misses")),
}


def wilson_intervals(hits: float, false_alarms: float, misses: float, correct_negatives: float,
                     confidence: float = 0.95) -> dict[str, tuple[float, float]]:
    """Wilson intervals for every categorical score that is a proportion of counts.

    Parameters
    ----------
    hits, false_alarms, misses, correct_negatives : float
        The 2x2 counts.
    confidence : float, default 0.95
        Coverage of each interval (not simultaneous).

    Returns
    -------
    dict[str, tuple[float, float]]
        ``(low, high)`` for accuracy, error_rate, sensitivity, specificity, precision,
        false_alarm_ratio, false_alarm_rate and critical_success_index (each x successes out of
        the score's denominator, see :func:`wilson`). NaN pairs, with one
        :class:`UndefinedScoreWarning`, where the denominator is 0.
    """
    counts = {"hits": hits, "false_alarms": false_alarms, "misses": misses,
              "correct_negatives": correct_negatives}
    counts = {k: _number(v, k) for k, v in counts.items()}
    q = Quotient()
    out: dict[str, tuple[float, float]] = {}
    for key, (num, den) in _PROPORTIONS.items():
        m = sum(counts[k] for k in den)
        if m == 0:
            out[key] = (q.mark(key), math.nan)
        else:
            out[key] = wilson(sum(counts[k] for k in num), m, confidence)
    q.warn()
    return out
