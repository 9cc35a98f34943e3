"""The registry of score keys: label, orientation, range, perfect and no-skill value of each, and
the function that defines it (whose docstring gives the formula and the sources).

The tests read it to check every score against its documented range, perfect and no-skill values,
and that every score is documented. Re-exported by :mod:`sheetfns.scores` as ``SCORE_INFO``.
"""
from __future__ import annotations

import math
from collections.abc import Callable
from typing import Literal, NamedTuple

from sheetfns._scoring import contingency
from sheetfns._scoring import probabilistic as _probabilistic

Orientation = Literal["higher", "lower", "one"] | None


class ScoreInfo(NamedTuple):
    """What a score key means.

    ``orientation``: "higher" / "lower" is better, "one" best at 1 (frequency bias), None for counts
    and for properties of the data (uncertainty). ``perfect``: the value of an always-right
    forecast where it is one number for all data, else None (it depends on the data, as the hits
    do, or is undefined, as the odds ratio's infinity). ``no_skill``: the value of a forecast
    without skill where that is one number for all data, else None: for a 0/1 forecast, one issued
    independently of what happens; for a probability, the climatological forecast (the base rate
    every period). ``low`` / ``high``: the range. ``definition``: the function computing the score,
    whose docstring states the formula, the range, the perfect and no-skill values (also those that
    depend on the data) and the defining source.
    """

    key: str
    label: str
    kind: Literal["count", "categorical", "probabilistic"]
    orientation: Orientation
    perfect: float | None
    no_skill: float | None
    low: float
    high: float
    definition: Callable[..., float]


_INF = math.inf
_ROWS: tuple[tuple, ...] = (
    ("n", "rows scored", "count", None, None, None, 0, _INF),
    ("events", "events observed", "count", None, None, None, 0, _INF),
    ("hits", "hits", "count", None, None, None, 0, _INF),
    ("false_alarms", "false alarms", "count", None, 0, None, 0, _INF),
    ("misses", "misses", "count", None, 0, None, 0, _INF),
    ("correct_negatives", "correct negatives", "count", None, None, None, 0, _INF),
    ("accuracy", "accuracy (proportion correct)", "categorical", "higher", 1, None, 0, 1),
    ("error_rate", "error rate", "categorical", "lower", 0, None, 0, 1),
    ("sensitivity", "sensitivity (hit rate, POD)", "categorical", "higher", 1, None, 0, 1),
    ("specificity", "specificity", "categorical", "higher", 1, None, 0, 1),
    ("precision", "precision (1 - FAR)", "categorical", "higher", 1, None, 0, 1),
    ("false_alarm_ratio", "false alarm ratio (FAR)", "categorical", "lower", 0, None, 0, 1),
    ("false_alarm_rate", "false alarm rate (POFD)", "categorical", "lower", 0, None, 0, 1),
    ("critical_success_index", "critical success index (threat score)", "categorical", "higher", 1,
     None, 0, 1),
    ("frequency_bias", "frequency bias", "categorical", "one", 1, None, 0, _INF),
    ("f1", "F1 score", "categorical", "higher", 1, None, 0, 1),
    ("balanced_accuracy", "balanced accuracy", "categorical", "higher", 1, 0.5, 0, 1),
    ("heidke_skill", "Heidke skill score", "categorical", "higher", 1, 0, -1, 1),
    ("peirce_skill", "Peirce skill score (true skill statistic)", "categorical", "higher", 1, 0, -1, 1),
    ("gilbert_skill", "Gilbert skill score (equitable threat score)", "categorical", "higher", 1, 0,
     -1 / 3, 1),
    ("odds_ratio", "odds ratio", "categorical", "higher", None, 1, 0, _INF),
    ("odds_ratio_skill", "odds ratio skill score (Yule's Q)", "categorical", "higher", 1, 0, -1, 1),
    ("matthews", "Matthews correlation", "categorical", "higher", 1, 0, -1, 1),
    ("brier", "Brier score", "probabilistic", "lower", 0, None, 0, 1),
    ("brier_skill", "Brier skill score", "probabilistic", "higher", 1, 0, -_INF, 1),
    ("log_loss", "log loss", "probabilistic", "lower", 0, None, 0, -math.log(1e-15)),
    ("roc_auc", "ROC area", "probabilistic", "higher", 1, 0.5, 0, 1),
    ("reliability", "reliability (calibration error)", "probabilistic", "lower", 0, 0, 0, 1),
    ("resolution", "resolution", "probabilistic", "higher", None, 0, 0, 0.25),
    ("uncertainty", "uncertainty (base-rate variance)", "probabilistic", None, None, None, 0, 0.25),
)

_DEFINITIONS: dict[str, Callable[..., float]] = {**contingency.DEFINITIONS, **_probabilistic.DEFINITIONS}

SCORE_INFO: dict[str, ScoreInfo] = {r[0]: ScoreInfo(*r, definition=_DEFINITIONS[r[0]]) for r in _ROWS}

SCORE_KEYS: tuple[str, ...] = tuple(_DEFINITIONS)
