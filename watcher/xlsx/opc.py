"""Open Packaging Conventions (ECMA-376 Part 2) as tocsin needs them: safe XML parsing, relationships,
content types and part names.

* :func:`parse_xml` parses a part with lxml with entity expansion, DTD loading and network access off
  and ``huge_tree`` off; a part with a document type declaration is refused outright (no Office Open XML
  part has one, and that is where entity bombs live). :func:`prolog_problem` finds one in the first
  bytes of a part that is not parsed (a data sheet), so it is found before any reader meets it.
* :func:`serialize` writes a parsed part back with its own XML declaration (``standalone`` kept); lxml
  keeps namespace prefixes and ``mc:Ignorable`` as they are (ElementTree would rename prefixes).
* :class:`Rels` is one relationships part; :func:`resolve` turns a relationship target into a part name.
* :class:`ContentTypes` answers "what is the content type of this part" (Override first, then Default by
  extension), and records the overrides to add and drop.
"""
from __future__ import annotations

import posixpath
import re
from dataclasses import dataclass
from urllib.parse import quote, unquote

from lxml import etree

from watcher.xlsx.errors import PackageError

__all__ = [
    "CT", "NS", "REL", "ContentTypes", "Rel", "Rels", "parse_xml", "prolog_problem", "rels_part_of",
    "resolve", "relative_target", "serialize",
]


class NS:
    """Namespace URIs (transitional Office Open XML)."""

    main = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
    r = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
    pkg_rels = "http://schemas.openxmlformats.org/package/2006/relationships"
    ct = "http://schemas.openxmlformats.org/package/2006/content-types"
    custom = "http://schemas.openxmlformats.org/officeDocument/2006/custom-properties"
    vt = "http://schemas.openxmlformats.org/officeDocument/2006/docPropsVTypes"
    c = "http://schemas.openxmlformats.org/drawingml/2006/chart"
    a = "http://schemas.openxmlformats.org/drawingml/2006/main"
    xdr = "http://schemas.openxmlformats.org/drawingml/2006/spreadsheetDrawing"


class REL:
    """Relationship types."""

    _base = "http://schemas.openxmlformats.org/officeDocument/2006/relationships/"
    office_document = _base + "officeDocument"
    worksheet = _base + "worksheet"
    chartsheet = _base + "chartsheet"
    styles = _base + "styles"
    calc_chain = _base + "calcChain"
    custom_properties = _base + "custom-properties"
    drawing = _base + "drawing"
    chart = _base + "chart"
    strict_office_document = "http://purl.oclc.org/ooxml/officeDocument/relationships/officeDocument"


class CT:
    """Content types."""

    _sml = "application/vnd.openxmlformats-officedocument.spreadsheetml."
    workbook = _sml + "sheet.main+xml"
    workbook_macro = "application/vnd.ms-excel.sheet.macroEnabled.main+xml"
    template = _sml + "template.main+xml"
    template_macro = "application/vnd.ms-excel.template.macroEnabled.main+xml"
    addin_macro = "application/vnd.ms-excel.addin.macroEnabled.main+xml"
    binary_workbook = "application/vnd.ms-excel.sheet.binary.macroEnabled.main"
    worksheet = _sml + "worksheet+xml"
    styles = _sml + "styles+xml"
    calc_chain = _sml + "calcChain+xml"
    custom_properties = "application/vnd.openxmlformats-officedocument.custom-properties+xml"
    drawing = "application/vnd.openxmlformats-officedocument.drawing+xml"
    chart = "application/vnd.openxmlformats-officedocument.drawingml.chart+xml"
    rels = "application/vnd.openxmlformats-package.relationships+xml"
    xml = "application/xml"

    workbook_types = (workbook, workbook_macro, template, template_macro, addin_macro)


_PARSER = etree.XMLParser(resolve_entities=False, no_network=True, huge_tree=False, load_dtd=False,
                          dtd_validation=False, remove_blank_text=False)


def local_name(el: etree._Element) -> str:
    """The tag of ``el`` without its namespace ('' for comments and processing instructions)."""
    return etree.QName(el).localname if isinstance(el.tag, str) else ""


def insert_in_order(parent: etree._Element, el: etree._Element, order: tuple[str, ...]) -> None:
    """Insert ``el`` among ``parent``'s children where the schema's sequence ``order`` (local names)
    puts it: before the first child that comes later in ``order``, else at the end."""
    rank = order.index(local_name(el))
    for i, child in enumerate(parent):
        local = local_name(child)
        if local in order and order.index(local) > rank:
            parent.insert(i, el)
            return
    parent.append(el)


_PROLOG_DOCTYPE = re.compile(r"\ufeff?\s*(?:<\?.*?\?>\s*|<!--.*?-->\s*)*<!DOCTYPE", re.S)
_PROLOG_END = re.compile(r"\ufeff?\s*(?:<\?.*?\?>\s*|<!--.*?-->\s*)*<[^?!]", re.S)


def prolog_problem(head: bytes) -> str | None:
    """What is wrong with the start of an XML part (``head``: its first bytes, 64 KB are plenty): a
    document type declaration (where entity bombs live; no Office Open XML part has one), or a prolog
    that does not end within ``head``. None when the root element starts cleanly."""
    if head[:2] in (b"\xff\xfe", b"\xfe\xff"):
        text = head.decode("utf-16", "ignore")
    else:
        text = head.decode("utf-8", "ignore")
    if not text.strip():
        return None
    if _PROLOG_DOCTYPE.match(text):
        return "declares a document type, which Office Open XML parts never do; refused"
    if not _PROLOG_END.match(text):
        return f"does not start its root element within its first {len(head):,} bytes; refused"
    return None


def parse_xml(data: bytes, part: str, label: str) -> etree._Element:
    """Parse one XML part safely; raise PackageError naming the file and part on any problem."""
    if b"<!DOCTYPE" in data[:4096] or b"<!ENTITY" in data[:4096]:
        raise PackageError(f"'{label}': part '{part}' declares a document type or entities, which Office "
                           "Open XML parts never do; refused (possible entity-expansion attack)",
                           workbook=label, part=part)
    problem = prolog_problem(data[:65_536])
    if problem:
        raise PackageError(f"'{label}': part '{part}' {problem}", workbook=label, part=part)
    try:
        root = etree.fromstring(data, _PARSER)
    except etree.XMLSyntaxError as exc:
        raise PackageError(f"'{label}': part '{part}' is not well-formed XML ({exc})",
                           workbook=label, part=part) from exc
    tree = root.getroottree()
    if tree.docinfo.doctype or tree.docinfo.internalDTD is not None:
        raise PackageError(f"'{label}': part '{part}' declares a document type, which Office Open XML "
                           "parts never do; refused", workbook=label, part=part)
    return root


def serialize(root: etree._Element) -> bytes:
    """The part as bytes with an XML declaration (keeping ``standalone="yes"`` where it was)."""
    standalone = root.getroottree().docinfo.standalone
    return etree.tostring(root, xml_declaration=True, encoding="UTF-8",
                          standalone=True if standalone is None else standalone)


def rels_part_of(part: str) -> str:
    """The relationships part of a part: 'xl/workbook.xml' -> 'xl/_rels/workbook.xml.rels'; the package
    root '' -> '_rels/.rels'."""
    folder, base = posixpath.split(part)
    return posixpath.join(folder, "_rels", base + ".rels")


def resolve(source: str, target: str) -> str:
    """The part name a relationship target points at, without a leading '/'. ``source`` is the part
    holding the relationship ('' for the package)."""
    target = unquote(target.split("#", 1)[0])
    if target.startswith("/"):
        path = target
    else:
        path = posixpath.join("/" + posixpath.dirname(source), target)
    return posixpath.normpath(path).lstrip("/")


def relative_target(source: str, part: str) -> str:
    """A relative target from ``source`` to ``part`` (what spreadsheet programs write)."""
    rel = posixpath.relpath("/" + part, "/" + posixpath.dirname(source))
    return quote(rel, safe="/._-~!$&'()*+,;=:@")


@dataclass(frozen=True)
class Rel:
    id: str
    type: str
    target: str
    external: bool


class Rels:
    """One relationships part (``*.rels``), kept as a tree so rewriting it keeps what is not ours."""

    def __init__(self, source: str, root: etree._Element | None) -> None:
        self.source = source
        if root is None:
            root = etree.Element(f"{{{NS.pkg_rels}}}Relationships", nsmap={None: NS.pkg_rels})
        self.root = root
        self.changed = False

    @property
    def rels(self) -> list[Rel]:
        out = []
        for el in self.root:
            if not isinstance(el.tag, str) or etree.QName(el).localname != "Relationship":
                continue
            out.append(Rel(el.get("Id", ""), el.get("Type", ""), el.get("Target", ""),
                           el.get("TargetMode", "Internal") == "External"))
        return out

    def by_type(self, rel_type: str) -> list[Rel]:
        return [r for r in self.rels if r.type == rel_type]

    def by_id(self, rid: str) -> Rel | None:
        return next((r for r in self.rels if r.id == rid), None)

    def part_of(self, rel: Rel) -> str:
        return resolve(self.source, rel.target)

    def new_id(self) -> str:
        used = {r.id for r in self.rels}
        n = 1 + max((int(i[3:]) for i in used if i.startswith("rId") and i[3:].isdigit()), default=0)
        while f"rId{n}" in used:
            n += 1
        return f"rId{n}"

    def add(self, rel_type: str, part: str, rid: str | None = None) -> str:
        rid = rid or self.new_id()
        el = etree.SubElement(self.root, f"{{{NS.pkg_rels}}}Relationship")
        el.set("Id", rid)
        el.set("Type", rel_type)
        el.set("Target", relative_target(self.source, part))
        self.changed = True
        return rid

    def remove(self, rid: str) -> None:
        for el in list(self.root):
            if isinstance(el.tag, str) and el.get("Id") == rid:
                self.root.remove(el)
                self.changed = True


class ContentTypes:
    """``[Content_Types].xml``: the content type of each part."""

    def __init__(self, root: etree._Element) -> None:
        self.root = root
        self.changed = False
        self.defaults: dict[str, str] = {}
        self.overrides: dict[str, str] = {}
        for el in root:
            if not isinstance(el.tag, str):
                continue
            name = etree.QName(el).localname
            if name == "Default":
                self.defaults[el.get("Extension", "").casefold()] = el.get("ContentType", "")
            elif name == "Override":
                self.overrides[el.get("PartName", "").lstrip("/").casefold()] = el.get("ContentType", "")

    def of(self, part: str) -> str | None:
        key = part.lstrip("/").casefold()
        if key in self.overrides:
            return self.overrides[key]
        base = posixpath.basename(key)
        ext = base.rsplit(".", 1)[1] if "." in base else ""
        return self.defaults.get(ext)

    def set_override(self, part: str, content_type: str) -> None:
        key = part.lstrip("/").casefold()
        if self.overrides.get(key) == content_type:
            return
        self.drop_override(part)
        el = etree.SubElement(self.root, f"{{{NS.ct}}}Override")
        el.set("PartName", "/" + part.lstrip("/"))
        el.set("ContentType", content_type)
        self.overrides[key] = content_type
        self.changed = True

    def ensure_default(self, ext: str, content_type: str) -> None:
        if ext.casefold() in self.defaults:
            return
        # Defaults come before overrides in what spreadsheet programs write; keep that habit.
        el = etree.Element(f"{{{NS.ct}}}Default")
        el.set("Extension", ext)
        el.set("ContentType", content_type)
        first_override = next((i for i, e in enumerate(self.root)
                               if isinstance(e.tag, str) and etree.QName(e).localname == "Override"), None)
        if first_override is None:
            self.root.append(el)
        else:
            self.root.insert(first_override, el)
        self.defaults[ext.casefold()] = content_type
        self.changed = True

    def drop_override(self, part: str) -> None:
        key = part.lstrip("/").casefold()
        if key not in self.overrides:
            return
        for el in list(self.root):
            if (isinstance(el.tag, str) and etree.QName(el).localname == "Override"
                    and el.get("PartName", "").lstrip("/").casefold() == key):
                self.root.remove(el)
        del self.overrides[key]
        self.changed = True
