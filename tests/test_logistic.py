"""Tests of sheetfns.logistic: the logit fit and the logistic event forecast.

External references, named beside each check:
* Spector & Mazzeo (1980) grade data as shipped with statsmodels (``statsmodels.datasets.spector``),
  against the logit estimates published in Greene, W. H., *Econometric Analysis* (5th ed., 2003,
  Table 21.1; edition and table number recalled from memory), which are also the Stata reference
  values in statsmodels' own test results (statsmodels/discrete/tests/results/results_discrete.py).
* ``statsmodels`` 0.15 ``Logit`` (a general-purpose reference library) on seeded random data, and
  refitted from scratch at every origin for the roll-forward schemes.
Seeded random data only for the comparisons with statsmodels and for the property tests.
"""
from __future__ import annotations

import math
import subprocess
import sys
import warnings

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from statsmodels.discrete.tests.results import results_discrete

from sheetfns import logistic
from sheetfns._logit.design import build, time_axis
from sheetfns.errors import InputError

# ---------------------------------------------------------------------------------------------------
# helpers: a slow, obviously correct reference written here


def _shift(a: np.ndarray, k: int) -> np.ndarray:
    return np.r_[np.full(k, np.nan), a[: a.size - k]] if k else a.copy()


def _sm_fit(x: np.ndarray, y: np.ndarray):
    with warnings.catch_warnings():
        # the reference library warns (convergence, separation, overflow) on the data made to test
        # those very cases; our side of each comparison runs under the suite's warnings-are-errors
        warnings.simplefilter("ignore")
        return sm.Logit(y, x).fit(disp=0, maxiter=100)


def _markov_events(n: int, seed: int, cycle: float = 50.0) -> np.ndarray:
    """Seeded 0/1 series with persistence and a seasonal swing (invented data)."""
    rng = np.random.default_rng(seed)
    y = np.zeros(n)
    u = rng.random(n)
    for t in range(1, n):
        eta = -0.6 + 1.1 * y[t - 1] + 0.8 * math.sin(2 * math.pi * t / cycle)
        y[t] = float(u[t] < 1.0 / (1.0 + math.exp(-eta)))
    return y


def _reference_forecast(y: np.ndarray, x: np.ndarray, targets, horizon: int, window_origin) -> dict:
    """prob[t] from a statsmodels fit from scratch on every usable row s <= window_origin(t)."""
    usable = np.isfinite(x).all(axis=1) & ~np.isnan(y)
    out = {}
    for t in targets:
        rows = np.flatnonzero(usable[: window_origin(t) + 1])
        res = _sm_fit(x[rows], y[rows])
        out[t] = float(res.predict(x[t:t + 1])[0])
    return out


# ---------------------------------------------------------------------------------------------------
# fit: published values and statsmodels


def test_spector_matches_greene():
    # Greene, Econometric Analysis (5th ed., 2003), Table 21.1 (table number recalled from memory),
    # logit column; the same Stata values sit in statsmodels' results_discrete.py.
    # Data: Spector & Mazzeo (1980), statsmodels.datasets.spector.
    data = sm.datasets.spector.load_pandas()
    res = logistic.fit(data.exog[["GPA", "TUCE", "PSI"]], data.endog)
    assert res.converged and not res.notes
    assert list(res.terms) == ["constant", "GPA", "TUCE", "PSI"]
    np.testing.assert_allclose(res.params, [-13.0213, 2.8261, 0.0952, 2.3787], atol=5e-5)
    np.testing.assert_allclose(res.bse, [4.9313, 1.2629, 0.1416, 1.0646], atol=5e-5)
    assert res.llf == pytest.approx(-12.8896, abs=5e-5)
    assert res.nobs == 32


def test_spector_matches_stata_to_full_precision():
    # Stata 11 results stored with 11+ digits in statsmodels' own tests
    # (statsmodels/discrete/tests/results/results_discrete.py, class Spector, order GPA, TUCE, PSI,
    # constant). Data: statsmodels.datasets.spector.
    stata = results_discrete.Spector.logit
    data = sm.datasets.spector.load_pandas()
    res = logistic.fit(data.exog[["GPA", "TUCE", "PSI"]], data.endog)
    order = [1, 2, 3, 0]  # ours: constant first
    # Stata's stopping rule leaves its stored estimates ~1.3e-7 (relative) from the maximum that
    # both this fit and statsmodels reach (they agree to 1e-14): compare to 1e-6 relative.
    np.testing.assert_allclose(res.params[order], stata.params, rtol=1e-6)
    np.testing.assert_allclose(res.bse[order], stata.bse, rtol=1e-6)
    np.testing.assert_allclose(res.cov[np.ix_(order, order)], stata.cov_params, rtol=1e-6)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_fit_agrees_with_statsmodels(seed):
    # statsmodels 0.15 Logit as reference, on seeded well-posed data; columns of very different
    # scale (a level near 1000, a trend up to 400) check the Jacobi-scaled solve.
    rng = np.random.default_rng(seed)
    n = 400
    x = np.column_stack([rng.standard_normal(n), 1000 + 30 * rng.standard_normal(n),
                         np.arange(n, dtype=float), rng.integers(0, 2, n)])
    eta = -0.3 + 0.8 * x[:, 0] + 0.02 * (x[:, 1] - 1000) - 0.002 * x[:, 2] + 0.5 * x[:, 3]
    y = (rng.random(n) < 1 / (1 + np.exp(-eta))).astype(float)
    ours = logistic.fit(x, y)
    ref = _sm_fit(sm.add_constant(x), y)
    np.testing.assert_allclose(ours.params, ref.params, rtol=1e-6, atol=1e-9)
    np.testing.assert_allclose(ours.bse, ref.bse, rtol=1e-6, atol=1e-9)
    assert ours.llf == pytest.approx(ref.llf, abs=1e-6)
    np.testing.assert_allclose(ours.z, ref.tvalues, rtol=1e-6)
    np.testing.assert_allclose(ours.pvalues, ref.pvalues, rtol=1e-6, atol=1e-12)
    np.testing.assert_allclose(ours.predict(x), ref.predict(sm.add_constant(x)), atol=1e-9)


def test_fit_without_constant_and_warm_start():
    # statsmodels Logit without a constant as reference (seeded data)
    rng = np.random.default_rng(5)
    x = rng.standard_normal((300, 2))
    y = (rng.random(300) < 1 / (1 + np.exp(-(x @ [1.0, -0.5])))).astype(float)
    cold = logistic.fit(x, y, add_constant=False)
    ref = _sm_fit(x, y)
    np.testing.assert_allclose(cold.params, ref.params, atol=1e-9)
    warm = logistic.fit(x, y, add_constant=False, start=cold.params)
    np.testing.assert_allclose(warm.params, cold.params, atol=1e-12)
    assert warm.iterations < cold.iterations


def test_fit_drops_nan_rows_with_a_note():
    # statsmodels Logit on the complete rows as reference
    rng = np.random.default_rng(3)
    x = rng.standard_normal((200, 2))
    y = (rng.random(200) < 1 / (1 + np.exp(-x[:, 0]))).astype(float)
    x[[4, 9], 1] = np.nan
    y[17] = np.nan
    res = logistic.fit(x, y)
    ok = ~np.isnan(y) & ~np.isnan(x).any(axis=1)
    ref = _sm_fit(sm.add_constant(x[ok]), y[ok])
    np.testing.assert_allclose(res.params, ref.params, atol=1e-9)
    assert res.nobs == 197 and res.dropped_rows == 3
    assert any("dropped 3 of 200 rows" in n for n in res.notes)


def test_fit_collinear_column_is_dropped():
    # statsmodels Logit on the independent columns as reference
    rng = np.random.default_rng(4)
    x1 = rng.standard_normal(250)
    y = (rng.random(250) < 1 / (1 + np.exp(-x1))).astype(float)
    x = np.column_stack([x1, 2.0 * x1 - 1.0, np.full(250, 3.0)])
    res = logistic.fit(x, y, names=["a", "b", "c"])
    ref = _sm_fit(sm.add_constant(x1), y)
    np.testing.assert_allclose(res.params[:2], ref.params, atol=1e-9)
    assert np.isnan(res.params[2:]).all() and np.isnan(res.bse[2:]).all()
    assert any("'b' dropped" in n for n in res.notes) and any("'c' dropped" in n for n in res.notes)


def test_complete_separation_gives_finite_ridge_estimates():
    # y = 1 exactly when x > 0: complete separation, no finite MLE (Albert & Anderson, 1984)
    x = np.arange(-10, 10) + 0.5
    y = (x > 0).astype(float)
    res = logistic.fit(x, y)
    assert np.isfinite(res.params).all() and np.isfinite(res.bse).all()
    assert res.penalty == logistic.RIDGE and res.converged
    assert any("separation" in n and "ridge" in n for n in res.notes)
    p = res.predict(x)
    assert np.all(p[y == 1] > 0.5) and np.all(p[y == 0] < 0.5) and np.all(np.diff(p) > 0)


def test_quasi_complete_separation_is_detected():
    # overlap only at x = 0: quasi-complete separation (Albert & Anderson, 1984)
    x = np.array([-3, -2, -1, 0, 0, 1, 2, 3], dtype=float)
    y = np.array([0, 0, 0, 0, 1, 1, 1, 1], dtype=float)
    res = logistic.fit(x, y)
    assert np.isfinite(res.params).all() and res.penalty > 0
    assert any("separation" in n for n in res.notes)


def _persistent_level_events(n: int, seed: int = 19000301) -> tuple[np.ndarray, np.ndarray]:
    """Invented data: a persistent AR(1) level with a daily cycle (as bench/refresh.py's full-height
    sheet); the event is "level > 1.5", the predictors the last event and the last level. The level
    predicts the event so sharply that ~1 % of the rows are fitted with probability 0 or 1 to 1e-11,
    yet the maximum-likelihood estimate is finite (the classes overlap)."""
    rng = np.random.default_rng(seed)
    noise = rng.normal(scale=0.35, size=n + 1)
    level = np.empty(n + 1)
    x = 0.0
    for i, e in enumerate(noise.tolist()):
        x = 0.97 * x + e
        level[i] = x
    level += 0.8 * np.sin(2 * np.pi * np.arange(n + 1) / 24.0)
    event = (level > 1.5).astype(float)
    return np.column_stack([event[:-1], level[:-1]]), event[1:]


def test_large_ordinary_fit_with_saturated_rows_is_not_separation():
    # 120,000 rows: the estimate equals statsmodels Logit (which converges normally) and no note speaks
    # of separation, although hundreds of rows are fitted to within 1e-11 of their outcome
    x, y = _persistent_level_events(120_000)
    ours = logistic.fit(x, y)
    ref = _sm_fit(sm.add_constant(x), y)
    assert ref.mle_retvals["converged"]
    eta = sm.add_constant(x) @ ref.params
    assert np.sum(np.where(y > 0.5, eta, -eta) > 25) > 100
    assert ours.penalty == 0.0 and ours.converged and not any("separation" in n for n in ours.notes)
    np.testing.assert_allclose(ours.params, ref.params, rtol=0, atol=1e-6)
    np.testing.assert_allclose(ours.bse, ref.bse, rtol=1e-6)
    assert ours.llf == pytest.approx(ref.llf, abs=1e-6)


def test_large_quasi_separated_fit_still_states_separation():
    # the same 120,000 rows and a marker column that is 1 on 25 rows, every one an event: its
    # coefficient has no finite maximum-likelihood estimate (quasi-complete separation, Albert &
    # Anderson, 1984), which the fit must state and answer with the ridge penalty
    x, y = _persistent_level_events(120_000)
    marker = np.zeros(y.size)
    marker[np.flatnonzero(y > 0.5)[::400][:25]] = 1.0
    res = logistic.fit(np.column_stack([x, marker]), y)
    assert res.penalty == logistic.RIDGE and np.isfinite(res.params).all()
    assert any("separation" in n and "ridge" in n for n in res.notes)
    # complete separation at that size too: y = 1 exactly when the level is above 1.5
    level = x[:, 1]
    res = logistic.fit(level, (level > 1.5).astype(float))
    assert res.penalty == logistic.RIDGE and any("separation" in n for n in res.notes)


def test_constant_target_falls_back_to_majority_share():
    x = np.arange(10.0)
    for value in (0.0, 1.0):
        res = logistic.fit(x, np.full(10, value))
        assert res.fallback == value and not res.converged
        assert np.isnan(res.params).all()
        assert any("majority share" in n for n in res.notes)
        np.testing.assert_array_equal(res.predict(x), np.full(10, value))


def test_coefficient_table_columns():
    data = sm.datasets.spector.load_pandas()
    table = logistic.fit(data.exog, data.endog).table()
    assert list(table.columns) == ["term", "estimate", "std_error", "z", "p"]
    assert table["term"].tolist() == ["constant", "GPA", "TUCE", "PSI"]


# ---------------------------------------------------------------------------------------------------
# design matrix


def test_design_lags_follow_the_horizon():
    y = np.array([0, 1, 1, 0, 1, 0, 0, 1], dtype=float)
    v = np.arange(8, dtype=float) * 10
    d = build(y, values=v, predictors={"p": v + 1}, known_ahead={"k": v + 2}, horizon=2, lags=2)
    assert d.terms == ["constant", "event t-2", "event t-3", "value t-2", "p", "k"]
    t = 5
    np.testing.assert_array_equal(d.x[t], [1.0, y[3], y[2], v[3], v[3] + 1, v[5] + 2])
    assert np.isnan(d.x[2, 2]) and not np.isnan(d.x[3, 2])


def test_time_axis_units():
    # calendar arithmetic (common practice): 2000-01-03 + 3652 days = 2010-01-02
    daily = time_axis(pd.date_range("2000-01-03", "2010-01-02", freq="D"), 3653)
    assert daily.tau[-1] == 3652.0 and daily.weekday[0] == 0.0  # 2000-01-03 was a Monday
    weekly = time_axis(pd.date_range("2021-01-04", periods=10, freq="7D"), 10)
    np.testing.assert_allclose(weekly.tau, np.arange(10.0))
    monthly = time_axis(pd.date_range("2021-01-31", periods=14, freq="ME"), 14)
    np.testing.assert_allclose(monthly.tau, np.arange(14.0))
    # spreadsheet serial day numbers, 1900 date system (ECMA-376 Part 1, "Dates and Times", §18.17.4,
    # section number recalled from memory): serial 36526 = 2000-01-01, so 36528 = 2000-01-03
    serial = time_axis([36528.0, 36529.0, 36530.0, 36533.0], 4)
    np.testing.assert_allclose(serial.tau, [0.0, 1.0, 2.0, 5.0])
    assert serial.weekday[0] == 0.0


@pytest.mark.parametrize("start, freq, n", [("1899-12-25", "D", 500), ("1969-12-29 06:00", "h", 900),
                                            ("2021-01-04", "7D", 60), ("1950-01-31", "ME", 40),
                                            ("2001-03-31", "QE", 30), ("1990-01-01", "YS", 25),
                                            ("2024-01-01", "B", 300)])
def test_time_axis_of_datetime64_in_numpy_equals_pandas(start, freq, n):
    # the datetime64 path (numpy only) against pandas' calendar (DatetimeIndex year, month, day_of_week),
    # the path of dates in any other form; NaT rows included
    stamps = pd.date_range(start, periods=n, freq=freq).to_numpy().astype("datetime64[s]")
    stamps[[3, n // 2]] = np.datetime64("NaT")
    fast = time_axis(stamps, n)
    slow = time_axis(np.array([None if np.isnat(v) else pd.Timestamp(v) for v in stamps], dtype=object), n)
    assert fast.unit == slow.unit
    np.testing.assert_allclose(fast.tau, slow.tau, rtol=1e-15, atol=1e-12, equal_nan=True)
    np.testing.assert_array_equal(fast.weekday, slow.weekday)


def test_weekday_terms_leave_one_day_out():
    dates = pd.date_range("2024-01-01", periods=21, freq="D")
    d = build(np.zeros(21), dates=dates, lags=0, weekday=True)
    assert d.terms[1:] == ["Tuesday", "Wednesday", "Thursday", "Friday", "Saturday", "Sunday"]
    np.testing.assert_array_equal(d.x[:, 1:].sum(axis=0), np.full(6, 3.0))


# ---------------------------------------------------------------------------------------------------
# forecast against statsmodels refits


def _reference_design(y, horizon, lags, cycle, harmonics):
    n = y.size
    tau = np.arange(n, dtype=float)
    cols = [np.ones(n)] + [_shift(y, horizon + k - 1) for k in range(1, lags + 1)]
    for k in range(1, harmonics + 1):
        cols += [np.sin(2 * np.pi * k * tau / cycle), np.cos(2 * np.pi * k * tau / cycle)]
    return np.column_stack(cols)


@pytest.mark.parametrize("horizon,lags", [(1, 1), (2, 2)])
def test_roll_forward_everywhere_matches_statsmodels_refits(horizon, lags):
    # statsmodels Logit refitted from scratch at every origin on all rows observed by it
    y = _markov_events(180, seed=11)
    res = logistic.forecast(y, horizon=horizon, lags=lags, cycle=50.0, harmonics=1)
    x = _reference_design(y, horizon, lags, 50.0, 1)
    need = logistic.min_rows(x.shape[1])
    usable = np.isfinite(x).all(axis=1)
    first = next(t for t in range(y.size) if usable[: max(t - horizon + 1, 0)].sum() >= need)
    assert np.isnan(res.prob[:first]).all()
    ref = _reference_forecast(y, x, range(first, y.size), horizon, lambda t: t - horizon)
    np.testing.assert_allclose(res.prob[first:], [ref[t] for t in range(first, y.size)], atol=1e-6)
    assert res.prob.size == y.size


def test_long_roll_forward_skips_passes_and_matches_statsmodels_to_1e_8(monkeypatch):
    # 12,000 rows: a quarter of the windows and more are solved from the local model at an anchor
    # without a pass over the window; the probabilities still equal statsmodels Logit refitted from
    # scratch (Newton to 1e-12) to 1e-8, checked at every 100th origin and the last ones
    from sheetfns._logit import irls

    passes = []
    real = irls.evaluate3
    monkeypatch.setattr(irls, "evaluate3", lambda *a, **k: passes.append(1) or real(*a, **k))
    y = _markov_events(12000, seed=13, cycle=365.25)
    res = logistic.forecast(y, lags=1, cycle=365.25, harmonics=2)
    x = _reference_design(y, 1, 1, 365.25, 2)
    first = int(np.flatnonzero(~np.isnan(res.prob))[0])
    assert res.refits > 11000 and len(passes) < 0.75 * res.refits, (len(passes), res.refits)
    origins = list(range(first, y.size, 100)) + list(range(y.size - 5, y.size))
    ref = {}
    for t in origins:
        rows = np.flatnonzero(np.isfinite(x[:t]).all(axis=1))
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            fit = sm.Logit(y[rows], x[rows]).fit(disp=0, maxiter=100, tol=1e-12)
        ref[t] = float(fit.predict(x[t:t + 1])[0])
    np.testing.assert_allclose([res.prob[t] for t in origins], [ref[t] for t in origins], rtol=0, atol=1e-8)


@pytest.mark.parametrize("refit,every", [("fixed", 0), ("roll", 1), ("roll 4", 4)])
def test_training_period_schemes_match_statsmodels(refit, every):
    # statsmodels Logit from scratch: the fixed fit on rows <= N - horizon, refits on expanding windows
    y = _markov_events(200, seed=12)
    n_train, horizon = 150, 2
    res = logistic.forecast(y, train_size=n_train, horizon=horizon, cycle=50.0, harmonics=1,
                            refit=refit)
    x = _reference_design(y, horizon, 1, 50.0, 1)

    def origin(t):
        anchor = n_train if every == 0 else n_train + ((t - n_train) // every) * every
        return anchor - horizon

    ref = _reference_forecast(y, x, range(n_train, y.size), horizon, origin)
    np.testing.assert_allclose(res.prob[n_train:], [ref[t] for t in range(n_train, y.size)], atol=1e-6)
    assert np.isnan(res.prob[:n_train]).all()
    if every == 0:
        rows = np.flatnonzero(np.isfinite(x[: n_train - horizon + 1]).all(axis=1))
        table_ref = _sm_fit(x[rows], y[rows])
        np.testing.assert_allclose(res.coefficients["estimate"], table_ref.params, atol=1e-6)
        np.testing.assert_allclose(res.coefficients["std_error"], table_ref.bse, atol=1e-6)
        np.testing.assert_allclose(res.coefficients["p"], table_ref.pvalues, atol=1e-6)
    assert list(res.coefficients["term"]) == ["constant", "event t-2", "sin 1", "cos 1"]


def test_future_rows_filled_exactly_up_to_horizon():
    # statsmodels Logit on all observed rows as reference for the future rows
    y = np.r_[_markov_events(160, seed=13), np.full(6, np.nan)]
    kn = np.random.default_rng(1).standard_normal(y.size)
    for horizon in (1, 3):
        res = logistic.forecast(y, horizon=horizon, train_size=120, known_ahead={"k": kn})
        last = 159
        assert np.isfinite(res.prob[last + 1: last + 1 + horizon]).all()
        assert np.isnan(res.prob[last + 1 + horizon:]).all()
        x = np.column_stack([np.ones(y.size), _shift(y, horizon), kn])
        rows = np.flatnonzero(np.isfinite(x[: last + 1]).all(axis=1))
        ref = _sm_fit(x[rows], y[rows])
        fut = np.arange(last + 1, last + 1 + horizon)
        np.testing.assert_allclose(res.prob[fut], ref.predict(x[fut]), atol=1e-6)
        assert res.prob.size == y.size


def test_forecast_constant_series_uses_majority_share():
    y = np.r_[np.zeros(80), [np.nan]]
    res = logistic.forecast(y, train_size=60)
    np.testing.assert_array_equal(res.prob[60:], np.zeros(21))
    assert any("majority share" in n for n in res.notes)


def test_forecast_separated_early_windows_stay_finite():
    # the first event comes late: early windows are one-class, then separated by the lag
    y = np.zeros(120)
    y[[70, 71, 72, 100, 101, 110]] = 1.0
    res = logistic.forecast(y)
    observed = res.prob[~np.isnan(res.prob)]
    assert observed.size and np.all((observed >= 0) & (observed <= 1))
    text = " ".join(res.notes)
    assert "majority share" in text and "ridge" in text


def test_weekday_and_dates_in_forecast():
    dates = pd.date_range("2023-01-02", periods=140, freq="D")
    y = (np.asarray(dates.day_of_week) >= 5).astype(float)
    y[::9] = 1 - y[::9]
    res = logistic.forecast(y, dates=dates, weekday=True, lags=0, train_size=100)
    assert res.coefficients["term"].tolist()[1:] == ["Tuesday", "Wednesday", "Thursday", "Friday",
                                                     "Saturday", "Sunday"]
    weekend = np.asarray(dates.day_of_week)[100:] >= 5
    assert res.prob[100:][weekend].min() > res.prob[100:][~weekend].max()


# ---------------------------------------------------------------------------------------------------
# property tests (hypothesis): no look-ahead, output length


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 10_000), horizon=st.integers(1, 3),
       scheme=st.sampled_from([(None, "fixed"), (None, "roll 3"), (60, "fixed"), (60, "roll"),
                               (60, "roll 5")]),
       cut=st.integers(0, 39))
def test_forecast_never_looks_ahead(seed, horizon, scheme, cut):
    # known_ahead values are known at the target row itself: only rows > t of them may change
    rng = np.random.default_rng(seed)
    n = 100
    y = (rng.random(n) < 0.4).astype(float)
    y[rng.integers(0, n, 3)] = np.nan  # interior gaps
    values = rng.standard_normal(n)
    pred = rng.standard_normal(n)
    known = rng.standard_normal(n)
    train_size, refit = scheme
    t = 60 + cut
    kwargs = dict(train_size=train_size, horizon=horizon, refit=refit, cycle=12.0, harmonics=1)
    base = logistic.forecast(y, values=values, predictors={"p": pred}, known_ahead={"k": known},
                             **kwargs)
    y2, v2, p2, k2 = y.copy(), values.copy(), pred.copy(), known.copy()
    later = slice(t - horizon + 1, None)
    y2[later] = 1.0 - y2[later]
    v2[later] = rng.standard_normal(v2[later].size)
    p2[later] = rng.standard_normal(p2[later].size) * 5
    k2[t + 1:] = rng.standard_normal(k2[t + 1:].size) * 3
    other = logistic.forecast(y2, values=v2, predictors={"p": p2}, known_ahead={"k": k2}, **kwargs)
    np.testing.assert_allclose(other.prob[: t + 1], base.prob[: t + 1], rtol=0, atol=1e-12)
    assert base.prob.size == n and other.prob.size == n


# ---------------------------------------------------------------------------------------------------
# bad input: one test each, the message names the argument and the value


@pytest.mark.parametrize("kwargs,needle", [
    (dict(y=[]), "`y` must not be empty"),
    (dict(y=[np.nan, np.nan, np.nan]), "`y` has no observed value"),
    (dict(y=[1.0]), "`y` must have at least 2 rows"),
    (dict(y=[0, 1, 2]), "`y` contains values not in {0, 1, NaN}"),
    (dict(horizon=0), "`horizon` must be an integer >= 1; got 0"),
    (dict(horizon=-2), "`horizon` must be an integer >= 1; got -2"),
    (dict(horizon=30), "`horizon` is longer than the data"),
    (dict(predictors={"p": np.zeros(5)}), "`predictors['p']` must have one value per row"),
    (dict(known_ahead={"k": np.zeros(25)}), "`known_ahead['k']` must have one value per row"),
    (dict(values=np.zeros(3)), "`values` must have one value per row"),
    (dict(dates=pd.date_range("2024-01-01", periods=4)), "`dates` must have one date per row"),
    (dict(refit="sometimes"), "`refit` must be 'fixed', 'roll' or 'roll N'"),
    (dict(refit="roll 0"), "got 'roll 0'"),
    (dict(harmonics=-1), "`harmonics` must be an integer >= 0; got -1"),
    (dict(cycle=0), "`cycle` must be a positive number of periods; got 0"),
    (dict(cycle=-12), "got -12"),
    (dict(cycle="year"), "got 'year'"),
    (dict(weekday=True), "`weekday` needs `dates`"),
    (dict(train_size=0), "`train_size` must be an integer >= 1; got 0"),
    (dict(train_size=21), "`train_size` must be an integer <= 20; got 21"),
    (dict(train_size=2), "`train_size` leaves"),
    (dict(predictors={"p": np.zeros(20)}, known_ahead={"p": np.zeros(20)}), "'p'"),
])
def test_bad_input(kwargs, needle):
    kwargs = dict(kwargs)
    y = kwargs.pop("y", np.tile([0.0, 1.0, 1.0, 0.0], 5))
    with pytest.raises(InputError) as err:
        logistic.forecast(y, **kwargs)
    assert needle in str(err.value)


def test_fit_bad_input():
    with pytest.raises(InputError, match="same number of rows"):
        logistic.fit(np.zeros((3, 1)), [0, 1])
    with pytest.raises(InputError, match="no complete row"):
        logistic.fit(np.array([np.nan, np.nan]), [0, 1])
    with pytest.raises(InputError, match=r"`start` must hold 2 values"):
        logistic.fit(np.arange(4.0), [0, 1, 0, 1], start=[0.0])


def test_docstring_example():
    # the example in fit's docstring (its values checked against statsmodels Logit)
    import doctest

    assert doctest.testmod(logistic).failed == 0


def test_import_stays_light():
    # the core must not pull statsmodels, scipy or pandas in at import time
    code = ("import sys, sheetfns.logistic; "
            "print(sorted(m for m in ('statsmodels', 'scipy', 'pandas') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_weekday_note_names_the_reference_day_not_the_first_date():
    # 2022-01-01 was a Saturday (common practice: the calendar); the reference day is still Monday,
    # and the note must not read as "the weekday of the first date"
    dates = pd.date_range("2022-01-01", periods=21, freq="D")
    d = build(np.zeros(21), dates=dates, lags=0, weekday=True)
    assert d.terms[1] == "Tuesday"
    assert ("weekday terms compare with Monday (the first day of the week, Monday to Sunday, that the data "
            "hold)") in d.notes
