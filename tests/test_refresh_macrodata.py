"""An open dataset end to end: statsmodels' ``macrodata`` through ``tocsin refresh``.

Data: US quarterly macroeconomic series 1959Q1-2009Q3 (203 quarters), Federal Reserve Bank of St.
Louis FRED and the Bureau of Labor Statistics, compiled by Skipper Seabold, shipped in
``statsmodels.datasets.macrodata`` (public domain). Written into a workbook by xlsxwriter with
quarter-end dates and one blank future quarter (2009-12-31); two jobs on real GDP, event ``fall``
(a quarter-on-quarter decline): one with the default costs, one where a miss costs nine false alarms.

Everything is read back from the refreshed sheet (openpyxl) and checked against outside references:

* the event count against an independent pandas count of quarter-on-quarter declines
  (``(df.realgdp.diff() < 0).sum()``);
* every scorecard cell against scikit-learn's metrics (``accuracy_score``, ``recall_score``,
  ``precision_score``, ``confusion_matrix``, ``cohen_kappa_score``, ``brier_score_loss``,
  ``log_loss``, ``roc_auc_score``) on the validation forecasts read back from the row table;
* the logistic coefficients against statsmodels' ``Logit`` on the design the sheet's notes describe.
"""
from __future__ import annotations

import datetime as dt
import math

import numpy as np
import pandas as pd
import pytest
import sklearn.metrics as sklearn_metrics
from test_refresh import (
    GDP_JOB,
    cell,
    find_row,
    floats,
    grid_openpyxl,
    job_table,
    macrodata_rows,
    write_book,
)

from sheetfns.scorecard import METHOD_LABELS, SCORE_ROWS

COSTLY = {**GDP_JOB, "job": "gdp fall costly", "cost_false_alarm": 1, "cost_miss": 9}
LABEL_KEY = {label: key for key, label in METHOD_LABELS.items()}
# The core clips probabilities of 0 and 1 at 1e-15 in the log loss (common practice; scikit-learn's
# default eps before version 1.5), so a wrong 0/1 forecast costs -ln(1e-15), not infinity.
# scikit-learn >= 1.5 clips at the float epsilon instead, so for the 0/1 forecasts the log loss is
# checked as that arithmetic: (number wrong) * -ln(1e-15) / n (a right one costs -ln(1 - 1e-15)).
LOG_LOSS_EPS = 1e-15


@pytest.fixture(scope="module")
def macro(tmp_path_factory):
    from statsmodels.datasets import macrodata

    rows = macrodata_rows()
    rows.append([dt.date(2009, 12, 31), None, None, None])  # the next quarter, not yet observed
    path = write_book(tmp_path_factory.mktemp("macro") / "macro.xlsx",
                      {"Macro": rows, "tocsin": job_table(GDP_JOB, COSTLY)})
    return {"path": path, "df": macrodata.load_pandas().data}


@pytest.fixture(scope="module")
def sheets(macro):
    from watcher import cli
    assert cli.main(["refresh", str(macro["path"])]) == 0
    return {name: read_sheet(grid_openpyxl(macro["path"], f"{name} forecast"))
            for name in ("gdp fall", "gdp fall costly")}


def read_sheet(grid):
    """The row table and the scorecard of a forecast sheet, as read back."""
    TABLE_COL = grid[0].index("date")   # the row table's header starts row 1 after the left panel
    header = []
    while cell(grid, 0, TABLE_COL + len(header)) is not None:
        header.append(cell(grid, 0, TABLE_COL + len(header)))
    n = 1
    while cell(grid, n, TABLE_COL) is not None:
        n += 1
    n -= 1
    table = {h: floats(grid, TABLE_COL + j, 1, n) for j, h in enumerate(header)
             if h not in ("date", "period")}
    table["period"] = np.array([cell(grid, 1 + i, TABLE_COL + 3) for i in range(n)])
    r = find_row(grid, "measure")
    methods = []
    while cell(grid, r, 1 + len(methods)) is not None:
        methods.append(cell(grid, r, 1 + len(methods)))
    card = {}
    for i, (key, label, _fmt, _better) in enumerate(SCORE_ROWS):
        assert cell(grid, r + 1 + i, 0) == label
        card[key] = {mth: floats(grid, 1 + j, r + 1 + i, 1)[0] for j, mth in enumerate(methods)}
    r = find_row(grid, "term", "estimate")
    coef = {}
    while cell(grid, r + 1 + len(coef), 0) is not None:
        k = r + 1 + len(coef)
        coef[cell(grid, k, 0)] = (cell(grid, k, 1), cell(grid, k, 2))
    return {"table": table, "methods": methods, "card": card, "coef": coef}


def test_event_count_equals_pandas_count_of_declines(macro, sheets):
    df = macro["df"]
    declines = int((df.realgdp.diff() < 0).sum())  # independent count: quarter-on-quarter falls
    assert declines == 28
    for name in sheets:
        ev = sheets[name]["table"]["event"]
        assert np.nansum(ev) == declines
        assert np.isnan(ev[0]) and np.isnan(ev[-1])  # no previous quarter; the future quarter
        assert (ev[1:-1] == (df.realgdp.diff() < 0).to_numpy()[1:]).all()
        # the validation count of the scorecard
        period = sheets[name]["table"]["period"]
        in_valid = int((df.realgdp.diff() < 0).to_numpy()[period[:-1] == "validation"].sum())
        assert all(v == in_valid for v in sheets[name]["card"]["events"].values())


def _probabilities(table, label):
    """A method's validation probabilities, from the row table alone: the 0/1 forecast itself for the
    naive methods and the votes, rebuilt with pandas for the majority shares (the training share for
    the fixed origin; the expanding share of the rows before t for the rolling one), the probability
    column of each model (two-state chain, logistic, value model)."""
    key = LABEL_KEY[label]
    ev = pd.Series(table["event"])
    train = table["period"] == "training"
    if key == "majority":
        return np.full(len(ev), ev[train].mean())
    if key == "majority_roll":
        return ev.expanding().mean().shift(1).to_numpy()
    if key in ("markov", "logistic", "value_model"):
        return table[f"{label} probability"]
    return table[label]


@pytest.mark.parametrize("name", ["gdp fall", "gdp fall costly"])
def test_scorecard_equals_scikit_learn(sheets, name):
    m = sklearn_metrics
    sheet = sheets[name]
    table, card = sheet["table"], sheet["card"]
    valid = table["period"] == "validation"
    y = table["event"][valid].astype(int)
    cfa, cmiss = (1.0, 9.0) if name == "gdp fall costly" else (1.0, 1.0)
    reference = _probabilities(table, "majority vote")[valid]
    approx = {"rel": 1e-12, "abs": 1e-15}
    for label in sheet["methods"]:
        f = table[label][valid].astype(int)
        p = _probabilities(table, label)[valid]
        got = {k: card[k][label] for k in card}
        tn, fp, fn, tp = m.confusion_matrix(y, f, labels=[0, 1]).ravel()
        assert (got["n"], got["events"]) == (len(y), y.sum())
        assert (got["hits"], got["false_alarms"], got["misses"], got["correct_negatives"]) == (tp, fp, fn, tn)
        want = {
            "accuracy": m.accuracy_score(y, f),
            "sensitivity": m.recall_score(y, f, zero_division=np.nan),
            "specificity": m.recall_score(y, f, pos_label=0, zero_division=np.nan),
            "precision": m.precision_score(y, f, zero_division=np.nan),
            # Peirce skill = hit rate - false alarm rate (Peirce, C. S., 1884, "The numerical measure of
            # the success of predictions", Science 4, 453-454)
            "peirce_skill": m.recall_score(y, f) - (1 - m.recall_score(y, f, pos_label=0)),
            # Heidke skill score = Cohen's kappa on the 2x2 table (Wilks, D. S., 2011, Statistical
            # Methods in the Atmospheric Sciences, 3rd ed., section 8.2; recalled from memory)
            "heidke_skill": m.cohen_kappa_score(y, f),
            "brier": m.brier_score_loss(y, p),
            "brier_skill": 1 - m.brier_score_loss(y, p) / m.brier_score_loss(y, reference),
            "log_loss": (m.log_loss(y, p, labels=[0, 1]) if ((p > 0) & (p < 1)).all() else
                         ((f != y).sum() * -math.log(LOG_LOSS_EPS)
                          + (f == y).sum() * -math.log1p(-LOG_LOSS_EPS)) / len(y)),
            "roc_auc": m.roc_auc_score(y, p),
            # expected cost per period with the job's costs (common practice: cost-loss accounting)
            "expected_cost": (fp * cfa + fn * cmiss) / len(y),
        }
        want["false_alarm_ratio"] = 1 - want["precision"]
        if math.isnan(want["heidke_skill"]):
            want["heidke_skill"] = 0.0  # kappa 0/0 when both sides are constant: no skill
        for key, value in want.items():
            if math.isnan(value):
                assert math.isnan(got[key]), f"{name}, {label}: {key} = {got[key]}, want blank"
            else:
                assert got[key] == pytest.approx(value, **approx), f"{name}, {label}: {key}"


def test_cost_cutoff_in_the_row_table(sheets):
    """A miss costing nine false alarms warns when p > 1 / (1 + 9) (Murphy, A. H., 1977, "The value of
    climatological, categorical and probabilistic forecasts in the cost-loss ratio situation",
    Monthly Weather Review 105, 803-816)."""
    for name, cutoff in (("gdp fall", 0.5), ("gdp fall costly", 0.1)):
        t = sheets[name]["table"]
        p = t["logistic probability"]
        ok = ~np.isnan(p)
        assert (t["logistic"][ok] == (p[ok] > cutoff)).all()
        assert np.isnan(t["logistic"][~ok]).all()
    # the costly job does warn sometimes, the default one never does on these data
    assert np.nansum(sheets["gdp fall costly"]["table"]["logistic"]) > 0


def test_logistic_coefficients_equal_statsmodels(macro, sheets):
    """The fixed-partition fit: event_t on a constant, event_{t-1} and real GDP_{t-1}, on the training
    quarters where all are observed (the notes of the sheet), by statsmodels' Logit (Newton)."""
    import statsmodels.api as sm

    t = sheets["gdp fall"]["table"]
    train = np.flatnonzero(t["period"] == "training")
    y, v = t["event"], t["Real GDP"]
    rows = [i for i in train if i >= 1 and not np.isnan(y[i]) and not np.isnan(y[i - 1])]
    X = sm.add_constant(np.column_stack([y[np.array(rows) - 1], v[np.array(rows) - 1]]))
    res = sm.Logit(y[rows], X).fit(disp=0, method="newton", tol=1e-12)
    coef = sheets["gdp fall"]["coef"]
    assert list(coef) == ["constant", "event t-1", "value t-1"]
    est = np.array([c[0] for c in coef.values()])
    se = np.array([c[1] for c in coef.values()])
    np.testing.assert_allclose(est, res.params, rtol=1e-7)
    np.testing.assert_allclose(se, res.bse, rtol=1e-6)
