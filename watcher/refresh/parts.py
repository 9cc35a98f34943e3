"""What a job reads, at the level of the workbook's parts (Office Open XML, ECMA-376 Part 1), so that
a refresh reads no more of a data sheet than it needs.

* :func:`parts_of`: the part of each worksheet, the shared strings and the styles, and the date system,
  from the workbook part and its relationships (small parts; the sheets are not opened).
* :func:`header_cells`: the header row of a sheet (its first row holding a value), read from the start
  of the sheet's part, decompressed only until that row ends, so validating the job table does not
  load a sheet of a million rows. Anything the quick reading cannot decide the way the full reader
  does (a date or a boolean in the header row, a style on a number, a used range wider than the
  header, a missing cell reference) gives None, and the caller loads the sheet as before.
* :func:`source_key`: a key of everything a job's read depends on -- the compressed bytes of its data
  sheet's part and of the shared strings (deflate decodes deterministically: the same bytes are the same
  cells), the date system, the number formats of the cell styles that exist, the job's settings and
  tocsin's version. A job whose key is the one recorded at its last refresh reads the same columns,
  so it is not read again (:func:`same_source`). tocsin's own writes copy those parts unchanged and only
  append styles (DEVELOPERS.md, The package writer), so they keep the key.
"""
from __future__ import annotations

import hashlib
import json
import posixpath
import struct
import zipfile
import zlib
from dataclasses import dataclass
from pathlib import Path
from typing import Any
from xml.etree import ElementTree

from watcher.refresh.texts import VERSION

__all__ = ["Parts", "parts_of", "header_cells", "source_key", "same_source"]

_REL_KINDS = ("worksheet", "sharedStrings", "styles")
_CHUNK = 1 << 16
_MAX_HEADER_BYTES = 8 << 20      # a header row further in than this: let the full reader find it


@dataclass(frozen=True)
class Parts:
    """The parts a data read depends on: ``sheets`` maps a sheet name to its part; ``strings`` and
    ``styles`` are the shared-strings and styles parts (None when absent)."""

    sheets: dict[str, str]
    strings: str | None
    styles: str | None
    date1904: bool


def _local(tag: str) -> str:
    return tag.rsplit("}", 1)[-1]


def _attr(el: ElementTree.Element, name: str) -> str | None:
    for key, value in el.attrib.items():
        if _local(key) == name:
            return value
    return None


def _target(base: str, target: str) -> str:
    if target.startswith("/"):
        return target.lstrip("/")
    return posixpath.normpath(posixpath.join(posixpath.dirname(base), target))


def parts_of(z: zipfile.ZipFile) -> Parts | None:
    """The parts of an open package, or None when its workbook part cannot be found simply."""
    try:
        root_rels = _small(z, "_rels/.rels")
        book = next(_target("", r.get("Target", "")) for r in root_rels
                    if r.get("Type", "").endswith("/officeDocument"))
        rels_name = posixpath.join(posixpath.dirname(book), "_rels", posixpath.basename(book) + ".rels")
        rels = {r.get("Id"): r for r in _small(z, rels_name)}
        wb = _small(z, book)
    except (KeyError, StopIteration, ElementTree.ParseError, zipfile.BadZipFile, ValueError):
        return None
    found: dict[str, str | None] = dict.fromkeys(_REL_KINDS)
    for r in rels.values():
        kind = r.get("Type", "").rsplit("/", 1)[-1]
        if kind in ("sharedStrings", "styles") and r.get("TargetMode") != "External":
            found[kind] = _target(book, r.get("Target", ""))
    sheets: dict[str, str] = {}
    date1904 = False
    for el in wb.iter():
        name = _local(el.tag)
        if name == "workbookPr":
            date1904 = (_attr(el, "date1904") or "").lower() in ("1", "true")
        elif name == "sheet":
            rel = rels.get(_attr(el, "id") or "")
            if rel is not None and rel.get("Type", "").endswith("/worksheet") and el.get("name"):
                sheets[el.get("name")] = _target(book, rel.get("Target", ""))
    return Parts(sheets, found["sharedStrings"], found["styles"], date1904)


# ------------------------------------------------------------------------------------ the header row

def _column(ref: str) -> int | None:
    letters = ref.rstrip("0123456789")
    if not letters or not letters.isalpha() or not ref[len(letters):].isdigit():
        return None
    index = 0
    for ch in letters.upper():
        index = index * 26 + ord(ch) - 64
    return index - 1


def _text(el: ElementTree.Element) -> str:
    """The text of an inline or shared string: its ``t`` elements, phonetic runs (``rPh``) left out."""
    out: list[str] = []

    def walk(node: ElementTree.Element) -> None:
        for child in node:
            name = _local(child.tag)
            if name == "t":
                out.append(child.text or "")
            elif name != "rPh":
                walk(child)

    walk(el)
    return "".join(out)


def _shared(z: zipfile.ZipFile, part: str | None, wanted: set[int]) -> dict[int, str] | None:
    """The shared strings of the indexes ``wanted``, read only as far as the largest of them."""
    if not wanted:
        return {}
    if part is None:
        return None
    out: dict[int, str] = {}
    last = max(wanted)
    i = 0
    with z.open(part) as fh:
        if b"<!DOCTYPE" in fh.read(_CHUNK):
            return None
        fh.seek(0)
        for _event, el in ElementTree.iterparse(fh, events=("end",)):
            if _local(el.tag) != "si":
                continue
            if i in wanted:
                out[i] = _text(el)
            el.clear()
            i += 1
            if i > last:
                break
    return out if len(out) == len(wanted) else None


def header_cells(z: zipfile.ZipFile, parts: Parts, sheet: str) -> tuple[int, list[Any]] | None:
    """The header row of ``sheet``: its 1-based row number and its cells from column A (None for a
    blank; text as str, numbers as float), or None when the full reader must decide (see the module
    docstring)."""
    part = parts.sheets.get(sheet)
    if part is None:
        return None
    parser = ElementTree.XMLPullParser(events=("start", "end"))
    width = None
    read = 0
    try:
        with z.open(part) as fh:
            while read < _MAX_HEADER_BYTES:
                chunk = fh.read(_CHUNK)
                if not chunk or (not read and b"<!DOCTYPE" in chunk):   # no document type in a part
                    return None
                read += len(chunk)
                parser.feed(chunk)
                for event, el in parser.read_events():
                    name = _local(el.tag)
                    if event == "start" and name == "dimension":
                        last = (el.get("ref") or "").split(":")[-1]
                        width = _column(last)
                    elif event == "end" and name == "row":
                        row = _row(el)
                        if row is None:
                            return None
                        if row == ():
                            el.clear()
                            continue
                        number, cells, strings = row
                        texts = _shared(z, parts.strings, {v for v in strings.values()})
                        if texts is None or width is None or width + 1 != len(cells):
                            return None
                        for j, k in strings.items():
                            cells[j] = texts[k] if texts[k].strip() else None
                        if all(v is None for v in cells) or cells[-1] is None:
                            return None
                        return number, cells
                    elif event == "end" and name == "sheetData":
                        return None
    except (KeyError, ElementTree.ParseError, zipfile.BadZipFile, zlib.error, OSError, ValueError):
        return None
    return None


def _row(el: ElementTree.Element) -> tuple[int, list[Any], dict[int, int]] | tuple[()] | None:
    """One ``row`` element: () when it holds no value, None when the quick reading cannot decide."""
    number = el.get("r")
    if number is None or not number.isdigit():
        return None
    cells: dict[int, Any] = {}
    strings: dict[int, int] = {}
    for c in el:
        if _local(c.tag) != "c":
            continue
        j = _column(c.get("r") or "")
        if j is None:
            return None
        kind = c.get("t", "n")
        v = next((x.text for x in c if _local(x.tag) == "v"), None)
        if kind == "inlineStr":
            node = next((x for x in c if _local(x.tag) == "is"), None)
            text = _text(node) if node is not None else ""
            if text.strip():
                cells[j] = text
        elif kind in ("s", "str"):
            if kind == "s" and v is not None and v.strip().isdigit():
                strings[j] = int(v)
                cells[j] = ""
            elif kind == "str" and v is not None and v.strip():
                cells[j] = v
            elif v is not None:
                return None
        elif kind == "n":
            if v is None:
                continue
            if c.get("s", "0") != "0":     # a style may make the number a date: the full reader decides
                return None
            cells[j] = float(v)
        else:                              # booleans, errors, ISO dates
            return None
    if not cells:
        return ()
    out: list[Any] = [None] * (max(cells) + 1)
    for j, v in cells.items():
        out[j] = v
    return int(number), out, strings


# ------------------------------------------------------------------------------------- the source key

def _raw_digest(path: Path, z: zipfile.ZipFile, part: str | None) -> str:
    """SHA-256 of a member's compressed bytes (with its method, CRC and sizes); '' when absent."""
    if part is None:
        return ""
    info = z.getinfo(part)
    h = hashlib.sha256(f"{info.compress_type}:{info.CRC}:{info.file_size}:{info.compress_size}".encode())
    with open(path, "rb") as fh:
        fh.seek(info.header_offset)
        local = fh.read(30)
        if len(local) != 30 or local[:4] != b"PK\x03\x04":
            raise ValueError(f"no local header for {part}")
        name_len, extra_len = struct.unpack("<HH", local[26:30])
        fh.seek(info.header_offset + 30 + name_len + extra_len)
        left = info.compress_size
        while left:
            block = fh.read(min(left, 1 << 20))
            if not block:
                raise ValueError(f"{part} is cut short")
            h.update(block)
            left -= len(block)
    return h.hexdigest()


def _small(z: zipfile.ZipFile, part: str) -> ElementTree.Element:
    """A small registry part parsed; a document type (never in a valid part) is refused."""
    data = z.read(part)
    if b"<!DOCTYPE" in data[:4096]:
        raise ValueError(f"{part} has a document type")
    return ElementTree.fromstring(data)


def _formats(z: zipfile.ZipFile, part: str | None) -> list[str]:
    """Per cell style (``cellXfs``), its number format: the format code, or the built-in id."""
    if part is None:
        return []
    root = _small(z, part)
    codes: dict[str, str] = {}
    xfs: list[str] = []
    for el in root:
        name = _local(el.tag)
        if name == "numFmts":
            codes = {f.get("numFmtId", ""): f.get("formatCode", "") for f in el}
        elif name == "cellXfs":
            for xf in el:
                fid = xf.get("numFmtId", "0")
                xfs.append(f"{fid}:{codes.get(fid, '')}")
    return xfs


def source_key(path: Path, sheet: str, settings: Any) -> dict[str, Any] | None:
    """The key of a job's read (see the module docstring), or None when it cannot be made."""
    try:
        with zipfile.ZipFile(path) as z:
            parts = parts_of(z)
            if parts is None or sheet not in parts.sheets:
                return None
            h = hashlib.sha256(VERSION.encode())
            h.update(json.dumps(settings, default=str, sort_keys=True).encode())
            h.update(f"{parts.date1904}:{_raw_digest(path, z, parts.sheets[sheet])}:"
                     f"{_raw_digest(path, z, parts.strings)}".encode())
            xfs = _formats(z, parts.styles)
    except (KeyError, ValueError, OSError, zipfile.BadZipFile, ElementTree.ParseError):
        return None
    return {"key": h.hexdigest()[:32], "styles": len(xfs),
            "formats": hashlib.sha256("\n".join(xfs).encode()).hexdigest()[:32]}


def same_source(recorded: Any, current: dict[str, Any] | None, path: Path) -> bool:
    """Whether a job's read would see what it saw when ``recorded`` was made: the same key, and the
    cell styles that existed then still have their number formats (styles appended since, as tocsin's
    writer appends them, do not matter)."""
    if not isinstance(recorded, dict) or current is None or recorded.get("key") != current["key"]:
        return False
    count = recorded.get("styles")
    if not isinstance(count, int) or count > current["styles"]:
        return False
    if count == current["styles"]:
        return recorded.get("formats") == current["formats"]
    try:
        with zipfile.ZipFile(path) as z:
            parts = parts_of(z)
            xfs = _formats(z, parts.styles if parts else None)[:count]
    except (KeyError, ValueError, OSError, zipfile.BadZipFile, ElementTree.ParseError):
        return False
    return recorded.get("formats") == hashlib.sha256("\n".join(xfs).encode()).hexdigest()[:32]
