"""tocsin's forecasting core: pure computation on 1-D float series, no file I/O.

Modules: ``events`` (criteria -> 0/1 flags), ``partition`` (training / validation split),
``benchmarks`` (naive, seasonal naive, majority vote), ``logistic`` (logit fit and forecasts),
``scores`` (verification scores and tests), ``profile`` (event rates by period of year).
``udf`` wraps them as spreadsheet functions and is the only module that imports xlwings.
"""
from sheetfns.errors import CriterionError, InputError, PartitionError, TocsinError

__all__ = ["CriterionError", "InputError", "PartitionError", "TocsinError"]
