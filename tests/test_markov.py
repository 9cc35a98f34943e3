"""Tests of sheetfns.markov: the two-state chain.

External references, named beside each check:
* transition shares counted with ``pandas.crosstab`` (pandas 3, a general-purpose library) from the
  pairs (y[t' - h], y[t']) observed by each origin: a slow reference written here;
* a hand-worked example written as arithmetic.
Seeded random 0/1 series (invented data) for the comparisons and the property tests.
"""
from __future__ import annotations

import subprocess
import sys

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sheetfns import benchmarks, markov
from sheetfns.errors import InputError


def _events(n: int, seed: int, gaps: int = 0, future: int = 0) -> np.ndarray:
    """Seeded persistent 0/1 series (invented data): P(1 | 1) = 0.7, P(1 | 0) = 0.25."""
    rng = np.random.default_rng(seed)
    y = np.zeros(n)
    u = rng.random(n)
    for t in range(1, n):
        y[t] = float(u[t] < (0.7 if y[t - 1] == 1.0 else 0.25))
    if gaps:
        y[rng.choice(np.arange(5, n - 5), gaps, replace=False)] = np.nan
    return np.r_[y, np.full(future, np.nan)]


def _reference(y: np.ndarray, h: int, origin) -> np.ndarray:
    """prob[t] from pandas.crosstab of the pairs (y[t'-h], y[t']) with t' <= origin(t), both observed;
    the state at t - h (the last observed at or before it); an unseen state gets the share of events
    among the rows observed by the origin. origin(t) None: no forecast."""
    n = y.size
    s = pd.Series(y)
    state = s.ffill()
    pairs = pd.DataFrame({"start": s.shift(h), "end": s})
    out = np.full(n, np.nan)
    tables: dict[int, pd.DataFrame] = {}
    for t in range(n):
        o = origin(t)
        if o is None or o < 0 or t - h < 0 or np.isnan(state[t - h]):
            continue
        if o not in tables:
            window = pairs.iloc[: o + 1].dropna()
            tables[o] = pd.crosstab(window["start"], window["end"])
        table = tables[o]
        st_ = state[t - h]
        if st_ in table.index and table.loc[st_].sum() > 0:
            row = table.loc[st_]
            out[t] = row.get(1.0, 0) / row.sum()
        else:
            seen = s.iloc[: o + 1].dropna()
            out[t] = seen.mean() if seen.size else np.nan
    return out


def _origin_rule(n_obs_last: int, h: int, train_size, every: int, first: int):
    """The estimation origin written out (DESIGN.md §3 and §11)."""
    def origin(t):
        if t > n_obs_last + h:
            return None
        if t > n_obs_last:
            return n_obs_last
        start = train_size if train_size is not None else first + h
        if t < start:
            return t - h
        if every == 0 and train_size is not None:
            return train_size - h
        step = max(every, 1)
        return start + ((t - start) // step) * step - h
    return origin


def test_hand_worked_example():
    # y = 0 0 1 1 0 1 1 1 ?, horizon 1, roll-forward. Pairs (from -> to) ending at t' = 1..7:
    # 0->0, 0->1, 1->1, 1->0, 0->1, 1->1, 1->1.
    y = [0, 0, 1, 1, 0, 1, 1, 1, None]
    expected = [np.nan,
                0 / 1,     # t=1: state y0=0, no pair yet -> share of rows <= 0: 0/1
                0 / 1,     # t=2: state 0, pairs from 0 up to t'=1: 0->0
                1 / 3,     # t=3: state 1, no pair from 1 up to t'=2 -> share of rows <= 2: 1/3
                1 / 1,     # t=4: state 1, pairs from 1 up to t'=3: 1->1
                1 / 2,     # t=5: state 0, pairs from 0 up to t'=4: 0->0, 0->1
                1 / 2,     # t=6: state 1, pairs from 1 up to t'=5: 1->1, 1->0
                2 / 3,     # t=7: state 1, up to t'=6: 1->1, 1->0, 1->1
                3 / 4]     # t=8 (future): state y7=1, every pair: 1->1, 1->0, 1->1, 1->1
    np.testing.assert_allclose(markov.forecast(y), expected, rtol=0, atol=1e-15)


@pytest.mark.parametrize("horizon", [1, 3])
@pytest.mark.parametrize("train_size,refit,every", [(None, "roll", 1), (None, "roll 4", 4),
                                                    (100, "fixed", 0), (100, "roll", 1),
                                                    (100, "roll 7", 7)])
def test_matches_pandas_crosstab(horizon, train_size, refit, every):
    # pandas.crosstab of the observed pairs as the slow reference; interior gaps and future rows
    y = _events(160, seed=7 + horizon, gaps=6, future=5)
    last = 159
    ours = markov.forecast(y, train_size=train_size, horizon=horizon, refit=refit)
    first = int(np.flatnonzero(~np.isnan(y))[0])
    ref = _reference(y, horizon, _origin_rule(last, horizon, train_size, every, first))
    np.testing.assert_allclose(ours, ref, rtol=0, atol=1e-12)
    assert ours.size == y.size
    assert np.isfinite(ours[last + 1: last + 1 + horizon]).all()
    assert np.isnan(ours[last + 1 + horizon:]).all()


def test_fixed_without_training_period_is_roll_forward():
    y = _events(120, seed=3)
    np.testing.assert_array_equal(markov.forecast(y, refit="fixed"), markov.forecast(y, refit="roll"))


def test_unseen_state_gets_the_majority_share():
    # sheetfns.benchmarks.majority_share is the home of the share: the chain must agree with it
    y = np.r_[np.zeros(10), 1.0, np.zeros(5)]          # rows 0-9: 0, row 10: 1, rows 11-15: 0
    out = markov.forecast(y)
    share = benchmarks.majority_share(y)
    assert out[11] == share[11] == pytest.approx(1 / 11)   # state y10 = 1 never started a pair by t'=10
    assert out[12] == pytest.approx(1 / 10)   # state y11 = 0: pairs from 0 end at t' = 1..10, one event
    assert out[13] == pytest.approx(1 / 11)   # state y12 = 0: the pair 0 -> 0 ending at t' = 12 joins
    assert out[12] != share[12]


def test_fixed_counts_only_pairs_observed_at_the_first_validation_origin():
    # horizon 2, train 6: the fixed estimation origin is row 6 - 2 = 4. Pairs (t'-2, t') with t' <= 4:
    # (y0, y2) = (0, 0), (y1, y3) = (1, 1), (y2, y4) = (0, 0): from 0, 0 events of 2; from 1, 1 of 1
    y = np.array([0, 1, 0, 1, 0, 0, 1, 1, 0, 1], dtype=float)
    fixed = markov.forecast(y, train_size=6, horizon=2)
    np.testing.assert_array_equal(fixed[6:], [0 / 2, 0 / 2, 1 / 1, 1 / 1])   # states y4 y5 y6 y7
    # roll: row 8 (origin 6) also counts (y3, y5) = (1, 0) and (y4, y6) = (0, 1): from 1, 1 of 2
    roll = markov.forecast(y, train_size=6, horizon=2, refit="roll")
    assert roll[8] == 1 / 2
    # training rows get the roll-forward forecast in both schemes, as the benchmarks do
    np.testing.assert_array_equal(fixed[:6], roll[:6])


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 10_000), horizon=st.integers(1, 4),
       scheme=st.sampled_from([(None, "roll"), (None, "roll 3"), (50, "fixed"), (50, "roll"),
                               (50, "roll 5")]),
       cut=st.integers(0, 35))
def test_never_looks_ahead(seed, horizon, scheme, cut):
    # changing rows after t never changes the forecasts of rows <= t + horizon - 1 (all observed here)
    y = _events(100, seed=seed, gaps=3)
    train_size, refit = scheme
    t = 55 + cut
    base = markov.forecast(y, train_size=train_size, horizon=horizon, refit=refit)
    y2 = y.copy()
    rng = np.random.default_rng(seed + 1)
    y2[t + 1:] = (rng.random(y2.size - t - 1) < 0.5).astype(float)
    other = markov.forecast(y2, train_size=train_size, horizon=horizon, refit=refit)
    keep = slice(0, t + horizon)
    np.testing.assert_array_equal(other[keep], base[keep])


@pytest.mark.parametrize("kwargs,needle", [
    (dict(y=[]), "`y` must not be empty"),
    (dict(y=[1.0]), "`y` must have at least 2 rows"),
    (dict(y=[np.nan, np.nan, np.nan]), "`y` has no observed value"),
    (dict(y=[0, 1, 2]), "`y` contains values not in {0, 1, NaN}"),
    (dict(horizon=0), "`horizon` must be an integer >= 1; got 0"),
    (dict(horizon=20), "`horizon` must be smaller than the number of rows"),
    (dict(horizon="x"), "`horizon` must be an integer; got 'x'"),
    (dict(train_size=0), "`train_size` must be an integer >= 1; got 0"),
    (dict(train_size=21), "`train_size` must be an integer <= 20; got 21"),
    (dict(refit="often"), "`refit` must be 'fixed', 'roll' or 'roll N'"),
])
def test_bad_input(kwargs, needle):
    kwargs = dict(kwargs)
    y = kwargs.pop("y", np.tile([0.0, 1.0, 1.0, 0.0], 5))
    with pytest.raises(InputError) as err:
        markov.forecast(y, **kwargs)
    assert needle in str(err.value)


def test_docstring_example_and_light_import():
    import doctest

    assert doctest.testmod(markov).failed == 0
    code = ("import sys, sheetfns.markov; "
            "print(sorted(m for m in ('statsmodels', 'scipy', 'pandas') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"
