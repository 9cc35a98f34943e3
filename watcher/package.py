"""Lossless writing of tocsin's sheets into an existing ``.xlsx`` / ``.xlsm`` package.

tocsin edits the package (Office Open XML, ECMA-376 / ISO/IEC 29500) at the level of its parts: it adds
or replaces only its own parts and copies every other member as the same compressed bytes.

Public API
----------
``Package.open(path)``
    Read a workbook safely (not a zip, truncated, DTD/entity bomb, over-size parts: a clear
    :class:`~sheetfns.errors.PackageError` naming the file). Exposes ``sheet_names`` (in order),
    ``sheets`` (:class:`SheetInfo`), ``owned`` (names of tocsin's sheets), ``date1904``, ``state`` (the
    small dict tocsin keeps in the package) and ``fingerprint`` (size, mtime_ns, sha256 of the bytes read).
``write(path, sheets, *, state, remove=(), expect)`` (also ``Package.write``)
    One atomic write of all of tocsin's sheets (:class:`~watcher.sheetspec.SheetSpec`): new sheets are
    appended after the user's, tocsin's sheets of the same name are replaced in place, tocsin's sheets
    named in ``remove`` are deleted. Raises :class:`~sheetfns.errors.OwnershipError` for a user's sheet
    of a requested name (naming it) and :class:`~sheetfns.errors.ConcurrentEditError` when the file no
    longer holds the bytes ``expect`` describes (someone saved while tocsin computed: nothing is
    written; try again later). Returns a :class:`WriteResult`.
``validate(path)``
    Structural problems of a package as messages (see :mod:`watcher.pkgcheck`).

Ownership and state
-------------------
A custom document property (``docProps/custom.xml``, ECMA-376 Part 1, §22.3) carries a JSON record
``{"format": 1, "sheets": [...], "state": {...}}`` split over properties ``tocsin.000``, ``tocsin.001``,
... of at most 255 characters each (spreadsheet programs limit the length of one value). Spreadsheet
programs keep custom properties when they save, so ownership and state survive a round trip through
them. Each of tocsin's sheets also carries a mark of its own: a hidden defined name ``_tocsin_owned``
scoped to it (``localSheetId``), which spreadsheet programs keep with the sheet, move with it and delete
with it. A sheet is tocsin's only if its name is in the record *and* it carries the mark, so a user's
sheet made under the same name after deleting tocsin's is never taken for tocsin's. The user's own custom
properties are kept as they are. A user who renames a tocsin sheet makes it theirs (tocsin writes a
fresh one).

What changes in a write
-----------------------
Only these registry parts may change: ``xl/workbook.xml`` (new ``<sheet>`` entries and their marks,
``fullCalcOnLoad``),
``xl/_rels/workbook.xml.rels``, ``[Content_Types].xml``, ``xl/styles.xml`` (cell formats appended, never
renumbered), ``docProps/custom.xml`` (and ``_rels/.rels`` when that part is new) and
``xl/calcChain.xml`` (entries of rewritten sheets dropped); each is rewritten only when its content
changes. Text is written as inline strings, so ``sharedStrings.xml`` stays as it is. Sheets are appended,
so positional references (``activeTab``, ``firstSheet``, ``localSheetId``) do not shift; when a sheet of
tocsin's is removed from among others they are corrected.

The write is atomic: the new package is built in a temporary file in the workbook's folder
(``.tocsin-<name>-<random>.tmp``), synced, checked to open, the source is checked to still hold the
bytes that were read (size and SHA-256), and ``os.replace`` puts the new file in place. A crash at any
moment leaves the old or the new workbook. Output is deterministic: the same inputs give the same bytes.
"""
from __future__ import annotations

import hashlib
import json
import os
import posixpath
import tempfile
import time
import zipfile
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from lxml import etree

from sheetfns.errors import ConcurrentEditError, InputError, OwnershipError, PackageError
from watcher import charts as _charts
from watcher import sheetxml as _sheetxml
from watcher.cellstyles import ensure_styles, minimal_styles
from watcher.opc import CT, NS, REL, ContentTypes, Rels, parse_xml, relative_target, rels_part_of, serialize
from watcher.sheetspec import SheetSpec, check_sheet_name
from watcher.zipio import MAX_TOTAL, ZipSource, ZipWriter

__all__ = ["Fingerprint", "Package", "SheetInfo", "WriteResult", "MARKER_PREFIX", "SHEET_MARK",
           "fingerprint_of", "validate", "write"]

MARKER_PREFIX = "tocsin."
SHEET_MARK = "_tocsin_owned"
"""A hidden defined name scoped to each of tocsin's sheets: the sheet itself carries tocsin's mark, so a
user's sheet made later under the same name (after deleting tocsin's) is not taken for tocsin's."""
_MARKER_FORMAT = 1
_CHUNK = 255
_FMTID = "{D5CDD505-2E9C-101B-9397-08002B2CF9AE}"
_TEMP_PREFIX = ".tocsin-"  # the watcher ignores these (watcher.debounce.TOCSIN_TEMP_PREFIX)
_TEMP_SUFFIX = ".tmp"
_STALE_TEMP_SECONDS = 3600
_WB_ORDER = ("fileVersion", "fileSharing", "workbookPr", "workbookProtection", "bookViews", "sheets",
             "functionGroups", "externalReferences", "definedNames", "calcPr", "oleSize",
             "customWorkbookViews", "pivotCaches", "smartTagPr", "smartTagTypes", "webPublishing",
             "fileRecoveryPr", "webPublishObjects", "extLst")
_SHEET_KINDS = {REL.worksheet: "worksheet", REL.chartsheet: "chartsheet",
                REL._base + "dialogsheet": "dialogsheet",
                "http://schemas.microsoft.com/office/2006/relationships/xlMacrosheet": "macrosheet",
                "http://schemas.microsoft.com/office/2006/relationships/xlIntlMacrosheet": "macrosheet"}


@dataclass(frozen=True)
class Fingerprint:
    """What identifies the bytes of a file: size, modification time (ns) and SHA-256."""

    size: int
    mtime_ns: int
    sha256: str

    def same_bytes(self, other: Fingerprint) -> bool:
        return self.size == other.size and self.sha256 == other.sha256


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


@dataclass(frozen=True)
class WriteResult:
    """What one write did."""

    path: Path
    fingerprint: Fingerprint
    added: tuple[str, ...]
    replaced: tuple[str, ...]
    removed: tuple[str, ...]
    changed_parts: tuple[str, ...]
    new_parts: tuple[str, ...]
    deleted_parts: tuple[str, ...]
    seconds: float


def _q(ns: str, name: str) -> str:
    return f"{{{ns}}}{name}"


def _local(el) -> str:
    return etree.QName(el).localname if isinstance(el.tag, str) else ""


def fingerprint_of(data: bytes, st: os.stat_result) -> Fingerprint:
    return Fingerprint(st.st_size, st.st_mtime_ns, hashlib.sha256(data).hexdigest())


def _read_file(path: Path) -> tuple[bytes, Fingerprint]:
    label = path.name
    try:
        with open(path, "rb") as fh:
            before = os.fstat(fh.fileno())
            if before.st_size > MAX_TOTAL:
                raise PackageError(f"workbook '{label}' is {before.st_size / 1024**3:.1f} GiB; tocsin reads "
                                   f"workbooks up to {MAX_TOTAL // 1024**3} GiB")
            data = fh.read()
            after = os.fstat(fh.fileno())
    except FileNotFoundError as exc:
        raise PackageError(f"workbook '{path}' does not exist") from exc
    except IsADirectoryError as exc:
        raise PackageError(f"'{path}' is a folder, not a workbook") from exc
    except OSError as exc:
        raise PackageError(f"workbook '{label}' cannot be read: {exc.strerror or exc}") from exc
    moved = (before.st_size, before.st_mtime_ns) != (after.st_size, after.st_mtime_ns)
    if moved or len(data) != after.st_size:
        raise ConcurrentEditError(f"workbook '{label}' changed while tocsin read it; try again when it is "
                                  "saved")
    return data, fingerprint_of(data, after)


# -- the parsed source ---------------------------------------------------------------------------
class _Source:
    """A package read into memory with its registry parts parsed."""

    def __init__(self, data: bytes, label: str) -> None:
        self.label = label
        self.zip = zs = ZipSource(data, label)
        ct_name = zs.find("[Content_Types].xml")
        rels_name = zs.find("_rels/.rels")
        if ct_name is None or rels_name is None:
            raise PackageError(f"'{label}' is a zip file but not an Office Open XML package (no "
                               f"{'[Content_Types].xml' if ct_name is None else '_rels/.rels'})")
        self.ct_name, self.root_rels_name = ct_name, rels_name
        self.ct = ContentTypes(self.parse(ct_name))
        self.root_rels = Rels("", self.parse(rels_name))
        docs = self.root_rels.by_type(REL.office_document)
        if not docs:
            if self.root_rels.by_type(REL.strict_office_document):
                raise PackageError(f"'{label}' is a Strict Open XML workbook, which tocsin does not edit; "
                                   "save it as an ordinary .xlsx workbook")
            raise PackageError(f"'{label}' has no main document; it is not a workbook")
        wb_part = self.root_rels.part_of(docs[0])
        wb_name = zs.find(wb_part)
        content_type = self.ct.of(wb_part) or ""
        if content_type == CT.binary_workbook:
            raise PackageError(f"'{label}' is a binary workbook (.xlsb); tocsin edits .xlsx and .xlsm only")
        if wb_name is None or content_type not in CT.workbook_types:
            raise PackageError(f"'{label}' is not a spreadsheet workbook (main part '{wb_part}' has content "
                               f"type '{content_type or 'none'}')")
        self.wb_name = wb_name
        self.macro_enabled = "macroEnabled" in content_type
        self.wb = self.parse(wb_name)
        if etree.QName(self.wb).namespace != NS.main:
            raise PackageError(f"'{label}': the workbook part uses namespace "
                               f"'{etree.QName(self.wb).namespace}', not transitional SpreadsheetML; "
                               "save it as an ordinary .xlsx workbook")
        wb_rels_name = zs.find(rels_part_of(wb_name))
        self.wb_rels_name = wb_rels_name or rels_part_of(wb_name)
        self.wb_rels = Rels(wb_name, self.parse(wb_rels_name) if wb_rels_name else None)
        pr = self.child(self.wb, "workbookPr")
        self.date1904 = pr is not None and pr.get("date1904", "0").lower() in ("1", "true")
        self.sheets_el = self.child(self.wb, "sheets")
        if self.sheets_el is None:
            raise PackageError(f"'{label}': the workbook part has no <sheets> list")
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
        empty = {"format": _MARKER_FORMAT, "sheets": [], "state": {}}
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


# -- the public reader ---------------------------------------------------------------------------
@dataclass(frozen=True)
class Package:
    """A workbook package as read by :meth:`open` (see the module docstring)."""

    path: Path
    fingerprint: Fingerprint
    sheets: tuple[SheetInfo, ...]
    date1904: bool
    macro_enabled: bool
    state: dict = field(default_factory=dict)
    marker_problem: str | None = None

    @classmethod
    def open(cls, path: str | os.PathLike) -> Package:
        """Read the workbook at ``path`` safely."""
        path = Path(os.path.realpath(path))
        data, fp = _read_file(path)
        src = _Source(data, path.name)
        return cls(path, fp, tuple(src.sheets), src.date1904, src.macro_enabled,
                   json.loads(json.dumps(src.marker["state"])), src.marker_problem)

    @property
    def sheet_names(self) -> tuple[str, ...]:
        return tuple(s.name for s in self.sheets)

    @property
    def owned(self) -> tuple[str, ...]:
        """Names of the sheets that are tocsin's, in tab order."""
        return tuple(s.name for s in self.sheets if s.owned)

    def write(self, sheets: Sequence[SheetSpec], *, state: dict, remove: Sequence[str] = ()) -> WriteResult:
        """:func:`write` to this package's path, expecting the bytes this object was read from."""
        return write(self.path, sheets, state=state, remove=remove, expect=self.fingerprint)


def validate(path: str | os.PathLike) -> list[str]:
    """Structural problems of the package at ``path`` (empty when none); see :mod:`watcher.pkgcheck`."""
    from watcher.pkgcheck import check_package

    return check_package(path)


# -- the writer ----------------------------------------------------------------------------------
def _state_json(record: dict) -> str:
    try:
        return json.dumps(record, sort_keys=True, ensure_ascii=True, separators=(",", ":"), allow_nan=False)
    except (TypeError, ValueError) as exc:
        raise InputError(f"`state` must hold only JSON values (text, numbers, lists, dicts); {exc}") from exc


def _free_name(pattern: str, taken: set[str]) -> str:
    n = 1
    while pattern.format(n).casefold() in taken:
        n += 1
    name = pattern.format(n)
    taken.add(name.casefold())
    return name


def _insert_wb_child(wb: etree._Element, el: etree._Element) -> None:
    rank = _WB_ORDER.index(_local(el))
    for i, child in enumerate(wb):
        local = _local(child)
        if local in _WB_ORDER and _WB_ORDER.index(local) > rank:
            wb.insert(i, el)
            return
    wb.append(el)


@dataclass
class _Plan:
    """Everything one write changes, before any byte is written."""

    src: _Source
    specs: list[SheetSpec]
    added: list[str] = field(default_factory=list)
    replaced: list[str] = field(default_factory=list)
    removed: list[str] = field(default_factory=list)
    registry: dict[str, bytes] = field(default_factory=dict)   # rewritten registry parts
    new: dict[str, Any] = field(default_factory=dict)          # new parts: name -> bytes | chunk factory
    deleted: set[str] = field(default_factory=set)             # casefolded names of dropped members


def _check_request(src: _Source, specs: Sequence[SheetSpec], remove: Sequence[str]) -> None:
    seen: dict[str, str] = {}
    for spec in specs:
        if not isinstance(spec, SheetSpec):
            raise InputError(f"`sheets` must hold SheetSpec values; got {type(spec).__name__}")
        check_sheet_name(spec.name)
        key = spec.name.casefold()
        if key in seen:
            raise InputError(f"two sheets to write are named '{seen[key]}' and '{spec.name}' (sheet names "
                             "are unique ignoring case)")
        seen[key] = spec.name
    for name in remove:
        if name.casefold() in seen:
            raise InputError(f"sheet '{name}' is both written and removed")
    by_key = {s.name.casefold(): s for s in src.sheets}
    for name in [s.name for s in specs] + list(remove):
        info = by_key.get(name.casefold())
        if info is not None and not info.owned:
            hint = f" ({src.marker_problem})" if src.marker_problem else ""
            if info.name in src.unmarked:
                hint = (f" (it has tocsin's name but not tocsin's mark, the hidden sheet-scoped name "
                        f"{SHEET_MARK}: it was made by someone else; if it is an old tocsin sheet, delete it "
                        "and tocsin writes it afresh)")
            raise OwnershipError(f"sheet '{info.name}' in '{src.label}' is not tocsin's (tocsin did not "
                                 f"create it){hint}; tocsin never overwrites or removes it. Rename that "
                                 "sheet, or choose another output sheet name")
    protection = src.child(src.wb, "workbookProtection")
    locked = protection is not None and protection.get("lockStructure", "0").lower() in ("1", "true")
    changes_structure = any(s.name.casefold() not in by_key for s in specs) or any(
        n.casefold() in by_key for n in remove)
    if locked and changes_structure:
        raise PackageError(f"'{src.label}' has a protected structure (sheets cannot be added or removed); "
                           "tocsin leaves it alone. Unprotect the workbook structure to let tocsin add its "
                           "sheets")


def _plan(src: _Source, specs: Sequence[SheetSpec], state: dict, remove: Sequence[str]) -> _Plan:
    plan = _Plan(src, list(specs))
    wb, wb_rels, ct = src.wb, src.wb_rels, src.ct
    by_key = {s.name.casefold(): s for s in src.sheets}
    sheet_els = [el for el in src.sheets_el if _local(el) == "sheet"]
    old_parts: list[str] = []      # parts of replaced / removed sheets (their subtrees go)
    dropped_ids: set[int] = set()

    # 1. removals (descending position, so positions of earlier sheets hold)
    doomed = sorted({i for i, s in enumerate(src.sheets) if s.owned and s.name.casefold() in
                     {n.casefold() for n in remove}}, reverse=True)
    for pos in doomed:
        info = src.sheets[pos]
        plan.removed.insert(0, info.name)
        dropped_ids.add(info.sheet_id)
        if info.part:
            old_parts.append(info.part)
        src.sheets_el.remove(sheet_els[pos])
        wb_rels.remove(info.rid)
        _shift_positions(src, pos, len(sheet_els) - len(plan.removed))
    remaining = list(src.sheets)  # _shift_positions dropped the removed ones
    if plan.removed and not specs and not any(s.state == "visible" for s in remaining):
        raise PackageError(f"'{src.label}': removing {', '.join(plan.removed)} would leave no visible sheet")

    # 2. the parts that stay, and names for new ones
    replaced_infos = [by_key[s.name.casefold()] for s in specs if s.name.casefold() in by_key]
    for info in replaced_infos:
        dropped_ids.add(info.sheet_id)
        if info.part:
            old_parts.append(info.part)
    plan.deleted = _garbage(src, old_parts, [i.rid for i in replaced_infos])
    taken = {n.casefold() for n in src.zip.names if n.casefold() not in plan.deleted}

    # 3. styles
    keys = set().union(*(_sheetxml.style_keys(s) for s in specs)) if specs else set()
    style_map: dict = {}
    if specs:
        styles_rel = next(iter(wb_rels.by_type(REL.styles)), None)
        styles_name = src.zip.find(wb_rels.part_of(styles_rel)) if styles_rel else None
        if styles_name is not None:
            root = src.parse(styles_name)
            style_map, changed = ensure_styles(root, keys)
            if changed:
                plan.registry[styles_name] = serialize(root)
        else:
            root = minimal_styles()
            style_map, _ = ensure_styles(root, keys)
            styles_name = "xl/styles.xml"
            if styles_name in taken:
                styles_name = _free_name("xl/styles{}.xml", taken)
            taken.add(styles_name.casefold())
            if styles_rel is not None:
                wb_rels.remove(styles_rel.id)
            wb_rels.add(REL.styles, styles_name)
            ct.set_override(styles_name, CT.styles)
            plan.new[styles_name] = etree.tostring(root, xml_declaration=True, encoding="UTF-8",
                                                   standalone=True)

    # 4. the sheets themselves
    active = _active_tab(src)
    next_id = 1 + max((s.sheet_id for s in src.sheets), default=0)
    positions = {s.name.casefold(): i for i, s in enumerate(remaining)}
    n_user = len(remaining)
    for spec in specs:
        key = spec.name.casefold()
        part = _free_name("xl/worksheets/sheet{}.xml", taken)
        if key in by_key:
            info = by_key[key]
            plan.replaced.append(spec.name)
            el = next(e for e in src.sheets_el
                      if _local(e) == "sheet" and e.get("name", "").casefold() == key)
            if el.get("name") != spec.name:
                el.set("name", spec.name)
            rel_el = next(e for e in wb_rels.root if isinstance(e.tag, str) and e.get("Id") == info.rid)
            target = relative_target(src.wb_name, part)
            if rel_el.get("Target") != target or rel_el.get("Type") != REL.worksheet:
                rel_el.set("Target", target)
                rel_el.set("Type", REL.worksheet)
                wb_rels.changed = True
            position = positions[key]
        else:
            plan.added.append(spec.name)
            rid = wb_rels.add(REL.worksheet, part)
            el = etree.SubElement(src.sheets_el, _q(NS.main, "sheet"))
            el.set("name", spec.name)
            el.set("sheetId", str(next_id))
            el.set(_q(NS.r, "id"), rid)
            next_id += 1
            position = n_user
            n_user += 1
        ct.set_override(part, CT.worksheet)
        _add_sheet_parts(plan, spec, part, taken, style_map, selected=(position == active))

    # 5. tocsin's mark on each of its sheets, recalculation on load, calc chain
    _mark_sheets(src, [(positions[s.name.casefold()] if s.name in plan.replaced else None, s.name)
                       for s in specs], n_before=len(remaining))
    if specs or plan.removed:
        calc = src.child(wb, "calcPr")
        if calc is None:
            calc = etree.Element(_q(NS.main, "calcPr"))
            _insert_wb_child(wb, calc)
        if calc.get("fullCalcOnLoad") not in ("1", "true"):
            calc.set("fullCalcOnLoad", "1")
    _prune_calc_chain(plan, dropped_ids)

    # 6. tocsin's record (ownership + state)
    owned = [s.name for s in remaining if s.owned or s.name in plan.replaced] + plan.added
    record = {"format": _MARKER_FORMAT, "sheets": sorted(dict.fromkeys(owned), key=str.casefold),
              "state": state}
    text = _state_json(record).replace(" ", "\\u0020")  # no chunk may start or end with a space
    old = _state_json({**src.marker, "format": _MARKER_FORMAT}).replace(" ", "\\u0020")
    if text != old or src.marker_problem:
        _write_marker(plan, text, taken)

    # 7. registry parts that changed
    reused = {k.casefold() for k in plan.new}
    for part in plan.deleted - reused:
        ct.drop_override(part)
    ct.ensure_default("rels", CT.rels)
    ct.ensure_default("xml", CT.xml)
    if _changed(src.wb, src.zip.read(src.wb_name)):
        plan.registry[src.wb_name] = serialize(wb)
    if wb_rels.changed:
        plan.registry[src.wb_rels_name] = serialize(wb_rels.root)
    if src.root_rels.changed:
        plan.registry[src.root_rels_name] = serialize(src.root_rels.root)
    if ct.changed:
        plan.registry[src.ct_name] = serialize(ct.root)
    return plan


def _mark_sheets(src: _Source, sheets: list[tuple[int | None, str]], *, n_before: int) -> None:
    """Give each written sheet tocsin's mark: a hidden defined name scoped to it (``localSheetId`` is its
    position; new sheets follow the ``n_before`` that stay)."""
    marked = src.marks()
    names = src.child(src.wb, "definedNames")
    position = n_before
    for pos, name in sheets:
        if pos is None:
            pos, position = position, position + 1
        if pos in marked:
            for dn in names:  # a program may have shown the mark (hidden="false"): hide it again
                if (_local(dn) == "definedName" and dn.get("name", "").casefold() == SHEET_MARK.casefold()
                        and dn.get("localSheetId") == str(pos) and dn.get("hidden") not in ("1", "true")):
                    dn.set("hidden", "1")
            continue
        if names is None:
            names = etree.Element(_q(NS.main, "definedNames"))
            _insert_wb_child(src.wb, names)
        dn = etree.SubElement(names, _q(NS.main, "definedName"))
        dn.set("name", SHEET_MARK)
        dn.set("localSheetId", str(pos))
        dn.set("hidden", "1")
        dn.text = "'" + name.replace("'", "''") + "'!$A$1"


def _changed(root: etree._Element, original: bytes) -> bool:
    """Whether a parsed registry part differs from its bytes (canonical comparison)."""
    before = etree.tostring(parse_xml(original, "", ""), method="c14n")
    return before != etree.tostring(root, method="c14n")


def _active_tab(src: _Source) -> int:
    views = src.child(src.wb, "bookViews")
    view = next((v for v in views if _local(v) == "workbookView"), None) if views is not None else None
    try:
        return int(view.get("activeTab", "0")) if view is not None else 0
    except ValueError:
        return 0


def _shift_positions(src: _Source, pos: int, n_after: int) -> None:
    """Sheet ``pos`` was removed: correct references that count sheets by position."""
    visible = [s.state == "visible" for i, s in enumerate(src.sheets)]
    del visible[pos]
    views = src.child(src.wb, "bookViews")
    for view in (views if views is not None else []):
        if _local(view) != "workbookView":
            continue
        for attr in ("activeTab", "firstSheet"):
            raw = view.get(attr)
            if raw is None or not raw.isdigit():
                continue
            v = int(raw)
            if v > pos:
                v -= 1
            elif v == pos:
                v = min(pos, max(n_after - 1, 0))
                if attr == "activeTab" and visible:
                    order = list(range(v, len(visible))) + list(range(v - 1, -1, -1))
                    v = next((i for i in order if visible[i]), v)
            view.set(attr, str(v))
    names = src.child(src.wb, "definedNames")
    if names is not None:
        for dn in list(names):
            raw = dn.get("localSheetId") if isinstance(dn.tag, str) else None
            if raw is None or not raw.isdigit():
                continue
            v = int(raw)
            if v == pos:
                names.remove(dn)
            elif v > pos:
                dn.set("localSheetId", str(v - 1))
        if not any(isinstance(c.tag, str) for c in names):
            src.wb.remove(names)
    del src.sheets[pos]


def _garbage(src: _Source, old_parts: Sequence[str], replaced_rids: Sequence[str]) -> set[str]:
    """Casefolded names of members to drop: the old parts of rewritten / removed sheets and what only
    they reach (their drawings, charts, ...), never a part something else still reaches."""
    if not old_parts:
        return set()
    graph = src.graph()
    olds = set(old_parts)
    seen: set[str] = set()
    stack = list(olds)
    while stack:
        p = stack.pop()
        if p in seen:
            continue
        seen.add(p)
        stack.extend(graph.get(p, ()))
    reach: set[str] = set()
    stack = [""]
    while stack:
        p = stack.pop()
        if p in reach or p in olds:
            continue
        reach.add(p)
        stack.extend(graph.get(p, ()))
    out = set()
    for p in seen - reach:
        out.add(p.casefold())
        rels = src.zip.find(rels_part_of(p))
        if rels:
            out.add(rels.casefold())
    return out


def _add_sheet_parts(plan: _Plan, spec: SheetSpec, part: str, taken: set[str], style_map: dict,
                     *, selected: bool) -> None:
    src, ct = plan.src, plan.src.ct
    drawing_rid = None
    if spec.charts:
        drawing = _free_name("xl/drawings/drawing{}.xml", taken)
        chart_parts = [_free_name("xl/charts/chart{}.xml", taken) for _ in spec.charts]
        sheet_rels = Rels(part, None)
        drawing_rid = sheet_rels.add(REL.drawing, drawing)
        drawing_rels = Rels(drawing, None)
        rids = [drawing_rels.add(REL.chart, cp) for cp in chart_parts]
        plan.new[rels_part_of(part)] = serialize(sheet_rels.root)
        plan.new[drawing] = _charts.drawing_xml(spec.charts, rids)
        plan.new[rels_part_of(drawing)] = serialize(drawing_rels.root)
        ct.set_override(drawing, CT.drawing)
        for chart, cp in zip(spec.charts, chart_parts, strict=True):
            plan.new[cp] = _charts.chart_xml(chart, spec, date1904=src.date1904)
            ct.set_override(cp, CT.chart)

    def chunks(spec=spec, rid=drawing_rid) -> Iterator[bytes]:
        return _sheetxml.worksheet_chunks(spec, styles=style_map, date1904=src.date1904, drawing_rid=rid,
                                          selected=selected)

    plan.new[part] = chunks


def _prune_calc_chain(plan: _Plan, dropped_ids: set[int]) -> None:
    src = plan.src
    rel = next(iter(src.wb_rels.by_type(REL.calc_chain)), None)
    name = src.zip.find(src.wb_rels.part_of(rel)) if rel else None
    if name is None or not dropped_ids:
        return
    root = src.parse(name)
    drop = {str(i) for i in dropped_ids}
    current = None
    changed = False
    cells = [c for c in root if _local(c) == "c"]
    effective = []
    for c in cells:
        current = c.get("i", current)
        effective.append(current)
    for c, sheet in zip(cells, effective, strict=True):
        if sheet in drop:
            root.remove(c)
            changed = True
    if not changed:
        return
    for c, sheet in zip(cells, effective, strict=True):
        if c.getparent() is not None and sheet is not None and c.get("i") is None:
            c.set("i", sheet)
    if any(_local(c) == "c" for c in root):
        plan.registry[name] = serialize(root)
    else:
        plan.deleted.add(name.casefold())
        src.wb_rels.remove(rel.id)
        src.ct.drop_override(name)


def _write_marker(plan: _Plan, text: str, taken: set[str]) -> None:
    src = plan.src
    chunks = [text[i:i + _CHUNK] for i in range(0, len(text), _CHUNK)] or [""]
    if src.custom is not None:
        root = src.custom
        for prop in list(root):
            name = prop.get("name", "") if isinstance(prop.tag, str) else ""
            if name.startswith(MARKER_PREFIX) and name[len(MARKER_PREFIX):].isdigit():
                root.remove(prop)
        pids = [int(p.get("pid")) for p in root if isinstance(p.tag, str) and (p.get("pid") or "").isdigit()]
        pid = max([1, *pids]) + 1
        name = src.custom_name
    else:
        root = etree.Element(_q(NS.custom, "Properties"), nsmap={None: NS.custom, "vt": NS.vt})
        pid = 2
        name = "docProps/custom.xml"
        if name.casefold() in taken:
            name = _free_name("docProps/custom{}.xml", taken)
        taken.add(name.casefold())
        src.root_rels.add(REL.custom_properties, name)
        src.ct.set_override(name, CT.custom_properties)
    ns = etree.QName(root).namespace or NS.custom
    for i, chunk in enumerate(chunks):
        prop = etree.SubElement(root, _q(ns, "property"))
        prop.set("fmtid", _FMTID)
        prop.set("pid", str(pid + i))
        prop.set("name", f"{MARKER_PREFIX}{i:03d}")
        etree.SubElement(prop, _q(NS.vt, "lpwstr")).text = chunk
    data = serialize(root) if src.custom is not None else etree.tostring(
        root, xml_declaration=True, encoding="UTF-8", standalone=True)
    if src.custom is not None:
        plan.registry[name] = data
    else:
        plan.new[name] = data


def _emit(plan: _Plan, fh) -> list[str]:
    """Write the new package into ``fh``; return the names of the members written new."""
    src = plan.src
    zw = ZipWriter(fh)
    new = {k.casefold(): (k, v) for k, v in plan.new.items()}
    registry = {k.casefold(): v for k, v in plan.registry.items()}
    written_new = []

    def put(name: str, producer) -> None:
        if callable(producer):
            zw.write_stream(name, producer(), level=1)
        else:
            zw.write(name, producer)

    for name in src.zip.names:
        key = name.casefold()
        if key in new:
            real, producer = new.pop(key)
            put(real, producer)
            written_new.append(real)
        elif key in plan.deleted:
            continue
        elif key in registry:
            zw.write(name, registry[key])
        else:
            zw.copy(src.zip.members[name], src.zip.raw(name))
    for real, producer in new.values():
        put(real, producer)
        written_new.append(real)
    zw.close()
    return written_new


def _cleanup_stale_temps(folder: Path, stem: str) -> None:
    now = time.time()
    try:
        for entry in os.scandir(folder):
            if (entry.name.startswith(f"{_TEMP_PREFIX}{stem}-") and entry.name.endswith(_TEMP_SUFFIX)
                    and now - entry.stat().st_mtime > _STALE_TEMP_SECONDS):
                try:
                    os.unlink(entry.path)
                except OSError:
                    pass
    except OSError:
        pass


def _digest(fh) -> tuple[str, int]:
    """SHA-256 and size of a file read from its start in 1 MiB pieces."""
    fh.seek(0)
    sha = hashlib.sha256()
    size = 0
    while chunk := fh.read(1 << 20):
        sha.update(chunk)
        size += len(chunk)
    return sha.hexdigest(), size


def _copy_owner_and_mode(path: Path, tmp: Path) -> None:
    """Give the new file the old one's permission bits (and owner and group where allowed)."""
    try:
        st = os.stat(path)
    except OSError:
        return
    try:
        os.chmod(tmp, st.st_mode & 0o7777)
    except OSError:
        pass
    if hasattr(os, "chown"):
        try:
            os.chown(tmp, st.st_uid, st.st_gid)
        except OSError:
            pass


def _fsync_dir(folder: Path) -> None:
    if os.name != "posix":
        return
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def _still_same(path: Path, expect: Fingerprint, label: str) -> None:
    try:
        data, now = _read_file(path)
    except PackageError as exc:
        raise ConcurrentEditError(f"workbook '{label}' changed while tocsin computed ({exc}); nothing was "
                                  "written, try again later") from exc
    if not now.same_bytes(expect):
        raise ConcurrentEditError(f"workbook '{label}' was saved by someone else while tocsin computed; "
                                  "nothing was written, try again later")


def write(path: str | os.PathLike, sheets: Sequence[SheetSpec], *, state: dict,
          remove: Sequence[str] = (), expect: Fingerprint | None) -> WriteResult:
    """Write tocsin's sheets into the workbook at ``path`` in one atomic replace.

    Parameters
    ----------
    path : path-like
        The workbook (``.xlsx`` / ``.xlsm``); a symbolic link is followed and the file it names replaced.
    sheets : sequence of SheetSpec
        Sheets to write: a name tocsin owns is replaced in place, a new name is appended after the others.
    state : dict
        JSON-serialisable record kept in the package (see the module docstring); replaces the old one.
    remove : sequence of str
        Names of tocsin's sheets to delete (names not present are ignored).
    expect : Fingerprint or None
        The fingerprint of the bytes the caller read (``Package.fingerprint``); None skips that check
        (the check just before the replace still runs).

    Returns
    -------
    WriteResult

    Raises
    ------
    OwnershipError
        A requested name belongs to a user's sheet.
    ConcurrentEditError
        The file changed since ``expect`` was taken, or while the new package was built.
    PackageError
        The file is not a workbook tocsin can edit, or cannot be written.
    """
    t0 = time.perf_counter()
    path = Path(os.path.realpath(path))
    label = path.name
    if not isinstance(state, dict):
        raise InputError(f"`state` must be a dict; got {type(state).__name__}")
    if isinstance(remove, str):
        remove = (remove,)
    data, fp = _read_file(path)
    if expect is not None and not fp.same_bytes(expect):
        raise ConcurrentEditError(f"workbook '{label}' was saved by someone else since tocsin read it; "
                                  "nothing was written, try again later")
    expect = fp
    src = _Source(data, label)
    _check_request(src, sheets, remove)
    plan = _plan(src, sheets, state, remove)
    folder = path.parent
    _cleanup_stale_temps(folder, path.stem)
    try:
        fd, tmp_name = tempfile.mkstemp(prefix=f"{_TEMP_PREFIX}{path.stem}-", suffix=_TEMP_SUFFIX, dir=folder)
    except OSError as exc:
        raise PackageError(f"cannot create a temporary file beside '{label}': {exc.strerror or exc}") from exc
    tmp = Path(tmp_name)
    try:
        with os.fdopen(fd, "w+b") as fh:
            written_new = _emit(plan, fh)
            fh.flush()
            os.fsync(fh.fileno())
            digest, size = _digest(fh)
            try:  # the new package opens as a zip and holds what was written
                with zipfile.ZipFile(fh) as check:
                    present = {n.casefold() for n in check.namelist()}
            except zipfile.BadZipFile as exc:
                raise PackageError(f"internal error: the new package of '{label}' does not open") from exc
        missing = [n for n in written_new if n.casefold() not in present]
        if missing:
            raise PackageError(f"internal error: the new package of '{label}' lacks {missing}")
        _still_same(path, expect, label)
        _copy_owner_and_mode(path, tmp)
        try:
            os.replace(tmp, path)
        except OSError as exc:
            raise PackageError(f"cannot replace '{label}' (is it open in a spreadsheet program?): "
                               f"{exc.strerror or exc}") from exc
    except BaseException:
        try:
            tmp.unlink()
        except OSError:
            pass
        raise
    _fsync_dir(folder)
    st = os.stat(path)
    new_fp = Fingerprint(st.st_size, st.st_mtime_ns, digest)
    return WriteResult(path, new_fp, tuple(plan.added), tuple(plan.replaced), tuple(plan.removed),
                       tuple(sorted(plan.registry)), tuple(written_new),
                       tuple(sorted(n for n in src.zip.names if n.casefold() in plan.deleted
                                    and n.casefold() not in {w.casefold() for w in written_new})),
                       time.perf_counter() - t0)
