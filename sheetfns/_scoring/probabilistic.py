"""Probability verification: Brier score and skill, log loss, ROC area and points, and the Murphy
(1973) decomposition of the Brier score with its reliability table.

Public names are re-exported by :mod:`sheetfns.scores`; import them from there.
"""
from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any, NamedTuple

import numpy as np

from sheetfns._scoring.base import Quotient, paired_prob, ratio
from sheetfns.checks import _show, as_int
from sheetfns.errors import InputError

#: Probabilities are clipped to [LOG_LOSS_EPS, 1 - LOG_LOSS_EPS] before taking logarithms, so a
#: confident miss costs -log(1e-15) = 34.5 instead of infinity.
LOG_LOSS_EPS = 1e-15


def _midranks(x: np.ndarray) -> np.ndarray:
    """Ranks 1..n of ``x``, tied values sharing the mean of their ranks."""
    _, inverse, counts = np.unique(x, return_inverse=True, return_counts=True)
    upper = np.cumsum(counts)
    return (upper - (counts - 1) / 2.0)[inverse]


# --------------------------------------------------------------------------------- the definitions
# One function per score key of PROBABILISTIC_KEYS, on the scored rows only (no NaN): o_t the outcome
# (0/1), p_t the probability, N the rows, s the base rate (mean of o). *Perfect*: the value of a
# forecast of 1 on every event row and 0 elsewhere. *No skill*: the value of the climatological
# forecast, the base rate s in every row (the reference forecast of probability verification); where
# that is one number for every s, ``SCORE_INFO[key].no_skill`` holds it.


def brier(actual: np.ndarray, prob: np.ndarray) -> float:
    r"""Brier score (BS): the mean squared error of the probability (probability score, PS;
    quadratic score).

    .. math:: \mathrm{BS} = \frac1N \sum_t (p_t - o_t)^2

    Range [0, 1]; perfect 0; no skill s(1 - s), the score of the climatological forecast (the
    uncertainty term of the Murphy decomposition). NaN with no scored row.

    References
    ----------
    .. [1] Brier, G. W. (1950). Verification of forecasts expressed in terms of probability.
       *Monthly Weather Review*, 78, 1-3.
    """
    return float(np.mean((prob - actual) ** 2)) if actual.size else math.nan


def brier_skill(brier_score: float, reference_brier: float) -> float:
    r"""Brier skill score (BSS): the share of the reference forecast's Brier score that the forecast
    removes.

    .. math:: \mathrm{BSS} = 1 - \frac{\mathrm{BS}}{\mathrm{BS}_{\mathrm{ref}}}

    Range (-inf, 1]; perfect 1; no skill 0 (the reference itself scores 0, and so does the
    climatological forecast against the default reference, climatology). NaN when the reference
    scores 0.

    References
    ----------
    .. [1] Murphy, A. H. (1988). Skill scores based on the mean square error and their relationships
       to the correlation coefficient. *Monthly Weather Review*, 116, 2417-2424.
    .. [2] Brier, G. W. (1950). Verification of forecasts expressed in terms of probability.
       *Monthly Weather Review*, 78, 1-3.
    """
    return 1.0 - ratio(brier_score, reference_brier)


def log_loss(actual: np.ndarray, prob: np.ndarray) -> float:
    r"""Logarithmic score (log loss; ignorance score, in nats; cross-entropy).

    .. math:: -\frac1N \sum_t \left[o_t \ln p_t + (1 - o_t) \ln(1 - p_t)\right]

    with :math:`p_t` clipped to [1e-15, 1 - 1e-15] (``LOG_LOSS_EPS``), so a confident miss costs
    34.5 rather than infinity. Range [0, 34.5]; perfect 0 (up to the clipping); no skill
    -[s ln s + (1 - s) ln(1 - s)], the entropy of the base rate (a constant 0.5 scores ln 2).
    NaN with no scored row.

    References
    ----------
    .. [1] Good, I. J. (1952). Rational decisions. *Journal of the Royal Statistical Society,
       Series B*, 14, 107-114.
    """
    if not actual.size:
        return math.nan
    # Log of the probability given to what happened, floored at log(eps): the same as clipping p to
    # [eps, 1 - eps] without the rounding of 1 - eps; log1p keeps small p exact.
    floor = math.log(LOG_LOSS_EPS)
    with np.errstate(divide="ignore"):
        logp = np.where(actual == 1.0, np.log(np.maximum(prob, LOG_LOSS_EPS)),
                        np.maximum(np.log1p(-prob), floor))
    return 0.0 - float(np.mean(logp))     # 0.0, not -0.0, for a perfect forecast


def roc_auc(actual: np.ndarray, prob: np.ndarray) -> float:
    r"""Area under the ROC curve: the chance that a random event row got a higher probability than
    a random non-event row, ties counting one half (c statistic; concordance index).

    .. math:: A = \frac{U}{n_1 n_0}

    with U the Mann-Whitney statistic of the event rows' probabilities against the non-event rows'
    (n_1 and n_0 rows). Range [0, 1]; perfect 1; no skill 0.5. NaN when only one class occurred.

    References
    ----------
    .. [1] Bamber, D. (1975). The area above the ordinal dominance graph and the area below the
       receiver operating characteristic graph. *Journal of Mathematical Psychology*, 12, 387-415.
    .. [2] Hanley, J. A., & McNeil, B. J. (1982). The meaning and use of the area under a receiver
       operating characteristic (ROC) curve. *Radiology*, 143, 29-36.
    .. [3] Mason, I. (1982). A model for assessment of weather forecasts. *Australian
       Meteorological Magazine*, 30, 291-303.
    """
    n1 = int(np.count_nonzero(actual == 1.0))
    n0 = actual.size - n1
    if n1 == 0 or n0 == 0:
        return math.nan
    u = float(_midranks(prob)[actual == 1.0].sum()) - n1 * (n1 + 1) / 2.0
    return u / (n1 * float(n0))


def reliability(count: np.ndarray, sum_p: np.ndarray, sum_o: np.ndarray) -> float:
    r"""Reliability (calibration error): how far the forecast probabilities are from the observed
    frequencies, bin by bin (the first term of the Murphy decomposition).

    .. math:: \mathrm{REL} = \frac1N \sum_k n_k (\bar p_k - \bar o_k)^2

    over bins k holding :math:`n_k` forecasts with mean :math:`\bar p_k` and event frequency
    :math:`\bar o_k` (``count``, ``sum_p``, ``sum_o`` per bin). Range [0, 1]; perfect 0; no
    skill 0: the climatological forecast is perfectly reliable (reliability is not skill). NaN
    with no scored row.

    References
    ----------
    .. [1] Murphy, A. H. (1973). A new vector partition of the probability score. *Journal of
       Applied Meteorology*, 12, 595-600.
    """
    total = float(count.sum())
    if total == 0:
        return math.nan
    full = count > 0
    pbar = sum_p[full] / count[full]
    fbar = sum_o[full] / count[full]
    return float(np.sum(count[full] * (pbar - fbar) ** 2)) / total


def resolution(count: np.ndarray, sum_p: np.ndarray, sum_o: np.ndarray) -> float:
    r"""Resolution: how far the observed frequencies of the bins are from the base rate (the
    second term of the Murphy decomposition, subtracted).

    .. math:: \mathrm{RES} = \frac1N \sum_k n_k (\bar o_k - \bar o)^2

    Range [0, UNC] (at most 0.25); perfect UNC = s(1 - s); no skill 0 (a constant forecast). NaN
    with no scored row.

    References
    ----------
    .. [1] Murphy, A. H. (1973). A new vector partition of the probability score. *Journal of
       Applied Meteorology*, 12, 595-600.
    """
    total = float(count.sum())
    if total == 0:
        return math.nan
    obar = float(sum_o.sum()) / total
    full = count > 0
    fbar = sum_o[full] / count[full]
    return float(np.sum(count[full] * (fbar - obar) ** 2)) / total


def uncertainty(count: np.ndarray, sum_p: np.ndarray, sum_o: np.ndarray) -> float:
    r"""Uncertainty: the variance of the outcome, s(1 - s) (the third term of the Murphy
    decomposition; the Brier score of the climatological forecast).

    .. math:: \mathrm{UNC} = \bar o (1 - \bar o)

    Range [0, 0.25]; perfect and no skill s(1 - s) itself: a property of the observations alone,
    the same for every forecast of them. NaN with no scored row.

    References
    ----------
    .. [1] Murphy, A. H. (1973). A new vector partition of the probability score. *Journal of
       Applied Meteorology*, 12, 595-600.
    """
    total = float(count.sum())
    if total == 0:
        return math.nan
    obar = float(sum_o.sum()) / total
    return obar * (1.0 - obar)


#: Every probability score key, in the order of ``PROBABILISTIC_KEYS``, with its definition.
DEFINITIONS = {f.__name__: f for f in (brier, brier_skill, log_loss, roc_auc, reliability, resolution,
                                       uncertainty)}
#: The probability score keys (DESIGN.md section 4), in the order of their definitions.
PROBABILISTIC_KEYS: tuple[str, ...] = tuple(DEFINITIONS)


def _bin_index(p: np.ndarray, bins: int | Sequence[float]) -> tuple[np.ndarray, np.ndarray]:
    """Bin number (0-based) of each forecast, and the bin edges."""
    if isinstance(bins, (int, np.integer)) and not isinstance(bins, bool):
        k = as_int(bins, "bins", minimum=1)
        edges = np.linspace(0.0, 1.0, k + 1)
        # floor(p * k), with values within 1e-9 of an edge counted on the edge (0.3 * 10 is
        # 3.0000000000000004, 0.29 * 100 is 28.999999999999996); p = 1 goes to the last bin.
        idx = np.floor(np.round(p * k, 9)).astype(np.int64)
        return np.clip(idx, 0, k - 1), edges
    try:
        edges = np.asarray(bins, dtype=float)
    except (TypeError, ValueError) as exc:
        raise InputError(f"`bins` must be a number of bins or a sequence of edges; got {_show(bins)}",
                         argument="bins", value=bins) from exc
    if (edges.ndim != 1 or edges.size < 2 or not np.all(np.diff(edges) > 0)
            or edges[0] > 0.0 or edges[-1] < 1.0):
        raise InputError("`bins` edges must be increasing and cover [0, 1] (first <= 0, last >= 1); "
                         f"got {_show(bins)}", argument="bins", value=bins)
    idx = np.searchsorted(edges, p, side="right") - 1
    return np.clip(idx, 0, edges.size - 2), edges


def _bins(a: np.ndarray, p: np.ndarray, bins: int | Sequence[float]
          ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """The bin edges and, per bin, the count of forecasts, their sum and the sum of the outcomes."""
    idx, edges = _bin_index(p, bins)
    nb = edges.size - 1
    count = np.bincount(idx, minlength=nb).astype(float)
    sum_p = np.bincount(idx, weights=p, minlength=nb)
    sum_o = np.bincount(idx, weights=a, minlength=nb)
    return edges, count, sum_p, sum_o


def _undefined(q: Quotient, scores: dict[str, float]) -> None:
    """Mark every NaN score as undefined (the inputs are complete, so NaN means a zero denominator
    or an empty or one-class sample)."""
    for key, value in scores.items():
        if math.isnan(value):
            q.mark(key)


def brier_decomposition(actual: Any, prob: Any, bins: int | Sequence[float] = 10) -> dict[str, Any]:
    r"""Murphy's (1973) partition of the Brier score into reliability, resolution and uncertainty.

    Forecasts are grouped into bins k = 1..K, bin k holding :math:`n_k` forecasts with mean
    :math:`\bar p_k` and observed event frequency :math:`\bar o_k`; :math:`\bar o` is the overall
    frequency and N the number of scored rows.

    .. math::

        \mathrm{REL} = \frac1N \sum_k n_k (\bar p_k - \bar o_k)^2, \quad
        \mathrm{RES} = \frac1N \sum_k n_k (\bar o_k - \bar o)^2, \quad
        \mathrm{UNC} = \bar o (1 - \bar o)

    and :math:`\mathrm{BS} = \mathrm{REL} - \mathrm{RES} + \mathrm{UNC}` exactly when every bin
    holds a single forecast value; otherwise the two sides differ by the within-bin variance terms
    (Stephenson, Coelho & Jolliffe 2008), which is why the Brier score itself is returned too.

    * reliability (calibration): range [0, 1], perfect 0 (lower is better).
    * resolution: range [0, UNC], higher is better, 0 for a constant forecast (no skill).
    * uncertainty: a property of the observations alone, in [0, 0.25].

    Parameters
    ----------
    actual : sequence of {0, 1, NaN}, length n
        What happened.
    prob : sequence of float in [0, 1] or NaN, length n
        Forecast probability of the event. Rows where either series is NaN are skipped.
    bins : int or sequence of float, default 10
        An int K gives K equal-width bins: bin k (1-based) holds forecasts with
        (k - 1) / K <= p < k / K, the last bin also holding p = 1 (a value within 1e-9 of an edge
        counts as on the edge). A sequence gives the edges (increasing, first <= 0, last >= 1);
        bins are closed on the left, the last also on the right.

    Returns
    -------
    dict
        ``reliability``, ``resolution``, ``uncertainty``, ``brier`` (floats), ``n`` (scored rows)
        and ``table``: a pandas DataFrame with one row per bin, empty bins included, columns
        ``bin`` (1-based), ``lower``, ``upper`` (edges), ``mean_forecast``,
        ``observed_frequency`` (NaN for an empty bin) and ``count``; the data of a reliability
        diagram. With no scored rows the floats are NaN with an :class:`UndefinedScoreWarning`.

    Raises
    ------
    InputError
        If ``actual`` holds a value outside {0, 1, NaN}, ``prob`` one outside [0, 1], the lengths
        differ, or ``bins`` is not a positive int or a valid sequence of edges.

    References
    ----------
    .. [1] Murphy, A. H. (1973). A new vector partition of the probability score. *Journal of
       Applied Meteorology*, 12, 595-600.
    .. [2] Wilks, D. S. (2011). *Statistical Methods in the Atmospheric Sciences* (3rd ed.),
       section 8.4. Academic Press.
    .. [3] Stephenson, D. B., Coelho, C. A. S., & Jolliffe, I. T. (2008). Two extra components in
       the Brier score decomposition. *Weather and Forecasting*, 23, 752-757.
    """
    import pandas as pd  # lazy: pandas adds ~0.3 s to start-up (DEVELOPERS.md, The core)

    parts = brier_parts(actual, prob, bins)
    return {**{k: v for k, v in parts.items() if k != "bins"}, "table": pd.DataFrame(parts["bins"])}


def brier_parts(actual: Any, prob: Any, bins: int | Sequence[float] = 10) -> dict[str, Any]:
    """:func:`brier_decomposition` without pandas: the same floats and ``n``, and ``bins`` (a dict of
    the table's columns as arrays) in place of ``table``. For callers that write the numbers
    elsewhere (the refresh, the spreadsheet functions)."""
    a, p = paired_prob(actual, prob=prob)
    edges, count, sum_p, sum_o = _bins(a, p, bins)
    parts = {"reliability": reliability(count, sum_p, sum_o), "resolution": resolution(count, sum_p, sum_o),
             "uncertainty": uncertainty(count, sum_p, sum_o), "brier": brier(a, p)}
    q = Quotient()
    _undefined(q, parts)
    q.warn("no scored rows")
    with np.errstate(invalid="ignore", divide="ignore"):
        table = {
            "bin": np.arange(1, count.size + 1),
            "lower": edges[:-1],
            "upper": edges[1:],
            "mean_forecast": np.where(count > 0, sum_p / count, np.nan),
            "observed_frequency": np.where(count > 0, sum_o / count, np.nan),
            "count": count.astype(np.int64),
        }
    return {**parts, "n": int(a.size), "bins": table}


def probabilistic(actual: Any, prob: Any, reference: Any = None, *,
                  bins: int | Sequence[float] = 10) -> dict[str, float]:
    r"""Every probability score of a probability forecast, keyed as in ``PROBABILISTIC_KEYS``.

    Rows where ``actual``, ``prob`` or (an array) ``reference`` is NaN are skipped; N is the
    number of rows left, :math:`o_t` the outcome (0/1) and :math:`p_t` the probability.

    ===================  ============================================================================
    ``brier``            :math:`\frac1N \sum_t (p_t - o_t)^2`, the Brier score BS
    ``brier_skill``      1 - BS / BS_ref, against ``reference``
    ``log_loss``         :math:`-\frac1N \sum_t [o_t \ln p_t + (1 - o_t) \ln(1 - p_t)]`, p clipped to
                         [1e-15, 1 - 1e-15] (``LOG_LOSS_EPS``)
    ``roc_auc``          U / (n_1 n_0), U the Mann-Whitney statistic of the event rows' probabilities
    ``reliability``,     Murphy's decomposition with ``bins`` bins; see :func:`brier_decomposition`
    ``resolution``,
    ``uncertainty``
    ===================  ============================================================================

    Each score's own docstring (``SCORE_INFO[key].definition``, in this module) gives its range,
    perfect and no-skill values, synonyms and defining source.

    Parameters
    ----------
    actual : sequence of {0, 1, NaN}, length n
        What happened.
    prob : sequence of float in [0, 1] or NaN, length n
        Forecast probability of the event.
    reference : None, float, or sequence of float in [0, 1], default None
        The reference forecast of the skill score, for example the majority method's share.
        None uses the climatology of the scored rows: the constant :math:`\bar o`, whose Brier
        score is UNC = :math:`\bar o (1 - \bar o)` (an in-sample base rate, which a real forecast
        could not have known). A single number is a constant reference probability.
    bins : int or sequence of float, default 10
        Bins of the decomposition (keyword only).

    Returns
    -------
    dict[str, float]
        Undefined scores (no scored row; BS_ref = 0; one class only for ``roc_auc``) are NaN,
        named by one :class:`UndefinedScoreWarning`.

    Raises
    ------
    InputError
        If ``actual`` holds a value outside {0, 1, NaN}, ``prob`` or ``reference`` one outside
        [0, 1], or the lengths differ.

    References
    ----------
    .. [1] Brier, G. W. (1950). Verification of forecasts expressed in terms of probability.
       *Monthly Weather Review*, 78, 1-3.
    .. [2] Good, I. J. (1952). Rational decisions. *Journal of the Royal Statistical Society B*,
       14, 107-114.
    .. [3] Hanley, J. A., & McNeil, B. J. (1982). The meaning and use of the area under a receiver
       operating characteristic (ROC) curve. *Radiology*, 143, 29-36.
    .. [4] Murphy, A. H. (1973). A new vector partition of the probability score. *Journal of
       Applied Meteorology*, 12, 595-600.
    .. [5] Wilks, D. S. (2011). *Statistical Methods in the Atmospheric Sciences* (3rd ed.),
       sections 8.4 and 8.5. Academic Press.
    """
    scalar_ref = reference is not None and np.ndim(reference) == 0
    if scalar_ref:
        ref_value = _reference_value(reference)
        a, p = paired_prob(actual, prob=prob)
        r = np.full(a.size, ref_value)
    elif reference is None:
        a, p = paired_prob(actual, prob=prob)
        r = None
    else:
        a, p, r = paired_prob(actual, prob=prob, reference=reference)
    _, count, sum_p, sum_o = _bins(a, p, bins)
    unc = uncertainty(count, sum_p, sum_o)
    bs = brier(a, p)
    out = {"brier": bs, "brier_skill": brier_skill(bs, unc if r is None else brier(a, r)),
           "log_loss": log_loss(a, p), "roc_auc": roc_auc(a, p),
           "reliability": reliability(count, sum_p, sum_o), "resolution": resolution(count, sum_p, sum_o),
           "uncertainty": unc}
    q = Quotient()
    _undefined(q, out)
    q.warn(order=PROBABILISTIC_KEYS)
    return out


def _reference_value(reference: Any) -> float:
    try:
        x = float(reference)
    except (TypeError, ValueError) as exc:
        raise InputError(f"`reference` must be a probability in [0, 1] or a series of them; "
                         f"got {_show(reference)}", argument="reference", value=reference) from exc
    if not 0.0 <= x <= 1.0:
        raise InputError(f"`reference` must be a probability in [0, 1] or a series of them; "
                         f"got {_show(reference)}", argument="reference", value=reference)
    return x


class RocPoints(NamedTuple):
    """Points of the ROC curve, one per distinct forecast probability plus the origin."""

    false_alarm_rate: np.ndarray
    hit_rate: np.ndarray
    threshold: np.ndarray


def roc_points(actual: Any, prob: Any) -> RocPoints:
    """The ROC curve: false alarm rate (POFD) against hit rate (POD) as the cutoff falls.

    Point i is the 0/1 forecast "event when prob >= threshold[i]". The first point is the origin
    (0, 0) with threshold +inf (never forecast the event); then one point per distinct forecast
    value, from the highest down, the last being (1, 1) at the smallest forecast value. The
    trapezoidal area under the points equals ``roc_auc``.

    Parameters
    ----------
    actual : sequence of {0, 1, NaN}, length n
        What happened.
    prob : sequence of float in [0, 1] or NaN, length n
        Forecast probability of the event. Rows where either is NaN are skipped.

    Returns
    -------
    RocPoints
        ``(false_alarm_rate, hit_rate, threshold)``, three float arrays of equal length. A rate is
        NaN throughout (with an :class:`UndefinedScoreWarning`) when its class never occurred.

    Raises
    ------
    InputError
        If ``actual`` holds a value outside {0, 1, NaN}, ``prob`` one outside [0, 1], or the
        lengths differ.

    References
    ----------
    .. [1] Mason, I. (1982). A model for assessment of weather forecasts. *Australian
       Meteorological Magazine*, 30, 291-303.
    .. [2] Fawcett, T. (2006). An introduction to ROC analysis. *Pattern Recognition Letters*, 27,
       861-874.
    """
    a, p = paired_prob(actual, prob=prob)
    order = np.argsort(-p, kind="stable")
    ps, as_ = p[order], a[order]
    last = np.r_[np.flatnonzero(np.diff(ps) != 0), ps.size - 1] if ps.size else np.array([], int)
    tp = np.cumsum(as_)[last]
    fp = (last + 1) - tp
    n1 = float(np.count_nonzero(a == 1.0))
    n0 = float(a.size) - n1
    q = Quotient()
    hit = np.r_[0.0, tp] / n1 if n1 > 0 else np.full(last.size + 1, q.mark("hit_rate"))
    far = np.r_[0.0, fp] / n0 if n0 > 0 else np.full(last.size + 1, q.mark("false_alarm_rate"))
    q.warn("one class only")
    return RocPoints(far, hit, np.r_[np.inf, ps[last]])
