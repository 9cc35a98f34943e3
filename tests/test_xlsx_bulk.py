"""The writer's fast paths give what its plain rules give.

* The bulk cell path of a table (:func:`watcher.xlsx.worksheet._numeric_slots`, whole columns formatted
  at once) writes the same bytes as the one-cell-at-a-time path of ``Cells`` blocks (``_Styles.scalar``,
  built on :func:`watcher.xlsx.xmlwriter.number_text`), with and without ``orjson``, across chunk borders.
* Deflate through ISA-L (``isal``) writes raw deflate (RFC 1951) that zlib inflates to the same bytes,
  and without ``isal`` zlib writes the package (judged by Python's ``zipfile``, which checks CRC-32).

Data are invented (seeded) for these property checks.
"""
from __future__ import annotations

import io
import zipfile
import zlib

import numpy as np
import pytest

from watcher.xlsx import archive, worksheet, xmlwriter
from watcher.xlsx.spec import Cells, Column, SheetSpec, Table
from watcher.xlsx.worksheet import style_keys, worksheet_chunks


def _columns(n: int) -> list[np.ndarray]:
    rng = np.random.default_rng(31)
    wide = rng.standard_normal(n) * 10.0 ** rng.integers(-300, 300, n)
    wide[::7], wide[::11], wide[::13], wide[::17] = np.nan, np.inf, 3.0, -0.0
    prob = rng.random(n)
    prob[::5] = np.nan
    small_ints = rng.integers(0, 3, n).astype(float)
    small_ints[::9] = np.nan
    big_ints = rng.integers(-10**12, 10**12, n).astype(float)
    big_ints[1::8] = -np.inf
    return [wide, prob, small_ints, big_ints, np.full(n, np.nan), np.round(rng.normal(800, 90, n), 1)]


def _sheet(spec: SheetSpec, chunk_rows: int) -> bytes:
    styles = {k: i for i, k in enumerate(sorted(style_keys(spec)))}
    return b"".join(worksheet_chunks(spec, styles=styles, date1904=False, chunk_rows=chunk_rows))


@pytest.mark.parametrize("fast", [True, False], ids=["orjson", "repr"])
def test_bulk_cells_equal_the_cell_by_cell_rule(monkeypatch, fast):
    if not fast:
        monkeypatch.setattr(xmlwriter, "_orjson", None)
    n = 600
    cols = _columns(n)
    dates = np.arange(np.datetime64("1899-10-01"), np.datetime64("1899-10-01") + n).astype("datetime64[ms]")
    dates[::10] = np.datetime64("NaT")
    # text columns: a few labels (coded once per column), and many distinct texts (per chunk)
    labels = tuple(("training", "validation", "future", " a & b <c>")[i % 7 % 4] for i in range(n))
    many = tuple(f"t{i}" for i in range(n))
    table = SheetSpec("T", (Table(0, 0, None, tuple(Column(c, "dec3") for c in cols)
                                  + (Column(dates, "date"), Column(labels), Column(many))),))
    rows = tuple(tuple((float(c[i]), "dec3") for c in cols) + ((dates[i], "date"), (labels[i], "general"),
                                                             (many[i], "general")) for i in range(n))
    cells = SheetSpec("T", (Cells(0, 0, rows),))
    for chunk_rows in (7, 4096):
        assert _sheet(table, chunk_rows) == _sheet(cells, chunk_rows)


def test_coded_text_column_equals_the_per_chunk_path(monkeypatch):
    # a column of few texts and blanks is coded once (worksheet._FEW_LABELS); the bytes are those of
    # the per-chunk path, blanks (a styled empty cell in a table) and bold cells included
    n = 1000
    labels = tuple(("training", "validation", None, " a & b <c>")[i % 7 % 4] for i in range(n))
    spec = SheetSpec("T", (Table(0, 0, ("period", "n"), (Column(labels, bold=np.arange(n) % 9 == 0),
                                                         Column(np.arange(n, dtype=float)))),))
    coded = {rows: _sheet(spec, rows) for rows in (7, 4096)}
    monkeypatch.setattr(worksheet, "_FEW_LABELS", 0)
    for rows, data in coded.items():
        assert data == _sheet(spec, rows)


def test_isal_deflate_is_read_by_zlib_and_zlib_is_the_fallback(tmp_path, monkeypatch):
    data = b"".join(_sheet(SheetSpec("T", (Table(0, 0, None, tuple(Column(c) for c in _columns(3000))),)),
                           512) for _ in range(3))
    for lib in ("isal", "zlib"):
        if lib == "zlib":
            monkeypatch.setattr(archive, "_isal", None)
            monkeypatch.setattr(archive, "_crc32", zlib.crc32)
        else:
            assert archive._isal is not None  # isal is a dependency; the fast path must be tested
        buf = io.BytesIO()
        w = archive.ZipWriter(buf)
        pieces = (data[i:i + 65536] for i in range(0, len(data), 65536))
        size = w.write_stream("xl/worksheets/sheet1.xml", pieces)
        w.close()
        assert size == len(data)
        with zipfile.ZipFile(io.BytesIO(buf.getvalue())) as zf:
            assert zf.testzip() is None
            assert zf.read("xl/worksheets/sheet1.xml") == data
        raw = archive.ZipSource(buf.getvalue(), "t").raw("xl/worksheets/sheet1.xml")
        assert zlib.decompress(raw, -15) == data
        assert len(raw) < len(data) / 3  # it did compress
