"""Scores against published worked examples: Finley's tornado forecasts and Agresti's paired table.

Each expected value is written as the arithmetic that produces it, with its published rounding
beside it and the source named.
"""
from __future__ import annotations

import numpy as np
import pytest

from sheetfns import scores

# Finley (1884) tornado forecasts, as tabulated in Murphy, A. H. (1996). "The Finley affair: a
# signal event in the history of forecast verification", Weather and Forecasting 11, 3-20, and in
# Wilks, Statistical Methods in the Atmospheric Sciences (3rd ed., 2011), section 8.2.
FINLEY = scores.Confusion(hits=28, false_alarms=72, misses=23, correct_negatives=2680)
FINLEY_N = 28 + 72 + 23 + 2680  # 2,803 forecasts

# Published values (Murphy 1996; Wilks 2011, section 8.2), to their printed rounding; table and
# example numbers are not given because they were not checked against the printed pages.
FINLEY_PUBLISHED = {
    # key: (value as the arithmetic on the table, published value, decimals printed)
    "accuracy": ((28 + 2680) / FINLEY_N, 0.966, 3),
    "sensitivity": (28 / (28 + 23), 0.549, 3),  # POD
    "false_alarm_ratio": (72 / (28 + 72), 0.72, 2),  # FAR
    "critical_success_index": (28 / (28 + 72 + 23), 0.228, 3),
    "frequency_bias": ((28 + 72) / (28 + 23), 1.96, 2),
    "heidke_skill": (2 * (28 * 2680 - 72 * 23) / ((28 + 23) * (23 + 2680) + (28 + 72) * (72 + 2680)),
                     0.355, 3),
    "peirce_skill": ((28 * 2680 - 72 * 23) / ((28 + 23) * (72 + 2680)), 0.523, 3),
    "gilbert_skill": ((28 - 100 * 51 / FINLEY_N) / (28 + 72 + 23 - 100 * 51 / FINLEY_N), 0.216, 3),
}


def _series_from_counts(table: scores.Confusion, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Rows realising a 2x2 table, shuffled (the order of rows must not matter)."""
    actual = np.repeat([1.0, 0.0, 1.0, 0.0], table)
    forecast = np.repeat([1.0, 1.0, 0.0, 0.0], table)
    order = np.random.default_rng(seed).permutation(actual.size)
    return actual[order], forecast[order]


@pytest.mark.parametrize("key", sorted(FINLEY_PUBLISHED))
def test_finley_published_scores(key):
    exact, published, decimals = FINLEY_PUBLISHED[key]
    got = scores.from_counts(*FINLEY)[key]
    assert got == pytest.approx(exact, rel=1e-12)
    assert round(got, decimals) == published


def test_finley_from_rows_matches_counts():
    actual, forecast = _series_from_counts(FINLEY, seed=1884)
    assert scores.confusion(actual, forecast) == FINLEY
    assert scores.categorical(actual, forecast) == scores.from_counts(*FINLEY)


def test_finley_never_forecasting_a_tornado_looks_more_accurate():
    # Gilbert's 1884 point, retold in Murphy (1996): always forecasting "no tornado" would have
    # scored 98.2% correct against Finley's 96.6% (recalled from memory), while every skill score
    # of that forecast is 0 or undefined. Counts: 51 misses, 2,752 correct negatives.
    with pytest.warns(scores.UndefinedScoreWarning, match="precision"):
        never = scores.from_counts(0, 0, 51, 2752)  # never forecast: a + b = 0
    assert round(never["accuracy"], 3) == 0.982
    assert never["accuracy"] > scores.from_counts(*FINLEY)["accuracy"]
    assert never["peirce_skill"] == 0.0 and never["heidke_skill"] == 0.0


# Agresti, A., Categorical Data Analysis (2nd ed., 2002), Table 10.1 (table number recalled from
# memory): presidential approval of the same 1,600 people in two surveys, 794 approve/approve,
# 150 approve/disapprove, 86 disapprove/approve, 570 disapprove/disapprove. McNemar's statistic
# is (150 - 86)^2 / (150 + 86) = 17.356 without continuity correction; with Edwards' correction
# (|150 - 86| - 1)^2 / 236 = 16.818.
AGRESTI = {"both_right": 794, "only_a_right": 150, "only_b_right": 86, "both_wrong": 570}


def _paired_rows(table: dict[str, int], seed: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """An event series and two forecasts whose correctness pattern is ``table``; the actual
    series mixes events and non-events, so being right means 1 on one and 0 on the other."""
    right_a = np.repeat([True, True, False, False], list(table.values()))
    right_b = np.repeat([True, False, True, False], list(table.values()))
    rng = np.random.default_rng(seed)
    actual = (rng.random(right_a.size) < 0.4).astype(float)
    fa = np.where(right_a, actual, 1.0 - actual)
    fb = np.where(right_b, actual, 1.0 - actual)
    order = rng.permutation(actual.size)
    return actual[order], fa[order], fb[order]


def test_mcnemar_agresti_with_correction():
    actual, fa, fb = _paired_rows(AGRESTI, seed=10)
    stat, p = scores.mcnemar(actual, fa, fb)
    assert stat == pytest.approx((150 - 86 - 1) ** 2 / (150 + 86), rel=1e-14)
    assert round(stat, 3) == 16.818


def test_mcnemar_agresti_without_correction():
    actual, fa, fb = _paired_rows(AGRESTI, seed=11)
    stat, p = scores.mcnemar(actual, fa, fb, correction=False)
    assert stat == pytest.approx((150 - 86) ** 2 / (150 + 86), rel=1e-14)
    assert round(stat, 3) == 17.356


@pytest.mark.parametrize("correction", [True, False])
def test_mcnemar_agresti_against_statsmodels(correction):
    # statsmodels.stats.contingency_tables.mcnemar, asymptotic chi-square version.
    from statsmodels.stats.contingency_tables import mcnemar as sm_mcnemar

    actual, fa, fb = _paired_rows(AGRESTI, seed=12)
    stat, p = scores.mcnemar(actual, fa, fb, correction=correction)
    ref = sm_mcnemar([[794, 150], [86, 570]], exact=False, correction=correction)
    assert stat == pytest.approx(ref.statistic, rel=1e-12)
    assert p == pytest.approx(ref.pvalue, rel=1e-9)


def test_mcnemar_swapping_forecasts_keeps_the_statistic():
    actual, fa, fb = _paired_rows(AGRESTI, seed=13)
    assert scores.mcnemar(actual, fa, fb) == scores.mcnemar(actual, fb, fa)


def test_mcnemar_equal_discordant_counts_give_zero_with_correction():
    # Common practice: the continuity-corrected numerator is floored at 0, so b = c gives 0, p = 1.
    actual, fa, fb = _paired_rows({"both_right": 5, "only_a_right": 7, "only_b_right": 7,
                                   "both_wrong": 3}, seed=14)
    assert scores.mcnemar(actual, fa, fb) == (0.0, 1.0)
