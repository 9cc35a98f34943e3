"""Design matrix of the logistic event forecast: one row per target period, one column per term.

Internal to :mod:`sheetfns.logistic`. Row ``t`` of the matrix holds what the forecast *for* period
``t`` may use (DESIGN.md §3: made at origin ``t - horizon``, nothing later):

========================  ========================================================  ==============
term                      value in row t                                            label
========================  ========================================================  ==============
event lag k (1..lags)     ``y[t - horizon - k + 1]`` (the first lag is y[t-horizon]) ``event t-j``
numeric value             ``values[t - horizon]``                                   ``value t-h``
predictor ``name``        ``predictors[name][t - horizon]``                         ``name``
known-ahead ``name``      ``known_ahead[name][t]`` (not lagged: known in advance)   ``name``
Fourier k (1..harmonics)  ``sin(2 pi k tau_t / cycle)``, ``cos(...)``               ``sin k``, ``cos k``
weekday                   1 when date t falls on that weekday (one day left out)    ``Tuesday``...
trend                     ``tau_t``                                                 ``trend``
========================  ========================================================  ==============

The time axis ``tau`` (Fourier terms and trend) is the row index 0, 1, 2, ... without dates. With
dates it counts periods from the first date in the unit of the data's typical spacing (the median gap
between consecutive dates), so that the usual cycles mean a year and calendar gaps are respected:

* daily data (gap ~1 day): days since the first date (``cycle=365.25``, or 7 for a week);
* weekly data (gap ~7 days): days / 7 (``cycle=52.18``);
* monthly data (gap 28-31 days): calendar month count, 12 * years + months (``cycle=12``);
* quarterly data (gap 89-92 days): calendar month count / 3 (``cycle=4``);
* yearly data (gap 365-366 days): calendar year count;
* any other spacing: days / median gap (so the cycle is counted in rows of the usual length).

Deterministic terms (Fourier, weekday, trend) and known-ahead predictors exist in future rows too;
lagged terms exist up to ``horizon`` rows past the end of their input. Where an input is missing the
cell is NaN and the row is skipped in estimation and gets no forecast.
"""
from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from sheetfns.checks import as_series
from sheetfns.errors import InputError

_WEEKDAYS = ("Monday", "Tuesday", "Wednesday", "Thursday", "Friday", "Saturday", "Sunday")


@dataclass
class Design:
    """The matrix (constant column first), the term labels and what the caller should be told."""

    x: np.ndarray
    terms: list[str]
    notes: list[str] = field(default_factory=list)


@dataclass
class TimeAxis:
    """Calendar facts read from ``dates``: tau in data units, weekday 0-6 (NaN for a blank date)."""

    tau: np.ndarray
    weekday: np.ndarray | None
    unit: str


def shift(a: np.ndarray, k: int) -> np.ndarray:
    """``out[t] = a[t - k]`` (NaN where t - k < 0); k >= 0. The series may be extended past its end."""
    n = a.size
    out = np.full(n, np.nan)
    if k < n:
        out[k:] = a[: n - k]
    return out


def time_axis(dates: Any, n: int) -> TimeAxis:
    """Read ``dates`` (datetimes, date strings, or spreadsheet serial day numbers) into a time axis."""
    if hasattr(dates, "to_numpy"):
        raw = dates.to_numpy()
    elif isinstance(dates, np.ndarray) and dates.dtype.kind == "M":
        raw = dates                     # datetime64 as it comes (an object array would go via pandas)
    else:
        raw = np.asarray(dates, dtype=object)
    if raw.ndim != 1:
        raw = raw.reshape(-1) if raw.ndim == 2 and 1 in raw.shape else raw
    if raw.ndim != 1:
        raise InputError(f"`dates` must be one-dimensional; got shape {raw.shape}", argument="dates",
                         value=dates)
    if raw.size != n:
        raise InputError(f"`dates` must have one date per row of `y`; got {raw.size} dates for {n} rows",
                         argument="dates", value=dates)
    if raw.dtype.kind == "M":  # datetime64 (the refresh's date columns): numpy alone, no pandas
        days, months, weekday, valid = _calendar(raw)
    else:
        days, months, weekday, valid = _calendar_of_any(raw, dates)
    gaps = np.diff(days[valid])
    # the median gap: np.median's first call imports numpy.ma (~25 ms of a small command's ~0.4 s)
    gap = float(np.sort(gaps)[[(gaps.size - 1) // 2, gaps.size // 2]].mean()) if gaps.size else 1.0
    if 0.5 < gap < 1.5:
        tau, unit = days, "days since the first date"
    elif 6.0 <= gap <= 8.0:
        tau, unit = days / 7.0, "weeks since the first date"
    elif 27.0 <= gap <= 32.0:
        tau, unit = months, "calendar months since the first date"
    elif 88.0 <= gap <= 93.0:
        tau, unit = months / 3.0, "calendar quarters since the first date"
    elif 360.0 <= gap <= 370.0:
        tau, unit = months / 12.0, "calendar years since the first date"
    elif gap > 0.0:
        tau, unit = days / gap, f"periods of {gap:g} days since the first date"
    else:
        raise InputError("`dates` must advance: the median gap between consecutive dates is 0 days",
                         argument="dates", value=dates)
    return TimeAxis(tau, weekday, unit)


def _calendar(raw: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Days and calendar months since the first date, weekday (Monday 0) and the rows with a date, of
    a ``datetime64`` array (NaN where NaT); the same numbers as pandas' DatetimeIndex gives."""
    valid = np.flatnonzero(~np.isnat(raw))
    if valid.size == 0:
        raise InputError("`dates` holds no date (every entry is blank)", argument="dates", value=raw)
    first = raw[valid[0]]
    nat = np.isnat(raw)
    days = np.where(nat, np.nan, (raw - first) / np.timedelta64(1, "D"))
    month = raw.astype("datetime64[M]").astype(np.int64)
    months = np.where(nat, np.nan, (month - month[valid[0]]).astype(float))
    day = raw.astype("datetime64[D]").astype(np.int64)
    weekday = np.where(nat, np.nan, ((day + 3) % 7).astype(float))  # 1970-01-01 was a Thursday (3)
    return days, months, weekday, valid


def _calendar_of_any(raw: np.ndarray, dates: Any) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """:func:`_calendar` of dates in any form pandas reads: datetimes, date text, serial day numbers."""
    import pandas as pd  # lazy: pandas adds ~1.5 s to start-up (DEVELOPERS.md, The core)

    try:
        if raw.dtype.kind in "fiu" or (raw.dtype == object and all(
                isinstance(v, (int, float, np.number)) and not isinstance(v, bool)
                for v in raw if v is not None)):
            # spreadsheet serial day numbers (1900 date system: day 1 = 1900-01-01, origin 1899-12-30)
            idx = pd.DatetimeIndex(pd.to_datetime(np.asarray(
                [np.nan if v is None else v for v in raw], dtype=float), unit="D", origin="1899-12-30"))
        else:
            idx = pd.DatetimeIndex(pd.to_datetime(list(raw)))
    except (TypeError, ValueError, OverflowError) as exc:
        for i, v in enumerate(raw):
            try:
                pd.to_datetime([v])
            except (TypeError, ValueError, OverflowError):
                raise InputError(f"`dates` must hold dates; got {v!r} at position {i + 1}",
                                 argument="dates", value=v, location=i + 1) from exc
        raise InputError(f"`dates` must hold dates; {exc}", argument="dates", value=dates) from exc
    if idx.tz is not None:
        idx = idx.tz_localize(None)
    valid = np.flatnonzero(~np.asarray(idx.isna()))
    if valid.size == 0:
        raise InputError("`dates` holds no date (every entry is blank)", argument="dates", value=dates)
    first = idx[valid[0]]
    days = np.asarray((idx - first) / pd.Timedelta(days=1), dtype=float)
    months = (np.asarray(idx.year, dtype=float) - first.year) * 12.0 + (
        np.asarray(idx.month, dtype=float) - first.month)
    weekday = np.asarray(idx.day_of_week, dtype=float)
    return days, months, weekday, valid


def _named(mapping: Mapping[str, Any] | None, arg: str, n: int) -> list[tuple[str, np.ndarray]]:
    if mapping is None:
        return []
    if not isinstance(mapping, Mapping):
        raise InputError(f"`{arg}` must be a mapping of name -> 1-D array; got {type(mapping).__name__}",
                         argument=arg, value=mapping)
    out = []
    for name, col in mapping.items():
        label = f"{arg}[{name!r}]"
        arr = as_series(col, label)
        if arr.size != n:
            raise InputError(f"`{label}` must have one value per row of `y`; got {arr.size} values "
                             f"for {n} rows", argument=label, value=col)
        out.append((str(name), arr))
    return out


def build(y: np.ndarray, *, values: Any = None, predictors: Mapping[str, Any] | None = None,
          known_ahead: Mapping[str, Any] | None = None, dates: Any = None, horizon: int = 1,
          lags: int = 1, cycle: float | None = None, harmonics: int = 2, weekday: bool = False,
          trend: bool = False) -> Design:
    """Assemble the design matrix (see the module docstring). Arguments are already validated
    scalars; arrays are checked here for shape and length."""
    n = y.size
    cols: list[np.ndarray] = []
    terms: list[str] = []
    notes: list[str] = []
    for k in range(1, lags + 1):
        back = horizon + k - 1
        cols.append(shift(y, back))
        terms.append(f"event t-{back}")
    if values is not None:
        v = as_series(values, "values")
        if v.size != n:
            raise InputError(f"`values` must have one value per row of `y`; got {v.size} values for "
                             f"{n} rows", argument="values", value=values)
        cols.append(shift(v, horizon))
        terms.append(f"value t-{horizon}")
    for name, arr in _named(predictors, "predictors", n):
        cols.append(shift(arr, horizon))
        terms.append(name)
    for name, arr in _named(known_ahead, "known_ahead", n):
        cols.append(arr)
        terms.append(name)
    axis = time_axis(dates, n) if dates is not None else None
    tau = axis.tau if axis is not None else np.arange(n, dtype=float)
    if cycle is not None and harmonics > 0:
        for k in range(1, harmonics + 1):
            angle = (2.0 * np.pi * k / cycle) * tau
            cols += [np.sin(angle), np.cos(angle)]
            terms += [f"sin {k}", f"cos {k}"]
        where = axis.unit if axis is not None else "rows since the first row"
        notes.append(f"Fourier terms: {harmonics} harmonic(s) of a cycle of {cycle:g}, time counted in "
                     f"{where}")
    if weekday:
        assert axis is not None and axis.weekday is not None
        present = [d for d in range(7) if np.any(axis.weekday == d)]
        for d in present[1:]:
            col = (axis.weekday == d).astype(float)
            col[np.isnan(axis.weekday)] = np.nan
            cols.append(col)
            terms.append(_WEEKDAYS[d])
        if present:
            notes.append(f"weekday terms compare with {_WEEKDAYS[present[0]]} (the first day of the "
                         f"week, Monday to Sunday, that the data hold)")
    if trend:
        cols.append(tau.copy())
        terms.append("trend")
    seen: set[str] = set()
    for t in terms:
        if t in seen or t == "constant":
            arg = ("known_ahead" if t in map(str, known_ahead or {}) else
                   "predictors" if t in map(str, predictors or {}) else None)
            raise InputError(f"term names must be unique and not 'constant'; got {t!r} twice or "
                             f"reserved (rename the predictor)", argument=arg, value=t)
        seen.add(t)
    x = np.empty((n, 1 + len(cols)))
    x[:, 0] = 1.0
    for j, col in enumerate(cols, start=1):
        x[:, j] = col
    return Design(x, ["constant"] + terms, notes)
