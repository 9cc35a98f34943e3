"""A workbook package read into memory with its registry parts parsed: content types, relationships,
the workbook part, its sheets, tocsin's record (ownership and state, in a custom document property) and
tocsin's marks on its sheets. Used by :mod:`watcher.xlsx.package` (reading) and :mod:`watcher.xlsx.plan`
(planning a write)."""
from __future__ import annotations

import json
import posixpath
from dataclasses import dataclass

from lxml import etree

from watcher.xlsx.archive import ZipSource
from watcher.xlsx.errors import PackageError
from watcher.xlsx.opc import (
    CT,
    NS,
    REL,
    ContentTypes,
    Rels,
    local_name,
    parse_xml,
    prolog_problem,
    rels_part_of,
)

__all__ = ["MARKER_FORMAT", "MARKER_PREFIX", "SHEET_MARK", "SheetInfo", "Source", "member_problems"]

MARKER_PREFIX = "tocsin."
SHEET_MARK = "_tocsin_owned"
"""A hidden defined name scoped to each of tocsin's sheets: the sheet itself carries tocsin's mark, so a
user's sheet made later under the same name (after deleting tocsin's) is not taken for tocsin's."""
MARKER_FORMAT = 1
_SHEET_KINDS = {REL.worksheet: "worksheet", REL.chartsheet: "chartsheet",
                REL._base + "dialogsheet": "dialogsheet",
                "http://schemas.microsoft.com/office/2006/relationships/xlMacrosheet": "macrosheet",
                "http://schemas.microsoft.com/office/2006/relationships/xlIntlMacrosheet": "macrosheet"}


@dataclass(frozen=True)
class SheetInfo:
    """One sheet of a workbook, in tab order."""

    name: str
    sheet_id: int
    rid: str
    part: str | None
    kind: str
    state: str
    owned: bool


def _q(ns: str, name: str) -> str:
    return f"{{{ns}}}{name}"


_local = local_name


class Source:
    """A package read into memory with its registry parts parsed."""

    def __init__(self, data: bytes, label: str) -> None:
        self.label = label
        self.zip = zs = ZipSource(data, label)
        ct_name = zs.find("[Content_Types].xml")
        rels_name = zs.find("_rels/.rels")
        if ct_name is None or rels_name is None:
            raise PackageError(f"'{label}' is a zip file but not an Office Open XML package (no "
                               f"{'[Content_Types].xml' if ct_name is None else '_rels/.rels'})",
                               workbook=label)
        self.ct_name, self.root_rels_name = ct_name, rels_name
        self.ct = ContentTypes(self.parse(ct_name))
        self.root_rels = Rels("", self.parse(rels_name))
        docs = self.root_rels.by_type(REL.office_document)
        if not docs:
            if self.root_rels.by_type(REL.strict_office_document):
                raise PackageError(f"'{label}' is a Strict Open XML workbook, which tocsin does not edit; "
                                   "save it as an ordinary .xlsx workbook", workbook=label)
            raise PackageError(f"'{label}' has no main document; it is not a workbook", workbook=label)
        wb_part = self.root_rels.part_of(docs[0])
        wb_name = zs.find(wb_part)
        content_type = self.ct.of(wb_part) or ""
        if content_type == CT.binary_workbook:
            raise PackageError(f"'{label}' is a binary workbook (.xlsb); tocsin edits .xlsx and .xlsm only",
                               workbook=label)
        if wb_name is None or content_type not in CT.workbook_types:
            raise PackageError(f"'{label}' is not a spreadsheet workbook (main part '{wb_part}' has content "
                               f"type '{content_type or 'none'}')", workbook=label, part=wb_part)
        self.wb_name = wb_name
        self.macro_enabled = "macroEnabled" in content_type
        self.wb = self.parse(wb_name)
        if etree.QName(self.wb).namespace != NS.main:
            raise PackageError(f"'{label}': the workbook part uses namespace "
                               f"'{etree.QName(self.wb).namespace}', not transitional SpreadsheetML; "
                               "save it as an ordinary .xlsx workbook", workbook=label, part=wb_name)
        wb_rels_name = zs.find(rels_part_of(wb_name))
        self.wb_rels_name = wb_rels_name or rels_part_of(wb_name)
        self.wb_rels = Rels(wb_name, self.parse(wb_rels_name) if wb_rels_name else None)
        pr = self.child(self.wb, "workbookPr")
        self.date1904 = pr is not None and pr.get("date1904", "0").lower() in ("1", "true")
        self.sheets_el = self.child(self.wb, "sheets")
        if self.sheets_el is None:
            raise PackageError(f"'{label}': the workbook part has no <sheets> list",
                               workbook=label, part=wb_name)
        self.custom_name: str | None = None
        self.custom: etree._Element | None = None
        customs = self.root_rels.by_type(REL.custom_properties)
        if customs:
            name = zs.find(self.root_rels.part_of(customs[0]))
            if name is not None:
                self.custom_name = name
                self.custom = self.parse(name)
        self.marker, self.marker_problem = self._read_marker()
        self.sheets = self._read_sheets()

    # helpers
    def parse(self, name: str) -> etree._Element:
        return parse_xml(self.zip.read(name), name, self.label)

    @staticmethod
    def child(root: etree._Element, name: str) -> etree._Element | None:
        return next((el for el in root if _local(el) == name), None)

    def _read_marker(self) -> tuple[dict, str | None]:
        empty = {"format": MARKER_FORMAT, "sheets": [], "state": {}}
        if self.custom is None:
            return empty, None
        chunks = []
        for prop in self.custom:
            name = prop.get("name", "") if isinstance(prop.tag, str) else ""
            if name.startswith(MARKER_PREFIX) and name[len(MARKER_PREFIX):].isdigit():
                chunks.append((int(name[len(MARKER_PREFIX):]), "".join(prop.itertext())))
        if not chunks:
            return empty, None
        chunks.sort()
        if [i for i, _ in chunks] != list(range(len(chunks))):
            return empty, "tocsin's record in the document properties has missing pieces"
        try:
            record = json.loads("".join(text for _, text in chunks))
        except ValueError:
            return empty, "tocsin's record in the document properties is not readable"
        if (not isinstance(record, dict) or not isinstance(record.get("sheets"), list)
                or not all(isinstance(s, str) for s in record["sheets"])
                or not isinstance(record.get("state", {}), dict)):
            return empty, "tocsin's record in the document properties has an unexpected shape"
        record.setdefault("state", {})
        return record, None

    def marks(self) -> set[int]:
        """Positions of the sheets that carry tocsin's mark (a hidden sheet-scoped defined name)."""
        names = self.child(self.wb, "definedNames")
        out = set()
        for dn in (names if names is not None else []):
            if (_local(dn) == "definedName" and dn.get("name", "").casefold() == SHEET_MARK.casefold()
                    and (dn.get("localSheetId") or "").isdigit()):
                out.add(int(dn.get("localSheetId")))
        return out

    def _read_sheets(self) -> list[SheetInfo]:
        owned = {s.casefold() for s in self.marker["sheets"]}
        marks = self.marks()
        self.unmarked: list[str] = []
        out = []
        for el in self.sheets_el:
            if _local(el) != "sheet":
                continue
            rid = el.get(_q(NS.r, "id"), "")
            rel = self.wb_rels.by_id(rid)
            part = self.zip.find(self.wb_rels.part_of(rel)) if rel and not rel.external else None
            kind = _SHEET_KINDS.get(rel.type, "other") if rel else "other"
            name = el.get("name", "")
            try:
                sheet_id = int(el.get("sheetId", "0"))
            except ValueError:
                sheet_id = 0
            listed = name.casefold() in owned
            if listed and len(out) not in marks:
                self.unmarked.append(name)
            out.append(SheetInfo(name, sheet_id, rid, part, kind, el.get("state", "visible"),
                                 listed and len(out) in marks))
        return out

    def graph(self) -> dict[str, list[str]]:
        """Internal relationships: part name ('' for the package) -> target part names that exist."""
        out: dict[str, list[str]] = {}
        for name in self.zip.names:
            if not name.endswith(".rels") or "/_rels/" not in "/" + name:
                continue
            folder, base = posixpath.split(name)
            source = posixpath.join(posixpath.dirname(folder), base[:-5]) if base != ".rels" else ""
            if source and self.zip.find(source) is None:
                continue
            try:
                rels = Rels(source, self.parse(name))
            except PackageError:
                continue
            targets = []
            for r in rels.rels:
                if r.external:
                    continue
                target = self.zip.find(rels.part_of(r))
                if target is not None:
                    targets.append(target)
            out[self.zip.find(source) or source] = targets
        return out


def member_problems(zs: ZipSource, ct: ContentTypes, names: list[str] | None = None,
                    ends: dict[str, tuple[bytes, bytes]] | None = None) -> dict[str, str]:
    """What is wrong with each damaged or hostile member of a package, as messages by member name: its
    data do not inflate to its declared size and CRC-32 (checked as a stream, reading at most one byte
    more than declared), or an XML part declares a document type. Members tocsin only copies are
    checked too, so a bad data sheet is found and named before any reader meets it. ``names``: only
    these members (default all). ``ends``: filled with the first and last 64 KiB of every member."""
    out = {}
    for name in zs.names if names is None else names:
        if name.endswith("/"):
            continue
        problem, head, tail = zs.check_ends(name, tail=65_536 if ends is not None else 0)
        if ends is not None:
            ends[name] = (head, tail)
        if problem is None and _is_xml(ct.of(name), name):
            why = prolog_problem(head)
            problem = f"'{zs.label}': part '{name}' {why}" if why else None
        if problem:
            out[name] = problem
    return out


def _is_xml(content_type: str | None, name: str) -> bool:
    return (bool(content_type) and content_type.endswith("xml")) or name.lower().endswith((".xml", ".rels"))
