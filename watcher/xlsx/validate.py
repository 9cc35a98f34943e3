"""A structural validator for workbook packages (``watcher.xlsx.package.validate`` and ``tocsin check``).

Spreadsheet programs and reading libraries are lenient, so they cannot be the only judges of what the
writer produces. :func:`check_package` lists, as plain messages, what breaks the rules of the format
(ECMA-376 Part 1 and Part 2) in ways that make a spreadsheet program repair or refuse a file:

* the package opens (a complete zip, no duplicate or encrypted members, every member inflates to its
  declared size and CRC-32, XML parts well-formed, no document type declarations);
* every part has a content type (Override or Default), every Override names a part that exists;
* every relationships part belongs to a part that exists, its ids are unique and every internal target
  exists;
* the workbook: sheet ids unique, sheet names valid and unique ignoring case, each sheet's relationship
  exists and points at a part of the right content type, ``activeTab`` / ``firstSheet`` /
  ``localSheetId`` within the number of sheets, the calculation chain names existing sheet ids;
* styles: font, fill, border, number-format and cell-style indexes of every cell format in range, and
  every style index used by a cell, row or column of a worksheet in range;
* worksheets: child elements in schema order (CT_Worksheet), rows in ascending order, cells in
  ascending column order within their row and on their row, at most one selected sheet tab overall;
* custom document properties: unique property ids (>= 2) and names.

An empty list means no problem was found. The rows and cells of a worksheet are checked on its text
(:mod:`watcher.xlsx.sheetscan`, a megabyte at a time); a sheet the fast look is not sure of is read
with ``iterparse`` and cleared as it goes, so big sheets do not build a tree. ``skip_cells`` names
sheets whose rows and cells are not looked at (tocsin's own sheets, for ``tocsin check``): their
part is still inflated against its size and CRC-32, and what surrounds the rows checked.
"""
from __future__ import annotations

import io
import os
import posixpath
import re
import zipfile
import zlib
from collections.abc import Collection
from pathlib import Path

from lxml import etree

from watcher.xlsx.archive import ZipSource
from watcher.xlsx.errors import PackageError, SheetNameError
from watcher.xlsx.opc import CT, NS, REL, ContentTypes, Rels, parse_xml
from watcher.xlsx.sheetscan import scan_rows, skeleton
from watcher.xlsx.source import member_problems
from watcher.xlsx.spec import check_sheet_name

__all__ = ["check_package", "WORKSHEET_ORDER"]

WORKSHEET_ORDER = (
    "sheetPr", "dimension", "sheetViews", "sheetFormatPr", "cols", "sheetData", "sheetCalcPr",
    "sheetProtection", "protectedRanges", "scenarios", "autoFilter", "sortState", "dataConsolidate",
    "customSheetViews", "mergeCells", "phoneticPr", "conditionalFormatting", "dataValidations",
    "hyperlinks", "printOptions", "pageMargins", "pageSetup", "headerFooter", "rowBreaks", "colBreaks",
    "customProperties", "cellWatches", "ignoredErrors", "smartTags", "drawing", "legacyDrawing",
    "legacyDrawingHF", "drawingHF", "picture", "oleObjects", "controls", "webPublishItems", "tableParts",
    "extLst")
_REPEATABLE = {"conditionalFormatting"}
_CHARTSHEET_ORDER = ("sheetPr", "sheetViews", "sheetProtection", "customSheetViews", "pageMargins",
                     "pageSetup", "headerFooter", "drawing", "legacyDrawing", "legacyDrawingHF", "drawingHF",
                     "picture", "webPublishItems", "extLst")
_SHEET_CT = {REL.worksheet: (CT.worksheet,),
             REL.chartsheet: ("application/vnd.openxmlformats-officedocument.spreadsheetml.chartsheet+xml",)}
_REF = re.compile(r"^([A-Z]{1,3})([0-9]+)$")
_XML_SUFFIX = ("xml", "+xml")


def _local(el) -> str:
    return etree.QName(el).localname if isinstance(el.tag, str) else ""


def _col_index(letters: str) -> int:
    n = 0
    for ch in letters:
        n = n * 26 + ord(ch) - 64
    return n


def _is_xml(content_type: str | None, name: str) -> bool:
    return bool(content_type) and (content_type.endswith(_XML_SUFFIX) or name.endswith(".rels"))


def check_package(path: str | os.PathLike, *, skip_cells: Collection[str] = ()) -> list[str]:
    """Structural problems of the package at ``path`` as messages; empty when none were found. The rows
    and cells of the sheets named in ``skip_cells`` (ignoring case) are not looked at."""
    path = Path(path)
    try:
        data = path.read_bytes()
    except OSError as exc:
        return [f"'{path.name}' cannot be read: {exc.strerror or exc}"]
    try:
        return _Checker(data, path.name, {s.casefold() for s in skip_cells}).run()
    except PackageError as exc:
        return [str(exc)]


class _Checker:
    def __init__(self, data: bytes, label: str, skip_cells: set[str] = frozenset()) -> None:
        self.label = label
        self.zip = ZipSource(data, label)
        self.problems: list[str] = []
        self.trees: dict[str, etree._Element] = {}
        self.damaged: dict[str, str] = {}
        self.ends: dict[str, tuple[bytes, bytes]] = {}
        self.skip_cells = skip_cells

    def bad(self, msg: str) -> None:
        self.problems.append(msg)

    def tree(self, name: str) -> etree._Element:
        if name not in self.trees:
            self.trees[name] = parse_xml(self.zip.read(name), name, self.label)
        return self.trees[name]

    def run(self) -> list[str]:
        zs = self.zip
        ct_name = zs.find("[Content_Types].xml")
        if ct_name is None:
            return [f"'{self.label}' has no [Content_Types].xml; it is not an Office Open XML package"]
        ct = ContentTypes(self.tree(ct_name))
        self.damaged = member_problems(zs, ct, ends=self.ends)
        for name in zs.names:
            if name in self.damaged:
                self.bad(self.damaged[name])
        for name in zs.names:
            if name == ct_name or name.endswith("/"):
                continue
            kind = ct.of(name)
            if not kind:
                self.bad(f"part '{name}' has no content type")
        for part in ct.overrides:
            if zs.find(part) is None:
                self.bad(f"[Content_Types].xml names part '/{part}', which does not exist")
        rels_of: dict[str, Rels] = {}
        for name in zs.names:
            if not name.endswith(".rels"):
                continue
            folder, base = posixpath.split(name)
            if posixpath.basename(folder) != "_rels":
                self.bad(f"relationships part '{name}' is not in a _rels folder")
                continue
            source = posixpath.join(posixpath.dirname(folder), base[:-5]) if base != ".rels" else ""
            if source and zs.find(source) is None:
                self.bad(f"relationships part '{name}' belongs to part '{source}', which does not exist")
                continue
            if name in self.damaged:
                continue
            rels = Rels(source, self.tree(name))
            rels_of[zs.find(source) or source] = rels
            ids = [r.id for r in rels.rels]
            for rid in sorted({i for i in ids if ids.count(i) > 1}):
                self.bad(f"'{name}': relationship id '{rid}' is used more than once")
            for r in rels.rels:
                if r.external:
                    continue
                target = rels.part_of(r)
                if zs.find(target) is None:
                    self.bad(f"'{name}': relationship '{r.id}' points at '{target}', which does not exist")
        for name in zs.names:
            kind = ct.of(name)
            if (name != ct_name and not name.endswith(".rels") and _is_xml(kind, name)
                    and name not in self.damaged):
                if name not in self.trees and not self._is_sheet_type(kind):
                    try:
                        self.tree(name)
                    except PackageError as exc:
                        self.bad(str(exc))
        root = rels_of.get("")
        docs = root.by_type(REL.office_document) if root else []
        if not docs:
            self.bad("the package has no main document relationship (officeDocument)")
            return self.problems
        wb_name = zs.find(root.part_of(docs[0]))
        if wb_name is None:
            return self.problems
        if ct.of(wb_name) not in CT.workbook_types:
            self.bad(f"main part '{wb_name}' has content type '{ct.of(wb_name)}', not a workbook")
            return self.problems
        self._workbook(wb_name, rels_of.get(wb_name) or Rels(wb_name, None), ct, rels_of)
        customs = root.by_type(REL.custom_properties)
        if customs and zs.find(root.part_of(customs[0])):
            self._custom(zs.find(root.part_of(customs[0])))
        return self.problems

    @staticmethod
    def _is_sheet_type(kind: str | None) -> bool:
        return kind in (CT.worksheet,)

    # -- workbook ---------------------------------------------------------------------------------
    def _workbook(self, wb_name: str, wb_rels: Rels, ct: ContentTypes, rels_of: dict) -> None:
        wb = self.tree(wb_name)
        sheets_el = next((e for e in wb if _local(e) == "sheets"), None)
        sheets = [e for e in sheets_el if _local(e) == "sheet"] if sheets_el is not None else []
        if not sheets:
            self.bad("the workbook has no sheets")
        ids, names = {}, {}
        sheet_parts = []
        for el in sheets:
            name = el.get("name", "")
            try:
                check_sheet_name(name)
            except SheetNameError as exc:
                if exc.rule != "reserved":
                    self.bad(f"workbook: {exc}")
            key = name.casefold()
            if key in names:
                self.bad(f"workbook: sheet names '{names[key]}' and '{name}' are the same ignoring case")
            names[key] = name
            sid = el.get("sheetId", "")
            if not sid.isdigit() or int(sid) < 1:
                self.bad(f"workbook: sheet '{name}' has sheetId {sid!r}, not a positive integer")
            elif sid in ids:
                self.bad(f"workbook: sheets '{ids[sid]}' and '{name}' share sheetId {sid}")
            ids[sid] = name
            rid = el.get(f"{{{NS.r}}}id", "")
            rel = wb_rels.by_id(rid)
            if rel is None:
                self.bad(f"workbook: sheet '{name}' refers to relationship '{rid}', which does not exist")
                continue
            part = self.zip.find(wb_rels.part_of(rel))
            if part is None:
                continue
            want = _SHEET_CT.get(rel.type)
            if want and ct.of(part) not in want:
                self.bad(f"workbook: sheet '{name}' is a {rel.type.rsplit('/', 1)[-1]} but its part '{part}' "
                         f"has content type '{ct.of(part)}'")
            sheet_parts.append((name, part, rel.type))
        n = len(sheets)
        views = next((e for e in wb if _local(e) == "bookViews"), None)
        for view in (views if views is not None else []):
            for attr in ("activeTab", "firstSheet"):
                v = view.get(attr)
                if v is not None and (not v.isdigit() or int(v) >= max(n, 1)):
                    self.bad(f"workbook: {attr}={v} but the workbook has {n} sheets")
        dnames = next((e for e in wb if _local(e) == "definedNames"), None)
        for dn in (dnames if dnames is not None else []):
            v = dn.get("localSheetId") if isinstance(dn.tag, str) else None
            if v is not None and (not v.isdigit() or int(v) >= n):
                self.bad(f"workbook: defined name '{dn.get('name')}' has localSheetId={v} but the workbook "
                         f"has {n} sheets")
        calc = next(iter(wb_rels.by_type(REL.calc_chain)), None)
        calc_part = self.zip.find(wb_rels.part_of(calc)) if calc else None
        if calc_part:
            current = None
            for c in self.tree(calc_part):
                if _local(c) != "c":
                    continue
                current = c.get("i", current)
                if current is not None and current not in ids:
                    self.bad(f"calcChain: cell {c.get('r')} names sheet id {current}, which does not exist")
                    break
        styles = next(iter(wb_rels.by_type(REL.styles)), None)
        styles_part = self.zip.find(wb_rels.part_of(styles)) if styles else None
        n_xfs, n_dxfs = self._styles(styles_part) if styles_part else (1, 0)
        selected = []
        for name, part, rel_type in sheet_parts:
            if rel_type == REL.worksheet:
                if self._worksheet(name, part, n_xfs, n_dxfs):
                    selected.append(name)
            elif rel_type == REL.chartsheet:
                if self._chartsheet(name, part):
                    selected.append(name)
        if len(selected) > 1:
            self.bad(f"more than one sheet is selected: {', '.join(selected)}")

    # -- styles -----------------------------------------------------------------------------------
    def _styles(self, part: str) -> tuple[int, int]:
        root = self.tree(part)
        sections = {_local(e): e for e in root if isinstance(e.tag, str)}

        def count(name: str, item: str) -> int:
            sec = sections.get(name)
            return 0 if sec is None else sum(1 for e in sec if _local(e) == item)

        n_fonts, n_fills = count("fonts", "font"), count("fills", "fill")
        n_borders = count("borders", "border")
        n_style_xfs = count("cellStyleXfs", "xf")
        fmt_ids = {int(e.get("numFmtId")) for e in sections.get("numFmts", ()) if _local(e) == "numFmt"
                   and (e.get("numFmtId") or "").isdigit()}
        for sec_name in ("cellStyleXfs", "cellXfs"):
            sec = sections.get(sec_name)
            if sec is None:
                continue
            declared = sec.get("count")
            actual = sum(1 for e in sec if _local(e) == "xf")
            if declared is not None and declared.isdigit() and int(declared) != actual:
                self.bad(f"styles: {sec_name} count={declared} but it holds {actual} formats")
            for i, xf in enumerate(e for e in sec if _local(e) == "xf"):
                for attr, top in (("fontId", n_fonts), ("fillId", n_fills), ("borderId", n_borders)):
                    v = xf.get(attr, "0")
                    if not v.isdigit() or int(v) >= max(top, 1):
                        self.bad(f"styles: {sec_name}[{i}] {attr}={v} but there are {top}")
                v = xf.get("numFmtId", "0")
                if not v.isdigit() or (int(v) >= 164 and int(v) not in fmt_ids):
                    self.bad(f"styles: {sec_name}[{i}] numFmtId={v} is neither built in nor defined")
                if sec_name == "cellXfs" and xf.get("xfId") is not None:
                    v = xf.get("xfId")
                    if not v.isdigit() or int(v) >= max(n_style_xfs, 1):
                        self.bad(f"styles: cellXfs[{i}] xfId={v} but there are {n_style_xfs} cell styles")
        return max(count("cellXfs", "xf"), 1), count("dxfs", "dxf")

    # -- sheets -----------------------------------------------------------------------------------
    def _order(self, where: str, seen: list[str], order: tuple[str, ...]) -> None:
        last = -1
        prev = ""
        for name in seen:
            if name not in order:
                self.bad(f"{where}: unknown element <{name}>")
                continue
            rank = order.index(name)
            if rank < last or (rank == last and name not in _REPEATABLE):
                self.bad(f"{where}: <{name}> comes after <{prev}>, against the schema order")
                return
            last, prev = rank, name

    def _worksheet(self, sheet: str, part: str, n_xfs: int, n_dxfs: int) -> bool:
        """Check one worksheet; return whether its tab is selected. The rows and cells are checked on
        the text (or not at all for ``skip_cells``), then what surrounds them element by element; a
        sheet the fast look is not sure of is walked element by element whole."""
        where = f"sheet '{sheet}' ({part})"
        if part in self.damaged:  # already said
            return False
        if sheet.casefold() in self.skip_cells:
            rest = skeleton(*self.ends.get(part, (b"", b"")))
        else:
            try:
                rest = scan_rows(self.zip.pieces(part), n_xfs)
            except PackageError:
                rest = None
        if rest is not None:
            return self._walk(where, io.BytesIO(rest), n_xfs, n_dxfs)
        with self.zip._zf.open(part) as fh:
            return self._walk(where, fh, n_xfs, n_dxfs)

    def _walk(self, where: str, fh, n_xfs: int, n_dxfs: int) -> bool:
        """Check a worksheet in a stream (rows are checked and dropped as they end); return whether its
        tab is selected."""
        selected = False
        last_row = 0
        columns: dict[str, int] = {}
        tags = tuple(f"{{{NS.main}}}{t}" for t in ("row", "sheetView", "col", "cfRule"))
        ctx = etree.iterparse(fh, events=("end",), tag=tags, resolve_entities=False, no_network=True,
                              huge_tree=False, load_dtd=False)
        try:
            for _, el in ctx:
                local = el.tag.rsplit("}", 1)[1]
                if local == "row":
                    r = el.get("r")
                    row = int(r) if r is not None and r.isdigit() else last_row + 1
                    if row <= last_row:
                        self.bad(f"{where}: row {row} comes after row {last_row}")
                        return selected
                    last_row = row
                    problem = self._cells(el, row, n_xfs, columns)
                    if problem:
                        self.bad(f"{where}: {problem}")
                        return selected
                    s = el.get("s")
                    if s is not None and (not s.isdigit() or int(s) >= n_xfs):
                        self.bad(f"{where}: row {row} has style {s} but there are {n_xfs} cell formats")
                    el.clear(keep_tail=True)
                    parent = el.getparent()
                    while el.getprevious() is not None:
                        del parent[0]
                elif local == "sheetView":
                    selected |= el.get("tabSelected") in ("1", "true")
                elif local == "col":
                    s = el.get("style")
                    if s is not None and (not s.isdigit() or int(s) >= n_xfs):
                        self.bad(f"{where}: columns {el.get('min')}-{el.get('max')} have style {s} but "
                                 f"there are {n_xfs} cell formats")
                elif el.get("dxfId") is not None:
                    v = el.get("dxfId")
                    if not v.isdigit() or int(v) >= n_dxfs:
                        self.bad(f"{where}: a conditional format uses dxfId {v} but there are {n_dxfs}")
            root = ctx.root
        except etree.XMLSyntaxError as exc:
            self.bad(f"{where}: not well-formed XML ({exc})")
            return selected
        except (zipfile.BadZipFile, zlib.error, EOFError, OSError) as exc:
            self.bad(f"{where}: cannot be read ({exc}); the file is damaged")
            return selected
        if root.getroottree().docinfo.doctype:
            self.bad(f"{where}: declares a document type; refused")
        self._order(where, [etree.QName(c).localname for c in root
                            if isinstance(c.tag, str) and etree.QName(c).namespace == NS.main],
                    WORKSHEET_ORDER)
        return selected

    @staticmethod
    def _cells(row_el, row: int, n_xfs: int, columns: dict[str, int]) -> str | None:
        """What is wrong with the cells of one row (order, reference, style index), if anything."""
        digits = str(row)
        cut = -len(digits)
        last = 0
        for c in row_el:
            ref = c.get("r")
            if ref is None:
                col = last + 1
            else:
                letters = ref[:cut]
                if ref[cut:] != digits or not letters:
                    m = _REF.match(ref)
                    return f"cell {ref} lies in row {row}" if m else f"cell reference {ref!r} is not valid"
                col = columns.get(letters)
                if col is None:
                    if not letters.isalpha() or not letters.isupper() or len(letters) > 3:
                        return f"cell reference {ref!r} is not valid"
                    col = columns[letters] = _col_index(letters)
            if col <= last:
                return f"cell {ref} comes after a cell at or right of it in row {row}"
            last = col
            s = c.get("s")
            if s is not None and (not s.isdigit() or int(s) >= n_xfs):
                return f"cell {ref} has style {s} but there are {n_xfs} cell formats"
        return None

    def _chartsheet(self, sheet: str, part: str) -> bool:
        root = self.tree(part)
        self._order(f"chart sheet '{sheet}' ({part})", [_local(e) for e in root
                                                          if etree.QName(e).namespace == NS.main],
                    _CHARTSHEET_ORDER)
        return any(v.get("tabSelected") in ("1", "true") for v in root.iter(f"{{{NS.main}}}sheetView"))

    # -- custom properties ------------------------------------------------------------------------
    def _custom(self, part: str) -> None:
        pids, names = set(), set()
        for prop in self.tree(part):
            if _local(prop) != "property":
                continue
            pid, name = prop.get("pid", ""), prop.get("name", "")
            if not pid.isdigit() or int(pid) < 2:
                self.bad(f"custom properties: property '{name}' has pid {pid!r}; ids start at 2")
            elif pid in pids:
                self.bad(f"custom properties: pid {pid} is used more than once")
            if name.casefold() in names:
                self.bad(f"custom properties: name '{name}' is used more than once")
            pids.add(pid)
            names.add(name.casefold())
