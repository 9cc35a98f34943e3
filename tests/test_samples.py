"""The sample workbooks: the generator is deterministic, the committed files hold what it generates,
the series have the properties the demo relies on, and LibreOffice opens them.

External check: LibreOffice headless (the real spreadsheet program) reads every committed sample and
exports every sheet to CSV; the dates and numbers it shows must be the ones the generator wrote.
"""
from __future__ import annotations

import csv
import importlib.util
import os
import subprocess
import sys
import tempfile
from pathlib import Path

import libreoffice  # tests/libreoffice.py (pytest puts tests/ on sys.path)
import pytest
from openpyxl import load_workbook

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "sample_workbooks"
NAMES = ("island_ferry", "bakery_sales", "pump_station")


def _load_generator():
    spec = importlib.util.spec_from_file_location("make_samples", SAMPLES / "make_samples.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


make_samples = _load_generator()


def _cells(path: Path) -> dict[str, list[tuple]]:
    wb = load_workbook(path, read_only=True)
    try:
        return {ws.title: [tuple(row) for row in ws.iter_rows(values_only=True)] for ws in wb.worksheets}
    finally:
        wb.close()


@pytest.fixture(scope="module")
def regenerated(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("samples")
    make_samples.write_samples(out)
    return out


def test_generator_is_deterministic_across_processes(regenerated, tmp_path):
    # a second run in a fresh interpreter, as a user runs it, gives the same bytes
    proc = subprocess.run([sys.executable, str(SAMPLES / "make_samples.py"), str(tmp_path)],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    for name in NAMES:
        assert (tmp_path / f"{name}.xlsx").read_bytes() == (regenerated / f"{name}.xlsx").read_bytes(), name


def test_committed_samples_hold_the_generated_data(regenerated):
    # bytes may differ with another openpyxl version; the data may not
    for name in NAMES:
        committed = _cells(SAMPLES / f"{name}.xlsx")
        fresh = _cells(regenerated / f"{name}.xlsx")
        assert list(committed) == list(fresh), name
        for sheet in fresh:
            assert committed[sheet] == fresh[sheet], f"{name}.xlsx sheet {sheet!r} differs from the generator"


def test_fixed_document_properties():
    for name in NAMES:
        wb = load_workbook(SAMPLES / f"{name}.xlsx", read_only=True)
        assert wb.properties.created == make_samples.FIXED_TIME
        assert wb.properties.modified == make_samples.FIXED_TIME
        wb.close()


def _data(name: str):
    wb = load_workbook(SAMPLES / f"{name}.xlsx")
    sheet = make_samples.DATA[name][0]
    return wb[sheet], wb["tocsin"]


def _column(ws, col: int) -> list:
    return [ws.cell(row=r, column=col).value for r in range(2, ws.max_row + 1)]


def test_dates_are_date_cells_formatted_as_dates_one_period_apart():
    steps = {"island_ferry": 1, "bakery_sales": 7, "pump_station": 1}
    years = {"island_ferry": 8, "bakery_sales": 10, "pump_station": 6}
    for name in NAMES:
        ws, _ = _data(name)
        cells = [ws.cell(row=r, column=1) for r in range(2, ws.max_row + 1)]
        assert all(c.is_date for c in cells), name
        dates = [c.value.date() for c in cells]
        assert {(b - a).days for a, b in zip(dates, dates[1:], strict=False)} == {steps[name]}, name
        span = (dates[-1] - dates[0]).days / 365.25
        assert years[name] - 0.2 < span < years[name] + 0.3, (name, span)


def test_ferry_event_share_and_future_rows():
    ws, table = _data("island_ferry")
    passengers = _column(ws, 2)
    observed = [p for p in passengers if p is not None]
    share = sum(p >= 1150 for p in observed) / len(observed)
    assert 0.10 <= share <= 0.30, share
    assert passengers[-7:] == [None] * 7                   # the next 7 dates are future periods
    assert 0 < sum(p is None for p in passengers[:-7]) <= 10   # a few interior gaps
    header = [c.value for c in table[1]]
    assert header == list(make_samples.SETTINGS)
    rows = [dict(zip(header, (c.value for c in table[r]), strict=True)) for r in (2, 3)]
    assert rows[0]["event"] == rows[1]["event"] == ">=1150"
    assert rows[1]["horizon"] == 7


def test_bakery_falls_are_neither_rare_nor_certain():
    ws, table = _data("bakery_sales")
    loaves = [v for v in _column(ws, 2) if v is not None]
    falls = [b < a for a, b in zip(loaves, loaves[1:], strict=False)]
    assert 0.3 < sum(falls) / len(falls) < 0.7
    assert table["E2"].value == "fall"


def test_pump_log_mixes_numbers_booleans_and_blanks_and_inflow_matters():
    ws, table = _data("pump_station")
    alarm, inflow, maint = _column(ws, 2), _column(ws, 3), _column(ws, 4)
    kinds = {type(v) for v in alarm}
    assert kinds == {int, bool, type(None)}
    assert sum(isinstance(v, bool) for v in alarm) > 30
    assert 0 < sum(v is None for v in alarm[:-7]) <= 10
    assert alarm[-7:] == [None] * 7 and inflow[-7:] == [None] * 7
    assert all(v in (0, 1) for v in maint) and sum(maint[-7:]) >= 1   # known ahead: filled for the future
    # alarms follow high inflow: the alarm share on the wettest tenth of the days is far above the rest
    pairs = [(float(a), f) for a, f in zip(alarm, inflow, strict=True) if a is not None and f is not None]
    cut = sorted(f for _, f in pairs)[int(0.9 * len(pairs))]
    wet = [a for a, f in pairs if f >= cut]
    dry = [a for a, f in pairs if f < cut]
    assert sum(wet) / len(wet) > 3 * sum(dry) / len(dry)
    # "=1" is stored as text (not a formula) in the job table
    assert table["E2"].value == "=1" and table["E2"].data_type == "s"


@pytest.mark.libreoffice
def test_samples_open_in_libreoffice(tmp_path):
    exe = libreoffice.require_soffice()
    files = [SAMPLES / f"{name}.xlsx" for name in NAMES]
    with tempfile.TemporaryDirectory(prefix="tocsin-lo-profile-") as profile:
        proc = subprocess.run(   # one soffice call for the three workbooks
            [exe, f"-env:UserInstallation=file://{profile}", "--headless", "--norestore", "--convert-to",
             libreoffice.CSV_ALL_SHEETS, "--outdir", str(tmp_path), *map(str, files)],
            capture_output=True, text=True, timeout=240, env={**os.environ, "LC_ALL": "C.UTF-8"})
    err = proc.stdout + proc.stderr
    assert "could not be loaded" not in err, err

    def read(name: str, sheet: str) -> list[list[str]]:
        path = tmp_path / f"{name}-{sheet}.csv"
        assert path.exists(), f"LibreOffice wrote no CSV for {name} / {sheet}: {err}"
        with path.open(newline="", encoding="utf-8") as fh:
            return list(csv.reader(fh))

    for name in NAMES:
        sheet = make_samples.DATA[name][0]
        expected = _cells(SAMPLES / f"{name}.xlsx")[sheet]
        shown = read(name, sheet)
        assert len(shown) == len(expected), name
        assert shown[0] == list(expected[0])
        for got, want in zip(shown[1:], expected[1:], strict=True):
            assert got[0] == want[0].date().isoformat()          # a date cell shown as a date
            for text, value in zip(got[1:], want[1:], strict=True):
                if value is None:
                    assert text == ""
                elif isinstance(value, bool):
                    assert text == ("TRUE" if value else "FALSE")
                else:
                    assert float(text) == pytest.approx(value), (name, got)
        table = read(name, "tocsin")
        assert table[0] == list(make_samples.SETTINGS)
        assert table[-1][0] == make_samples.NOTE
    assert read("island_ferry", "tocsin")[2][9] == "2024-01-01"
    assert read("pump_station", "tocsin")[1][4] == "=1"
