"""The core's errors carry their facts as fields (``argument``, ``value``, ``location``), so a caller
never parses message text; the messages keep the project's one shape (tocsin's own convention, STYLE.md:
what was expected, what came, where)."""
from __future__ import annotations

import datetime as dt
import math
import pickle

import numpy as np
import pytest

from sheetfns import benchmarks, checks, events, logistic, partition, profile, scores
from sheetfns.errors import CriterionError, InputError, PartitionError, TocsinError

nan = float("nan")


def _caught(call) -> InputError:
    with pytest.raises(InputError) as info:
        call()
    return info.value


def test_the_family():
    assert issubclass(CriterionError, InputError) and issubclass(PartitionError, InputError)
    assert issubclass(InputError, TocsinError) and issubclass(TocsinError, ValueError)
    exc = InputError("`horizon` must be an integer >= 1; got 0")
    assert (exc.argument, exc.value, exc.location) == (None, None, None)
    assert str(exc) == "`horizon` must be an integer >= 1; got 0"


def test_fields_survive_pickling():
    # the watcher may hand errors between processes; the fields must come along
    exc = _caught(lambda: checks.as_events([0, 1, 2], "actual"))
    back = pickle.loads(pickle.dumps(exc))
    assert type(back) is InputError and str(back) == str(exc)
    assert (back.argument, back.value, back.location) == ("actual", 2.0, 3)


# -- the validation helpers (sheetfns/checks.py) ----------------------------------------------------
@pytest.mark.parametrize("call, argument, value, location", [
    (lambda: checks.as_series(5, "values"), "values", 5, None),
    (lambda: checks.as_series([1, "x", 3], "values"), "values", "x", 2),
    (lambda: checks.as_series(np.zeros((2, 3)), "values"), "values", None, None),
    (lambda: checks.as_series([], "values"), "values", [], None),
    (lambda: checks.as_events([0, 1, 0.5], "forecast"), "forecast", 0.5, 3),
    (lambda: checks.as_prob([0.2, -0.1], "prob"), "prob", -0.1, 2),
    (lambda: checks.same_length(actual=[0, 1, 1], forecast=[0, 1]), "forecast", [0, 1], None),
    (lambda: checks.as_int(None, "horizon"), "horizon", None, None),
    (lambda: checks.as_int(True, "horizon"), "horizon", True, None),
    (lambda: checks.as_int("soon", "horizon"), "horizon", "soon", None),
    (lambda: checks.as_int(1.5, "horizon"), "horizon", 1.5, None),
    (lambda: checks.as_int(0, "horizon", minimum=1), "horizon", 0, None),
    (lambda: checks.as_int(9, "lags", maximum=8), "lags", 9, None),
    (lambda: checks.as_nonnegative(-1, "hits"), "hits", -1, None),
    (lambda: checks.as_nonnegative("many", "hits"), "hits", "many", None),
])
def test_checks_name_the_argument_and_the_value(call, argument, value, location):
    exc = _caught(call)
    assert exc.argument == argument and exc.location == location
    if value is not None:
        assert exc.value == value
    # the message names the same argument (one message shape)
    assert f"`{argument}`" in str(exc)


# -- every public module: the argument a caller would fix --------------------------------------------
DAYS = [dt.date(2024, 1, 1) + dt.timedelta(days=i) for i in range(10)]


@pytest.mark.parametrize("call, kind, argument, value, location", [
    (lambda: events.flag([1, 2], ">>1"), CriterionError, "criterion", ">>1", None),
    (lambda: events.flag([1, 2], 5), CriterionError, "criterion", 5, None),
    (lambda: events.flag([1, object()], ">1"), InputError, "values", None, 2),
    (lambda: events.flag([1, 2], ">1", min_run=0), InputError, "min_run", 0, None),
    (lambda: partition.split(10, "soon"), InputError, "validation", "soon", None),
    (lambda: partition.split(10, 10), PartitionError, "validation", 10, None),
    (lambda: partition.split(DAYS[:3] + [DAYS[1]], 1), PartitionError, "index", None, 4),
    (lambda: partition.split(DAYS[:2] + [DAYS[1]], 1), PartitionError, "index", None, 3),
    (lambda: partition.split(DAYS[:2] + [None], 1), InputError, "index", None, 3),
    (lambda: partition.split(10, dt.date(2024, 1, 3)), InputError, "validation", dt.date(2024, 1, 3), None),
    (lambda: partition.split(10, 2, events=[0, 1]), InputError, "events", [0, 1], None),
    (lambda: benchmarks.naive([0, 1, 0], horizon=4), InputError, "horizon", 4, None),
    (lambda: benchmarks.naive([0, 1, 0], season=4), InputError, "season", 4, None),
    (lambda: benchmarks.majority_vote([0, 1, 0], window=5), InputError, "window", 5, None),
    (lambda: benchmarks.majority_share([nan, 1, 0], train_size=1), InputError, "train_size", 1, None),
    (lambda: logistic.forecast([0, 1] * 20, refit="sometimes"), InputError, "refit", "sometimes", None),
    (lambda: logistic.forecast([0, 1] * 20, cycle=-7), InputError, "cycle", -7, None),
    (lambda: logistic.forecast([0, 1] * 20, weekday=True), InputError, "dates", None, None),
    (lambda: logistic.fit(np.ones((3, 1)), [0, 1]), InputError, "X", None, None),
    (lambda: profile.rate_table(DAYS, [0] * 10, by="fortnight"), InputError, "by", "fortnight", None),
    (lambda: scores.confusion([0, 1, 2], [0, 1, 1]), InputError, "actual", 2.0, 3),
    (lambda: scores.from_counts(1, -2, 3, 4), InputError, "false_alarms", -2, None),
    (lambda: scores.probabilistic([0, 1], [0.2, 0.4], reference=2), InputError, "reference", 2, None),
    (lambda: scores.brier_decomposition([0, 1], [0.2, 0.4], bins=[0.5, 0.2]), InputError, "bins",
     [0.5, 0.2], None),
    (lambda: scores.cost_cutoff(0, 0), InputError, "cost_miss", 0, None),
    (lambda: scores.diebold_mariano([0, 1, 0], [0.2] * 3, [0.4] * 3, horizon=3), InputError, "horizon", 3,
     None),
    (lambda: scores.wilson(5, 4), InputError, "successes", 5, None),
    (lambda: scores.wilson(1, 4, confidence=1.5), InputError, "confidence", 1.5, None),
])
def test_public_errors_carry_their_fields(call, kind, argument, value, location):
    with pytest.raises(kind) as info:
        call()
    exc = info.value
    assert exc.argument == argument and exc.location == location
    if value is not None:
        assert exc.value == value
    shown = "criterion" if kind is CriterionError else f"`{argument}`"
    assert shown in str(exc)


def test_a_date_error_carries_the_offending_date():
    exc = _caught(lambda: partition.split(DAYS[:3] + [DAYS[1]], 1))
    assert exc.value == np.datetime64(DAYS[1], "us") and exc.location == 4
    assert "row 4" in str(exc)


def test_a_bad_series_element_is_the_value():
    exc = _caught(lambda: checks.as_prob([0.1, math.inf], "prob"))
    assert exc.value == math.inf and exc.location == 2 and "position 2" in str(exc)


def test_the_documented_example_runs():
    import doctest

    from sheetfns import errors
    result = doctest.testmod(errors)
    assert result.attempted >= 1 and result.failed == 0
