"""The LibreOffice Calc add-in as an extension package (``tocsin.oxt``), built from the function list.

A Calc add-in is a UNO component that implements the service ``com.sun.star.sheet.AddIn``: Calc finds
its functions by introspection of an interface whose methods are the spreadsheet functions, and asks
the component (``com.sun.star.sheet.XAddIn``) for their display names, descriptions and argument help.
The interface must be known to LibreOffice as a type, so the extension carries a type library
(``tocsin.rdb``) compiled from an IDL file that :func:`idl_text` generates from
:data:`~sheetfns.udf.registry.FUNCTIONS`. The compiled type library ships inside the tocsin package
(``oxt/tocsin.rdb``), so users need no LibreOffice SDK; ``python -m watcher.cli.calc_addin
--types`` rebuilds it with the SDK's ``unoidl-write`` after a change of the list, and a test checks
that the shipped one is current.

Argument types follow the add-in rules of Calc (``sc/source/core/tool/addincol.cxx``): a required
range is a ``sequence< sequence< any > >``; every other argument is an ``any``, the only type Calc
treats as optional, which takes a single value or a range. Every function returns a ``sequence<
sequence< any > >``: a column, a table, or one row of one cell.

The extension holds: ``META-INF/manifest.xml``, ``description.xml`` (identifier, version),
``tocsin.components`` (the component, registered without running it, so that installing never needs
tocsin importable), ``tocsin_addin.py`` (the component), ``tocsin_functions.json`` (names and help
of the functions, so that Calc lists them even before tocsin can be imported) and ``tocsin.rdb``.
:func:`oxt_bytes` returns the package; it is deterministic (fixed zip timestamps).
"""
from __future__ import annotations

import io
import json
import zipfile
from importlib import resources
from xml.sax.saxutils import quoteattr

from sheetfns.udf.registry import CATEGORY, FUNCTIONS, SheetFunction

MODULE = "tocsin.calc"                   # the IDL module of the interface
INTERFACE = "XTocsin"
IMPLEMENTATION = "tocsin.calc.AddIn"
SERVICE = "tocsin"                       # XServiceName: files store TOCSIN.EVENT_FLAG(...)
IDENTIFIER = "tocsin.calc.addin"         # the extension's identifier (unopkg list / remove)
FILE_NAME = "tocsin.oxt"
TYPES = "tocsin.rdb"
COMPONENT = "tocsin_addin.py"
TABLE = "tocsin_functions.json"
_RANGE = "sequence< sequence< any > >"
_FIXED_TIME = (2025, 1, 1, 0, 0, 0)


def _functions(functions: dict[str, SheetFunction] | None) -> list[SheetFunction]:
    return list((FUNCTIONS if functions is None else functions).values())


def idl_name(name: str) -> str:
    """An argument name as an IDL identifier: ``train_rows`` -> ``trainRows`` (unoidl-write refuses an
    underscore before a lower-case letter). Calc shows the display names, the spreadsheet's own."""
    head, *rest = name.split("_")
    return head + "".join(part[:1].upper() + part[1:] for part in rest)


def idl_text(functions: dict[str, SheetFunction] | None = None) -> str:
    """The IDL of the add-in's interface: one method per spreadsheet function, in list order."""
    lines = ["// tocsin's LibreOffice Calc add-in: one method per spreadsheet function.",
             "// Generated from the function list (sheetfns/udf/registry.py) by",
             "// sheetfns/udf/calc/extension.py; do not edit.",
             "// Compiled into tocsin.rdb by: python -m watcher.cli.calc_addin --types",
             "",
             "#include <com/sun/star/uno/XInterface.idl>",
             ""]
    modules = MODULE.split(".")
    lines.append(" ".join(f"module {m} {{" for m in modules))
    lines.append(f"interface {INTERFACE} : com::sun::star::uno::XInterface")
    lines.append("{")
    for f in _functions(functions):
        params = ", ".join(f"[in] {_RANGE if a.is_range and not a.optional else 'any'} {idl_name(a.name)}"
                           for a in f.args)
        lines.append(f"    {_RANGE} {f.name}({params});")
    lines.append("};")
    lines.append(" ".join("};" for _ in modules))
    return "\n".join(lines) + "\n"


def functions_table(functions: dict[str, SheetFunction] | None = None) -> dict:
    """What the component tells Calc about each function (``tocsin_functions.json``)."""
    return {"category": CATEGORY, "service": SERVICE, "implementation": IMPLEMENTATION,
            "interface": f"{MODULE}.{INTERFACE}",
            "functions": [{"name": f.name, "help": f.help,
                           "args": [{"name": a.name, "help": a.help, "optional": a.optional}
                                    for a in f.args]}
                          for f in _functions(functions)]}


def description_xml(version: str) -> str:
    """The extension's ``description.xml``: identifier, version, name, and where its description is."""
    return f"""<?xml version="1.0" encoding="UTF-8"?>
<description xmlns="http://openoffice.org/extensions/description/2006"
  xmlns:xlink="http://www.w3.org/1999/xlink">
  <identifier value={quoteattr(IDENTIFIER)}/>
  <version value={quoteattr(version)}/>
  <platform value="all"/>
  <display-name><name lang="en">tocsin: event forecasts as spreadsheet functions</name></display-name>
  <extension-description><src lang="en" xlink:href="description-en.txt"/></extension-description>
</description>
"""


def description_text(caution: str) -> str:
    """The description the extension manager shows (``description-en.txt``), with the caution."""
    return ("tocsin's spreadsheet functions (EVENT_FLAG, EVENT_NAIVE, ...) for LibreOffice Calc. They run "
            "in LibreOffice's own Python and need tocsin installed where that Python finds it (the "
            "folders in the environment variable TOCSIN_PYTHONPATH).\n\n" + caution + "\n")


def _manifest() -> str:
    entries = [(TYPES, "application/vnd.sun.star.uno-typelibrary;type=RDB"),
               ("tocsin.components", "application/vnd.sun.star.uno-components")]
    rows = "".join(f'  <manifest:file-entry manifest:full-path="{p}" manifest:media-type="{m}"/>\n'
                   for p, m in entries)
    return ('<?xml version="1.0" encoding="UTF-8"?>\n'
            '<manifest:manifest xmlns:manifest="http://openoffice.org/2001/manifest">\n'
            f"{rows}</manifest:manifest>\n")


def _components() -> str:
    return f"""<?xml version="1.0" encoding="UTF-8"?>
<components xmlns="http://openoffice.org/2010/uno-components">
  <component loader="com.sun.star.loader.Python" uri="{COMPONENT}">
    <implementation name="{IMPLEMENTATION}">
      <service name="com.sun.star.sheet.AddIn"/>
      <service name="{SERVICE}"/>
    </implementation>
  </component>
</components>
"""


def shipped(name: str) -> bytes:
    """A file of the extension that ships in the tocsin package (``sheetfns/udf/calc/oxt/``)."""
    return resources.files(__package__).joinpath("oxt", name).read_bytes()


def oxt_bytes(version: str, caution: str) -> bytes:
    """The extension package ``tocsin.oxt``."""
    members = [
        ("META-INF/manifest.xml", _manifest().encode()),
        ("description.xml", description_xml(version).encode()),
        ("description-en.txt", description_text(caution).encode()),
        ("tocsin.components", _components().encode()),
        (COMPONENT, shipped(COMPONENT)),
        (TABLE, (json.dumps(functions_table(), indent=1) + "\n").encode()),
        (TYPES, shipped(TYPES)),
    ]
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w") as z:
        for name, data in members:
            info = zipfile.ZipInfo(name, _FIXED_TIME)
            info.compress_type = zipfile.ZIP_DEFLATED
            info.external_attr = 0o644 << 16
            z.writestr(info, data)
    return buf.getvalue()
