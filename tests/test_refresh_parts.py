"""Reading only what a job needs: the job table, the header rows of the data sheets (from the start of
their parts), and a data sheet in full only when its part changed since the last refresh
(watcher/refresh/parts.py).

Data: ``seattle-weather`` (Vega datasets, from NOAA; shipped in the ``vega_datasets`` package), written
as an analyst does with ``pandas.DataFrame.to_excel``.
"""
from __future__ import annotations

import re
import zipfile
from pathlib import Path

import openpyxl
import pandas as pd
from test_refresh import run_cli
from vega_datasets import data as vega

from watcher.refresh import parts, reader


def weather_book(path: Path) -> Path:
    with pd.ExcelWriter(path, engine="openpyxl") as writer:
        vega.seattle_weather().iloc[:500].to_excel(writer, sheet_name="Weather", index=False)
    return path


def loads_of(monkeypatch) -> list[str]:
    loads: list[str] = []
    real = reader.Book._load
    monkeypatch.setattr(reader.Book, "_load", lambda self, name: loads.append(name) or real(self, name))
    return loads


def test_an_unchanged_data_sheet_is_not_read_again(tmp_path, capsys, monkeypatch):
    path = weather_book(tmp_path / "w.xlsx")
    assert run_cli(capsys, "init", str(path), "--sheet", "Weather", "--value", "wind", "--event", ">5",
                   "--job", "windy")[0] == 0
    loads = loads_of(monkeypatch)
    code, out, err = run_cli(capsys, "refresh", str(path))
    assert code == 0 and "refreshed" in out, err
    assert loads == ["tocsin", "Weather"]
    loads.clear()
    code, out, err = run_cli(capsys, "refresh", str(path))       # tocsin's own write: nothing to read
    assert code == 0 and "unchanged" in out, out
    assert loads == ["tocsin"]
    wb = openpyxl.load_workbook(path)                              # a colleague edits one value
    wb["Weather"]["E40"] = 9.5
    wb.save(path)
    loads.clear()
    code, out, err = run_cli(capsys, "refresh", str(path))
    assert code == 0 and "refreshed" in out, out
    assert loads == ["tocsin", "Weather"]
    loads.clear()
    code, out, err = run_cli(capsys, "refresh", str(path))
    assert code == 0 and "unchanged" in out and loads == ["tocsin"], out
    wb = openpyxl.load_workbook(path)                              # an edit in another sheet only
    wb["tocsin"]["Z30"] = "a note"
    wb.save(path)
    loads.clear()
    code, out, err = run_cli(capsys, "refresh", str(path))
    assert code == 0 and "unchanged" in out, out


def _rewrite(path: Path, dest: Path, member: str, edit) -> Path:
    with zipfile.ZipFile(path) as src, zipfile.ZipFile(dest, "w", zipfile.ZIP_DEFLATED) as out:
        for info in src.infolist():
            data = src.read(info.filename)
            out.writestr(info, edit(data) if info.filename == member else data)
    return dest


def test_the_key_keeps_appended_styles_and_sees_changed_ones(tmp_path):
    path = weather_book(tmp_path / "w.xlsx")
    settings = {"job": "windy"}
    key = parts.source_key(path, "Weather", settings)
    assert key is not None and parts.same_source(key, parts.source_key(path, "Weather", settings), path)
    assert not parts.same_source(key, parts.source_key(path, "Weather", {"job": "other"}), path)

    def append_style(xml: bytes) -> bytes:   # what tocsin's writer does: a new cell style at the end
        xml = re.sub(rb'<cellXfs count="(\d+)"', lambda m: b'<cellXfs count="%d"' % (int(m.group(1)) + 1),
                     xml)
        return xml.replace(b"</cellXfs>", b'<xf numFmtId="10" fontId="0" fillId="0" borderId="0"/></cellXfs>')

    def change_style(xml: bytes) -> bytes:   # an existing style's number format edited
        head, rest = xml.split(b"<cellXfs", 1)
        return head + b"<cellXfs" + re.sub(rb'numFmtId="\d+"', b'numFmtId="49"', rest, count=2)

    appended = _rewrite(path, tmp_path / "a.xlsx", "xl/styles.xml", append_style)
    changed = _rewrite(path, tmp_path / "c.xlsx", "xl/styles.xml", change_style)
    # rewriting the zip recompresses the sheet; compare the key of the rewritten files with each other
    base = _rewrite(path, tmp_path / "b.xlsx", "xl/styles.xml", lambda x: x)
    recorded = parts.source_key(base, "Weather", settings)
    assert parts.same_source(recorded, parts.source_key(appended, "Weather", settings), appended)
    assert not parts.same_source(recorded, parts.source_key(changed, "Weather", settings), changed)
