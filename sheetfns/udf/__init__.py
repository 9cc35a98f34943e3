"""tocsin's spreadsheet functions, imported by users as ``sheetfns.udf`` (the xlwings "UDF Modules" name).

This package re-exports the xlwings face (:mod:`sheetfns.udf.excel`). Where xlwings is not installed
(inside LibreOffice, whose add-in imports :mod:`sheetfns.udf.calc`) it re-exports the same functions
undecorated (:mod:`sheetfns.udf.functions`), so that the package and its plain functions import
without xlwings; ``import sheetfns.udf.excel`` then says how to install it.
"""
try:
    from sheetfns.udf.excel import *  # noqa: F403  (the face's __all__: the spreadsheet functions)
    from sheetfns.udf.excel import __all__
except ImportError as _exc:
    if _exc.name != "xlwings":   # xlwings itself is missing (or cannot load): not another failure
        raise
    from sheetfns.udf.functions import *  # noqa: F403
    from sheetfns.udf.functions import __all__  # noqa: F401
