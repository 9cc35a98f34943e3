"""Scores against general-purpose reference libraries (scikit-learn, scipy, statsmodels) and slow,
obviously correct references written here, on seeded random (invented) data.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from sheetfns import scores

N = 600


@pytest.fixture(scope="module")
def data():
    """Seeded invented data: events at a 30% base rate, a 0/1 forecast right about 75% of the
    time, and a probability forecast loosely tied to the events."""
    rng = np.random.default_rng(20240601)
    actual = (rng.random(N) < 0.3).astype(float)
    forecast = np.where(rng.random(N) < 0.75, actual, 1.0 - actual)
    prob = np.clip(0.3 + 0.35 * (actual - 0.3) + rng.normal(0, 0.2, N), 0.0, 1.0)
    return actual, forecast, prob


# --- categorical scores against scikit-learn ------------------------------------------------------
def _sklearn_categorical(actual, forecast):
    from sklearn import metrics as m

    y, f = actual.astype(int), forecast.astype(int)
    return {
        "accuracy": m.accuracy_score(y, f),
        "sensitivity": m.recall_score(y, f),
        "specificity": m.recall_score(y, f, pos_label=0),
        "precision": m.precision_score(y, f),
        "f1": m.f1_score(y, f),
        "balanced_accuracy": m.balanced_accuracy_score(y, f),
        "matthews": m.matthews_corrcoef(y, f),
        # Cohen's kappa on a 2x2 table is the Heidke skill score (Jolliffe & Stephenson 2012, ch. 3).
        "heidke_skill": m.cohen_kappa_score(y, f),
        # The Jaccard index of the event class is the critical success index.
        "critical_success_index": m.jaccard_score(y, f),
        "false_alarm_rate": 1.0 - m.recall_score(y, f, pos_label=0),
    }


def test_categorical_against_sklearn(data):
    actual, forecast, _ = data
    ours = scores.categorical(actual, forecast)
    for key, ref in _sklearn_categorical(actual, forecast).items():
        assert ours[key] == pytest.approx(ref, rel=1e-12, abs=1e-15), key


def test_confusion_against_sklearn(data):
    from sklearn.metrics import confusion_matrix

    actual, forecast, _ = data
    (tn, fp), (fn, tp) = confusion_matrix(actual.astype(int), forecast.astype(int))
    assert scores.confusion(actual, forecast) == (tp, fp, fn, tn)


def test_nan_rows_skipped_like_dropping_them_for_sklearn(data):
    actual, forecast, _ = data
    a, f = actual.copy(), forecast.copy()
    a[::7] = np.nan
    f[3::11] = np.nan
    keep = ~(np.isnan(a) | np.isnan(f))
    ours = scores.categorical(a, f)
    for key, ref in _sklearn_categorical(actual[keep], forecast[keep]).items():
        assert ours[key] == pytest.approx(ref, rel=1e-12, abs=1e-15), key


# --- probability scores against scikit-learn and scipy --------------------------------------------
def test_brier_log_loss_auc_against_sklearn(data):
    from sklearn.metrics import brier_score_loss, log_loss, roc_auc_score

    actual, _, prob = data
    ours = scores.probabilistic(actual, prob)
    assert ours["brier"] == pytest.approx(brier_score_loss(actual, prob), rel=1e-12)
    assert ours["log_loss"] == pytest.approx(log_loss(actual, prob), rel=1e-12)
    assert ours["roc_auc"] == pytest.approx(roc_auc_score(actual, prob), rel=1e-12)


def test_auc_with_ties_is_mann_whitney_u_over_n1_n0(data):
    # scipy.stats.mannwhitneyu: U of the event rows against the non-event rows, ties counted 1/2.
    from scipy.stats import mannwhitneyu
    from sklearn.metrics import roc_auc_score

    actual, _, prob = data
    coarse = np.round(prob, 1)  # many ties
    n1 = int(actual.sum())
    n0 = N - n1
    u = mannwhitneyu(coarse[actual == 1], coarse[actual == 0]).statistic
    ours = scores.probabilistic(actual, coarse)["roc_auc"]
    assert ours == pytest.approx(u / (n1 * n0), rel=1e-12)
    assert ours == pytest.approx(roc_auc_score(actual, coarse), rel=1e-12)


def test_log_loss_clipping_documented_eps():
    # A confident miss costs -log(eps) with eps = LOG_LOSS_EPS = 1e-15 (documented clipping).
    got = scores.probabilistic([1.0, 0.0], [0.0, 0.0])["log_loss"]
    assert got == pytest.approx(-math.log(scores.LOG_LOSS_EPS) / 2, rel=1e-9)


def test_brier_skill_against_reference_and_climatology(data):
    from sklearn.metrics import brier_score_loss

    actual, _, prob = data
    share = np.full(N, 0.25)
    got = scores.probabilistic(actual, prob, reference=share)["brier_skill"]
    assert got == pytest.approx(1 - brier_score_loss(actual, prob) / brier_score_loss(actual, share))
    assert scores.probabilistic(actual, prob, reference=0.25)["brier_skill"] == pytest.approx(got)
    # None: the in-sample climatology, whose Brier score is obar (1 - obar) (Wilks 2011, 8.4).
    obar = actual.mean()
    clim = scores.probabilistic(actual, prob)["brier_skill"]
    assert clim == pytest.approx(1 - brier_score_loss(actual, prob) / (obar * (1 - obar)))
    assert clim == pytest.approx(
        1 - brier_score_loss(actual, prob) / brier_score_loss(actual, np.full(N, obar)))


def test_roc_points_against_sklearn(data):
    from sklearn.metrics import auc, roc_curve

    actual, _, prob = data
    coarse = np.round(prob, 2)
    fpr, tpr, thr = roc_curve(actual, coarse, drop_intermediate=False)
    pts = scores.roc_points(actual, coarse)
    np.testing.assert_allclose(pts.false_alarm_rate, fpr, rtol=0, atol=1e-15)
    np.testing.assert_allclose(pts.hit_rate, tpr, rtol=0, atol=1e-15)
    np.testing.assert_array_equal(pts.threshold[1:], thr[1:])
    assert np.isinf(pts.threshold[0])
    # The trapezoidal area under the points is the ROC area (Fawcett 2006).
    assert auc(pts.false_alarm_rate, pts.hit_rate) == pytest.approx(
        scores.probabilistic(actual, coarse)["roc_auc"], rel=1e-12)


# --- Murphy (1973) decomposition ------------------------------------------------------------------
def test_murphy_identity_exact_when_each_bin_holds_one_value():
    # Murphy, A. H. (1973), J. Appl. Meteor. 12: BS = REL - RES + UNC when the forecasts in each
    # bin are identical. Forecasts 0.05, 0.15, ..., 0.95: one value per tenth.
    rng = np.random.default_rng(1973)
    prob = rng.integers(0, 10, 2000) / 10 + 0.05
    actual = (rng.random(2000) < prob).astype(float)
    d = scores.brier_decomposition(actual, prob, bins=10)
    assert d["brier"] == pytest.approx(np.mean((prob - actual) ** 2), rel=1e-12)
    assert d["reliability"] - d["resolution"] + d["uncertainty"] == pytest.approx(d["brier"],
                                                                                 rel=1e-12)
    assert d["table"]["count"].sum() == 2000


def test_murphy_identity_with_edges_around_every_distinct_value():
    # Forecasts k / 10 for k = 0..10 (0 and 1 included), edges between them.
    rng = np.random.default_rng(1950)
    prob = rng.integers(0, 11, 1500) / 10
    actual = (rng.random(1500) < prob).astype(float)
    edges = np.r_[0.0, np.arange(0.05, 1.0, 0.1), 1.0]
    d = scores.brier_decomposition(actual, prob, bins=edges)
    assert d["reliability"] - d["resolution"] + d["uncertainty"] == pytest.approx(d["brier"],
                                                                                 rel=1e-12)
    assert (d["table"]["count"] > 0).all()


def test_decomposition_with_spread_bins_adds_the_within_bin_terms(data):
    # Stephenson, Coelho & Jolliffe (2008), Weather and Forecasting 23: when forecasts vary inside a
    # bin, BS = REL - RES + UNC + WBV - 2 WBC (within-bin variance and covariance). Slow reference.
    actual, _, prob = data
    d = scores.brier_decomposition(actual, prob, bins=5)
    k = np.minimum((prob * 5).astype(int), 4)
    wbv = wbc = 0.0
    for b in range(5):
        p, o = prob[k == b], actual[k == b]
        if p.size:
            wbv += float(np.sum((p - p.mean()) ** 2))
            wbc += float(np.sum((p - p.mean()) * (o - o.mean())))
    total = d["reliability"] - d["resolution"] + d["uncertainty"] + (wbv - 2 * wbc) / N
    assert total == pytest.approx(d["brier"], rel=1e-12)


def test_reliability_table_against_pandas_groupby(data):
    actual, _, prob = data
    table = scores.brier_decomposition(actual, prob, bins=10)["table"]
    assert list(table.columns) == ["bin", "lower", "upper", "mean_forecast", "observed_frequency",
                                   "count"]
    import pandas as pd

    k = np.minimum(np.floor(prob * 10 + 1e-9), 9).astype(int) + 1
    ref = pd.DataFrame({"bin": k, "p": prob, "o": actual}).groupby("bin").agg(
        mean_forecast=("p", "mean"), observed_frequency=("o", "mean"), count=("p", "size"))
    mine = table.set_index("bin").loc[ref.index]
    np.testing.assert_allclose(mine["mean_forecast"], ref["mean_forecast"], rtol=1e-12)
    np.testing.assert_allclose(mine["observed_frequency"], ref["observed_frequency"], rtol=1e-12)
    np.testing.assert_array_equal(mine["count"], ref["count"])
    # Reliability and resolution from the table, by their definitions (Murphy 1973).
    obar = actual.mean()
    rel = np.sum(ref["count"] * (ref["mean_forecast"] - ref["observed_frequency"]) ** 2) / N
    res = np.sum(ref["count"] * (ref["observed_frequency"] - obar) ** 2) / N
    d = scores.probabilistic(actual, prob)
    assert d["reliability"] == pytest.approx(rel, rel=1e-12)
    assert d["resolution"] == pytest.approx(res, rel=1e-12)
    assert d["uncertainty"] == pytest.approx(obar * (1 - obar), rel=1e-12)


def test_bin_edges_hold_decimal_forecasts_on_their_edge():
    # 0.3 * 10 is 3.0000000000000004 and 0.29 * 100 is 28.999999999999996 in binary floating point;
    # a forecast printed as 0.3 belongs to the bin [0.3, 0.4) (common practice).
    t = scores.brier_decomposition([1, 0, 1], [0.3, 0.7, 1.0], bins=10)["table"]
    assert t.loc[t["count"] > 0, "bin"].tolist() == [4, 8, 10]
    t = scores.brier_decomposition([1], [0.29], bins=100)["table"]
    assert t.loc[t["count"] > 0, "bin"].tolist() == [30]


# --- Diebold-Mariano ------------------------------------------------------------------------------
def _dm_slow(actual, pa, pb, h):
    """Harvey, Leybourne & Newbold (1997), Int. J. Forecasting 13, 281-291:
    DM with h - 1 equally weighted autocovariances (Diebold & Mariano 1995), times
    sqrt((T + 1 - 2h + h(h - 1) / T) / T), against Student's t with T - 1 df. Written with loops."""
    from scipy.stats import t as student_t

    d = [(a - o) ** 2 - (b - o) ** 2 for o, a, b in zip(actual, pa, pb, strict=True)]
    T = len(d)
    dbar = sum(d) / T
    gamma = []
    for k in range(h):
        gamma.append(sum((d[t] - dbar) * (d[t - k] - dbar) for t in range(k, T)) / T)
    var = (gamma[0] + 2 * sum(gamma[1:])) / T
    dm = dbar / math.sqrt(var)
    dm_star = dm * math.sqrt((T + 1 - 2 * h + h * (h - 1) / T) / T)
    return dm_star, 2 * student_t.sf(abs(dm_star), T - 1)


@pytest.fixture(scope="module")
def dm_data():
    rng = np.random.default_rng(1997)
    T = 150
    actual = (rng.random(T) < 0.4).astype(float)
    pa = np.clip(0.4 + 0.2 * (actual - 0.4) + rng.normal(0, 0.15, T), 0, 1)
    # Serially correlated errors in b, so the autocovariances matter at h > 1.
    noise = np.convolve(rng.normal(0, 0.2, T + 2), [1, 0.8, 0.5], mode="valid")
    pb = np.clip(0.4 + 0.3 * (actual - 0.4) + noise, 0, 1)
    return actual, pa, pb


def test_diebold_mariano_horizon_1_against_statsmodels(dm_data):
    # statsmodels.tsa.stattools.diebold_mariano_test with the HLN correction. Its default HAC
    # bandwidth is max(h - 1, ceil(T^(1/3))) Bartlett lags; the DM / HLN statistic uses h - 1
    # lags, which the statsmodels docs say to pass explicitly (lags = 0 at horizon 1).
    from statsmodels.tsa.stattools import diebold_mariano_test

    actual, pa, pb = dm_data
    ref = diebold_mariano_test(actual, pa, pb, lags=0, harvey_adj=True, horizon=1)
    stat, p = scores.diebold_mariano(actual, pa, pb, horizon=1)
    assert stat == pytest.approx(ref.statistic, rel=1e-10)
    assert p == pytest.approx(ref.pvalue, rel=1e-8)


@pytest.mark.parametrize("h", [1, 2, 3])
def test_diebold_mariano_against_slow_hln_reference(dm_data, h):
    actual, pa, pb = dm_data
    stat, p = scores.diebold_mariano(actual, pa, pb, horizon=h)
    ref_stat, ref_p = _dm_slow(actual, pa, pb, h)
    assert stat == pytest.approx(ref_stat, rel=1e-10)
    assert p == pytest.approx(ref_p, rel=1e-8)


@pytest.mark.parametrize("h", [2, 3])
def test_diebold_mariano_against_statsmodels_uniform_kernel_hac(dm_data, h):
    # statsmodels' diebold_mariano_test weights the autocovariances with the Bartlett kernel, so at
    # h > 1 compare with statsmodels' HAC t statistic of the mean with the uniform (truncated)
    # kernel and h - 1 lags, which is DM's estimator, then apply HLN's factor.
    import statsmodels.api as sm
    from scipy.stats import t as student_t

    actual, pa, pb = dm_data
    d = (pa - actual) ** 2 - (pb - actual) ** 2
    T = d.size
    res = sm.OLS(d, np.ones(T)).fit(cov_type="HAC", cov_kwds={"maxlags": h - 1, "kernel": "uniform"})
    ref = float(res.tvalues[0]) * math.sqrt((T + 1 - 2 * h + h * (h - 1) / T) / T)
    stat, p = scores.diebold_mariano(actual, pa, pb, horizon=h)
    assert stat == pytest.approx(ref, rel=1e-10)
    assert p == pytest.approx(2 * student_t.sf(abs(ref), T - 1), rel=1e-8)


def test_diebold_mariano_sign_and_antisymmetry(dm_data):
    actual, pa, pb = dm_data
    s_ab, p_ab = scores.diebold_mariano(actual, pa, pb)
    s_ba, p_ba = scores.diebold_mariano(actual, pb, pa)
    assert s_ab == pytest.approx(-s_ba) and p_ab == pytest.approx(p_ba)
    brier_a = scores.probabilistic(actual, pa)["brier"]
    brier_b = scores.probabilistic(actual, pb)["brier"]
    assert np.sign(s_ab) == np.sign(brier_a - brier_b)  # positive: A had the larger loss


def test_diebold_mariano_negative_long_run_variance_falls_back_to_lag_0():
    # Alternating loss differentials have a strongly negative lag-1 autocovariance, so
    # gamma0 + 2 gamma1 < 0 at horizon 2: the documented fallback is the lag-0 variance.
    T = 40
    actual = np.zeros(T)
    pa = np.where(np.arange(T) % 2 == 0, 0.9, 0.1)
    pb = np.full(T, 0.45)
    with pytest.warns(scores.UndefinedScoreWarning, match="lag-0 variance"):
        stat, p = scores.diebold_mariano(actual, pa, pb, horizon=2)
    d = pa ** 2 - pb ** 2
    expected = d.mean() / math.sqrt(d.var() / T) * math.sqrt((T + 1 - 4 + 2 / T) / T)
    assert stat == pytest.approx(expected, rel=1e-12)


# --- Wilson intervals -----------------------------------------------------------------------------
@pytest.mark.parametrize("x,n,conf", [(28, 51, 0.95), (0, 20, 0.95), (20, 20, 0.9), (3, 1000, 0.99),
                                      (2708, 2803, 0.95), (1, 1, 0.5)])
def test_wilson_against_statsmodels(x, n, conf):
    from statsmodels.stats.proportion import proportion_confint

    ref = proportion_confint(x, n, alpha=1 - conf, method="wilson")
    assert scores.wilson(x, n, confidence=conf) == pytest.approx(ref, rel=1e-12, abs=1e-15)


def test_wilson_intervals_of_finley_scores_against_statsmodels():
    from statsmodels.stats.proportion import proportion_confint

    got = scores.wilson_intervals(28, 72, 23, 2680)
    assert got["sensitivity"] == pytest.approx(proportion_confint(28, 51, method="wilson"))
    assert got["false_alarm_ratio"] == pytest.approx(proportion_confint(72, 100, method="wilson"))
    assert got["critical_success_index"] == pytest.approx(proportion_confint(28, 123, method="wilson"))
    assert got["accuracy"] == pytest.approx(proportion_confint(2708, 2803, method="wilson"))
    point = scores.from_counts(28, 72, 23, 2680)
    for key, (low, high) in got.items():
        assert low <= point[key] <= high, key


# --- two proportions ------------------------------------------------------------------------------
# Reference: statsmodels.stats.proportion.proportions_ztest (pooled variance, two-sided), the score
# test of Agresti (2013), Categorical Data Analysis, 3rd ed., section 3.1.2.
@pytest.mark.parametrize("xa,na,xb,nb", [(30, 100, 15, 100), (510, 2338, 8, 584), (1, 40, 9, 60),
                                         (7, 7, 3, 11), (0, 50, 4, 10), (233, 1000, 230, 1000)])
def test_two_proportion_against_statsmodels(xa, na, xb, nb):
    from statsmodels.stats.proportion import proportions_ztest

    z, p = proportions_ztest([xa, xb], [na, nb])
    assert scores.two_proportion(xa, na, xb, nb) == pytest.approx((z, p), rel=1e-12, abs=1e-300)


def test_two_proportion_square_is_pearson_chi_square_of_the_table():
    from scipy.stats import chi2_contingency

    table = [[30, 70], [15, 85]]
    chi2, p, *_ = chi2_contingency(table, correction=False)
    z, pz = scores.two_proportion(30, 100, 15, 100)
    assert (z * z, pz) == pytest.approx((chi2, p), rel=1e-12)


def test_two_proportion_without_variation_is_undefined():
    for args in ((0, 50, 0, 30), (50, 50, 30, 30), (3, 10, 0, 0)):
        with pytest.warns(scores.UndefinedScoreWarning, match="two_proportion"):
            z, p = scores.two_proportion(*args)
        assert math.isnan(z) and math.isnan(p)


# --- costs ----------------------------------------------------------------------------------------
def test_cost_cutoff_equalises_the_two_expected_costs():
    # Static cost-loss model (Murphy 1977): at p* acting costs (1 - p*) cFA, not acting p* cMiss.
    for cfa, cmiss in [(1, 1), (1, 4), (10, 3), (0, 5), (2.5, 0)]:
        p = scores.cost_cutoff(cfa, cmiss)
        assert p == cfa / (cfa + cmiss)
        assert (1 - p) * cfa == pytest.approx(p * cmiss)


def test_expected_cost_is_mean_cost_per_period(data):
    actual, forecast, _ = data
    table = scores.confusion(actual, forecast)
    per_row = np.where((forecast == 1) & (actual == 0), 2.0, 0.0) + np.where(
        (forecast == 0) & (actual == 1), 7.0, 0.0)
    assert scores.expected_cost(table, 2.0, 7.0) == pytest.approx(per_row.mean(), rel=1e-12)
    assert scores.expected_cost(scores.from_counts(*table), 2.0, 7.0) == pytest.approx(per_row.mean())
    assert scores.expected_cost(tuple(table), cost_false_alarm=2.0, cost_miss=7.0) == pytest.approx(
        per_row.mean())
