"""`tocsin refresh` end to end on the sample workbooks: the numbers in the sheets are the core's.

For every job of every sample (copied to tmp_path first), the forecast and profile sheets written by
``watcher.cli.main(["refresh", ...])`` are read back with two independent readers (openpyxl and
python-calamine) and compared **exactly** (DESIGN.md §8: round-trip precision) with the core run
directly on the data read by :mod:`watcher.refresh.reader`: the public benchmark functions
(``sheetfns.benchmarks``), the public logistic forecast (``sheetfns.logistic.forecast``), the
scorecard of ``sheetfns.scorecard.evaluate`` and ``sheetfns.profile.rate_table``. A second refresh
rewrites nothing; appending rows moves "data through" and the next forecast.

This module also holds the helpers the other refresh / CLI test modules use (workbook builder,
sheet readers, the core reference).
"""
from __future__ import annotations

import datetime as dt
import json
import os
import shutil
import subprocess
import sys
import textwrap
import zipfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any
from xml.etree import ElementTree

import numpy as np
import openpyxl
import pytest
import python_calamine

from sheetfns import benchmarks, logistic, markov, profile, valuemodel
from sheetfns.events import flag
from sheetfns.partition import next_periods
from sheetfns.scorecard import (
    METHOD_LABELS,
    MODEL_METHODS,
    PROBABILITY_LABELS,
    PROBABILITY_METHODS,
    SCORE_ROWS,
    Evaluation,
    Settings,
    evaluate,
)
from watcher import cli
from watcher.refresh import jobs
from watcher.refresh.forecast_sheet import MCNEMAR_BLANK, table_col
from watcher.refresh.reader import Book
from watcher.refresh.texts import CAUTION

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "sample_workbooks"
SAMPLE_NAMES = ("island_ferry.xlsx", "bakery_sales.xlsx", "pump_station.xlsx")


# ------------------------------------------------------------------------------- building workbooks

def write_book(path: Path, sheets: dict[str, list[list[Any]]]) -> Path:
    """A workbook written by xlsxwriter (an independent writer): every cell by its Python type, text
    always as a string (so a criterion ``=1`` is text, never a formula), dates formatted yyyy-mm-dd."""
    import xlsxwriter

    wb = xlsxwriter.Workbook(str(path))
    datef = wb.add_format({"num_format": "yyyy-mm-dd"})
    for name, rows in sheets.items():
        ws = wb.add_worksheet(name)
        for r, row in enumerate(rows):
            for c, v in enumerate(row):
                if v is None:
                    continue
                if isinstance(v, bool):
                    ws.write_boolean(r, c, v)
                elif isinstance(v, (int, float)):
                    ws.write_number(r, c, v)
                elif isinstance(v, (dt.date, dt.datetime)):
                    ws.write_datetime(r, c, v, datef)
                else:
                    ws.write_string(r, c, str(v))
    wb.close()
    return path


def job_table(*specs: dict[str, Any]) -> list[list[Any]]:
    """The rows of a job table: every setting as the header, then one row per job."""
    return [list(jobs.SETTINGS)] + [[spec.get(s) for s in jobs.SETTINGS] for spec in specs]


def quarter_end(year: int, quarter: int) -> dt.date:
    month = 3 * quarter
    return dt.date(year, month, 30 if month in (6, 9) else 31)


def macrodata_rows(stop: int | None = None) -> list[list[Any]]:
    """statsmodels' macrodata (US quarterly, 1959Q1-2009Q3; Federal Reserve Bank of St. Louis FRED,
    compiled by S. Seabold, shipped in statsmodels.datasets.macrodata) as a data sheet: a header, then
    the quarter-end date, real GDP, the unemployment rate and inflation per quarter."""
    from statsmodels.datasets import macrodata

    df = macrodata.load_pandas().data
    if stop is not None:
        df = df.iloc[:stop]
    rows: list[list[Any]] = [["Quarter end", "Real GDP", "Unemployment", "Inflation"]]
    for rec in df.itertuples():
        rows.append([quarter_end(int(rec.year), int(rec.quarter)), float(rec.realgdp), float(rec.unemp),
                     float(rec.infl)])
    return rows


GDP_JOB = {"job": "gdp fall", "data_sheet": "Macro", "date_column": "Quarter end",
           "value_column": "Real GDP", "event": "fall"}


def macro_book(path: Path, *specs: dict[str, Any], extra: dict[str, list[list[Any]]] | None = None,
               stop: int | None = None) -> Path:
    """A workbook with the macrodata sheet 'Macro' and a job table (default: one job, GDP falls)."""
    sheets = {"Macro": macrodata_rows(stop), "tocsin": job_table(*(specs or (GDP_JOB,)))}
    sheets.update(extra or {})
    return write_book(path, sheets)


# ------------------------------------------------------------------------------------ reading back

def grid_openpyxl(path: Path, sheet: str) -> list[list[Any]]:
    wb = openpyxl.load_workbook(path, read_only=True, data_only=True)
    try:
        return [list(r) for r in wb[sheet].iter_rows(values_only=True)]
    finally:
        wb.close()


def grid_calamine(path: Path, sheet: str) -> list[list[Any]]:
    wb = python_calamine.CalamineWorkbook.from_path(str(path))
    rows = wb.get_sheet_by_name(sheet).to_python(skip_empty_area=False)
    return [[None if v == "" else v for v in row] for row in rows]


READERS = {"openpyxl": grid_openpyxl, "calamine": grid_calamine}


def cell(grid: list[list[Any]], r: int, c: int) -> Any:
    """0-based (row, column) of a grid, None outside it."""
    return grid[r][c] if r < len(grid) and c < len(grid[r]) else None


def floats(grid: list[list[Any]], c: int, r0: int, n: int) -> np.ndarray:
    """Column c, rows r0..r0+n-1 as floats (blank -> NaN); text there fails the test."""
    out = np.full(n, np.nan)
    for i in range(n):
        v = cell(grid, r0 + i, c)
        if v is None:
            continue
        assert isinstance(v, (int, float)) and not isinstance(v, bool), \
            f"row {r0 + i + 1}, column {c + 1}: expected a number, got {v!r}"
        out[i] = v
    return out


def as_day(v: Any) -> np.datetime64:
    if isinstance(v, (dt.date, dt.datetime)):
        return np.datetime64(v).astype("datetime64[s]")
    raise AssertionError(f"expected a date, got {v!r}")


def find_row(grid: list[list[Any]], first: str, second: str | None = None, col: int = 0) -> int:
    for r in range(len(grid)):
        if cell(grid, r, col) == first and (second is None or cell(grid, r, col + 1) == second):
            return r
    raise AssertionError(f"no row starting {first!r}, {second!r}")


def same(a: np.ndarray, b: np.ndarray, what: str) -> None:
    """Exact equality with NaN = blank (round-trip precision, DESIGN.md §8)."""
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    assert a.shape == b.shape, f"{what}: shapes {a.shape} != {b.shape}"
    bad = ~((a == b) | (np.isnan(a) & np.isnan(b)))
    assert not bad.any(), f"{what}: first difference at {int(np.argmax(bad))}: {a[bad][:3]} != {b[bad][:3]}"


# ------------------------------------------------------------------------------ the core reference

@dataclass
class Core:
    """One job computed by the core, straight from the data the reader gives."""

    job: jobs.Job
    data: Any
    events: np.ndarray
    values: np.ndarray
    ev: Evaluation
    rates: Any
    trend: Any = None
    dates: Any = None  # the row table's dates: the data's, then the future periods tocsin adds


def core_reference(path: Path, name: str) -> Core:
    """Run the core on the job's data as DESIGN.md §3-§7 and DEVELOPERS.md describe it: events by the
    criterion, the split of jobs.resolve, daily data with weekday terms, the value series as a
    logistic input unless it is itself 0/1. The public benchmark and logistic functions are checked
    against the Evaluation's methods on the way."""
    with Book(path) as book:
        table = jobs.read_job_table(book)
        job = next(j for j in table.jobs if j.name == name)
        data = book.read(job.data_sheet, job.columns, date_column=job.date_column,
                         text_columns=job.text_columns)
    job = jobs.resolve(job, data)
    raw = data.raw[job.value_column] if job.text_columns else data.columns[job.value_column]
    events = flag(raw, job.criterion, job.min_run)
    values = data.columns.get(job.value_column)
    shown = raw if job.text_columns else values
    predictors = {data.names[p]: data.columns[p] for p in job.predictors} or None
    known = {data.names[p]: data.columns[p] for p in job.known_ahead} or None
    dates = data.dates
    if not np.isnan(events[-1]):
        # data ending on an observation: the `horizon` periods after it are the future rows, dated at
        # the data's frequency (DESIGN.md §3), or numbered rows without dates
        if dates is not None:
            later = next_periods(dates, job.frequency, job.horizon).astype(dates.dtype)
            dates = np.concatenate([dates, later])

        def more(a):
            return np.concatenate([a, np.full(job.horizon, None if a.dtype == object else np.nan,
                                              dtype=a.dtype)])

        events, shown, raw = more(events), more(np.asarray(shown)), more(np.asarray(raw))
        values = more(values) if values is not None else None
        predictors = {k: more(v) for k, v in predictors.items()} if predictors else None
        known = {k: more(v) for k, v in known.items()} if known else None
    obs = values[~np.isnan(values)] if values is not None else np.array([0.0])
    use_values = values if obs.size and not np.isin(obs, (0.0, 1.0)).all() else None
    settings = Settings(horizon=job.horizon, season=job.season, cycle=job.cycle, harmonics=job.harmonics,
                        lags=job.lags, refit=job.refit, cutoff=job.cutoff,
                        cost_false_alarm=job.cost_false_alarm, cost_miss=job.cost_miss,
                        weekday=job.frequency in ("daily", "business"))
    ev = evaluate(events, train_size=job.train_size, settings=settings, dates=dates,
                  values=use_values, predictors=predictors, known_ahead=known, criterion=job.criterion,
                  raw_values=raw, min_run=job.min_run)
    # The Evaluation carries the public functions' output (DESIGN.md §4), method by method.
    h, n_train = job.horizon, job.train_size
    public = {"naive": benchmarks.naive(events, horizon=h, train_size=n_train),
              "naive_roll": benchmarks.naive(events, horizon=h),
              "majority": benchmarks.majority_vote(events, train_size=n_train, horizon=h),
              "majority_roll": benchmarks.majority_vote(events, horizon=h)}
    if job.season > 1:
        public["seasonal"] = benchmarks.naive(events, horizon=h, season=job.season, train_size=n_train)
        public["seasonal_roll"] = benchmarks.naive(events, horizon=h, season=job.season)
    for key, fc in public.items():
        same(ev.method(key).forecast, fc, f"{name}: {key}")
    same(ev.method("majority").prob, benchmarks.majority_share(events, train_size=n_train, horizon=h),
         f"{name}: majority share")
    lg = logistic.forecast(events, values=use_values, predictors=predictors, known_ahead=known,
                           dates=dates, train_size=n_train, horizon=h, lags=job.lags,
                           cycle=job.cycle, harmonics=job.harmonics,
                           weekday=job.frequency in ("daily", "business"),
                           refit=job.refit)
    same(ev.method("logistic").prob, lg.prob, f"{name}: logistic probability")
    same(ev.method("markov").prob, markov.forecast(events, train_size=n_train, horizon=h, refit=job.refit),
         f"{name}: two-state chain probability")
    vm = valuemodel.forecast(raw, job.criterion, predictors=predictors, known_ahead=known, dates=dates,
                             train_size=n_train, horizon=h, lags=job.lags, cycle=job.cycle,
                             harmonics=job.harmonics, weekday=job.frequency in ("daily", "business"),
                             refit=job.refit, min_run=job.min_run)
    if vm.applies:
        same(ev.method("value_model").prob, vm.prob, f"{name}: value model probability")
    else:
        assert "value_model" not in {m.key for m in ev.methods}, name
    rates = trend = None
    if dates is not None:
        by = {"quarterly": "quarter"}.get(job.frequency or "", "month")
        rates = profile.rate_table(dates, events, by=by)
        try:
            trend = profile.seasonal_trend(rates, degree=2)
        except ValueError:      # too few periods of the year for a trend (two months of data)
            trend = None
    return Core(job, data, events, shown if shown is not None else events, ev, rates, trend, dates)


# ------------------------------------------------------------------------------ the sheet vs the core

def check_forecast_sheet(grid: list[list[Any]], core: Core, reader: str) -> None:
    """Every number of a forecast sheet against the core (exact), and the texts that go with them."""
    ev, data, job = core.ev, core.data, core.job
    what = f"{job.name} ({reader})"
    n = ev.n
    # The row-by-row table: header in row 1 after the left panel, one row per data row.
    col = table_col(ev)
    labels = [m.label for m in ev.methods]
    models = [m for m in ev.methods if m.key in MODEL_METHODS]
    best = ev.method(ev.residual_method)
    shown = PROBABILITY_LABELS[best.key] if best.key in PROBABILITY_METHODS else best.label
    expected = ["date" if data.dates is not None else "row", data.names[job.value_column], "event", "period",
                *labels, *(f"{PROBABILITY_LABELS[m.key]} probability" for m in models), f"residual ({shown})"]
    header = [cell(grid, 0, col + j) for j in range(len(expected) + 1)]
    assert header == [*expected, None], what
    assert cell(grid, 0, col - 1) is None, f"{what}: the row table follows a blank column"
    assert cell(grid, n + 1, col + 3) is None or cell(grid, n + 1, col) is None, \
        f"{what}: the row table is longer than the data"
    if data.dates is not None:
        got = np.array([as_day(cell(grid, 1 + i, col)) for i in range(n)])
        assert (got == core.dates).all(), f"{what}: dates"
    else:
        same(floats(grid, col, 1, n), np.arange(1, n + 1), f"{what}: row numbers")
    if core.values.dtype == object:  # the text of a text criterion
        assert [cell(grid, 1 + i, col + 1) for i in range(n)] == \
            [None if v is None or v == "" else v for v in core.values], f"{what}: value column"
    else:
        same(floats(grid, col + 1, 1, n), core.values, f"{what}: value column")
    same(floats(grid, col + 2, 1, n), core.events, f"{what}: event column")
    assert [cell(grid, 1 + i, col + 3) for i in range(n)] == ev.period.tolist(), f"{what}: periods"
    for j, m in enumerate(ev.methods):
        same(floats(grid, col + 4 + j, 1, n), m.forecast, f"{what}: {m.label}")
    for j, m in enumerate(models):
        same(floats(grid, col + 4 + len(labels) + j, 1, n), m.prob, f"{what}: {m.label} probability")
    # the residual, computed here: what happened minus the probability, or minus a 0/1 forecast
    fc = best.prob if best.key in PROBABILITY_METHODS else best.forecast
    same(floats(grid, col + 4 + len(labels) + len(models), 1, n), core.events - fc, f"{what}: residual")
    # Header block.
    assert cell(grid, find_row(grid, "status"), 1) == "ok", what
    through = cell(grid, find_row(grid, "data through"), 1)
    if data.dates is not None:
        assert as_day(through) == core.dates[ev.last_observed], f"{what}: data through"
    else:
        assert through == f"row {ev.last_observed + 1}", f"{what}: data through"
    check_periods_ahead(grid, ev, core.dates, what)
    # The verdict, the warnings and the caution, wrapped over rows of column B.
    assert _wrapped_text(grid, "verdict") == ev.verdict, what
    if ev.warnings:
        assert _wrapped_text(grid, "warnings") == " ".join(ev.warnings), what
    else:
        assert not any(cell(grid, r, 0) == "warnings" for r in range(len(grid))), what
    assert _wrapped_text(grid, "caution") == CAUTION, what
    # The scorecard: methods as columns, rows in SCORE_ROWS order.
    r = find_row(grid, "measure", labels[0])
    assert [cell(grid, r, 1 + j) for j in range(len(labels))] == labels, what
    for i, (key, label, _fmt, _better) in enumerate(SCORE_ROWS):
        assert cell(grid, r + 1 + i, 0) == label, f"{what}: scorecard row {i}"
        got = np.array([floats(grid, 1 + j, r + 1 + i, 1)[0] for j in range(len(labels))])
        want = np.array([ev.scorecard[m.key].get(key, np.nan) for m in ev.methods])
        same(got, want, f"{what}: scorecard {label}")
    # Significance of each model against the best benchmark.
    c = ev.comparisons
    r = find_row(grid, f"each model against the best benchmark, {METHOD_LABELS[c['best_benchmark']]} "
                       f"(validation period)")
    assert [cell(grid, r + 1, j) for j in range(5)] == ["method", "McNemar (0/1)", "p-value",
                                                        "Diebold-Mariano", "p-value"], what
    for i, m in enumerate(models):
        assert cell(grid, r + 2 + i, 0) == m.label, what
        same(floats(grid, 1, r + 2 + i, 1), [c[f"{m.key}_vs_best_mcnemar"]], f"{what}: {m.key} McNemar")
        same(floats(grid, 2, r + 2 + i, 1), [c[f"{m.key}_vs_best_mcnemar_p"]], f"{what}: {m.key} p")
        same(floats(grid, 3, r + 2 + i, 1), [c[f"{m.key}_vs_best_dm"]], f"{what}: {m.key} DM")
        same(floats(grid, 4, r + 2 + i, 1), [c[f"{m.key}_vs_best_dm_p"]], f"{what}: {m.key} DM p")
    # a blank McNemar (two 0/1 forecasts that agree on every period) is explained under the table
    blank = any(np.isnan(c[f"{m.key}_vs_best_mcnemar"]) for m in models)
    assert (cell(grid, r + 2 + len(models), 0) == MCNEMAR_BLANK) == blank, what
    # Logistic coefficients, then the value model's with its residual scale.
    coef = ev.coefficients
    r = find_row(grid, "term", "estimate")
    assert cell(grid, r, 3) == "z", what
    assert [cell(grid, r + 1 + i, 0) for i in range(len(coef))] == [str(t) for t in coef["term"]], what
    for j, key in enumerate(("estimate", "std_error", "z", "p")):
        same(floats(grid, 1 + j, r + 1, len(coef)), np.asarray(coef[key], dtype=float),
             f"{what}: coefficient {key}")
    vm = ev.value_model
    if vm is None:
        assert not any(str(cell(grid, r, 0)).startswith("value model coefficients") for r in range(len(grid)))
        return
    r = next(r for r in range(len(grid)) if str(cell(grid, r, 0)).startswith("value model coefficients"))
    t = vm.coefficients
    assert [cell(grid, r + 1, j) for j in range(5)] == ["term", "estimate", "std. error", "t", "p"], what
    assert [cell(grid, r + 2 + i, 0) for i in range(len(t))] == list(t["term"]), what
    for j, key in enumerate(("estimate", "std_error", "t", "p")):
        same(floats(grid, 1 + j, r + 2, len(t)), t[key].to_numpy(dtype=float), f"{what}: value model {key}")
    r = find_row(grid, "residual scale")
    same(floats(grid, 1, r, 1), [vm.residual_scale], f"{what}: residual scale")


def check_periods_ahead(grid: list[list[Any]], ev: Evaluation, dates: Any, what: str) -> None:
    """The headline: one row per future period with its origin, each method's 0/1 forecast, then the
    probability of the methods that make one (a 0/1 method never has one)."""
    future = ev.future()
    title = "forecasts for the periods ahead"
    if not future:
        r = next(r for r in range(len(grid)) if str(cell(grid, r, 0)).startswith(title))
        assert cell(grid, r, 0).startswith(f"{title}: none, the data end with an observed period"), what
        return
    r = find_row(grid, "period", "made at")
    assert str(cell(grid, r - 1, 0)).startswith(title), what
    assert [cell(grid, r, 2 + j) for j in range(len(ev.methods))] == [m.label for m in ev.methods], what

    def when(v: Any, i: int) -> None:
        if dates is not None:
            assert as_day(v) == dates[i], f"{what}: period {i}"
        else:
            assert v == f"row {i + 1}", what

    chance = [m for m in ev.methods if m.key in PROBABILITY_METHODS]
    r2 = next(k for k in range(r + 1, len(grid)) if cell(grid, k, 0) == "period")
    assert [cell(grid, r2, 2 + j) for j in range(len(chance) + 1)] == \
        [PROBABILITY_LABELS[m.key] for m in chance] + [None], f"{what}: probability header"
    for i, f in enumerate(future):
        for row in (r, r2):
            when(cell(grid, row + 1 + i, 0), f.row)
            when(cell(grid, row + 1 + i, 1), f.origin)
        for j, m in enumerate(ev.methods):
            want = f.forecasts[m.key][0] if m.key in f.forecasts else np.nan
            same(floats(grid, 2 + j, r + 1 + i, 1), [want], f"{what}: {m.label} for row {f.row}")
        for j, m in enumerate(chance):
            pair = f.forecasts.get(m.key)
            want = np.nan if pair is None or pair[1] is None else pair[1]
            same(floats(grid, 2 + j, r2 + 1 + i, 1), [want], f"{what}: {m.label} probability, row {f.row}")
    assert cell(grid, r + 1 + len(future), 0) is None, f"{what}: one row per future period"


def _wrapped_text(grid: list[list[Any]], label: str) -> str:
    r = find_row(grid, label)
    lines = [cell(grid, r, 1)]
    while cell(grid, r + len(lines), 0) in ("", None) and cell(grid, r + len(lines), 1):
        nxt = cell(grid, r + len(lines), 1)
        lines.append(nxt)
    return " ".join(lines)


def check_profile_sheet(grid: list[list[Any]], core: Core, reader: str) -> None:
    """The rate table of the profile sheet against sheetfns.profile.rate_table (exact)."""
    rates = core.rates
    what = f"{core.job.name} profile ({reader})"
    r = find_row(grid, rates.index.name)
    years = [c for c in rates.columns if isinstance(c, (int, np.integer))]
    head = [cell(grid, r, 1 + j) for j in range(len(years) + 1)]
    assert head == [str(y) for y in years] + ["all years"], what
    k = len(rates)
    for j, y in enumerate(years):
        same(floats(grid, 1 + j, r + 1, k), rates[y].to_numpy(dtype=float), f"{what}: {y}")
    same(floats(grid, 1 + len(years), r + 1, k), rates["all years"].to_numpy(dtype=float), what)
    hdr = [cell(grid, r, c) for c in range(len(grid[r]))]
    if core.trend is not None:  # the seasonal trend, a share: kept within [0, 1] on the sheet
        same(floats(grid, hdr.index("trend"), r + 1, k), np.clip(core.trend.to_numpy(), 0, 1), what)
    for col in ("events", "rows"):
        same(floats(grid, hdr.index(col), r + 1, k), rates[col].to_numpy(dtype=float), f"{what}: {col}")


def check_book(path: Path, readers=READERS, *, all_valid: bool = True) -> dict[str, Core]:
    """Every valid job of the workbook: its forecast and profile sheets against the core, by every
    reader; with ``all_valid``, the job table must have no bad row."""
    with Book(path) as book:
        table = jobs.read_job_table(book)
    assert table.ok or not all_valid, table.errors
    cores = {}
    for job in table.jobs:
        core = core_reference(path, job.name)
        cores[job.name] = core
        for reader, read in readers.items():
            check_forecast_sheet(read(path, job.output_sheet), core, reader)
            if core.rates is not None:
                check_profile_sheet(read(path, job.profile_sheet), core, reader)
    return cores


def run_cli(capsys, *argv: str) -> tuple[int, str, str]:
    code = cli.main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def file_state(path: Path) -> tuple[bytes, int]:
    return path.read_bytes(), os.stat(path).st_mtime_ns


NS = {"m": "http://schemas.openxmlformats.org/spreadsheetml/2006/main",
      "r": "http://schemas.openxmlformats.org/officeDocument/2006/relationships"}


def sheet_part_bytes(path: Path, name: str) -> bytes:
    """The bytes of the package part of sheet ``name`` (ECMA-376 Part 1 §12.3.23: workbook ->
    relationship -> worksheet part)."""
    with zipfile.ZipFile(path) as z:
        book = ElementTree.fromstring(z.read("xl/workbook.xml"))
        rid = next(s.get(f"{{{NS['r']}}}id") for s in book.find("m:sheets", NS) if s.get("name") == name)
        rels = ElementTree.fromstring(z.read("xl/_rels/workbook.xml.rels"))
        target = next(r.get("Target") for r in rels if r.get("Id") == rid)
        return z.read(target.lstrip("/") if target.startswith("/") else "xl/" + target)


# ------------------------------------------------------------------------------------------ fixtures

@pytest.fixture(scope="module")
def refreshed(tmp_path_factory) -> dict[str, Any]:
    """The three samples copied to a temporary folder and refreshed by one in-process command."""
    folder = tmp_path_factory.mktemp("samples")
    paths = [shutil.copyfile(SAMPLES / n, folder / n) for n in SAMPLE_NAMES]
    before = dt.datetime.now().replace(microsecond=0)
    code = cli.main(["refresh", "--json", *map(str, paths)])
    return {"code": code, "paths": [Path(p) for p in paths], "before": before,
            "after": dt.datetime.now()}


# --------------------------------------------------------------------------------------------- tests

def test_refresh_of_every_sample_exits_0(refreshed, capsys):
    assert refreshed["code"] == 0


@pytest.mark.parametrize("name", SAMPLE_NAMES)
def test_sheets_hold_the_cores_numbers(refreshed, name):
    path = next(p for p in refreshed["paths"] if p.name == name)
    cores = check_book(path)
    for core in cores.values():
        grid = grid_openpyxl(path, core.job.output_sheet)
        stamp = cell(grid, find_row(grid, "refreshed at"), 1)
        assert refreshed["before"] <= stamp <= refreshed["after"], stamp


def test_output_sheets_are_tocsins_and_user_sheets_come_first(refreshed):
    from watcher.xlsx import package
    for path in refreshed["paths"]:
        pkg = package.Package.open(path)
        with Book(path) as book:
            table = jobs.read_job_table(book)
        want = [s for j in table.jobs for s in (j.output_sheet, j.profile_sheet)]
        assert sorted(pkg.owned) == sorted(want), path.name
        original = package.Package.open(SAMPLES / path.name).sheet_names
        assert pkg.sheet_names[:len(original)] == original
        assert package.validate(path) == [], path.name


def test_second_refresh_rewrites_nothing(refreshed, capsys):
    states = {p: file_state(p) for p in refreshed["paths"]}
    code, out, err = run_cli(capsys, "refresh", "--json", *map(str, refreshed["paths"]))
    assert code == 0, err
    report = json.loads(out)
    assert [r["status"] for r in report] == ["unchanged"] * 3
    assert all(j["status"] == "unchanged" for r in report for j in r["jobs"])
    for p, st in states.items():
        assert file_state(p) == st, f"{p.name} was rewritten"
    # the unchanged report still says what the last refresh found
    ferry = report[0]["jobs"][0]
    assert ferry["next_period"] == "2025-01-01" and ferry["best_method"] in METHOD_LABELS.values()


def test_console_entry_in_a_subprocess(tmp_path):
    """`python -m watcher.cli refresh` as a scheduled run sees it: stdout a line per job, stderr empty
    (not a terminal: no progress, no carriage returns), exit 0, the sheets the core's."""
    path = Path(shutil.copyfile(SAMPLES / "pump_station.xlsx", tmp_path / "pump_station.xlsx"))
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    proc = subprocess.run([sys.executable, "-m", "watcher.cli", "refresh", str(path)], capture_output=True,
                          text=True, timeout=120, env=env, cwd=tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert proc.stderr == ""  # no "\r" progress when stderr is not a terminal
    lines = proc.stdout.splitlines()
    assert lines[0].startswith("pump_station.xlsx: refreshed in ")
    assert lines[1].startswith("  high level alarm: ok; next period 2025-01-01: ")
    check_book(path, {"calamine": grid_calamine})


def test_progress_only_on_a_terminal(tmp_path, capsys, monkeypatch):
    path = Path(shutil.copyfile(SAMPLES / "bakery_sales.xlsx", tmp_path / "b.xlsx"))
    code, out, err = run_cli(capsys, "refresh", "--force", str(path))
    assert code == 0 and err == "" and "\r" not in out
    # with stderr a terminal the same run reports its progress there (and clears the line)
    monkeypatch.setattr(sys.stderr, "isatty", lambda: True, raising=False)
    code, out, err = run_cli(capsys, "refresh", "--force", str(path))
    assert code == 0 and "\r" not in out
    assert "\r" in err and "job 1/1 'sales fall'" in err


def _append_quarters(path: Path, rows: list[list[Any]]) -> None:
    """What a colleague does: open the workbook, add rows below the data, save (openpyxl rewrites the
    whole file; tocsin's marker is a custom document property, which it keeps)."""
    wb = openpyxl.load_workbook(path)
    ws = wb["Macro"]
    for row in rows:
        ws.append(row)
        ws.cell(ws.max_row, 1).number_format = "yyyy-mm-dd"
    wb.save(path)


def test_appending_rows_moves_data_through_and_the_next_forecast(tmp_path, capsys):
    # macrodata up to 2007Q4 plus one blank future quarter; then the 2008 quarters arrive.
    rows = macrodata_rows()
    upto = 196  # 1959Q1 .. 2007Q4
    data = rows[:1 + upto] + [[rows[1 + upto][0], None, None, None]]
    path = write_book(tmp_path / "macro.xlsx", {"Macro": data, "tocsin": job_table(GDP_JOB)})
    code, out, err = run_cli(capsys, "refresh", "--json", str(path))
    assert code == 0, err
    first = json.loads(out)[0]["jobs"][0]
    assert first["next_period"] == "2008-03-31"
    grid = grid_openpyxl(path, "gdp fall forecast")
    assert as_day(cell(grid, find_row(grid, "data through"), 1)) == np.datetime64("2007-12-31")
    # fill 2008Q1 and append 2008Q2-Q4 with a blank future quarter after them
    wb = openpyxl.load_workbook(path)
    ws = wb["Macro"]
    last = ws.max_row
    for j, v in enumerate(rows[1 + upto][1:], start=2):
        ws.cell(last, j).value = v
    wb.save(path)
    _append_quarters(path, rows[2 + upto:5 + upto] + [[rows[5 + upto][0], None, None, None]])
    code, out, err = run_cli(capsys, "refresh", "--json", str(path))
    assert code == 0, err
    rep = json.loads(out)[0]
    assert rep["status"] == "refreshed"
    job = rep["jobs"][0]
    assert job["status"] == "ok" and job["next_period"] == "2009-03-31"
    cores = check_book(path)
    core = cores["gdp fall"]
    grid = grid_openpyxl(path, "gdp fall forecast")
    assert as_day(cell(grid, find_row(grid, "data through"), 1)) == np.datetime64("2008-12-31")
    assert core.ev.n == upto + 5
    # few falls of real GDP in 2004-2008 (statsmodels' macrodata): too few validation events to name
    # a best method, so the report names none and gives no probability
    assert core.ev.best is None and core.ev.verdict.startswith("Too few events to rank the methods")
    assert job["next_probability"] is None and job["best_method"] is None


def test_wrapped_text_reader_sees_long_texts():
    # the helper that reassembles wrapped header texts (layout.WRAP characters per row)
    text = "word " * 60
    lines = textwrap.wrap(text, 105)
    grid = [["verdict", lines[0]]] + [["", line] for line in lines[1:]] + [["caution", "x"]]
    assert _wrapped_text(grid, "verdict") == " ".join(text.split())


def _edit_job_table(path: Path, edit) -> None:
    """A colleague edits the job table and saves (openpyxl rewrites the file; the custom document
    property that marks tocsin's sheets survives)."""
    wb = openpyxl.load_workbook(path)
    edit(wb["tocsin"])
    wb.save(path)


def test_job_table_edits(tmp_path, capsys):
    """Only the job whose row changed is recomputed; a disabled job keeps its sheets; a deleted job's
    sheets go; --force rewrites everything."""
    from watcher.xlsx import package
    other = {**GDP_JOB, "job": "unemployment up", "value_column": "Unemployment", "event": "rise"}
    path = macro_book(tmp_path / "edits.xlsx", GDP_JOB, other)
    code, out, err = run_cli(capsys, "refresh", str(path))
    assert code == 0, err
    col = {s: i + 1 for i, s in enumerate(jobs.SETTINGS)}

    _edit_job_table(path, lambda ws: ws.cell(3, col["horizon"], 2))
    kept = sheet_part_bytes(path, "gdp fall forecast")
    code, out, err = run_cli(capsys, "refresh", "--json", str(path))
    assert code == 0, err
    status = {j["job"]: j["status"] for j in json.loads(out)[0]["jobs"]}
    assert status == {"gdp fall": "unchanged", "unemployment up": "ok"}
    assert sheet_part_bytes(path, "gdp fall forecast") == kept  # copied, not rewritten
    core = core_reference(path, "unemployment up")
    assert core.job.horizon == 2
    check_forecast_sheet(grid_calamine(path, "unemployment up forecast"), core, "calamine")

    _edit_job_table(path, lambda ws: ws.cell(3, col["enabled"], False))
    code, out, err = run_cli(capsys, "refresh", "--json", str(path))
    assert code == 0, err
    assert [j["job"] for j in json.loads(out)[0]["jobs"]] == ["gdp fall"]
    assert set(package.Package.open(path).owned) == {"gdp fall forecast", "gdp fall profile",
                                                     "unemployment up forecast", "unemployment up profile"}

    _edit_job_table(path, lambda ws: ws.delete_rows(3))
    code, out, err = run_cli(capsys, "refresh", str(path))
    assert code == 0, err
    pkg = package.Package.open(path)
    assert set(pkg.owned) == {"gdp fall forecast", "gdp fall profile"}
    assert "unemployment up forecast" not in pkg.sheet_names

    before = file_state(path)
    code, out, err = run_cli(capsys, "refresh", str(path))
    assert code == 0 and "unchanged" in out and file_state(path) == before
    code, out, err = run_cli(capsys, "refresh", "--force", str(path))
    assert code == 0 and out.startswith("edits.xlsx: refreshed")
    check_book(path)


def test_job_without_dates_and_a_text_criterion(tmp_path, capsys):
    """A job with no date column (rows are periods: the next rows after the data are the future) and a
    text criterion (``=recession``) on a column derived from macrodata's GDP declines."""
    from statsmodels.datasets import macrodata

    rows = macrodata_rows()
    rows[0].append("Phase")
    for i, row in enumerate(rows[1:], 1):
        row.append(None if i == 1 else "recession" if row[1] < rows[i - 1][1] else "growth")
    no_dates = {**GDP_JOB, "job": "gdp fall by row", "date_column": None, "horizon": 2}
    text = {**GDP_JOB, "job": "phase", "value_column": "Phase", "event": "=recession"}
    path = write_book(tmp_path / "rows.xlsx", {"Macro": rows, "tocsin": job_table(no_dates, text)})
    code, out, err = run_cli(capsys, "refresh", "--json", str(path))
    assert code == 0, err
    rep = {j["job"]: j for j in json.loads(out)[0]["jobs"]}
    assert rep["gdp fall by row"]["next_period"] == "row 204"  # 203 quarters of data, horizon 2
    cores = check_book(path)
    ev = cores["gdp fall by row"].ev
    assert ev.n == 205 and ev.last_observed == 202
    grid = grid_openpyxl(path, "gdp fall by row forecast")
    assert "gdp fall by row profile" not in openpyxl.load_workbook(path).sheetnames
    assert any("rows 204-205: the periods after the last data row" in str(c) for r in grid for c in r[:2])
    # the text job's events are the declines, counted independently with pandas
    df = macrodata.load_pandas().data
    assert np.nansum(cores["phase"].events) == (df.realgdp.diff() < 0).sum()


def test_two_rows_with_one_job_name(tmp_path, capsys):
    """The first row's job is written; the second is reported under "<name> (row 3)" without a sheet
    (its red sheet would have the first job's name), and a second refresh rewrites nothing."""
    twin = {**GDP_JOB, "event": "rise"}
    path = macro_book(tmp_path / "twins.xlsx", GDP_JOB, twin)
    code, out, err = run_cli(capsys, "refresh", "--json", str(path))
    rep = json.loads(out)[0]
    assert code == 1 and rep["status"] == "refreshed", rep
    jobs_ = {j["job"]: j for j in rep["jobs"]}
    assert jobs_["gdp fall"]["status"] == "ok"
    assert jobs_["gdp fall (row 3)"]["status"] == "failed"
    assert "`job` must be unique" in jobs_["gdp fall (row 3)"]["message"]
    names = openpyxl.load_workbook(path).sheetnames
    assert names == ["Macro", "tocsin", "gdp fall forecast", "gdp fall profile"]
    check_book(path, all_valid=False)
    before = file_state(path)
    code, out, err = run_cli(capsys, "refresh", str(path))
    assert code == 1 and out.startswith("twins.xlsx: unchanged") and file_state(path) == before
