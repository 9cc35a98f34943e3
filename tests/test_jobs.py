"""watcher.refresh.jobs: the job table of DESIGN.md §7 -- defaults, one test per documented error, the
closest-name suggestion, a good job beside a bad one, enabled TRUE/FALSE/blank, dates in `validation`,
and the data-dependent checks of :func:`watcher.refresh.jobs.resolve`.

The defaults checked here are the ones DESIGN.md §7 fixes (season 7/52/12/4/1 and cycle
365.25/52.18/12/none by date frequency; cutoff from the costs as cFA / (cFA + cMiss), the static
cost-loss cutoff of Murphy, A. H. (1977), "The value of climatological, categorical and probabilistic
forecasts in the cost-loss ratio situation", Monthly Weather Review 105, 803-816).
"""
from __future__ import annotations

import datetime as dt
import importlib.util
import zipfile
from pathlib import Path

import pytest
from openpyxl import Workbook
from test_refresh import write_book

from sheetfns.errors import TocsinError
from watcher.refresh import jobs
from watcher.refresh.errors import JobError
from watcher.refresh.jobs import SETTINGS, read_job_table, resolve
from watcher.refresh.reader import open_book
from watcher.refresh.sheetnames import output_names
from watcher.xlsx.spec import check_sheet_name

SAMPLES = Path(__file__).resolve().parent.parent / "sample_workbooks"
START = dt.date(2024, 1, 1)
BASE = {"job": "busy", "data_sheet": "Data", "date_column": "Date", "value_column": "Value",
        "event": ">=5"}


def _data_rows(n: int = 60, future: int = 3, step: int = 1, monthly: bool = False) -> list[list]:
    rows = [["Date", "Value", "Other", "Flag", "Empty"]]
    for i in range(n + future):
        if monthly:
            day = dt.date(2015 + i // 12, i % 12 + 1, 1)
        else:
            day = START + dt.timedelta(days=i * step)
        obs = i < n
        rows.append([day, (i * 7) % 10 if obs else None, float(i % 3) if obs else None, i % 2, None])
    return rows


def _book(tmp_path: Path, table: list[list] | None, *, data: list[list] | None = None,
          name: str = "b.xlsx", extra: dict[str, list[list]] | None = None) -> Path:
    """A workbook with sheet 'Data' and a job table 'tocsin' (rows as given, header first)."""
    wb = Workbook()
    ws = wb.active
    ws.title = "Data"
    for row in data if data is not None else _data_rows():
        ws.append(row)
    for sheet, rows in {**({"tocsin": table} if table is not None else {}), **(extra or {})}.items():
        t = wb.create_sheet(sheet)
        for row in rows:
            t.append(row)
        for row in t.iter_rows():
            for cell in row:
                if isinstance(cell.value, str) and cell.value.startswith("="):
                    cell.data_type = "s"          # a criterion typed as '=1, not a formula
    path = tmp_path / name
    wb.save(path)
    return path


def _table(*specs: dict, header: list[str] | None = None) -> list[list]:
    header = header or list(SETTINGS)
    return [header] + [[spec.get(h) for h in header] for spec in specs]


def _read(tmp_path: Path, *specs: dict, **kw) -> jobs.JobTable:
    return read_job_table(_book(tmp_path, _table(*specs), **kw))


def _one_error(table: jobs.JobTable) -> jobs.RowError:
    assert table.jobs == () and len(table.errors) == 1, table.errors
    return table.errors[0]


def _resolved(path: Path, **changes) -> jobs.Job:
    with open_book(path) as book:
        table = read_job_table(book)
        assert table.ok, table.errors
        job = table.jobs[0]
        data = book.read(job.data_sheet, job.columns, date_column=job.date_column,
                         text_columns=job.text_columns)
        return resolve(job, data)


# ------------------------------------------------------------------------------------------ defaults

def test_defaults_of_a_minimal_row(tmp_path):
    table = _read(tmp_path, BASE)
    assert table.ok and table.sheet == "tocsin" and table.header_row == 1
    (job,) = table.jobs
    assert (job.name, job.row, job.data_sheet, job.value_column, job.date_column) == \
        ("busy", 2, "Data", "Value", "Date")
    assert (job.min_run, job.harmonics, job.horizon, job.lags, job.refit) == (1, 2, 1, 1, "fixed")
    assert (job.cost_false_alarm, job.cost_miss, job.cutoff) == (1.0, 1.0, 0.5)
    assert (job.output_sheet, job.profile_sheet, job.enabled) == ("busy forecast", "busy profile", True)
    assert (job.season, job.cycle, job.validation) == (None, None, None)
    assert (job.predictors, job.known_ahead) == ((), ())
    assert job.criterion.kind == "compare" and job.criterion.threshold == 5.0
    assert job.defaults == frozenset(SETTINGS) - set(BASE)
    assert job.columns == ("Value",) and job.text_columns == ()
    assert dict(job.settings)["event"] == ">=5"


@pytest.mark.parametrize("step, monthly, freq, season, cycle", [
    (1, False, "daily", 7, 365.25), (7, False, "weekly", 52, 52.18), (1, True, "monthly", 12, 12.0),
    (2, False, None, 1, None)])      # every other day: no frequency -> 1 and none (DESIGN.md §7)
def test_season_and_cycle_defaults_follow_the_date_frequency(tmp_path, step, monthly, freq, season, cycle):
    job = _resolved(_book(tmp_path, _table(BASE), data=_data_rows(step=step, monthly=monthly)))
    assert (job.frequency, job.season, job.cycle, job.resolved) == (freq, season, cycle, True)
    assert job.train_size == 60 - 12        # default validation: the last 20% of 60 observed rows


def test_no_date_column_means_periods_season_one_and_no_cycle(tmp_path):
    job = _resolved(_book(tmp_path, _table({**BASE, "date_column": None})))
    assert (job.date_column, job.frequency, job.season, job.cycle) == (None, None, 1, None)


def test_explicit_season_and_cycle_are_kept(tmp_path):
    job = _resolved(_book(tmp_path, _table({**BASE, "season": 14, "cycle": "none"})))
    assert (job.season, job.cycle) == (14, None)
    job = _resolved(_book(tmp_path, _table({**BASE, "cycle": 30.5}), name="c.xlsx"))
    assert job.cycle == 30.5


def test_cutoff_from_costs_and_explicit_cutoff(tmp_path):
    (job,) = _read(tmp_path, {**BASE, "cost_false_alarm": 1, "cost_miss": 4}).jobs
    assert job.cutoff == pytest.approx(1 / (1 + 4))          # cFA / (cFA + cMiss) = 0.2
    (job,) = _read(tmp_path, {**BASE, "cost_miss": 3}, name="c.xlsx").jobs
    assert (job.cost_false_alarm, job.cutoff) == (1.0, pytest.approx(0.25))
    (job,) = _read(tmp_path, {**BASE, "cutoff": 0.3, "cost_miss": 4}, name="d.xlsx").jobs
    assert (job.cutoff, job.cost_miss) == (0.3, 4.0)       # an explicit cutoff wins; costs still kept


def test_other_settings_are_read(tmp_path):
    spec = {**BASE, "min_run": 2, "harmonics": 0, "horizon": "3", "lags": 0, "refit": " Roll  5 ",
            "predictors": "Other, Empty", "known_ahead": "d", "output_sheet": "Busy days"}
    (job,) = _read(tmp_path, spec).jobs
    assert (job.min_run, job.harmonics, job.horizon, job.lags, job.refit) == (2, 0, 3, 0, "roll 5")
    assert job.predictors == ("Other", "Empty") and job.known_ahead == ("d",)
    assert (job.output_sheet, job.profile_sheet) == ("Busy days", "Busy days profile")
    assert job.columns == ("Value", "Other", "Empty", "d")


def test_setting_names_are_case_and_space_insensitive_and_notes_are_ignored(tmp_path):
    header = ["Job", "Data Sheet", "date-column", " VALUE_COLUMN ", "event", "Cost miss", "notes"]
    rows = [header, ["busy", "Data", "Date", "Value", ">=5", 4, "my own remark"]]
    table = read_job_table(_book(tmp_path, rows))
    assert table.ok and table.jobs[0].cutoff == pytest.approx(0.2)


def test_table_ends_at_the_first_blank_row(tmp_path):
    rows = _table(BASE) + [[None] * len(SETTINGS), [jobs.TABLE_NOTE]] + _table({**BASE, "job": "late"})[1:]
    table = read_job_table(_book(tmp_path, rows))
    assert table.ok and [j.name for j in table.jobs] == ["busy"]


def test_text_criterion_asks_for_the_text_column(tmp_path):
    (job,) = _read(tmp_path, {**BASE, "event": "=alarm"}).jobs
    assert job.text_columns == ("Value",)


def test_number_in_the_event_cell_means_equals(tmp_path):
    # a user typing =1 in a spreadsheet cell gets a formula whose value is the number 1
    (job,) = _read(tmp_path, {**BASE, "event": 1}).jobs
    assert job.event == "=1" and job.criterion.op == "=" and job.criterion.threshold == 1.0


# ------------------------------------------------------------------------------------------- enabled

@pytest.mark.parametrize("cell, enabled", [(True, True), (False, False), (None, True), ("no", False),
                                           ("TRUE", True), (1, True), (0, False)])
def test_enabled_true_false_blank(tmp_path, cell, enabled):
    table = _read(tmp_path, {**BASE, "enabled": cell})
    assert table.ok
    assert [j.name for j in table.jobs] == (["busy"] if enabled else [])
    assert [(d.name, d.row) for d in table.disabled] == ([] if enabled else [("busy", 2)])


def test_enabled_must_be_true_or_false(tmp_path):
    err = _one_error(_read(tmp_path, {**BASE, "enabled": "maybe"}))
    assert err.message == "`enabled` must be TRUE or FALSE; got 'maybe' in row 2 of sheet tocsin"
    assert (err.job, err.row, err.setting) == ("busy", 2, "enabled")


def test_disabled_row_is_not_validated(tmp_path):
    table = _read(tmp_path, {**BASE, "enabled": False, "horizon": 0, "event": ">>"})
    assert table.ok and table.jobs == () and table.disabled[0].name == "busy"


# --------------------------------------------------------------------------- one test per error

@pytest.mark.parametrize("setting", ["job", "data_sheet", "value_column", "event"])
def test_required_settings(tmp_path, setting):
    err = _one_error(_read(tmp_path, {**BASE, setting: None}))
    assert err.setting == setting
    assert err.message.startswith(f"`{setting}` is required; got a blank in row 2 of sheet tocsin")


def test_unknown_setting_with_closest_name(tmp_path):
    header = list(SETTINGS[:5]) + ["horizn"]
    rows = [header, ["a", "Data", "Date", "Value", ">=5", 7],      # a value under the bad header
            ["b", "Data", "Date", "Value", ">=5", None]]          # nothing under it: runs
    table = read_job_table(_book(tmp_path, rows))
    assert [j.name for j in table.jobs] == ["b"]
    first = table.errors[0]
    assert first.message == "unknown setting 'horizn' in cell F1 of sheet tocsin; did you mean 'horizon'?"
    assert (first.row, first.job) == (1, None)
    assert table.errors[1].row == 2 and table.errors[1].job == "a"
    assert "cell F2 holds 7 under an invalid header" in table.errors[1].message


def test_unknown_setting_without_close_name_lists_the_settings(tmp_path):
    rows = [list(SETTINGS[:5]) + ["zzz"], ["a", "Data", "Date", "Value", ">=5", None]]
    table = read_job_table(_book(tmp_path, rows))
    assert "unknown setting 'zzz' in cell F1 of sheet tocsin; the settings are job, data_sheet" in \
        table.errors[0].message
    assert [j.name for j in table.jobs] == ["a"]


def test_setting_given_twice(tmp_path):
    rows = [list(SETTINGS[:5]) + ["Horizon", "horizon"], ["a", "Data", "Date", "Value", ">=5", 2, 3]]
    table = read_job_table(_book(tmp_path, rows))
    assert table.errors[0].message == ("setting 'horizon' appears twice in the header row of sheet "
                                       "tocsin: cells F1 and G1")
    assert table.jobs == ()


def test_good_job_beside_a_bad_one(tmp_path):
    table = _read(tmp_path, {**BASE, "job": "good"}, {**BASE, "job": "bad", "validation": "soon"},
                  {**BASE, "job": "also good", "horizon": 2})
    assert [j.name for j in table.jobs] == ["good", "also good"]
    err = _one_error(jobs.JobTable(table.book, table.sheet, (), table.errors))
    assert err.message == ("`validation` must be a number of periods or a date; got 'soon' in row 3 of "
                           "sheet tocsin")
    assert (err.job, err.row, err.setting) == ("bad", 3, "validation")
    assert table.failed() == {3: [err]}


def test_all_problems_of_a_row_are_reported(tmp_path):
    table = _read(tmp_path, {**BASE, "horizon": 0, "lags": -1, "cutoff": 2})
    assert [e.setting for e in table.errors] == ["horizon", "lags", "cutoff"]


@pytest.mark.parametrize("setting, value, expected", [
    ("min_run", 0, "must be a whole number >= 1"), ("horizon", 0, "must be a whole number >= 1"),
    ("horizon", 1.5, "must be a whole number >= 1"), ("season", "weekly", "must be a whole number >= 1"),
    ("lags", -1, "must be a whole number >= 0"), ("harmonics", 2.5, "must be a whole number >= 0"),
    ("horizon", True, "must be a whole number >= 1")])
def test_whole_number_settings(tmp_path, setting, value, expected):
    err = _one_error(_read(tmp_path, {**BASE, setting: value}))
    shown = {True: "TRUE", "weekly": "'weekly'"}.get(value, f"{value}")
    assert err.message == f"`{setting}` {expected}; got {shown} in row 2 of sheet tocsin"


@pytest.mark.parametrize("value", [0, -3, "x"])
def test_cycle_must_be_positive_or_none(tmp_path, value):
    err = _one_error(_read(tmp_path, {**BASE, "cycle": value}))
    assert err.message.startswith("`cycle` must be a number of periods > 0, or none; got")


@pytest.mark.parametrize("value", ["sometimes", "roll 0", "roll x", 3])
def test_refit_grammar(tmp_path, value):
    err = _one_error(_read(tmp_path, {**BASE, "refit": value}))
    assert err.message.startswith("`refit` must be 'fixed', 'roll' or 'roll N' (N a whole number >= 1); got")


@pytest.mark.parametrize("value", [0, 1, 1.5, -0.1, "half"])
def test_cutoff_strictly_between_zero_and_one(tmp_path, value):
    err = _one_error(_read(tmp_path, {**BASE, "cutoff": value}))
    assert err.setting == "cutoff"
    assert "must be a number" in err.message and "in row 2 of sheet tocsin" in err.message


@pytest.mark.parametrize("setting", ["cost_false_alarm", "cost_miss"])
@pytest.mark.parametrize("value", [0, -1, "dear"])
def test_costs_positive(tmp_path, setting, value):
    err = _one_error(_read(tmp_path, {**BASE, setting: value}))
    assert err.setting == setting and err.message.startswith(f"`{setting}` must be a number")


def test_criterion_grammar_errors_quote_the_text(tmp_path):
    err = _one_error(_read(tmp_path, {**BASE, "event": ">>3"}))
    assert err.message.startswith("`event` must be a criterion such as '>=1150', 'fall' or '=alarm'; "
                                  "got '>>3' in row 2 of sheet tocsin; criterion '>>3'")


def test_validation_forms(tmp_path):
    for i, (cell, expected) in enumerate([(12, 12), ("12", 12), (dt.date(2024, 2, 1), dt.date(2024, 2, 1)),
                                          ("2024-02-01", dt.date(2024, 2, 1)),
                                          (dt.datetime(2024, 2, 1, 6, 0), dt.datetime(2024, 2, 1, 6, 0))]):
        (job,) = _read(tmp_path, {**BASE, "validation": cell}, name=f"v{i}.xlsx").jobs
        assert job.validation == expected, cell


def test_validation_date_gives_the_training_rows(tmp_path):
    job = _resolved(_book(tmp_path, _table({**BASE, "validation": dt.date(2024, 2, 10)})))
    assert job.train_size == (dt.date(2024, 2, 10) - START).days     # rows dated before 2024-02-10


@pytest.mark.parametrize("cell, message", [
    ("soon", "`validation` must be a number of periods or a date; got 'soon' in row 2 of sheet tocsin"),
    (0.2, "`validation` must be a whole number of periods or a date; got 0.2 in row 2 of sheet tocsin; "
          "for a share of the rows leave it blank (the default is the last 20%)"),
    (0, "`validation` must be a number of periods >= 1 or a date; got 0 in row 2 of sheet tocsin")])
def test_validation_errors(tmp_path, cell, message):
    assert _one_error(_read(tmp_path, {**BASE, "validation": cell})).message == message


def test_validation_date_needs_a_date_column(tmp_path):
    err = _one_error(_read(tmp_path, {**BASE, "date_column": None, "validation": dt.date(2024, 2, 1)}))
    assert err.message == ("`validation` can be a date only with a `date_column`; got 2024-02-01 in row 2 "
                           "of sheet tocsin; name the date column or give a number of periods")


def test_unique_job_names(tmp_path):
    table = _read(tmp_path, BASE, {**BASE, "job": "BUSY"})
    assert [j.name for j in table.jobs] == ["busy"]
    assert table.errors[0].message == ("`job` must be unique (row 2 has the same name); got 'BUSY' in row 3 "
                                       "of sheet tocsin")


def test_missing_data_sheet_suggests_the_closest(tmp_path):
    err = _one_error(_read(tmp_path, {**BASE, "data_sheet": "Dta"}))
    assert err.message == ("`data_sheet` must name a sheet of the workbook; got 'Dta' in row 2 of sheet "
                           "tocsin; did you mean 'Data'?")
    err = _one_error(_read(tmp_path, {**BASE, "data_sheet": "TOCSIN"}, name="c.xlsx"))
    assert "must be a data sheet, not the job table" in err.message


def test_data_sheet_must_not_be_empty(tmp_path):
    table = read_job_table(_book(tmp_path, _table({**BASE, "data_sheet": "Blank"}), extra={"Blank": []}))
    assert _one_error(table).message == (
        "`data_sheet` must name a sheet with a header row and data; got 'Blank' in row 2 of sheet tocsin; "
        "sheet 'Blank' in b.xlsx is empty; expected a header row and data rows")


@pytest.mark.parametrize("setting, value", [("value_column", "Valeu"), ("date_column", "Dates"),
                                            ("predictors", "Other, Othr"), ("known_ahead", "Flg")])
def test_missing_column_suggests_the_closest_header(tmp_path, setting, value):
    err = _one_error(_read(tmp_path, {**BASE, setting: value}))
    wrong = value.split(", ")[-1]
    assert err.setting == setting
    assert err.message.startswith(f"`{setting}` must name a column of sheet 'Data' (a header text or a "
                                  f"column letter); got {wrong!r} in row 2 of sheet tocsin; ")
    assert "did you mean" in err.message


def test_column_letters_and_column_outside_the_sheet(tmp_path):
    (job,) = _read(tmp_path, {**BASE, "value_column": "B", "date_column": "a"}).jobs
    assert (job.value_column, job.date_column) == ("B", "a")
    err = _one_error(_read(tmp_path, {**BASE, "value_column": "Q"}, name="c.xlsx"))
    assert err.message == ("`value_column` must name a column of sheet 'Data' (a header text or a column "
                           "letter); got 'Q' in row 2 of sheet tocsin; it is outside the used columns A:E")


def test_a_column_plays_one_role(tmp_path):
    err = _one_error(_read(tmp_path, {**BASE, "predictors": "value"}))
    assert err.message == ("`predictors` must not repeat the column already given as `value_column`; got "
                           "'value' in row 2 of sheet tocsin; its lag is already a term of the model")
    err = _one_error(_read(tmp_path, {**BASE, "predictors": "Other", "known_ahead": "C"}, name="c.xlsx"))
    assert err.setting == "known_ahead"


# The writer's sheet-name rule (watcher.xlsx.spec.check_sheet_name) is the job table's: each of these is
# refused as a job error naming the row, `output_sheet` and the value, with the writer's reason.
@pytest.mark.parametrize("value", ["x" * 32, "a/b", "'quoted'", "History", "HISTORY"])
def test_output_sheet_must_be_a_sheet_name_the_writer_accepts(tmp_path, value):
    with pytest.raises(ValueError) as writer:
        check_sheet_name(value)
    err = _one_error(_read(tmp_path, {**BASE, "output_sheet": value}))
    assert (err.row, err.setting, err.value) == (2, "output_sheet", value)
    assert err.message == (f"`output_sheet` must be a sheet name the workbook can hold; got {value!r} in "
                           f"row 2 of sheet tocsin; {writer.value}")


def test_job_name_with_a_control_character_is_an_error_of_that_row(tmp_path):
    # a bell character typed (or pasted) into a name cannot name a sheet; the row is named, not the book
    path = write_book(tmp_path / "b.xlsx", {"Data": _data_rows(), "tocsin": _table(
        {**BASE, "job": "bell\x07"}, {**BASE, "job": "calm", "event": "<5"})})
    table = read_job_table(path)
    assert [j.name for j in table.jobs] == ["calm"]
    [err] = table.errors
    assert (err.row, err.setting, err.value) == (2, "job", "bell\x07")
    assert err.message.startswith("`job` must be plain text without control characters; got 'bell\\x07' "
                                  "in row 2 of sheet tocsin")


def test_default_sheet_names_are_cut_to_fit_and_cleaned():
    assert output_names("high level alarm, station 4") == \
        ("high level alarm, stat forecast", "high level alarm, stat profile")
    assert all(len(n) <= 31 for n in output_names("x" * 40))
    assert output_names("in/out [A]") == ("in-out -A- forecast", "in-out -A- profile")
    assert output_names("j", "a" * 31)[1] == "a" * 23 + " profile"
    assert output_names("j", "Alarms FORECAST") == ("Alarms FORECAST", "Alarms profile")
    for name in ("bell\x07", "two\nlines", "'quoted'", "a:b", "History"):   # always names the writer takes
        assert all(check_sheet_name(n) == n for n in output_names(name)), name


def test_output_sheets_must_not_collide(tmp_path):
    table = _read(tmp_path, {**BASE, "job": "a", "output_sheet": "Shared"},
                  {**BASE, "job": "b", "output_sheet": "shared"})
    assert [j.name for j in table.jobs] == ["a"]
    assert table.errors[0].message.startswith("`output_sheet` must give each job its own sheets: 'shared' "
                                              "is also the forecast sheet of the job in row 2")
    # long names that agree in their first 22 characters collide by default
    long = "pump station high level alarm"
    table = _read(tmp_path, {**BASE, "job": long + " A"}, {**BASE, "job": long + " B"}, name="c.xlsx")
    assert len(table.jobs) == 1 and "set `output_sheet` to tell them apart" in table.errors[0].message


def test_output_sheet_must_not_be_a_data_sheet(tmp_path):
    err = _one_error(_read(tmp_path, {**BASE, "output_sheet": "data"}))
    assert err.message == ("`output_sheet` must not be a data sheet or the job table: 'data' is one; got "
                           "'data' in row 2 of sheet tocsin")


def test_workbook_without_a_job_table(tmp_path):
    with pytest.raises(JobError, match=r"b.xlsx has no job table: add a sheet named 'tocsin'"):
        read_job_table(_book(tmp_path, None))


def test_job_table_without_jobs_or_job_column(tmp_path):
    table = read_job_table(_book(tmp_path, [list(SETTINGS)]))
    assert table.jobs == () and "has no jobs" in table.errors[0].message
    table = read_job_table(_book(tmp_path, [["event"], [">=5"]], name="c.xlsx"))
    assert "has no `job` column" in table.errors[0].message


def test_empty_job_table_sheet(tmp_path):
    with pytest.raises(JobError, match="the job table .* is empty"):
        read_job_table(_book(tmp_path, [[]]))
    assert issubclass(JobError, TocsinError)


# ------------------------------------------------------------------------------ against the data

def _resolve_error(tmp_path, spec: dict, data: list[list] | None = None) -> str:
    with pytest.raises(JobError) as err:
        _resolved(_book(tmp_path, _table(spec), data=data))
    return str(err.value)


def test_validation_must_be_smaller_than_the_data(tmp_path):
    msg = _resolve_error(tmp_path, {**BASE, "validation": 60})
    assert msg.startswith("`validation` must leave rows for both training and validation; got 60 in row 2 "
                          "of sheet tocsin; `validation` 60 leaves no training rows")


@pytest.mark.parametrize("when, says", [(dt.date(2023, 12, 1), "leaves no training rows"),
                                        (dt.date(2024, 6, 1), "leaves no validation rows")])
def test_validation_date_must_fall_inside_the_data(tmp_path, when, says):
    msg = _resolve_error(tmp_path, {**BASE, "validation": when})
    assert msg.startswith(f"`validation` must leave rows for both training and validation; got "
                          f"{when.isoformat()} in row 2 of sheet tocsin") and says in msg


def test_horizon_must_be_shorter_than_the_data(tmp_path):
    msg = _resolve_error(tmp_path, {**BASE, "horizon": 60})
    assert msg.startswith("`horizon` must be shorter than the data: 60 rows up to the last observation allow "
                          "at most 59 with lags=1; got 60 in row 2 of sheet tocsin")


def test_season_must_be_shorter_than_the_data(tmp_path):
    msg = _resolve_error(tmp_path, {**BASE, "season": 60})
    assert msg == "`season` must be shorter than the 60 observed rows; got 60 in row 2 of sheet tocsin"


def test_date_column_must_hold_a_date_in_every_row(tmp_path):
    data = _data_rows()
    data[11][0] = None
    msg = _resolve_error(tmp_path, BASE, data)
    assert msg == ("`date_column` must hold a date in every data row; cell A12 of sheet 'Data' has none; "
                   "got 'Date' in row 2 of sheet tocsin")


def test_dates_must_increase(tmp_path):
    data = _data_rows()
    data[5][0], data[6][0] = data[6][0], data[5][0]
    msg = _resolve_error(tmp_path, BASE, data)
    assert msg.startswith("`date_column` must hold increasing dates; got 'Date' in row 2 of sheet tocsin;")
    assert msg.endswith("cell A7 (2024-01-05) of sheet 'Data' is earlier than cell A6 (2024-01-06): sort "
                        "the rows oldest first")


def test_predictor_needs_numbers(tmp_path):
    msg = _resolve_error(tmp_path, {**BASE, "predictors": "Empty"})
    assert msg == ("`predictors` must name columns holding numbers; column E ('Empty') has none; got "
                   "'Empty' in row 2 of sheet tocsin")


def test_value_column_without_values(tmp_path):
    data = [row[:2] + [1] for row in _data_rows()]
    for row in data[1:]:
        row[1] = "n/a"
    msg = _resolve_error(tmp_path, {**BASE, "value_column": "Value"}, data)
    assert msg.startswith("`value_column` must hold values the event can be read from; column B")


# ---------------------------------------------------------------------------- samples and init

def test_job_table_rows_round_trip(tmp_path):
    rows = jobs.job_table_rows([{**BASE, "event": "=1", "horizon": 2}])
    assert rows[0] == list(SETTINGS) and rows[-1][0] == jobs.TABLE_NOTE and rows[-2] == [None] * len(SETTINGS)
    (job,) = read_job_table(_book(tmp_path, rows)).jobs
    assert (job.event, job.horizon) == ("=1", 2)
    with pytest.raises(JobError, match="unknown setting 'horizn'; did you mean 'horizon'"):
        jobs.job_table_rows([{"horizn": 1}])


def test_sample_workbooks_tables_are_valid_and_resolve():
    spec = importlib.util.spec_from_file_location("make_samples", SAMPLES / "make_samples.py")
    make_samples = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(make_samples)
    assert make_samples.SETTINGS == SETTINGS and make_samples.NOTE == jobs.TABLE_NOTE
    seen = {}
    for name in ("island_ferry", "bakery_sales", "pump_station"):
        with open_book(SAMPLES / f"{name}.xlsx") as book:
            table = read_job_table(book)
            assert table.ok, table.errors
            for job in table.jobs:
                data = book.read(job.data_sheet, job.columns, date_column=job.date_column,
                                 text_columns=job.text_columns)
                seen[job.name] = resolve(job, data)
    ferry7 = seen["second sailing, 7 days"]
    assert ferry7.horizon == 7 and ferry7.validation == dt.date(2024, 1, 1)
    assert ferry7.train_size == (dt.date(2024, 1, 1) - dt.date(2017, 1, 1)).days
    assert (seen["sales fall"].season, seen["sales fall"].cycle) == (52, 52.18)
    pump = seen["high level alarm"]
    assert pump.cutoff == pytest.approx(0.2) and pump.known_ahead == ("planned_maintenance",)
    assert all(len(j.output_sheet) <= 31 and len(j.profile_sheet) <= 31 for j in seen.values())


def test_duplicate_dates_name_the_cells_of_the_data_sheet(tmp_path):
    # data[k] is sheet row k + 1 (the header is row 1): the message names sheet cells, not positions
    data = _data_rows()
    data[31][0] = data[30][0]
    msg = _resolve_error(tmp_path, BASE, data)
    assert msg == ("`date_column` must hold increasing dates; got 'Date' in row 2 of sheet tocsin; cells "
                   "A31 and A32 of sheet 'Data' both hold 2024-01-30")


def test_default_season_longer_than_the_data_says_it_is_the_default(tmp_path):
    # five months of data: the monthly default season 12 (DESIGN.md §7) does not fit; the user typed none
    data = _data_rows(n=5, future=0, monthly=True)
    msg = _resolve_error(tmp_path, BASE, data)
    assert msg == ("`season` must be shorter than the 5 observed rows; got a blank in row 2 of sheet tocsin; "
                   "the default for monthly data is 12: give a shorter season (1 for none) or add data")


def test_event_typed_as_a_formula_reads_blank_and_the_message_says_why(tmp_path):
    # '=alarm' typed without an apostrophe is the formula =alarm; a program saves its error result
    # (#NAME?, ECMA-376 Part 1 §18.3.1.4 cell type "e"), which reads as a blank cell
    path = _book(tmp_path, _table({**BASE, "event": "placeholder"}))
    with zipfile.ZipFile(path) as z:
        parts = {i.filename: z.read(i.filename) for i in z.infolist()}
    name = next(n for n in parts if n.startswith("xl/worksheets/") and b"placeholder" in parts[n])
    xml = parts[name].decode()
    start = xml.rindex("<c ", 0, xml.index("placeholder"))
    end = xml.index("</c>", start) + 4
    ref = xml[start:end].split('r="')[1].split('"')[0]
    parts[name] = (xml[:start] + f'<c r="{ref}" t="e"><f>alarm</f><v>#NAME?</v></c>' + xml[end:]).encode()
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as z:
        for n, b in parts.items():
            z.writestr(n, b)
    err = _one_error(read_job_table(path))
    assert err.setting == "event" and err.message.startswith("`event` is required; got a blank in row 2")
    assert "typed after an apostrophe, '=alarm" in err.message


def test_a_job_typed_into_the_blank_row_above_init_s_note(tmp_path):
    # `tocsin init` writes header, job, blank row, note: a second job typed into the blank row must
    # not turn the note into a third job
    rows = jobs.job_table_rows([BASE])
    rows[2] = [{**BASE, "job": "calm", "event": "<5"}.get(s) for s in SETTINGS]
    table = read_job_table(_book(tmp_path, rows))
    assert table.ok, table.errors
    assert [j.name for j in table.jobs] == ["busy", "calm"]
