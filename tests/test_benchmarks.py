"""Tests of sheetfns.benchmarks: naive, seasonal naive, majority share and majority vote.

Three ways: hand-worked cases written as arithmetic; the published seasonal-naive formula
(Hyndman & Athanasopoulos, Forecasting: Principles and Practice, 3rd ed., 2021, §5.2) and pandas'
expanding / rolling means as outside references; a slow, obviously-correct loop (below) against the
vectorised code on seeded random data with blanks, every horizon, window, season and training size.
"""
from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetfns.benchmarks import majority_share, majority_vote, naive
from sheetfns.errors import InputError

NAN = np.nan


def same(a, b) -> bool:
    return np.array_equal(np.asarray(a, dtype=float), np.asarray(b, dtype=float), equal_nan=True)


# ---------------------------------------------------------------- the slow reference


def ref_origin(t: int, last: int, h: int, n_train: int | None) -> int:
    o = t - h
    if n_train is not None and n_train <= t <= last:
        o = min(o, n_train - 1)
    return min(o, last)


def last_obs(y) -> int:
    return max(i for i, v in enumerate(y) if not math.isnan(v))


def ref_naive(y, h=1, m=1, n_train=None):
    last = last_obs(y)
    out = []
    for t in range(len(y)):
        o = ref_origin(t, last, h, n_train)
        val = NAN
        for s in range(o, -1, -1):
            if (t - s) % m == 0 and not math.isnan(y[s]):
                val = y[s]
                break
        out.append(val)
    return out


def ref_window(y, t, w, h, n_train):
    last = last_obs(y)
    o = ref_origin(t, last, h, n_train)
    start = 0 if w is None else max(0, o - w + 1)
    seen = [y[s] for s in range(start, o + 1) if not math.isnan(y[s])]
    recent = next((y[s] for s in range(o, -1, -1) if not math.isnan(y[s])), NAN)
    return seen, recent


def ref_share(y, w=None, n_train=None, h=1):
    out = []
    for t in range(len(y)):
        seen, _ = ref_window(y, t, w, h, n_train)
        out.append(float(Fraction(int(sum(seen)), len(seen))) if seen else NAN)
    return out


def ref_vote(y, w=None, n_train=None, h=1):
    out = []
    for t in range(len(y)):
        seen, recent = ref_window(y, t, w, h, n_train)
        if not seen:
            out.append(NAN)
            continue
        share = Fraction(int(sum(seen)), len(seen))
        out.append(1.0 if share > Fraction(1, 2) else 0.0 if share < Fraction(1, 2) else recent)
    return out


def random_cases(seed: int, count: int):
    """Seeded random event series with interior blanks and a future tail, and valid settings."""
    rng = np.random.default_rng(seed)
    for _ in range(count):
        n = int(rng.integers(12, 90))
        y = (rng.random(n) < rng.uniform(0.1, 0.9)).astype(float)
        y[rng.random(n) < rng.uniform(0, 0.4)] = NAN
        y[0] = float(rng.integers(0, 2))
        tail = int(rng.integers(0, 6))
        if tail:
            y[-tail:] = NAN
        last = last_obs(y)
        y[last] = float(rng.integers(0, 2))
        n_obs = last + 1
        h = int(rng.integers(1, min(n_obs, 8) + 1))
        n_train = None if rng.random() < 0.4 else int(rng.integers(1, n_obs + 1))
        period = n_train or n_obs
        m = int(rng.integers(1, min(period, 9) + 1))
        w = None if rng.random() < 0.4 else int(rng.integers(1, n_obs + 1))
        yield y, h, m, w, n_train


@pytest.mark.parametrize("seed", range(4))
def test_vectorised_matches_the_reference_loop(seed):
    for y, h, m, w, n_train in random_cases(seed, 60):
        args = (y.tolist(), h, m, n_train)
        assert same(naive(y, horizon=h, season=m, train_size=n_train), ref_naive(*args)), args
        assert same(majority_share(y, window=w, train_size=n_train, horizon=h),
                    ref_share(y.tolist(), w, n_train, h)), (y, w, n_train, h)
        assert same(majority_vote(y, window=w, train_size=n_train, horizon=h),
                    ref_vote(y.tolist(), w, n_train, h)), (y, w, n_train, h)


# ---------------------------------------------------------------- hand-worked


def test_naive_roll_forward_hand_worked():
    y = [1.0, 0.0, None, 1.0, None, None]           # rows 4, 5 are future rows (L = 3)
    # f[t] = the most recent observed value at or before t - h
    assert same(naive(y), [NAN, 1, 0, 0, 1, 1])
    assert same(naive(y, horizon=2), [NAN, NAN, 1, 0, 0, 1])
    assert same(naive(y, horizon=3), [NAN, NAN, NAN, 1, 0, 0])


def test_naive_fixed_origin_hand_worked():
    y = [0, 1, 1, 0, 1, 1, None, None]              # N = 4 training rows, validation rows 4, 5, future 6, 7
    # h = 1: validation rows use row 3 (= 0); future rows use every observed row (last = row 5 = 1)
    assert same(naive(y, train_size=4), [NAN, 0, 1, 1, 0, 0, 1, 1])
    # h = 2: row 4 cannot see row 3 (4 - 2 = 2 -> y[2] = 1); row 5: min(5 - 2, 3) = 3 -> 0;
    # future row 6: min(6 - 2, 5) = 4 -> 1; row 7: 5 -> 1
    assert same(naive(y, horizon=2, train_size=4), [NAN, NAN, 0, 1, 1, 0, 1, 1])


def test_seasonal_naive_hand_worked():
    y = [1, 0, 0, 1, 1, 0, None, None]             # season 3; future rows repeat the last season
    assert same(naive(y, season=3), [NAN, NAN, NAN, 1, 0, 0, 1, 1])
    # with a blank: row 6's season-mate row 3 is blank, so the one before (row 0) is used
    y2 = [1, 0, 0, None, 1, 0, 1, None]
    assert same(naive(y2, season=3), [NAN, NAN, NAN, 1, 0, 0, 1, 1])


@pytest.mark.parametrize("m", [1, 2, 4, 7, 12])
@pytest.mark.parametrize("h", [1, 2, 3, 5, 7, 13, 25])
def test_seasonal_naive_is_the_published_formula(m, h):
    # Hyndman & Athanasopoulos (2021), FPP3 §5.2: yhat[T+h|T] = y[T + h - m(k+1)], k = floor((h-1)/m)
    y = (np.random.default_rng(7).random(60) < 0.5).astype(float)
    f = naive(y, horizon=h, season=m)
    for t in range(len(y)):
        T = t - h
        k = (h - 1) // m
        src = T + h - m * (k + 1)
        assert same([f[t]], [y[src] if T >= 0 and src >= 0 else NAN]), (t, m, h)


def test_majority_share_and_vote_hand_worked():
    y = [1, 0, 0, 1, None, 1, None, None]             # L = 5; rows 6, 7 are future rows
    # expanding share at origin o: events / observed rows among rows <= o
    assert same(majority_share(y), [NAN, 1 / 1, 1 / 2, 1 / 3, 2 / 4, 2 / 4, 3 / 5, 3 / 5])
    # ties (1/2, 2/4) take the most recent observed value at or before the origin: y[1] = 0, y[3] = 1
    assert same(majority_vote(y), [NAN, 1, 0, 0, 1, 1, 1, 1])
    # window of 2 rows (blanks included): rows (o-1, o]
    assert same(majority_share(y, window=2), [NAN, 1, 1 / 2, 0 / 2, 1 / 2, 1 / 1, 1 / 1, 1 / 1])
    assert same(majority_vote(y, window=2), [NAN, 1, 0, 0, 1, 1, 1, 1])
    # fixed origin N = 3: validation rows 3..5 use rows 0..2 (1/3 -> vote 0); the future uses all rows
    assert same(majority_share(y, train_size=3), [NAN, 1, 1 / 2, 1 / 3, 1 / 3, 1 / 3, 3 / 5, 3 / 5])
    assert same(majority_vote(y, train_size=3), [NAN, 1, 0, 0, 0, 0, 1, 1])


def test_fixed_majority_vote_of_the_reference_split():
    # 1,300 events in 3,653 training days: share 1300 / 3653 = 0.3559 < 0.5, so the vote is 0 for
    # every validation day however many events the validation period holds (arithmetic)
    rng = np.random.default_rng(3)
    train = np.zeros(3653)
    train[rng.choice(3653, 1300, replace=False)] = 1.0
    y = np.concatenate([train, np.ones(667)])
    share = majority_share(y, train_size=3653)
    vote = majority_vote(y, train_size=3653)
    assert share[3653:] == pytest.approx(1300 / 3653) and round(1300 / 3653, 3) == 0.356
    assert (vote[3653:] == 0.0).all()


def test_pandas_expanding_and_rolling_means_agree():
    # pandas (general-purpose library): Series.expanding / rolling mean, shifted by the horizon
    rng = np.random.default_rng(11)
    y = (rng.random(500) < 0.3).astype(float)
    y[rng.random(500) < 0.2] = NAN
    y[-1] = 1.0
    s = pd.Series(y)
    for h in (1, 3, 10):
        assert np.allclose(majority_share(y, horizon=h), s.expanding().mean().shift(h), equal_nan=True)
        for w in (1, 7, 30):
            ref = s.rolling(w, min_periods=1).mean().shift(h)
            assert np.allclose(majority_share(y, window=w, horizon=h), ref, equal_nan=True, rtol=0,
                               atol=1e-12)
        assert same(naive(y, horizon=h), s.ffill().shift(h))


def test_lists_arrays_series_and_booleans_give_the_same_result():
    y = [True, False, None, True, False, True]
    expect = majority_vote([1.0, 0.0, NAN, 1.0, 0.0, 1.0])
    assert same(majority_vote(y), expect)
    assert same(majority_vote(pd.Series([1.0, 0.0, NAN, 1.0, 0.0, 1.0])), expect)
    assert same(majority_vote(np.array([1.0, 0.0, NAN, 1.0, 0.0, 1.0])), expect)


# ---------------------------------------------------------------- properties


events = st.lists(st.sampled_from([0.0, 1.0, NAN]), min_size=3, max_size=40)


@settings(max_examples=200, deadline=None)
@given(events, st.data())
def test_no_forecast_uses_rows_after_its_origin(values, data):
    """f[t] does not change when rows >= t - horizon + 1 change (the first and the last observed rows
    kept observed, so the partition into training, validation and future rows stays the same)."""
    y = np.array(values)
    y[0] = 1.0
    last = last_obs(y)
    n_obs = last + 1
    if n_obs < 2:
        y[1] = 0.0
        last, n_obs = last_obs(y), last_obs(y) + 1
    h = data.draw(st.integers(1, n_obs), label="horizon")
    n_train = data.draw(st.one_of(st.none(), st.integers(1, n_obs)), label="train_size")
    m = data.draw(st.integers(1, n_train or n_obs), label="season")
    w = data.draw(st.one_of(st.none(), st.integers(1, n_obs)), label="window")
    t = data.draw(st.integers(0, len(y) - 1), label="t")
    changed = y.copy()
    for r in range(max(t - h + 1, 0), n_obs):
        changed[r] = data.draw(st.sampled_from([0.0, 1.0] if r in (0, last) else [0.0, 1.0, NAN]))
    runs = [
        lambda v: naive(v, horizon=h, season=m, train_size=n_train),
        lambda v: majority_share(v, window=w, train_size=n_train, horizon=h),
        lambda v: majority_vote(v, window=w, train_size=n_train, horizon=h),
    ]
    for run in runs:
        before, after = run(y), run(changed)
        assert before.shape == after.shape == y.shape
        assert same([before[t]], [after[t]])


@settings(max_examples=100, deadline=None)
@given(events)
def test_future_rows_are_all_filled(values):
    y = np.array(values + [NAN, NAN, NAN])
    y[0] = 1.0
    for f in (naive(y), majority_share(y), majority_vote(y), majority_vote(y, window=1)):
        assert not np.isnan(f[last_obs(y) + 1:]).any()
    # seasonal naive fills a future row wherever its season was ever observed
    y[:2] = 1.0
    assert not np.isnan(naive(y, season=2)[last_obs(y) + 1:]).any()


# ---------------------------------------------------------------- bad input


@pytest.mark.parametrize("call, message", [
    (lambda: naive([]), "`y` must not be empty; got 0 rows"),
    (lambda: majority_vote([]), "`y` must not be empty; got 0 rows"),
    (lambda: naive([NAN, NAN, None]), r"`y` has no observed values \(all 3 rows are blank\)"),
    (lambda: majority_share([None, None]), r"`y` has no observed values \(all 2 rows are blank\)"),
    (lambda: naive([1.0]), "`y` must have at least 2 rows; got 1"),
    (lambda: majority_vote([1.0]), "`y` must have at least 2 rows; got 1"),
    (lambda: naive([1, 0, 1], horizon=0), "`horizon` must be an integer >= 1; got 0"),
    (lambda: naive([1, 0, 1], horizon=-2), "`horizon` must be an integer >= 1; got -2"),
    (lambda: majority_share([1, 0, 1, None], horizon=4),
     r"`horizon` must be at most the number of observed rows \(3\); got 4"),
    (lambda: naive([1, 0, 1], horizon=1.5), "`horizon` must be an integer; got 1.5"),
    (lambda: majority_vote([1, 0, 1], window=0), "`window` must be an integer >= 1; got 0"),
    (lambda: majority_share([1, 0, 1], window=4),
     r"`window` must be at most the number of observed rows \(3\); got 4"),
    (lambda: naive([1, 0, 1, 0, 1], season=4, train_size=3),
     r"`season` must be at most the training period \(3 rows\); got 4"),
    (lambda: naive([1, 0, 1], season=4), r"`season` must be at most the training period \(3 rows\); got 4"),
    (lambda: naive([1, 0, 1], season=0), "`season` must be an integer >= 1; got 0"),
    (lambda: naive([1, 0, 1], train_size=0), "`train_size` must be an integer >= 1; got 0"),
    (lambda: majority_vote([1, 0, 1, None], train_size=4),
     r"`train_size` must be at most the number of observed rows \(3\); got 4"),
    (lambda: majority_vote([None, None, 1, 0], train_size=2),
     "`train_size` 2 leaves no observed training rows: rows 1 to 2 of `y` are blank"),
    (lambda: majority_vote([1, 0, 2]), r"`y` contains values not in \{0, 1, NaN\}; got .*2\.0.* at "
                                       r"position 3"),
    (lambda: naive([1, "x", 0]), "`y` must hold numbers; got 'x' at position 2"),
])
def test_bad_input_names_argument_and_value(call, message):
    with pytest.raises(InputError, match=message):
        call()
