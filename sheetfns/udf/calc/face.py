"""The LibreOffice Calc face of tocsin's spreadsheet functions: Calc's arguments in, Calc's cells out.

The add-in component (``oxt/tocsin_addin.py``, running inside LibreOffice) hands every call to
:func:`call`; this module maps what Calc passes to what the plain functions of
:mod:`sheetfns.udf.functions` expect, and their results to what Calc shows. It imports nothing of
LibreOffice, so the tests exercise it directly. What Calc 7.4 passes, as found by the tests
(``tests/test_calc_addin.py``):

* a range as a tuple of rows; an empty cell in it as ``""``, TRUE / FALSE as 1.0 / 0.0, a date as its
  serial number, text as text; an error cell stops the call before it reaches us (the formula shows
  the error);
* an optional argument left out as ``None``; a blank cell given as a single value as ``0.0`` (the
  same as a typed 0). Where 0 is not an allowed value of the argument, 0 means "omitted"
  (:attr:`~sheetfns.udf.registry.Arg.zero_is_blank`); where 0 means something (no lags) it stays 0.

Results go back as a tuple of rows (the add-in's return type is a sequence of sequences of any), a
single value as one row of one cell. A blank is returned as empty text: ``None`` would look blank
but read as 0 in the next formula, while Calc formulas treat ``""`` as blank (and so does
:mod:`sheetfns.udf.coerce` when a result is fed back into another function). A message is the plain
functions' ``#tocsin: ...`` text.
"""
from __future__ import annotations

import math
from typing import Any

import numpy as np

from sheetfns.udf.coerce import ERROR_PREFIX
from sheetfns.udf.registry import FUNCTIONS, Arg

Rows = tuple[tuple[Any, ...], ...]


def argument(arg: Arg, value: Any) -> Any:
    """What the plain function gets for ``arg`` when Calc passes ``value``."""
    if value is None:
        return arg.default
    if arg.zero_is_blank and type(value) is float and value == 0.0:
        return arg.default
    return value


def cell(value: Any) -> Any:
    """One result value as Calc stores it: a number, a text, or empty text for a blank."""
    if value is None:
        return ""
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, bool):
        return 1.0 if value else 0.0
    if isinstance(value, int):
        return float(value)
    if isinstance(value, float) and math.isnan(value):
        return ""
    return value


def result(out: Any) -> Rows:
    """A plain function's result (a list of rows, one value, or a message) as Calc's rows."""
    if isinstance(out, list):
        return tuple(tuple(cell(v) for v in row) for row in out)
    return ((cell(out),),)


def call(name: str, args: tuple[Any, ...]) -> Rows:
    """Call the spreadsheet function ``name`` with the arguments Calc passed; never raises."""
    spec = FUNCTIONS.get(name)
    if spec is None:
        return ((f"{ERROR_PREFIX}{name} is not a function of the tocsin found by LibreOffice; rebuild "
                 "the add-in with that tocsin (tocsin calc-addin) and install it again",),)
    if len(args) != len(spec.args):
        return ((f"{ERROR_PREFIX}{name} takes {len(spec.args)} arguments in the tocsin found by "
                 f"LibreOffice, the add-in passed {len(args)}; rebuild the add-in with that tocsin "
                 "(tocsin calc-addin) and install it again",),)
    return result(spec.fn(*(argument(a, v) for a, v in zip(spec.args, args, strict=True))))
