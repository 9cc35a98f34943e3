"""tocsin's LibreOffice Calc add-in: the Python UNO component inside the extension ``tocsin.oxt``.

LibreOffice runs this file in its own Python (on Debian and Ubuntu the system Python 3 with
``python3-uno``), never tocsin itself. It

* implements the add-in service ``com.sun.star.sheet.AddIn`` with the interface ``tocsin.calc.XTocsin``
  (one method per spreadsheet function; the type library ``tocsin.rdb`` beside this file defines it),
  and tells Calc the functions' names, descriptions and argument help from ``tocsin_functions.json``
  (written with the extension from tocsin's function list);
* at the first call, puts the folders of the environment variable ``TOCSIN_PYTHONPATH``
  (path-separated) in front of ``sys.path`` and imports tocsin's Calc face
  (``sheetfns.udf.calc.face``), which does the work. tocsin is imported at the first call, not when
  this file is loaded, so that Calc lists the functions (and installing the extension works) even
  where tocsin cannot be imported; the cells then say why, as ``#tocsin: ...`` text.

The service name is ``tocsin``: a file saved by LibreOffice stores ``TOCSIN.EVENT_FLAG(...)``.
"""
import importlib
import json
import os
import sys

import uno
import unohelper
from com.sun.star.lang import Locale, XServiceInfo, XServiceName
from com.sun.star.sheet import LocalizedName, XAddIn, XCompatibilityNames

with open(os.path.join(os.path.dirname(os.path.abspath(__file__)), "tocsin_functions.json"),
          encoding="utf-8") as _fh:
    TABLE = json.load(_fh)
FUNCTIONS = {f["name"]: f for f in TABLE["functions"]}
IMPLEMENTATION = TABLE["implementation"]
SERVICES = ("com.sun.star.sheet.AddIn", TABLE["service"])
ERROR_PREFIX = "#tocsin: "

_state = {"face": None, "error": None}


def _face():
    """tocsin's Calc face, imported once; None (and the reason in _state) when it cannot be."""
    if _state["face"] is None and _state["error"] is None:
        for entry in reversed(os.environ.get("TOCSIN_PYTHONPATH", "").split(os.pathsep)):
            if entry and entry not in sys.path:
                sys.path.insert(0, entry)
        try:   # not through pyuno's import hook, whose ImportError mixes in UNO type names
            face = importlib.import_module("sheetfns.udf.calc.face")
        except Exception as exc:  # noqa: BLE001 - any failure becomes the cells' message
            version = "{}.{}".format(*sys.version_info[:2])
            _state["error"] = (
                f"{ERROR_PREFIX}LibreOffice's Python {version} cannot import tocsin ({type(exc).__name__}: "
                f"{exc}); set TOCSIN_PYTHONPATH to the site-packages folder of a Python {version} "
                "environment where tocsin is installed, then restart LibreOffice")
        else:
            _state["face"] = face
    return _state["face"]


def _call(name, args):
    face = _face()
    if face is None:
        return ((_state["error"],),)
    try:
        return face.call(name, args)
    except Exception as exc:  # noqa: BLE001 - the face never raises; a cell shows a bug, never #VALUE!
        return ((f"{ERROR_PREFIX}unexpected error ({type(exc).__name__}: {exc}); please report it",),)


class TocsinAddIn(unohelper.Base, uno.getClass(TABLE["interface"]), XAddIn, XCompatibilityNames,
                  XServiceName, XServiceInfo):
    """The add-in object Calc creates; the spreadsheet functions are added below, one per entry."""

    def __init__(self, ctx):
        self.ctx = ctx
        self.locale = Locale("en", "US", "")

    # XAddIn: one name in every language (the function names are tocsin's own, not translated)
    def getProgrammaticFuntionName(self, display_name):  # (sic: the UNO method is spelt so)
        return display_name if display_name in FUNCTIONS else ""

    def getDisplayFunctionName(self, name):
        return name if name in FUNCTIONS else ""

    def getFunctionDescription(self, name):
        return FUNCTIONS[name]["help"] if name in FUNCTIONS else ""

    def _arg(self, name, position):
        args = FUNCTIONS[name]["args"] if name in FUNCTIONS else ()
        return args[position] if 0 <= position < len(args) else None

    def getDisplayArgumentName(self, name, position):
        arg = self._arg(name, position)
        return "" if arg is None else arg["name"]

    def getArgumentDescription(self, name, position):
        arg = self._arg(name, position)
        return "" if arg is None else arg["help"]

    def getProgrammaticCategoryName(self, name):
        return TABLE["category"]

    def getDisplayCategoryName(self, name):
        return TABLE["category"]

    # XLocalizable (part of XAddIn)
    def setLocale(self, locale):
        self.locale = locale

    def getLocale(self):
        return self.locale

    # XCompatibilityNames: the bare name, as a workbook saved by another program writes it
    def getCompatibilityNames(self, name):
        return (LocalizedName(Locale("en", "US", ""), name),) if name in FUNCTIONS else ()

    # XServiceName, XServiceInfo
    def getServiceName(self):
        return TABLE["service"]

    def getImplementationName(self):
        return IMPLEMENTATION

    def supportsService(self, name):
        return name in SERVICES

    def getSupportedServiceNames(self):
        return SERVICES


def _method(name):
    def method(self, *args):
        return _call(name, args)

    method.__name__ = name
    return method


for _name in FUNCTIONS:
    setattr(TocsinAddIn, _name, _method(_name))

g_ImplementationHelper = unohelper.ImplementationHelper()
g_ImplementationHelper.addImplementation(TocsinAddIn, IMPLEMENTATION, SERVICES)
