"""Registry-driven property tests of the scores: every key present and documented, order invariance,
input types, NaN rows, perfect forecasts, documented ranges, zero denominators.

The data here are invented (hypothesis and seeded generators); the expected behaviour is the
documented contract of sheetfns.scores (DESIGN.md section 4) and common practice.
"""
from __future__ import annotations

import math
import subprocess
import sys
import warnings

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetfns import scores

# DESIGN.md section 4, copied verbatim: the binding list of score keys.
DESIGN_CATEGORICAL = """n, events, hits, false_alarms, misses, correct_negatives,
accuracy, error_rate, sensitivity, specificity, precision, false_alarm_ratio, false_alarm_rate,
critical_success_index, frequency_bias, f1, balanced_accuracy, heidke_skill, peirce_skill,
gilbert_skill, odds_ratio, odds_ratio_skill, matthews"""
DESIGN_PROBABILISTIC = "brier, brier_skill, log_loss, roc_auc, reliability, resolution, uncertainty"


def _keys(text: str) -> tuple[str, ...]:
    return tuple(k.strip() for k in text.replace("\n", " ").split(","))


def _quiet(fn, *args, **kwargs):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", scores.UndefinedScoreWarning)
        return fn(*args, **kwargs)


def _same(x: dict, y: dict, rel: float = 1e-12) -> bool:
    assert x.keys() == y.keys()
    for k in x:
        a, b = x[k], y[k]
        if math.isnan(a) or math.isnan(b):
            assert math.isnan(a) and math.isnan(b), k
        else:
            assert a == pytest.approx(b, rel=rel, abs=1e-14), k
    return True


# --- the key guard -------------------------------------------------------------------------------
def test_every_design_key_is_produced_and_registered():
    rng = np.random.default_rng(0)
    a = (rng.random(50) < 0.4).astype(float)
    f = (rng.random(50) < 0.4).astype(float)
    p = rng.random(50)
    assert tuple(scores.categorical(a, f)) == _keys(DESIGN_CATEGORICAL) == scores.CATEGORICAL_KEYS
    assert tuple(scores.probabilistic(a, p)) == _keys(DESIGN_PROBABILISTIC) == scores.PROBABILISTIC_KEYS
    assert tuple(scores.SCORE_INFO) == scores.SCORE_KEYS == _keys(DESIGN_CATEGORICAL) + _keys(
        DESIGN_PROBABILISTIC)
    assert tuple(scores.from_counts(1, 2, 3, 4)) == scores.CATEGORICAL_KEYS


def test_every_key_is_documented_with_formula_and_reference():
    doc = scores.from_counts.__doc__ + scores.probabilistic.__doc__
    for key in scores.SCORE_KEYS:
        assert f"``{key}``" in doc, f"{key} is not documented"
    for fn in (scores.from_counts, scores.probabilistic, scores.brier_decomposition,
               scores.roc_points, scores.mcnemar, scores.diebold_mariano, scores.wilson,
               scores.cost_cutoff):
        assert "References" in fn.__doc__ and "Returns" in fn.__doc__, fn.__name__


def test_registry_entries_are_consistent():
    for info in scores.SCORE_INFO.values():
        assert info.low <= info.high
        for v in (info.perfect, info.no_skill):
            assert v is None or info.low <= v <= info.high, info.key
        assert (info.kind == "count") == (info.orientation is None and info.key not in
                                          ("uncertainty",)), info.key


def test_importing_scores_pulls_in_neither_pandas_nor_scipy():
    code = ("import sys, sheetfns.scores; "
            "print(sorted(m for m in ('pandas', 'scipy', 'sklearn', 'xlwings', 'watchdog') "
            "if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


# --- strategies -----------------------------------------------------------------------------------
rows = st.lists(
    st.tuples(st.sampled_from([0.0, 1.0]), st.sampled_from([0.0, 1.0]),
              st.floats(0.0, 1.0, allow_nan=False).map(lambda x: round(x, 3))),
    min_size=1, max_size=60)


def _split(r):
    arr = np.array(r, dtype=float)
    return arr[:, 0], arr[:, 1], arr[:, 2]


@settings(max_examples=60, deadline=None)
@given(rows, st.randoms(use_true_random=False))
def test_scores_do_not_depend_on_row_order(r, rnd):
    a, f, p = _split(r)
    order = list(range(len(a)))
    rnd.shuffle(order)
    _same(_quiet(scores.categorical, a, f), _quiet(scores.categorical, a[order], f[order]))
    _same(_quiet(scores.probabilistic, a, p), _quiet(scores.probabilistic, a[order], p[order]),
          rel=1e-9)
    assert scores.confusion(a, f) == scores.confusion(a[order], f[order])


@settings(max_examples=60, deadline=None)
@given(rows)
def test_every_score_within_its_documented_range(r):
    a, f, p = _split(r)
    got = {**_quiet(scores.categorical, a, f), **_quiet(scores.probabilistic, a, p)}
    for key, value in got.items():
        info = scores.SCORE_INFO[key]
        if not math.isnan(value):
            assert info.low - 1e-12 <= value <= info.high + 1e-12, (key, value)


@settings(max_examples=60, deadline=None)
@given(rows)
def test_identities_between_scores(r):
    # Common practice (Wilks 2011, 8.2; Roebber 2009, Weather and Forecasting 24, for the bias
    # identity of the performance diagram): PSS = POD - POFD, bias = POD / (1 - FAR),
    # ORSS = (OR - 1) / (OR + 1), error rate = 1 - accuracy.
    a, f, _ = _split(r)
    s = _quiet(scores.categorical, a, f)
    if not math.isnan(s["peirce_skill"]):
        assert s["peirce_skill"] == pytest.approx(s["sensitivity"] - s["false_alarm_rate"], abs=1e-12)
    if s["hits"] > 0:
        assert s["frequency_bias"] == pytest.approx(s["sensitivity"] / (1 - s["false_alarm_ratio"]))
    if not math.isnan(s["odds_ratio"]):
        orr = s["odds_ratio"]
        assert s["odds_ratio_skill"] == pytest.approx((orr - 1) / (orr + 1), abs=1e-12)
    assert s["error_rate"] == pytest.approx(1 - s["accuracy"], abs=1e-12)


def test_list_array_series_inputs_agree():
    rng = np.random.default_rng(7)
    a = (rng.random(80) < 0.35).astype(float)
    f = (rng.random(80) < 0.35).astype(float)
    p = rng.random(80)
    a[5] = f[9] = p[13] = np.nan
    base_c = scores.categorical(a, f)
    base_p = scores.probabilistic(a, p)
    as_list = [None if np.isnan(v) else v for v in a]  # blanks as None, as from a sheet
    variants = [
        (as_list, [None if np.isnan(v) else bool(v) for v in f], p.tolist()),
        (pd.Series(a), pd.Series(f), pd.Series(p)),
        (a.reshape(-1, 1), f.reshape(1, -1), p.reshape(-1, 1)),  # a spreadsheet column or row
    ]
    for va, vf, vp in variants:
        assert _same(scores.categorical(va, vf), base_c)
        assert _same(scores.probabilistic(va, vp), base_p)
    assert scores.diebold_mariano(list(a), pd.Series(p), p[::-1].copy()) == scores.diebold_mariano(
        a, p, p[::-1].copy())


def test_nan_rows_are_skipped():
    rng = np.random.default_rng(8)
    a = (rng.random(100) < 0.4).astype(float)
    f = (rng.random(100) < 0.4).astype(float)
    p, p2 = rng.random(100), rng.random(100)
    insert = np.sort(rng.choice(130, 30, replace=False))

    def pad(x, which):
        out = np.full(130, np.nan)
        mask = np.ones(130, bool)
        mask[insert] = False
        out[mask] = x
        if which:  # the NaN rows carry junk in the other series: still skipped
            out[insert] = 1.0
        return out

    assert _same(scores.categorical(pad(a, 0), pad(f, 1)), scores.categorical(a, f))
    assert _same(scores.probabilistic(pad(a, 1), pad(p, 0)), scores.probabilistic(a, p))
    assert _same(scores.probabilistic(pad(a, 0), pad(p, 1), pad(p2, 1)),
                 scores.probabilistic(a, p, p2))
    assert scores.mcnemar(pad(a, 0), pad(f, 1), pad(1 - f, 1)) == scores.mcnemar(a, f, 1 - f)
    assert scores.diebold_mariano(pad(a, 1), pad(p, 0), pad(p2, 1)) == pytest.approx(
        scores.diebold_mariano(a, p, p2))


def test_perfect_forecast_gets_the_documented_best_value():
    rng = np.random.default_rng(9)
    a = (rng.random(200) < 0.3).astype(float)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        got = {**scores.categorical(a, a), **scores.probabilistic(a, a)}
    for key, info in scores.SCORE_INFO.items():
        if info.perfect is not None:
            assert got[key] == pytest.approx(info.perfect, abs=1e-12), key
    # Perfect but undefined: the odds ratio is ad / 0 (NaN by the zero-denominator rule), and the
    # warning says so; resolution of a perfect forecast equals the uncertainty.
    assert math.isnan(got["odds_ratio"])
    assert [str(w.message) for w in caught] == [
        "undefined for these data (zero denominator), set to NaN: odds_ratio"]
    assert got["resolution"] == pytest.approx(got["uncertainty"], rel=1e-12)


def test_well_defined_data_raise_no_warning():
    rng = np.random.default_rng(10)
    a = (rng.random(300) < 0.3).astype(float)
    f = np.where(rng.random(300) < 0.8, a, 1 - a)
    p = rng.random(300)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        scores.categorical(a, f)
        scores.probabilistic(a, p, reference=0.3)
        scores.brier_decomposition(a, p)
        scores.roc_points(a, p)
        scores.mcnemar(a, f, 1 - f)
        scores.diebold_mariano(a, p, f, horizon=2)
        scores.wilson_intervals(*scores.confusion(a, f))


# --- zero denominators: NaN and a warning, never an exception -------------------------------------
# (counts, the scores that must be NaN): each case empties one denominator (common practice).
ZERO_DENOMINATORS = [
    ((0, 0, 0, 0), set(scores.CATEGORICAL_KEYS) - {"n", "events", "hits", "false_alarms", "misses",
                                                     "correct_negatives"}),
    ((0, 0, 5, 10), {"precision", "false_alarm_ratio", "odds_ratio", "odds_ratio_skill", "matthews"}),
    ((0, 4, 0, 10), {"sensitivity", "frequency_bias", "balanced_accuracy", "peirce_skill",
                     "odds_ratio", "odds_ratio_skill", "matthews"}),
    # No non-event at all: Heidke and Gilbert stay defined (both 0: no skill can be shown).
    ((3, 0, 2, 0), {"specificity", "false_alarm_rate", "balanced_accuracy", "peirce_skill",
                    "odds_ratio", "odds_ratio_skill", "matthews"}),
    ((0, 0, 0, 9), {"sensitivity", "precision", "false_alarm_ratio", "critical_success_index",
                    "frequency_bias", "f1", "balanced_accuracy", "heidke_skill", "peirce_skill",
                    "gilbert_skill", "odds_ratio", "odds_ratio_skill", "matthews"}),
    ((2, 3, 4, 5), set()),
]


@pytest.mark.parametrize("counts,undefined", ZERO_DENOMINATORS)
def test_zero_denominator_gives_nan_and_one_warning(counts, undefined):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        got = scores.from_counts(*counts)
    assert {k for k, v in got.items() if math.isnan(v)} == undefined
    relevant = [w for w in caught if issubclass(w.category, scores.UndefinedScoreWarning)]
    assert len(relevant) == (1 if undefined else 0)
    if undefined:
        assert issubclass(relevant[0].category, RuntimeWarning)
        named = str(relevant[0].message).split(": ", 1)[1].split(", ")
        assert set(named) == undefined


@pytest.mark.parametrize("call,match", [
    (lambda: scores.probabilistic([1, 1, 1], [0.2, 0.5, 0.9]), "roc_auc"),
    (lambda: scores.probabilistic([0, 0, 0], [0.2, 0.5, 0.9]), "brier_skill"),  # climatology BS 0
    (lambda: scores.probabilistic([1, 0], [0.2, 0.5], reference=[1, 0]), "brier_skill"),
    (lambda: scores.probabilistic([np.nan, 1], [0.5, np.nan]), "brier"),
    (lambda: scores.brier_decomposition([np.nan], [0.5]), "reliability"),
    (lambda: scores.roc_points([0, 0], [0.2, 0.4]), "hit_rate"),
    (lambda: scores.mcnemar([1, 0, 1], [1, 0, 0], [1, 0, 0]), "mcnemar"),
    (lambda: scores.diebold_mariano([1, 0, 1], [0.5, 0.5, 0.5], [0.5, 0.5, 0.5]), "diebold"),
    (lambda: scores.diebold_mariano([1, np.nan], [0.5, 0.5], [0.2, 0.5]), "diebold"),
    (lambda: scores.wilson(0, 0), "wilson"),
    (lambda: scores.wilson_intervals(0, 0, 3, 4), "precision"),
    (lambda: scores.expected_cost((0, 0, 0, 0), 1, 1), "expected_cost"),
])
def test_undefined_results_warn_and_return_nan(call, match):
    with pytest.warns(scores.UndefinedScoreWarning, match=match):
        out = call()
    assert any(math.isnan(v) for v in _floats(out))


def _floats(out) -> list[float]:
    """Every float inside a result (dict, tuple, RocPoints, DataFrame cells excluded)."""
    if isinstance(out, float):
        return [out]
    if isinstance(out, dict):
        return [v for x in out.values() for v in _floats(x)]
    if isinstance(out, np.ndarray):
        return [float(v) for v in out]
    if isinstance(out, tuple):
        return [v for x in out for v in _floats(x)]
    return []


def test_all_nan_rows_give_zero_counts_and_nan_scores():
    nan = float("nan")
    assert scores.confusion([nan, nan], [1, 0]) == (0, 0, 0, 0)
    with pytest.warns(scores.UndefinedScoreWarning):
        s = scores.categorical([nan, nan], [1, 0])
    assert s["n"] == 0 and math.isnan(s["accuracy"])


def test_docstring_examples_run():
    import doctest

    from sheetfns._scoring import categorical as _categorical
    from sheetfns._scoring import probabilistic as _probabilistic
    from sheetfns._scoring import significance as _significance
    for module in (_categorical, _probabilistic, _significance):
        result = doctest.testmod(module, extraglobs={"np": np}, optionflags=doctest.ELLIPSIS)
        assert result.failed == 0, module.__name__
    assert doctest.testmod(_categorical).attempted >= 4


def test_perfect_forecast_log_loss_is_positive_zero():
    # common practice: the logarithmic score's range is [0, inf); a perfect forecast printed "-0.000"
    out = scores.probabilistic(np.array([1.0, 0.0, 1.0]), np.array([1.0, 0.0, 1.0]))
    assert out["log_loss"] == 0.0 and math.copysign(1.0, out["log_loss"]) == 1.0
