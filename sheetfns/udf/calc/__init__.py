"""tocsin's spreadsheet functions as a LibreOffice Calc add-in (DESIGN.md §12).

:mod:`~sheetfns.udf.calc.face` maps Calc's arguments and results; :mod:`~sheetfns.udf.calc.extension`
builds the extension ``tocsin.oxt`` (its IDL, function table and package) from the function list; the
folder ``oxt/`` holds the files that ship in the extension as they are (the component and the
compiled type library).
"""
from sheetfns.udf.calc.extension import FILE_NAME, idl_text, oxt_bytes
from sheetfns.udf.calc.face import call

__all__ = ["FILE_NAME", "call", "idl_text", "oxt_bytes"]
