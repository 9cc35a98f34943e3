"""The lossless workbook writer: tocsin's sheets written into an existing .xlsx/.xlsm, nothing else touched.

It knows Office Open XML parts, ownership marks and the atomic replace, and nothing of forecasting: it
imports nothing of ``sheetfns`` nor of the rest of ``watcher``. Its errors are its own
(:mod:`watcher.xlsx.errors`), all subclasses of ValueError.
"""
