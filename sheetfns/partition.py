"""Training / validation split of a series, by a count of periods or by a first validation date.

Also the calendar facts other parts need: the frequency of a date column (:func:`infer_frequency`),
the periods that follow it (:func:`next_periods`), its time order (:func:`time_order`: oldest first,
or newest first as exports often are), and the job table's defaults derived from the frequency
(:func:`default_season`, :func:`default_cycle`, DESIGN.md §7). Dates are checked here once: unsorted or
duplicate dates are errors that name the first offending rows (1-based positions in the series), gaps
in a regular series are reported, not refused (for business days a missing weekday is a holiday).
The calendar arithmetic itself is :mod:`sheetfns._calendar`.

A series of n rows is cut into three consecutive periods::

    rows 0 .. train_size-1                 training
    rows train_size .. n_obs-1             validation  (valid_size rows)
    rows n_obs .. n-1                      future      (trailing rows after the last observation)

where n_obs is the position after the last observed event (all n rows when no events are given).
"""
from __future__ import annotations

import datetime as _dt
import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from sheetfns._calendar import FREQUENCIES, UNITS, detect, following, missing_business_days, steps
from sheetfns.checks import as_events, as_int, last_observed
from sheetfns.errors import InputError, PartitionError

__all__ = ["FREQUENCIES", "UNITS", "Gap", "Split", "split", "as_dates", "infer_frequency", "next_periods",
           "time_order", "default_season", "default_cycle"]

_SEASON = {"daily": 7, "business": 5, "weekly": 52, "monthly": 12, "quarterly": 4}
# Business days count calendar days on the logistic model's time axis (their median step is one
# day), so a year is 365.25 of them as for daily data.
_CYCLE = {"daily": 365.25, "business": 365.25, "weekly": 52.18, "monthly": 12.0}
_IRREGULAR = ("the dates are irregular (not hourly, daily, business days, weekly, monthly, quarterly or "
              "yearly)")
DEFAULT_VALIDATION_SHARE = 0.2


@dataclass(frozen=True)
class Gap:
    """A hole in a regular date series: ``missing`` periods lie between rows ``row - 1`` and ``row``
    (1-based positions), dated ``before`` and ``after``."""

    row: int
    before: Any
    after: Any
    missing: int


@dataclass(frozen=True)
class Split:
    """The periods of a series. Sizes are row counts; positions are 0-based; dates are
    ``datetime.datetime`` values (None when the index is a row count).

    Attributes
    ----------
    train_size, valid_size, future_size : int
        Rows in the training period, the validation period, and after the last observation.
    n : int
        All rows (``train_size + valid_size + future_size``).
    first_valid_date, last_observed_date : datetime.datetime or None
    frequency : str or None
        One of :data:`FREQUENCIES` or None (see :func:`infer_frequency`).
    gaps : tuple of Gap
        Holes in a regular date series (reported, not an error); for business days, the weekdays
        without a row (holidays).
    train_events, valid_events, train_observed, valid_observed : int or None
        Events and observed (non-blank) rows per period, when ``events`` was given.
    notes : tuple of str
        Plain-words remarks (gaps, irregular dates, a validation date that falls between rows).
    """

    train_size: int
    valid_size: int
    future_size: int
    n: int
    first_valid_date: Any = None
    last_observed_date: Any = None
    frequency: str | None = None
    gaps: tuple[Gap, ...] = ()
    train_events: int | None = None
    valid_events: int | None = None
    train_observed: int | None = None
    valid_observed: int | None = None
    notes: tuple[str, ...] = ()

    @property
    def train(self) -> slice:
        return slice(0, self.train_size)

    @property
    def valid(self) -> slice:
        return slice(self.train_size, self.train_size + self.valid_size)

    @property
    def future(self) -> slice:
        return slice(self.train_size + self.valid_size, self.n)


# ---------------------------------------------------------------- dates


def _show_date(d: np.datetime64) -> str:
    s = str(np.datetime_as_string(d, unit="s"))
    return s[:10] if s.endswith("T00:00:00") else s.replace("T", " ")


def _is_date_scalar(v: Any) -> bool:
    return isinstance(v, (_dt.date, np.datetime64))


def as_dates(values: Any, name: str = "dates") -> np.ndarray:
    """Return ``values`` as a 1-D ``datetime64[us]`` array; every row must hold a date.

    Accepts ``datetime.date`` / ``datetime.datetime`` / ``numpy.datetime64`` / pandas ``Timestamp``
    values (time-zone-aware ones are read as their wall-clock time), a datetime64 array, or a pandas
    DatetimeIndex / Series. A blank or a non-date value is an error naming the row.
    """
    if hasattr(values, "dtype") and getattr(values.dtype, "kind", "") == "M":
        if getattr(values.dtype, "tz", None) is not None:       # tz-aware pandas data
            values = values.dt.tz_localize(None) if hasattr(values, "dt") else values.tz_localize(None)
        arr = np.asarray(values).astype("datetime64[us]")
    else:
        if hasattr(values, "tolist"):
            values = values.tolist()
        try:
            seq = list(values)
        except TypeError as exc:
            raise InputError(f"`{name}` must be a sequence of dates; got {values!r}", argument=name,
                             value=values) from exc
        if seq and isinstance(seq[0], (list, tuple)):      # a one-column spreadsheet range
            seq = [v[0] if isinstance(v, (list, tuple)) and len(v) == 1 else v for v in seq]
        types = set(map(type, seq))
        if not all(issubclass(t, (_dt.date, np.datetime64)) for t in types):
            i = next(i for i, v in enumerate(seq) if not _is_date_scalar(v))
            v = seq[i]
            blank = v is None or (isinstance(v, float) and math.isnan(v)) or repr(v) == "NaT"
            what = "a blank" if blank else repr(v)
            raise InputError(f"`{name}` must hold a date in every row; got {what} in row {i + 1}",
                             argument=name, value=v, location=i + 1)
        import pandas as pd  # lazy: pandas adds ~1.5 s to start-up (DEVELOPERS.md, The core)
        try:
            idx = pd.DatetimeIndex(seq)
        except (TypeError, ValueError):      # zone-aware values of several zones
            try:
                idx = pd.DatetimeIndex([pd.Timestamp(v).tz_localize(None) for v in seq])
            except (TypeError, ValueError) as exc:
                raise InputError(f"`{name}` must hold dates; {exc}", argument=name, value=values) from exc
        if idx.tz is not None:               # keep the wall-clock time
            idx = idx.tz_localize(None)
        arr = idx.to_numpy().astype("datetime64[us]")
    if arr.ndim == 2 and 1 in arr.shape:
        arr = arr.reshape(-1)
    if arr.ndim != 1:
        raise InputError(f"`{name}` must be one-dimensional; got shape {arr.shape}", argument=name,
                         value=values)
    nat = np.isnat(arr)
    if nat.any():
        i = int(np.flatnonzero(nat)[0])
        raise InputError(f"`{name}` must hold a date in every row; got a blank in row {i + 1}",
                         argument=name, value=None, location=i + 1)
    return arr


_SORT_HINT = "sort the rows oldest first"


def _order(d: np.ndarray, name: str) -> int:
    """+1 for strictly increasing dates, -1 for strictly decreasing ones, else a PartitionError that
    names the first pair of rows out of that order."""
    if d.size < 2:
        return 1
    step = np.diff(d)
    zero = np.timedelta64(0, "us")
    sign = 1 if step[0] > zero else -1
    bad = np.flatnonzero(step <= zero if sign > 0 else step >= zero)
    if not bad.size:
        return sign
    i = int(bad[0]) + 1
    if d[i] == d[i - 1]:
        raise PartitionError(f"`{name}` has duplicate dates: rows {i} and {i + 1} are both "
                             f"{_show_date(d[i])}", argument=name, value=d[i], location=i + 1)
    way = "earlier" if sign > 0 else "later"
    first = "oldest" if sign > 0 else "newest"
    raise PartitionError(f"`{name}` dates must run in one direction (they start {first} first); row "
                         f"{i + 1} ({_show_date(d[i])}) is {way} than row {i} ({_show_date(d[i - 1])}): "
                         f"{_SORT_HINT}", argument=name, value=d[i], location=i + 1)


def _check_order(d: np.ndarray, name: str) -> None:
    if _order(d, name) < 0:
        raise PartitionError(f"`{name}` dates must be in increasing order; they run newest first (row 2, "
                             f"{_show_date(d[1])}, is earlier than row 1, {_show_date(d[0])}): "
                             f"{_SORT_HINT}", argument=name, value=d[1], location=2)


def time_order(dates: Any) -> int:
    """The time order of a date column: +1 when the dates strictly increase (oldest first), -1 when
    they strictly decrease (newest first, as many exports list them; DESIGN.md §3 reads those in time
    order).

    Raises
    ------
    PartitionError
        Any other order: duplicate dates, or dates that turn back. ``location`` is the 1-based row of
        the second date of the first pair at fault; the message names both rows and says to sort the
        rows oldest first.

    Examples
    --------
    >>> import datetime as dt
    >>> time_order([dt.date(2024, 3, 3), dt.date(2024, 3, 2), dt.date(2024, 3, 1)])
    -1
    """
    return _order(as_dates(dates), "dates")


def infer_frequency(dates: Any) -> str | None:
    """The frequency of a date column: one of :data:`FREQUENCIES` (``'hourly'``, ``'daily'``,
    ``'business'``, ``'weekly'``, ``'monthly'``, ``'quarterly'``, ``'yearly'``), or None when the dates
    are irregular or of another frequency.

    A series has a frequency F when every step between consecutive dates is a whole number of F's
    periods and at least half of the steps are exactly one period; gaps are allowed. Business days are
    dates on Monday to Friday only (one time of day) with at least one step across a weekend: the
    weekend is no gap, a missing weekday is a holiday. Monthly, quarterly and yearly dates must fall on
    the same day of the month (clamped to the month's length, or all on month ends) at the same time
    of day. Fewer than two dates, or dates not strictly increasing, give None.

    Examples
    --------
    >>> import datetime as dt
    >>> infer_frequency([dt.date(2024, 1, 31), dt.date(2024, 2, 29), dt.date(2024, 3, 31)])
    'monthly'
    >>> infer_frequency([dt.date(2024, 3, 7), dt.date(2024, 3, 8), dt.date(2024, 3, 11)])
    'business'
    """
    return detect(as_dates(dates))


def next_periods(dates: Any, freq: str | None, k: int) -> np.ndarray:
    """The ``k`` periods that follow the last date at the data's own frequency, as ``datetime64[us]``.

    Hourly, daily and weekly periods add 1 hour, 1 day or 7 days; business days skip the weekend
    (after a Friday comes the Monday); months, quarters and years keep the data's day of the month,
    clamped to the month's length (or the month end when every date is a month end), and the time of
    day.

    Parameters
    ----------
    dates : sequence of dates
        Strictly increasing.
    freq : str or None
        One of :data:`FREQUENCIES`; None: :func:`infer_frequency` of ``dates``.
    k : int
        How many periods (>= 0).

    Raises
    ------
    PartitionError
        The dates are unsorted, or have no frequency (irregular): their next period is unknown.

    Examples
    --------
    >>> import datetime as dt
    >>> [str(d)[:10] for d in next_periods([dt.date(2024, 3, 7), dt.date(2024, 3, 8)], "business", 2)]
    ['2024-03-11', '2024-03-12']
    >>> [str(d)[:10] for d in next_periods([dt.date(2024, 1, 31), dt.date(2024, 2, 29)], None, 2)]
    ['2024-03-31', '2024-04-30']
    """
    d = as_dates(dates)
    k = as_int(k, "k", minimum=0)
    if d.size == 0:
        raise InputError("`dates` must hold at least one date", argument="dates", value=dates)
    _check_order(d, "dates")
    if freq is None:
        freq = detect(d)
        if freq is None:
            raise PartitionError(f"`dates` have no regular frequency, so their next period is unknown: "
                                 f"{_IRREGULAR}", argument="dates", value=None)
    if freq not in FREQUENCIES:
        raise InputError(f"`freq` must be one of {', '.join(FREQUENCIES)}; got {freq!r}", argument="freq",
                         value=freq)
    return following(d, freq, k)


def default_season(freq: str | None) -> int:
    """The seasonal-naive period for a frequency (DESIGN.md §3, §7): 7 daily, 5 business days, 52
    weekly, 12 monthly, 4 quarterly, 1 otherwise."""
    return _SEASON.get(freq or "", 1)


def default_cycle(freq: str | None) -> float | None:
    """The Fourier period of the logistic model for a frequency (DESIGN.md §7): 365.25 daily and for
    business days (the model's time axis counts their calendar days), 52.18 weekly, 12 monthly, None
    otherwise."""
    return _CYCLE.get(freq or "")


def _moment(d: np.datetime64) -> _dt.datetime:
    """A datetime64 as a ``datetime.datetime`` (microseconds; no pandas on the refresh path)."""
    return d.astype("datetime64[us]").item()


def _gaps(d: np.ndarray, freq: str | None) -> tuple[Gap, ...]:
    if freq is None or d.size < 2:
        return ()
    step = steps(d, freq)
    where = np.flatnonzero(step > 1)
    return tuple(Gap(row=int(i) + 2, before=_moment(d[i]), after=_moment(d[i + 1]),
                     missing=int(step[i]) - 1) for i in where)


def _gap_note(d: np.ndarray, freq: str, gaps: tuple[Gap, ...]) -> str:
    """One sentence on the gaps: for business days the count of missing weekdays (holidays) and the
    first few; otherwise the count and the first gap."""
    missing = sum(x.missing for x in gaps)
    if freq == "business":
        total, first = missing_business_days(d)
        shown = ", ".join(str(x) for x in first) + (", ..." if total > first.size else "")
        return (f"{total} business day{'s' * (total > 1)} (Monday to Friday) between the first and the "
                f"last date {'have' if total > 1 else 'has'} no row, read as "
                f"holiday{'s' * (total > 1)}: {shown}")
    g = gaps[0]
    unit = UNITS[freq]
    return (f"{len(gaps)} gap{'s' * (len(gaps) > 1)} in the {freq} dates ({missing} missing "
            f"{unit}{'s' * (missing > 1)}); the first between row {g.row - 1} "
            f"({_show_date(d[g.row - 2])}) and row {g.row} ({_show_date(d[g.row - 1])})")


# ---------------------------------------------------------------- the split


def _validation_date(validation: Any) -> np.datetime64 | None:
    if isinstance(validation, str):
        try:
            return np.datetime64(_dt.datetime.fromisoformat(validation.strip()), "us")
        except ValueError:
            raise InputError(f"`validation` must be a number of periods or a date; got "
                             f"{validation!r}", argument="validation", value=validation) from None
    if _is_date_scalar(validation):
        if isinstance(validation, _dt.datetime) and validation.tzinfo is not None:
            validation = validation.replace(tzinfo=None)
        d = np.datetime64(validation, "us")
        return None if np.isnat(d) else d
    return None


def _validation_count(validation: Any) -> int:
    if isinstance(validation, (bool, np.bool_)):
        raise InputError(f"`validation` must be a number of periods or a date; got {validation!r}",
                         argument="validation", value=validation)
    try:
        f = float(validation)
    except (TypeError, ValueError):
        raise InputError(f"`validation` must be a number of periods or a date; got "
                         f"{validation!r}", argument="validation", value=validation) from None
    if not math.isfinite(f) or f != int(f):
        raise InputError(f"`validation` must be a whole number of periods or a date; got {validation!r}",
                         argument="validation", value=validation)
    return int(f)


def split(index: Any, validation: Any = None, *, events: Any = None) -> Split:
    """Cut a series into training, validation and future periods.

    Parameters
    ----------
    index : int or sequence of dates
        The number of rows, or one date per row (strictly increasing).
    validation : int, date or None
        An int k: the last k observed periods (rows up to the last observation, interior blanks
        included) are the validation period. A date (``datetime.date``, ``datetime``,
        ``numpy.datetime64``, pandas ``Timestamp`` or ISO text ``'2010-01-03'``): the first validation
        date; rows dated before it are training rows. None: the last 20% of the observed rows,
        rounded half up, at least one.
    events : sequence of 0/1/NaN, optional
        The event series. Its trailing blank rows are the future period, and the events and observed
        rows of each period are counted.

    Returns
    -------
    Split

    Raises
    ------
    PartitionError
        Unsorted or duplicate dates; a validation that leaves no training rows or no validation rows.
        The message names the first offending rows (1-based) and their dates.
    InputError
        A malformed argument (a row without a date, an events column of another length, ...).

    Examples
    --------
    >>> s = split(10, 3, events=[0, 1, 0, 0, 1, 1, 0, 1, None, None])
    >>> (s.train_size, s.valid_size, s.future_size, s.train_events, s.valid_events)
    (5, 3, 2, 2, 2)
    """
    dates = None
    if isinstance(index, (int, np.integer)) and not isinstance(index, (bool, np.bool_)):
        n = int(index)
        if n < 0:
            raise InputError(f"`index` must be a number of rows >= 0 or a sequence of dates; got {n}",
                             argument="index", value=index)
    else:
        dates = as_dates(index, "index")
        n = dates.size
        _check_order(dates, "index")
    if n < 2:
        raise InputError(f"`index` must have at least 2 rows to split; got {n}", argument="index",
                         value=index)
    ev = None
    n_obs = n
    if events is not None:
        ev = as_events(events, "events", allow_empty=True)
        if ev.size != n:
            raise InputError(f"`events` has {ev.size} rows but `index` has {n}", argument="events",
                             value=events)
        n_obs = last_observed(ev) + 1
        if n_obs == 0:
            raise InputError(f"`events` has no observed values (all {n} rows are blank)",
                             argument="events", value=events)

    notes: list[str] = []
    vdate = _validation_date(validation)
    if vdate is not None:
        if dates is None:
            raise InputError(f"`validation` is a date ({_show_date(vdate)}) but `index` is a row count; "
                             f"give one date per row to split by date", argument="validation",
                             value=validation)
        train = int(np.searchsorted(dates, vdate, side="left"))
        if train == 0:
            raise PartitionError(f"`validation` {_show_date(vdate)} leaves no training rows: the first "
                                 f"date is {_show_date(dates[0])} (row 1)", argument="validation",
                                 value=validation)
        if train >= n_obs:
            raise PartitionError(f"`validation` {_show_date(vdate)} leaves no validation rows: the last "
                                 f"observed date is {_show_date(dates[n_obs - 1])} (row {n_obs})",
                                 argument="validation", value=validation)
        if dates[train] != vdate:
            notes.append(f"no row is dated {_show_date(vdate)}; validation starts at the next date, "
                         f"{_show_date(dates[train])} (row {train + 1})")
    else:
        if validation is None:
            k = max(1, math.floor(DEFAULT_VALIDATION_SHARE * n_obs + 0.5))
        else:
            k = _validation_count(validation)
        if k < 1:
            raise PartitionError(f"`validation` {k} leaves no validation rows: give at least 1 period",
                                 argument="validation", value=validation)
        if k >= n_obs:
            raise PartitionError(f"`validation` {k} leaves no training rows: there are {n_obs} observed "
                                 f"rows (rows 1 to {n_obs})", argument="validation", value=validation)
        train = n_obs - k

    freq = gaps = None
    first_date = last_date = None
    if dates is not None:
        freq = detect(dates)
        gaps = _gaps(dates, freq)
        first_date, last_date = _moment(dates[train]), _moment(dates[n_obs - 1])
        if freq is None:
            notes.append(_IRREGULAR)
        elif gaps:
            notes.append(_gap_note(dates, freq, gaps))
    counts: dict[str, int | None] = dict.fromkeys(
        ("train_events", "valid_events", "train_observed", "valid_observed"))
    if ev is not None:
        tr, va = ev[:train], ev[train:n_obs]
        if np.isnan(tr).all():
            shown = _show_date(vdate) if vdate is not None else validation
            raise PartitionError(f"`validation` {shown} leaves no observed training rows: rows 1 "
                                 f"to {train} of `events` are blank", argument="validation", value=validation)
        counts = {"train_events": int(np.nansum(tr)), "valid_events": int(np.nansum(va)),
                  "train_observed": int(np.count_nonzero(~np.isnan(tr))),
                  "valid_observed": int(np.count_nonzero(~np.isnan(va)))}
    return Split(train_size=train, valid_size=n_obs - train, future_size=n - n_obs, n=n,
                 first_valid_date=first_date, last_observed_date=last_date,
                 frequency=freq, gaps=gaps or (), notes=tuple(notes), **counts)
