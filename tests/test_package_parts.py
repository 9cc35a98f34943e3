"""The parts tocsin writes, part by part: a golden worksheet (checked by hand against ECMA-376 Part 1,
§18.3: element order of CT_Worksheet, inline strings, frozen panes, a styled blank cell for a missing
value), and property tests (hypothesis, invented data) that any double and any text survive a write and
a read by python-calamine and openpyxl."""
from __future__ import annotations

import math

import corpus
import numpy as np
import openpyxl
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from python_calamine import CalamineWorkbook

from watcher.xlsx.package import Package, write
from watcher.xlsx.spec import Cells, Column, SheetSpec, Table
from watcher.xlsx.worksheet import worksheet_chunks

GOLDEN = (
    '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
    '<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main" '
    'xmlns:r="http://schemas.openxmlformats.org/officeDocument/2006/relationships">'
    '<dimension ref="A1:C5"/>'
    '<sheetViews><sheetView workbookViewId="0"><pane ySplit="3" topLeftCell="A4" activePane="bottomLeft" '
    'state="frozen"/><selection pane="bottomLeft" activeCell="A4" sqref="A4"/></sheetView></sheetViews>'
    '<sheetFormatPr defaultRowHeight="15"/>'
    '<cols><col min="2" max="2" width="11.5" customWidth="1"/></cols>'
    '<sheetData>'
    '<row r="1" ht="19.5" customHeight="1"><c r="A1" s="1" t="inlineStr"><is><t>Title &amp; more</t></is>'
    '</c></row>'
    '<row r="3"><c r="B3" s="2" t="inlineStr"><is><t>when</t></is></c><c r="C3" s="2" t="inlineStr"><is>'
    '<t>p</t></is></c></row>'
    '<row r="4"><c r="B4" s="3"><v>45658</v></c><c r="C4" s="5"><v>0.25</v></c></row>'
    '<row r="5"><c r="B5" s="3"/><c r="C5" s="4"/></row>'
    '</sheetData>'
    '<pageMargins left="0.7" right="0.7" top="0.75" bottom="0.75" header="0.3" footer="0.3"/>'
    '</worksheet>')


def test_golden_worksheet():
    spec = SheetSpec("G", (
        Cells(0, 0, (("Title & more", "title"),)),
        Table(2, 1, ("when", "p"), (Column(np.array(["2025-01-01", "NaT"], dtype="datetime64[D]")),
                                    Column(np.array([0.25, np.nan]), "percent", bold=[True, False])))),
        col_widths={1: 11.5}, freeze=(3, 0))
    styles = {("general", False): 0, ("title", False): 1, ("header", False): 2, ("date", False): 3,
              ("percent", False): 4, ("percent", True): 5}
    assert b"".join(worksheet_chunks(spec, styles=styles, date1904=False)).decode() == GOLDEN


def test_chunks_do_not_change_the_part():
    x = np.linspace(0, 1, 1001)
    spec = SheetSpec("C", (Table(0, 0, ("x", "y"), (Column(x), Column(x * 3, "dec3"))),))
    styles = {("general", False): 0, ("header", False): 1, ("dec3", False): 2}
    whole = b"".join(worksheet_chunks(spec, styles=styles, date1904=False))
    assert b"".join(worksheet_chunks(spec, styles=styles, date1904=False, chunk_rows=7)) == whole


@pytest.fixture(scope="module")
def small_book(tmp_path_factory):
    return corpus.build(tmp_path_factory.mktemp("parts-corpus"), with_libreoffice=False)["charts"]


_SETTINGS = settings(max_examples=40, deadline=None,
                     suppress_health_check=[HealthCheck.function_scoped_fixture])


@_SETTINGS
@given(st.lists(st.floats(allow_nan=False, allow_infinity=False), min_size=1, max_size=30))
def test_any_double_reads_back_exactly(tmp_path, small_book, values):
    path = tmp_path / "n.xlsx"
    path.write_bytes(small_book.read_bytes())
    write(path, [SheetSpec("N", (Table(0, 0, None, (Column(np.array(values)),)),))], state={},
          expect=Package.open(path).fingerprint)
    got = [r[0] for r in CalamineWorkbook.from_path(str(path)).get_sheet_by_name("N").to_python()]
    assert [float(g) for g in got] == values
    op = [r[0] for r in openpyxl.load_workbook(path)["N"].iter_rows(values_only=True)]
    assert all(float(g) == v and math.copysign(1, float(g)) == math.copysign(1, v) for g, v in zip(
        op, values, strict=True))


_TEXT = st.text(st.characters(blacklist_categories=("Cs",)), min_size=1, max_size=40)


@_SETTINGS
@given(st.lists(_TEXT, min_size=1, max_size=10))
def test_any_text_reads_back(tmp_path, small_book, texts):
    path = tmp_path / "t.xlsx"
    path.write_bytes(small_book.read_bytes())
    write(path, [SheetSpec("T", (Table(0, 0, None, (Column(texts, "text"),)),))], state={},
          expect=Package.open(path).fingerprint)
    rows = CalamineWorkbook.from_path(str(path)).get_sheet_by_name("T").to_python(skip_empty_area=False)
    assert [r[0] for r in rows] == texts
