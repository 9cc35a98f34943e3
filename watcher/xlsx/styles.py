"""The cell formats tocsin's sheets use, added to a workbook's ``xl/styles.xml`` without renumbering.

Each named format of :data:`watcher.xlsx.spec.FORMATS` (optionally bold) becomes one cell format record
(``xf``) in ``cellXfs``. :func:`ensure_styles` looks for a record that already says the same thing (same
number format code, font, fill and border, no alignment or protection) and reuses it; only what is
missing is *appended* to ``numFmts``, ``fonts``, ``fills``, ``borders`` and ``cellXfs``, so every index
the workbook already uses keeps its meaning and a second refresh adds nothing. Fonts are the workbook's
default font (``fonts[0]``) with bold, italic, size or colour changed, so tocsin's sheets look like the
rest of the workbook. Colours are tocsin's own: a light red fill with dark red text for warnings, a light
green one for good news, a grey rule under table headers.

Element order inside ``styleSheet`` follows the schema (ECMA-376 Part 1, §18.8.39 CT_Stylesheet).
"""
from __future__ import annotations

import copy
from collections.abc import Iterable
from dataclasses import dataclass

from lxml import etree

from watcher.xlsx.opc import NS, insert_in_order, local_name

__all__ = ["StyleDef", "STYLE_DEFS", "ensure_styles", "minimal_styles"]

_M = NS.main
_SHEET_ORDER = ("numFmts", "fonts", "fills", "borders", "cellStyleXfs", "cellXfs", "cellStyles", "dxfs",
                "tableStyles", "colors", "extLst")
_FONT_ORDER = ("b", "i", "strike", "condense", "extend", "outline", "shadow", "u", "vertAlign", "sz",
               "color", "name", "family", "charset", "scheme")


@dataclass(frozen=True)
class StyleDef:
    """What one named format looks like."""

    numfmt: int | str = 0          # a built-in number format id, or a format code to add
    bold: bool = False
    italic: bool = False
    size_up: float = 0.0           # points added to the default font size
    color: str | None = None       # ARGB text colour
    fill: str | None = None        # ARGB solid fill
    rule_below: bool = False       # thin grey bottom border


STYLE_DEFS: dict[str, StyleDef] = {
    "general": StyleDef(),
    "integer": StyleDef(numfmt=1),
    "dec3": StyleDef(numfmt="0.000"),
    "percent": StyleDef(numfmt="0.0%"),
    "date": StyleDef(numfmt="yyyy-mm-dd"),
    "datetime": StyleDef(numfmt="yyyy-mm-dd hh:mm"),
    "text": StyleDef(numfmt=49),
    "bold": StyleDef(bold=True),
    "italic": StyleDef(italic=True, color="FF5A5A5A"),
    "title": StyleDef(bold=True, size_up=3.0),
    "header": StyleDef(bold=True, rule_below=True),
    "warning": StyleDef(bold=True, color="FF8E1B12", fill="FFF8D8D3"),
    "good": StyleDef(color="FF1F5A2B", fill="FFDCEFDA"),
}


def _q(name: str) -> str:
    return f"{{{_M}}}{name}"


_local = local_name


def _key(el: etree._Element) -> tuple:
    """A comparable form of an element: local names, attributes and children, prefixes ignored."""
    attrs = tuple(sorted((etree.QName(k).localname, v) for k, v in el.attrib.items()))
    kids = tuple(_key(c) for c in el if isinstance(c.tag, str))
    return (_local(el), attrs, (el.text or "").strip(), kids)


def _section(root: etree._Element, name: str) -> etree._Element:
    """The ``styleSheet`` child ``name``, created at its schema position if absent."""
    for el in root:
        if _local(el) == name:
            return el
    new = etree.Element(_q(name))
    insert_in_order(root, new, _SHEET_ORDER)
    return new


def _items(section: etree._Element, name: str) -> list[etree._Element]:
    return [el for el in section if _local(el) == name]


def _append(section: etree._Element, name: str, el: etree._Element) -> int:
    items = _items(section, name)
    if items:
        items[-1].addnext(el)
    else:
        section.insert(0, el)
    section.set("count", str(len(items) + 1))
    return len(items)


def _find_or_append(section: etree._Element, name: str, el: etree._Element) -> tuple[int, bool]:
    want = _key(el)
    for i, cand in enumerate(_items(section, name)):
        if _key(cand) == want:
            return i, False
    return _append(section, name, el), True


def _font(base: etree._Element | None, d: StyleDef, bold: bool) -> etree._Element:
    font = copy.deepcopy(base) if base is not None else etree.fromstring(
        f'<font xmlns="{_M}"><sz val="11"/><name val="Calibri"/><family val="2"/></font>')
    for child in list(font):
        if _local(child) in ("b", "i") or (_local(child) == "color" and d.color):
            font.remove(child)
    if bold or d.bold:
        font.insert(0, etree.Element(_q("b")))
    if d.italic:
        font.insert(0, etree.Element(_q("i")))
    if d.color:
        etree.SubElement(font, _q("color")).set("rgb", d.color)
    if d.size_up:
        sz = next((c for c in font if _local(c) == "sz"), None)
        if sz is None:
            sz = etree.SubElement(font, _q("sz"))
            sz.set("val", "11")
        size = float(sz.get("val", "11")) + d.size_up
        sz.set("val", f"{size:g}")
    kids = sorted((c for c in font if isinstance(c.tag, str)),
                  key=lambda c: _FONT_ORDER.index(_local(c)) if _local(c) in _FONT_ORDER else 99)
    for c in list(font):
        font.remove(c)
    for c in kids:
        font.append(c)
    font.tail = None
    return font


def _fill(argb: str) -> etree._Element:
    return etree.fromstring(f'<fill xmlns="{_M}"><patternFill patternType="solid"><fgColor rgb="{argb}"/>'
                            '<bgColor indexed="64"/></patternFill></fill>')


def _rule_border() -> etree._Element:
    return etree.fromstring(f'<border xmlns="{_M}"><left/><right/><top/><bottom style="thin">'
                            '<color rgb="FF8C8C8C"/></bottom><diagonal/></border>')


def minimal_styles() -> etree._Element:
    """A styles part for a package that has none (one default font, the two reserved fills)."""
    return etree.fromstring(
        f'<styleSheet xmlns="{_M}"><fonts count="1"><font><sz val="11"/><name val="Calibri"/>'
        '<family val="2"/></font></fonts><fills count="2"><fill><patternFill patternType="none"/></fill>'
        '<fill><patternFill patternType="gray125"/></fill></fills><borders count="1"><border><left/>'
        '<right/><top/><bottom/><diagonal/></border></borders><cellStyleXfs count="1"><xf numFmtId="0" '
        'fontId="0" fillId="0" borderId="0"/></cellStyleXfs><cellXfs count="1"><xf numFmtId="0" '
        'fontId="0" fillId="0" borderId="0" xfId="0"/></cellXfs><cellStyles count="1"><cellStyle '
        'name="Normal" xfId="0" builtinId="0"/></cellStyles></styleSheet>'.encode())


def ensure_styles(root: etree._Element, keys: Iterable[tuple[str, bool]]) -> tuple[dict, bool]:
    """Make sure ``styles.xml`` (``root``) has a cell format for each ``(fmt, bold)`` key.

    Returns ``(mapping, changed)``: the ``cellXfs`` index of each key, and whether anything was appended.
    """
    changed = False
    num_fmts = _section(root, "numFmts")
    fonts = _section(root, "fonts")
    fills = _section(root, "fills")
    borders = _section(root, "borders")
    style_xfs = next((el for el in root if _local(el) == "cellStyleXfs"), None)
    cell_xfs = _section(root, "cellXfs")
    codes = {el.get("formatCode"): int(el.get("numFmtId")) for el in _items(num_fmts, "numFmt")
             if (el.get("numFmtId") or "").isdigit()}
    font_items = _items(fonts, "font")
    base_font = font_items[0] if font_items else None
    if base_font is None:
        _append(fonts, "font", _font(None, StyleDef(), False))
        base_font = _items(fonts, "font")[0]
        changed = True
    while len(_items(fills, "fill")) < 2:  # fills 0 and 1 are reserved (none, gray125)
        pattern = "none" if not _items(fills, "fill") else "gray125"
        _append(fills, "fill", etree.fromstring(
            f'<fill xmlns="{_M}"><patternFill patternType="{pattern}"/></fill>'))
        changed = True
    if not _items(borders, "border"):
        _append(borders, "border", etree.fromstring(
            f'<border xmlns="{_M}"><left/><right/><top/><bottom/><diagonal/></border>'))
        changed = True
    if not _items(cell_xfs, "xf"):
        _append(cell_xfs, "xf", etree.fromstring(
            f'<xf xmlns="{_M}" numFmtId="0" fontId="0" fillId="0" borderId="0"/>'))
        changed = True
    mapping: dict[tuple[str, bool], int] = {}
    for fmt, bold in sorted(set(keys)):
        d = STYLE_DEFS[fmt]
        if isinstance(d.numfmt, int):
            num_id = d.numfmt
        elif d.numfmt in codes:
            num_id = codes[d.numfmt]
        else:
            used = set(codes.values())
            num_id = max([163, *used]) + 1
            el = etree.Element(_q("numFmt"))
            el.set("numFmtId", str(num_id))
            el.set("formatCode", d.numfmt)
            _append(num_fmts, "numFmt", el)
            codes[d.numfmt] = num_id
            changed = True
        plain_font = not (bold or d.bold or d.italic or d.color or d.size_up)
        if plain_font:
            font_id = 0
        else:
            font_id, added = _find_or_append(fonts, "font", _font(base_font, d, bold))
            changed |= added
        fill_id = 0
        if d.fill:
            fill_id, added = _find_or_append(fills, "fill", _fill(d.fill))
            changed |= added
        border_id = 0
        if d.rule_below:
            border_id, added = _find_or_append(borders, "border", _rule_border())
            changed |= added
        xf = etree.Element(_q("xf"))
        xf.set("numFmtId", str(num_id))
        xf.set("fontId", str(font_id))
        xf.set("fillId", str(fill_id))
        xf.set("borderId", str(border_id))
        if style_xfs is not None and _items(style_xfs, "xf"):
            xf.set("xfId", "0")
        if num_id:
            xf.set("applyNumberFormat", "1")
        if font_id:
            xf.set("applyFont", "1")
        if fill_id:
            xf.set("applyFill", "1")
        if border_id:
            xf.set("applyBorder", "1")
        want = _xf_key(xf)
        for i, cand in enumerate(_items(cell_xfs, "xf")):
            if _xf_key(cand) == want:
                mapping[(fmt, bold)] = i
                break
        else:
            mapping[(fmt, bold)] = _append(cell_xfs, "xf", xf)
            changed = True
    if not _items(num_fmts, "numFmt"):
        root.remove(num_fmts)  # an empty numFmts element is not allowed (minOccurs of numFmt is 0 but
        # spreadsheet programs write the element only when it has entries)
    return mapping, changed


def _xf_key(xf: etree._Element) -> tuple | None:
    """What makes two cell formats the same for tocsin: ids, no alignment/protection, no quote prefix."""
    if any(isinstance(c.tag, str) for c in xf) or xf.get("quotePrefix") in ("1", "true"):
        return None
    return tuple(xf.get(a, "0") for a in ("numFmtId", "fontId", "fillId", "borderId", "xfId"))
