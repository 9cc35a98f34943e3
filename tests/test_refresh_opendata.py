"""Real open data as an analyst has it: workbooks written by ``pandas.DataFrame.to_excel``, then
``tocsin init``, ``check`` and ``refresh`` through the command (``watcher.cli.main``), the sheets read
back with openpyxl and python-calamine.

Datasets (all shipped offline in the ``vega_datasets`` package, the Vega project's example data):

* ``seattle-weather``: daily weather in Seattle, 2012-01-01 to 2015-12-31, from NOAA via the Vega
  datasets. It ends on an observed day, so tocsin adds the next day(s) as future periods.
* ``ohlc``: daily open/high/low/close prices of a stock on the trading days of June and July 2009
  (Vega datasets). Trading days are business days (Monday to Friday, 3 July 2009 a market holiday).
* a newest-first export: ``seattle-weather`` written in reverse order (made here by reversing the real
  series, as exports often list the newest row first).
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import pytest
from test_refresh import check_book, grid_calamine, grid_openpyxl, run_cli
from vega_datasets import data as vega


def weather() -> pd.DataFrame:
    """seattle-weather (Vega datasets; NOAA): date, precipitation, temp_max, temp_min, wind, weather."""
    return vega.seattle_weather()


def ohlc() -> pd.DataFrame:
    """ohlc (Vega datasets): date, open, high, low, close, signal, ret for 44 trading days of 2009."""
    return vega.ohlc()


def to_book(path: Path, sheet: str, df: pd.DataFrame) -> Path:
    """The workbook an analyst makes: ``DataFrame.to_excel`` (openpyxl engine), no index column."""
    with pd.ExcelWriter(path, engine="openpyxl") as writer:
        df.to_excel(writer, sheet_name=sheet, index=False)
    return path


def row_table(grid: list[list]) -> pd.DataFrame:
    """The forecast sheet's row-by-row table (header in row 1, after the left panel and a blank column) as a
    DataFrame."""
    col = next(j for j in range(1, len(grid[0])) if grid[0][j] in ("date", "row") and grid[0][j - 1] is None)
    header = [h for h in grid[0][col:] if h is not None]
    rows = [r[col:col + len(header)] for r in grid[1:] if len(r) > col and r[col]]
    return pd.DataFrame(rows, columns=header)


def add_job(path: Path, **settings: object) -> None:
    """A colleague adds a row to the job table (openpyxl rewrites the file), copying the first job."""
    wb = openpyxl.load_workbook(path)
    ws = wb["tocsin"]
    names = [c.value for c in ws[1]]
    first = [c.value for c in ws[2]]
    ws.insert_rows(3)
    for j, name in enumerate(names):
        ws.cell(3, j + 1, settings.get(name, first[j]))
    wb.save(path)


def notes_of(grid: list[list]) -> str:
    """The sheet's notes as one text (a note is wrapped over rows of column B at spaces)."""
    r = next(i for i, row in enumerate(grid) if row and row[0] == "notes")
    out = []
    while r < len(grid) and grid[r][0] in ("notes", "", None) and grid[r][1]:
        out.append(str(grid[r][1]))
        r += 1
    return " ".join(out)


# --------------------------------------------------------------------------------- seattle-weather

def test_daily_weather_ending_on_an_observation_gets_next_day_forecasts(tmp_path, capsys):
    df = weather()
    assert str(df.date.iloc[-1].date()) == "2015-12-31" and df.precipitation.notna().all()
    path = to_book(tmp_path / "seattle.xlsx", "Weather", df)
    code, out, err = run_cli(capsys, "init", str(path), "--sheet", "Weather", "--value", "precipitation",
                             "--event", ">0", "--job", "wet day")
    assert code == 0, err
    add_job(path, job="wet week ahead", horizon=7)
    code, out, err = run_cli(capsys, "check", str(path))
    assert code == 0, err + out
    code, out, err = run_cli(capsys, "refresh", "--json", str(path))
    assert code == 0, err
    report = {j["job"]: j for j in json.loads(out)[0]["jobs"]}
    assert report["wet day"]["next_period"] == "2016-01-01"
    assert report["wet week ahead"]["next_period"] == "2016-01-01"
    cores = check_book(path)          # every number of both sheets against the core, by both readers
    wet = (df.precipitation > 0).astype(float).to_numpy()   # the event, counted with pandas
    for name, horizon in (("wet day", 1), ("wet week ahead", 7)):
        for read in (grid_openpyxl, grid_calamine):
            table = row_table(read(path, f"{name} forecast"))
            future = table[table["period"] == "future"]
            # the next `horizon` days after 2015-12-31, as pandas' calendar counts them
            assert list(pd.to_datetime(future["date"])) == list(pd.date_range("2016-01-01", periods=horizon))
            assert len(table) == len(df) + horizon
            # every method fills every future row; the rolling naive forecast for day T+k is the
            # event observed `horizon` days before it (persistence at the horizon)
            for col in table.columns[4:]:
                if col.startswith("residual"):   # what happened minus the forecast: nothing yet
                    assert future[col].isna().all(), (name, col)
                    continue
                assert future[col].notna().all(), (name, col)
            naive = future["rolling naive"].to_numpy(dtype=float)
            assert (naive == wet[len(df) - horizon + np.arange(horizon)]).all()
        ev = cores[name].ev
        periods = ev.future()
        assert len(periods) == horizon and [p.row for p in periods] == list(range(len(df), len(df) + horizon))
        assert all("logistic" in p.forecasts for p in periods)
        assert cores[name].job.frequency == "daily" and cores[name].job.season == 7


# ------------------------------------------------------------------------------------- ohlc (trading)

def test_trading_days_are_business_days(tmp_path, capsys):
    df = ohlc()
    assert set(pd.to_datetime(df.date).dt.day_of_week) == {0, 1, 2, 3, 4}
    path = to_book(tmp_path / "ohlc.xlsx", "Prices", df)
    code, out, err = run_cli(capsys, "init", str(path), "--sheet", "Prices", "--value", "close",
                             "--event", "rise", "--job", "close up")
    assert code == 0, err
    code, out, err = run_cli(capsys, "refresh", "--json", str(path))
    assert code == 0, err
    job = json.loads(out)[0]["jobs"][0]
    assert job["next_period"] == "2009-08-03"        # 31 July 2009 was a Friday: next comes Monday
    core = check_book(path)["close up"]
    assert core.job.frequency == "business" and core.job.season == 5
    grid = grid_openpyxl(path, "close up forecast")
    terms = [r[0] for r in grid[next(i for i, r in enumerate(grid) if r[0] == "term") + 1:] if r[0]]
    assert {"Tuesday", "Wednesday", "Thursday", "Friday"} <= set(terms)
    assert not {"Monday", "Saturday", "Sunday"} & set(terms)
    table = row_table(grid)
    # seasonal naive over 5 trading days: the event one trading week (5 rows) back, counted with pandas
    rise = (df.close.diff() > 0).astype(float).where(df.close.diff().notna()).to_numpy()
    seasonal = table["rolling seasonal naive"].to_numpy(dtype=float)[5:len(df)]
    want = rise[:len(df) - 5]
    ok = ~np.isnan(want)
    assert (seasonal[ok] == want[ok]).all()
    notes = notes_of(grid)
    # 3 July 2009 (Friday, Independence Day observed: a US market holiday, recalled from memory)
    holiday = ("1 business day (Monday to Friday) between the first and the last date has no row, read as "
               "holiday: 2009-07-03")
    assert holiday in notes
    assert "gap" not in notes                         # weekends are no gaps


# -------------------------------------------------------------------------------- newest-first export

def test_newest_first_export_is_read_in_time_order(tmp_path, capsys):
    df = weather()
    oldest = to_book(tmp_path / "oldest.xlsx", "Weather", df)
    newest = to_book(tmp_path / "newest.xlsx", "Weather", df.iloc[::-1].reset_index(drop=True))
    for path in (oldest, newest):
        code, out, err = run_cli(capsys, "init", str(path), "--sheet", "Weather", "--value", "temp_max",
                                 "--event", ">=25", "--job", "warm")
        assert code == 0, err
        code, out, err = run_cli(capsys, "refresh", str(path))
        assert code == 0, err + out
    a, b = grid_openpyxl(oldest, "warm forecast"), grid_openpyxl(newest, "warm forecast")
    ta, tb = row_table(a), row_table(b)
    pd.testing.assert_frame_equal(ta, tb)       # the same rows, oldest first, the same forecasts
    assert pd.to_datetime(tb["date"]).is_monotonic_increasing
    note = ("the dates run newest first (2015-12-31 in cell A2 down to 2012-01-01 in cell A1462 of sheet "
            "'Weather'): read in time order, oldest first; the data sheet is unchanged")
    assert note in notes_of(b) and note not in notes_of(a)
    data = grid_openpyxl(newest, "Weather")     # the user's sheet keeps its order
    assert str(data[1][0])[:10] == "2015-12-31" and str(data[-1][0])[:10] == "2012-01-01"


def test_other_disorder_names_the_cells_and_says_to_sort(tmp_path, capsys):
    df = weather().iloc[:200].copy()
    df.iloc[[50, 51]] = df.iloc[[51, 50]].to_numpy()        # two rows swapped by hand
    path = to_book(tmp_path / "swapped.xlsx", "Weather", df)
    code, out, err = run_cli(capsys, "init", str(path), "--sheet", "Weather", "--value", "wind",
                             "--event", ">5", "--job", "windy")
    assert code == 0, err
    code, out, err = run_cli(capsys, "refresh", str(path))
    assert code == 1
    assert ("cell A53 (2012-02-20) of sheet 'Weather' is earlier than cell A52 (2012-02-21): sort the "
            "rows oldest first") in err


@pytest.mark.parametrize("reverse", [False, True])
def test_warnings_are_the_sheet_notes(tmp_path, reverse):
    """A text cell read as missing (with its cell), a gap and the newest-first read are on the job's
    outcome as plain sentences, the same as the sheet's notes."""
    from watcher.refresh.workbook import evaluate_book

    df = weather().iloc[:400].copy()
    df["precipitation"] = df["precipitation"].astype(object)
    df.loc[10, "precipitation"] = "n/a"                        # a text cell among numbers
    df = df.drop(index=[100, 101, 102]).reset_index(drop=True)  # three days missing
    if reverse:
        df = df.iloc[::-1].reset_index(drop=True)
    path = to_book(tmp_path / "w.xlsx", "Weather", df)
    from watcher import cli
    assert cli.main(["init", str(path), "--sheet", "Weather", "--value", "precipitation", "--event", ">0",
                     "--job", "wet"]) == 0
    _table, outcomes = evaluate_book(path)
    (o,) = outcomes
    cell = f"B{2 + (len(df) - 1 - 10) if reverse else 12}"
    assert o.warnings[0] == f"{cell}: 'n/a' read as missing"
    assert ("1 gap in the daily dates (3 missing days); the first between row 100 (2012-04-09) and row "
            "101 (2012-04-13)") in o.warnings
    assert any(w.startswith("the dates run newest first") for w in o.warnings) == reverse
    assert ("1 row up to the last observation has no value in column B (blank, or a cell read as missing): "
            "the methods skip it") in o.warnings          # the row the 'n/a' cell drops
    assert o.notes[:len(o.warnings)] == o.warnings
