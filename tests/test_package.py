"""The package writer: lossless writes into the test corpus, ownership, dates and numbers, text escaping,
styles, positional references, the calculation chain, state, concurrency and safe reading.

Judges outside tocsin: openpyxl and python-calamine (general-purpose readers), the standard library's
zipfile and ElementTree (for what changed in a package), the worked serial numbers of ECMA-376 Part 1,
§18.17.4.1 (date systems), Python's ``repr`` (shortest round-trip repr of a double) and openxml-audit
(a general-purpose OOXML validator). LibreOffice checks are in test_package_lo.py.
"""
from __future__ import annotations

import datetime as dt
import io
import os
import re
import shutil
import zipfile
from pathlib import Path

import corpus
import libreoffice
import numpy as np
import openpyxl
import openxml_audit
import pandas as pd
import pytest
from lxml import etree
from python_calamine import CalamineWorkbook

from watcher.xlsx import archive
from watcher.xlsx import package as pkg
from watcher.xlsx.errors import ConcurrentEditError, OwnershipError, PackageError, SheetNameError, SpecError
from watcher.xlsx.package import MARKER_PREFIX, SHEET_MARK, Package, validate, write
from watcher.xlsx.spec import Cells, Column, SheetSpec, Table, check_sheet_name
from watcher.xlsx.worksheet import date_serials, escape_text

MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"


@pytest.fixture(scope="module")
def books(tmp_path_factory):
    return corpus.session_books(tmp_path_factory)


def _write(path: Path, sheets, state=None, remove=()):
    p = Package.open(path)
    return write(path, sheets, state=state if state is not None else {"v": 1}, remove=remove,
                 expect=p.fingerprint)


def _calamine(path: Path, sheet: str) -> list[list]:
    return CalamineWorkbook.from_path(str(path)).get_sheet_by_name(sheet).to_python(skip_empty_area=False)


def _simple(name: str, values, fmt: str = "general") -> SheetSpec:
    return SheetSpec(name, (Table(0, 0, ("x",), (Column(values, fmt),)),))


def _member(path: Path, name: str) -> bytes:
    with zipfile.ZipFile(path) as z:
        return z.read(name)


def _replace_member(path: Path, name: str, data: bytes | None, add: dict | None = None) -> None:
    """Rewrite one member of a zip the way another program would (for tests that play the user)."""
    with zipfile.ZipFile(path) as z:
        items = [(i.filename, z.read(i.filename)) for i in z.infolist()]
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", zipfile.ZIP_DEFLATED) as z:
        for n, d in items:
            if n == name:
                if data is None:
                    continue
                d = data
            z.writestr(n, d)
        for n, d in (add or {}).items():
            z.writestr(n, d)
    path.write_bytes(buf.getvalue())


# -- sheet names ---------------------------------------------------------------------------------
@pytest.mark.parametrize("bad, why, rule", [
    ("", "empty", "empty"), ("   ", "empty", "empty"), ("a" * 32, "31 characters", "length"),
    ("a/b", "[]:*?/\\", "characters"), ("x[1]", "[]:*?/\\", "characters"),
    ("what?", "[]:*?/\\", "characters"), ("a:b", "[]:*?/\\", "characters"), ("s*", "[]:*?/\\", "characters"),
    ("back\\slash", "[]:*?/\\", "characters"), ("'quoted", "apostrophe", "apostrophe"),
    ("quoted'", "apostrophe", "apostrophe"), ("History", "reserved", "reserved"),
    ("tab\there", "control", "control"), (7, "must be text", "type"),
])
def test_sheet_name_rules(bad, why, rule):
    # The format's sheet-name rules (common practice of spreadsheet programs; ECMA-376 leaves them open).
    with pytest.raises(SheetNameError, match=re.escape(why)) as err:
        check_sheet_name(bad)
    assert err.value.rule == rule and err.value.name == bad
    assert err.value.limit == (31 if rule == "length" else None)


def test_sheet_name_good():
    for good in ("a" * 31, "Fc profile", "Ïle d'Yeu ferry", "2025", "x'y"):
        assert check_sheet_name(good) == good


def test_names_unique_ignoring_case(tmp_path, books):
    path = corpus.copy_book(books, "charts", tmp_path)
    with pytest.raises(SpecError, match="unique ignoring case"):
        _write(path, [_simple("Out", [1.0]), _simple("OUT", [2.0])])
    res = _write(path, [_simple("Out", [1.0])])
    assert res.added == ("Out",)
    res = _write(path, [_simple("OUT", [2.0])])  # same sheet, new case: replaced, renamed
    assert res.replaced == ("OUT",) and Package.open(path).owned == ("OUT",)


# -- safe reading --------------------------------------------------------------------------------
def test_not_a_zip(tmp_path):
    p = tmp_path / "notes.xlsx"
    p.write_text("plain text, not a workbook")
    with pytest.raises(PackageError, match="'notes.xlsx' is not a readable workbook package"):
        Package.open(p)
    p.write_bytes(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + bytes(600))
    with pytest.raises(PackageError, match="OLE compound file"):
        Package.open(p)


def test_truncated(tmp_path, books):
    data = books["charts"].read_bytes()
    for cut in (len(data) // 2, len(data) - 10, 100):
        p = tmp_path / "cut.xlsx"
        p.write_bytes(data[:cut])
        with pytest.raises(PackageError, match="cut.xlsx"):
            Package.open(p)
        assert validate(p) and "cut.xlsx" in validate(p)[0]


def test_missing_and_folder(tmp_path):
    with pytest.raises(PackageError, match="does not exist"):
        Package.open(tmp_path / "nope.xlsx")
    with pytest.raises(PackageError, match="is a folder"):
        Package.open(tmp_path)


def test_entity_bomb_refused(tmp_path, books):
    # The "billion laughs" shape: nested entities. Refused before anything is expanded.
    bomb = ('<?xml version="1.0"?><!DOCTYPE lolz [<!ENTITY lol "lol"><!ENTITY lol2 "&lol;&lol;&lol;&lol;">'
            '<!ENTITY lol3 "&lol2;&lol2;&lol2;&lol2;">]><workbook xmlns="' + MAIN + '"><sheets><sheet '
            'name="&lol3;" sheetId="1"/></sheets></workbook>').encode()
    p = tmp_path / "bomb.xlsx"
    shutil.copy(books["charts"], p)
    _replace_member(p, "xl/workbook.xml", bomb)
    with pytest.raises(PackageError, match="bomb.xlsx.*xl/workbook.xml.*document type") as err:
        Package.open(p)
    assert (err.value.workbook, err.value.part) == ("bomb.xlsx", "xl/workbook.xml")
    assert any("document type" in m for m in validate(p))


def test_part_size_cap(tmp_path, books, monkeypatch):
    p = corpus.copy_book(books, "strings", tmp_path)
    monkeypatch.setattr(archive, "MAX_PART", 500)
    monkeypatch.setattr(archive.ZipSource.read, "__defaults__", (500,))
    with pytest.raises(PackageError, match="more than the 500 tocsin reads") as err:
        Package.open(p)
    assert err.value.limit == 500 and err.value.part


def test_total_size_cap(tmp_path, books, monkeypatch):
    p = corpus.copy_book(books, "strings", tmp_path)
    monkeypatch.setattr(archive, "MAX_TOTAL", 10_000)
    with pytest.raises(PackageError, match="uncompressed content; refused"):
        Package.open(p)


def test_not_a_workbook(tmp_path, books):
    p = corpus.copy_book(books, "charts", tmp_path)
    ct = _member(p, "[Content_Types].xml").replace(b"spreadsheetml.sheet.main+xml",
                                                   b"wordprocessingml.document.main+xml")
    _replace_member(p, "[Content_Types].xml", ct)
    with pytest.raises(PackageError, match="not a spreadsheet workbook"):
        Package.open(p)
    q = tmp_path / "plain.zip"
    with zipfile.ZipFile(q, "w") as z:
        z.writestr("a.txt", "x")
    with pytest.raises(PackageError, match="not an Office Open XML package"):
        Package.open(q)


def test_strict_refused(tmp_path, books):
    p = corpus.copy_book(books, "charts", tmp_path)
    rels = _member(p, "_rels/.rels").replace(
        b"http://schemas.openxmlformats.org/officeDocument/2006/relationships/officeDocument",
        b"http://purl.oclc.org/ooxml/officeDocument/relationships/officeDocument")
    _replace_member(p, "_rels/.rels", rels)
    with pytest.raises(PackageError, match="Strict Open XML"):
        Package.open(p)


def test_duplicate_members_refused(tmp_path, books):
    p = corpus.copy_book(books, "charts", tmp_path)
    with pytest.warns(UserWarning), zipfile.ZipFile(p, "a") as z:
        z.writestr("xl/styles.xml", b"<x/>")
    with pytest.raises(PackageError, match="two members named 'xl/styles.xml'"):
        Package.open(p)


# -- dates and numbers ---------------------------------------------------------------------------
def test_date_serials_1900_system():
    # ECMA-376 Part 1, §18.17.4.1: in the 1900 date system serial 1 is 1900-01-01, serial 60 is the
    # fictitious 1900-02-29 (never produced from a real date) and 61 is 1900-03-01. 45658 for
    # 2025-01-01 follows from the same rule (45,657 days after 1900-01-01, plus the fictitious day).
    dates = np.array(["1900-01-01", "1900-02-28", "1900-03-01", "2025-01-01", "9999-12-31"],
                     dtype="datetime64[D]")
    serial, bad = date_serials(dates, False)
    assert serial.tolist() == [1, 59, 61, 45658, 2_958_465] and not bad.any()
    t = np.array(["2025-01-01T18:00"], dtype="datetime64[m]")
    assert date_serials(t, False)[0][0] == 45658.75
    # openpyxl's own converter (a general-purpose implementation) agrees on every serial
    from openpyxl.utils.datetime import from_excel
    assert [from_excel(s).date() for s in (1, 59, 61, 45658)] == [
        dt.date(1900, 1, 1), dt.date(1900, 2, 28), dt.date(1900, 3, 1), dt.date(2025, 1, 1)]


def test_date_serials_1904_system():
    # ECMA-376 Part 1, §18.17.4.1: the 1904 system counts from 1904-01-01 (serial 0); a date's serial is
    # 1,462 less than in the 1900 system.
    dates = np.array(["1904-01-01", "1904-01-02", "2025-01-01"], dtype="datetime64[D]")
    serial, _ = date_serials(dates, True)
    assert serial.tolist() == [0, 1, 45658 - 1462]
    early = np.array(["1903-12-31", "1899-12-31", "NaT"], dtype="datetime64[D]")
    s4, bad4 = date_serials(early, True)
    s0, bad0 = date_serials(early, False)
    assert np.isnan(s4).all() and bad4.tolist() == [True, True, False]
    assert s0[0] == 1461 and bad0.tolist() == [False, True, False]


@pytest.mark.parametrize("book", ["charts", "d1904"])
def test_dates_read_back(tmp_path, books, book):
    path = corpus.copy_book(books, book, tmp_path)
    dates = np.array(["1900-01-01", "1900-03-01", "2024-02-29", "2025-01-01", "NaT", "1850-06-01"],
                     dtype="datetime64[D]")
    _write(path, [_simple("D", dates, "date")])
    rows = [r[0] for r in openpyxl.load_workbook(path)["D"].iter_rows(min_row=2, values_only=True)]
    ok = [dt.datetime(1900, 1, 1), dt.datetime(1900, 3, 1), dt.datetime(2024, 2, 29), dt.datetime(2025, 1, 1)]
    if book == "d1904":  # 1900 dates cannot be held in the 1904 system: written as ISO text
        assert rows[2:4] == ok[2:] and rows[0] == "1900-01-01" and rows[4] is None
    else:
        assert rows[:4] == ok and rows[4] is None
    assert rows[5] == "1850-06-01"
    cal = [r[0] for r in _calamine(path, "D")[1:]]
    assert cal[2:4] == [dt.date(2024, 2, 29), dt.date(2025, 1, 1)]


NUMBERS = [0.1, 1 / 3, 2 / 3, 5e-324, 2.2250738585072014e-308, 1.7976931348623157e308, -0.0, 0.0,
           2.0**53, 2.0**53 + 2, 1e16, 1e-5, 123456789.123456789, -987.25, 3.0, 1e22, 1e23, 0.3]


def test_numbers_round_trip(tmp_path, books):
    # A value read back must equal the double written, bit for bit (DESIGN §8). Judges: openpyxl and
    # python-calamine; the text in the part is Python's repr (shortest round-trip string) for
    # non-integers.
    rng = np.random.default_rng(20250101)
    wide = rng.standard_normal(300) * 10.0 ** rng.integers(-300, 300, 300)
    x = np.concatenate([NUMBERS, rng.random(300), wide, np.round(rng.normal(800, 90, 300), 1),
                        rng.integers(-10**6, 10**6, 300).astype(float)])
    path = corpus.copy_book(books, "annotated", tmp_path)
    _write(path, [_simple("N", x)])
    got = np.array([r[0] for r in openpyxl.load_workbook(path)["N"].iter_rows(min_row=2, values_only=True)],
                   dtype=float)
    assert np.array_equal(got.view(np.int64), x.view(np.int64))
    cal = np.array([r[0] for r in _calamine(path, "N")[1:]], dtype=float)
    assert np.array_equal(cal, x)
    xml = _member(path, "xl/worksheets/sheet3.xml").decode()
    for v in (0.1, 1 / 3, 5e-324, 1e-5, 1.7976931348623157e308):
        assert f"<v>{v!r}</v>" in xml
    assert "<v>3</v>" in xml and "<v>9007199254740992</v>" in xml


def test_nan_and_infinity_are_blank(tmp_path, books):
    path = corpus.copy_book(books, "charts", tmp_path)
    _write(path, [_simple("B", np.array([1.5, np.nan, np.inf, -np.inf, 2.5]), "dec3")])
    xml = _member(path, "xl/worksheets/sheet2.xml").decode()
    assert "nan" not in xml.lower() and "inf" not in xml.lower()
    vals = [r[0] for r in openpyxl.load_workbook(path)["B"].iter_rows(min_row=2, values_only=True)]
    assert vals == [1.5, None, None, None, 2.5]
    assert [r[0] for r in _calamine(path, "B")[1:]] == [1.5, "", "", "", 2.5]


# -- text ----------------------------------------------------------------------------------------
TEXTS = ["plain", "a & b < c > d \"quoted\" 'apos'", "  leading", "trailing  ", "two\nlines", "tab\there",
         "control \x01\x07\x1f chars", "literal _x0041_ stays", "ferry \U0001F6A2 emoji", "é ü ß 漢字",
         "double  space", "_x005F_ twice"]


def test_text_escaping_round_trip(tmp_path, books):
    # Escapes per ECMA-376 Part 1, §22.9.2.19 (ST_Xstring: _xHHHH_ for characters XML cannot carry, and
    # a literal "_xHHHH_" written as "_x005F_xHHHH_"). python-calamine decodes them; openpyxl does not
    # decode _xHHHH_ in inline strings, so it judges only the texts without such escapes.
    path = corpus.copy_book(books, "strings", tmp_path)
    _write(path, [_simple("T", TEXTS, "text")])
    cal = [r[0] for r in _calamine(path, "T")[1:]]
    assert cal == TEXTS
    op = [r[0] for r in openpyxl.load_workbook(path)["T"].iter_rows(min_row=2, values_only=True)]
    for want, got in zip(TEXTS, op, strict=True):
        if "_x" not in escape_text(want)[0]:
            assert got == want
    xml = _member(path, "xl/worksheets/sheet2.xml").decode()
    assert '<t xml:space="preserve">  leading</t>' in xml and "<t>plain</t>" in xml
    assert "_x0001_" in xml and "_x005F_x0041_" in xml


def test_carriage_return_kept():
    assert escape_text("a\r\nb")[0] == "a_x000D_\nb"


def test_long_text_cut_to_cell_limit(tmp_path, books):
    path = corpus.copy_book(books, "charts", tmp_path)
    long_text = "x" * 40_000
    emoji = "\U0001F6A2" * 20_000  # 2 UTF-16 units each
    _write(path, [_simple("L", [long_text, emoji], "text")])
    cal = [r[0] for r in _calamine(path, "L")[1:]]
    assert len(cal[0]) == 32_767 and cal[0].endswith("\u2026")
    units = len(cal[1].encode("utf-16-le")) // 2
    assert units <= 32_767 and cal[1].endswith("\u2026")


def test_shared_strings_untouched(tmp_path, books):
    path = corpus.copy_book(books, "strings", tmp_path)
    before = corpus.raw_members(path)["xl/sharedStrings.xml"]
    _write(path, [_simple("T", ["new text"] * 5, "text")])
    assert corpus.raw_members(path)["xl/sharedStrings.xml"] == before


# -- the corpus: lossless writes -----------------------------------------------------------------
CORPUS = ["charts", "annotated", "names", "macro", "d1904", "strings", "wide", "formulas", "prefixed",
          "excel_xlsm", "lo_fods", "lo_resaved"]


def _user_values(path: Path, owned=()) -> dict:
    wb = CalamineWorkbook.from_path(str(path))
    out = {}
    for name in wb.sheet_names:
        if name in owned:
            continue
        try:
            out[name] = wb.get_sheet_by_name(name).to_python(skip_empty_area=False)
        except Exception as exc:  # noqa: BLE001 - chart sheets have no cells
            out[name] = type(exc).__name__
    return out


def _need(books, name):
    """Only the workbooks LibreOffice makes may be missing, and only where LibreOffice is (the one
    optional tool, tests/libreoffice.py); the others come from the test tools, which are required."""
    if name not in books:
        if name.startswith("lo_"):
            libreoffice.require_soffice()
        pytest.fail(f"corpus workbook {name!r} was not built")


def _check_fc(path: Path, data: dict) -> None:
    wb = openpyxl.load_workbook(path)
    ws = wb["Fc"]
    rows = list(ws.iter_rows(min_row=4, max_row=3 + len(data["values"]), values_only=True))
    assert [r[0].date() for r in rows] == [d.astype(dt.date) for d in data["dates"]]
    vals = [np.nan if r[1] is None else r[1] for r in rows]
    want = np.where(np.isfinite(data["values"]), data["values"], np.nan)
    assert np.array_equal(np.array(vals, dtype=float), want, equal_nan=True)
    assert [r[4] for r in rows] == data["prob"].tolist()
    assert [r[3] for r in rows] == data["period"]
    assert ws["A1"].value.startswith("Ferry passengers")
    assert ws.freeze_panes == "B4"
    cal = _calamine(path, "Fc")
    assert [r[4] for r in cal[3:3 + len(data["prob"])]] == data["prob"].tolist()


@pytest.mark.parametrize("name", CORPUS)
def test_corpus_write_once(tmp_path, books, name):
    _need(books, name)
    original = books[name]
    path = corpus.copy_book(books, name, tmp_path)
    before_values = _user_values(path)
    spec, data = corpus.forecast_spec()
    res = _write(path, [spec], state={"jobs": {"ferry": "abc"}})
    assert res.added == ("Fc",) and not res.replaced and not res.removed
    assert corpus.lossless_problems(original, path, (), ("Fc",)) == []
    assert validate(path) == []
    p = Package.open(path)
    assert p.owned == ("Fc",) and p.sheet_names[-1] == "Fc" and p.state == {"jobs": {"ferry": "abc"}}
    assert p.sheet_names[:-1] == Package.open(original).sheet_names
    assert _user_values(path, ("Fc",)) == before_values
    _check_fc(path, data)


@pytest.mark.parametrize("name", CORPUS)
def test_corpus_write_three_times(tmp_path, books, name):
    _need(books, name)
    original = books[name]
    path = corpus.copy_book(books, name, tmp_path)
    before_values = _user_values(path)
    prof, _ = corpus.forecast_spec("Fc profile", n=12, seed=3)
    r1 = _write(path, [corpus.forecast_spec()[0], prof], state={"run": 1})
    assert r1.added == ("Fc", "Fc profile")
    after1 = tmp_path / "after1.bin"
    shutil.copy(path, after1)
    spec2, _ = corpus.forecast_spec(n=60, seed=8)
    r2 = _write(path, [spec2, prof], state={"run": 2})
    assert r2.replaced == ("Fc", "Fc profile") and not r2.added
    assert corpus.lossless_problems(after1, path, ("Fc", "Fc profile"), ("Fc", "Fc profile")) == []
    spec3, data3 = corpus.forecast_spec(n=30, seed=9)
    r3 = _write(path, [spec3], state={"run": 3}, remove=["Fc profile"])
    assert r3.removed == ("Fc profile",) and r3.replaced == ("Fc",)
    assert corpus.lossless_problems(original, path, (), ("Fc",)) == []
    assert validate(path) == []
    p = Package.open(path)
    assert p.owned == ("Fc",) and p.state == {"run": 3}
    assert _user_values(path, ("Fc",)) == before_values
    _check_fc(path, data3)
    with zipfile.ZipFile(path) as z:  # the removed sheet's drawing and charts went with it
        assert sum(n.startswith("xl/charts/") for n in z.namelist()) == sum(
            n.startswith("xl/charts/") for n in zipfile.ZipFile(original).namelist()) + 2


def test_same_inputs_same_bytes(tmp_path, books):
    a = corpus.copy_book(books, "names", tmp_path)
    b = tmp_path / "copy.xlsx"
    shutil.copy(a, b)
    spec, _ = corpus.forecast_spec()
    _write(a, [spec], state={"k": [1, 2]})
    _write(b, [spec], state={"k": [1, 2]})
    assert a.read_bytes() == b.read_bytes()
    first = a.read_bytes()
    _write(a, [spec], state={"k": [1, 2]})  # a replace with the same content changes nothing
    assert a.read_bytes() == first


def test_untouched_members_keep_compressed_bytes(tmp_path, books):
    path = corpus.copy_book(books, "charts", tmp_path)
    before = corpus.raw_members(path)
    spec, _ = corpus.forecast_spec()
    _write(path, [spec])
    after = corpus.raw_members(path)
    for name in ("xl/worksheets/sheet1.xml", "xl/media/image1.png", "xl/charts/chart1.xml",
                 "xl/chartsheets/sheet1.xml", "xl/sharedStrings.xml", "docProps/app.xml"):
        assert after[name] == before[name], name


def test_write_result(tmp_path, books):
    path = corpus.copy_book(books, "formulas", tmp_path)
    spec, _ = corpus.forecast_spec()
    res = _write(path, [spec])
    assert res.path == path.resolve() and res.fingerprint == Package.open(path).fingerprint
    assert set(res.changed_parts) <= corpus.REGISTRY | {"_rels/.rels"}
    assert "xl/worksheets/sheet2.xml" in res.new_parts and res.seconds > 0


# -- ownership -----------------------------------------------------------------------------------
def test_user_sheet_is_never_overwritten(tmp_path, books):
    path = corpus.copy_book(books, "names", tmp_path)
    before = path.read_bytes()
    for name in ("Data", "data", "SECOND", "Lookup"):
        with pytest.raises(OwnershipError, match="sheet '(Data|Second|Lookup)' in 'xw_names.xlsx' is not "
                                                 "tocsin's"):
            _write(path, [_simple(name, [1.0])])
    with pytest.raises(OwnershipError, match="'Second'") as err:
        _write(path, [], remove=["Second"])
    assert (err.value.sheet, err.value.workbook, err.value.unmarked) == ("Second", "xw_names.xlsx", False)
    assert path.read_bytes() == before


def test_renamed_sheet_becomes_the_users(tmp_path, books):
    path = corpus.copy_book(books, "charts", tmp_path)
    spec, _ = corpus.forecast_spec()
    _write(path, [spec])
    wb = _member(path, "xl/workbook.xml").replace(b'name="Fc"', b'name="Kept by me"')
    _replace_member(path, "xl/workbook.xml", wb)
    p = Package.open(path)
    assert p.owned == () and "Kept by me" in p.sheet_names
    res = _write(path, [spec])
    assert res.added == ("Fc",) and Package.open(path).owned == ("Fc",)
    with pytest.raises(OwnershipError, match="Kept by me"):
        _write(path, [], remove=["Kept by me"])


def test_sheet_made_again_under_tocsins_name_is_the_users(tmp_path, books):
    # The user deleted tocsin's sheet and made their own under the same name: the record still lists the
    # name, but the new sheet lacks tocsin's mark (a sheet-scoped name goes with its sheet).
    path = corpus.copy_book(books, "charts", tmp_path)
    _write(path, [_simple("Fc", [1.0])])
    wb = _member(path, "xl/workbook.xml").decode()
    assert f'<definedName name="{SHEET_MARK}" localSheetId="2" hidden="1">\'Fc\'!$A$1</definedName>' in wb
    start = wb.index(f'<definedName name="{SHEET_MARK}"')
    wb = wb[:start] + wb[wb.index("</definedName>", start) + len("</definedName>"):]
    _replace_member(path, "xl/workbook.xml", wb.encode())
    assert Package.open(path).owned == ()
    with pytest.raises(OwnershipError, match="not tocsin's mark") as err:
        _write(path, [_simple("Fc", [2.0])])
    assert err.value.sheet == "Fc" and err.value.unmarked


def test_unreadable_marker_protects_everything(tmp_path, books):
    path = corpus.copy_book(books, "charts", tmp_path)
    _write(path, [_simple("Fc", [1.0])])
    custom = _member(path, "docProps/custom.xml").replace(b'{"format"', b'{"form')
    _replace_member(path, "docProps/custom.xml", custom)
    p = Package.open(path)
    assert p.owned == () and "not readable" in p.marker_problem
    with pytest.raises(OwnershipError, match="not readable"):
        _write(path, [_simple("Fc", [2.0])])


def test_remove_owned_sheet_and_its_parts(tmp_path, books):
    path = corpus.copy_book(books, "annotated", tmp_path)
    spec, _ = corpus.forecast_spec()
    other, _ = corpus.forecast_spec("Other", n=9)
    _write(path, [spec, other])
    parts = corpus.sheet_parts(path, ["Other"])
    assert len(parts) == 6  # sheet, its rels, drawing, drawing rels, two charts
    res = _write(path, [], remove=["Other", "never existed"])
    assert res.removed == ("Other",)
    names = set(zipfile.ZipFile(path).namelist())
    assert not (parts & names) and Package.open(path).owned == ("Fc",)
    assert validate(path) == []
    assert corpus.lossless_problems(books["annotated"], path, (), ("Fc",)) == []


def test_removing_keeps_positional_references(tmp_path, books):
    # A user moved tocsin's sheet to the front (activeTab, firstSheet and localSheetId move with it, as
    # spreadsheet programs do); removing it must shift them back so they name the same sheets.
    path = corpus.copy_book(books, "names", tmp_path)
    _write(path, [_simple("Fc", [1.0])])
    root = etree.fromstring(_member(path, "xl/workbook.xml"))
    ns = {"m": MAIN}
    sheets = root.find("m:sheets", ns)
    fc = sheets[-1]
    sheets.remove(fc)
    sheets.insert(0, fc)
    view = root.find("m:bookViews/m:workbookView", ns)
    assert view.get("activeTab") == "1"
    view.set("activeTab", "2")
    view.set("firstSheet", "1")
    for dn in root.find("m:definedNames", ns):
        if dn.get("name") == SHEET_MARK:  # tocsin's mark moves with its sheet
            dn.set("localSheetId", "0")
        elif dn.get("localSheetId") is not None:
            dn.set("localSheetId", str(int(dn.get("localSheetId")) + 1))
    _replace_member(path, "xl/workbook.xml", etree.tostring(root, xml_declaration=True, encoding="UTF-8"))
    assert validate(path) == [] and Package.open(path).owned == ("Fc",)
    _write(path, [], remove=["Fc"])
    root = etree.fromstring(_member(path, "xl/workbook.xml"))
    view = root.find("m:bookViews/m:workbookView", ns)
    assert view.get("activeTab") == "1" and view.get("firstSheet") == "0"
    local = {dn.get("name"): dn.get("localSheetId") for dn in root.find("m:definedNames", ns)}
    assert local == {"_xlnm.Print_Area": "0", "Answer": "1", "Levels": None}
    assert validate(path) == []
    wb = openpyxl.load_workbook(path)
    assert wb.active.title == "Second" and "Answer" in wb["Second"].defined_names


def test_active_sheet_and_order_kept(tmp_path, books):
    path = corpus.copy_book(books, "names", tmp_path)
    spec, _ = corpus.forecast_spec()
    _write(path, [spec])
    wb = openpyxl.load_workbook(path)
    assert wb.sheetnames == ["Data", "Second", "Lookup", "Fc"] and wb.active.title == "Second"
    assert wb["Lookup"].sheet_state == "hidden"
    assert 'tabSelected' not in _member(path, "xl/worksheets/sheet4.xml").decode()


# -- registry parts ------------------------------------------------------------------------------
def _xfs(data: bytes, section: str) -> list[bytes]:
    root = etree.fromstring(data)
    sec = root.find(f"{{{MAIN}}}{section}")
    return [etree.tostring(e, method="c14n") for e in (sec if sec is not None else [])]


@pytest.mark.parametrize("name", ["charts", "excel_xlsm", "lo_resaved"])
def test_styles_appended_not_renumbered(tmp_path, books, name):
    _need(books, name)
    path = corpus.copy_book(books, name, tmp_path)
    before = _member(path, "xl/styles.xml")
    spec, _ = corpus.forecast_spec()
    _write(path, [spec])
    after = _member(path, "xl/styles.xml")
    for section in ("numFmts", "fonts", "fills", "borders", "cellStyleXfs", "cellXfs", "cellStyles", "dxfs"):
        old, new = _xfs(before, section), _xfs(after, section)
        assert new[:len(old)] == old, section
    assert len(_xfs(after, "cellXfs")) > len(_xfs(before, "cellXfs"))
    _write(path, [corpus.forecast_spec(n=10)[0]])
    assert _member(path, "xl/styles.xml") == after  # nothing appended twice


def test_prefixes_and_ignorable_kept(tmp_path, books):
    path = corpus.copy_book(books, "prefixed", tmp_path)
    _write(path, [_simple("Fc", [1.0])])
    xml = _member(path, "xl/workbook.xml").decode()
    assert xml.count("<x:sheet ") == 2 and "<x:workbook " in xml and 'mc:Ignorable="x15ac"' in xml
    assert 'xmlns:x15ac="http://schemas.microsoft.com/office/spreadsheetml/2010/11/ac"' in xml
    assert 'x15ac:note="kept"' in xml and 'rel:id="rId' in xml and "ns0:" not in xml


def test_excel_extensions_kept(tmp_path, books):
    _need(books, "excel_xlsm")
    path = corpus.copy_book(books, "excel_xlsm", tmp_path)
    before = _member(path, "xl/workbook.xml").decode()
    _write(path, [_simple("Fc", [1.0])])
    xml = _member(path, "xl/workbook.xml").decode()
    for kept in ('mc:Ignorable="x15 xr xr6 xr10 xr2"', "<mc:AlternateContent", "x15ac:absPath",
                 "xr:revisionPtr", "<extLst>", 'codeName="ThisWorkbook"'):
        assert kept in before and kept in xml
    assert 'fullCalcOnLoad="1"' in xml and 'calcId="171027"' in xml
    ct = _member(path, "[Content_Types].xml").decode()
    assert "application/vnd.ms-excel.sheet.macroEnabled.main+xml" in ct


def test_user_custom_properties_kept(tmp_path, books):
    path = corpus.copy_book(books, "annotated", tmp_path)

    def user_props(data: bytes) -> list[bytes]:
        return [etree.tostring(p, method="c14n") for p in etree.fromstring(data)
                if not p.get("name", "").startswith(MARKER_PREFIX)]

    before = user_props(_member(path, "docProps/custom.xml"))
    assert len(before) == 2
    big_state = {"jobs": {f"job {i}  x ": {"sha256": "ab" * 32, "rows": i, "note": " " * (i % 7)}
                          for i in range(40)}, "ünï": "ferry \U0001F6A2"}
    _write(path, [_simple("Fc", [1.0])], state=big_state)
    after = _member(path, "docProps/custom.xml")
    assert user_props(after) == before
    ours = [p for p in etree.fromstring(after) if p.get("name", "").startswith(MARKER_PREFIX)]
    texts = ["".join(p.itertext()) for p in ours]
    assert len(ours) > 10 and all(len(t) <= 255 and t == t.strip() for t in texts)
    assert Package.open(path).state == big_state
    assert validate(path) == []


def test_protected_structure_is_respected(tmp_path, books):
    path = corpus.copy_book(books, "charts", tmp_path)
    _write(path, [_simple("Fc", [1.0])])
    wb = _member(path, "xl/workbook.xml").replace(b"<bookViews>",
                                                  b'<workbookProtection lockStructure="1"/><bookViews>')
    _replace_member(path, "xl/workbook.xml", wb)
    assert validate(path) == []
    before = path.read_bytes()
    with pytest.raises(PackageError, match="protected structure"):
        _write(path, [_simple("New", [1.0])])
    with pytest.raises(PackageError, match="protected structure"):
        _write(path, [], remove=["Fc"])
    assert path.read_bytes() == before
    assert _write(path, [_simple("Fc", [2.0])]).replaced == ("Fc",)  # its own sheet's content may change


def test_calc_chain_pruned_and_recalc_on_load(tmp_path, books):
    path = corpus.copy_book(books, "formulas", tmp_path)
    _write(path, [_simple("Fc", [1.0])])
    assert _member(path, "xl/calcChain.xml") == _member(books["formulas"], "xl/calcChain.xml")
    assert 'fullCalcOnLoad="1"' in _member(path, "xl/workbook.xml").decode()
    # a user put formulas on tocsin's sheet (sheetId 2); the chain lists them, the second one inheriting
    # the sheet id of the previous entry (ECMA-376 Part 1, §18.6.1: i omitted = previous i)
    chain = (f'<calcChain xmlns="{MAIN}"><c r="E1" i="1"/><c r="A1" i="2"/><c r="A2"/><c r="E2" i="1"/>'
             '<c r="E3"/></calcChain>').encode()
    _replace_member(path, "xl/calcChain.xml", chain)
    _write(path, [_simple("Fc", [2.0])])
    cells = [(c.get("r"), c.get("i")) for c in etree.fromstring(_member(path, "xl/calcChain.xml"))]
    assert cells == [("E1", "1"), ("E2", "1"), ("E3", "1")]
    # only tocsin's entries: the chain part goes, with its relationship and content type
    only_ours = f'<calcChain xmlns="{MAIN}"><c r="A1" i="2"/></calcChain>'.encode()
    _replace_member(path, "xl/calcChain.xml", only_ours)
    _write(path, [_simple("Fc", [3.0])])
    names = zipfile.ZipFile(path).namelist()
    assert "xl/calcChain.xml" not in names and b"calcChain" not in _member(path, "xl/_rels/workbook.xml.rels")
    assert b"calcChain" not in _member(path, "[Content_Types].xml") and validate(path) == []


def test_package_without_styles_part(tmp_path):
    # A minimal package with no styles part (allowed by the format): tocsin adds one.
    path = tmp_path / "bare.xlsx"
    with zipfile.ZipFile(path, "w") as z:
        z.writestr("[Content_Types].xml", '<Types xmlns="http://schemas.openxmlformats.org/package/2006/'
                   'content-types"><Default Extension="rels" ContentType="application/vnd.openxmlformats-'
                   'package.relationships+xml"/><Default Extension="xml" ContentType="application/xml"/>'
                   '<Override PartName="/wb.xml" ContentType="application/vnd.openxmlformats-officedocument.'
                   'spreadsheetml.sheet.main+xml"/><Override PartName="/s1.xml" ContentType="application/'
                   'vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"/></Types>')
        z.writestr("_rels/.rels", '<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/'
                   'relationships"><Relationship Id="r1" Type="http://schemas.openxmlformats.org/'
                   'officeDocument/2006/relationships/officeDocument" Target="wb.xml"/></Relationships>')
        z.writestr("wb.xml", f'<workbook xmlns="{MAIN}" xmlns:r="http://schemas.openxmlformats.org/'
                   'officeDocument/2006/relationships"><sheets><sheet name="Only" sheetId="1" r:id="a"/>'
                   '</sheets></workbook>')
        z.writestr("_rels/wb.xml.rels", '<Relationships xmlns="http://schemas.openxmlformats.org/package/'
                   '2006/relationships"><Relationship Id="a" Type="http://schemas.openxmlformats.org/'
                   'officeDocument/2006/relationships/worksheet" Target="s1.xml"/></Relationships>')
        z.writestr("s1.xml", f'<worksheet xmlns="{MAIN}"><sheetData><row r="1"><c r="A1"><v>7</v></c></row>'
                   "</sheetData></worksheet>")
    assert validate(path) == []
    spec, data = corpus.forecast_spec(charts=False)
    _write(path, [spec])
    assert validate(path) == [] and "xl/styles.xml" in zipfile.ZipFile(path).namelist()
    wb = openpyxl.load_workbook(path)
    assert wb["Only"]["A1"].value == 7 and wb["Fc"]["E4"].value == data["prob"][0]


# -- concurrency and atomicity -------------------------------------------------------------------
def test_saved_before_write_is_not_overwritten(tmp_path, books):
    path = corpus.copy_book(books, "charts", tmp_path)
    p = Package.open(path)
    _replace_member(path, "docProps/app.xml", b"<Properties/>")  # someone saves meanwhile
    theirs = path.read_bytes()
    with pytest.raises(ConcurrentEditError, match="saved by someone else"):
        write(path, [_simple("Fc", [1.0])], state={}, expect=p.fingerprint)
    assert path.read_bytes() == theirs
    assert not list(tmp_path.glob(".tocsin-*"))
    write(path, [_simple("Fc", [1.0])], state={}, expect=Package.open(path).fingerprint)  # retried later


def test_saved_during_write_is_not_overwritten(tmp_path, books, monkeypatch):
    path = corpus.copy_book(books, "charts", tmp_path)
    p = Package.open(path)
    real_emit = pkg._emit

    def emit_then_user_saves(plan, fh):
        out = real_emit(plan, fh)
        _replace_member(path, "docProps/app.xml", b"<Properties/>")
        return out

    monkeypatch.setattr(pkg, "_emit", emit_then_user_saves)
    with pytest.raises(ConcurrentEditError):
        write(path, [_simple("Fc", [1.0])], state={}, expect=p.fingerprint)
    assert _member(path, "docProps/app.xml") == b"<Properties/>"
    assert not list(tmp_path.glob(".tocsin-*")) and Package.open(path).owned == ()


def test_failure_leaves_no_temporary(tmp_path, books, monkeypatch):
    path = corpus.copy_book(books, "charts", tmp_path)
    before = path.read_bytes()

    def boom(*a, **k):
        raise RuntimeError("disk full (simulated)")

    monkeypatch.setattr(archive.ZipWriter, "close", boom)
    with pytest.raises(RuntimeError, match="simulated"):
        _write(path, [_simple("Fc", [1.0])])
    assert path.read_bytes() == before and not list(tmp_path.glob(".tocsin-*"))


@pytest.mark.skipif(os.name != "posix", reason="flock")
def test_abandoned_temporaries_cleaned(tmp_path, books):
    import fcntl

    path = corpus.copy_book(books, "charts", tmp_path)
    dead = tmp_path / f".tocsin-{path.stem}-dead.tmp"         # a killed write's: no lock
    busy = tmp_path / f".tocsin-{path.stem}-busy.tmp"         # a running write's: locked
    just_made = tmp_path / f".tocsin-{path.stem}-new.tmp"     # empty, seconds old: maybe not locked yet
    copy = tmp_path / f".tocsin-{path.stem}-old.copy.xlsx"    # an interrupted in-place write's copy
    other = tmp_path / ".tocsin-other-dead.tmp"               # another workbook's
    for p in (dead, busy, copy, other):
        p.write_bytes(b"x")
    just_made.write_bytes(b"")
    with open(busy, "rb") as holder:
        fcntl.flock(holder, fcntl.LOCK_EX)
        _write(path, [_simple("Fc", [1.0])])
        assert busy.exists() and just_made.exists() and other.exists()
        assert not dead.exists() and not copy.exists()


@pytest.mark.skipif(os.name != "posix", reason="symbolic links and modes")
def test_symlink_and_mode(tmp_path, books):
    real = corpus.copy_book(books, "charts", tmp_path)
    os.chmod(real, 0o640)
    link = tmp_path / "link.xlsx"
    link.symlink_to(real)
    _write(link, [_simple("Fc", [1.0])])
    assert link.is_symlink() and Package.open(real).owned == ("Fc",)
    assert (os.stat(real).st_mode & 0o777) == 0o640


# -- spec checks and layout ----------------------------------------------------------------------
def test_spec_errors():
    t = Table(0, 0, ("a",), (Column([1.0, 2.0]),))
    with pytest.raises(SpecError, match="overlap"):
        SheetSpec("S", (t, Cells(1, 0, (((1, "general"),),))))
    with pytest.raises(SpecError, match="equal length"):
        Table(0, 0, None, (Column([1.0]), Column([1.0, 2.0])))
    with pytest.raises(SpecError, match="cell format must be one of"):
        Column([1.0], "fancy")
    with pytest.raises(SpecError, match="does not fit"):
        Table(1_048_575, 0, ("h",), (Column([1.0]),))
    with pytest.raises(SpecError, match="does not fit"):
        Table(0, 16_384 - 1, None, (Column([1.0]), Column([2.0])))


def test_blocks_side_by_side(tmp_path, books):
    # Rows shared by several blocks take the row-by-row path; cells must still come in column order.
    left = Table(1, 0, ("l",), (Column(np.arange(5.0)),))
    right = Table(0, 3, ("r",), (Column(["a", "b", None, "d", "e", "f"]),))
    note = Cells(0, 1, (((dt.date(2025, 1, 1), "general"), (True, "bold")),))
    path = corpus.copy_book(books, "charts", tmp_path)
    _write(path, [SheetSpec("Side", (left, right, note))])
    assert validate(path) == []
    rows = list(openpyxl.load_workbook(path)["Side"].iter_rows(values_only=True))
    assert rows[0] == (None, dt.datetime(2025, 1, 1), True, "r")
    assert rows[1] == ("l", None, None, "a")
    assert [r[0] for r in rows[2:7]] == [0, 1, 2, 3, 4] and [r[3] for r in rows[2:7]] == ["b", None, "d",
                                                                                         "e", "f"]


def test_chart_parts(tmp_path, books):
    path = corpus.copy_book(books, "d1904", tmp_path)
    spec, data = corpus.forecast_spec()
    _write(path, [spec])
    c = etree.fromstring(_member(path, "xl/charts/chart1.xml"))
    ns = {"c": "http://schemas.openxmlformats.org/drawingml/2006/chart"}
    assert c.find("c:date1904", ns).get("val") == "1"
    assert c.findtext(".//c:ser/c:val/c:numRef/c:f", namespaces=ns) == "'Fc'!$B$4:$B$43"
    assert c.findtext(".//c:ser/c:cat/c:numRef/c:f", namespaces=ns) == "'Fc'!$A$4:$A$43"
    pts = c.findall(".//c:ser/c:val//c:pt", ns)
    assert len(pts) == int(np.isfinite(data["values"]).sum())
    cat = [float(p.findtext("c:v", namespaces=ns)) for p in c.findall(".//c:ser/c:cat//c:pt", ns)]
    assert cat[0] == 45651 - 1462  # 2024-12-25 in the 1904 system
    s = etree.fromstring(_member(path, "xl/charts/chart2.xml"))
    assert s.find(".//c:scatterChart", ns) is not None
    assert s.find(".//c:valAx/c:scaling/c:max", ns).get("val") == "1"
    d = _member(path, "xl/drawings/drawing1.xml").decode()
    assert d.count("<xdr:twoCellAnchor") == 2 and 'r:id="rId1"' in d and 'r:id="rId2"' in d
    assert openpyxl.load_workbook(path)["Fc"]["B4"].value == 0.1  # openpyxl opens it (it skips charts)


# -- the structural validator judges -------------------------------------------------------------
def _fresh(tmp_path, books) -> Path:
    path = corpus.copy_book(books, "charts", tmp_path)
    _write(path, [_simple("Fc", [1.0, 2.0])])
    return path


@pytest.mark.parametrize("damage, message", [
    (lambda p: _replace_member(p, "xl/theme/theme1.xml", None), "points at 'xl/theme/theme1.xml'"),
    (lambda p: _replace_member(p, "xl/workbook.xml", _member(p, "xl/workbook.xml").replace(
        b'name="Fc"', b'name="DATA"')), "the same ignoring case"),
    (lambda p: _replace_member(p, "xl/workbook.xml", _member(p, "xl/workbook.xml").replace(
        b'sheetId="3"', b'sheetId="1"')), "share sheetId 1"),
    (lambda p: _replace_member(p, "xl/worksheets/sheet2.xml", _member(p, "xl/worksheets/sheet2.xml").replace(
        b'<c r="A2" s="0">', b'<c r="A2" s="999">')), "has style 999"),
    (lambda p: _replace_member(p, "xl/worksheets/sheet2.xml", _member(p, "xl/worksheets/sheet2.xml").replace(
        b'<sheetFormatPr defaultRowHeight="15"/>', b"").replace(
            b"</sheetData>", b'</sheetData><sheetFormatPr defaultRowHeight="15"/>')),
     "against the schema order"),
    (lambda p: _replace_member(p, "xl/worksheets/sheet2.xml", _member(p, "xl/worksheets/sheet2.xml").replace(
        b'<sheetView workbookViewId="0"', b'<sheetView tabSelected="1" workbookViewId="0"')),
     "more than one sheet is selected"),
    (lambda p: _replace_member(p, "xl/worksheets/sheet2.xml", _member(p, "xl/worksheets/sheet2.xml").replace(
        b'<c r="A2"', b'<c r="A3"')), "lies in row 2"),
    (lambda p: _replace_member(p, "docProps/app.xml", None, add={"extra.bin": b"x"}),
     "has no content type"),
    (lambda p: _replace_member(p, "xl/workbook.xml", _member(p, "xl/workbook.xml").replace(
        b'<workbookView ', b'<workbookView activeTab="7" ')), "activeTab=7"),
])
def test_validator_finds(tmp_path, books, damage, message):
    path = _fresh(tmp_path, books)
    damage(path)
    problems = validate(path)
    assert any(message in m for m in problems), problems


@pytest.mark.parametrize("name", ["charts", "macro", "lo_resaved"])
def test_openxml_audit_judges(tmp_path, books, name):
    # openxml-audit (a general-purpose OOXML validator from PyPI) reports nothing new in our output.
    _need(books, name)
    path = corpus.copy_book(books, name, tmp_path)
    spec, _ = corpus.forecast_spec()
    _write(path, [spec])
    v = openxml_audit.OpenXmlValidator()
    before = {str(e) for e in v.validate(str(books[name])).errors}
    after = {str(e) for e in v.validate(str(path)).errors}
    assert after - before == set()


def test_formats_as_openpyxl_reads_them(tmp_path, books):
    path = corpus.copy_book(books, "lo_resaved" if "lo_resaved" in books else "charts", tmp_path)
    spec, data = corpus.forecast_spec()
    warn = SheetSpec("W", (Cells(0, 0, (("failed: no data", "warning"), ("all good", "good"),
                                        ("caution: statistical forecasts", "italic"))),
                           Table(3, 0, ("d3", "int"), (Column([1 / 3], "dec3"), Column([4.0], "integer")))))
    _write(path, [spec, warn])
    wb = openpyxl.load_workbook(path)
    ws = wb["Fc"]
    assert ws["A4"].number_format == "yyyy-mm-dd" and ws["E4"].number_format == "0.0%"
    assert ws["C4"].number_format == "0" and ws["D4"].number_format == "@"
    best = 4 + int(np.argmax(data["prob"]))
    assert ws[f"E{best}"].font.b and not ws["E4"].font.b
    assert ws["A1"].font.b and ws["A1"].font.sz > ws["A4"].font.sz
    assert ws["A3"].font.b and ws["A3"].border.bottom.style == "thin"
    assert ws.sheet_properties.tabColor.rgb == "FF2F6B8F"
    assert ws.column_dimensions["A"].width == 12
    rules = [r for cf in ws.conditional_formatting for r in cf.rules]
    assert [r.type for r in rules] == ["colorScale"]
    assert str(next(iter(ws.conditional_formatting)).sqref) == "E4:E43"
    w = wb["W"]
    assert w["A1"].fill.fgColor.rgb == "FFF8D8D3" and w["A1"].font.color.rgb == "FF8E1B12"
    assert w["A2"].fill.fgColor.rgb == "FFDCEFDA" and w["A3"].font.i
    assert w["A5"].number_format == "0.000" and w["A5"].value == 1 / 3 and w["B5"].value == 4


def test_pandas_columns_and_empty_sheet(tmp_path, books):
    s = pd.Series([1.5, None, 3.0])
    d = pd.Series(pd.to_datetime(["2025-01-01", None, "2025-03-01"]))
    path = corpus.copy_book(books, "charts", tmp_path)
    p = Package.open(path)
    res = p.write([SheetSpec("P", (Table(0, 0, ("v", "d"), (Column(s), Column(d))),)),
                   SheetSpec("Empty", ())], state={})
    assert res.added == ("P", "Empty") and validate(path) == []
    rows = list(openpyxl.load_workbook(path)["P"].iter_rows(min_row=2, values_only=True))
    assert rows == [(1.5, dt.datetime(2025, 1, 1)), (None, None), (3, dt.datetime(2025, 3, 1))]
    assert openpyxl.load_workbook(path)["Empty"].max_row == 1


def test_sheet_handed_to_the_user(tmp_path, books):
    # owned=False: the job table `tocsin init` writes is the user's from the start.
    path = corpus.copy_book(books, "charts", tmp_path)
    res = Package.open(path).write([_simple("tocsin", ["job"], "text")], state={"s": 1}, owned=False)
    assert res.added == ("tocsin",)
    p = Package.open(path)
    assert p.owned == () and "tocsin" in p.sheet_names and p.state == {"s": 1}
    assert SHEET_MARK.encode() not in _member(path, "xl/workbook.xml") and validate(path) == []
    with pytest.raises(OwnershipError, match="'tocsin'"):
        _write(path, [_simple("tocsin", ["other"])])
    _write(path, [_simple("Fc", [1.0])])
    with pytest.raises(PackageError, match="only ever added"):
        Package.open(path).write([_simple("Fc", [2.0])], state={}, owned=False)
    assert corpus.lossless_problems(books["charts"], path, (), ("Fc", "tocsin")) == []
