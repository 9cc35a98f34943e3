"""EVENT_VALUE_PROB and EVENT_MARKOV (DESIGN.md §11), called as the add-in calls them (lists of rows,
None for blanks): the core's numbers, the coercion of what a spreadsheet hands over, and a
'#tocsin: ...' message for every bad input. Parity with the watcher's sheet is in
tests/test_udf_formulas_demo.py.

Data: a simulated AR(1) series with a weekly pattern (seeded), named as such."""
from __future__ import annotations

import datetime as dt

import numpy as np
import pytest
from test_udf import cells, column

from sheetfns import events, markov, valuemodel
from sheetfns import udf as U


@pytest.fixture(scope="module")
def series():
    rng = np.random.default_rng(11)
    n = 420
    x = np.empty(n)
    level = 0.0
    for t in range(n):
        level = 0.7 * level + rng.normal(scale=40.0)
        x[t] = round(1000.0 + level + 60.0 * (t % 7 == 5), 1)
    x[[30, 200]] = np.nan                         # blanks inside the data
    x[-3:] = np.nan                               # future periods
    temp = np.round(rng.normal(15.0, 5.0, n), 1)
    dates = [dt.date(2021, 3, 1) + dt.timedelta(days=i) for i in range(n)]
    return x, temp, dates


@pytest.mark.parametrize("rule, train_rows, horizon, lags, cycle, harmonics", [
    (">=1050", 300, 1, 1, None, 2), ("<960", None, 1, 2, None, 2), ("rise>20", 300, 2, 1, 30.0, 1),
    ("fall%>3", 320, 1, 0, None, 2)])
def test_event_value_prob_equals_the_core(series, rule, train_rows, horizon, lags, cycle, harmonics):
    x, temp, _ = series
    pred = [["temp"]] + cells(temp)
    got = column(U.EVENT_VALUE_PROB(cells(x), rule, pred, train_rows, horizon, lags, cycle, harmonics))
    fc = valuemodel.forecast(x, rule, predictors={"temp": temp}, train_size=train_rows, horizon=horizon,
                             lags=lags, cycle=cycle, harmonics=harmonics)
    assert len(got) == x.size
    np.testing.assert_allclose(got, fc.prob, rtol=0, atol=1e-12)
    assert np.isnan(got).tolist() == np.isnan(fc.prob).tolist()


def test_event_value_prob_with_dates_gets_the_watchers_weekday_terms(series):
    x, _, dates = series
    got = column(U.EVENT_VALUE_PROB(cells(x), ">=1050", None, 300, 1, 1, 365.25, 2, [[d] for d in dates]))
    fc = valuemodel.forecast(x, ">=1050", dates=dates, weekday=True, train_size=300, cycle=365.25)
    np.testing.assert_allclose(got, fc.prob, rtol=0, atol=1e-12)
    assert "Saturday" in fc.terms                   # daily data: weekday terms, as on the forecast sheet
    plain = column(U.EVENT_VALUE_PROB(cells(x), ">=1050", None, 300))
    assert np.nanmax(np.abs(plain - got)) > 0.01    # the dates change the model


def test_event_value_prob_coerces_cells_as_a_spreadsheet_hands_them(series):
    x, _, _ = series
    want = column(U.EVENT_VALUE_PROB(cells(x), ">=1050", None, 300))
    # numbers stored as text count as numbers, a text cell and empty text as blanks (as EVENT_FLAG
    # reads them), options given as text or floats, the criterion from a cell
    rows = cells(x)
    rows[5] = [str(x[5])]
    rows[30] = ["n/a"]
    rows[200] = [""]
    got = column(U.EVENT_VALUE_PROB(rows, [[">=1050"]], None, "300", 1.0, "1"))
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-12)
    # a flat list is a column too
    np.testing.assert_allclose(column(U.EVENT_VALUE_PROB([v[0] for v in cells(x)], ">=1050", None, 300)),
                               want, rtol=0, atol=1e-12)


@pytest.mark.parametrize("args, says", [
    (("=alarm",), "#tocsin: value model not used: the rule '=alarm' compares text"),
    ((1050,), "#tocsin: value model not used: the rule '=1050' asks for equality"),
    ((">=1O50",), "#tocsin: "),
    ((None,), "#tocsin: `criterion` is required"),
    ((">=1050", None, 300, 0), "#tocsin: `horizon` must be"),
    ((">=1050", None, 300, 1, -1), "#tocsin: `lags` must be"),
    ((">=1050", None, 300, 1, 1, -7.0), "#tocsin: `cycle` must be"),
    ((">=1050", [["temp"]] + [[1.0]] * 10), "#tocsin: `predictors` must cover the same rows as the "
                                            "values; the values have 420 rows, `predictors` has 11"),
    ((">=1050", None, 300, 1, 1, None, 2, [[dt.date(2021, 1, 1)]] * 5),
     "#tocsin: inputs must have the same length; `values` has 420, `dates` has 5 rows"),
])
def test_event_value_prob_errors_are_messages(series, args, says):
    x, _, _ = series
    out = U.EVENT_VALUE_PROB(cells(x), *args)
    assert isinstance(out, str) and out.startswith(says), out


def test_event_value_prob_on_an_event_column_or_too_few_rows_says_why():
    assert U.EVENT_VALUE_PROB([[True], [False]] * 20, ">0").startswith(
        "#tocsin: value model not used: the column holds only 0 and 1 (or TRUE/FALSE)")
    assert U.EVENT_VALUE_PROB([[1.0], [2.0], [3.0]], ">1").startswith(
        "#tocsin: no row could be forecast: value model: ")
    assert U.EVENT_VALUE_PROB([[5.0]], ">1") == "#tocsin: `values` must have at least 2 rows to forecast " \
                                                "from its past; got 1"


@pytest.mark.parametrize("train_rows, horizon", [(None, 1), (300, 1), (300, 3), (None, 4)])
def test_event_markov_equals_the_core(series, train_rows, horizon):
    x, _, _ = series
    y = events.flag(x, ">=1050")
    got = column(U.EVENT_MARKOV(cells(y), train_rows, horizon))
    np.testing.assert_array_equal(got, markov.forecast(y, train_size=train_rows, horizon=horizon))


def test_event_markov_reads_true_false_and_blank_text():
    y = [1.0, 0.0, 1.0, 1.0, 0.0, np.nan, 1.0, np.nan]
    want = column(U.EVENT_MARKOV(cells(y)))
    rows = [[True], [False], [1], ["1"], [0.0], [""], [True], [None]]
    np.testing.assert_array_equal(column(U.EVENT_MARKOV(rows)), want)
    np.testing.assert_array_equal(want, markov.forecast(y))


@pytest.mark.parametrize("args, says", [
    (([[0.0], [2.0], [1.0]],), "#tocsin: `events` must hold events: 1 (event), 0 (no event), TRUE, "
                               "FALSE or blank; got 2.0 in row 2 of the range"),
    (([[1.0]],), "#tocsin: `events` must have at least 2 rows to forecast from its past; got 1"),
    (([[0.0], [1.0], [1.0]], 0), "#tocsin: `train_rows` must be"),
    (([[0.0], [1.0], [1.0]], None, 3), "#tocsin: `horizon` must be smaller than"),
    (([[0.0], [1.0], [1.0]], None, "soon"), "#tocsin: `horizon` must be a whole number; got the text"),
])
def test_event_markov_errors_are_messages(args, says):
    out = U.EVENT_MARKOV(*args)
    assert isinstance(out, str) and out.startswith(says), out
