"""The estimation schemes shared by the logistic model and the value model (sheetfns._logit.plan):
which rows get a forecast, the fit behind each, the notes and the check of ``train_size``.

Sources:
* the schemes themselves are DESIGN.md section 3 ("train_size=None means roll-forward everywhere ...";
  ``refit`` fixed / roll / roll N) and the Notes of ``sheetfns.logistic.forecast``; the expected
  windows below are worked out by hand from those definitions.
* data: ``statsmodels.datasets.nile``, annual flow of the Nile at Aswan, 1871-1970 (Cobb, G. W. 1978,
  "The problem of the Nile: conditional solution to a changepoint problem", *Biometrika* 65(2)), with
  blanks put in to make gaps. The comparison of the two models is a property of tocsin's own (one
  plan for both), not an outside fact.
"""
from __future__ import annotations

import numpy as np
import pytest

from sheetfns import events, logistic, valuemodel
from sheetfns._logit.plan import plan
from sheetfns.errors import InputError

sm = pytest.importorskip("statsmodels.api")

RULE = ">1000"


def _nile_with_gaps() -> np.ndarray:
    # usable at horizon 1 (the value and its lag observed): rows 1-11, 15-46, 49-99 (0-based), so the
    # 30th usable row is row 33, and rows 1-5 are the usable rows of a 6-row training period
    x = sm.datasets.nile.load_pandas().data["volume"].to_numpy(dtype=float).copy()
    x[[12, 13, 47]] = np.nan          # blanks inside the data
    return np.r_[x, np.nan, np.nan]   # and two future periods


def _both(train_size, refit, horizon):
    """The two models on the same rows with the same terms (constant and the value at the origin)."""
    x = _nile_with_gaps()
    y = events.flag(x, RULE)
    logit = logistic.forecast(y, values=x, lags=0, train_size=train_size, refit=refit, horizon=horizon)
    value = valuemodel.forecast(x, RULE, lags=1, train_size=train_size, refit=refit, horizon=horizon)
    terms = ["constant", f"value t-{horizon}"]
    assert list(logit.coefficients["term"]) == list(value.coefficients["term"]) == terms
    return logit, value


SCHEME_STARTS = ("fixed:", "roll:", "roll-forward:", "horizon ", "training ", "only ", "coefficient table:")


def _scheme_notes(notes) -> list[str]:
    return [n for n in notes if n.startswith(SCHEME_STARTS) or "roll-forward fit needs" in n]


@pytest.mark.parametrize("train_size, refit, horizon, expected", [
    (40, "fixed", 1, "fixed: coefficients estimated once on rows 1-40 (the rows observed at the first "
                     "validation origin) and used for every validation row"),
    (40, "roll", 2, "roll: refitted at every validation origin on all usable rows observed by the "
                    "origin, the first fit on rows 1-39"),
    (60, "roll 7", 3, "roll: refitted at every 7 validation origins on all usable rows observed by the "
                      "origin, the first fit on rows 1-58"),
    (6, "fixed", 1, "only 5 usable rows for 2 terms in the first fit (fewer than 30): the estimates "
                    "are unstable"),
    (None, "roll", 1, "rows 1-34 have no forecast: a roll-forward fit needs at least 30 usable rows "
                      "(10 per term, at least 30) observed by its origin"),
    (None, "roll 4", 2, "roll-forward: refitted every 4 origins on all usable rows observed by the "
                        "origin (expanding window)"),
])
def test_both_models_follow_one_plan(train_size, refit, horizon, expected):
    logit, value = _both(train_size, refit, horizon)
    notes = _scheme_notes(logit.notes)
    assert expected in notes
    assert notes == _scheme_notes(value.notes)
    # the same rows get a forecast, from the same number of distinct fits
    observed = slice(0, 100)
    np.testing.assert_array_equal(np.isfinite(logit.prob[observed]), np.isfinite(value.prob[observed]))
    assert logit.refits == value.refits
    assert logit.refits >= 1


def test_roll_n_windows_worked_by_hand():
    # rows 0..19 observed, row 5 not usable; training rows 0..7, horizon 2, refit every 3 origins:
    # validation rows 8..19 take their fit from origins 6, 9, 12, 15 (anchor rows 8, 11, 14, 17 minus
    # the horizon), i.e. the usable rows <= origin: 6, 9, 12, 15 of them (row 5 missing)
    usable = np.array([r for r in range(20) if r != 5])
    p = plan(usable, 2, last=19, horizon=2, train_size=8, every=3)
    np.testing.assert_array_equal(p.targets, np.arange(8, 20))
    np.testing.assert_array_equal(p.windows, np.repeat([6, 9, 12, 15], 3))
    assert p.fixed_window == 6 and p.first == 8 and p.every == 3
    # roll-forward with 3 terms: the first row whose origin sees 30 usable rows (rows 0..30 less row 5)
    usable = np.array([r for r in range(50) if r != 5])
    p = plan(usable, 3, last=49, horizon=1, train_size=None, every=0)
    assert p.first == 31 and p.every == 1 and p.fixed_window is None
    np.testing.assert_array_equal(p.windows, np.arange(30, 49))


@pytest.mark.parametrize("train_size", [2, 3])
def test_a_too_short_training_period_names_train_size_in_both_models(train_size):
    # rows 0..1 (or 0..2) leave 1 (or 2) usable rows for 2 terms: a least-squares fit needs 3
    x = _nile_with_gaps()
    y = events.flag(x, RULE)
    with pytest.raises(InputError) as by_value:
        valuemodel.forecast(x, RULE, train_size=train_size)
    with pytest.raises(InputError) as by_logit:
        logistic.forecast(y, values=x, lags=0, train_size=train_size)
    for err in (by_value.value, by_logit.value):
        assert (err.argument, err.value) == ("train_size", train_size)
        assert f"`train_size` leaves {train_size - 1} usable rows for 2 terms" in str(err)
        assert f"got train_size={train_size}" in str(err)
    assert str(by_value.value) == str(by_logit.value)
