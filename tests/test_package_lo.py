"""LibreOffice headless as the spreadsheet program that opens tocsin's output.

Three runs of soffice cover the whole corpus (each start costs seconds): every written workbook exported
to CSV, sheet by sheet, with recalculation on (tocsin's sheet shows the expected numbers and dates in
both date systems, and a user's formula reading tocsin's sheet shows the new value); a few written
workbooks printed to PDF (the chart parts render: their titles appear in the PDF text); and a round
trip (LibreOffice saves tocsin's output as .xlsx; tocsin still recognises its sheet and state, replaces
the sheet, drops LibreOffice's copies of its charts, and leaves everything else as LibreOffice wrote it).
"""
from __future__ import annotations

import csv
import shutil
import subprocess
import zipfile
from pathlib import Path

import corpus
import libreoffice
import numpy as np
import pytest
from lxml import etree
from python_calamine import CalamineWorkbook

from watcher.xlsx.package import SHEET_MARK, Package, validate, write

pytestmark = [pytest.mark.libreoffice, pytest.mark.slow]

WRITTEN = ["charts", "annotated", "names", "macro", "d1904", "strings", "wide", "formulas", "prefixed",
           "excel_xlsm", "lo_fods", "lo_resaved"]


@pytest.fixture(scope="module")
def books(tmp_path_factory):
    libreoffice.require_soffice()
    return corpus.session_books(tmp_path_factory)


@pytest.fixture(scope="module")
def written(books, tmp_path_factory):
    """Every corpus workbook with tocsin's forecast sheet written into it."""
    folder = tmp_path_factory.mktemp("written")
    spec, data = corpus.forecast_spec()
    out = {}
    for name in WRITTEN:
        if name not in books:
            continue
        path = corpus.copy_book(books, name, folder)
        write(path, [spec], state={"job": name}, expect=Package.open(path).fingerprint)
        out[name] = path
    return out, data


def _expected_rows(data: dict) -> list[list[str]]:
    rows = []
    for d, v, e, per, p in zip(data["dates"], data["values"], data["events"], data["period"], data["prob"],
                               strict=True):
        value = "" if not np.isfinite(v) else f"{v:g}"
        event = "" if np.isnan(e) else str(int(e))
        rows.append([str(d), value, event, per, f"{p * 100:.1f}%"])
    return rows


def test_libreoffice_shows_the_numbers_and_dates(written, tmp_path):
    paths, data = written
    files = corpus.lo_convert(list(paths.values()), libreoffice.CSV_ALL_SHEETS, tmp_path, recalc=True)
    by_name = {f.name: f for f in files}
    want = _expected_rows(data)
    for name, path in paths.items():
        csv_file = by_name.get(f"{path.stem}-Fc.csv")
        assert csv_file is not None, f"LibreOffice exported no Fc sheet for {name}: {sorted(by_name)}"
        with csv_file.open(newline="", encoding="utf-8") as fh:
            rows = list(csv.reader(fh))
        assert rows[0][0] == "Ferry passengers: will tomorrow exceed 870?", name
        assert rows[2][:5] == ["date", "value", "event", "period", "probability"], name
        got = [r[:5] for r in rows[3:3 + len(want)]]
        assert got == want, name
        assert rows[1][3] == "2025-01-02 06:30", name
    # a user's formula that reads tocsin's sheet ('Fc'!B4 holds 0.1) shows the new value
    with (tmp_path / f"{paths['formulas'].stem}-Data.csv").open(encoding="utf-8") as fh:
        data_rows = list(csv.reader(fh))
    assert data_rows[1][4] == "0.2"


def test_libreoffice_renders_the_charts(written, tmp_path):
    paths, _ = written
    chosen = []
    for n in ("charts", "d1904", "lo_resaved"):
        if n in paths:  # add a profile sheet (a line chart, a reliability diagram, an ROC curve)
            p = shutil.copy(paths[n], tmp_path / paths[n].name)
            write(p, [corpus.profile_spec()], state={"job": n}, expect=Package.open(p).fingerprint)
            assert validate(p) == []
            chosen.append(Path(p))
    pdfs = corpus.lo_convert(chosen, "pdf", tmp_path / "pdf")
    assert len(pdfs) == len(chosen)
    titles = ("Passengers", "Probability against value", "Event rate by month", "Reliability diagram",
              "ROC curve")
    for pdf in pdfs:
        assert pdf.stat().st_size > 5_000 and pdf.read_bytes().startswith(b"%PDF")
        if shutil.which("pdftotext"):
            text = subprocess.run(["pdftotext", str(pdf), "-"], capture_output=True, text=True,
                                  timeout=60).stdout
            missing = [t for t in titles if t not in text]
            assert not missing, f"{pdf.name}: charts not drawn: {missing}"


def test_round_trip_through_libreoffice(written, books, tmp_path):
    paths, _ = written
    chosen = {n: paths[n] for n in ("charts", "names", "d1904", "excel_xlsm") if n in paths}
    src = tmp_path / "src"
    src.mkdir()
    for p in chosen.values():
        shutil.copy(p, src / p.name.replace(".xlsm", ".xlsx"))
    outdir = tmp_path / "saved"
    corpus.lo_convert(sorted(src.iterdir()), "xlsx:Calc MS Excel 2007 XML", outdir)
    spec2, data2 = corpus.forecast_spec(n=25, seed=11)
    for name, original in chosen.items():
        saved = outdir / (original.stem + ".xlsx")
        assert saved.exists(), name
        p = Package.open(saved)
        assert p.owned == ("Fc",), name          # ownership survived LibreOffice
        assert p.state == {"job": name}, name     # and so did the state
        assert p.date1904 == Package.open(books[name]).date1904, name
        kept = tmp_path / f"kept-{saved.name}"
        shutil.copy(saved, kept)
        res = write(saved, [spec2], state={"job": name, "round": 2}, expect=p.fingerprint)
        assert res.replaced == ("Fc",)
        assert validate(saved) == [], name
        marks = [dn for dn in etree.fromstring(zipfile.ZipFile(saved).read("xl/workbook.xml")).iter(
            "{*}definedName") if dn.get("name") == SHEET_MARK]
        assert [dn.get("hidden") for dn in marks] == ["1"], name
        assert corpus.lossless_problems(kept, saved, ("Fc",), ("Fc",)) == [], name
        charts_before = {n for n in zipfile.ZipFile(kept).namelist() if n.startswith("xl/charts/chart")}
        charts_after = {n for n in zipfile.ZipFile(saved).namelist() if n.startswith("xl/charts/chart")}
        mine = corpus.sheet_parts(saved, ["Fc"])
        assert len(charts_after & mine) == 2 and charts_after - mine <= charts_before, name
        probs = [r[4] for r in CalamineWorkbook.from_path(str(saved)).get_sheet_by_name("Fc")
                 .to_python(skip_empty_area=False)[3:3 + 25]]
        assert probs == data2["prob"].tolist()
        assert Package.open(saved).state == {"job": name, "round": 2}
