"""Categorical (0/1) verification: the 2x2 confusion counts, every score computed from them, and the
cost of a forecast's mistakes.

Public names are re-exported by :mod:`sheetfns.scores`; import them from there.
"""
from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import Any, NamedTuple

import numpy as np

from sheetfns._scoring.base import Quotient, paired_events
from sheetfns._scoring.contingency import DEFINITIONS
from sheetfns.checks import _show, as_nonnegative
from sheetfns.errors import InputError

#: The categorical score keys (DESIGN.md section 4), in the order of their definitions.
CATEGORICAL_KEYS: tuple[str, ...] = tuple(DEFINITIONS)


class Confusion(NamedTuple):
    """The 2x2 contingency table of a 0/1 forecast against what happened.

    ``hits`` (a, true positives): forecast 1, event happened; ``false_alarms`` (b, false positives):
    forecast 1, no event; ``misses`` (c, false negatives): forecast 0, event happened;
    ``correct_negatives`` (d, true negatives): forecast 0, no event.
    """

    hits: int
    false_alarms: int
    misses: int
    correct_negatives: int

    @property
    def n(self) -> int:
        """Number of scored rows, a + b + c + d."""
        return self.hits + self.false_alarms + self.misses + self.correct_negatives


def confusion(actual: Any, forecast: Any) -> Confusion:
    """Count hits, false alarms, misses and correct negatives.

    Parameters
    ----------
    actual : sequence of {0, 1, NaN}, length n
        What happened. NaN (a blank) marks a row that is not scored.
    forecast : sequence of {0, 1, NaN}, length n
        The 0/1 forecast for the same rows. Rows where either series is NaN are skipped.

    Returns
    -------
    Confusion
        ``(hits, false_alarms, misses, correct_negatives)`` as ints. All zero when no row is scored.

    Raises
    ------
    InputError
        If a series is empty, not one-dimensional, holds a value outside {0, 1, NaN}, or the two
        lengths differ.

    Examples
    --------
    >>> confusion([1, 0, 1, 0, float("nan")], [1, 1, 0, 0, 1])
    Confusion(hits=1, false_alarms=1, misses=1, correct_negatives=1)
    """
    a, f = paired_events(actual, forecast)
    a1, f1 = a == 1.0, f == 1.0
    hits = int(np.count_nonzero(a1 & f1))
    events = int(np.count_nonzero(a1))
    fc = int(np.count_nonzero(f1))
    return Confusion(hits, fc - hits, events - hits, int(a.size) - events - fc + hits)


def _count(value: Any, name: str) -> float:
    return as_nonnegative(value, name, what="a count")


def from_counts(hits: float, false_alarms: float, misses: float, correct_negatives: float
                ) -> dict[str, float]:
    r"""Every categorical score of a 2x2 table, keyed as in ``CATEGORICAL_KEYS``.

    Write a = hits, b = false alarms, c = misses, d = correct negatives, n = a + b + c + d.
    A score whose denominator is zero is NaN, and one :class:`UndefinedScoreWarning` names them all.

    Parameters
    ----------
    hits, false_alarms, misses, correct_negatives : float
        The four counts (non-negative; weighted counts need not be integers).

    Returns
    -------
    dict[str, float]
        One float per key, in the order below.

    Raises
    ------
    InputError
        If a count is negative, infinite, NaN or not a number.

    Notes
    -----
    The keys and their formulas. Each score's own docstring (``SCORE_INFO[key].definition``, in
    :mod:`sheetfns._scoring.contingency`) gives its range, perfect and no-skill values, synonyms
    and defining source.

    ===========================  ==========================================================
    ``n``                        a + b + c + d
    ``events``                   a + c
    ``hits``                     a (true positives)
    ``false_alarms``             b (false positives)
    ``misses``                   c (false negatives)
    ``correct_negatives``        d (true negatives)
    ``accuracy``                 (a + d) / n
    ``error_rate``               (b + c) / n
    ``sensitivity``              a / (a + c)  (POD, hit rate, recall)
    ``specificity``              d / (b + d)
    ``precision``                a / (a + b)  (success ratio)
    ``false_alarm_ratio``        b / (a + b)  (FAR)
    ``false_alarm_rate``         b / (b + d)  (POFD)
    ``critical_success_index``   a / (a + b + c)  (threat score)
    ``frequency_bias``           (a + b) / (a + c)
    ``f1``                       2a / (2a + b + c)
    ``balanced_accuracy``        (sensitivity + specificity) / 2
    ``heidke_skill``             2(ad - bc) / [(a + c)(c + d) + (a + b)(b + d)]
    ``peirce_skill``             (ad - bc) / [(a + c)(b + d)]
    ``gilbert_skill``            (a - a_r) / (a + b + c - a_r), a_r = (a + b)(a + c) / n
    ``odds_ratio``               ad / (bc)
    ``odds_ratio_skill``         (ad - bc) / (ad + bc)  (Yule's Q)
    ``matthews``                 (ad - bc) / sqrt[(a + b)(a + c)(b + d)(c + d)]
    ===========================  ==========================================================

    References
    ----------
    .. [1] Wilks, D. S. (2011). *Statistical Methods in the Atmospheric Sciences* (3rd ed.),
       section 8.2. Academic Press.
    .. [2] Jolliffe, I. T., & Stephenson, D. B. (Eds.) (2012). *Forecast Verification: A
       Practitioner's Guide in Atmospheric Science* (2nd ed.), chapter 3. Wiley.
    .. [3] Murphy, A. H. (1996). The Finley affair: a signal event in the history of forecast
       verification. *Weather and Forecasting*, 11, 3-20.

    Examples
    --------
    Finley's 1884 tornado forecasts (Murphy 1996):

    >>> s = from_counts(28, 72, 23, 2680)
    >>> round(s["accuracy"], 3), round(s["peirce_skill"], 3), round(s["gilbert_skill"], 3)
    (0.966, 0.523, 0.216)
    """
    a = _count(hits, "hits")
    b = _count(false_alarms, "false_alarms")
    c = _count(misses, "misses")
    d = _count(correct_negatives, "correct_negatives")
    out = {key: score(a, b, c, d) for key, score in DEFINITIONS.items()}
    q = Quotient()
    for key, value in out.items():
        if math.isnan(value):
            q.mark(key)
    q.warn(order=CATEGORICAL_KEYS)
    return out


def categorical(actual: Any, forecast: Any) -> dict[str, float]:
    """Every categorical score of a 0/1 forecast: ``from_counts(*confusion(actual, forecast))``.

    Parameters
    ----------
    actual, forecast : sequence of {0, 1, NaN}, length n
        What happened and what was forecast; rows where either is NaN are skipped.

    Returns
    -------
    dict[str, float]
        The keys of ``CATEGORICAL_KEYS``; see :func:`from_counts` for formulas, ranges and
        references.

    Raises
    ------
    InputError
        As :func:`confusion`.
    """
    return from_counts(*confusion(actual, forecast))


def _as_counts(table: Any) -> tuple[float, float, float, float]:
    if isinstance(table, Mapping):
        missing = [k for k in ("hits", "false_alarms", "misses", "correct_negatives") if k not in table]
        if missing:
            raise InputError(f"`confusion` must hold hits, false_alarms, misses and correct_negatives; "
                             f"missing {', '.join(missing)}", argument="confusion", value=table)
        vals = [table["hits"], table["false_alarms"], table["misses"], table["correct_negatives"]]
    elif isinstance(table, Sequence) and not isinstance(table, str) and len(table) == 4:
        vals = list(table)
    else:
        raise InputError("`confusion` must be a Confusion, a mapping of the four counts or "
                         f"(hits, false_alarms, misses, correct_negatives); got {_show(table)}",
                         argument="confusion", value=table)
    names = ("hits", "false_alarms", "misses", "correct_negatives")
    a, b, c, d = (_count(v, k) for v, k in zip(vals, names, strict=True))
    return a, b, c, d


def _cost(value: Any, name: str) -> float:
    return as_nonnegative(value, name, what="a cost")


def cost_cutoff(cost_false_alarm: float, cost_miss: float) -> float:
    r"""The probability above which forecasting the event costs less on average.

    .. math:: p^* = \frac{C_{FA}}{C_{FA} + C_{miss}}

    Acting on a probability p costs :math:`(1 - p) C_{FA}` in expectation, not acting costs
    :math:`p\,C_{miss}`; the two are equal at :math:`p^*` (the cost/loss ratio of the static
    cost-loss model, where the protective action costs :math:`C_{FA}` and the unprotected loss is
    :math:`C_{FA} + C_{miss}`). Equal costs give 0.5.

    Parameters
    ----------
    cost_false_alarm : float
        Cost of one false alarm (acting when nothing happens), >= 0.
    cost_miss : float
        Cost of one miss (not acting when the event happens), >= 0.

    Returns
    -------
    float
        The cutoff in [0, 1]: forecast 1 when the probability is strictly above it (p > cutoff). At
        the cutoff itself both actions cost the same in expectation and no event is forecast, as
        tocsin's methods do (the majority vote's "share above 0.5").

    Raises
    ------
    InputError
        If a cost is negative, not finite or not a number, or both costs are zero.

    References
    ----------
    .. [1] Murphy, A. H. (1977). The value of climatological, categorical and probabilistic
       forecasts in the cost-loss ratio situation. *Monthly Weather Review*, 105, 803-816.
    .. [2] Richardson, D. S. (2000). Skill and relative economic value of the ECMWF ensemble
       prediction system. *Quarterly Journal of the Royal Meteorological Society*, 126, 649-667.

    Examples
    --------
    >>> cost_cutoff(1, 4)
    0.2
    """
    cfa = _cost(cost_false_alarm, "cost_false_alarm")
    cmiss = _cost(cost_miss, "cost_miss")
    if cfa + cmiss == 0:
        raise InputError("`cost_false_alarm` and `cost_miss` must not both be zero; got 0 and 0",
                         argument="cost_miss", value=cost_miss)
    return cfa / (cfa + cmiss)


def expected_cost(confusion: Any, cost_false_alarm: float, cost_miss: float) -> float:
    r"""Mean cost per scored period of a 0/1 forecast's mistakes.

    .. math:: \bar C = \frac{b\,C_{FA} + c\,C_{miss}}{n}

    Correct forecasts cost nothing. Range [0, max(C_FA, C_miss)], perfect 0.

    Parameters
    ----------
    confusion : Confusion, mapping or 4-sequence
        The counts ``(hits, false_alarms, misses, correct_negatives)``; a mapping (for example the
        output of :func:`from_counts`) is read by those keys.
    cost_false_alarm, cost_miss : float
        Cost of one false alarm and of one miss, each >= 0.

    Returns
    -------
    float
        The mean cost; NaN with an :class:`UndefinedScoreWarning` when n = 0.

    Raises
    ------
    InputError
        If the counts or costs are not non-negative numbers, or ``confusion`` has the wrong shape.

    Examples
    --------
    >>> expected_cost(Confusion(5, 2, 1, 12), cost_false_alarm=1, cost_miss=4)
    0.3
    """
    a, b, c, d = _as_counts(confusion)
    cfa = _cost(cost_false_alarm, "cost_false_alarm")
    cmiss = _cost(cost_miss, "cost_miss")
    q = Quotient()
    out = q("expected_cost", b * cfa + c * cmiss, a + b + c + d)
    q.warn("no scored rows")
    return out
