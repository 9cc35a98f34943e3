"""The registry of score keys: label, orientation, range, perfect and no-skill value of each.

The scorecard reads it to label rows and to decide which method did best; the tests read it to
check every score against its documented range and perfect value. Re-exported by
:mod:`sheetfns.scores` as ``SCORE_INFO``.
"""
from __future__ import annotations

import math
from typing import Literal, NamedTuple

from sheetfns._scoring.categorical import CATEGORICAL_KEYS
from sheetfns._scoring.probabilistic import PROBABILISTIC_KEYS

Orientation = Literal["higher", "lower", "one"] | None


class ScoreInfo(NamedTuple):
    """What a score key means.

    ``orientation``: "higher" / "lower" is better, "one" best at 1 (frequency bias), None for counts
    and for properties of the data (uncertainty). ``perfect``: the value of an always-right
    forecast, None where it depends on the data or is undefined. ``no_skill``: the expected value
    of a random forecast where that is fixed, else None. ``low`` / ``high``: the range.
    """

    key: str
    label: str
    kind: Literal["count", "categorical", "probabilistic"]
    orientation: Orientation
    perfect: float | None
    no_skill: float | None
    low: float
    high: float


_INF = math.inf
_ROWS: tuple[tuple, ...] = (
    ("n", "rows scored", "count", None, None, None, 0, _INF),
    ("events", "events observed", "count", None, None, None, 0, _INF),
    ("hits", "hits", "count", None, None, None, 0, _INF),
    ("false_alarms", "false alarms", "count", None, None, None, 0, _INF),
    ("misses", "misses", "count", None, None, None, 0, _INF),
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
    ("log_loss", "log loss", "probabilistic", "lower", 0, math.log(2), 0, -math.log(1e-15)),
    ("roc_auc", "ROC area", "probabilistic", "higher", 1, 0.5, 0, 1),
    ("reliability", "reliability (calibration error)", "probabilistic", "lower", 0, None, 0, 1),
    ("resolution", "resolution", "probabilistic", "higher", None, 0, 0, 0.25),
    ("uncertainty", "uncertainty (base-rate variance)", "probabilistic", None, None, None, 0, 0.25),
)

SCORE_INFO: dict[str, ScoreInfo] = {r[0]: ScoreInfo(*r) for r in _ROWS}

SCORE_KEYS: tuple[str, ...] = CATEGORICAL_KEYS + PROBABILISTIC_KEYS
