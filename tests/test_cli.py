"""The ``tocsin`` command: exit codes (0 ok, 1 a workbook or a job failed, 2 usage), ``error: ...`` on
stderr and never a traceback, for the cases of issue 5: a missing file, a non-workbook, a workbook
without a job table, invalid settings, one bad job beside a good one, a user sheet named like an output
sheet; the JSON report; ``check`` (prints, writes nothing); ``demo``; ``init``.

The workbooks are written by xlsxwriter and hold statsmodels' ``macrodata`` (US quarterly 1959-2009,
FRED data compiled by S. Seabold, shipped in statsmodels.datasets) -- an open dataset, so the good
jobs compute on real data. Where a good job is written its numbers are checked against the core
(``test_refresh.check_book``).
"""
from __future__ import annotations

import json
from pathlib import Path

import openpyxl
import pytest
from test_refresh import (
    GDP_JOB,
    SAMPLES,
    check_book,
    check_forecast_sheet,
    core_reference,
    file_state,
    grid_openpyxl,
    job_table,
    macro_book,
    macrodata_rows,
    run_cli,
    sheet_part_bytes,
    write_book,
)

from sheetfns.scorecard import METHOD_LABELS, SCORE_ROWS
from watcher.cli.tables import _two_lines
from watcher.xlsx import package


def no_traceback(*texts: str) -> None:
    for t in texts:
        assert "Traceback" not in t, t


def status_cell(path: Path, sheet: str):
    wb = openpyxl.load_workbook(path)
    try:
        c = wb[sheet]["B2"]
        return c.value, c.fill.fgColor.rgb
    finally:
        wb.close()


# --------------------------------------------------------------------------------- workbook errors

def test_missing_file(tmp_path, capsys):
    code, out, err = run_cli(capsys, "refresh", str(tmp_path / "nowhere.xlsx"))
    assert code == 1 and out == ""
    assert err.startswith("error: nowhere.xlsx: ") and "does not exist" in err
    no_traceback(err)


def test_not_a_workbook(tmp_path, capsys):
    fake = tmp_path / "notes.xlsx"
    fake.write_text("just some text, renamed\n")
    code, out, err = run_cli(capsys, "refresh", str(fake))
    assert code == 1
    assert err.startswith("error: notes.xlsx: ") and "not a readable workbook" in err
    no_traceback(err)
    assert fake.read_text() == "just some text, renamed\n"


def test_workbook_without_a_job_table(tmp_path, capsys):
    path = write_book(tmp_path / "plain.xlsx", {"Macro": macrodata_rows(40)})
    before = file_state(path)
    code, out, err = run_cli(capsys, "refresh", str(path))
    assert code == 1 and "has no job table" in err and "tocsin init" in err
    assert file_state(path) == before


def test_one_failing_workbook_does_not_stop_the_next(tmp_path, capsys):
    good = macro_book(tmp_path / "good.xlsx")
    code, out, err = run_cli(capsys, "refresh", str(tmp_path / "gone.xlsx"), str(good))
    assert code == 1 and "gone.xlsx" in err
    assert out.startswith("good.xlsx: refreshed")
    check_book(good)


@pytest.mark.parametrize("owner", ["~$busy.xlsx", ".~lock.busy.xlsx#"])
def test_workbook_open_in_a_spreadsheet_program_is_left_alone(tmp_path, capsys, owner):
    path = macro_book(tmp_path / "busy.xlsx", stop=60)
    (tmp_path / owner).write_text("owner")
    before = file_state(path)
    code, out, err = run_cli(capsys, "refresh", str(path))
    assert code == 1 and out.startswith("busy.xlsx: busy")
    assert err.startswith("error: busy.xlsx: not refreshed: open in a spreadsheet program")
    assert file_state(path) == before
    (tmp_path / owner).unlink()
    code, out, err = run_cli(capsys, "refresh", str(path))
    assert code == 0 and out.startswith("busy.xlsx: refreshed")


def test_read_only_workbook_is_left_alone(tmp_path, capsys):
    """A workbook marked read-only (mode 444) is not replaced, even by a user (root) who could: status
    "readonly", exit 1, the file as it was; once writable again it is refreshed."""
    path = macro_book(tmp_path / "locked.xlsx", stop=60)
    path.chmod(0o444)
    before = file_state(path)
    code, out, err = run_cli(capsys, "refresh", "--json", str(path))
    [rep] = json.loads(out)
    assert code == 1 and rep["status"] == "readonly" and rep["jobs"] == []
    assert err.startswith("error: locked.xlsx: not refreshed: locked.xlsx is read-only")
    assert file_state(path) == before and path.stat().st_mode & 0o777 == 0o444
    path.chmod(0o644)
    code, out, err = run_cli(capsys, "refresh", str(path))
    assert code == 0 and out.startswith("locked.xlsx: refreshed"), err


# ---------------------------------------------------------------------------------- invalid settings

# (setting, value, what the message must say): a few of the documented errors of watcher/jobs.py
# (its own tests cover every one); here: that the command reports them and writes the failed sheet.
BAD_SETTINGS = [
    ("validation", "soon", "`validation` must be a number of periods or a date; got 'soon' in row 3"),
    ("horizon", 0, "`horizon`"),
    ("event", ">>3", ">>3"),
    ("value_column", "Real GPD", "Real GDP"),          # the closest header is suggested
    ("refit", "sometimes", "`refit`"),
    ("cutoff", 1.5, "`cutoff`"),
    ("enabled", "perhaps", "`enabled`"),
    ("min_run", 0, "`min_run`"),
]


@pytest.mark.parametrize("setting, value, says", BAD_SETTINGS, ids=[b[0] for b in BAD_SETTINGS])
def test_invalid_setting_beside_a_good_job(tmp_path, capsys, setting, value, says):
    """One bad job beside a good one: the good one is written (its numbers the core's), the bad one
    gets its forecast sheet with the error in the status line (red fill), exit 1."""
    bad = {**GDP_JOB, "job": "bad job", setting: value}
    path = macro_book(tmp_path / "two.xlsx", GDP_JOB, bad)
    code, out, err = run_cli(capsys, "refresh", str(path))
    assert code == 1
    no_traceback(out, err)
    lines = err.splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: two.xlsx: job 'bad job': ")
    assert says in lines[0] and "row 3" in lines[0] and "sheet tocsin" in lines[0]
    assert "  gdp fall: ok; " in out and "  bad job: FAILED: " in out
    value_text, fill = status_cell(path, "bad job forecast")
    assert value_text.startswith("failed: ") and says in value_text
    assert fill == "FFF8D8D3"  # the warning fill of watcher/xlsx/styles.py (light red)
    assert set(package.Package.open(path).owned) == {"gdp fall forecast", "gdp fall profile",
                                                     "bad job forecast"}
    check_book(path, all_valid=False)  # the good job, against the core


def test_unknown_setting_name_suggests_the_closest(tmp_path, capsys):
    table = job_table(GDP_JOB)
    table[0].append("horizn")
    table[1].append(2)
    path = write_book(tmp_path / "unk.xlsx", {"Macro": macrodata_rows(), "tocsin": table})
    code, out, err = run_cli(capsys, "refresh", str(path))
    assert code == 1
    assert "unknown setting 'horizn' in cell V1 of sheet tocsin; did you mean 'horizon'?" in err
    no_traceback(err)


# --------------------------------------------------------------------------------- ownership

def test_user_sheet_named_like_an_output_sheet(tmp_path, capsys):
    """A user's sheet called 'gdp fall forecast' is never written over: that job fails naming the
    sheet, the user's sheet keeps its bytes, and the other job is written."""
    other = {**GDP_JOB, "job": "unemployment up", "value_column": "Unemployment", "event": "rise"}
    path = macro_book(tmp_path / "mine.xlsx", GDP_JOB, other,
                      extra={"gdp fall forecast": [["my own notes", 42]]})
    mine = sheet_part_bytes(path, "gdp fall forecast")
    code, out, err = run_cli(capsys, "refresh", str(path))
    assert code == 1
    no_traceback(err)
    assert "error: mine.xlsx: job 'gdp fall': sheet 'gdp fall forecast' is not tocsin's" in err
    assert sheet_part_bytes(path, "gdp fall forecast") == mine
    pkg = package.Package.open(path)
    assert "gdp fall forecast" not in pkg.owned
    assert set(pkg.owned) == {"unemployment up forecast", "unemployment up profile"}
    assert grid_openpyxl(path, "gdp fall forecast") == [["my own notes", 42]]
    # the other job holds the core's numbers
    core = core_reference(path, "unemployment up")
    check_forecast_sheet(grid_openpyxl(path, "unemployment up forecast"), core, "openpyxl")
    # a second run changes nothing and still fails, naming the sheet
    before = file_state(path)
    code, out, err = run_cli(capsys, "refresh", str(path))
    assert code == 1 and "'gdp fall forecast'" in err
    assert file_state(path) == before
    # check says the same and writes nothing
    code, out, err = run_cli(capsys, "check", str(path))
    assert code == 1 and "'gdp fall forecast' is not tocsin's" in err
    assert file_state(path) == before


# ------------------------------------------------------------------------------------------- JSON

def test_json_report(tmp_path, capsys):
    path = macro_book(tmp_path / "j.xlsx", GDP_JOB, {**GDP_JOB, "job": "broken", "horizon": -1},
                      stop=190)
    code, out, err = run_cli(capsys, "refresh", "--json", str(path), str(tmp_path / "none.xlsx"))
    assert code == 1
    report = json.loads(out)
    assert [r["workbook"] for r in report] == [str(path), str(tmp_path / "none.xlsx")]
    first, second = report
    assert first["status"] == "refreshed" and first["ok"] is False
    assert isinstance(first["duration_s"], float)
    assert set(first) == {"workbook", "status", "ok", "message", "duration_s", "jobs"}
    jobs = {j["job"]: j for j in first["jobs"]}
    assert set(jobs) == {"gdp fall", "broken"}
    assert all(set(j) == {"job", "status", "message", "sheet", "next_period", "next_probability",
                          "best_method", "warnings", "future", "alert"} for j in jobs.values())
    good = jobs["gdp fall"]
    core = core_reference(path, "gdp fall")
    assert good["status"] == "ok" and good["sheet"] == "gdp fall forecast"
    # 2 falls of real GDP in the 38 validation quarters: too few to rank, so no method is named
    assert core.ev.best is None and good["best_method"] is None
    assert good["message"] == core.ev.verdict and good["message"].startswith("Too few events to rank")
    # the data end with an observed quarter (2006Q2, 190 quarters from 1959Q1): tocsin adds the next
    # quarter end as the future period (DESIGN.md §3)
    assert good["next_period"] == "2006-09-30"
    assert jobs["broken"]["status"] == "failed" and "`horizon`" in jobs["broken"]["message"]
    assert second["status"] == "failed" and second["ok"] is False and second["jobs"] == []
    assert "does not exist" in second["message"]


def test_json_next_forecast_is_the_best_methods(tmp_path, capsys):
    rows = macrodata_rows()
    rows.append([rows[-1][0].replace(year=rows[-1][0].year + 1), None, None, None])  # a future row
    rising = {**GDP_JOB, "job": "unemployment up", "value_column": "Unemployment", "event": "rise"}
    path = write_book(tmp_path / "f.xlsx", {"Macro": rows, "tocsin": job_table(rising)})
    code, out, err = run_cli(capsys, "refresh", "--json", str(path))
    assert code == 0, err
    job = json.loads(out)[0]["jobs"][0]
    core = core_reference(path, "unemployment up")
    assert core.ev.best is not None
    assert job["best_method"] == METHOD_LABELS[core.ev.best]
    assert job["next_period"] == str(core.data.dates[core.ev.last_observed + 1].astype("datetime64[D]"))
    assert job["next_probability"] == core.ev.headline()[core.ev.best][1]


def test_a_0_1_best_method_is_never_reported_as_a_chance(tmp_path, capsys):
    """An invented alarm that sounds every third period: the seasonal naive forecast (season 3) is
    perfect and named best, and it is a 0/1 forecast -- the report and the command give no
    probability for it (DESIGN.md §8)."""
    rows = [["Alarm"]] + [[1 if i % 3 == 0 else 0] for i in range(180)]
    job = {"job": "every third", "data_sheet": "Log", "value_column": "Alarm", "event": "=1", "season": 3}
    path = write_book(tmp_path / "s.xlsx", {"Log": rows, "tocsin": job_table(job)})
    code, out, err = run_cli(capsys, "refresh", "--json", str(path))
    assert code == 0, err
    rep = json.loads(out)[0]["jobs"][0]
    core = core_reference(path, "every third")
    assert core.ev.best == "seasonal_roll" and core.ev.scorecard["seasonal_roll"]["brier"] == 0.0
    assert rep["best_method"] == "rolling seasonal naive" and rep["next_period"] == "row 181"
    assert rep["next_probability"] is None
    code, out, err = run_cli(capsys, "refresh", "--force", str(path))
    assert code == 0, err
    line = out.splitlines()[1]
    assert line == ("  every third: ok; next period row 181: event forecast (best: rolling seasonal "
                    "naive)"), line


# ------------------------------------------------------------------------------------------- check

def test_check_prints_the_scorecard_and_writes_nothing(tmp_path, capsys):
    path = macro_book(tmp_path / "c.xlsx")
    before = file_state(path)
    code, out, err = run_cli(capsys, "check", str(path))
    assert code == 0 and err == ""
    assert file_state(path) == before
    core = core_reference(path, "gdp fall")
    assert f"== gdp fall ({core.ev.train_size} training" in out
    # every method is named in the two header lines (long names are split over both)
    lines = out.splitlines()
    top = next(i for i, line in enumerate(lines) if line.startswith("== gdp fall")) + 1
    for m in core.ev.methods:
        first, second = _two_lines(m.label)
        assert first in lines[top] and second in lines[top + 1], m.label
    for _key, label, _fmt, _better in SCORE_ROWS:
        assert label in out
    assert core.ev.verdict in out
    brier = [line for line in out.splitlines() if line.startswith("Brier score")][0]
    lowest = core.ev.scorecard[core.ev.lowest]["brier"]      # the star marks the row's best value
    assert f"{lowest:.3f}*" in brier
    assert out.rstrip().endswith("c.xlsx: ok")


def test_check_reports_errors_with_exit_1(tmp_path, capsys):
    path = macro_book(tmp_path / "c.xlsx", {**GDP_JOB, "lags": "many"})
    before = file_state(path)
    code, out, err = run_cli(capsys, "check", str(path))
    assert code == 1 and err.startswith("error: c.xlsx: `lags`") and "row 2" in err
    assert "problems found" in out
    assert file_state(path) == before
    code, out, err = run_cli(capsys, "check", str(tmp_path / "absent.xlsx"))
    assert code == 1 and "does not exist" in err
    no_traceback(out, err)


# ------------------------------------------------------------------------------------------- usage

@pytest.mark.parametrize("argv", [[], ["refresh"], ["frobnicate", "x.xlsx"], ["init", "x.xlsx"],
                                  ["refresh", "--bogus", "x.xlsx"]])
def test_usage_errors_exit_2(capsys, argv):
    if argv:
        with pytest.raises(SystemExit) as exc:
            run_cli(capsys, *argv)
        code = exc.value.code
        err = capsys.readouterr().err
        assert "error: " in err
    else:
        code, out, err = run_cli(capsys)
        assert "usage: tocsin" in out
    assert code == 2


# -------------------------------------------------------------------------------------------- demo

def test_demo(tmp_path, capsys):
    target = tmp_path / "demo here"
    code, out, err = run_cli(capsys, "demo", str(target))
    assert code == 0, err
    no_traceback(out, err)
    for name in ("island_ferry.xlsx", "bakery_sales.xlsx", "pump_station.xlsx"):
        book = target / name
        assert str(book) in out
        owned = package.Package.open(book).owned
        assert any(s.endswith(" forecast") for s in owned) and any(s.endswith(" profile") for s in owned)
    assert out.count("scorecard of '") == 4  # ferry 2 jobs, bakery 1, pump 1
    assert f"tocsin watch {target}" in out and "Caution:" in out
    # the sample workbooks themselves are untouched
    assert package.Package.open(SAMPLES / "island_ferry.xlsx").owned == ()


# -------------------------------------------------------------------------------------------- init

def test_init_refuses_a_workbook_with_a_job_table(tmp_path, capsys):
    path = macro_book(tmp_path / "i.xlsx")
    before = file_state(path)
    code, out, err = run_cli(capsys, "init", str(path), "--sheet", "Macro", "--value", "Real GDP",
                             "--event", "fall")
    assert code == 1 and "already has a job table" in err
    assert file_state(path) == before


@pytest.mark.parametrize("args, says", [
    (["--sheet", "Macr", "--value", "Real GDP", "--event", "fall"], "Macro"),
    (["--sheet", "Macro", "--value", "Real GPD", "--event", "fall"], "Real GDP"),
    (["--sheet", "Macro", "--value", "Real GDP", "--event", "fal"], "fal"),
], ids=["sheet", "value", "event"])
def test_init_errors(tmp_path, capsys, args, says):
    path = write_book(tmp_path / "i.xlsx", {"Macro": macrodata_rows(40)})
    before = file_state(path)
    code, out, err = run_cli(capsys, "init", str(path), *args)
    assert code == 1 and err.startswith("error: ") and says in err
    no_traceback(err)
    assert file_state(path) == before


def test_debug_shows_the_traceback(tmp_path):
    from sheetfns.errors import TocsinError
    from watcher import cli
    from watcher.xlsx.errors import XlsxError
    with pytest.raises((TocsinError, XlsxError)):
        cli.main(["--debug", "init", str(tmp_path / "no.xlsx"), "--sheet", "S", "--value", "V",
                  "--event", ">1"])


def test_internal_error_without_traceback(tmp_path, capsys, monkeypatch):
    from watcher.refresh import workbook as refresh
    def broken(*args, **kwargs):
        raise RuntimeError("something we did not expect")

    monkeypatch.setattr(refresh, "refresh_workbook", broken)
    code, out, err = run_cli(capsys, "refresh", str(tmp_path / "x.xlsx"))
    assert code == 1
    assert err.startswith("error: internal error (RuntimeError: something we did not expect); run the "
                          "command again with --debug")
    no_traceback(err)
    with pytest.raises(RuntimeError):
        run_cli(capsys, "--debug", "refresh", str(tmp_path / "x.xlsx"))




def test_init_then_refresh(tmp_path, capsys):
    path = write_book(tmp_path / "new.xlsx", {"Macro": macrodata_rows()})
    code, out, err = run_cli(capsys, "init", str(path), "--sheet", "macro", "--value", "Real GDP",
                             "--event", "fall")
    assert code == 0, err
    assert "added sheet 'tocsin' with job 'Real GDP fall'" in out
    pkg = package.Package.open(path)
    assert pkg.sheet_names == ("Macro", "tocsin") and pkg.owned == ()  # the job table is the user's
    grid = grid_openpyxl(path, "tocsin")
    assert grid[1][:5] == ["Real GDP fall", "Macro", "Quarter end", "Real GDP", "fall"]  # date guessed
    code, out, err = run_cli(capsys, "refresh", str(path))
    assert code == 0, err
    check_book(path)


def test_init_guesses_dates_only_from_date_cells(tmp_path, capsys):
    """A sheet whose first column is a plain number column named ``Demand`` (statsmodels' macrodata:
    real personal consumption expenditure, quarterly 1959-2009, FRED via statsmodels.datasets) has no
    date column: numbers are never guessed as serial dates, and ``init`` says so."""
    from statsmodels.datasets import macrodata

    df = macrodata.load_pandas().data
    rows = [["Demand", "Unemployment"]] + [[float(a), float(b)] for a, b in zip(df.realcons, df.unemp,
                                                                                strict=True)]
    path = write_book(tmp_path / "demand.xlsx", {"Demand": rows})
    code, out, err = run_cli(capsys, "init", str(path), "--sheet", "Demand", "--value", "Demand",
                             "--event", "fall")
    assert code == 0, err
    assert "no column of sheet 'Demand' holds dates, so the job has no date column" in out
    grid = grid_openpyxl(path, "tocsin")
    assert grid[1][:5] == ["Demand fall", "Demand", None, "Demand", "fall"]
    code, out, err = run_cli(capsys, "refresh", "--json", str(path))
    assert code == 0, err
    assert json.loads(out)[0]["jobs"][0]["next_period"] == f"row {len(df) + 1}"
    # a column headed "Date" that holds numbers is no date column either; ISO date text is one
    text = [["Date", "Week of", "Demand"]] + [[float(i), f"2024-{1 + i // 28:02d}-{1 + i % 28:02d}", float(v)]
                                              for i, v in enumerate(df.realcons[:100])]
    path = write_book(tmp_path / "text.xlsx", {"D": text})
    code, out, err = run_cli(capsys, "init", str(path), "--sheet", "D", "--value", "Demand",
                             "--event", "rise")
    assert code == 0, err
    assert "date column 'Week of' (guessed: its cells are dates)" in out
    assert grid_openpyxl(path, "tocsin")[1][2] == "Week of"
