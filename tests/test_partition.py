"""Tests of sheetfns.partition: splits by count and by date, date checks, frequency and defaults."""
from __future__ import annotations

import datetime as dt
import warnings

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetfns.errors import InputError, PartitionError
from sheetfns.partition import (
    as_dates,
    default_cycle,
    default_season,
    infer_frequency,
    next_periods,
    split,
    time_order,
)

NAN = np.nan


def days(first: str, last: str) -> list[dt.date]:
    start, end = dt.date.fromisoformat(first), dt.date.fromisoformat(last)
    return [start + dt.timedelta(i) for i in range((end - start).days + 1)]


# ---------------------------------------------------------------- calendar arithmetic (common practice)


def test_calendar_arithmetic_of_the_reference_split():
    # 2000-01-03 .. 2010-01-02: ten years of 365 days plus the leap days of 2000, 2004 and 2008
    assert len(days("2000-01-03", "2010-01-02")) == 10 * 365 + 3 == 3653
    # 2010-01-03 .. 2011-10-31: the rest of 2010 (365 - 2 days) and January..October 2011
    assert len(days("2010-01-03", "2011-10-31")) == (365 - 2) + (31 + 28 + 31 + 30 + 31 + 30 + 31 + 31
                                                                  + 30 + 31) == 667
    dates = days("2000-01-03", "2011-10-31")
    by_date = split(dates, dt.date(2010, 1, 3))
    assert (by_date.train_size, by_date.valid_size, by_date.future_size) == (3653, 667, 0)
    assert by_date.first_valid_date == pd.Timestamp("2010-01-03")
    assert by_date.last_observed_date == pd.Timestamp("2011-10-31")
    assert by_date.frequency == "daily" and by_date.gaps == () and by_date.notes == ()
    by_count = split(dates, 667)
    assert by_count == by_date


@pytest.mark.parametrize("first_valid", [
    dt.date(2010, 1, 3), dt.datetime(2010, 1, 3), np.datetime64("2010-01-03"),
    pd.Timestamp("2010-01-03"), "2010-01-03",
])
def test_every_kind_of_validation_date(first_valid):
    assert split(days("2000-01-03", "2011-10-31"), first_valid).train_size == 3653


@pytest.mark.parametrize("kind", ["date", "datetime", "numpy", "timestamp", "index", "series"])
def test_every_kind_of_date_index(kind):
    d = days("2000-01-03", "2000-01-12")
    index = {"date": d,
             "datetime": [dt.datetime(x.year, x.month, x.day) for x in d],
             "numpy": np.array(d, dtype="datetime64[D]"),
             "timestamp": [pd.Timestamp(x) for x in d],
             "index": pd.DatetimeIndex(d),
             "series": pd.Series(pd.DatetimeIndex(d))}[kind]
    s = split(index, dt.date(2000, 1, 10))
    assert (s.train_size, s.valid_size, s.frequency) == (7, 3, "daily")


def test_zone_aware_dates_keep_their_wall_clock_time():
    tz = dt.timezone(dt.timedelta(hours=2))
    d = as_dates([dt.datetime(2000, 1, 3, 5, tzinfo=tz), pd.Timestamp("2000-01-04", tz="UTC")])
    assert list(d.astype(str)) == ["2000-01-03T05:00:00.000000", "2000-01-04T00:00:00.000000"]
    assert infer_frequency(pd.date_range("2021-03-20", periods=20, tz="Europe/Paris")) == "daily"


# ---------------------------------------------------------------- counts and events


def test_split_by_count_with_events_and_future_rows():
    events = [0, 1, 0, 0, 1, 1, None, 1, None, None]
    s = split(10, 3, events=events)
    # observed through row 8 (0-based 7): training rows 0..4, validation rows 5..7, future rows 8..9
    assert (s.train_size, s.valid_size, s.future_size, s.n) == (8 - 3, 3, 2, 10)
    assert (s.train_events, s.train_observed) == (0 + 1 + 0 + 0 + 1, 5)
    assert (s.valid_events, s.valid_observed) == (1 + 1, 2)          # the interior blank counts as a period
    assert (s.train, s.valid, s.future) == (slice(0, 5), slice(5, 8), slice(8, 10))
    assert s.first_valid_date is None and s.frequency is None


def test_default_validation_is_twenty_percent_rounded_half_up():
    assert split(100).valid_size == 20
    assert split(12).valid_size == 2            # 0.2 * 12 = 2.4 -> 2
    assert split(13).valid_size == 3            # 0.2 * 13 = 2.6 -> 3
    assert split(2).valid_size == 1             # 0.2 * 2 = 0.4 -> at least 1
    assert split(10, None, events=[1] * 5 + [None] * 5).valid_size == 1   # 20% of 5 observed rows


def test_spreadsheet_numbers_are_counts():
    assert split(10, 3.0).valid_size == 3


def test_validation_date_between_rows_is_noted():
    d = days("2000-01-01", "2000-01-10")
    d = d[:5] + d[7:]                             # 01-06 and 01-07 missing
    s = split(d, dt.date(2000, 1, 6))
    assert (s.train_size, s.valid_size) == (5, 3)
    assert s.first_valid_date == pd.Timestamp("2000-01-08")
    assert "no row is dated 2000-01-06; validation starts at the next date, 2000-01-08 (row 6)" in s.notes


def test_gaps_are_reported_not_refused():
    d = days("2000-01-01", "2000-01-31")
    d = d[:10] + d[12:20] + d[25:]                # 2 then 5 days missing
    s = split(d, 5)
    assert s.frequency == "daily"
    assert [(g.row, g.before.date(), g.after.date(), g.missing) for g in s.gaps] == [
        (11, dt.date(2000, 1, 10), dt.date(2000, 1, 13), 2),
        (19, dt.date(2000, 1, 20), dt.date(2000, 1, 26), 5)]
    assert s.notes == ("2 gaps in the daily dates (7 missing days); the first between row 10 "
                       "(2000-01-10) and row 11 (2000-01-13)",)
    m = pd.date_range("2001-01-01", periods=24, freq="MS")
    m = m.delete([5, 6, 7])
    s = split(m, 4)
    assert s.frequency == "monthly" and [(g.row, g.missing) for g in s.gaps] == [(6, 3)]


def test_irregular_dates_are_noted():
    d = [dt.date(2000, 1, 1), dt.date(2000, 1, 3), dt.date(2000, 1, 8), dt.date(2000, 2, 1)]
    s = split(d, 1)
    assert s.frequency is None and s.gaps == ()
    assert s.notes == ("the dates are irregular (not hourly, daily, business days, weekly, monthly, "
                       "quarterly or yearly)",)


# ---------------------------------------------------------------- frequency and defaults


@pytest.mark.parametrize("freq, expected", [
    ("D", "daily"), ("W-SUN", "weekly"), ("W-WED", "weekly"), ("MS", "monthly"), ("ME", "monthly"),
    ("QS-JAN", "quarterly"), ("QE-DEC", "quarterly"), ("QS-FEB", "quarterly"),
    ("h", "hourly"), ("B", "business"), ("YS", "yearly"), ("YE-DEC", "yearly"), ("YS-JUL", "yearly"),
    ("2D", None), ("SMS", None), ("30min", None),
])
def test_infer_frequency_agrees_with_pandas_date_ranges(freq, expected):
    # pandas generates the reference calendars (pandas.date_range) and names them (pandas.infer_freq)
    dates = pd.date_range("1999-11-30", periods=40, freq=freq)
    assert infer_frequency(dates) == expected
    if expected:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")       # pandas 3 announces a change of return type
            code = pd.infer_freq(dates)
        code = str(getattr(code, "freqstr", code))
        assert code[0] == {"hourly": "h", "daily": "D", "business": "B", "weekly": "W", "monthly": "M",
                           "quarterly": "Q", "yearly": "Y"}[expected]


def test_infer_frequency_edge_cases():
    # month ends, clamped day of month, a time of day, gaps, too few or unsorted dates
    assert infer_frequency([dt.date(2024, 1, 31), dt.date(2024, 2, 29), dt.date(2024, 3, 31)]) == "monthly"
    assert infer_frequency([dt.date(2023, 1, 30), dt.date(2023, 2, 28), dt.date(2023, 3, 30)]) == "monthly"
    assert infer_frequency([dt.date(2023, 1, 30), dt.date(2023, 2, 27), dt.date(2023, 3, 30)]) is None
    assert infer_frequency(pd.date_range("2000-01-01 08:00", periods=9, freq="D")) == "daily"
    assert infer_frequency(pd.bdate_range("2000-01-03", periods=30)) == "business"   # weekends: no gaps
    assert infer_frequency(pd.bdate_range("2000-01-03", periods=4)) == "daily"   # Mon-Thu: no weekend seen
    assert infer_frequency([dt.date(2000, 1, 1)]) is None
    assert infer_frequency([dt.date(2000, 1, 2), dt.date(2000, 1, 1)]) is None
    d = days("2000-01-01", "2000-01-10")
    assert infer_frequency(d[::3]) is None                  # every step 3 days: none of ours


def test_defaults_from_frequency():
    # DESIGN.md §7
    assert [default_season(f) for f in ("daily", "weekly", "monthly", "quarterly", None)] == [7, 52, 12, 4, 1]
    assert [default_season(f) for f in ("business", "hourly", "yearly")] == [5, 1, 1]   # DESIGN.md §3
    assert [default_cycle(f) for f in ("daily", "weekly", "monthly", "quarterly", None)] == [
        365.25, 52.18, 12.0, None, None]
    assert [default_cycle(f) for f in ("business", "hourly", "yearly")] == [365.25, None, None]


# ---------------------------------------------------------------- errors name the rows


def test_unsorted_and_duplicate_dates_name_the_first_rows():
    d = days("2000-01-01", "2000-01-10")
    with pytest.raises(PartitionError, match=r"`index` dates must run in one direction \(they start oldest "
                                             r"first\); row 6 \(2000-01-04\) is earlier than row 5 "
                                             r"\(2000-01-05\): sort the rows oldest first"):
        split(d[:5] + [d[3]] + d[6:], 2)
    with pytest.raises(PartitionError, match=r"`index` has duplicate dates: rows 5 and 6 are both "
                                             r"2000-01-05"):
        split(d[:5] + [d[4]] + d[6:], 2)


def test_validation_leaving_a_period_empty():
    d = days("2000-01-01", "2000-01-10")
    with pytest.raises(PartitionError, match=r"`validation` 1999-12-31 leaves no training rows: the "
                                             r"first date is 2000-01-01 \(row 1\)"):
        split(d, dt.date(1999, 12, 31))
    with pytest.raises(PartitionError, match=r"`validation` 2000-01-09 leaves no validation rows: the "
                                             r"last observed date is 2000-01-08 \(row 8\)"):
        split(d, dt.date(2000, 1, 9), events=[0] * 8 + [None] * 2)
    with pytest.raises(PartitionError, match=r"`validation` 10 leaves no training rows: there are 10 "
                                             r"observed rows \(rows 1 to 10\)"):
        split(d, 10)
    with pytest.raises(PartitionError, match="`validation` 0 leaves no validation rows"):
        split(10, 0)


@pytest.mark.parametrize("call, message", [
    (lambda: split(1, 1), "`index` must have at least 2 rows to split; got 1"),
    (lambda: split(0, 1), "`index` must have at least 2 rows to split; got 0"),
    (lambda: split([], 1), "`index` must have at least 2 rows to split; got 0"),
    (lambda: split(-3, 1), "`index` must be a number of rows >= 0 or a sequence of dates; got -3"),
    (lambda: split(10, "soon"), "`validation` must be a number of periods or a date; got 'soon'"),
    (lambda: split(10, 2.5), "`validation` must be a whole number of periods or a date; got 2.5"),
    (lambda: split(10, True), "`validation` must be a number of periods or a date; got True"),
    (lambda: split(10, dt.date(2000, 1, 1)), r"`validation` is a date \(2000-01-01\) but `index` is a "
                                             r"row count"),
    (lambda: split(4, 1, events=[0, 1, 0]), "`events` has 3 rows but `index` has 4"),
    (lambda: split(3, 1, events=[None, NAN, None]), r"`events` has no observed values \(all 3 rows"),
    (lambda: split(3, 1, events=[0, 2, 1]), r"`events` contains values not in \{0, 1, NaN\}; got .*2\.0.* "
                                            r"at position 2"),
    (lambda: split(4, 2, events=[None, None, 1, 0]),
     "`validation` 2 leaves no observed training rows: rows 1 to 2 of `events` are blank"),
    (lambda: split([dt.date(2000, 1, 1), None, dt.date(2000, 1, 3)], 1),
     "`index` must hold a date in every row; got a blank in row 2"),
    (lambda: split([dt.date(2000, 1, 1), "2000-01-02"], 1),
     "`index` must hold a date in every row; got '2000-01-02' in row 2"),
    (lambda: split(np.array(["2000-01-01", "NaT"], dtype="datetime64[D]"), 1),
     "`index` must hold a date in every row; got a blank in row 2"),
])
def test_bad_input_names_argument_and_value(call, message):
    with pytest.raises((InputError, PartitionError), match=message):
        call()


# ---------------------------------------------------------------- properties


@settings(max_examples=200, deadline=None)
@given(st.lists(st.sampled_from([0.0, 1.0, NAN]), min_size=2, max_size=60), st.data())
def test_periods_cover_the_series_and_count_every_event(events, data):
    ev = np.array(events)
    obs = np.flatnonzero(~np.isnan(ev))
    if obs.size < 2:                 # no split leaves an observed row on each side
        with pytest.raises((InputError, PartitionError)):
            split(len(ev), 1, events=ev)
        return
    n_obs = int(obs[-1]) + 1
    k = data.draw(st.integers(1, n_obs - 1))
    if k > n_obs - 1 - obs[0]:       # the training rows would all be blank
        with pytest.raises(PartitionError, match="leaves no observed training rows"):
            split(len(ev), k, events=ev)
        return
    s = split(len(ev), k, events=ev)
    assert s.train_size + s.valid_size + s.future_size == s.n == len(ev)
    assert s.valid_size == k and s.future_size == len(ev) - n_obs
    assert s.train_events + s.valid_events == np.nansum(ev)
    assert s.train_observed + s.valid_observed == obs.size
    start = dt.date(2020, 2, 27)
    by_date = split([start + dt.timedelta(i) for i in range(len(ev))],
                    start + dt.timedelta(s.train_size), events=ev)
    assert (by_date.train_size, by_date.valid_size, by_date.train_events) == (
        s.train_size, s.valid_size, s.train_events)


# ---------------------------------------------------------------- the periods that follow


@pytest.mark.parametrize("freq", ["h", "D", "B", "W-SUN", "W-FRI", "MS", "ME", "QS-JAN", "QE-DEC", "QS-FEB",
                                  "YS", "YE-DEC", "YS-MAR"])
@pytest.mark.parametrize("start", ["2008-11-28", "2011-01-31 06:00"])
def test_next_periods_continue_pandas_calendars(freq, start):
    # pandas' calendar offsets (pandas.date_range) are the reference: the first 40 periods in, the
    # next 5 out, at the data's own frequency
    full = pd.date_range(start, periods=45, freq=freq)
    if freq.startswith(("ME", "QE", "YE")):       # month-end calendars keep the time of day too
        full = full.normalize() + (pd.Timestamp(start) - pd.Timestamp(start).normalize())
    got = next_periods(full[:40], None, 5)
    assert list(pd.DatetimeIndex(got)) == list(full[40:])


def test_next_period_after_friday_is_monday_and_month_days_clamp():
    # common practice: the business week is Monday to Friday; a month of 31 days' day 31 is day 30 in
    # April and day 29 in a leap February
    fri = [dt.date(2024, 3, 4) + dt.timedelta(i) for i in range(5)] + [dt.date(2024, 3, 11),
                                                                         dt.date(2024, 3, 15)]
    assert str(next_periods(fri, "business", 1)[0])[:10] == "2024-03-18"
    m31 = [dt.date(2024, 1, 31), dt.date(2024, 3, 31)]
    assert [str(d)[:10] for d in next_periods(m31, "monthly", 3)] == ["2024-04-30", "2024-05-31",
                                                                       "2024-06-30"]
    feb = [dt.date(2023, 1, 30), dt.date(2023, 2, 28), dt.date(2023, 3, 30)]
    assert [str(d)[:10] for d in next_periods(feb, None, 11)][-1] == "2024-02-29"
    assert next_periods(fri, "business", 0).size == 0


def test_next_periods_of_irregular_or_unsorted_dates_is_an_error():
    with pytest.raises(PartitionError, match="no regular frequency"):
        next_periods([dt.date(2000, 1, 1), dt.date(2000, 1, 3), dt.date(2000, 1, 8)], None, 1)
    with pytest.raises(PartitionError, match="sort the rows oldest first"):
        next_periods([dt.date(2000, 1, 3), dt.date(2000, 1, 2)], "daily", 1)
    with pytest.raises(InputError, match="`freq` must be one of"):
        next_periods([dt.date(2000, 1, 3)], "fortnightly", 1)


def test_business_days_missing_weekdays_are_holidays_noted_once():
    # US market holidays of 2009 that fall on weekdays (recalled from memory: Independence Day observed
    # on Friday 3 July, Labor Day 7 September, Thanksgiving 26 November, Christmas 25 December)
    holidays = pd.to_datetime(["2009-07-03", "2009-09-07", "2009-11-26", "2009-12-25"])
    days_ = pd.bdate_range("2009-06-01", "2009-12-31").difference(holidays)
    s = split(days_, 20)
    assert s.frequency == "business" and default_season(s.frequency) == 5
    assert [g.missing for g in s.gaps] == [1, 1, 1, 1]
    assert s.notes == ("4 business days (Monday to Friday) between the first and the last date have no "
                       "row, read as holidays: 2009-07-03, 2009-09-07, 2009-11-26, ...",)


def test_time_order_reads_newest_first_and_refuses_other_disorder():
    d = days("2000-01-01", "2000-01-10")
    assert time_order(d) == 1 and time_order(d[::-1]) == -1 and time_order(d[:1]) == 1
    turned = d[::-1][:5] + [d[8]] + d[::-1][6:]
    with pytest.raises(PartitionError, match=r"they start newest first\); row 6 \(2000-01-09\) is "
                                             r"later than row 5 \(2000-01-06\): sort the rows oldest "
                                             r"first") as info:
        time_order(turned)
    assert info.value.location == 6
    with pytest.raises(PartitionError, match="duplicate dates: rows 2 and 3"):
        time_order([d[2], d[1], d[1]])
    with pytest.raises(PartitionError, match=r"they run newest first .*sort the rows oldest first"):
        split(d[::-1], 2)       # the core's split takes rows in time order; the refresh turns them round
