"""LibreOffice (the real spreadsheet program, headless) opens every refreshed sample and shows the
forecast sheets as tocsin means them: exported to CSV (formatted values as shown), the dates read as
text yyyy-mm-dd, probabilities and rates as percents with one decimal, scores with three decimals,
the status 'ok', the verdict and the caution line; a failed job's sheet says 'failed: ...'.

One soffice call converts all the workbooks (each call costs seconds). The expected values are the
core's (``test_refresh.core_reference``) on the data the reader reads.
"""
from __future__ import annotations

import csv
import re
import shutil
import subprocess
import tempfile
from pathlib import Path

import libreoffice  # tests/libreoffice.py
import numpy as np
import pytest
from test_refresh import GDP_JOB, SAMPLE_NAMES, SAMPLES, core_reference, macro_book

from sheetfns.scorecard import PROBABILITY_LABELS, PROBABILITY_METHODS, SCORE_ROWS
from watcher import cli
from watcher.refresh import jobs
from watcher.refresh.forecast_sheet import table_col
from watcher.refresh.reader import Book
from watcher.refresh.texts import CAUTION

pytestmark = [pytest.mark.slow, pytest.mark.libreoffice]
PERCENT = re.compile(r"^-?\d+\.\d%$")
BAD = {**GDP_JOB, "job": "bad job", "horizon": 0}


def csv_of_books(paths: list[Path], outdir: Path) -> dict[tuple[str, str], list[list[str]]]:
    """Every sheet of every workbook as CSV rows, keyed by (file stem, sheet name), from ONE soffice
    run (libreoffice.CSV_ALL_SHEETS: UTF-8, comma separated, formatted values as shown)."""
    exe = libreoffice.require_soffice()
    outdir.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory(prefix="tocsin-lo-profile-") as profile:
        proc = subprocess.run([exe, f"-env:UserInstallation=file://{profile}", "--headless", "--norestore",
                               "--convert-to", libreoffice.CSV_ALL_SHEETS, "--outdir", str(outdir),
                               *map(str, paths)], capture_output=True, text=True, timeout=300)
    err = proc.stderr + proc.stdout
    assert "could not be loaded" not in err, err
    out = {}
    for p in paths:
        for f in outdir.glob(f"{p.stem}-*.csv"):
            with f.open(newline="", encoding="utf-8") as fh:
                out[(p.stem, f.stem[len(p.stem) + 1:])] = list(csv.reader(fh))
    assert out, f"LibreOffice produced nothing: {err}"
    return out


@pytest.fixture(scope="module")
def exported(tmp_path_factory):
    folder = tmp_path_factory.mktemp("lo")
    paths = [Path(shutil.copyfile(SAMPLES / n, folder / n)) for n in SAMPLE_NAMES]
    paths.append(macro_book(folder / "macro_two_jobs.xlsx", GDP_JOB, BAD))
    assert cli.main(["refresh", *map(str, paths[:3])]) == 0
    assert cli.main(["refresh", str(paths[3])]) == 1
    return {"paths": paths, "csv": csv_of_books(paths, folder / "csv")}


def at(rows: list[list[str]], r: int, c: int) -> str:
    return rows[r][c] if r < len(rows) and c < len(rows[r]) else ""


def row_of(rows: list[list[str]], label: str, col: int = 0) -> int:
    return next(i for i, row in enumerate(rows) if at(rows, i, col) == label)


def joined(rows: list[list[str]], label: str) -> str:
    r = row_of(rows, label)
    parts = [at(rows, r, 1)]
    while at(rows, r + len(parts), 0) == "" and at(rows, r + len(parts), 1):
        parts.append(at(rows, r + len(parts), 1))
    return " ".join(parts)


def percent_ok(text: str, p: float) -> bool:
    """A probability shown as a percent with one decimal ('0.0%' format): blank for NaN, else within
    half a unit of the last digit (LibreOffice and Python may round a near-tie differently)."""
    if np.isnan(p):
        return text == ""
    return bool(PERCENT.match(text)) and abs(float(text[:-1]) - 100 * p) <= 0.05 + 1e-9


def test_every_sheet_exported(exported):
    keys = set(exported["csv"])
    for path in exported["paths"][:3]:
        with Book(path) as book:
            table = jobs.read_job_table(book)
        for job in table.jobs:
            assert (path.stem, job.output_sheet) in keys and (path.stem, job.profile_sheet) in keys


@pytest.mark.parametrize("name", SAMPLE_NAMES)
def test_forecast_sheet_as_libreoffice_shows_it(exported, name):
    path = next(p for p in exported["paths"] if p.name == name)
    with Book(path) as book:
        table = jobs.read_job_table(book)
    for job in table.jobs:
        core = core_reference(path, job.name)
        ev, data = core.ev, core.data
        rows = exported["csv"][(path.stem, job.output_sheet)]
        assert at(rows, 0, 0) == f"tocsin forecast: {job.name}"
        assert at(rows, row_of(rows, "status"), 1) == "ok"
        assert re.fullmatch(r"\d{4}-\d\d-\d\d \d\d:\d\d", at(rows, row_of(rows, "refreshed at"), 1))
        days = [str(d) for d in data.dates.astype("datetime64[D]")]
        assert at(rows, row_of(rows, "data through"), 1) == days[ev.last_observed]
        assert joined(rows, "verdict") == ev.verdict
        assert joined(rows, "caution") == CAUTION
        # the periods ahead: each method's 0/1 forecast, then the probabilities as percents
        future = ev.future()
        r = row_of(rows, "period")
        assert rows[r][:2 + len(ev.methods)] == ["period", "made at", *(m.label for m in ev.methods)]
        chance = [m for m in ev.methods if m.key in PROBABILITY_METHODS]
        r2 = r + len(future) + 3
        assert rows[r2][:2 + len(chance)] == ["period", "made at",
                                              *(PROBABILITY_LABELS[m.key] for m in chance)]
        for i, f in enumerate(future):
            assert at(rows, r + 1 + i, 0) == at(rows, r2 + 1 + i, 0) == days[f.row]
            assert at(rows, r + 1 + i, 1) == days[f.origin]
            for j, m in enumerate(ev.methods):
                want = str(f.forecasts[m.key][0]) if m.key in f.forecasts else ""
                assert at(rows, r + 1 + i, 2 + j) == want, (m.label, f.row)
            for j, m in enumerate(chance):
                p = f.forecasts[m.key][1] if m.key in f.forecasts else np.nan
                assert percent_ok(at(rows, r2 + 1 + i, 2 + j), p), (m.label, at(rows, r2 + 1 + i, 2 + j))
        # scorecard: percents for the rates, three decimals for the scores
        r = row_of(rows, "measure")
        for i, (key, label, fmt, _b) in enumerate(SCORE_ROWS):
            assert at(rows, r + 1 + i, 0) == label
            for j, m in enumerate(ev.methods):
                v = ev.scorecard[m.key].get(key, np.nan)
                shown = at(rows, r + 1 + i, 1 + j)
                if np.isnan(v):
                    assert shown == "", (label, m.label, shown)
                elif fmt == "integer":
                    assert shown == str(int(v))
                elif fmt == "percent":
                    assert percent_ok(shown, v), (label, m.label, shown)
                else:
                    assert re.fullmatch(r"-?\d+\.\d{3}", shown) and abs(float(shown) - v) <= 5e-4 + 1e-9
        # the row table: dates as text, events 0/1, periods, the logistic probability as a percent
        n = ev.n
        TABLE_COL = table_col(ev)
        assert [at(rows, 1 + i, TABLE_COL) for i in range(n)] == days
        assert at(rows, n + 1, TABLE_COL) == ""
        ev_text = ["" if np.isnan(e) else str(int(e)) for e in core.events]
        assert [at(rows, 1 + i, TABLE_COL + 2) for i in range(n)] == ev_text
        assert [at(rows, 1 + i, TABLE_COL + 3) for i in range(n)] == ev.period.tolist()
        col = TABLE_COL + 4 + len(ev.methods)
        models = [m for m in ev.methods if m.key in ("markov", "logistic", "value_model")]
        for j, m in enumerate(models):
            assert at(rows, 0, col + j) == f"{PROBABILITY_LABELS[m.key]} probability"
            bad = [i for i in range(n) if not percent_ok(at(rows, 1 + i, col + j), m.prob[i])]
            assert not bad, [(i, at(rows, 1 + i, col + j), m.prob[i]) for i in bad[:5]]
        # the residual of the best method (or of the base rate) with three decimals, or -1/0/1
        res = at(rows, 0, col + len(models))
        assert res.startswith("residual (")
        m = ev.method(ev.residual_method)
        r = core.events - (m.prob if m.key in PROBABILITY_METHODS else m.forecast)
        shown = [at(rows, 1 + i, col + len(models)) for i in range(n)]
        bad = [i for i in range(n) if (shown[i] == "") != np.isnan(r[i])
               or (shown[i] and abs(float(shown[i]) - r[i]) > 5e-4 + 1e-9)]
        assert not bad, [(i, shown[i], r[i]) for i in bad[:5]]


def test_profile_sheet_rates_as_percents(exported):
    path = exported["paths"][0]
    core = core_reference(path, "second sailing")
    rows = exported["csv"][(path.stem, "second sailing profile")]
    assert CAUTION in rows[2][0]
    r = row_of(rows, "month")
    assert rows[r][-2:] == ["events", "rows"]
    rates = core.rates
    for i in range(12):
        for j, year in enumerate([c for c in rates.columns if isinstance(c, (int, np.integer))]):
            assert percent_ok(at(rows, r + 1 + i, 1 + j), float(rates[year].iloc[i]))
        assert at(rows, r + 1 + i, len(rows[r]) - 1) == str(int(rates["rows"].iloc[i]))


def test_failed_job_sheet_in_libreoffice(exported):
    rows = exported["csv"][("macro_two_jobs", "bad job forecast")]
    status = at(rows, row_of(rows, "status"), 1)
    assert status.startswith("failed: `horizon` must be a whole number >= 1; got 0 in row 3")
    assert at(rows, row_of(rows, "caution"), 1) == CAUTION
    # the good job beside it is there and ok
    good = exported["csv"][("macro_two_jobs", "gdp fall forecast")]
    assert at(good, row_of(good, "status"), 1) == "ok"
    assert at(good, row_of(good, "data through"), 1) == "2009-09-30"
