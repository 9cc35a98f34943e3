"""The scorecard: every method run and scored on the validation rows, best method and verdict."""
from __future__ import annotations

import math

import numpy as np
import pytest
from sklearn import metrics as skm

from sheetfns import benchmarks
from sheetfns.scorecard import SCORE_ROWS, Settings, evaluate


def _series(n=900, seed=3, future=5):
    rng = np.random.default_rng(seed)
    x = np.zeros(n)
    for t in range(1, n):  # persistent events: the logistic model has something to find
        p = 0.75 if x[t - 1] else 0.15
        x[t] = rng.random() < p
    y = x.astype(float)
    y[n - future:] = np.nan
    return y


def test_methods_are_the_benchmarks_and_validation_rows_are_scored():
    y = _series()
    ev = evaluate(y, train_size=600, settings=Settings(season=7))
    assert [m.key for m in ev.methods] == ["naive", "naive_roll", "seasonal", "seasonal_roll", "majority",
                                           "majority_roll", "markov", "logistic"]
    np.testing.assert_array_equal(ev.method("naive").forecast, benchmarks.naive(y, train_size=600))
    np.testing.assert_array_equal(ev.method("naive_roll").forecast, benchmarks.naive(y))
    np.testing.assert_array_equal(ev.method("majority").prob, benchmarks.majority_share(y, train_size=600))
    valid = slice(600, ev.last_observed + 1)
    # reference library: scikit-learn on the same validation rows
    for key in ("naive_roll", "logistic"):
        m = ev.method(key)
        ok = ~np.isnan(m.forecast[valid])
        assert ev.scorecard[key]["accuracy"] == pytest.approx(
            skm.accuracy_score(y[valid][ok], m.forecast[valid][ok]), abs=1e-12)
        assert ev.scorecard[key]["brier"] == pytest.approx(
            skm.brier_score_loss(y[valid][ok], m.prob[valid][ok]), abs=1e-12)
    ref = ev.scorecard["majority"]["brier"]
    for key, sc in ev.scorecard.items():
        assert sc["brier_skill"] == pytest.approx(1 - sc["brier"] / ref, abs=1e-12), key
    assert ev.best == min(ev.scorecard, key=lambda k: ev.scorecard[k]["brier"])
    # Persistence is there to be found: the series is a two-state chain, and a logistic model on one
    # event lag is that chain (saturated), so both score alike; the tie goes to the simpler.
    assert ev.scorecard["logistic"]["brier"] == pytest.approx(ev.scorecard["markov"]["brier"], rel=1e-9)
    assert ev.best == "markov"
    assert "two-state chain" in ev.verdict and "significant" in ev.verdict
    assert list(ev.period[598:602]) == ["training", "training", "validation", "validation"]
    assert list(ev.period[-5:]) == ["future"] * 5


def test_every_scorecard_row_is_filled():
    ev = evaluate(_series(), train_size=600)
    for key, *_ in SCORE_ROWS:
        for m in ev.methods:
            assert key in ev.scorecard[m.key], (key, m.key)


def test_headline_is_the_first_future_row():
    y = _series(future=3)
    ev = evaluate(y, train_size=600)
    t = ev.last_observed + 1
    head = ev.headline()
    assert head["majority"][1] == ev.method("majority").prob[t]
    assert not math.isnan(head["logistic"][1])


def test_share_is_shown_beside_a_zero_vote():
    # Arithmetic worth a test: 1,300 events in 3,653 training days -> share 1300/3653 = 0.356,
    # so the fixed majority vote is 0 on every validation day.
    y = np.zeros(3653 + 200)
    y[:1300] = 1.0
    np.random.default_rng(1).shuffle(y[:3653])
    ev = evaluate(y, train_size=3653)
    m = ev.method("majority")
    assert np.all(m.forecast[3653:] == 0.0)
    assert m.prob[3653] == pytest.approx(1300 / 3653) and round(1300 / 3653, 3) == 0.356


def test_costs_give_expected_cost():
    ev = evaluate(_series(), train_size=600, settings=Settings(cost_false_alarm=1, cost_miss=4,
                                                               cutoff=0.2))
    sc = ev.scorecard["logistic"]
    assert sc["expected_cost"] == pytest.approx((sc["false_alarms"] * 1 + sc["misses"] * 4) / sc["n"])


def test_constant_series_still_scores_the_benchmarks():
    y = np.zeros(300)
    ev = evaluate(y, train_size=200)
    assert ev.scorecard["majority"]["accuracy"] == 1.0
    # every method is perfect on a constant series, and there is no event to rank them by
    assert ev.best is None and ev.lowest == "majority"
    assert ev.verdict.startswith("Too few events to rank the methods: the validation period holds no event")
    assert any("fewer than 10" in w for w in ev.warnings)
    assert any("majority share" in n for n in ev.notes)  # the logistic model says it fell back


def test_a_full_tie_marks_no_best_value():
    """Every method is perfect on a constant series: no scorecard row may single one out."""
    import datetime as dt

    from watcher.cli import tables as report
    from watcher.refresh import forecast_sheet, layout
    from watcher.xlsx.spec import Table

    ev = evaluate(np.zeros(300), train_size=200)
    text = report.scorecard_text(ev)
    assert "*" not in text.split("accuracy")[1].splitlines()[0]  # 100% everywhere: no star
    ctx = layout.SheetContext(job="j", sheet="j forecast", profile_sheet="j profile", data_sheet="D",
                              value_name="v", event_text="v =1", horizon=1,
                              refreshed_at=dt.datetime(2026, 1, 1))
    spec = forecast_sheet.forecast_sheet(ctx, ev, dates=None, values=np.zeros(300), events=np.zeros(300))
    score_tables = [b for b in spec.blocks if isinstance(b, Table) and b.col == 0 and b.width > 3]
    accuracy_table = next(t for t in score_tables if "accuracy" in t.columns[0].values)
    i = list(accuracy_table.columns[0].values).index("accuracy")
    assert not any(c.bold is not None and c.bold[i] for c in accuracy_table.columns[1:])


def test_future_lists_every_future_period_with_its_origin_and_no_chance_for_a_vote():
    """Horizon 3, data ending on row 39 and three blank rows: the periods 40, 41, 42 made at rows 37, 38,
    39 (t - h). A naive forecast and a vote carry no probability (DESIGN.md §8); the share does."""
    rng = np.random.default_rng(7)  # simulated 0/1 series (a property check, not a published value)
    y = np.r_[(rng.random(40) < 0.4).astype(float), [np.nan] * 3]
    ev = evaluate(y, train_size=30, settings=Settings(horizon=3))
    fut = ev.future()
    assert [(f.row, f.origin) for f in fut] == [(40, 37), (41, 38), (42, 39)]
    for f in fut:
        assert f.forecasts["naive_roll"][1] is None and f.forecasts["majority"][1] is not None
        assert f.forecasts["naive_roll"][0] == int(y[f.origin])  # persistence from the origin
        assert f.forecasts["majority_roll"][1] == pytest.approx(np.nanmean(y[:f.origin + 1]))
