"""Planning one write of tocsin's sheets: which sheets are added, replaced and removed, which registry
parts change and how (workbook, its relationships, content types, styles, calculation chain, tocsin's
record and marks), which old parts go with a rewritten sheet, and finally emitting the new package with
every other member copied as its compressed bytes. See :mod:`watcher.xlsx.package` for the rules."""
from __future__ import annotations

import json
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field
from typing import Any

from lxml import etree

from watcher.xlsx import chart as _chart
from watcher.xlsx import worksheet as _worksheet
from watcher.xlsx.archive import ZipWriter
from watcher.xlsx.errors import OwnershipError, PackageError, SpecError
from watcher.xlsx.opc import (
    CT,
    NS,
    REL,
    Rels,
    insert_in_order,
    parse_xml,
    relative_target,
    rels_part_of,
    serialize,
)
from watcher.xlsx.source import MARKER_FORMAT, MARKER_PREFIX, SHEET_MARK, Source, _local, _q
from watcher.xlsx.spec import SheetSpec, check_sheet_name
from watcher.xlsx.styles import ensure_styles, minimal_styles

__all__ = ["Plan", "check_request", "emit", "make_plan"]

_CHUNK = 255
_FMTID = "{D5CDD505-2E9C-101B-9397-08002B2CF9AE}"
_WB_ORDER = ("fileVersion", "fileSharing", "workbookPr", "workbookProtection", "bookViews", "sheets",
             "functionGroups", "externalReferences", "definedNames", "calcPr", "oleSize",
             "customWorkbookViews", "pivotCaches", "smartTagPr", "smartTagTypes", "webPublishing",
             "fileRecoveryPr", "webPublishObjects", "extLst")


def _state_json(record: dict) -> str:
    try:
        return json.dumps(record, sort_keys=True, ensure_ascii=True, separators=(",", ":"), allow_nan=False)
    except (TypeError, ValueError) as exc:
        raise SpecError(f"`state` must hold only JSON values (text, numbers, lists, dicts); {exc}",
                        where="state") from exc


def _free_name(pattern: str, taken: set[str]) -> str:
    n = 1
    while pattern.format(n).casefold() in taken:
        n += 1
    name = pattern.format(n)
    taken.add(name.casefold())
    return name


def _insert_wb_child(wb: etree._Element, el: etree._Element) -> None:
    insert_in_order(wb, el, _WB_ORDER)


@dataclass
class Plan:
    """Everything one write changes, before any byte is written."""

    src: Source
    added: list[str] = field(default_factory=list)
    replaced: list[str] = field(default_factory=list)
    removed: list[str] = field(default_factory=list)
    registry: dict[str, bytes] = field(default_factory=dict)   # rewritten registry parts
    new: dict[str, Any] = field(default_factory=dict)          # new parts: name -> bytes | chunk factory
    deleted: set[str] = field(default_factory=set)             # casefolded names of dropped members


def check_request(src: Source, specs: Sequence[SheetSpec], remove: Sequence[str], *,
                  owned: bool = True) -> None:
    seen: dict[str, str] = {}
    for spec in specs:
        if not isinstance(spec, SheetSpec):
            raise SpecError(f"`sheets` must hold SheetSpec values; got {type(spec).__name__}", where="sheets")
        check_sheet_name(spec.name)
        key = spec.name.casefold()
        if key in seen:
            raise SpecError(f"two sheets to write are named '{seen[key]}' and '{spec.name}' (sheet names "
                            "are unique ignoring case)", where="sheets")
        seen[key] = spec.name
    for name in remove:
        if name.casefold() in seen:
            raise SpecError(f"sheet '{name}' is both written and removed", where="remove")
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
                                 "sheet, or choose another output sheet name",
                                 workbook=src.label, sheet=info.name, unmarked=info.name in src.unmarked)
    if not owned:
        for spec in specs:
            info = by_key.get(spec.name.casefold())
            if info is not None:
                raise PackageError(f"sheet '{info.name}' already exists in '{src.label}'; a sheet handed "
                                   "to the user (owned=False) is only ever added, never replaced",
                                   workbook=src.label)
    protection = src.child(src.wb, "workbookProtection")
    locked = protection is not None and protection.get("lockStructure", "0").lower() in ("1", "true")
    changes_structure = any(s.name.casefold() not in by_key for s in specs) or any(
        n.casefold() in by_key for n in remove)
    if locked and changes_structure:
        raise PackageError(f"'{src.label}' has a protected structure (sheets cannot be added or removed); "
                           "tocsin leaves it alone. Unprotect the workbook structure to let tocsin add its "
                           "sheets", workbook=src.label, part=src.wb_name)


def make_plan(src: Source, specs: Sequence[SheetSpec], state: dict, remove: Sequence[str], *,
              owned: bool = True) -> Plan:
    plan = Plan(src)
    wb, wb_rels, ct = src.wb, src.wb_rels, src.ct
    by_key = {s.name.casefold(): s for s in src.sheets}
    sheet_els = [el for el in src.sheets_el if _local(el) == "sheet"]
    old_parts: list[str] = []      # parts of replaced / removed sheets (their subtrees go)
    dropped_ids: set[int] = set()
    next_id = 1 + max((s.sheet_id for s in src.sheets), default=0)  # ids of removed sheets are not reused

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
        raise PackageError(f"'{src.label}': removing {', '.join(plan.removed)} would leave no visible sheet",
                           workbook=src.label)

    # 2. the parts that stay, and names for new ones
    replaced_infos = [by_key[s.name.casefold()] for s in specs if s.name.casefold() in by_key]
    for info in replaced_infos:
        dropped_ids.add(info.sheet_id)
        if info.part:
            old_parts.append(info.part)
    plan.deleted = _garbage(src, old_parts, [i.rid for i in replaced_infos])
    taken = {n.casefold() for n in src.zip.names if n.casefold() not in plan.deleted}

    # 3. styles
    keys = set().union(*(_worksheet.style_keys(s) for s in specs)) if specs else set()
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
    if owned:
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
    ours = [s.name for s in remaining if s.owned or s.name in plan.replaced]
    ours += plan.added if owned else []
    record = {"format": MARKER_FORMAT, "sheets": sorted(dict.fromkeys(ours), key=str.casefold),
              "state": state}
    text = _state_json(record).replace(" ", "\\u0020")  # no chunk may start or end with a space
    old = _state_json({**src.marker, "format": MARKER_FORMAT}).replace(" ", "\\u0020")
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


def _mark_sheets(src: Source, sheets: list[tuple[int | None, str]], *, n_before: int) -> None:
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


def _active_tab(src: Source) -> int:
    views = src.child(src.wb, "bookViews")
    view = next((v for v in views if _local(v) == "workbookView"), None) if views is not None else None
    try:
        return int(view.get("activeTab", "0")) if view is not None else 0
    except ValueError:
        return 0


def _shift_positions(src: Source, pos: int, n_after: int) -> None:
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


def _garbage(src: Source, old_parts: Sequence[str], replaced_rids: Sequence[str]) -> set[str]:
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


def _add_sheet_parts(plan: Plan, spec: SheetSpec, part: str, taken: set[str], style_map: dict,
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
        plan.new[drawing] = _chart.drawing_xml(spec.charts, rids)
        plan.new[rels_part_of(drawing)] = serialize(drawing_rels.root)
        ct.set_override(drawing, CT.drawing)
        for chart, cp in zip(spec.charts, chart_parts, strict=True):
            plan.new[cp] = _chart.chart_xml(chart, spec, date1904=src.date1904)
            ct.set_override(cp, CT.chart)

    def chunks(spec=spec, rid=drawing_rid) -> Iterator[bytes]:
        return _worksheet.worksheet_chunks(spec, styles=style_map, date1904=src.date1904, drawing_rid=rid,
                                          selected=selected)

    plan.new[part] = chunks


def _prune_calc_chain(plan: Plan, dropped_ids: set[int]) -> None:
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


def _write_marker(plan: Plan, text: str, taken: set[str]) -> None:
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


def emit(plan: Plan, fh) -> list[str]:
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
