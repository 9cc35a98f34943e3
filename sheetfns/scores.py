"""Verification scores for event forecasts: confusion counts and every categorical score,
probability scores and the Murphy decomposition, ROC points, significance tests (McNemar,
Diebold-Mariano, two proportions) with Wilson intervals, and the cost-based cutoff.

Conventions (one for the module)
--------------------------------
* Data arguments first (``actual``, then ``forecast`` for 0/1 forecasts or ``prob`` for
  probabilities), options keyword-only where they are new. ``actual`` holds 0, 1 or NaN;
  probabilities lie in [0, 1]. Rows where any input is NaN are skipped (a blank is not scored).
* Scores are keyed by the snake_case trade terms of ``SCORE_KEYS``; ``SCORE_INFO`` says for each
  whether higher or lower is better, its range and its perfect and no-skill values, and holds its
  ``definition``: the function whose docstring gives the score's formula, range, perfect and
  no-skill values, synonyms and defining source (``help(SCORE_INFO["peirce_skill"].definition)``).
* A score whose denominator is zero is NaN, and one :class:`UndefinedScoreWarning` (a
  ``RuntimeWarning``) per call names every such score. Never an exception.
* Bad input raises :class:`~sheetfns.errors.InputError` naming the argument and the value.

This module only re-exports; the work is in :mod:`sheetfns._scoring` (``contingency``: the
definitions of the categorical scores; ``categorical``, ``probabilistic``, ``significance``;
``registry``). pandas is imported only inside ``brier_decomposition`` (for its table;
``brier_parts`` gives the same numbers as plain arrays) and scipy nowhere, so that importing the
scores for a spreadsheet function or a refresh stays light.
"""
from __future__ import annotations

from sheetfns._scoring.base import UndefinedScoreWarning
from sheetfns._scoring.categorical import (
    CATEGORICAL_KEYS,
    Confusion,
    categorical,
    confusion,
    cost_cutoff,
    expected_cost,
    from_counts,
)
from sheetfns._scoring.probabilistic import (
    LOG_LOSS_EPS,
    PROBABILISTIC_KEYS,
    RocPoints,
    brier_decomposition,
    brier_parts,
    probabilistic,
    roc_points,
)
from sheetfns._scoring.registry import SCORE_INFO, SCORE_KEYS, ScoreInfo
from sheetfns._scoring.significance import diebold_mariano, mcnemar, two_proportion, wilson, wilson_intervals

__all__ = [
    "CATEGORICAL_KEYS", "Confusion", "LOG_LOSS_EPS", "PROBABILISTIC_KEYS", "RocPoints",
    "SCORE_INFO", "SCORE_KEYS", "ScoreInfo", "UndefinedScoreWarning",
    "brier_decomposition", "brier_parts", "categorical", "confusion", "cost_cutoff", "diebold_mariano",
    "expected_cost", "from_counts", "mcnemar", "probabilistic", "roc_points", "two_proportion",
    "wilson", "wilson_intervals",
]
