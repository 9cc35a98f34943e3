"""Range coercion for the spreadsheet functions (sheetfns.udf.coerce): shapes, cell values, arguments,
results and error text. Pure Python: no xlwings needed."""
from __future__ import annotations

import datetime as dt
import math
import re

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from sheetfns.errors import CriterionError, InputError
from sheetfns.udf import coerce as c


# ---------------------------------------------------------------- shapes
@pytest.mark.parametrize("value, expected", [
    (5.0, [5.0]),                                   # a single cell arrives as a scalar
    ([[5.0]], [5.0]),                               # ... or, with ndim=2, as a 1x1 list of lists
    ([1.0, 2.0, None], [1.0, 2.0, None]),           # a column with default converters: a flat list
    ([[1.0], [2.0], [None]], [1.0, 2.0, None]),     # a column with ndim=2: one-element rows
    (((1.0,), (2.0,)), [1.0, 2.0]),                 # tuples, as COM hands them over
    (np.array([[1.0], [2.0]]), [1.0, 2.0]),
    (np.array([1.0, 2.0]), [1.0, 2.0]),
])
def test_column_cells_accepts_every_column_shape(value, expected):
    assert c.column_cells(value, "events") == expected


def test_row_range_where_a_column_is_expected_says_what_was_expected():
    with pytest.raises(InputError) as e:
        c.column_cells([[1.0, 0.0, 1.0]], "events")
    msg = str(e.value)
    assert "`events` must be a single column" in msg
    assert "row of 3 cells" in msg and "down a column" in msg


def test_block_where_a_column_is_expected():
    with pytest.raises(InputError, match=r"`actual` must be a single column.*2 rows x 2 columns"):
        c.column_cells([[1, 0], [0, 1]], "actual")


def test_ragged_rows_are_reported_with_the_row():
    with pytest.raises(InputError, match=r"`predictors` must be a rectangular range; row 3 has 1 cells "
                                         r"but row 1 has 2"):
        c.grid([[1, 2], [3, 4], [5]], "predictors")
    with pytest.raises(InputError, match="mixture of single values and rows"):
        c.column_cells([1.0, [2.0]], "events")


# ---------------------------------------------------------------- cell values
def test_numbers_blank_bool_and_text_numbers():
    got = c.numbers([1.0, None, True, False, " 1150 ", "-3.5", "2e3", "+.5", "", 7], "values")
    np.testing.assert_array_equal(got, [1.0, np.nan, 1.0, 0.0, 1150.0, -3.5, 2000.0, 0.5, np.nan, 7.0])
    assert got.dtype == float


@pytest.mark.parametrize("text", ["1,150", "12%", "nan", "inf", "1_000", "0x10", "$5", "n/a", "1.2.3"])
def test_ambiguous_text_is_not_read_as_a_number(text):
    # Thousands separators and decimal commas depend on the locale, so "1,150" could be 1150 or 1.15
    # (common practice: never guess a locale); "nan"/"inf"/"1_000" are Python spellings, not cell text.
    assert c.plain_number(text) is None
    expected = f"`values` must hold numbers; got the text '{text}' in row 2"
    with pytest.raises(InputError, match=re.escape(expected)):
        c.numbers([1.0, text], "values")
    kept = c.numbers([1.0, text], "values", keep_text=True)
    assert kept.dtype == object and kept[1] == text


def test_numbers_reject_dates_with_the_row():
    with pytest.raises(InputError, match=r"`values` must hold numbers; got the date 2024-01-05 in row 3"):
        c.numbers([1.0, 2.0, dt.date(2024, 1, 5)], "values")


def _naive_numbers(cells):
    """Slow, obviously correct reference: one cell at a time."""
    out = []
    for v in cells:
        if v is None:
            out.append(math.nan)
        elif isinstance(v, bool):
            out.append(1.0 if v else 0.0)
        else:
            out.append(float(v))
    return np.array(out, dtype=float)


@given(st.lists(st.one_of(st.none(), st.booleans(), st.integers(-10**6, 10**6),
                          st.floats(allow_nan=False, allow_infinity=False)), max_size=60))
def test_numbers_match_the_cell_by_cell_reference(cells):
    np.testing.assert_array_equal(c.numbers(cells, "values"), _naive_numbers(cells))


def _naive_numbers_with_text(cells):
    """Slow reference for the documented text rules: plain numbers read, blank text missing, other
    text kept."""
    out = []
    for v in cells:
        if isinstance(v, str):
            t = v.strip()
            if t == "":
                out.append(math.nan)
            elif re.fullmatch(r"[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?", t):
                out.append(float(t))
            else:
                out.append(v)
        else:
            out.extend(_naive_numbers([v]).tolist())
    return out


@given(st.lists(st.one_of(st.none(), st.booleans(), st.floats(allow_nan=False, allow_infinity=False),
                          st.sampled_from(["", "  ", "12", " -3.5 ", "1e3", ".5", "x", "1,5", "5%"])),
                max_size=60))
def test_numbers_with_text_match_the_reference(cells):
    got = c.numbers(cells, "values", keep_text=True).tolist()
    ref = _naive_numbers_with_text(cells)
    assert len(got) == len(ref)
    for a, b in zip(got, ref, strict=True):
        assert (a == b) or (a != a and b != b), (a, b)


def test_dates_from_datetimes_serials_and_iso_text():
    from openpyxl.utils.datetime import from_excel  # reference: openpyxl's 1900-date-system conversion

    got = c.dates([dt.datetime(2024, 1, 5, 12), dt.date(2024, 2, 29), 45000.0, 45000.5, "2024-03-31",
                   None, ""], "dates")
    expected = [dt.datetime(2024, 1, 5, 12), dt.datetime(2024, 2, 29), from_excel(45000.0),
                from_excel(45000.5), dt.datetime(2024, 3, 31)]
    assert got[:5].astype("datetime64[us]").tolist() == expected
    assert np.isnat(got[5:]).all()


@pytest.mark.parametrize("bad, what", [("31/03/2024", "the text '31/03/2024'"), (True, "True"),
                                       (-5.0, "-5.0"), (3e6, "3000000.0")])
def test_dates_reject_what_is_not_a_date(bad, what):
    with pytest.raises(InputError, match=rf"`dates` must hold dates.*got {what} in row 2"):
        c.dates([dt.date(2024, 1, 1), bad], "dates")


def test_event_and_prob_columns_check_their_values():
    np.testing.assert_array_equal(c.event_column([[1.0], [None], [False], [True]], "events"),
                                  [1.0, np.nan, 0.0, 1.0])
    with pytest.raises(InputError, match=r"`events` must hold events: 1 \(event\), 0 \(no event\), TRUE, "
                                         r"FALSE or blank; got 2.0 in row 2 of the range"):
        c.event_column([[1.0], [2.0]], "events")
    with pytest.raises(InputError, match=r"`probability` must hold probabilities between 0 and 1; got 1.5 "
                                         r"in row 2"):
        c.prob_column([0.2, 1.5], "probability")
    with pytest.raises(InputError, match="at least one row"):
        c.event_column([], "events")


def test_number_table_with_and_without_header():
    x, names = c.number_table([["temp", "wind"], [1, 2], [3, None]], "predictors", rows=2)
    assert names == ["temp", "wind"]
    np.testing.assert_array_equal(x, [[1, 2], [3, np.nan]])
    x, names = c.number_table([[1, 2], [3, 4]], "predictors", rows=2)
    assert names == ["predictors 1", "predictors 2"]
    x, names = c.number_table([1.0, 2.0, 3.0], "predictors", rows=3)   # a flat column
    assert x.shape == (3, 1)
    with pytest.raises(InputError, match=r"`predictors` must cover the same rows as the events; the "
                                         r"events have 3 rows, `predictors` has 2"):
        c.number_table([[1], [2]], "predictors", rows=3)
    with pytest.raises(InputError, match=r"`predictors` column `wind` must hold numbers; got the text "
                                         r"'calm' in row 2"):
        c.number_table([["temp", "wind"], [1, 2], [3, "calm"]], "predictors", rows=2)


# ---------------------------------------------------------------- scalar arguments
@pytest.mark.parametrize("value, expected", [(None, 1), ("", 1), (3.0, 3), ("4", 4), ([[2.0]], 2), (7, 7)])
def test_option_int(value, expected):
    assert c.option_int(value, "horizon", 1, minimum=1) == expected


@pytest.mark.parametrize("value, message", [
    (2.5, r"`horizon` must be an integer; got 2.5"),
    (0, r"`horizon` must be an integer >= 1; got 0"),
    ("two", r"`horizon` must be a whole number; got the text 'two'"),
    ([1.0, 2.0], r"`horizon` must be a single value; got a range of 2 cells"),
    (True, r"`horizon` must be an integer; got True"),
])
def test_option_int_errors(value, message):
    with pytest.raises(InputError, match=message):
        c.option_int(value, "horizon", 1, minimum=1)


def test_option_float_and_text():
    assert c.option_float(None, "cycle", None) is None
    assert c.option_float("365.25", "cycle", None) == 365.25
    with pytest.raises(InputError, match="`cycle` must be a positive number; got -7"):
        c.option_float(-7, "cycle", None, positive=True)
    assert c.option_text(None, "by", "month") == "month"
    assert c.option_text(" week ", "by", "month") == "week"
    with pytest.raises(InputError, match="`by` must be text; got 3"):
        c.option_text(3, "by", "month")


def test_criterion_text():
    # OpenFormula criteria (OASIS OpenDocument v1.2 Part 2, 2011, 4.11.8): a bare number means equality.
    assert c.criterion_text(1150.0) == "=1150"
    assert c.criterion_text(2.5) == "=2.5"
    assert c.criterion_text(True) == "=1"
    assert c.criterion_text(">=1150") == ">=1150"
    with pytest.raises(InputError, match="`criterion` is required"):
        c.criterion_text(None)
    for bad in (float("inf"), float("-inf"), float("nan")):   # a number with no text form
        with pytest.raises(InputError, match="`criterion` must be a rule such as"):
            c.criterion_text(bad)


# ---------------------------------------------------------------- results and errors
def test_to_column_maps_nan_to_blank():
    assert c.to_column(np.array([1.0, np.nan, 0.25])) == [[1.0], [None], [0.25]]
    out = c.to_column(np.arange(5, dtype=float))
    assert all(type(r[0]) is float for r in out)


def test_to_table_cells_are_plain_python():
    t = c.to_table(["measure", "value"], [["hits", np.int64(3)], ["brier", np.float64(np.nan)]])
    assert t == [["measure", "value"], ["hits", 3], ["brier", None]]
    assert type(t[1][1]) is int


def test_error_value_and_guard():
    assert c.error_value(CriterionError("criterion 'rise>=x': expected a number")) == \
        "#tocsin: criterion 'rise>=x': expected a number"

    @c.guarded
    def boom(x):
        """Doc survives."""
        return 1 / x

    assert boom(2) == 0.5
    text = boom(0)
    assert text.startswith("#tocsin: unexpected error (ZeroDivisionError")
    assert boom.__doc__ == "Doc survives." and boom.__name__ == "boom"
