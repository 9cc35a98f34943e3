"""The report's ``warnings`` and ``future`` (DESIGN.md §8), end to end: ``tocsin refresh`` on a real
workbook, read back from ``--json`` and from the command's lines, and again from an unchanged refresh
(which reports what tocsin's record kept).

The data are invented (``alarmbook``: a seeded 0/1 alarm log). The forecasts in ``future`` are checked
against their definitions (DESIGN.md §3, common practice for these benchmarks): the rolling naive
forecast is the last value observed at or before the origin; the majority share is the share of events
among all observed periods, and the majority vote is 1 when that share is above 0.5.
"""
from __future__ import annotations

import json
import re

import numpy as np
import pytest
from alarmbook import ALARM_JOB, alarm_book, alarm_values, day
from test_refresh import run_cli

from sheetfns.scorecard import PROBABILITY_METHODS

TEXT_CELLS = {10: "n/a", 20: "?", 21: "?", 22: "?", 23: "?", 24: "?", 25: "?"}  # data index -> text


def refresh_json(capsys, path, *extra):
    code, out, err = run_cli(capsys, "refresh", "--json", *extra, str(path))
    assert code == 0, err
    (report,) = json.loads(out)
    (job,) = report["jobs"]
    return report, job


def test_future_lists_every_future_period_with_its_origin(tmp_path, capsys):
    values = alarm_values()
    n = len(values)
    path = alarm_book(tmp_path / "log.xlsx", {**ALARM_JOB, "horizon": 2}, values=values, future=2)
    report, job = refresh_json(capsys, path)
    assert report["status"] == "refreshed" and job["status"] == "ok"
    future = job["future"]
    # one entry per future period, in time order; each forecast made 2 days before (no look-ahead),
    # or from the last observed day
    assert [(f["period"], f["origin"]) for f in future] == [(day(n), day(n - 2)), (day(n + 1), day(n - 1))]
    for entry, origin in zip(future, (n - 2, n - 1), strict=True):
        forecasts = entry["forecasts"]
        share = np.mean(values[:origin + 1])  # the days observed by the origin
        assert forecasts["naive_roll"] == {"forecast": values[origin], "probability": None}
        assert forecasts["majority_roll"]["probability"] == pytest.approx(share, abs=1e-12)
        assert forecasts["majority_roll"]["forecast"] == int(share > 0.5)
        logistic = forecasts["logistic"]
        assert 0 < logistic["probability"] < 1 and logistic["forecast"] == int(logistic["probability"] > 0.5)
        for key, value in forecasts.items():  # a 0/1 method never states a chance
            assert value["forecast"] in (0, 1)
            assert (value["probability"] is None) == (key not in PROBABILITY_METHODS), key
    # the next period's probability is the best method's, when that method states one
    # (with about five validation events no method is ranked, DESIGN.md §8: then no chance is stated)
    assert job["next_period"] == day(n)
    if job["best_method"] is None:
        assert job["next_probability"] is None
    else:
        best = next(k for k in future[0]["forecasts"] if k in PROBABILITY_METHODS and
                    future[0]["forecasts"][k]["probability"] == job["next_probability"])
        assert best in PROBABILITY_METHODS
    # an unchanged refresh reports the same, from tocsin's record in the workbook
    again, kept = refresh_json(capsys, path)
    assert again["status"] == "unchanged" and kept["status"] == "unchanged"
    assert kept["future"] == future
    assert kept["warnings"] == job["warnings"]


def test_without_dates_periods_are_numbered_and_a_01_best_method_states_no_chance(tmp_path, capsys):
    # runs of 8 days: the rolling naive forecast does best on the long validation period
    values = [(i // 8) % 2 for i in range(40)]
    spec = {**ALARM_JOB, "date_column": None, "validation": 34, "alert": None}
    path = alarm_book(tmp_path / "runs.xlsx", spec, values=values, dates=False)
    report, job = refresh_json(capsys, path)
    (entry,) = job["future"]
    assert entry["period"] == 41 and entry["origin"] == 40  # period numbers, 1-based
    assert entry["forecasts"]["naive_roll"] == {"forecast": values[-1], "probability": None}
    assert entry["forecasts"]["majority"]["probability"] == pytest.approx(np.mean(values), abs=1e-12)
    assert job["best_method"] == "rolling naive"
    assert job["next_probability"] is None  # never the 0 or 1 of a naive forecast
    code, out, err = run_cli(capsys, "refresh", str(path))
    assert code == 0, err
    assert ("pump alarm: unchanged; next period row 41: no event forecast (best: rolling naive)"
            in out)
    assert "chance" not in out


def test_warnings_reach_the_json_and_the_command_line_capped(tmp_path, capsys):
    values: list = alarm_values()
    for i, text in TEXT_CELLS.items():
        values[i] = text
    path = alarm_book(tmp_path / "text.xlsx", values=values)
    report, job = refresh_json(capsys, path)
    every = job["warnings"]
    # one warning per text cell, named by its cell; the count of rows without a value and the evaluation's
    # own (too few validation events) come after them
    warnings = [w for w in every if re.match(r"[A-Z]+[0-9]+: .* read as missing$", w)]
    cells = [f"B{i + 2}" for i in TEXT_CELLS]  # data row i is sheet row i + 2 (after the header)
    assert len(warnings) == len(TEXT_CELLS)
    for cell, text, warning in zip(cells, TEXT_CELLS.values(), warnings, strict=True):
        assert cell in warning and repr(text) in warning, warning
    # the text cells are missing values: the majority share counts the observed days only
    observed = [v for v in values if not isinstance(v, str)]
    share = job["future"][0]["forecasts"]["majority"]["probability"]
    assert share == pytest.approx(np.mean(observed), abs=1e-12)
    # the command prints each warning on its own line under the job, the first five, then a count (here
    # from an unchanged refresh: tocsin's record keeps them)
    code, out, err = run_cli(capsys, "refresh", str(path))
    assert code == 0, err
    lines = out.splitlines()
    at = next(i for i, line in enumerate(lines) if line.startswith("  pump alarm: unchanged"))
    assert lines[at + 1:at + 6] == [f"    warning: {w}" for w in every[:5]]
    assert lines[at + 6] == f"    ... and {len(every) - 5} more warnings (see --json or the sheet's notes)"
    # and in the JSON of the unchanged refresh, from tocsin's record
    _, kept = refresh_json(capsys, path)
    assert kept["warnings"] == every


def test_hourly_data_name_the_next_period_with_its_hour(tmp_path, capsys):
    """Hourly readings that end on the last observation: the future periods are the next hours, and the
    report's ``next_period`` names the hour (ISO 8601 date and time, as ``future`` does), not only the
    day. Invented 0/1 readings (seeded)."""
    import datetime as dt

    from test_refresh import job_table, write_book

    start = dt.datetime(2026, 3, 1, 0, 0)
    values = alarm_values(n=200)
    rows = [["Hour", "Alarm"]] + [[start + dt.timedelta(hours=i), v] for i, v in enumerate(values)]
    job = {**ALARM_JOB, "date_column": "Hour", "horizon": 3}
    path = write_book(tmp_path / "hourly.xlsx", {"Log": rows, "tocsin": job_table(job)})
    report, out = refresh_json(capsys, path)
    assert report["status"] == "refreshed" and out["status"] == "ok", out
    last = start + dt.timedelta(hours=len(values) - 1)
    hours = [(last + dt.timedelta(hours=k)).isoformat() for k in (1, 2, 3)]
    assert [f["period"] for f in out["future"]] == hours
    assert out["next_period"] == hours[0]                    # e.g. 2026-03-09T08:00:00, not 2026-03-09
