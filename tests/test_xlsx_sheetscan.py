"""The validator's fast look at rows and cells (watcher/xlsx/sheetscan.py) against its element-by-element
walk (watcher/xlsx/validate.py, lxml iterparse): on worksheets made here with and without faults of the
kinds SpreadsheetML forbids (ECMA-376 Part 1, §18.3.1.73 row, §18.3.1.4 c: rows ascending, each cell on
its row, cells ascending within a row, style indexes within cellXfs), the validator's messages are the
same whichever way the rows are read, and the fast look answers for the common form of a sheet. Also:
the sheets named in ``skip_cells`` (tocsin's own, for ``tocsin check``) have their rows left alone but
what surrounds them still checked. Worksheets and faults are invented (property tests).
"""
from __future__ import annotations

import zipfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from watcher.xlsx import sheetscan, validate

MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
N_XFS = 3


def _package(path: Path, sheet_xml: bytes) -> Path:
    parts = {
        "[Content_Types].xml": (
            '<?xml version="1.0" encoding="UTF-8"?><Types xmlns="http://schemas.openxmlformats.org/package/'
            '2006/content-types"><Default Extension="rels" ContentType="application/vnd.openxmlformats-'
            'package.relationships+xml"/><Default Extension="xml" ContentType="application/xml"/>'
            '<Override PartName="/xl/workbook.xml" ContentType="application/vnd.openxmlformats-'
            'officedocument.spreadsheetml.sheet.main+xml"/><Override PartName="/xl/worksheets/sheet1.xml" '
            'ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"/>'
            '<Override PartName="/xl/styles.xml" ContentType="application/vnd.openxmlformats-'
            'officedocument.spreadsheetml.styles+xml"/></Types>'),
        "_rels/.rels": (
            '<?xml version="1.0" encoding="UTF-8"?><Relationships xmlns="http://schemas.openxmlformats.org/'
            'package/2006/relationships"><Relationship Id="rId1" Type="http://schemas.openxmlformats.org/'
            'officeDocument/2006/relationships/officeDocument" Target="xl/workbook.xml"/></Relationships>'),
        "xl/workbook.xml": (
            f'<?xml version="1.0" encoding="UTF-8"?><workbook xmlns="{MAIN}" xmlns:r="{REL}"><sheets>'
            '<sheet name="Data" sheetId="1" r:id="rId1"/></sheets></workbook>'),
        "xl/_rels/workbook.xml.rels": (
            '<?xml version="1.0" encoding="UTF-8"?><Relationships xmlns="http://schemas.openxmlformats.org/'
            'package/2006/relationships"><Relationship Id="rId1" Type="http://schemas.openxmlformats.org/'
            'officeDocument/2006/relationships/worksheet" Target="worksheets/sheet1.xml"/><Relationship '
            'Id="rId2" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/styles" '
            'Target="styles.xml"/></Relationships>'),
        "xl/styles.xml": (
            f'<?xml version="1.0" encoding="UTF-8"?><styleSheet xmlns="{MAIN}"><fonts count="1"><font/>'
            '</fonts><fills count="1"><fill/></fills><borders count="1"><border/></borders>'
            f'<cellXfs count="{N_XFS}">' + '<xf numFmtId="0" fontId="0" fillId="0" borderId="0"/>' * N_XFS
            + '</cellXfs></styleSheet>'),
    }
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as z:
        for name, text in parts.items():
            z.writestr(name, text)
        z.writestr("xl/worksheets/sheet1.xml", sheet_xml)
    return path


def _sheet(rows: list[tuple[str, list[str]]], *, prefix: str = "", before: str = "",
           after: str = "") -> bytes:
    """A worksheet with ``rows``: (row start tag attributes, cells as whole ``<c>`` elements)."""
    p = f"{prefix}:" if prefix else ""
    ns = f'xmlns:{prefix}="{MAIN}"' if prefix else f'xmlns="{MAIN}"'
    body = "".join(f"<{p}row{attrs}>" + "".join(cells) + f"</{p}row>" for attrs, cells in rows)
    return (f'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<{p}worksheet {ns}>{before}'
            f'<{p}sheetData>{body}</{p}sheetData>{after}</{p}worksheet>').encode()


def _both(tmp_path: Path, xml: bytes, monkeypatch) -> tuple[list[str], list[str], bool]:
    """The validator's messages with the fast look and with the element walk only, and whether the
    fast look answered."""
    path = _package(tmp_path / "book.xlsx", xml)
    answered = []
    real = sheetscan.scan_rows

    def spy(pieces, n_xfs):
        out = real(pieces, n_xfs)
        answered.append(out is not None)
        return out

    monkeypatch.setattr(validate, "scan_rows", spy)
    fast = validate.check_package(path)
    monkeypatch.setattr(validate, "scan_rows", lambda pieces, n_xfs: None)
    slow = validate.check_package(path)
    return fast, slow, bool(answered and answered[0])


def _cell(col: str, row: int, style: int | None = None, order: str = "rs") -> str:
    s = f' s="{style}"' if style is not None else ""
    attrs = f' r="{col}{row}"{s} t="n"' if order == "rs" else f'{s} t="n" r="{col}{row}"'
    return f"<c{attrs}><v>{row}.5</v></c>"


LETTERS = ["A", "B", "C", "Z", "AA", "AB", "XFD"]


@st.composite
def sheets(draw):
    n = draw(st.integers(1, 12))
    rows, r = [], 0
    for _ in range(n):
        r += draw(st.integers(1, 3))
        cols = sorted(draw(st.sets(st.integers(0, len(LETTERS) - 1), max_size=4)))
        cells = [_cell(LETTERS[c], r, draw(st.one_of(st.none(), st.integers(0, N_XFS - 1))),
                       draw(st.sampled_from(["rs", "sr"]))) for c in cols]
        rows.append((f' r="{r}"' + draw(st.sampled_from(["", ' spans="1:4"', ' s="1" customFormat="1"'])),
                     cells))
    fault = draw(st.sampled_from(["none", "rows swapped", "cells swapped", "cell off its row",
                                  "style too big", "row style too big", "no reference", "comment",
                                  "bad letters", "reference in text", "tab before r"]))
    if fault == "rows swapped" and len(rows) > 1:
        rows[0], rows[1] = rows[1], rows[0]
    elif fault == "cells swapped":
        for _attrs, cells in rows:
            if len(cells) > 1:
                cells[0], cells[1] = cells[1], cells[0]
                break
    elif fault == "cell off its row" and rows[-1][1]:
        rows[-1][1][0] = rows[-1][1][0].replace(f'{rows[-1][0].split(chr(34))[1]}"', '999"', 1)
    elif fault == "style too big" and rows[0][1]:
        rows[0][1][0] = _cell("A", int(rows[0][0].split('"')[1]), N_XFS + 4)
    elif fault == "row style too big":
        rows[0] = (rows[0][0] + f' s="{N_XFS}"', rows[0][1])
    elif fault == "no reference" and rows[0][1]:
        rows[0][1][0] = '<c t="n"><v>1</v></c>'
    elif fault == "comment":
        rows[0] = (rows[0][0], ["<!-- <c r=\"A1\"/> -->"] + rows[0][1])
    elif fault == "reference in text":
        r = int(rows[0][0].split('"')[1])
        rows[0] = (rows[0][0], [f'<c r="A{r}" t="inlineStr"><is><t>x r="B{r}" s="9"</t></is></c>'] + [
            c for c in rows[0][1] if not c.startswith('<c r="A')])
    elif fault == "tab before r" and rows[0][1]:
        rows[0][1][0] = rows[0][1][0].replace(' r="', '\tr="', 1)
    elif fault == "bad letters" and rows[0][1]:
        rows[0][1][0] = rows[0][1][0].replace(' r="', ' r="ABCD', 1)
    return rows, fault


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(case=sheets(), prefix=st.sampled_from(["", "x"]))
def test_fast_look_gives_the_element_walks_messages(tmp_path, monkeypatch, case, prefix):
    rows, fault = case
    margins = '<pageMargins left="0.7" right="0.7" top="0.75" bottom="0.75" header="0.3" footer="0.3"/>'
    xml = _sheet(rows, prefix=prefix, before='<dimension ref="A1"/>', after=margins)
    fast, slow, answered = _both(tmp_path, xml, monkeypatch)
    assert fast == slow
    if fault == "none" and not prefix:
        assert answered and fast == []  # the common form: the fast look answers, and finds nothing
    if slow:
        assert not answered  # a problem is always put in the walk's own words


def test_fast_look_checks_well_formedness_and_pieces(monkeypatch):
    xml = _sheet([(f' r="{r}"', [_cell("A", r, 1), _cell("C", r)]) for r in range(1, 400)],
                 after='<conditionalFormatting sqref="A1"><cfRule type="colorScale" priority="1"/>'
                       '</conditionalFormatting>')
    whole = sheetscan.scan_rows([xml], N_XFS)
    assert whole is not None and b"<row" not in whole and b"conditionalFormatting" in whole
    for size in (1, 7, 64, 1000):
        assert sheetscan.scan_rows([xml[i:i + size] for i in range(0, len(xml), size)], N_XFS) == whole
    assert sheetscan.scan_rows([xml.replace(b"</row>", b"</rows>", 1)], N_XFS) is None
    assert sheetscan.scan_rows([xml.replace(b'r="C5"', b'r="B5"').replace(b'r="A5" s="1"', b'r="C5" s="1"')],
                               N_XFS) is None


def test_skipped_sheets_keep_their_rows_unread_but_the_rest_checked(tmp_path):
    good = _sheet([(' r="1"', [_cell("A", 1)]), (' r="2"', [_cell("A", 2)])],
                  before='<sheetViews><sheetView workbookViewId="0"/></sheetViews>')
    rows_bad = good.replace(b'<row r="2"', b'<row r="1"')
    path = _package(tmp_path / "a.xlsx", rows_bad)
    assert any("row 1 comes after row 1" in m for m in validate.check_package(path))
    assert validate.check_package(path, skip_cells=["DATA"]) == []
    order_bad = good.replace(b"<sheetViews><sheetView workbookViewId=\"0\"/></sheetViews>", b"").replace(
        b"</sheetData>", b'</sheetData><sheetViews><sheetView workbookViewId="0"/></sheetViews>')
    path = _package(tmp_path / "b.xlsx", order_bad)
    assert any("against the schema order" in m for m in validate.check_package(path, skip_cells=["Data"]))


@pytest.mark.parametrize("head, tail, expected", [
    (b"<worksheet><sheetData>", b"</sheetData><x/></worksheet>", b"<worksheet><sheetData/><x/></worksheet>"),
    (b"<worksheet><sheetData/>", b"<sheetData/></worksheet>", None),
    (b"<w:worksheet><w:sheetData>", b"</w:sheetData></w:worksheet>", None),
])
def test_skeleton(head, tail, expected):
    assert sheetscan.skeleton(head, tail) == expected
