"""Criteria (event rules) and event flags: turn a column of values into a 0/1/NaN event series.

A criterion is a short string read by a small hand-written grammar (never ``eval``). The comparison
part follows the criteria syntax of OpenFormula (OASIS, *Open Document Format for Office Applications
(OpenDocument) v1.2, Part 2: Recalculated Formula (OpenFormula) Format*, 2011, §4.11.8), which is what
spreadsheet users already type into COUNTIF-style functions::

    criterion  := comparison | change
    comparison := op operand                 e.g. ">=3.2"  ">1150"  "<0"  "<=-15"  "=1"  "<>0"  "=alarm"
                | number                     a bare number means "=number" (OpenFormula)
    op         := ">=" | "<=" | "<>" | ">" | "<" | "="
    operand    := number | text              text only after "=" or "<>", not starting with < > =
    change     := ("rise" | "fall") ["%"] [(">" | ">=") number]
                                             e.g. "rise"  "fall"  "rise>=0.5"  "fall>2"  "rise%>=2"

Keywords and text are case-insensitive; spaces around tokens are ignored. ``=TRUE`` / ``=FALSE`` compare
with 1 / 0, because TRUE/FALSE cells count as 1/0.

Numbers are compared as a spreadsheet compares them (DESIGN.md §5): two numbers that agree to about 15
significant digits are equal (:func:`approx_equal`), in every comparison (``=``, ``<>``, ``<``, ``<=``,
``>``, ``>=``), and a change between two such numbers is exactly 0. So 0.1 + 0.2 matches ``=0.3``, and
4.0 -> 3.8 is a fall of exactly 5 % (``fall%>5`` is 0, ``fall%>=5`` is 1), as the same cells give in
LibreOffice (``tests/test_events_libreoffice.py`` checks every boundary case against it).
"""
from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Any

import numpy as np

from sheetfns.checks import as_int
from sheetfns.errors import CriterionError, InputError

__all__ = ["Criterion", "parse_criterion", "flag", "change", "approx_equal", "SPREADSHEET_EPSILON"]

SPREADSHEET_EPSILON = 2.0 ** -48
"""The relative difference (about 3.6e-15) below which two numbers are equal, as LibreOffice Calc's
``rtl::math::approxEqual`` decides (recalled from memory; checked against LibreOffice by the tests):
|a - b| < |a| 2^-48 and |a - b| < |b| 2^-48. That is agreement to about 15 significant digits, the
precision spreadsheets show and compare at; a tolerance relative to the magnitude, rather than
rounding both sides to 15 digits, never splits two neighbouring doubles that straddle a rounding
boundary."""

_OPS = (">=", "<=", "<>", ">", "<", "=")
_NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?")
_EXPECTED = ("expected a comparison such as '>=3.2', '<>0' or '=alarm', "
             "or a change such as 'rise', 'fall>2' or 'rise%>=5'")


@dataclass(frozen=True)
class Criterion:
    """A parsed event rule.

    Attributes
    ----------
    text : str
        The criterion as written.
    kind : {'compare', 'text', 'change'}
        Numeric comparison, text (in)equality, or change against the previous observed value.
    op : str
        One of ``>= <= <> > < =``.
    threshold : float or None
        The number compared with (``compare``) or the minimum change (``change``).
    label : str or None
        The text compared with, case-folded (``text`` only).
    direction : {'rise', 'fall'} or None
        For ``change``: which way the value must move.
    percent : bool
        For ``change``: the change is measured in percent of the previous value.
    """

    text: str
    kind: str
    op: str
    threshold: float | None = None
    label: str | None = None
    direction: str | None = None
    percent: bool = False


def _fail(text: str, what: str) -> CriterionError:
    return CriterionError(f"criterion {text!r}: {what}", argument="criterion", value=text)


def _number(rest: str) -> float | None:
    m = _NUMBER.fullmatch(rest)
    return float(m.group(0)) if m else None


def _split_op(s: str) -> tuple[str | None, str]:
    for op in _OPS:
        if s.startswith(op):
            return op, s[len(op):].strip()
    return None, s


def _parse_change(text: str, s: str) -> Criterion:
    direction, rest = s[:4], s[4:].strip()
    percent = rest.startswith("%")
    if percent:
        rest = rest[1:].strip()
    if not rest:
        if percent:
            raise _fail(text, f"expected a comparison such as '>=2' after '{direction}%'")
        return Criterion(text=text, kind="change", op=">", threshold=0.0, direction=direction)
    op, operand = _split_op(rest)
    where = direction + ("%" if percent else "")
    if op is None:
        raise _fail(text, f"expected '>' or '>=' and a number after '{where}'")
    if op not in (">", ">="):
        raise _fail(text, f"expected '>' or '>=' after '{where}' (a change criterion sets a minimum "
                          f"size); got {op!r}")
    if not operand:
        raise _fail(text, f"expected a number after '{op}'")
    value = _number(operand)
    if value is None:
        raise _fail(text, f"expected a number after '{op}'; got {operand!r}")
    if value < 0:
        raise _fail(text, f"expected a number >= 0 after '{op}' (the size of the {direction}); "
                          f"got {operand!r}")
    return Criterion(text=text, kind="change", op=op, threshold=value, direction=direction,
                     percent=percent)


def parse_criterion(text: str) -> Criterion:
    """Parse a criterion string; cheap enough to validate a rule before any data is read.

    Parameters
    ----------
    text : str
        The rule, e.g. ``">=3.2"``, ``"<>0"``, ``"=alarm"``, ``"rise"``, ``"fall>2"``, ``"rise%>=5"``.

    Returns
    -------
    Criterion

    Raises
    ------
    CriterionError
        The text does not parse; the message quotes it and says what was expected.

    Examples
    --------
    >>> parse_criterion(">=3.2")
    Criterion(text='>=3.2', kind='compare', op='>=', threshold=3.2, label=None, direction=None, percent=False)
    >>> parse_criterion("rise%>=5").percent
    True
    """
    if not isinstance(text, str):
        raise CriterionError(f"criterion must be text such as '>=3.2' or 'rise'; got {text!r}",
                             argument="criterion", value=text)
    s = text.strip()
    if not s:
        raise _fail(text, _EXPECTED)
    low = s.casefold()
    if low.startswith(("rise", "fall")) and (len(low) == 4 or not low[4].isalnum()):
        return _parse_change(text, low)
    op, operand = _split_op(s)
    if op is None:
        value = _number(s)
        if value is None:
            raise _fail(text, _EXPECTED)
        return Criterion(text=text, kind="compare", op="=", threshold=value)
    if not operand:
        raise _fail(text, f"expected a number or text after {op!r}")
    value = _number(operand)
    if value is not None:
        return Criterion(text=text, kind="compare", op=op, threshold=value)
    folded = operand.casefold()
    if op in ("=", "<>") and folded in ("true", "false"):
        return Criterion(text=text, kind="compare", op=op, threshold=1.0 if folded == "true" else 0.0)
    if op not in ("=", "<>"):
        raise _fail(text, f"expected a number after {op!r}; got {operand!r} "
                          f"(text can only be compared with '=' or '<>')")
    if operand[0] in "<>=":
        raise _fail(text, f"expected a number or text after {op!r}; text must not start with "
                          f"'<', '>' or '='; got {operand!r}")
    return Criterion(text=text, kind="text", op=op, label=folded)


def _coerce(values: Any) -> tuple[np.ndarray, np.ndarray | None]:
    """Split ``values`` into a float array (text and blanks -> NaN) and, if any cell is text,
    an object array of case-folded text (None elsewhere)."""
    if hasattr(values, "to_numpy"):
        values = values.to_numpy()
    if isinstance(values, np.ndarray) and values.dtype.kind in "fiub":
        arr = values.astype(float)
        text = None
    else:
        try:
            obj = np.asarray(values, dtype=object)
        except (TypeError, ValueError) as exc:
            raise InputError(f"`values` must be a 1-D sequence; got {type(values).__name__}",
                             argument="values", value=values) from exc
        if obj.ndim == 2 and 1 in obj.shape:
            obj = obj.reshape(-1)
        if obj.ndim != 1:
            raise InputError(f"`values` must be one-dimensional; got shape {obj.shape}", argument="values",
                             value=values)
        is_text = np.frompyfunc(lambda v: isinstance(v, str), 1, 1)(obj).astype(bool)
        text = None
        arr = np.full(obj.shape, np.nan)
        if is_text.any():
            folded = np.frompyfunc(lambda v: v.strip().casefold(), 1, 1)(obj[is_text])
            text = np.full(obj.shape, None, dtype=object)
            text[is_text] = folded
            text[np.flatnonzero(is_text)[folded == ""]] = None   # blank text cells are missing
        rest = ~is_text
        try:
            arr[rest] = np.asarray(obj[rest].tolist(), dtype=float) if rest.any() else []
        except (TypeError, ValueError):
            conv = np.frompyfunc(_to_float, 1, 1)(obj[rest])
            bad = np.flatnonzero(conv == _BAD)
            if bad.size:
                i = int(np.flatnonzero(rest)[bad[0]])
                raise InputError(f"`values` must hold numbers, TRUE/FALSE, text or blanks; "
                                 f"got {obj[i]!r} at position {i + 1}", argument="values",
                                 value=obj[i], location=i + 1) from None
            arr[rest] = conv.astype(float)
    if arr.ndim == 2 and 1 in arr.shape:
        arr = arr.reshape(-1)
    if arr.ndim != 1:
        raise InputError(f"`values` must be one-dimensional; got shape {arr.shape}", argument="values",
                         value=values)
    return arr, text


_BAD = object()


def _to_float(v: Any) -> Any:
    if v is None:
        return np.nan
    try:
        return float(v)
    except (TypeError, ValueError):
        return _BAD


def approx_equal(a: Any, b: Any) -> np.ndarray:
    """Element-wise: ``a`` and ``b`` are equal as a spreadsheet decides (see :data:`SPREADSHEET_EPSILON`).
    Zero equals only zero; NaN equals nothing.

    >>> [bool(approx_equal(a, b)) for a, b in ((0.1 + 0.2, 0.3), (1.0, 1.0 + 1e-14), (0.0, 1e-300))]
    [True, False, False]
    """
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    with np.errstate(invalid="ignore", over="ignore"):
        d = np.abs(a - b)
        return (a == b) | ((d < np.abs(a) * SPREADSHEET_EPSILON) & (d < np.abs(b) * SPREADSHEET_EPSILON))


def _compare(x: np.ndarray, op: str, c: float) -> np.ndarray:
    eq = approx_equal(x, c)
    with np.errstate(invalid="ignore"):
        if op == ">=":
            return (x > c) | eq
        if op == "<=":
            return (x < c) | eq
        if op == ">":
            return (x > c) & ~eq
        if op == "<":
            return (x < c) & ~eq
        if op == "=":
            return eq
        return ~eq


def _condition(crit: Criterion, x: np.ndarray, text: np.ndarray | None) -> np.ndarray:
    """The condition per row as 1.0 / 0.0 / NaN (NaN: cannot be decided)."""
    if crit.kind == "text":
        out = np.where(np.isnan(x), np.nan, 0.0)          # numbers and TRUE/FALSE are not the text
        if text is not None:
            has = text != None  # noqa: E711  (element-wise test on an object array)
            out[has] = (text[has] == crit.label).astype(float)
        if crit.op == "<>":
            out = 1.0 - out
        return out
    if crit.kind == "compare":
        return np.where(np.isnan(x), np.nan, _compare(x, crit.op, crit.threshold).astype(float))
    # change against the previous observed value, signed for the direction
    size = _change(x, crit.percent)
    if crit.direction == "fall":
        size = -size
    return np.where(np.isnan(size), np.nan, _compare(size, crit.op, crit.threshold).astype(float))


def _change(x: np.ndarray, percent: bool) -> np.ndarray:
    n = x.size
    obs = ~np.isnan(x)
    idx = np.where(obs, np.arange(n), -1)
    last = np.maximum.accumulate(idx)                     # last observed at or before t
    prev_idx = np.empty(n, dtype=np.int64)
    prev_idx[:1] = -1
    prev_idx[1:] = last[:-1]                              # last observed strictly before t
    prev = np.where(prev_idx >= 0, x[np.maximum(prev_idx, 0)], np.nan)
    with np.errstate(over="ignore", invalid="ignore"):
        change = x - prev
    change[approx_equal(x, prev)] = 0.0                   # no change at spreadsheet precision
    if percent:
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            change = np.where(prev == 0, np.nan, 100.0 * change / np.abs(prev))
    return change


def change(values: Any, *, percent: bool = False) -> np.ndarray:
    """The change of each row against the previous observed value, as the change rules measure it.

    ``x[t] - x[p]`` (``percent``: ``100 (x[t] - x[p]) / |x[p]|``, NaN where x[p] is 0), x[p] the last
    observed value before t (interior blanks skipped; NaN for the first observation and for blank rows);
    0 where the two values are equal at spreadsheet precision (:func:`approx_equal`). Text and blank
    cells are missing. ``rise>c`` is ``change > c`` and ``fall>c`` is ``-change > c``.

    >>> change([4.0, 3.8, None, 4.18], percent=True).round(6).tolist()
    [nan, -5.0, nan, 10.0]
    >>> change([0.3, 0.1 + 0.2]).tolist()
    [nan, 0.0]
    """
    x, _ = _coerce(values)
    return _change(x, percent)


def _hold_for(cond: np.ndarray, k: int) -> np.ndarray:
    """1 where ``cond`` held on each of the k rows ending at t; 0 where it failed on one of them;
    NaN where row t is undecided or no row failed but some row (or a row before the data) is unknown."""
    if k == 1:
        return cond
    n = cond.size
    false_cs = np.concatenate(([0], np.cumsum(cond == 0.0)))
    nan_cs = np.concatenate(([0], np.cumsum(np.isnan(cond))))
    hi = np.arange(1, n + 1)
    lo = np.maximum(hi - k, 0)
    n_false = false_cs[hi] - false_cs[lo]
    unknown = (nan_cs[hi] - nan_cs[lo] > 0) | (hi < k)    # rows before the first are unknown
    out = np.where(n_false > 0, 0.0, np.where(unknown, np.nan, 1.0))
    out[np.isnan(cond)] = np.nan
    return out


def flag(values: Any, criterion: str | Criterion, min_run: int = 1) -> np.ndarray:
    """Turn a column of values into an event series (1.0 event, 0.0 no event, NaN missing).

    Parameters
    ----------
    values : sequence or ndarray, length n
        Numbers, TRUE/FALSE (counted as 1/0), text, or blanks (None/NaN/empty text) -- one per row.
        Under a numeric or change criterion a text cell is missing; under a text criterion a number is
        simply not equal to the text.
    criterion : str or Criterion
        The event rule; see the module docstring for the grammar.
    min_run : int, default 1
        The event holds at t only where the condition has held on each of the k = ``min_run``
        consecutive rows t-k+1 .. t.

    Returns
    -------
    ndarray of float, length n

    Notes
    -----
    Missing values give NaN, never a guess:

    * a blank cell (or text under a numeric rule) is NaN;
    * a change rule compares with the previous *observed* value (interior blanks are skipped), so the
      first observation is NaN (nothing to compare with). The change is ``y[t] - y[prev]`` for
      ``rise`` and ``y[prev] - y[t]`` for ``fall``; the percent change divides by ``|y[prev]|`` and is
      NaN where the previous value is 0;
    * with ``min_run=k`` the row is 0 as soon as the condition failed on one of the k rows, 1 when it
      held on all k, and NaN when row t itself is NaN, or when nothing failed but one of the k rows is
      unknown (a NaN, or a row before the start of the data).

    Examples
    --------
    >>> flag([1, 5, None, 7, 2], ">=5")
    array([ 0.,  1., nan,  1.,  0.])
    >>> flag([1, 5, None, 7, 2], "rise")
    array([nan,  1., nan,  1.,  0.])
    """
    crit = criterion if isinstance(criterion, Criterion) else parse_criterion(criterion)
    k = as_int(min_run, "min_run", minimum=1)
    x, text = _coerce(values)
    if x.size == 0:
        raise InputError("`values` must not be empty; got 0 rows", argument="values", value=values)
    # a run longer than the series never holds: k beyond n + 1 says no more (and fits numpy's integers)
    return _hold_for(_condition(crit, x, text), min(k, x.size + 1))
