"""Tests of sheetfns.valuemodel: the probability of a threshold event from a least-squares forecast.

External references, named beside each check:
* statsmodels 0.15 ``OLS`` (a general-purpose reference library): ``get_prediction(...)``'s
  ``predicted_mean`` and ``se_obs``, refitted from scratch at every origin for the roll-forward
  schemes, with ``scipy.stats.t`` (scipy 1.17) for the event probability -- on open datasets shipped
  with statsmodels:
  - ``statsmodels.datasets.nile``: annual flow of the Nile at Aswan, 1871-1970 (Cobb, G. W. 1978,
    "The problem of the Nile: conditional solution to a changepoint problem", *Biometrika* 65(2));
  - ``statsmodels.datasets.macrodata``: US quarterly macroeconomic series 1959Q1-2009Q3 (Federal
    Reserve Bank of St. Louis FRED, Bureau of Economic Analysis, Bureau of Labor Statistics).
* a simulated Gaussian AR(1) (invented data, seeded) whose true conditional event probability is
  known: the normal distribution of the next value given the last (common practice).
* ``sheetfns.events.flag`` for the quantity and the event side (the home of the rules).
"""
from __future__ import annotations

import math
import subprocess
import sys
import warnings

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sheetfns import logistic, valuemodel
from sheetfns.errors import CriterionError, InputError
from sheetfns.events import approx_equal, flag, parse_criterion

sm = pytest.importorskip("statsmodels.api")
stats = pytest.importorskip("scipy.stats")


# ---------------------------------------------------------------------------------------------------
# a slow, obviously correct reference written here


def _nile() -> np.ndarray:
    return sm.datasets.nile.load_pandas().data["volume"].to_numpy(dtype=float).copy()


def _macro() -> pd.DataFrame:
    return sm.datasets.macrodata.load_pandas().data


def _ref_quantity(x: np.ndarray, kind: str) -> np.ndarray:
    s = pd.Series(x)
    if kind == "value":
        return s.to_numpy()
    prev = s.ffill().shift(1)          # the last observed value strictly before t
    change = s - prev
    if kind == "change":
        return change.to_numpy()
    out = 100.0 * change / prev.abs()
    return out.where(prev != 0).to_numpy()


def _ref_design(x, kind, h, lags, predictors=(), known=(), cycle=None, harmonics=0, trend=False):
    """constant, lags of the quantity, [value t-h for change rules], predictors at t-h, known-ahead
    at t, sin/cos of the row index, trend -- the order of the logistic design."""
    n = x.size
    q = pd.Series(_ref_quantity(x, kind))
    cols = [np.ones(n)]
    n_lags = max(lags, 1) if kind == "value" else lags
    cols += [q.shift(h + j - 1).to_numpy() for j in range(1, n_lags + 1)]
    if kind != "value":
        cols.append(pd.Series(x).shift(h).to_numpy())
    cols += [pd.Series(p).shift(h).to_numpy() for p in predictors]
    cols += [np.asarray(k, dtype=float) for k in known]
    tau = np.arange(n, dtype=float)
    for k in range(1, harmonics + 1 if cycle else 1):
        cols += [np.sin(2 * np.pi * k * tau / cycle), np.cos(2 * np.pi * k * tau / cycle)]
    if trend:
        cols.append(tau)
    return q.to_numpy(), np.column_stack(cols)


def _ref_forecast(q, X, targets, origin, side, cut):
    """statsmodels OLS from scratch on every usable row s <= origin(t): mean, se_obs, dof, prob."""
    usable = np.isfinite(X).all(axis=1) & ~np.isnan(q)
    out = {}
    fits = {}
    for t in targets:
        o = origin(t)
        if o not in fits:
            rows = np.flatnonzero(usable[: o + 1])
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")     # statsmodels' note on a rank-deficient design
                fits[o] = sm.OLS(q[rows], X[rows]).fit()
        res = fits[o]
        pred = res.get_prediction(X[t:t + 1])
        mean, se = float(pred.predicted_mean[0]), float(pred.se_obs[0])
        out[t] = (mean, se, res.df_resid, float(stats.t.cdf(side * (mean - cut) / se, res.df_resid)))
    return out


def _assert_matches(res, ref, targets):
    mean = np.array([ref[t][0] for t in targets])
    se = np.array([ref[t][1] for t in targets])
    dof = np.array([ref[t][2] for t in targets])
    prob = np.array([ref[t][3] for t in targets])
    np.testing.assert_allclose(res.mean[targets], mean, rtol=1e-9)
    np.testing.assert_allclose(res.scale[targets], se, rtol=1e-9)
    np.testing.assert_array_equal(res.dof[targets], dof)
    np.testing.assert_allclose(res.prob[targets], prob, rtol=0, atol=1e-8)


def _origin(n_train, horizon, every):
    def origin(t):
        if n_train is None:
            return t - horizon
        anchor = n_train if every == 0 else n_train + ((t - n_train) // every) * every
        return anchor - horizon
    return origin


# ---------------------------------------------------------------------------------------------------
# against statsmodels OLS + scipy t on open datasets


@pytest.mark.parametrize("refit,every", [("fixed", 0), ("roll", 1), ("roll 3", 3)])
@pytest.mark.parametrize("horizon", [1, 2])
def test_nile_value_rule_matches_statsmodels(refit, every, horizon):
    # Nile flow (statsmodels.datasets.nile), event: a flow above 1000; statsmodels OLS + scipy t
    x = _nile()
    n_train = 70
    res = valuemodel.forecast(x, ">1000", train_size=n_train, horizon=horizon, lags=2, refit=refit)
    q, X = _ref_design(x, "value", horizon, 2)
    targets = np.arange(n_train, x.size)
    ref = _ref_forecast(q, X, targets, _origin(n_train, horizon, every), side=1.0, cut=1000.0)
    _assert_matches(res, ref, targets)
    assert np.isnan(res.prob[:n_train]).all()
    assert list(res.coefficients["term"]) == ["constant", f"value t-{horizon}", f"value t-{horizon + 1}"]


def test_nile_fixed_coefficient_table_matches_statsmodels():
    # statsmodels OLS on rows observed at the first validation origin: params, bse, t, p, s
    x = _nile()
    res = valuemodel.forecast(x, "<=800", train_size=60, lags=1)
    q, X = _ref_design(x, "value", 1, 1)
    rows = np.flatnonzero(np.isfinite(X[:60]).all(axis=1))
    ref = sm.OLS(q[rows], X[rows]).fit()
    table = res.coefficients
    assert list(table.columns) == ["term", "estimate", "std_error", "t", "p"]
    np.testing.assert_allclose(table["estimate"], ref.params, rtol=1e-9)
    np.testing.assert_allclose(table["std_error"], ref.bse, rtol=1e-9)
    np.testing.assert_allclose(table["t"], ref.tvalues, rtol=1e-9)
    np.testing.assert_allclose(table["p"], ref.pvalues, rtol=1e-8, atol=1e-15)
    assert res.residual_scale == pytest.approx(math.sqrt(ref.scale), rel=1e-10)
    assert table.attrs["residual_scale"] == res.residual_scale and table.attrs["dof"] == ref.df_resid


@pytest.mark.parametrize("horizon", [1, 3])
def test_nile_change_rule_roll_forward_with_gaps(horizon):
    # Nile with three flows blanked (changes skip blanks); event: a fall of more than 50 on the last
    # observed flow; roll-forward everywhere, statsmodels refitted at every origin
    x = _nile()
    x[[30, 55, 81]] = np.nan
    res = valuemodel.forecast(x, "fall>50", horizon=horizon, lags=1)
    q, X = _ref_design(x, "change", horizon, 1)
    need = logistic.min_rows(X.shape[1])
    usable = np.isfinite(X).all(axis=1) & ~np.isnan(q)
    first = next(t for t in range(x.size) if usable[: max(t - horizon + 1, 0)].sum() >= need)
    assert np.isnan(res.prob[:first]).all()
    targets = np.array([t for t in range(first, x.size) if np.isfinite(X[t]).all()])
    ref = _ref_forecast(q, X, targets, lambda t: t - horizon, side=-1.0, cut=-50.0)
    _assert_matches(res, ref, targets)
    assert res.quantity == "change" and res.event == "change < -50"
    assert list(res.coefficients["term"]) == ["constant", f"change t-{horizon}", f"value t-{horizon}"]


def test_macrodata_percent_change_with_predictors_cycle_and_trend():
    # US real GDP (statsmodels.datasets.macrodata), event: growth of at least 1% on the quarter;
    # the lagged unemployment rate as a predictor, a yearly cycle (4 quarters), a trend; roll
    d = _macro()
    x = d["realgdp"].to_numpy(dtype=float)
    unemp = d["unemp"].to_numpy(dtype=float)
    horizon, n_train = 2, 150
    res = valuemodel.forecast(x, "rise%>=1", predictors={"unemp": unemp}, train_size=n_train,
                              horizon=horizon, lags=1, cycle=4.0, harmonics=1, trend=True, refit="roll")
    q, X = _ref_design(x, "percent change", horizon, 1, predictors=[unemp], cycle=4.0, harmonics=1,
                       trend=True)
    targets = np.arange(n_train, x.size)
    ref = _ref_forecast(q, X, targets, _origin(n_train, horizon, 1), side=1.0, cut=1.0)
    _assert_matches(res, ref, targets)
    assert list(res.coefficients["term"]) == ["constant", "% change t-2", "value t-2", "unemp", "sin 1",
                                              "cos 1", "trend"]


def test_macrodata_value_rule_with_known_ahead_roll_every_four():
    # US inflation (statsmodels.datasets.macrodata), event: deflation (inflation below 0), the
    # treasury-bill rate of the target quarter as a known-ahead input; refitted every 4 origins
    d = _macro()
    x = d["infl"].to_numpy(dtype=float)
    tbill = d["tbilrate"].to_numpy(dtype=float)
    n_train = 160
    res = valuemodel.forecast(x, "<0", known_ahead={"tbill": tbill}, train_size=n_train, lags=2,
                              refit="roll 4")
    q, X = _ref_design(x, "value", 1, 2, known=[tbill])
    targets = np.arange(n_train, x.size)
    ref = _ref_forecast(q, X, targets, _origin(n_train, 1, 4), side=-1.0, cut=0.0)
    _assert_matches(res, ref, targets)
    assert res.refits == len({(t - n_train) // 4 for t in targets})


def test_future_rows_filled_up_to_horizon_from_all_rows():
    # statsmodels OLS on every usable observed row for the future rows
    x = np.r_[_nile(), np.full(5, np.nan)]
    for horizon in (1, 3):
        res = valuemodel.forecast(x, ">=900", train_size=80, horizon=horizon)
        last = 99
        fut = np.arange(last + 1, last + 1 + horizon)
        assert np.isfinite(res.prob[fut]).all() and np.isnan(res.prob[last + 1 + horizon:]).all()
        q, X = _ref_design(x, "value", horizon, 1)
        ref = _ref_forecast(q, X, fut, lambda t, o=last: o, side=1.0, cut=900.0)
        _assert_matches(res, ref, fut)
        assert res.future_fit is not None and res.future_fit.nobs == 100 - horizon


def test_collinear_predictor_matches_statsmodels_pinv():
    # a predictor that is exactly twice another: rank-deficient; statsmodels' OLS (pinv, minimum
    # norm, df = n - rank) as reference
    x = _nile()
    z = np.random.default_rng(2).standard_normal(x.size)
    res = valuemodel.forecast(x, ">1000", predictors={"a": z, "b": 2.0 * z}, train_size=70)
    q, X = _ref_design(x, "value", 1, 1, predictors=[z, 2.0 * z])
    targets = np.arange(70, x.size)
    ref = _ref_forecast(q, X, targets, _origin(70, 1, 0), side=1.0, cut=1000.0)
    _assert_matches(res, ref, targets)
    assert any("collinear" in n for n in res.notes)


# ---------------------------------------------------------------------------------------------------
# simulated Gaussian AR(1): the Brier score close to the oracle's


@pytest.mark.parametrize("horizon,refit", [(1, "fixed"), (1, "roll"), (3, "roll 10")])
def test_ar1_brier_within_two_percent_of_the_oracle(horizon, refit):
    # simulated data (seeded): x[t] = 10 + 0.7 (x[t-1] - 10) + e[t], e ~ N(0, 1); event x > 11.
    # Given x[t-h] the next value is normal with mean 10 + 0.7^h (x[t-h] - 10) and variance
    # sum_{j<h} 0.49^j (common practice): the oracle probability.
    rng = np.random.default_rng(20240607)
    n, n_train, phi, cut = 4000, 500, 0.7, 11.0
    x = np.empty(n)
    x[0] = 10.0
    e = rng.standard_normal(n)
    for t in range(1, n):
        x[t] = 10.0 + phi * (x[t - 1] - 10.0) + e[t]
    res = valuemodel.forecast(x, f">{cut}", train_size=n_train, horizon=horizon, refit=refit)
    mu = 10.0 + phi ** horizon * (x[n_train - horizon: n - horizon] - 10.0)
    sd = math.sqrt(sum(phi ** (2 * j) for j in range(horizon)))
    oracle = 0.5 * np.array([math.erfc((cut - m) / (sd * math.sqrt(2.0))) for m in mu])
    actual = (x[n_train:] > cut).astype(float)
    brier_model = float(np.mean((res.prob[n_train:] - actual) ** 2))
    brier_oracle = float(np.mean((oracle - actual) ** 2))
    assert brier_model <= 1.02 * brier_oracle
    assert np.mean(np.abs(res.prob[n_train:] - oracle)) < 0.05     # close row by row, too


# ---------------------------------------------------------------------------------------------------
# the quantity and the event side agree with sheetfns.events


@pytest.mark.parametrize("rule", [">0.3", ">=0.3", "<-0.2", "<=0", "rise", "fall", "rise>0.5",
                                  "fall>=0.4", "rise%>=20", "fall%>15", "rise%>0"])
def test_event_side_agrees_with_flag(rule):
    # events.flag is the home of the rules: the value model's event is flag's event wherever the
    # quantity is observed (random values with zeros, blanks and a repeated value; invented data)
    rng = np.random.default_rng(len(rule))
    v = np.round(rng.standard_normal(300), 1)
    v[rng.choice(300, 20, replace=False)] = np.nan
    v[rng.choice(300, 15, replace=False)] = 0.0
    q, _ = valuemodel.quantity(v, rule)
    side, cut, strict = valuemodel._event_side(parse_criterion(rule))
    d = side * (q - cut)
    tie = approx_equal(q, cut)      # a tie at spreadsheet precision (DESIGN.md §5)
    ours = np.where(np.isnan(q), np.nan, np.where(tie, not strict, d > 0)).astype(float)
    np.testing.assert_array_equal(ours, flag(v, rule))


def test_degenerate_scale_uses_the_rule_itself():
    mean = np.array([1.0, 2.0, 3.0])
    scale = np.zeros(3)
    dof = np.full(3, 5.0)
    np.testing.assert_array_equal(valuemodel._probability(mean, scale, dof, 1.0, 2.0, True), [0, 0, 1])
    np.testing.assert_array_equal(valuemodel._probability(mean, scale, dof, 1.0, 2.0, False), [0, 1, 1])
    np.testing.assert_array_equal(valuemodel._probability(mean, scale, dof, -1.0, 2.0, False), [1, 1, 0])


def test_perfect_fit_gives_zero_or_one():
    # a straight line: every residual 0, the predictive distribution a point
    x = np.arange(1.0, 81.0) * 2.5
    res = valuemodel.forecast(x, ">150.1", train_size=40)
    p = res.prob[40:]
    assert set(np.unique(p)) <= {0.0, 1.0}
    np.testing.assert_array_equal(p, (x[40:] > 150.1).astype(float))


# ---------------------------------------------------------------------------------------------------
# where the model does not apply


@pytest.mark.parametrize("values,rule,min_run,needle", [
    (["ok", "alarm", "ok", "ok"], "=alarm", 1, "compares text"),
    ([1.0, 2.0, 3.0, 4.0], "=3", 1, "equality"),
    ([1.0, 2.0, 3.0, 4.0], "<>0", 1, "equality"),
    ([1.0, 2.0, 3.0, 4.0], ">2", 2, "min_run is 2"),
    ([0, 1, None, 1, 0], ">0.5", 1, "only 0 and 1"),
    ([True, False, True, True], "=TRUE", 1, "only 0 and 1"),      # the column is the first reason
    ([True, False, True, True], ">=1", 1, "only 0 and 1"),
    ([["ok"], ["alarm"], [None]], "<>ok", 1, "compares text"),     # a spreadsheet column range
])
def test_absent_with_a_note(values, rule, min_run, needle):
    res = valuemodel.forecast(values, rule, min_run=min_run)
    assert not res.applies
    assert res.prob.size == len(values) and np.isnan(res.prob).all() and np.isnan(res.mean).all()
    assert needle in res.notes[0] and res.notes[0].startswith("value model not used")
    assert list(res.coefficients.columns) == ["term", "estimate", "std_error", "t", "p"]
    assert res.coefficients.empty


def test_text_cells_count_as_blanks_under_a_numeric_rule():
    x = list(_nile()[:60])
    with_text = x.copy()
    with_text[20] = "n/a"
    blank = x.copy()
    blank[20] = None
    a = valuemodel.forecast(with_text, ">1000", train_size=40)
    b = valuemodel.forecast(blank, ">1000", train_size=40)
    np.testing.assert_array_equal(a.prob, b.prob)


def test_design_terms_mirror_the_logistic_design():
    # the logistic model's terms with the quantity's lags in place of the event lags (no term twice)
    x = _nile()
    dates = pd.date_range("1871-01-01", periods=x.size, freq="YS")
    ev = flag(x, ">1000")
    lg = logistic.forecast(ev, values=x, dates=dates, train_size=70, lags=2, trend=True)
    vm = valuemodel.forecast(x, ">1000", dates=dates, train_size=70, lags=2, trend=True)
    assert list(lg.coefficients["term"]) == ["constant", "event t-1", "event t-2", "value t-1", "trend"]
    assert list(vm.coefficients["term"]) == ["constant", "value t-1", "value t-2", "trend"]
    ch = valuemodel.forecast(x, "rise", dates=dates, train_size=70, lags=0)
    assert list(ch.coefficients["term"]) == ["constant", "value t-1"]


# ---------------------------------------------------------------------------------------------------
# no look-ahead (hypothesis)


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 10_000), horizon=st.integers(1, 3),
       rule=st.sampled_from([">0.2", "<=-0.5", "rise>0.3", "fall%>10"]),
       scheme=st.sampled_from([(None, "fixed"), (None, "roll 3"), (60, "fixed"), (60, "roll"),
                               (60, "roll 5")]),
       cut=st.integers(0, 35))
def test_never_looks_ahead(seed, horizon, rule, scheme, cut):
    # changing rows after t never changes the forecasts for rows <= t + horizon - 1 (known-ahead
    # inputs are known at the target row: only their rows after t + horizon - 1 change)
    rng = np.random.default_rng(seed)
    n = 100
    v = rng.standard_normal(n).cumsum() * 0.3 + 5.0
    v[rng.integers(0, n, 3)] = np.nan
    pred = rng.standard_normal(n)
    known = rng.standard_normal(n)
    train_size, refit = scheme
    t = 60 + cut
    kwargs = dict(train_size=train_size, horizon=horizon, refit=refit, cycle=12.0, harmonics=1)
    base = valuemodel.forecast(v, rule, predictors={"p": pred}, known_ahead={"k": known}, **kwargs)
    v2, p2, k2 = v.copy(), pred.copy(), known.copy()
    v2[t + 1:] = rng.standard_normal(n - t - 1) * 3 + 5.0
    p2[t + 1:] = rng.standard_normal(n - t - 1) * 5
    k2[t + horizon:] = rng.standard_normal(k2[t + horizon:].size) * 3
    other = valuemodel.forecast(v2, rule, predictors={"p": p2}, known_ahead={"k": k2}, **kwargs)
    keep = slice(0, t + horizon)
    for name in ("prob", "mean", "scale", "dof"):
        np.testing.assert_allclose(getattr(other, name)[keep], getattr(base, name)[keep], rtol=1e-12,
                                   atol=1e-14)


# ---------------------------------------------------------------------------------------------------
# bad input: one test each, the message names the argument and the value


@pytest.mark.parametrize("kwargs,needle", [
    (dict(values=[]), "`values` must not be empty"),
    (dict(values=[3.0]), "`values` must have at least 2 rows"),
    (dict(values=[np.nan, np.nan, np.nan]), "`values` has no value to learn from"),
    (dict(values=[np.nan, 4.0, np.nan], criterion="rise"), "`values` has no change to learn from"),
    (dict(values=[[1, 2], [3, 4]]), "`values` must be one-dimensional"),
    (dict(values=[1, {}, 3]), "`values` must hold numbers"),
    (dict(horizon=0), "`horizon` must be an integer >= 1; got 0"),
    (dict(horizon=30), "`horizon` is longer than the data"),
    (dict(lags=-1), "`lags` must be an integer >= 0; got -1"),
    (dict(harmonics=1.5), "`harmonics` must be an integer; got 1.5"),
    (dict(cycle=0), "`cycle` must be a positive number of periods; got 0"),
    (dict(weekday=True), "`weekday` needs `dates`"),
    (dict(refit="weekly"), "`refit` must be 'fixed', 'roll' or 'roll N'"),
    (dict(min_run=0), "`min_run` must be an integer >= 1; got 0"),
    (dict(train_size=0), "`train_size` must be an integer >= 1; got 0"),
    (dict(train_size=21), "`train_size` must be an integer <= 20; got 21"),
    (dict(train_size=2), "`train_size` leaves"),
    (dict(predictors={"p": np.zeros(5)}), "`predictors['p']` must have one value per row of `values`"),
    (dict(predictors=[1, 2]), "`predictors` must be a mapping"),
    (dict(known_ahead={"k": np.zeros(25)}), "`known_ahead['k']` must have one value per row"),
    (dict(dates=pd.date_range("2024-01-01", periods=4)), "`dates` must have one date per row of `values`"),
    (dict(predictors={"value t-2": np.zeros(20)}, lags=2), "'value t-2' twice"),
])
def test_bad_input(kwargs, needle):
    kwargs = dict(kwargs)
    values = kwargs.pop("values", np.tile([3.0, 5.0, 4.0, 7.0], 5))
    criterion = kwargs.pop("criterion", ">4.5")
    with pytest.raises(InputError) as err:
        valuemodel.forecast(values, criterion, **kwargs)
    assert needle in str(err.value)
    named = err.value.argument.split("[")[0]          # every error names the argument it is about
    assert named in needle or (named == "predictors" and "twice" in needle), err.value.argument


def test_quantity_of_a_text_rule_is_an_error():
    with pytest.raises(InputError, match="compares text"):
        valuemodel.quantity(["ok", "alarm"], "=alarm")


@pytest.mark.parametrize("rule", ["", "above 3", "rise<2", "fall%", 3.5])
def test_bad_criterion(rule):
    with pytest.raises(CriterionError) as err:
        valuemodel.forecast([1.0, 2.0, 3.0], rule)
    assert "criterion" in str(err.value)


def test_docstring_examples_and_light_import():
    import doctest

    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert doctest.testmod(valuemodel).failed == 0
    code = ("import sys, sheetfns.valuemodel; "
            "print(sorted(m for m in ('statsmodels', 'scipy', 'pandas') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"
