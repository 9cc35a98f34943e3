"""tocsin's spreadsheet functions, imported by users as ``sheetfns.udf`` (the xlwings "UDF Modules" name).

This package re-exports the xlwings face (:mod:`sheetfns.udf.excel`).
"""
from sheetfns.udf.excel import *  # noqa: F403  (the face's __all__: the spreadsheet functions)
from sheetfns.udf.excel import __all__  # noqa: F401
