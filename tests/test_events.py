"""Tests of sheetfns.events: the criterion grammar and event flags.

The comparison grammar follows OpenFormula criteria (OASIS, Open Document Format for Office Applications
(OpenDocument) v1.2, Part 2: Recalculated Formula (OpenFormula) Format, 2011, §4.11.8): an operator
``= <> < <= > >=`` followed by a number or text, a bare value meaning ``=``, text compared
case-insensitively. The change rules are tocsin's own (DESIGN.md §5).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetfns.errors import CriterionError, InputError
from sheetfns.events import Criterion, flag, parse_criterion

NAN = np.nan


def same(a, b) -> bool:
    return np.array_equal(np.asarray(a, dtype=float), np.asarray(b, dtype=float), equal_nan=True)


# ---------------------------------------------------------------- the grammar


@pytest.mark.parametrize("text, op, threshold", [
    (">=3.2", ">=", 3.2), (">1150", ">", 1150.0), ("<0", "<", 0.0), ("<=-15", "<=", -15.0),
    ("=1", "=", 1.0), ("<>0", "<>", 0.0), (" >= 2e3 ", ">=", 2000.0), (">.5", ">", 0.5),
    ("7", "=", 7.0),                      # OpenFormula §4.11.8: a bare value means "="
    ("=TRUE", "=", 1.0), ("<>false", "<>", 0.0),   # TRUE/FALSE cells count as 1/0
])
def test_numeric_comparisons_parse(text, op, threshold):
    c = parse_criterion(text)
    assert (c.kind, c.op, c.threshold, c.text) == ("compare", op, threshold, text)


def test_text_and_change_criteria_parse():
    assert parse_criterion("=Alarm") == Criterion("=Alarm", "text", "=", label="alarm")
    assert parse_criterion("<> pump 2 ").label == "pump 2"
    assert parse_criterion("rise") == Criterion("rise", "change", ">", 0.0, direction="rise")
    assert parse_criterion("FALL") == Criterion("FALL", "change", ">", 0.0, direction="fall")
    assert parse_criterion("rise>=0.5") == Criterion("rise>=0.5", "change", ">=", 0.5, direction="rise")
    assert parse_criterion("fall > 2").threshold == 2.0
    c = parse_criterion("rise%>=2")
    assert (c.kind, c.op, c.threshold, c.direction, c.percent) == ("change", ">=", 2.0, "rise", True)
    assert parse_criterion("fall%>5").percent


def test_criterion_is_frozen_and_hashable():
    c = parse_criterion(">=3")
    with pytest.raises(AttributeError):
        c.op = "<"   # type: ignore[misc]
    assert {c, parse_criterion(">=3")} == {c}


@pytest.mark.parametrize("text, expected", [
    ("rise>=x", "criterion 'rise>=x': expected a number after '>='"),
    (">=abc", "criterion '>=abc': expected a number after '>='"),
    ("=", "criterion '=': expected a number or text after '='"),
    ("<>", "criterion '<>': expected a number or text after '<>'"),
    ("", "criterion '': expected a comparison"),
    ("alarm", "criterion 'alarm': expected a comparison"),
    ("rise<3", "criterion 'rise<3': expected '>' or '>=' after 'rise'"),
    ("rise%", "criterion 'rise%': expected a comparison such as '>=2' after 'rise%'"),
    ("fall 2", "criterion 'fall 2': expected '>' or '>=' and a number after 'fall'"),
    ("fall>-1", "criterion 'fall>-1': expected a number >= 0"),
    ("==x", "criterion '==x': expected a number or text after '='; text must not start with"),
    (">>3", "criterion '>>3': expected a number after '>'"),
    ("rise>", "criterion 'rise>': expected a number after '>'"),
])
def test_malformed_criteria_quote_the_text_and_say_what_was_expected(text, expected):
    with pytest.raises(CriterionError) as err:
        parse_criterion(text)
    assert str(err.value).startswith(expected)


def test_criterion_must_be_text():
    with pytest.raises(CriterionError, match="criterion must be text.*got 3"):
        parse_criterion(3)   # type: ignore[arg-type]


def test_no_eval():
    # a Python expression is just a malformed criterion, never evaluated
    with pytest.raises(CriterionError, match="expected a number after '>'"):
        parse_criterion(">__import__('os').getcwd()")


# ---------------------------------------------------------------- flags, hand-worked


def test_comparisons_hand_worked():
    y = [1.0, 5.0, None, 7.0, 2.0, NAN]
    assert same(flag(y, ">=5"), [0, 1, NAN, 1, 0, NAN])
    assert same(flag(y, ">5"), [0, 0, NAN, 1, 0, NAN])
    assert same(flag(y, "<2"), [1, 0, NAN, 0, 0, NAN])
    assert same(flag(y, "<=2"), [1, 0, NAN, 0, 1, NAN])
    assert same(flag(y, "=7"), [0, 0, NAN, 1, 0, NAN])
    assert same(flag(y, "<>7"), [1, 1, NAN, 0, 1, NAN])
    assert flag(np.array([1, 2, 3]), ">1").dtype == np.float64


def test_booleans_count_as_one_and_zero():
    assert same(flag([True, False, None, True], "=1"), [1, 0, NAN, 1])
    assert same(flag([True, False, None, True], "=TRUE"), [1, 0, NAN, 1])
    assert same(flag(np.array([True, False]), ">0"), [1, 0])


def test_text_criteria_case_insensitive():
    cells = ["Alarm", "ok", None, 3.0, True, " ALARM ", ""]
    # numbers and TRUE/FALSE are not the text; blanks (None, empty text) are missing
    assert same(flag(cells, "=alarm"), [1, 0, NAN, 0, 0, 1, NAN])
    assert same(flag(cells, "<>ALARM"), [0, 1, NAN, 1, 1, 0, NAN])


def test_text_cell_under_numeric_rule_is_missing():
    assert same(flag([4.0, "n/a", 6.0], ">5"), [0, NAN, 1])
    assert same(flag([4.0, "n/a", 6.0], "rise"), [NAN, NAN, 1])   # 6 - 4 > 0, the text cell skipped


def test_change_against_previous_observed_value():
    y = [10.0, 12.0, None, 11.0, 11.0, 14.5]
    # changes: -, 12-10=2, -, 11-12=-1 (previous *observed* is 12), 0, 3.5
    assert same(flag(y, "rise"), [NAN, 1, NAN, 0, 0, 1])
    assert same(flag(y, "fall"), [NAN, 0, NAN, 1, 0, 0])
    assert same(flag(y, "rise>=2"), [NAN, 1, NAN, 0, 0, 1])
    assert same(flag(y, "rise>2"), [NAN, 0, NAN, 0, 0, 1])
    assert same(flag(y, "fall>=1"), [NAN, 0, NAN, 1, 0, 0])


def test_percent_change():
    y = [100.0, 103.0, 50.0, 0.0, 5.0, -10.0, -5.0]
    # 100*(103-100)/100 = 3 ; 100*(50-103)/103 = -51.5 ; 100*(0-50)/50 = -100 ;
    # previous 0 -> undefined (NaN) ; 100*(-10-5)/5 = -300 ; 100*(-5+10)/|-10| = +50
    assert same(flag(y, "rise%>=2"), [NAN, 1, 0, 0, NAN, 0, 1])
    assert same(flag(y, "rise%>=3"), [NAN, 1, 0, 0, NAN, 0, 1])
    assert same(flag(y, "rise%>3"), [NAN, 0, 0, 0, NAN, 0, 1])
    assert same(flag(y, "fall%>60"), [NAN, 0, 0, 1, NAN, 1, 0])


def test_min_run_hand_worked():
    y = [6.0, 7.0, 2.0, 8.0, 9.0, 9.5, None, 9.0, 9.0]
    cond = [1, 1, 0, 1, 1, 1, NAN, 1, 1]
    assert same(flag(y, ">5"), cond)
    # k=2: row 0 has no row before it (unknown) -> NaN; a NaN row breaks knowledge, a 0 decides
    assert same(flag(y, ">5", min_run=2), [NAN, 1, 0, 0, 1, 1, NAN, NAN, 1])
    assert same(flag(y, ">5", min_run=3), [NAN, NAN, 0, 0, 0, 1, NAN, NAN, NAN])
    assert same(flag([1.0, 1.0, 1.0], ">5", min_run=5), [0, 0, 0])


# ---------------------------------------------------------------- against a slow reference


def ref_flag(values, crit: Criterion, k: int) -> list[float]:
    """Obviously-correct row-by-row version of flag()."""
    def num(v):
        if v is None or isinstance(v, str):
            return None
        f = float(v)
        return None if math.isnan(f) else f

    def same_(a, b):    # equal at spreadsheet precision (DESIGN.md §5; |a - b| < 2^-48 |a| and |b|)
        d = abs(a - b)
        return a == b or (d < abs(a) * 2.0 ** -48 and d < abs(b) * 2.0 ** -48)

    def cmp(a, op, b):
        eq = same_(a, b)
        return {">=": a > b or eq, "<=": a < b or eq, ">": a > b and not eq, "<": a < b and not eq,
                "=": eq, "<>": not eq}[op]

    cond: list[float] = []
    prev = None
    for v in values:
        x = num(v)
        if crit.kind == "text":
            if isinstance(v, str) and v.strip():
                eq = v.strip().casefold() == crit.label
            elif x is None:
                cond.append(NAN)
                continue
            else:
                eq = False
            cond.append(float(eq if crit.op == "=" else not eq))
        elif crit.kind == "compare":
            cond.append(NAN if x is None else float(cmp(x, crit.op, crit.threshold)))
        else:
            if x is None:
                cond.append(NAN)
                continue
            if prev is None:
                cond.append(NAN)
            else:
                ch = 0.0 if same_(x, prev) else x - prev if crit.direction == "rise" else prev - x
                if crit.percent:
                    ch = None if prev == 0 else 100.0 * ch / abs(prev)
                cond.append(NAN if ch is None else float(cmp(ch, crit.op, crit.threshold)))
            prev = x
    out = []
    for t, c in enumerate(cond):
        if math.isnan(c):
            out.append(NAN)
            continue
        win = cond[max(0, t - k + 1): t + 1]
        if any(w == 0.0 for w in win):
            out.append(0.0)
        elif t < k - 1 or any(math.isnan(w) for w in win):
            out.append(NAN)
        else:
            out.append(1.0)
    return out


CRITERIA = [">=0.5", ">0", "<-0.3", "<=0", "=1", "<>1", "rise", "fall", "rise>=0.4", "fall>1",
            "rise%>=20", "fall%>50", "=alarm", "<>alarm"]


@pytest.mark.parametrize("criterion", CRITERIA)
def test_matches_reference_loop_on_random_data(criterion):
    rng = np.random.default_rng(20240611)
    n = 400
    y = np.round(rng.normal(size=n), 1)
    y[rng.random(n) < 0.15] = np.nan
    values: list = list(y)
    for i in np.flatnonzero(rng.random(n) < 0.05):
        values[i] = ["alarm", "ALARM", "ok", None, True, False, 1][i % 7]
    crit = parse_criterion(criterion)
    for k in (1, 2, 3, 7):
        assert same(flag(values, criterion, min_run=k), ref_flag(values, crit, k)), (criterion, k)
        assert same(flag(y, crit, min_run=k), ref_flag(list(y), crit, k)), (criterion, k)


cells = st.one_of(st.none(), st.floats(-5, 5), st.just(float("nan")), st.booleans(),
                  st.sampled_from(["alarm", "Ok", ""]))


@settings(max_examples=150, deadline=None)
@given(st.lists(cells, min_size=1, max_size=40), st.sampled_from(CRITERIA), st.integers(1, 4),
       st.data())
def test_flag_is_causal_and_keeps_length(values, criterion, k, data):
    """A flag at row t depends on rows <= t only; the output has the input's length."""
    out = flag(values, criterion, min_run=k)
    assert out.shape == (len(values),)
    assert np.all(np.isnan(out) | (out == 0) | (out == 1))
    t = data.draw(st.integers(0, len(values) - 1))
    changed = values[: t + 1] + data.draw(st.lists(cells, min_size=len(values) - t - 1,
                                                   max_size=len(values) - t - 1))
    assert same(flag(changed, criterion, min_run=k)[: t + 1], out[: t + 1])


# ---------------------------------------------------------------- bad input


def test_bad_input_names_argument_and_value():
    with pytest.raises(InputError, match="`values` must not be empty; got 0 rows"):
        flag([], ">0")
    with pytest.raises(InputError, match="`min_run` must be an integer >= 1; got 0"):
        flag([1.0, 2.0], ">0", min_run=0)
    with pytest.raises(InputError, match="`min_run` must be an integer; got 'two'"):
        flag([1.0, 2.0], ">0", min_run="two")
    with pytest.raises(InputError, match=r"`values` must hold numbers.*got \{'a': 1\} at position 2"):
        flag([1.0, {"a": 1}], ">0")
    with pytest.raises(InputError, match="`values` must be one-dimensional"):
        flag(np.zeros((3, 2)), ">0")
    with pytest.raises(CriterionError, match="criterion 'bogus'"):
        flag([1.0, 2.0], "bogus")


def test_all_missing_gives_all_nan_not_an_error():
    # flags have no minimum length: a blank column gives a blank event column
    assert same(flag([None, None], ">0"), [NAN, NAN])
    assert same(flag(["x"], ">0"), [NAN])


def test_spreadsheet_column_shape_is_accepted():
    # a one-column range arrives as a list of one-element rows
    assert same(flag([[1.0], [None], ["alarm"]], ">0"), [1, NAN, NAN])


def test_a_run_longer_than_the_series_never_holds():
    # a min_run beyond the data (even beyond numpy's integers, as a spreadsheet cell may hold) is NaN
    # everywhere, as min_run = n + 1 is
    values = [1.0, 2.0, None, 3.0]
    assert same(flag(values, ">0", min_run=10**30), flag(values, ">0", min_run=5))
    assert np.isnan(flag(values, ">0", min_run=5)).all()
