"""Tests of sheetfns.profile: event rates by period of year and year, and the seasonal trend.

Outside references: Python's ``datetime.date.isocalendar`` (ISO 8601 week numbering) and
``date.weekday``; pandas ``groupby`` means for the shares; statsmodels OLS on the raw 0/1 rows for the
weighted polynomial trend.
"""
from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd
import pytest

from sheetfns.errors import InputError
from sheetfns.partition import as_dates
from sheetfns.profile import _calendar, rate_table, seasonal_trend

NAN = np.nan


def test_hand_worked_month_table():
    dates = [dt.date(2023, 1, 5), dt.date(2023, 1, 6), dt.date(2023, 3, 1), dt.date(2024, 1, 5),
             dt.date(2024, 3, 2), dt.date(2024, 3, 3), dt.date(2024, 4, 1)]
    events = [1, 0, None, 1, 0, 1, None]             # the blank in 2023-03 and the future row are skipped
    t = rate_table(dates, events)
    assert list(t.index) == list(range(1, 13)) and t.index.name == "month"
    assert list(t.columns) == [2023, 2024, "all years", "events", "rows"]
    assert t.loc[1, 2023] == 1 / 2 and t.loc[1, 2024] == 1 / 1
    assert np.isnan(t.loc[3, 2023]) and t.loc[3, 2024] == 1 / 2
    assert t.loc[1, "all years"] == (1 + 1) / (2 + 1) and t.loc[3, "all years"] == 1 / 2
    assert (t.loc[1, "events"], t.loc[1, "rows"], t.loc[3, "events"], t.loc[3, "rows"]) == (2, 3, 1, 2)
    assert t.loc[[2, 4, 5], [2023, 2024, "all years"]].isna().all().all()   # no observed row: NaN
    assert (t.loc[[2, 4], ["events", "rows"]] == 0).all().all()


def test_quarter_and_weekday_tables():
    dates = pd.date_range("2024-01-01", "2024-01-14")     # 2024-01-01 was a Monday
    events = [1, 0, 0, 0, 0, 0, 1, 1, 1, 0, 0, 0, 0, 0]
    wd = rate_table(dates, events, by="weekday")
    assert list(wd.index) == ["Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun"]
    assert wd.loc["Mon", 2024] == (1 + 1) / 2 and wd.loc["Tue", 2024] == (0 + 1) / 2
    assert wd.loc["Sun", "all years"] == 1 / 2 and wd.loc["Wed", "all years"] == 0
    q = rate_table([dt.date(2023, 11, 30), dt.date(2024, 2, 1), dt.date(2024, 5, 1)], [1, 1, 0],
                   by="quarter")
    assert list(q.index) == [1, 2, 3, 4]
    assert (q.loc[4, 2023], q.loc[1, 2024], q.loc[2, 2024]) == (1.0, 1.0, 0.0)


def test_iso_weeks_and_weekdays_agree_with_the_standard_library():
    # Python's date.isocalendar() implements ISO 8601 week numbering
    days = pd.date_range("1999-12-20", "2031-01-10")
    period, year, labels = _calendar(as_dates(days), "week")
    iso = [d.date().isocalendar() for d in days]
    assert (period + 1).tolist() == [w for _, w, _ in iso]
    assert year.tolist() == [y for y, _, _ in iso]
    assert labels == list(range(1, 54))
    wd, _, _ = _calendar(as_dates(days), "weekday")
    assert wd.tolist() == [d.weekday() for d in days]
    t = rate_table([dt.date(2021, 1, 3), dt.date(2021, 1, 4)], [1, 0], by="week")
    assert list(t.columns[:2]) == [2020, 2021]      # 2021-01-03 is in ISO week 53 of 2020
    assert (t.loc[53, 2020], t.loc[1, 2021]) == (1.0, 0.0)


@pytest.mark.parametrize("by", ["month", "quarter", "weekday", "week"])
def test_shares_agree_with_pandas_groupby(by):
    rng = np.random.default_rng(5)
    dates = pd.date_range("2001-03-17", periods=2000, freq="D")
    events = (rng.random(2000) < 0.4).astype(float)
    events[rng.random(2000) < 0.1] = NAN
    events[-40:] = NAN
    t = rate_table(dates, events, by=by)
    s = pd.Series(events, index=dates)
    iso = dates.isocalendar()
    keys = {"month": (dates.month, dates.year), "quarter": (dates.quarter, dates.year),
            "weekday": (np.array(["Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun"])[dates.day_of_week],
                        dates.year),
            "week": (iso["week"].to_numpy(), iso["year"].to_numpy())}[by]
    ref = s.groupby(list(keys)).mean()                  # pandas skips NaN in means
    for (p, y), v in ref.items():
        if np.isnan(v):
            assert np.isnan(t.loc[p, int(y)])
        else:
            assert t.loc[p, int(y)] == pytest.approx(v, rel=1e-12)
    pooled = s.groupby(keys[0]).mean()
    assert np.allclose(t.loc[pooled.index, "all years"], pooled.to_numpy())
    assert t["rows"].sum() == np.count_nonzero(~np.isnan(events))
    assert t["events"].sum() == np.nansum(events)


def test_seasonal_trend_is_least_squares_on_the_raw_rows():
    # statsmodels OLS of the 0/1 events on (1, x, x^2), x = month number of each row, gives the same
    # fitted values as the weighted fit of the monthly shares (weights = rows)
    import statsmodels.api as sm

    rng = np.random.default_rng(8)
    dates = pd.date_range("2003-01-01", "2009-12-31")
    month = dates.month.to_numpy()
    p = 0.2 + 0.4 * np.exp(-((month - 7) / 2.5) ** 2)
    events = (rng.random(len(dates)) < p).astype(float)
    events[rng.random(len(dates)) < 0.05] = NAN
    t = rate_table(dates, events)
    for degree in (0, 1, 2, 3):
        trend = seasonal_trend(t, degree=degree)
        keep = ~np.isnan(events)
        x = month[keep].astype(float)
        X = np.column_stack([x ** j for j in range(degree + 1)])
        fit = sm.OLS(events[keep], X).fit()
        assert np.allclose(trend.attrs["coefficients"], fit.params, rtol=1e-7, atol=1e-10)
        grid = np.column_stack([np.arange(1, 13.0) ** j for j in range(degree + 1)])
        assert np.allclose(trend.to_numpy(), grid @ fit.params, atol=1e-10)
        assert list(trend.index) == list(range(1, 13)) and trend.name == "trend"
    flat = seasonal_trend(t, degree=0)
    assert np.allclose(flat, np.nanmean(events))         # degree 0: the overall share


def test_seasonal_trend_skips_periods_without_data():
    dates = [dt.date(2020, m, 1) for m in (1, 2, 3, 5)]
    t = rate_table(dates, [0, 1, 1, 0])
    trend = seasonal_trend(t, degree=1)
    assert len(trend) == 12 and not trend.isna().any()   # every month gets the fitted line
    b0, b1 = trend.attrs["coefficients"]
    x, y = np.array([1, 2, 3, 5.0]), np.array([0, 1, 1, 0.0])
    slope = ((x - x.mean()) * (y - y.mean())).sum() / ((x - x.mean()) ** 2).sum()
    assert b1 == pytest.approx(slope) and b0 == pytest.approx(y.mean() - slope * x.mean())


@pytest.mark.parametrize("call, message", [
    (lambda: rate_table([], []), "`events` must not be empty; got 0 rows"),
    (lambda: rate_table([dt.date(2020, 1, 1)], [None]), r"`events` has no observed values \(all 1 rows"),
    (lambda: rate_table([dt.date(2020, 1, 1)], [1, 0]), "`events` has 2 rows but `dates` has 1"),
    (lambda: rate_table([dt.date(2020, 1, 1)], [1], by="day"),
     "`by` must be one of 'month', 'week', 'weekday', 'quarter'; got 'day'"),
    (lambda: rate_table([dt.date(2020, 1, 1), None], [1, 0]),
     "`dates` must hold a date in every row; got a blank in row 2"),
    (lambda: rate_table([dt.date(2020, 1, 1)], [3]), r"`events` contains values not in \{0, 1, NaN\}"),
    (lambda: seasonal_trend(rate_table([dt.date(2020, 1, 1), dt.date(2020, 2, 1)], [1, 0]), degree=2),
     "`degree` 2 needs at least 3 periods with data; got 2"),
    (lambda: seasonal_trend(rate_table([dt.date(2020, 1, 1)], [1]), degree=-1),
     "`degree` must be an integer >= 0; got -1"),
    (lambda: seasonal_trend(pd.DataFrame({"a": [1]})), "`table` must be a table made by rate_table"),
])
def test_bad_input_names_argument_and_value(call, message):
    with pytest.raises(InputError, match=message):
        call()


def test_single_row_is_a_valid_profile():
    t = rate_table([dt.date(2020, 6, 30)], [1])
    assert t.loc[6, 2020] == 1.0 and t["rows"].sum() == 1
