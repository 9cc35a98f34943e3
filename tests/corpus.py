"""A corpus of test workbooks for the package writer, built fresh for each test session.

Built with xlsxwriter (a general-purpose writer), post-processed where a feature needs parts xlsxwriter
does not write (a calculation chain, an unusual namespace prefix), converted with LibreOffice headless
(a hand-written flat ODF spreadsheet, and an xlsxwriter workbook re-saved by LibreOffice), plus the
Excel-saved ``.xlsm`` that ships with xlwings (a tool of the ``test`` extra). Between them they hold:
a chart sheet and an embedded chart, an image, comments, data validation, conditional formatting,
defined names (global and sheet-scoped), a hidden sheet, an active sheet that is not the first, a
macro part, a table, frozen panes, the 1904 date system, many shared strings, a sheet with 16,384
columns, formulas reading the sheet tocsin will write, a calculation chain and user custom document
properties.

All content is invented for the tests.
"""
from __future__ import annotations

import datetime as dt
import os
import shutil
import struct
import subprocess
import tempfile
import zipfile
import zlib
from pathlib import Path

import libreoffice
import xlsxwriter
import xlwings

FORMULA_TARGET = "'Fc'!B4"  # the first value cell of the sheet the tests write (see test_package.SPEC)
_XLWINGS_XLSM = "xlwings/quickstart.xlsm"


def png_bytes(width: int = 4, height: int = 3) -> bytes:
    """A small valid PNG (solid colour), written by hand (PNG specification, W3C 2003)."""
    def chunk(kind: bytes, data: bytes) -> bytes:
        return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data))

    raw = b"".join(b"\x00" + b"\x20\x80\xc0" * width for _ in range(height))
    ihdr = struct.pack(">IIBBBBB", width, height, 8, 2, 0, 0, 0)
    return (b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", ihdr) + chunk(b"IDAT", zlib.compress(raw))
            + chunk(b"IEND", b""))


def _data_sheet(wb, name: str = "Data", rows: int = 30):
    ws = wb.add_worksheet(name)
    ws.write_row(0, 0, ["day", "level", "flag"])
    for i in range(rows):
        ws.write_datetime(i + 1, 0, dt.datetime(2024, 1, 1) + dt.timedelta(days=i),
                          wb.add_format({"num_format": "yyyy-mm-dd"}))
        ws.write_number(i + 1, 1, round(10 + 3 * ((i * 7) % 11) / 10, 2))
        ws.write_number(i + 1, 2, 1 if (i * 7) % 11 > 6 else 0)
    return ws


def _xlsxwriter_books(folder: Path) -> dict[str, Path]:
    out: dict[str, Path] = {}

    p = folder / "xw_charts.xlsx"
    wb = xlsxwriter.Workbook(p)
    ws = _data_sheet(wb)
    chart = wb.add_chart({"type": "line"})
    chart.add_series({"name": "level", "categories": "=Data!$A$2:$A$31", "values": "=Data!$B$2:$B$31"})
    ws.insert_chart("E2", chart)
    img = folder / "dot.png"
    img.write_bytes(png_bytes())
    ws.insert_image("E20", str(img))
    cs = wb.add_chartsheet("Level chart")
    chart2 = wb.add_chart({"type": "column"})
    chart2.add_series({"values": "=Data!$C$2:$C$31"})
    cs.set_chart(chart2)
    wb.close()
    out["charts"] = p

    p = folder / "xw_annotated.xlsx"
    wb = xlsxwriter.Workbook(p)
    ws = _data_sheet(wb)
    ws.write_comment("B2", "checked by hand")
    ws.data_validation("C2:C31", {"validate": "list", "source": [0, 1]})
    ws.conditional_format("B2:B31", {"type": "cell", "criteria": ">", "value": 11,
                                     "format": wb.add_format({"bg_color": "#DDEEFF"})})
    ws.freeze_panes(1, 1)
    t = wb.add_worksheet("Tabled")
    t.add_table("A1:C4", {"data": [[1, 2, 3], [4, 5, 6], [7, 8, 9]],
                          "columns": [{"header": "a"}, {"header": "b"}, {"header": "c"}]})
    wb.set_custom_property("Checked by", "night shift")
    wb.set_custom_property("Revision", 7)
    wb.close()
    out["annotated"] = p

    p = folder / "xw_names.xlsx"
    wb = xlsxwriter.Workbook(p)
    _data_sheet(wb)
    s2 = wb.add_worksheet("Second")
    s2.write("A1", 42)
    hidden = wb.add_worksheet("Lookup")
    hidden.write_column("A1", ["x", "y", "z"])
    hidden.hide()
    wb.define_name("Levels", "=Data!$B$2:$B$31")
    wb.define_name("Second!Answer", "=Second!$A$1")
    wb.define_name("Data!_xlnm.Print_Area", "=Data!$A$1:$C$31")
    s2.activate()
    wb.close()
    out["names"] = p

    p = folder / "xw_macro.xlsm"
    wb = xlsxwriter.Workbook(p)
    _data_sheet(wb)
    vba = _vba_project(folder)
    wb.add_vba_project(str(vba))
    wb.close()
    out["macro"] = p

    p = folder / "xw_1904.xlsx"
    wb = xlsxwriter.Workbook(p, {"date_1904": True})
    _data_sheet(wb)
    wb.close()
    out["d1904"] = p

    p = folder / "xw_strings.xlsx"
    wb = xlsxwriter.Workbook(p)
    ws = wb.add_worksheet("Words")
    for i in range(20_000):
        ws.write_string(i, 0, f"entry {i:05d} of the ferry log")
    wb.close()
    out["strings"] = p

    p = folder / "xw_wide.xlsx"
    wb = xlsxwriter.Workbook(p)
    ws = wb.add_worksheet("Wide")
    ws.write_row(0, 0, list(range(16_384)))
    wb.close()
    out["wide"] = p

    p = folder / "xw_formulas.xlsx"
    wb = xlsxwriter.Workbook(p)
    ws = _data_sheet(wb)
    ws.write_formula("E1", "=SUM(B2:B31)")
    ws.write_formula("E2", f"={FORMULA_TARGET}*2", None, 0)
    wb.close()
    _add_calc_chain(p, [("E1", 1), ("E2", None)])
    out["formulas"] = p

    p = folder / "xw_prefixed.xlsx"
    wb = xlsxwriter.Workbook(p)
    _data_sheet(wb)
    wb.close()
    _prefix_workbook(p)
    out["prefixed"] = p

    return out


def _vba_project(folder: Path) -> Path:
    """A vbaProject.bin: the one in xlwings' Excel-saved quickstart workbook when present, else bytes
    that only stand for one (the tests check that the part is copied byte for byte)."""
    target = folder / "vbaProject.bin"
    src = _xlwings_xlsm()
    if src is not None:
        with zipfile.ZipFile(src) as z:
            target.write_bytes(z.read("xl/vbaProject.bin"))
    else:
        target.write_bytes(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + bytes(range(256)) * 8)
    return target


def _xlwings_xlsm() -> Path | None:
    path = Path(xlwings.__file__).parent / "quickstart.xlsm"     # only its data file is used
    return path if path.exists() else None


def _rewrite(path: Path, changes: dict[str, bytes | None]) -> None:
    """Rewrite members of a zip (None deletes); other members are re-added unchanged."""
    with zipfile.ZipFile(path) as z:
        items = [(i, z.read(i.filename)) for i in z.infolist()]
    tmp = path.with_suffix(".tmp")
    with zipfile.ZipFile(tmp, "w", zipfile.ZIP_DEFLATED) as z:
        for info, data in items:
            if info.filename in changes:
                new = changes.pop(info.filename)
                if new is None:
                    continue
                data = new
            z.writestr(info.filename, data)
        for name, data in changes.items():
            if data is not None:
                z.writestr(name, data)
    os.replace(tmp, path)


def _add_calc_chain(path: Path, cells: list[tuple[str, int | None]]) -> None:
    with zipfile.ZipFile(path) as z:
        ct = z.read("[Content_Types].xml").decode()
        rels = z.read("xl/_rels/workbook.xml.rels").decode()
    entries = "".join(f'<c r="{r}"' + (f' i="{i}"' if i is not None else "") + "/>" for r, i in cells)
    chain = ('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<calcChain xmlns="http://schemas.'
             f'openxmlformats.org/spreadsheetml/2006/main">{entries}</calcChain>')
    ct = ct.replace("</Types>", '<Override PartName="/xl/calcChain.xml" ContentType="application/vnd.openxml'
                    'formats-officedocument.spreadsheetml.calcChain+xml"/></Types>')
    rels = rels.replace("</Relationships>", '<Relationship Id="rId99" Type="http://schemas.openxmlformats.'
                        'org/officeDocument/2006/relationships/calcChain" Target="calcChain.xml"/>'
                        "</Relationships>")
    _rewrite(path, {"[Content_Types].xml": ct.encode(), "xl/_rels/workbook.xml.rels": rels.encode(),
                    "xl/calcChain.xml": chain.encode()})


def _prefix_workbook(path: Path) -> None:
    """Rewrite workbook.xml with the main namespace under prefix ``x:``, the relationships namespace under
    ``rel:``, an ``mc:Ignorable`` list naming a declared extension namespace, and an extension attribute."""
    with zipfile.ZipFile(path) as z:
        wb = z.read("xl/workbook.xml").decode()
    from lxml import etree

    root = etree.fromstring(wb.encode())
    main = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
    r = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
    nsmap = {"x": main, "rel": r, "mc": "http://schemas.openxmlformats.org/markup-compatibility/2006",
             "x15ac": "http://schemas.microsoft.com/office/spreadsheetml/2010/11/ac"}

    def copy(el):
        new = etree.Element(el.tag, nsmap=nsmap if el is root else None)
        for k, v in el.attrib.items():
            new.set(k, v)
        for c in el:
            new.append(copy(c))
        return new

    out = copy(root)
    out.set("{http://schemas.openxmlformats.org/markup-compatibility/2006}Ignorable", "x15ac")
    out.set("{http://schemas.microsoft.com/office/spreadsheetml/2010/11/ac}note", "kept")
    _rewrite(path, {"xl/workbook.xml": etree.tostring(out, xml_declaration=True, encoding="UTF-8",
                                                      standalone=True)})


FODS = """<?xml version="1.0" encoding="UTF-8"?>
<office:document xmlns:office="urn:oasis:names:tc:opendocument:xmlns:office:1.0"
 xmlns:table="urn:oasis:names:tc:opendocument:xmlns:table:1.0"
 xmlns:text="urn:oasis:names:tc:opendocument:xmlns:text:1.0" xmlns:dc="http://purl.org/dc/elements/1.1/"
 xmlns:of="urn:oasis:names:tc:opendocument:xmlns:of:1.2" office:version="1.2"
 office:mimetype="application/vnd.oasis.opendocument.spreadsheet">
<office:body><office:spreadsheet>
<table:table table:name="Pumps">
<table:table-row><table:table-cell office:value-type="string"><text:p>hour</text:p></table:table-cell>
<table:table-cell office:value-type="string"><text:p>pressure</text:p></table:table-cell>
<table:table-cell office:value-type="string"><text:p>double</text:p></table:table-cell></table:table-row>
<table:table-row><table:table-cell office:value-type="float" office:value="1"><office:annotation>
<dc:creator>ops</dc:creator><text:p>first reading</text:p></office:annotation><text:p>1</text:p>
</table:table-cell><table:table-cell office:value-type="float" office:value="3.25"><text:p>3.25</text:p>
</table:table-cell><table:table-cell table:formula="of:=[.B2]*2" office:value-type="float" office:value="6.5">
<text:p>6.5</text:p></table:table-cell></table:table-row>
<table:table-row><table:table-cell office:value-type="float" office:value="2"><text:p>2</text:p>
</table:table-cell><table:table-cell office:value-type="float" office:value="4.75"><text:p>4.75</text:p>
</table:table-cell><table:table-cell table:formula="of:=[.B3]*2" office:value-type="float" office:value="9.5">
<text:p>9.5</text:p></table:table-cell></table:table-row>
</table:table>
<table:table table:name="Notes"><table:table-row><table:table-cell office:value-type="string">
<text:p>kept as it is</text:p></table:table-cell></table:table-row></table:table>
</office:spreadsheet></office:body></office:document>
"""


def lo_convert(paths: list[Path], fmt: str, outdir: Path, *, recalc: bool = False,
               timeout: float = 300) -> list[Path]:
    """Convert several files in one LibreOffice run (each start costs seconds); return what it made.
    A fresh profile per run; a failure to load any file fails the test."""
    exe = libreoffice.require_soffice()
    outdir.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory(prefix="tocsin-lo-profile-") as profile:
        if recalc:
            user = Path(profile) / "user"
            user.mkdir(parents=True)
            (user / "registrymodifications.xcu").write_text(libreoffice._RECALC_XCU, encoding="utf-8")
        before = set(outdir.iterdir())
        proc = subprocess.run(
            [exe, f"-env:UserInstallation=file://{profile}", "--headless", "--norestore",
             "--convert-to", fmt, "--outdir", str(outdir), *map(str, paths)],
            capture_output=True, text=True, timeout=timeout)
    err = proc.stderr + proc.stdout
    assert "could not be loaded" not in err, f"LibreOffice could not load a file: {err}"
    produced = sorted(set(outdir.iterdir()) - before)
    assert produced, f"LibreOffice produced nothing: {err}"
    return produced


def _lo_books(folder: Path, base: dict[str, Path]) -> dict[str, Path]:
    src = folder / "lo_src"
    src.mkdir()
    fods = src / "lo_from_fods.fods"
    fods.write_text(FODS, encoding="utf-8")
    resave = src / "lo_resaved.xlsx"
    shutil.copy(base["charts"], resave)
    outdir = folder / "lo_out"
    lo_convert([fods, resave], "xlsx:Calc MS Excel 2007 XML", outdir)
    out = {}
    for key, stem in (("lo_fods", "lo_from_fods"), ("lo_resaved", "lo_resaved")):
        made = outdir / f"{stem}.xlsx"
        assert made.exists(), f"LibreOffice did not write {made.name}"
        final = folder / made.name
        shutil.move(made, final)
        out[key] = final
    return out


def build(folder: Path, *, with_libreoffice: bool = True) -> dict[str, Path]:
    """Build the corpus into ``folder``; return name -> workbook path."""
    folder.mkdir(parents=True, exist_ok=True)
    books = _xlsxwriter_books(folder)
    xlsm = _xlwings_xlsm()
    if xlsm is not None:
        target = folder / "excel_quickstart.xlsm"
        shutil.copy(xlsm, target)
        books["excel_xlsm"] = target
    if with_libreoffice and libreoffice.soffice() is not None:
        books.update(_lo_books(folder, books))
    elif with_libreoffice and os.environ.get("CI"):
        libreoffice.require_soffice()
    return books


# -- what the tests write, and how they compare packages -----------------------------------------
def forecast_spec(name: str = "Fc", *, n: int = 40, seed: int = 7, charts: bool = True):
    """A sheet shaped like a forecast sheet (invented, seeded data): a header block, a table of dates,
    values with blanks and infinities, 0/1 events, text periods and full-precision probabilities, a bold
    mask, frozen panes, a colour scale and (optionally) a line and a scatter chart.

    The first value cell is B4 (``FORMULA_TARGET``) and holds 0.1."""
    import numpy as np

    from watcher.xlsx.spec import Cells, ChartSpec, Column, Range, Series, SheetSpec, Table

    rng = np.random.default_rng(seed)
    dates = np.arange(np.datetime64("2024-12-25"), np.datetime64("2024-12-25") + n)
    values = np.round(rng.normal(850, 60, n), 1)
    values[0] = 0.1
    values[5] = np.nan
    values[6] = np.inf
    events = (values > 870).astype(float)
    events[5] = np.nan
    prob = rng.random(n)
    period = ["training"] * (n // 2) + ["validation"] * (n - n // 2 - 3) + ["future"] * 3
    table = Table(2, 0, ("date", "value", "event", "period", "probability"), (
        Column(dates, "date"), Column(values, "general"), Column(events, "integer"), Column(period, "text"),
        Column(prob, "percent", bold=prob == prob.max())))
    head = Cells(0, 0, ((("Ferry passengers: will tomorrow exceed 870?", "title"),),
                        (("status", "bold"), ("ok", "good"), ("refreshed", "bold"),
                         (dt.datetime(2025, 1, 2, 6, 30), "datetime"))))
    chart_specs = ()
    if charts:
        chart_specs = (
            ChartSpec("line", "Passengers", (2, 7), (Series(table.header_ref(1), table.ref(1)),),
                      categories=table.ref(0), y_axis_title="passengers"),
            ChartSpec("scatter", "Probability against value", (21, 7),
                      (Series("forecast", table.ref(4), x=table.ref(1), style="marker"),),
                      y_range=(0, 1), y_fmt="percent"))
    return SheetSpec(name, (head, table), col_widths={0: 12, 3: 11}, freeze=(3, 1), charts=chart_specs,
                     color_scales=(Range(3, 4, 2 + n, 4),), tab_color="2F6B8F"), dict(
        dates=dates, values=values, events=events, prob=prob, period=period)


def _rels_targets(z: zipfile.ZipFile, part: str) -> list[str]:
    import posixpath
    from urllib.parse import unquote
    from xml.etree import ElementTree as ET

    folder, base = posixpath.split(part)
    rels = posixpath.join(folder, "_rels", base + ".rels")
    if rels not in z.namelist():
        return []
    out = []
    for el in ET.fromstring(z.read(rels)):
        if el.get("TargetMode") == "External":
            continue
        t = unquote(el.get("Target", ""))
        p = t.lstrip("/") if t.startswith("/") else posixpath.normpath(posixpath.join(folder, t))
        out.append(p)
    return out


def sheet_parts(path: Path, sheet_names) -> set[str]:
    """All members that belong to the named sheets: their parts, relationships parts and everything
    reached from them (drawings, charts, ...). Read with the standard library only."""
    import posixpath
    from xml.etree import ElementTree as ET

    rns = "{http://schemas.openxmlformats.org/officeDocument/2006/relationships}id"
    with zipfile.ZipFile(path) as z:
        wb = ET.fromstring(z.read("xl/workbook.xml"))
        rels = ET.fromstring(z.read("xl/_rels/workbook.xml.rels"))
        by_id = {r.get("Id"): posixpath.normpath(posixpath.join("xl", r.get("Target")))
                 if not r.get("Target").startswith("/") else r.get("Target").lstrip("/") for r in rels}
        wanted = {n.casefold() for n in sheet_names}
        out: set[str] = set()
        stack = [by_id[s.get(rns)] for s in wb.iterfind(".//{*}sheet")
                 if s.get("name", "").casefold() in wanted]
        while stack:
            p = stack.pop()
            if p in out:
                continue
            out.add(p)
            folder, base = posixpath.split(p)
            r = posixpath.join(folder, "_rels", base + ".rels")
            if r in z.namelist():
                out.add(r)
            stack.extend(_rels_targets(z, p))
    return out


REGISTRY = {"[Content_Types].xml", "xl/workbook.xml", "xl/_rels/workbook.xml.rels", "xl/styles.xml",
            "docProps/custom.xml", "xl/calcChain.xml"}


def raw_members(path: Path) -> dict[str, tuple[int, int, bytes]]:
    """name -> (CRC, uncompressed size, compressed bytes) read straight from the zip."""
    out = {}
    data = path.read_bytes()
    with zipfile.ZipFile(path) as z:
        for info in z.infolist():
            off = info.header_offset
            n_name, n_extra = struct.unpack("<HH", data[off + 26:off + 30])
            start = off + 30 + n_name + n_extra
            out[info.filename] = (info.CRC, info.file_size, data[start:start + info.compress_size])
    return out


def lossless_problems(before: Path, after: Path, owned_before=(), owned_after=()) -> list[str]:
    """How ``after`` differs from ``before`` beyond what tocsin may change: every member of ``before``
    that is not a registry part nor part of tocsin's sheets must be in ``after`` with the same compressed
    bytes, CRC and size, in the same relative order; every new member must belong to tocsin's sheets
    (or be the custom-properties part and the package relationships that announce it)."""
    problems = []
    a, b = raw_members(before), raw_members(after)
    mine_a = sheet_parts(before, owned_before) if owned_before else set()
    mine_b = sheet_parts(after, owned_after) if owned_after else set()
    allowed = set(REGISTRY)
    if "docProps/custom.xml" not in a:
        allowed.add("_rels/.rels")
    if "xl/styles.xml" not in a:
        allowed.add("xl/_rels/workbook.xml.rels")
    kept = [n for n in a if n not in allowed and n not in mine_a]
    for n in kept:
        if n not in b:
            problems.append(f"{n} was dropped")
        elif a[n] != b[n]:
            problems.append(f"{n} changed (crc {a[n][0]:08x} -> {b[n][0]:08x})")
    order_b = [n for n in b if n in set(kept)]
    if order_b != [n for n in kept if n in b]:
        problems.append("members tocsin does not own changed order")
    for n in b:
        if n not in a and n not in mine_b and n not in allowed:
            problems.append(f"{n} is new but does not belong to tocsin's sheets")
    return problems


_CACHE: dict[str, dict[str, Path]] = {}


def session_books(tmp_path_factory) -> dict[str, Path]:
    """The corpus, built once per test session (shared by the test modules that use it)."""
    if "books" not in _CACHE:
        _CACHE["books"] = build(tmp_path_factory.mktemp("corpus"))
    return _CACHE["books"]


def copy_book(books: dict[str, Path], name: str, folder: Path) -> Path:
    src = books[name]
    dst = folder / src.name
    shutil.copyfile(src, dst)
    return dst


def profile_spec(name: str = "Fc profile"):
    """A sheet shaped like a profile sheet (invented data): event rate by month and year with a line per
    year plus the overall rate, a reliability table with its diagram (and the no-skill diagonal), ROC
    points with their curve."""
    import numpy as np

    from watcher.xlsx.spec import ChartSpec, Column, Range, Series, SheetSpec, Table

    rng = np.random.default_rng(5)
    months = ["Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec"]
    years = {y: np.round(np.clip(0.2 + 0.15 * np.sin(np.arange(12) / 2) + rng.normal(0, 0.04, 12), 0, 1), 3)
             for y in (2022, 2023, 2024)}
    overall = np.mean(np.vstack(list(years.values())), axis=0)
    rates = Table(0, 0, ("month", *map(str, years), "all years"),
                  (Column(months, "text"), *(Column(v, "percent") for v in years.values()),
                   Column(overall, "percent")))
    mean_f = (np.arange(10) + 0.5) / 10
    observed = np.clip(mean_f + rng.normal(0, 0.05, 10), 0, 1)
    rel = Table(15, 0, ("mean forecast", "observed frequency", "no skill"),
                (Column(mean_f, "dec3"), Column(observed, "dec3"), Column(mean_f, "dec3")))
    fpr = np.concatenate([[0.0], np.sort(rng.random(8)), [1.0]])
    tpr = np.sqrt(fpr)
    roc = Table(28, 0, ("false alarm rate", "hit rate", "no skill"),
                (Column(fpr, "dec3"), Column(tpr, "dec3"), Column(fpr, "dec3")))
    line = ChartSpec("line", "Event rate by month", (0, 6),
                     tuple(Series(rates.header_ref(j), rates.ref(j), style="line") for j in range(1, 5)),
                     categories=rates.ref(0), y_axis_title="share of days", y_fmt="percent")
    reliability = ChartSpec("scatter", "Reliability diagram", (19, 6), (
        Series(rel.header_ref(1), rel.ref(1), x=rel.ref(0), style="line+marker"),
        Series("no skill", rel.ref(2), x=rel.ref(0), style="reference")),
        x_axis_title="forecast probability", y_axis_title="observed frequency", x_range=(0, 1),
        y_range=(0, 1))
    roc_chart = ChartSpec("scatter", "ROC curve", (38, 6), (
        Series("logistic", roc.ref(1), x=roc.ref(0), style="line"),
        Series("no skill", roc.ref(2), x=roc.ref(0), style="reference")),
        x_axis_title="false alarm rate", y_axis_title="hit rate", x_range=(0, 1), y_range=(0, 1))
    return SheetSpec(name, (rates, rel, roc), col_widths={0: 16}, charts=(line, reliability, roc_chart),
                     color_scales=(Range(1, 1, 12, 3),))
