"""Validation helpers shared by the core: one place, one message shape.

Every helper raises :class:`~sheetfns.errors.InputError` whose message names the argument, says what
was expected and quotes what came, e.g. "`horizon` must be an integer >= 1; got 0", and whose fields
``argument``, ``value`` and ``location`` carry the same facts for callers.
"""
from __future__ import annotations

import re
from collections.abc import Sequence
from typing import Any

import numpy as np

from sheetfns.errors import InputError

_PLAIN_NUMBER = re.compile(r"\s*[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?\s*")


def plain_number(text: str) -> float | None:
    """The number a text holds when it is a plain decimal number (``"1150"``, ``" -3.5 "``, ``"2e3"``),
    else None: thousands separators, percent signs, currency and words (``"1,150"``, ``"12%"``) stay
    text, because their meaning depends on the locale or the user. The one rule for text cells, in the
    spreadsheet functions and in the refresh's job table and data columns alike.

    >>> plain_number(" -3.5 "), plain_number("1,150"), plain_number("2e3")
    (-3.5, None, 2000.0)
    """
    return float(text) if _PLAIN_NUMBER.fullmatch(text) else None


def _show(value: Any) -> str:
    if isinstance(value, np.generic):
        value = value.item()
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def as_series(values: Any, name: str, *, allow_empty: bool = False) -> np.ndarray:
    """Return ``values`` as a 1-D float array (NaN for missing). None and blanks become NaN;
    booleans become 1.0 / 0.0. Raises if the input is not one-dimensional or not numeric."""
    if isinstance(values, np.ndarray) and values.dtype.kind in "fiub":
        arr = values.astype(float, copy=False)
    else:
        try:
            seq = list(values.tolist() if hasattr(values, "tolist") else values)
        except TypeError as exc:
            raise InputError(f"`{name}` must be a 1-D sequence of numbers; got {_show(values)}",
                             argument=name, value=values) from exc
        out = np.empty(len(seq), dtype=float)
        for i, v in enumerate(seq):
            if v is None or (isinstance(v, str) and v.strip() == ""):
                out[i] = np.nan
            elif isinstance(v, (bool, np.bool_)):
                out[i] = 1.0 if v else 0.0
            else:
                try:
                    out[i] = float(v)
                except (TypeError, ValueError) as exc:
                    raise InputError(f"`{name}` must hold numbers; got {_show(v)} at position {i + 1}",
                                     argument=name, value=v, location=i + 1) from exc
        arr = out
    if arr.ndim != 1:
        if arr.ndim == 2 and 1 in arr.shape:
            arr = arr.reshape(-1)
        else:
            raise InputError(f"`{name}` must be one-dimensional; got shape {arr.shape}", argument=name,
                             value=values)
    if not allow_empty and arr.size == 0:
        raise InputError(f"`{name}` must not be empty; got 0 rows", argument=name, value=values)
    return arr


def as_events(values: Any, name: str = "actual", *, allow_empty: bool = False) -> np.ndarray:
    """Return ``values`` as a 1-D event series: each value 0.0, 1.0 or NaN."""
    arr = as_series(values, name, allow_empty=allow_empty)
    bad = ~(np.isnan(arr) | (arr == 0.0) | (arr == 1.0))
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise InputError(f"`{name}` contains values not in {{0, 1, NaN}}; got {_show(arr[i])} "
                         f"at position {i + 1}", argument=name, value=float(arr[i]), location=i + 1)
    return arr


def as_prob(values: Any, name: str = "prob", *, allow_empty: bool = False) -> np.ndarray:
    """Return ``values`` as a 1-D probability series: each value in [0, 1] or NaN."""
    arr = as_series(values, name, allow_empty=allow_empty)
    bad = ~np.isnan(arr) & ((arr < 0.0) | (arr > 1.0))
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise InputError(f"`{name}` must hold probabilities in [0, 1]; got {_show(arr[i])} "
                         f"at position {i + 1}", argument=name, value=float(arr[i]), location=i + 1)
    return arr


def same_length(**arrays: Sequence[Any] | np.ndarray) -> int:
    """Check that every named array has the same length; return it. On a mismatch the error's
    ``argument`` names the first array whose length differs from the first one's."""
    lengths = {k: len(v) for k, v in arrays.items() if v is not None}
    if len(set(lengths.values())) > 1:
        shown = ", ".join(f"`{k}` has {n}" for k, n in lengths.items())
        first = next(iter(lengths.values()))
        odd = next(k for k, n in lengths.items() if n != first)
        raise InputError(f"inputs must have the same length; {shown} rows", argument=odd,
                         value=arrays[odd])
    return next(iter(lengths.values()), 0)


def as_int(value: Any, name: str, *, minimum: int | None = None, maximum: int | None = None,
           allow_none: bool = False) -> int | None:
    """Return ``value`` as an int within [minimum, maximum]; floats holding integers are accepted."""
    if value is None:
        if allow_none:
            return None
        raise InputError(f"`{name}` must be an integer; got None", argument=name, value=value)
    if isinstance(value, (bool, np.bool_)):
        raise InputError(f"`{name}` must be an integer; got {_show(value)}", argument=name, value=value)
    try:
        f = float(value)
    except (TypeError, ValueError) as exc:
        raise InputError(f"`{name}` must be an integer; got {_show(value)}", argument=name,
                         value=value) from exc
    if not np.isfinite(f) or f != int(f):
        raise InputError(f"`{name}` must be an integer; got {_show(value)}", argument=name, value=value)
    i = int(f)
    if minimum is not None and i < minimum:
        raise InputError(f"`{name}` must be an integer >= {minimum}; got {_show(value)}", argument=name,
                         value=value)
    if maximum is not None and i > maximum:
        raise InputError(f"`{name}` must be an integer <= {maximum}; got {_show(value)}", argument=name,
                         value=value)
    return i


def as_nonnegative(value: Any, name: str, *, what: str = "a number") -> float:
    """Return ``value`` as a finite float >= 0 (a count or a cost; booleans are refused), e.g.
    "`hits` must be a count (a number >= 0); got -1"."""
    message = f"`{name}` must be {what} (a number >= 0); got {_show(value)}"
    if isinstance(value, (bool, np.bool_)):
        raise InputError(message, argument=name, value=value)
    try:
        x = float(value)
    except (TypeError, ValueError) as exc:
        raise InputError(message, argument=name, value=value) from exc
    if not np.isfinite(x) or x < 0:
        raise InputError(message, argument=name, value=value)
    return x


def as_cycle(cycle: Any) -> float | None:
    """The Fourier period of the models' seasonal terms: None stays None, else a finite number of
    periods > 0, e.g. "`cycle` must be a positive number of periods; got 0"."""
    if cycle is None:
        return None
    message = f"`cycle` must be a positive number of periods; got {cycle!r}"
    try:
        x = float(cycle)
    except (TypeError, ValueError) as exc:
        raise InputError(message, argument="cycle", value=cycle) from exc
    if not (np.isfinite(x) and x > 0.0):
        raise InputError(message, argument="cycle", value=cycle)
    return x


def weekday_needs_dates(weekday: Any, dates: Any) -> None:
    """The weekday terms are made from the dates: asking for them without dates is an error."""
    if weekday and dates is None:
        raise InputError("`weekday` needs `dates`; got weekday=True with dates=None", argument="dates",
                         value=dates)


def last_observed(arr: np.ndarray) -> int:
    """Index of the last non-NaN value (-1 when all are NaN). Rows after it are future periods."""
    obs = np.flatnonzero(~np.isnan(arr))
    return int(obs[-1]) if obs.size else -1
