"""One test per documented bad input of sheetfns.scores: an InputError (a ValueError) whose message
names the argument and quotes the value. Expected messages follow the project's message shape."""
from __future__ import annotations

import numpy as np
import pytest

from sheetfns import scores
from sheetfns.errors import InputError

nan = float("nan")


def _raises(call, *fragments: str):
    with pytest.raises(InputError) as info:
        call()
    assert isinstance(info.value, ValueError)
    for fragment in fragments:
        assert fragment in str(info.value), (fragment, str(info.value))


# --- confusion / categorical ---------------------------------------------------------------------
def test_actual_outside_0_1():
    _raises(lambda: scores.confusion([0, 1, 2], [0, 1, 1]), "`actual`", "{0, 1, NaN}", "2.0",
            "position 3")


def test_forecast_outside_0_1():
    _raises(lambda: scores.categorical([0, 1, 1], [0, 0.5, 1]), "`forecast`", "0.5", "position 2")


def test_lengths_differ():
    _raises(lambda: scores.confusion([0, 1, 1], [0, 1]), "same length", "`actual` has 3",
            "`forecast` has 2")


def test_empty_series():
    _raises(lambda: scores.categorical([], []), "`actual`", "empty")


def test_text_in_a_series():
    _raises(lambda: scores.confusion([0, "yes"], [0, 1]), "`actual`", "'yes'", "position 2")


def test_two_dimensional_series():
    _raises(lambda: scores.confusion(np.zeros((3, 2)), np.zeros((3, 2))), "`actual`",
            "one-dimensional", "(3, 2)")


@pytest.mark.parametrize("bad", [-1, nan, float("inf"), "many", True])
def test_from_counts_bad_count(bad):
    _raises(lambda: scores.from_counts(1, bad, 2, 3), "`false_alarms`", "count", repr(bad))


# --- probabilistic / decomposition / ROC ---------------------------------------------------------
def test_prob_outside_0_1():
    _raises(lambda: scores.probabilistic([0, 1], [0.2, 1.2]), "`prob`", "[0, 1]", "1.2",
            "position 2")


def test_prob_lengths_differ():
    _raises(lambda: scores.probabilistic([0, 1, 0], [0.2, 0.3]), "`actual` has 3", "`prob` has 2")


def test_reference_series_outside_0_1():
    _raises(lambda: scores.probabilistic([0, 1], [0.2, 0.3], reference=[0.5, -0.1]), "`reference`",
            "-0.1")


def test_reference_number_outside_0_1():
    _raises(lambda: scores.probabilistic([0, 1], [0.2, 0.3], reference=1.5), "`reference`", "1.5")


def test_reference_length_differs():
    _raises(lambda: scores.probabilistic([0, 1], [0.2, 0.3], reference=[0.5]), "`reference` has 1")


def test_bins_not_positive():
    _raises(lambda: scores.brier_decomposition([0, 1], [0.2, 0.3], bins=0), "`bins`", ">= 1", "0")


def test_bins_edges_do_not_cover_0_1():
    _raises(lambda: scores.brier_decomposition([0, 1], [0.2, 0.3], bins=[0.1, 0.5, 1.0]), "`bins`",
            "cover [0, 1]", "[0.1, 0.5, 1.0]")


def test_bins_edges_not_increasing():
    _raises(lambda: scores.probabilistic([0, 1], [0.2, 0.3], bins=[0, 0.6, 0.4, 1]), "`bins`",
            "increasing")


def test_bins_not_a_number():
    _raises(lambda: scores.brier_decomposition([0, 1], [0.2, 0.3], bins="ten"), "`bins`", "'ten'")


def test_roc_points_bad_prob():
    _raises(lambda: scores.roc_points([0, 1], [0.2, 7]), "`prob`", "7.0")


# --- McNemar / Diebold-Mariano -------------------------------------------------------------------
def test_mcnemar_forecast_b_outside_0_1():
    _raises(lambda: scores.mcnemar([0, 1], [0, 1], [0, 3]), "`forecast_b`", "3.0")


def test_mcnemar_lengths_differ():
    _raises(lambda: scores.mcnemar([0, 1], [0, 1], [0, 1, 1]), "`forecast_b` has 3")


@pytest.mark.parametrize("bad,expect", [(0, ">= 1"), (-2, ">= 1"), (1.5, "integer"), ("two", "'two'")])
def test_diebold_mariano_bad_horizon(bad, expect):
    _raises(lambda: scores.diebold_mariano([0, 1, 0], [0.1, 0.2, 0.3], [0.3, 0.2, 0.1], bad),
            "`horizon`", expect)


def test_diebold_mariano_horizon_longer_than_data():
    _raises(lambda: scores.diebold_mariano([0, 1, 0, nan], [0.1, 0.2, 0.3, 0.4], [0.3, 0.2, 0.1, 0],
                                           horizon=3), "`horizon`", "scored rows (3)", "got 3")


def test_diebold_mariano_prob_a_outside_0_1():
    _raises(lambda: scores.diebold_mariano([0, 1], [0.1, -0.2], [0.3, 0.2]), "`prob_a`", "-0.2")


# --- Wilson --------------------------------------------------------------------------------------
def test_wilson_successes_exceed_n():
    _raises(lambda: scores.wilson(5, 4), "`successes`", "`n`", "5")


def test_wilson_negative_count():
    _raises(lambda: scores.wilson(-1, 4), "`successes`", "-1")


@pytest.mark.parametrize("bad", [0, 1, 1.5, "high"])
def test_wilson_confidence_outside_0_1(bad):
    _raises(lambda: scores.wilson(1, 4, confidence=bad), "`confidence`", repr(bad))


# --- costs ---------------------------------------------------------------------------------------
def test_cost_cutoff_negative_cost():
    _raises(lambda: scores.cost_cutoff(-1, 2), "`cost_false_alarm`", "-1")


def test_cost_cutoff_both_zero():
    _raises(lambda: scores.cost_cutoff(0, 0), "must not both be zero")


def test_cost_cutoff_text():
    _raises(lambda: scores.cost_cutoff(1, "dear"), "`cost_miss`", "'dear'")


def test_expected_cost_wrong_shape():
    _raises(lambda: scores.expected_cost((1, 2, 3), 1, 1), "`confusion`", "(1, 2, 3)")


def test_expected_cost_mapping_missing_counts():
    _raises(lambda: scores.expected_cost({"hits": 1, "misses": 2}, 1, 1), "`confusion`",
            "false_alarms, correct_negatives")


def test_expected_cost_negative_cost():
    _raises(lambda: scores.expected_cost((1, 2, 3, 4), 1, -5), "`cost_miss`", "-5")


# --- two_proportion ---------------------------------------------------------------------------------
def test_two_proportion_more_events_than_periods():
    _raises(lambda: scores.two_proportion(12, 10, 1, 5), "`events_a`", "12")


def test_two_proportion_negative_count():
    _raises(lambda: scores.two_proportion(1, 10, -1, 5), "`events_b`", "-1")
