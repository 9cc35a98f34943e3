"""The value model and the two-state chain in the scorecard (DESIGN.md §11): the Evaluation carries the
public functions' output, both forecast 1 above the cutoff, every model is tested against the best
benchmark, and the value model is left out, with its note, where it does not apply.

Data: a simulated AR(1) "passengers" series (seeded), named as such."""
from __future__ import annotations

import numpy as np
import pytest

from sheetfns import events, markov, scores, valuemodel
from sheetfns.scorecard import MODEL_METHODS, PROBABILITY_METHODS, Settings, evaluate, residual

CRITERION = ">=1150"


def _passengers(n: int = 700, future: int = 1, seed: int = 5) -> np.ndarray:
    rng = np.random.default_rng(seed)
    x = np.empty(n)
    level = 1000.0
    for t in range(n):
        level = 1000.0 + 0.8 * (level - 1000.0) + rng.normal(scale=120.0)
        x[t] = round(level)
    x[n - future:] = np.nan
    return x


def _evaluate(x: np.ndarray, **kw):
    y = events.flag(x, kw.pop("criterion", CRITERION), kw.get("min_run", 1))
    settings = kw.pop("settings", Settings(cutoff=0.4))
    return y, evaluate(y, train_size=500, settings=settings, values=x, criterion=kw.pop("rule", CRITERION),
                       raw_values=x, **kw)


def test_both_methods_are_the_public_functions_and_forecast_above_the_cutoff():
    x = _passengers()
    y, ev = _evaluate(x)
    assert [m.key for m in ev.methods][-3:] == ["markov", "logistic", "value_model"]
    vm = valuemodel.forecast(x, CRITERION, train_size=500)
    np.testing.assert_array_equal(ev.method("value_model").prob, vm.prob)
    np.testing.assert_array_equal(ev.method("markov").prob, markov.forecast(y, train_size=500))
    for key in ("markov", "value_model"):
        m = ev.method(key)
        expected = np.where(m.prob > 0.4, 1.0, 0.0)
        expected[np.isnan(m.prob)] = np.nan
        np.testing.assert_array_equal(m.forecast, expected)
        assert m.label == {"markov": "two-state chain", "value_model": "value model"}[key]
    assert ev.value_model.coefficients.equals(vm.coefficients)
    assert ev.value_model.residual_scale == vm.residual_scale


def test_every_model_is_compared_with_the_best_benchmark():
    x = _passengers()
    y, ev = _evaluate(x)
    bench = ev.comparisons["best_benchmark"]
    assert bench not in MODEL_METHODS
    valid = slice(500, ev.last_observed + 1)
    for key in MODEL_METHODS:
        a, b = ev.method(key), ev.method(bench)
        ok = ~(np.isnan(y[valid]) | np.isnan(a.prob[valid]) | np.isnan(b.prob[valid]))
        dm = scores.diebold_mariano(y[valid][ok], a.prob[valid][ok], b.prob[valid][ok])
        assert (ev.comparisons[f"{key}_vs_best_dm"], ev.comparisons[f"{key}_vs_best_dm_p"]) == \
            pytest.approx(dm, rel=1e-12), key
        assert f"{key}_vs_best_mcnemar_p" in ev.comparisons


def test_the_value_model_is_ranked_with_the_others():
    x = _passengers()
    _, ev = _evaluate(x)
    # the value model sees how far the number was from the line: on an AR(1) it beats the chain
    assert ev.scorecard["value_model"]["brier"] < ev.scorecard["markov"]["brier"]
    assert ev.best == min(ev.scorecard, key=lambda k: ev.scorecard[k]["brier"]) == "value_model"


def test_future_periods_carry_both_probabilities():
    x = _passengers(future=3)
    _, ev = _evaluate(x, settings=Settings(horizon=3))
    fut = ev.future()
    assert [f.row for f in fut] == [697, 698, 699]
    for f in fut:
        for key in ("markov", "value_model"):
            fc, p = f.forecasts[key]
            assert p == ev.method(key).prob[f.row] and fc == int(p > 0.5)


@pytest.mark.parametrize("rule,min_run,why", [
    ("=1000", 1, "asks for equality"),
    (">=1150", 2, "min_run is 2"),
])
def test_the_value_model_is_left_out_with_its_note_where_it_does_not_apply(rule, min_run, why):
    x = _passengers()
    y = events.flag(x, rule, min_run)
    ev = evaluate(y, train_size=500, values=x, criterion=rule, raw_values=x, min_run=min_run)
    assert "value_model" not in {m.key for m in ev.methods} and ev.value_model is None
    assert any(n.startswith("value model not used:") and why in n for n in ev.notes), ev.notes


def test_a_text_rule_and_an_event_column_leave_the_value_model_out():
    words = np.array(["alarm" if i % 5 == 0 else "ok" for i in range(300)], dtype=object)
    y = events.flag(words, "=alarm")
    ev = evaluate(y, train_size=200, criterion="=alarm", raw_values=words)
    assert "value_model" not in {m.key for m in ev.methods}
    assert any("compares text" in n for n in ev.notes)
    ev = evaluate(y, train_size=200, criterion="=1", raw_values=y)
    assert any("value model not used" in n for n in ev.notes)


def test_without_a_criterion_the_value_model_is_left_out_silently():
    x = _passengers()
    y = events.flag(x, CRITERION)
    ev = evaluate(y, train_size=500, values=x)
    assert "value_model" not in {m.key for m in ev.methods}
    assert not any("value model" in n for n in ev.notes)


def test_overflowing_values_leave_both_models_out_with_a_note():
    x = _passengers()
    x[10] = 1e200
    y = events.flag(x, CRITERION)
    ev = evaluate(y, train_size=500, values=x, criterion=CRITERION, raw_values=x)
    keys = {m.key for m in ev.methods}
    assert "value_model" not in keys and "logistic" not in keys and "markov" in keys
    assert any(n.startswith("value model not fitted: the value series reaches 1e+200") for n in ev.notes)


def test_a_model_that_cannot_be_fitted_leaves_a_note_and_the_others():
    y = np.r_[np.zeros(3), np.ones(2)]
    ev = evaluate(y, train_size=3, settings=Settings(horizon=5))
    assert any(n.startswith("two-state chain not fitted: `horizon`") for n in ev.notes), ev.notes
    assert "markov" not in {m.key for m in ev.methods} and "naive" in {m.key for m in ev.methods}


def test_residual_is_actual_minus_probability_or_minus_the_vote():
    x = _passengers()
    y, ev = _evaluate(x)
    for m in ev.methods:
        want = y - (m.prob if m.key in PROBABILITY_METHODS else m.forecast)
        np.testing.assert_array_equal(residual(y, m), want)
    # a 0/1 method's residual is never a chance: it is -1, 0 or 1
    r = residual(y, ev.method("naive_roll"))
    assert set(np.unique(r[~np.isnan(r)])) <= {-1.0, 0.0, 1.0}
