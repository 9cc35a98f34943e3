"""The score registry (``sheetfns.scores.SCORE_INFO``) drives these checks: every score of DESIGN.md
section 4 has a definition whose docstring gives its formula, range, perfect value, no-skill value and
defining source; every perfect and no-skill value, those the registry holds as numbers and those that
depend on the data (written here as the textbook arithmetic), is what the code computes. A guard fails
when a score is left out.

The tables and series here are invented (hypothesis); the expected values are the definitions of the
scores (common practice: Wilks 2011, Statistical Methods in the Atmospheric Sciences, 3rd ed., 8.2 and
8.4; Murphy 1973, J. Appl. Meteor. 12, for the decomposition).
"""
from __future__ import annotations

import math
import re
import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetfns import scores

INFO = scores.SCORE_INFO


def _flat(text: str) -> str:
    return " ".join(text.split())


def _number(v: float) -> str:
    """A registry number as a docstring writes it, not followed by more digits (0 is not 0.5)."""
    return re.escape(f"{v:g}") + r"(?![.\d]*\d)"


# --- documentation ---------------------------------------------------------------------------------
COUNT_FORMULAS = {"n": "a + b + c + d", "events": "a + c", "hits": "Hits, a:", "false_alarms":
                  "False alarms, b:", "misses": "Misses, c:", "correct_negatives": "Correct negatives, d:"}
FIRST_REFERENCE = re.compile(r"\.\. \[1\] [^()]+ \((\d{4})\)\. .*?\*[^*]+\*")


@pytest.mark.parametrize("key", scores.SCORE_KEYS)
def test_every_score_has_its_own_documented_definition(key):
    info = INFO[key]
    assert info.definition.__name__ == key
    doc = _flat(info.definition.__doc__ or "")
    if info.kind == "count":
        assert COUNT_FORMULAS[key] in doc, "the count's formula"
    else:
        assert ".. math::" in doc, "the formula"
    assert re.search(r"\bRange [\[(]", doc), "the range"
    assert re.search(r"\bperfect\b", doc, re.I) and re.search(r"\bno skill\b", doc, re.I), "the values"
    if info.perfect is not None:
        assert re.search(r"\bperfect " + _number(info.perfect), doc, re.I), (key, info.perfect)
    if info.no_skill is not None:
        assert re.search(r"\bno skill " + _number(info.no_skill), doc, re.I), (key, info.no_skill)
    refs = doc.split("References", 1)
    assert len(refs) == 2, "a References section"
    first = FIRST_REFERENCE.search(refs[1])
    assert first and 1880 <= int(first.group(1)) <= 2030, "author, (year), title, *journal or book*"


def test_the_registry_covers_the_design_keys_and_nothing_else():
    assert tuple(INFO) == scores.SCORE_KEYS == scores.CATEGORICAL_KEYS + scores.PROBABILISTIC_KEYS
    assert len(set(scores.SCORE_KEYS)) == 30


# --- no skill: a 0/1 forecast issued independently of what happens -----------------------------------
# Its table is the outer product of the forecast totals and the outcome totals, so a = nqs exactly.
# Values that depend on the base rate s and the forecast rate q (the registry holds None for them):
NO_SKILL_OF_THE_DATA = {
    "n": lambda n, s, q: n,
    "events": lambda n, s, q: n * s,
    "hits": lambda n, s, q: n * q * s,
    "false_alarms": lambda n, s, q: n * q * (1 - s),
    "misses": lambda n, s, q: n * (1 - q) * s,
    "correct_negatives": lambda n, s, q: n * (1 - q) * (1 - s),
    "accuracy": lambda n, s, q: q * s + (1 - q) * (1 - s),
    "error_rate": lambda n, s, q: q * (1 - s) + (1 - q) * s,
    "sensitivity": lambda n, s, q: q,
    "specificity": lambda n, s, q: 1 - q,
    "precision": lambda n, s, q: s,
    "false_alarm_ratio": lambda n, s, q: 1 - s,
    "false_alarm_rate": lambda n, s, q: q,
    "critical_success_index": lambda n, s, q: q * s / (q + s - q * s),
    "frequency_bias": lambda n, s, q: q / s,
    "f1": lambda n, s, q: 2 * q * s / (q + s),
}


def test_no_skill_guard_every_categorical_score_has_a_no_skill_value():
    for key in scores.CATEGORICAL_KEYS:
        fixed = INFO[key].no_skill is not None
        assert fixed != (key in NO_SKILL_OF_THE_DATA), f"{key}: one no-skill value, in the registry or here"


@settings(max_examples=80, deadline=None)
@given(st.integers(1, 40), st.integers(1, 40), st.integers(1, 40), st.integers(1, 40))
def test_an_independent_forecast_scores_the_no_skill_values(f1, f0, o1, o0):
    a, b, c, d = f1 * o1, f1 * o0, f0 * o1, f0 * o0
    n, s, q = a + b + c + d, o1 / (o1 + o0), f1 / (f1 + f0)
    got = scores.from_counts(a, b, c, d)
    for key in scores.CATEGORICAL_KEYS:
        want = INFO[key].no_skill
        if want is None:
            want = NO_SKILL_OF_THE_DATA[key](n, s, q)
        assert got[key] == pytest.approx(want, rel=1e-12, abs=1e-12), key


# --- no skill: the climatological probability forecast (the base rate in every period) --------------
NO_SKILL_PROB_OF_THE_DATA = {
    "brier": lambda s: s * (1 - s),
    "log_loss": lambda s: -(s * math.log(s) + (1 - s) * math.log(1 - s)),
    "uncertainty": lambda s: s * (1 - s),
}


@settings(max_examples=60, deadline=None)
@given(st.lists(st.sampled_from([0.0, 1.0]), min_size=2, max_size=80).filter(lambda r: 0 < sum(r) < len(r)))
def test_the_climatological_forecast_scores_the_no_skill_values(rows):
    actual = np.array(rows)
    s = float(actual.mean())
    got = scores.probabilistic(actual, np.full(actual.size, s))
    for key in scores.PROBABILISTIC_KEYS:
        want = INFO[key].no_skill
        if want is None:
            assert key in NO_SKILL_PROB_OF_THE_DATA, f"{key}: no no-skill value in the registry or here"
            want = NO_SKILL_PROB_OF_THE_DATA[key](s)
        assert got[key] == pytest.approx(want, rel=1e-12, abs=1e-12), key


# --- perfect: the values that depend on the data, with a guard ---------------------------------------
PERFECT_OF_THE_DATA = {
    "n": lambda s: s["n"],
    "events": lambda s: s["events"],
    "hits": lambda s: s["events"],
    "correct_negatives": lambda s: s["n"] - s["events"],
    "odds_ratio": lambda s: math.nan,          # ad / 0: infinite, reported as undefined
    "resolution": lambda s: s["uncertainty"],
    "uncertainty": lambda s: s["uncertainty"],
}


@settings(max_examples=60, deadline=None)
@given(st.lists(st.sampled_from([0.0, 1.0]), min_size=2, max_size=80).filter(lambda r: 0 < sum(r) < len(r)))
def test_a_perfect_forecast_scores_the_perfect_values(rows):
    actual = np.array(rows)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", scores.UndefinedScoreWarning)    # the odds ratio, tested above
        got = {**scores.categorical(actual, actual), **scores.probabilistic(actual, actual)}
    for key in scores.SCORE_KEYS:
        want = INFO[key].perfect
        if want is None:
            assert key in PERFECT_OF_THE_DATA, f"{key}: no perfect value in the registry or here"
            want = PERFECT_OF_THE_DATA[key](got)
        else:
            assert key not in PERFECT_OF_THE_DATA, key
        if math.isnan(want):
            assert math.isnan(got[key]), key
        else:
            assert got[key] == pytest.approx(want, rel=1e-12, abs=1e-12), key


# --- the cost cutoff and the rule that uses it ------------------------------------------------------
@pytest.mark.parametrize("cfa, cmiss", [(1, 1), (1, 4), (3, 1), (0.25, 0.5)])
def test_cost_cutoff_is_where_acting_and_not_acting_cost_the_same(cfa, cmiss):
    # Murphy (1977), Mon. Wea. Rev. 105, cost-loss model: acting at probability p costs (1 - p) cFA in
    # expectation, not acting p cMiss. At the cutoff they are equal, so an event is forecast only above
    # it (p > cutoff), as the docstring says and as every tocsin method applies it.
    p = scores.cost_cutoff(cfa, cmiss)
    assert (1 - p) * cfa == pytest.approx(p * cmiss, rel=1e-15)
    above, below = min(p + 1e-6, 1.0), max(p - 1e-6, 0.0)
    assert (1 - above) * cfa < above * cmiss and (1 - below) * cfa > below * cmiss
    assert "strictly above it (p > cutoff)" in _flat(scores.cost_cutoff.__doc__)
