"""The honest verdict (DESIGN.md §8): a best method only with positive Brier skill against the majority
share, a 0/1 forecast that said one thing throughout never crowned, a validation period unlike the
training period (two-proportion z test at 1%) or with fewer than 10 events flagged in the verdict and in
``Evaluation.warnings``.

The series here are simulated (seeded shuffles of a fixed number of events), named as such; the
two-proportion test is checked against statsmodels' ``proportions_ztest`` (pooled variance, the score
test of Agresti 2013, Categorical Data Analysis, 3rd ed., section 3.1.2)."""
from __future__ import annotations

import math

import numpy as np
import pytest
from statsmodels.stats.proportion import proportions_ztest

from sheetfns._scoring import verdict as V
from sheetfns.scorecard import METHOD_LABELS, Settings, evaluate


def _shuffled(n: int, events: int, rng: np.random.Generator) -> np.ndarray:
    y = np.zeros(n)
    y[:events] = 1.0
    rng.shuffle(y)
    return y


def _issue_case() -> np.ndarray:
    """Issue 12's case, simulated: 510 events in 2,338 training days (21.8%), 14 in 1,000 validation
    days (1.4%), the last training day without the event, one future day."""
    rng = np.random.default_rng(12)
    train = _shuffled(2338, 510, rng)
    train[-1] = 0.0
    return np.r_[train, _shuffled(1000, 14, rng), np.nan]


def test_a_shifted_rate_is_flagged_and_a_forecast_that_never_warns_is_not_crowned():
    y = _issue_case()
    ev = evaluate(y, train_size=2338, settings=Settings(season=7))
    z, p = proportions_ztest([510, 14], [2338, 1000])
    assert p < 0.01
    # the fixed naive forecast is 0 on every validation day: the lowest Brier score (the error rate,
    # 14 / 1000), skill +75% against the stale training share -- and it never warns
    assert ev.lowest == "naive" and ev.scorecard["naive"]["brier"] == pytest.approx(14 / 1000)
    assert ev.scorecard["naive"]["brier_skill"] > 0.7 and ev.scorecard["naive"]["hits"] == 0
    assert ev.best not in ("naive", None)
    assert not ev.verdict.startswith("Best on the validation period: naive")
    assert ("Not named although scored lower: naive (Brier 0.014) forecast no event for every validation "
            "period, so it tells no period from another.") in ev.verdict
    assert ev.verdict.endswith("Caution: the event rate changed from 21.8% in training to 1.4% in "
                               "validation (two-proportion z test p < 0.001), so these scores may not hold "
                               "for the periods ahead.")
    (warning,) = ev.warnings
    assert warning.startswith("The validation period is unlike the training period: the event rate was "
                              "21.8% in training (510 of 2338 periods) and 1.4% in validation (14 of 1000)")


def test_the_period_check_is_the_two_proportion_z_test():
    rng = np.random.default_rng(4)
    for xt, nt, xv, nv in ((510, 2338, 14, 1000), (60, 300, 18, 100), (40, 400, 9, 100), (5, 50, 5, 50)):
        train, valid = _shuffled(nt, xt, rng), _shuffled(nv, xv, rng)
        train[::17] = np.nan                           # blanks are not periods
        seen_t = train[~np.isnan(train)]
        check = V.check_periods(train, valid)
        z, p = proportions_ztest([int(seen_t.sum()), xv], [seen_t.size, nv])
        assert (check.statistic, check.pvalue) == pytest.approx((z, p), rel=1e-12)
        assert check.shifted == (p < 0.01)
        assert check.train_n == seen_t.size and check.valid_events == xv


def test_no_variation_is_not_a_shift():
    check = V.check_periods(np.zeros(50), np.zeros(20))
    assert math.isnan(check.pvalue) and not check.shifted and check.few


def test_too_few_validation_events_name_no_method():
    # 6 events in 100 validation periods at the training rate (6%): no shift, but too few to rank
    rng = np.random.default_rng(6)
    y = np.r_[_shuffled(500, 30, rng), _shuffled(100, 6, rng)]
    ev = evaluate(y, train_size=500)
    assert ev.best is None and ev.lowest is not None
    assert ev.verdict.startswith("Too few events to rank the methods: the validation period holds only "
                                 "6 events in 100 periods (at least 10 are needed), so no method is named "
                                 "best.")
    assert ev.warnings == ("The validation period holds only 6 events in 100 periods (fewer than 10): too "
                           "few to rank the methods.",)
    assert "Caution" not in ev.verdict


def test_no_skill_says_no_method_beat_the_base_rate():
    # independent events at one rate (simulated; a seed on which no method beats the training share)
    rng = np.random.default_rng(14)
    y = (rng.random(1200) < 0.3).astype(float)
    ev = evaluate(y, train_size=900)
    assert max(sc["brier_skill"] for sc in ev.scorecard.values()) == 0.0      # the share itself
    assert ev.best is None and ev.lowest == "majority"
    share = np.mean(y[:900])
    assert ev.verdict == (f"No method beat the event's base rate on the validation period: the majority "
                          f"share (the training share of periods with the event, {share:.1%}) is the "
                          f"forecast to use.")
    assert ev.warnings == ()
    assert ev.residual_method == "majority"


def test_choose_passes_over_constant_votes_and_stops_at_no_skill():
    check = V.PeriodCheck(100, 500, 20, 100)
    skill = {"naive": 0.4, "naive_roll": 0.1, "majority": 0.0, "logistic": -0.2}
    ranked = ["naive", "naive_roll", "majority", "logistic"]
    assert V.choose(ranked, skill, {"naive": 0.0}, check) == ("naive_roll", ["naive"])
    both = {"naive": 0.0, "naive_roll": 1.0}
    assert V.choose(ranked, skill, both, check) == (None, ["naive", "naive_roll"])
    assert V.choose(ranked, skill, {}, check) == ("naive", [])
    assert V.choose(ranked, skill, {}, V.PeriodCheck(100, 500, 9, 100)) == (None, [])
    text = V.verdict_text(None, "naive", ["naive", "naive_roll"], METHOD_LABELS,
                          {"naive": {"brier": 0.1}, "naive_roll": {"brier": 0.12}},
                          {"naive": 0.0, "naive_roll": 1.0}, check, math.nan)
    assert text.startswith("No method that tells one period from another beat the event's base rate")
    assert text.endswith("naive (Brier 0.100) forecast no event for every validation period; rolling naive "
                         "(Brier 0.120) forecast the event for every validation period, so they tell no "
                         "period from another.")


def test_best_method_verdict_names_its_skill_and_the_diebold_mariano_test():
    # a persistent two-state series (simulated): the chain has skill
    rng = np.random.default_rng(3)
    x = np.zeros(900)
    for t in range(1, 900):
        x[t] = rng.random() < (0.75 if x[t - 1] else 0.15)
    ev = evaluate(x, train_size=600)
    assert ev.best == "markov"
    sc = ev.scorecard["markov"]
    p = ev.comparisons["best_vs_share_dm_p"]
    assert ev.verdict.startswith(f"Best on the validation period: two-state chain (Brier "
                                 f"{sc['brier']:.3f}, skill {sc['brier_skill']:+.1%} against the majority "
                                 f"share); the difference is significant at 5% (Diebold-Mariano "
                                 f"{V.p_text(p)}).")
