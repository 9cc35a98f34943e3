"""The spreadsheet functions (sheetfns.udf): each called as the add-in calls it (plain arguments: lists
of rows, None for blanks), compared with the core function on the same data, checked against
reference libraries where a score is involved, and fed bad input that must come back as a
'#tocsin: ...' message, never an exception.

Off Windows xlwings' decorators register nothing, so one test loads xlwings' own Windows decorator
code (with the three Windows-only modules it imports stubbed out) to check what the add-in would
register: argument names and order, optional arguments, the function-wizard descriptions and the
VBA wrapper it would generate.
"""
from __future__ import annotations

import json
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetfns import benchmarks, events, logistic, profile, scores
from sheetfns import udf as U

ROOT = Path(__file__).resolve().parents[1]

# DESIGN.md section 6: names and argument order are fixed; [optional] arguments in brackets. Two
# trailing optional arguments extend section 6 so that the functions can give the watcher's numbers:
# EVENT_LOGIT(..., [dates]) (calendar time axis, weekday terms for daily data) and
# EVENT_SCORES(..., [reference]) (the reference forecast of brier_skill).
SIGNATURES = {
    "EVENT_FLAG": "values, criterion, [min_run]",
    "EVENT_NAIVE": "events, [horizon], [season], [train_rows]",
    "EVENT_MAJORITY": "events, [window], [train_rows], [horizon]",
    "EVENT_SHARE": "events, [window], [train_rows], [horizon]",
    "EVENT_LOGIT": "events, [predictors], [train_rows], [horizon], [lags], [cycle], [harmonics], [dates]",
    "EVENT_LOGIT_COEFS": "events, [predictors], [train_rows], [horizon], [lags], [cycle], [harmonics], "
                         "[dates]",
    # DESIGN.md section 11
    "EVENT_VALUE_PROB": "values, criterion, [predictors], [train_rows], [horizon], [lags], [cycle], "
                        "[harmonics], [dates]",
    "EVENT_MARKOV": "events, [train_rows], [horizon]",
    "EVENT_SCORES": "actual, forecast, [probability], [reference]",
    "EVENT_CONFUSION": "actual, forecast",
    "EVENT_BRIER": "actual, probability",
    "EVENT_RATE_TABLE": "dates, events, [by]",
    "EVENT_CUTOFF": "cost_false_alarm, cost_miss",
    "EVENT_COMPARE": "actual, forecast_a, forecast_b",
}
WIRED = [name for name in SIGNATURES if hasattr(U, name)]


def run_python(code: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-c", textwrap.dedent(code)], cwd=ROOT, capture_output=True,
                          text=True, timeout=120, env={"PYTHONPATH": str(ROOT), "PATH": "/usr/bin:/bin"})


def cells(arr) -> list[list]:
    """A series as the add-in hands over a one-column range: one-element rows, None for blanks."""
    return [[None if (isinstance(v, float) and np.isnan(v)) else v] for v in np.asarray(arr).tolist()]


def column(out) -> np.ndarray:
    """A spilled column back to a float array (blank -> NaN)."""
    assert isinstance(out, list) and all(isinstance(r, list) and len(r) == 1 for r in out), out
    return np.array([np.nan if r[0] is None else r[0] for r in out], dtype=float)


def table(out) -> dict:
    assert isinstance(out, list) and out[0] == ["measure", "value"], out
    return {k: (np.nan if v is None else v) for k, v in out[1:]}


@pytest.fixture(scope="module")
def data():
    rng = np.random.default_rng(7)   # invented data: the wrapper must equal the core on any series
    n = 400
    values = np.round(1000 + 150 * rng.standard_normal(n), 1)
    values[[13, 200, 201]] = np.nan
    actual = events.flag(values, ">=1150")
    forecast = (rng.random(n) < 0.3).astype(float)
    forecast_b = np.where(rng.random(n) < 0.8, actual, 1 - actual)
    prob = np.clip(0.15 + 0.6 * np.nan_to_num(actual) * rng.random(n), 0, 1)
    return {"values": values, "actual": actual, "forecast": forecast, "forecast_b": forecast_b,
            "prob": prob}


# ---------------------------------------------------------------- module boundaries
def test_core_modules_never_import_xlwings_or_watchdog():
    # every module of the core: sheetfns but its spreadsheet faces (sheetfns.udf, whose package imports
    # the xlwings face)
    res = run_python("""
        import importlib, sys, json
        from pathlib import Path
        import sheetfns
        root = Path(sheetfns.__file__).parent
        found = [(p.relative_to(root.parent).with_suffix("").parts) for p in sorted(root.rglob("*.py"))]
        names = [".".join(parts[:-1] if parts[-1] == "__init__" else parts) for parts in found]
        names = [n for n in names if n != "sheetfns.udf" and not n.startswith("sheetfns.udf.")]
        for name in names:
            importlib.import_module(name)
        print(json.dumps({"modules": names,
                          "loaded": sorted(k for k in ("xlwings", "watchdog") if k in sys.modules)}))
    """)
    assert res.returncode == 0, res.stderr
    out = json.loads(res.stdout)
    assert {"sheetfns.events", "sheetfns.scores", "sheetfns.scorecard", "sheetfns._logit.rolling"} <= set(
        out["modules"])
    assert out["loaded"] == []


def test_udf_without_xlwings_gives_the_plain_functions_and_the_excel_face_a_clear_message():
    # Inside LibreOffice there is no xlwings: the package and its plain functions must still import
    # (the Calc add-in calls them); only the xlwings face asks for xlwings.
    res = run_python("""
        import sys
        sys.modules["xlwings"] = None          # as if xlwings were not installed
        import sheetfns.udf, sheetfns.udf.functions
        print(sheetfns.udf.EVENT_FLAG is sheetfns.udf.functions.EVENT_FLAG)
        print(sheetfns.udf.EVENT_CUTOFF(1.0, 4.0))
        try:
            import sheetfns.udf.excel
        except ImportError as exc:
            print(exc)
    """)
    assert res.returncode == 0, res.stderr
    lines = res.stdout.splitlines()
    assert lines[:2] == ["True", "0.2"]
    assert "needs xlwings" in lines[2] and "pip install 'tocsin[excel]'" in lines[2]


# xlwings' Windows decorators (xlwings/udfs.py) import pythoncom, pywintypes and win32com; stubbing
# those three lets us run its real xlfunc / xlarg / xlret and its VBA generator here.
REGISTRATION = """
    import io, json, sys, types
    for name in ("pythoncom", "pywintypes", "win32com", "win32com.client"):
        sys.modules[name] = types.ModuleType(name)
    sys.modules["pythoncom"].CoInitialize = lambda: None
    sys.modules["pywintypes"].com_error = Exception
    sys.modules["win32com.client"].Dispatch = lambda *a: None
    import xlwings, xlwings.udfs as xu
    from xlwings.conversion import accessors
    xlwings.func, xlwings.arg, xlwings.ret = xu.xlfunc, xu.xlarg, xu.xlret
    import sheetfns.udf as U

    class Book:
        Name = "formulas_demo.xlsx"

    vba = io.StringIO()
    xu.generate_vba_wrapper("sheetfns.udf", U, vba, Book())
    out = {"vba": vba.getvalue(), "funcs": {}}
    for name in dir(U):
        f = getattr(U, name)
        if hasattr(f, "__xlfunc__"):
            x = f.__xlfunc__
            out["funcs"][name] = {
                "doc": x["ret"]["doc"], "category": x["category"],
                "args": [{"name": a["name"], "doc": a["doc"], "optional": "optional" in a,
                          "default": repr(a.get("optional")),
                          "convert_ok": a["options"].get("convert") in accessors,
                          "ndim": a["options"].get("ndim")} for a in x["args"]],
                "ret_convert_ok": x["ret"]["options"].get("convert") in accessors}
    print(json.dumps(out))
"""


@pytest.fixture(scope="module")
def registration():
    res = run_python(REGISTRATION)
    assert res.returncode == 0, res.stderr
    return json.loads(res.stdout)


def test_registration_matches_design_signatures(registration):
    funcs = registration["funcs"]
    assert set(funcs) == set(WIRED)
    for name in WIRED:
        info = funcs[name]
        shown = ", ".join(f"[{a['name']}]" if a["optional"] else a["name"] for a in info["args"])
        assert shown == SIGNATURES[name], name
        assert info["category"] == "tocsin"
        assert len(info["doc"]) <= 255, f"{name}: the wizard shows only 255 characters"
        assert "Example: =" + name + "(" in info["doc"]
        assert info["ret_convert_ok"]
        for a in info["args"]:
            assert not a["doc"].startswith("Positional argument"), f"{name}({a['name']}) has no doc"
            assert len(a["doc"]) <= 255
            assert a["convert_ok"], f"{name}({a['name']}): its type hint is not a plain value converter"
            assert a["doc"].startswith("Optional") == a["optional"], f"{name}({a['name']})"
        # the VBA wrapper xlwings would write into the workbook
        vba_args = ", ".join(("Optional " if a["optional"] else "") + a["name"] for a in info["args"])
        assert f"Function {name}({vba_args})" in registration["vba"]


def test_range_arguments_arrive_as_lists_of_rows(registration):
    # ndim=2 makes the desktop hand over every range as rows, so a row range can be told from a column
    scalar_args = {"criterion", "min_run", "horizon", "season", "train_rows", "window", "lags", "cycle",
                   "harmonics", "by", "cost_false_alarm", "cost_miss"}
    for name, info in registration["funcs"].items():
        for a in info["args"]:
            assert (a["ndim"] == 2) == (a["name"] not in scalar_args), f"{name}({a['name']})"


# ---------------------------------------------------------------- happy paths against the core
def test_event_flag_equals_core(data):
    got = column(U.EVENT_FLAG(cells(data["values"]), ">=1150"))
    np.testing.assert_array_equal(got, events.flag(data["values"], ">=1150"))
    got = column(U.EVENT_FLAG(cells(data["values"]), "rise%>=5", 2.0))
    np.testing.assert_array_equal(got, events.flag(data["values"], "rise%>=5", min_run=2))


def test_event_flag_text_bools_and_numbers_as_text():
    log = [["ok"], ["ALARM"], [None], ["alarm "], [True], ["12"]]
    # text compares case-insensitively, trimmed; a blank stays unknown; TRUE and 12 are not the text
    np.testing.assert_array_equal(column(U.EVENT_FLAG(log, "=alarm")), [0, 1, np.nan, 1, 0, 0])
    np.testing.assert_array_equal(column(U.EVENT_FLAG(log, "=alarm")),
                                  events.flag(["ok", "ALARM", None, "alarm ", True, 12.0], "=alarm"))
    # a bare number as criterion means equality (OpenFormula criteria); "12" stored as text is 12
    np.testing.assert_array_equal(column(U.EVENT_FLAG([[12.0], ["12"], [3.0]], 12)), [1.0, 1.0, 0.0])


def test_event_flag_column_has_the_input_height_and_single_cell_works():
    assert U.EVENT_FLAG(1200.0, ">=1150") == [[1.0]]
    assert U.EVENT_FLAG([[1200.0]], ">=1150") == [[1.0]]
    assert len(U.EVENT_FLAG([[None]] * 5 + [[3.0]], ">0")) == 6


@pytest.mark.parametrize("horizon, season, train_rows", [(1, 1, None), (3, 1, None), (1, 7, None),
                                                         (2, 7, 300), (None, None, 250.0)])
def test_event_naive_equals_core(data, horizon, season, train_rows):
    a = data["actual"].copy()
    a[-5:] = np.nan                                   # future periods
    got = column(U.EVENT_NAIVE(cells(a), horizon, season, train_rows))
    expected = benchmarks.naive(a, horizon=horizon or 1, season=season or 1,
                                train_size=None if train_rows is None else int(train_rows))
    np.testing.assert_array_equal(got, expected)


@pytest.mark.parametrize("window, train_rows, horizon", [(None, None, 1), (28, None, 1), (None, 300, 1),
                                                         (10, 250, 4)])
def test_event_majority_and_share_equal_core(data, window, train_rows, horizon):
    a = data["actual"].copy()
    a[-5:] = np.nan
    kw = {"window": window, "train_size": train_rows, "horizon": horizon}
    np.testing.assert_array_equal(column(U.EVENT_MAJORITY(cells(a), window, train_rows, horizon)),
                                  benchmarks.majority_vote(a, **kw))
    got = column(U.EVENT_SHARE(cells(a), window, train_rows, horizon))
    np.testing.assert_allclose(got, benchmarks.majority_share(a, **kw), rtol=0, atol=1e-12)


def test_benchmarks_accept_true_false_cells_and_omitted_middle_arguments():
    log = [[True], [False], [True], [True], [None]]
    assert U.EVENT_MAJORITY(log, None, None) == U.EVENT_MAJORITY([[1.0], [0.0], [1.0], [1.0], [None]])
    assert U.EVENT_NAIVE(log, None, None, 3.0) == [[None], [1.0], [0.0], [1.0], [1.0]]


@pytest.fixture(scope="module")
def logit_data():
    rng = np.random.default_rng(11)   # invented data with a real effect of the predictor
    n = 360
    temp = rng.standard_normal(n + 3)
    y = np.full(n + 3, np.nan)
    y[1:n] = (rng.random(n - 1) < 1 / (1 + np.exp(0.3 - 1.2 * temp[: n - 1]))).astype(float)
    y[0] = 0.0
    return y, temp


@pytest.mark.parametrize("train_rows, horizon, lags, cycle, harmonics", [
    (300, 1, 1, None, 2), (None, 1, 2, None, 2), (300, 2, 1, 30.0, 1)])
def test_event_logit_and_coefs_equal_core(logit_data, train_rows, horizon, lags, cycle, harmonics):
    y, temp = logit_data
    pred = [["temp"]] + cells(temp)
    got = column(U.EVENT_LOGIT(cells(y), pred, train_rows, horizon, lags, cycle, harmonics))
    fc = logistic.forecast(y, predictors={"temp": temp}, train_size=train_rows, horizon=horizon, lags=lags,
                           cycle=cycle, harmonics=harmonics)
    np.testing.assert_allclose(got, fc.prob, rtol=0, atol=1e-12)
    assert np.isnan(got).tolist() == np.isnan(fc.prob).tolist()
    out = U.EVENT_LOGIT_COEFS(cells(y), pred, train_rows, horizon, lags, cycle, harmonics)
    assert out[0] == ["term", "estimate", "std_error", "z", "p"]
    t = fc.coefficients
    k = len(t)
    assert [r[0] for r in out[1:k + 1]] == list(t["term"])
    np.testing.assert_allclose([r[1:] for r in out[1:k + 1]],
                               t[["estimate", "std_error", "z", "p"]].to_numpy(), rtol=0, atol=1e-12)
    assert [r[0] for r in out[k + 1:]] == [f"note: {n}" for n in fc.notes]


@pytest.mark.parametrize("step_days, weekday", [(1, True), (7, False)])
def test_event_logit_with_dates_equals_core(logit_data, step_days, weekday):
    import datetime as dt

    y, temp = logit_data
    dates = [dt.date(2020, 1, 1) + dt.timedelta(days=step_days * i) for i in range(y.size)]
    got = column(U.EVENT_LOGIT(cells(y), cells(temp), 300, 1, 1, 365.25 / step_days, 2,
                               [[d] for d in dates]))
    fc = logistic.forecast(y, predictors={"predictors 1": temp}, dates=dates, weekday=weekday,
                           train_size=300, cycle=365.25 / step_days, harmonics=2)
    np.testing.assert_allclose(got, fc.prob, rtol=0, atol=1e-12)
    terms = [r[0] for r in U.EVENT_LOGIT_COEFS(cells(y), cells(temp), 300, 1, 1, 365.25 / step_days, 2,
                                                [[d] for d in dates])[1:]]
    assert ("Tuesday" in terms) is weekday        # daily data get weekday terms, as on the watcher's sheet
    assert U.EVENT_LOGIT(cells(y), None, 300, 1, 1, None, 2, [[d] for d in dates[:-1]]).startswith(
        "#tocsin: inputs must have the same length; `events` has")


def test_event_logit_coefs_against_statsmodels(logit_data):
    import statsmodels.api as sm

    # a fixed fit on the first 300 rows: y[t] on a constant, y[t-1] and temp[t-1], t = 1..299
    y, temp = logit_data
    out = U.EVENT_LOGIT_COEFS(cells(y), cells(temp), 300)
    rows = {r[0]: r[1:] for r in out[1:] if not r[0].startswith("note")}
    t = np.arange(1, 300)
    X = np.column_stack([np.ones(t.size), y[t - 1], temp[t - 1]])
    ref = sm.Logit(y[t], X).fit(disp=0)
    got = np.array([rows[name] for name in ("constant", "event t-1", "predictors 1")])
    np.testing.assert_allclose(got[:, 0], ref.params, rtol=1e-7)
    np.testing.assert_allclose(got[:, 1], ref.bse, rtol=1e-6)


def test_event_logit_predictor_errors(logit_data):
    y, temp = logit_data
    assert U.EVENT_LOGIT(cells(y), cells(temp)[:-1]) == (
        f"#tocsin: `predictors` must cover the same rows as the events; the events have {y.size} rows, "
        f"`predictors` has {y.size - 1}")
    # too few rows for any fit: the notes say why instead of a column of blanks
    assert U.EVENT_LOGIT(cells(y[:8])) == (
        "#tocsin: no row could be forecast: rows 1-8 have no forecast: a roll-forward fit needs at least "
        "30 usable rows (10 per term, at least 30) observed by its origin; roll-forward: refitted at every "
        "origin on all usable rows observed by the origin (expanding window)")
    assert U.EVENT_LOGIT([[1.0]]).startswith("#tocsin: `events` must have at least 2 rows")


@pytest.mark.parametrize("by", [None, "month", "week", "weekday", "quarter"])
def test_event_rate_table_equals_core(data, by):
    import datetime as dt

    dates = [dt.date(2021, 11, 1) + dt.timedelta(days=i) for i in range(data["actual"].size)]
    out = U.EVENT_RATE_TABLE([[d] for d in dates], cells(data["actual"]), by)
    t = profile.rate_table(dates, data["actual"], by=by or "month")
    assert out[0] == [t.index.name, *t.columns]
    assert [r[0] for r in out[1:]] == list(t.index)
    np.testing.assert_allclose(np.array([[np.nan if v is None else v for v in r[1:]] for r in out[1:]],
                                        dtype=float), t.to_numpy(dtype=float), rtol=0, atol=1e-12)


def test_event_rate_table_dates_as_serial_numbers_and_errors(data):
    import datetime as dt

    from openpyxl.utils.datetime import to_excel

    dates = [dt.date(2021, 11, 1) + dt.timedelta(days=i) for i in range(data["actual"].size)]
    serials = [[float(to_excel(d))] for d in dates]            # a date column formatted as numbers
    assert U.EVENT_RATE_TABLE(serials, cells(data["actual"])) == \
        U.EVENT_RATE_TABLE([[d] for d in dates], cells(data["actual"]))
    assert U.EVENT_RATE_TABLE([[d] for d in dates[:-1]], cells(data["actual"])).startswith(
        "#tocsin: inputs must have the same length; `dates` has")
    assert U.EVENT_RATE_TABLE([[d] for d in dates], cells(data["actual"]), "fortnight") == (
        "#tocsin: `by` must be one of 'month', 'week', 'weekday', 'quarter'; got 'fortnight'")


def test_blank_text_from_another_function_is_a_blank(data):
    # The add-in writes a returned None as "" (xlwings/_xlwindows.py, prepare_xl_data_element), so a
    # range holding another function's blanks arrives as "" cells; they must read as blanks.
    flags = U.EVENT_FLAG(cells(data["values"]), ">=1150")
    as_written = [["" if r[0] is None else r[0]] for r in flags]
    assert U.EVENT_NAIVE(as_written, 1, 7) == U.EVENT_NAIVE(flags, 1, 7)
    assert U.EVENT_SHARE(as_written) == U.EVENT_SHARE(flags)
    assert U.EVENT_FLAG(as_written, "=1") == U.EVENT_FLAG(flags, "=1")


def test_event_scores_equal_core_and_sklearn(data):
    from sklearn.metrics import brier_score_loss, confusion_matrix, roc_auc_score

    a, f, p = data["actual"], data["forecast"], data["prob"]
    got = table(U.EVENT_SCORES(cells(a), cells(f), cells(p)))
    expected = {**scores.categorical(a, f), **scores.probabilistic(a, p)}
    assert list(got) == list(expected)
    np.testing.assert_allclose([got[k] for k in expected], list(expected.values()), rtol=0, atol=1e-12)
    # outside reference: scikit-learn on the scored (non-blank) rows
    keep = ~np.isnan(a)
    tn, fp, fn, tp = confusion_matrix(a[keep], f[keep], labels=[0, 1]).ravel()
    assert (got["hits"], got["false_alarms"], got["misses"], got["correct_negatives"]) == (tp, fp, fn, tn)
    assert abs(got["brier"] - brier_score_loss(a[keep], p[keep])) < 1e-12
    assert abs(got["roc_auc"] - roc_auc_score(a[keep], p[keep])) < 1e-12
    # without the probability: the categorical scores only
    assert list(table(U.EVENT_SCORES(cells(a), cells(f)))) == list(scores.categorical(a, f))
    assert list(table(U.EVENT_SCORES(cells(a), cells(f), [[None]]))) == list(scores.categorical(a, f))


def test_event_scores_reference(data):
    a, f, p = data["actual"], data["forecast"], data["prob"]
    share = benchmarks.majority_share(a, train_size=100)
    got = table(U.EVENT_SCORES(cells(a), cells(f), cells(p), cells(share)))
    assert got["brier_skill"] == scores.probabilistic(a, p, reference=share)["brier_skill"]
    got = table(U.EVENT_SCORES(cells(a), cells(f), cells(p), 0.25))
    assert got["brier_skill"] == scores.probabilistic(a, p, reference=0.25)["brier_skill"]
    assert U.EVENT_SCORES(cells(a), cells(f), None, 0.25).startswith("#tocsin: `reference` needs")


def test_event_confusion_layout_and_counts(data):
    a, f = data["actual"], data["forecast"]
    out = U.EVENT_CONFUSION(cells(a), cells(f))
    t = scores.confusion(a, f)
    assert out == [["forecast \\ actual", "event", "no event"],
                   ["event", t.hits, t.false_alarms],
                   ["no event", t.misses, t.correct_negatives]]


def test_event_brier_equals_core(data):
    a, p = data["actual"], data["prob"]
    got = table(U.EVENT_BRIER(cells(a), cells(p)))
    d = scores.brier_decomposition(a, p)
    for k in ("brier", "reliability", "resolution", "uncertainty", "n"):
        assert abs(got[k] - d[k]) <= 1e-12, k


def test_event_cutoff():
    # cost/loss ratio C_FA / (C_FA + C_miss): 1 / (1 + 4) = 0.2 (Murphy 1977, Mon. Wea. Rev. 105)
    assert U.EVENT_CUTOFF(1.0, 4.0) == 1 / (1 + 4)
    assert U.EVENT_CUTOFF("3", [[1.0]]) == 3 / (3 + 1)
    assert U.EVENT_CUTOFF(None, 4.0).startswith("#tocsin: `cost_false_alarm` is required")
    assert U.EVENT_CUTOFF(-1.0, 4.0).startswith("#tocsin: `cost_false_alarm` must be a cost")


def test_event_compare_equals_core_and_statsmodels(data):
    from statsmodels.stats.contingency_tables import mcnemar

    a, fa, fb = data["actual"], data["forecast"], data["forecast_b"]
    got = table(U.EVENT_COMPARE(cells(a), cells(fa), cells(fb)))
    stat, pvalue = scores.mcnemar(a, fa, fb)
    assert abs(got["statistic"] - stat) <= 1e-12 and abs(got["p_value"] - pvalue) <= 1e-12
    # outside reference: statsmodels' chi-square McNemar with continuity correction
    keep = ~np.isnan(a)
    ra, rb = fa[keep] == a[keep], fb[keep] == a[keep]
    tab = [[np.sum(ra & rb), np.sum(ra & ~rb)], [np.sum(~ra & rb), np.sum(~ra & ~rb)]]
    ref = mcnemar(tab, exact=False, correction=True)
    assert abs(got["statistic"] - ref.statistic) < 1e-12 and abs(got["p_value"] - ref.pvalue) < 1e-12


# ---------------------------------------------------------------- bad input: a message, never a raise
def test_criterion_typo():
    assert U.EVENT_FLAG([[1.0], [2.0]], "rise>=x") == \
        "#tocsin: criterion 'rise>=x': expected a number after '>='; got 'x'"
    assert U.EVENT_FLAG([[1.0], [2.0]], None).startswith("#tocsin: `criterion` is required")


def test_mixed_length_ranges(data):
    a, f = cells(data["actual"]), cells(data["forecast"])
    out = U.EVENT_SCORES(a, f[:-3])
    assert out == f"#tocsin: inputs must have the same length; `actual` has {len(a)}, `forecast` has " \
                  f"{len(a) - 3} rows"
    assert U.EVENT_COMPARE(a, f, f[:10]).startswith("#tocsin: inputs must have the same length")
    assert U.EVENT_BRIER(a, cells(data["prob"])[1:]).startswith("#tocsin: inputs must have the same")


def test_row_range_where_a_column_is_expected():
    out = U.EVENT_FLAG([[1100.0, 1200.0, 1300.0]], ">=1150")
    assert out == ("#tocsin: `values` must be a single column (one cell per period, top to bottom); "
                   "got a row of 3 cells: select the cells down a column instead")
    assert U.EVENT_CONFUSION([[1.0, 0.0]], [[1.0, 0.0]]).startswith("#tocsin: `actual` must be a single")


def test_too_few_rows():
    assert U.EVENT_NAIVE([[1.0]]) == "#tocsin: `events` must have at least 2 rows; got 1"
    assert U.EVENT_SHARE([[None], [None]]) == \
        "#tocsin: `events` has no observed values (all 2 rows are blank)"
    # the core's names are given their spreadsheet names: train_size -> train_rows
    assert U.EVENT_NAIVE([[1.0], [0.0], [1.0]], 1, 1, 5) == \
        "#tocsin: `train_rows` must be at most the number of observed rows (3); got 5"
    assert U.EVENT_MAJORITY([[1.0], [0.0], [1.0]], 9).startswith("#tocsin: `window` must be at most")


def test_wrong_values_name_the_argument_and_row():
    assert U.EVENT_SCORES([[1.0], [0.4]], [[1.0], [0.0]]) == (
        "#tocsin: `actual` must hold events: 1 (event), 0 (no event), TRUE, FALSE or blank; got 0.4 in "
        "row 2 of the range")
    assert U.EVENT_FLAG([[1.0], [None], ["1,5"]], "rise") == [[None], [None], [None]]  # text: missing


_garbage = st.recursive(
    st.one_of(st.none(), st.booleans(), st.floats(), st.integers(-5, 5), st.text(max_size=6),
              st.sampled_from([">=1", "rise", "=a", "", "month", [[1.0], [0.0]], [[1.0, 0.0]]])),
    lambda inner: st.lists(inner, max_size=4), max_leaves=8)


@pytest.mark.parametrize("name", WIRED)
@settings(max_examples=60, deadline=None)
@given(args=st.lists(_garbage, min_size=7, max_size=7), drop=st.integers(0, 7))
def test_any_input_gives_a_value_or_a_message(name, args, drop):
    total = len(SIGNATURES[name].split(", "))
    required = total - SIGNATURES[name].count("[")
    n = max(required, total - drop)        # optional arguments may be left out, from the right
    out = getattr(U, name)(*args[:n])
    if isinstance(out, str):
        assert out.startswith("#tocsin: ")
        assert "unexpected error" not in out, out
    else:
        assert isinstance(out, (list, float)), out


def test_every_design_function_is_defined_and_exported():
    assert WIRED == list(SIGNATURES)
    assert sorted(U.__all__) == sorted(SIGNATURES)
