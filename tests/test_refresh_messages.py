"""Messages that name the right setting, and numeric trouble that stays on the sheet (issue 11, point 5),
end to end through ``tocsin refresh``.

* ``lags`` longer than the data blames ``lags`` (it blamed ``horizon``);
* a job whose data hold a single row says the data have too few rows (it blamed ``date_column`` with
  "got None");
* values of +-1e308 (hostile input, invented here by overwriting every fifth GDP value of statsmodels'
  ``macrodata``, US quarterly 1959-2009, FRED data compiled by S. Seabold) never reach the linear
  algebra: the sheet's notes say why the logistic model was not fitted, the benchmarks are still
  scored, and nothing of LAPACK ("On entry to DLASCL parameter number 4 had an illegal value") or of
  numpy's RuntimeWarnings reaches the terminal. That check runs the command in a subprocess, because
  LAPACK writes to the process's file descriptors, past Python's streams.
"""
from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

from test_refresh import (
    GDP_JOB,
    ROOT,
    find_row,
    grid_calamine,
    job_table,
    macro_book,
    macrodata_rows,
    run_cli,
    write_book,
)


def _job(out: str, name: str) -> dict:
    [book] = json.loads(out)
    return next(j for j in book["jobs"] if j["job"] == name)


def test_lags_longer_than_the_data_blames_lags(tmp_path, capsys):
    path = macro_book(tmp_path / "lags.xlsx", {**GDP_JOB, "lags": 1000})
    code, out, err = run_cli(capsys, "refresh", "--json", str(path))
    message = _job(out, "gdp fall")["message"]
    n = len(macrodata_rows()) - 1          # 203 quarters
    assert code == 1
    assert message == (f"`lags` must be shorter than the data: {n} rows up to the last observation allow at "
                       f"most {n - 1} with horizon=1; got 1000 in row 2 of sheet tocsin")


def test_horizon_longer_than_the_data_still_blames_horizon(tmp_path, capsys):
    path = macro_book(tmp_path / "horizon.xlsx", {**GDP_JOB, "horizon": 500})
    code, out, err = run_cli(capsys, "refresh", "--json", str(path))
    assert code == 1
    assert _job(out, "gdp fall")["message"].startswith("`horizon` must be shorter than the data")


def test_one_row_without_dates_says_the_data_have_too_few_rows(tmp_path, capsys):
    one = {"job": "single", "data_sheet": "One", "value_column": "Count", "event": ">0"}
    path = write_book(tmp_path / "one.xlsx", {"One": [["Count"], [3.0]],
                                              "Macro": macrodata_rows(), "tocsin": job_table(one, GDP_JOB)})
    code, out, err = run_cli(capsys, "refresh", "--json", str(path))
    message = _job(out, "single")["message"]
    assert code == 1 and _job(out, "gdp fall")["status"] == "ok"
    assert message.startswith("`value_column` must hold at least 2 rows of data up to the last observation")
    assert "column A of sheet 'One' has 1; got 'Count' in row 2 of sheet tocsin" in message
    assert message.endswith("the data have too few rows for a forecast")
    assert "date_column" not in message and "None" not in message


def test_values_of_1e308_give_a_note_and_no_lapack_text(tmp_path):
    rows = macrodata_rows()
    for i in range(5, len(rows), 5):
        rows[i][1] = 1e308 if i % 10 else -1e308
    jobs = [GDP_JOB, {**GDP_JOB, "job": "gdp high", "event": ">5000"},
            {**GDP_JOB, "job": "jobless", "value_column": "Unemployment", "event": ">6",
             "predictors": "Real GDP"}]
    path = write_book(tmp_path / "huge.xlsx", {"Macro": rows, "tocsin": job_table(*jobs)})
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")]))
    run = subprocess.run([sys.executable, "-m", "watcher.cli", "refresh", "--json", str(path)],
                         capture_output=True, text=True, env=env, timeout=300)
    for text in (run.stdout, run.stderr):
        assert "DLASCL" not in text and "On entry to" not in text and "Warning" not in text, text
    assert run.returncode == 0, run.stderr
    [book] = json.loads(run.stdout)
    assert [j["status"] for j in book["jobs"]] == ["ok", "ok", "ok"]
    for name, says in (("gdp high", "the value series reaches 1e+308"),
                       ("jobless", "predictor 'Real GDP' reaches 1e+308")):
        grid = grid_calamine(Path(path), f"{name} forecast")
        notes = " ".join(str(c) for r in grid[find_row(grid, "notes"):] for c in r[:2] if c)
        assert f"logistic model not fitted: {says}" in notes, notes
        methods = [c for c in grid[0][9:] if c]
        assert "logistic" not in methods and "naive" in methods
