"""Event rates by period of year and year: the table behind the profile sheet, and its trend.

:func:`rate_table` counts events per period of the year (month, ISO week, weekday or quarter) and per
year (:func:`rates` gives the same numbers as arrays, without pandas, for the refresh);
:func:`seasonal_trend` (:meth:`Rates.trend`) fits a low-degree polynomial across the periods of the
year to the pooled shares, so a reader sees the seasonal shape without the year-to-year noise.

Blank events (missing values and the trailing future rows) are left out of both the events and the
rows counted; a period with no observed row in a year is NaN, never 0.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

from sheetfns.checks import as_events, as_int
from sheetfns.errors import InputError
from sheetfns.partition import as_dates

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["BY", "WEEKDAYS", "Rates", "rates", "rate_table", "seasonal_trend"]

BY = ("month", "week", "weekday", "quarter")
WEEKDAYS = ("Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun")
ALL_YEARS, EVENTS, ROWS = "all years", "events", "rows"


def _calendar(d: np.ndarray, by: str) -> tuple[np.ndarray, np.ndarray, list[Any]]:
    """Per row: 0-based period of year, calendar year (ISO year for weeks); and the period labels."""
    days = d.astype("datetime64[D]")
    weekday = (days.astype(np.int64) + 3) % 7              # 1970-01-01 was a Thursday; Monday = 0
    if by == "week":
        # ISO 8601: the week belongs to the year of its Thursday, week 1 holds the first Thursday
        thursday = days + (3 - weekday)
        year = thursday.astype("datetime64[Y]")
        period = (thursday - year.astype("datetime64[D]")).astype(np.int64) // 7
        return period, year.astype(np.int64) + 1970, list(range(1, 54))
    year = d.astype("datetime64[Y]").astype(np.int64) + 1970
    if by == "weekday":
        return weekday, year, list(WEEKDAYS)
    month = d.astype("datetime64[M]").astype(np.int64) % 12
    if by == "quarter":
        return month // 3, year, [1, 2, 3, 4]
    return month, year, list(range(1, 13))


@dataclass(frozen=True)
class Rates:
    """The numbers of a :func:`rate_table` as arrays (no pandas): ``labels`` of the periods of the
    year (rows), ``years`` (columns), ``share`` (periods x years; NaN where no row was observed),
    ``pooled`` (all events / all observed rows of each period), ``events`` and ``rows`` (pooled
    counts, int), ``by``."""

    by: str
    labels: tuple[Any, ...]
    years: tuple[int, ...]
    share: np.ndarray
    pooled: np.ndarray
    events: np.ndarray
    rows: np.ndarray

    def table(self) -> pd.DataFrame:
        """The table of :func:`rate_table`."""
        import pandas as pd  # lazy: pandas adds ~0.3 s to start-up (DEVELOPERS.md, The core)

        table = pd.DataFrame(self.share, index=pd.Index(list(self.labels), name=self.by),
                             columns=list(self.years))
        table[ALL_YEARS] = self.pooled
        table[EVENTS] = self.events
        table[ROWS] = self.rows
        return table

    def trend(self, degree: int = 2) -> tuple[np.ndarray, tuple[float, ...]]:
        """The values (one per period) and coefficients of :func:`seasonal_trend`."""
        return _trend(self.rows.astype(float), self.pooled.astype(float), degree)


def rates(dates: Any, events: Any, by: str = "month") -> Rates:
    """:func:`rate_table`'s numbers as :class:`Rates` (same arguments, same errors)."""
    if by not in BY:
        raise InputError(f"`by` must be one of {', '.join(repr(b) for b in BY)}; got {by!r}", argument="by",
                         value=by)
    d = as_dates(dates, "dates")
    ev = as_events(events, "events")
    if ev.size != d.size:
        raise InputError(f"`events` has {ev.size} rows but `dates` has {d.size}", argument="events",
                         value=events)
    obs = ~np.isnan(ev)
    if not obs.any():
        raise InputError(f"`events` has no observed values (all {ev.size} rows are blank)",
                         argument="events", value=events)
    period, year, labels = _calendar(d[obs], by)
    hit = ev[obs]
    first, last = int(year.min()), int(year.max())
    years = tuple(range(first, last + 1))
    n_p, n_y = len(labels), len(years)
    code = period * n_y + (year - first)
    rows = np.bincount(code, minlength=n_p * n_y).reshape(n_p, n_y)
    events_ = np.bincount(code, weights=hit, minlength=n_p * n_y).reshape(n_p, n_y)
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where(rows > 0, events_ / np.maximum(rows, 1), np.nan)
        tot_rows, tot_events = rows.sum(axis=1), events_.sum(axis=1)
        pooled = np.where(tot_rows > 0, tot_events / np.maximum(tot_rows, 1), np.nan)
    return Rates(by, tuple(labels), years, share, pooled, tot_events.round().astype(np.int64),
                 tot_rows.astype(np.int64))


def rate_table(dates: Any, events: Any, by: str = "month") -> pd.DataFrame:
    """Share of events per period of the year (rows) and year (columns).

    Parameters
    ----------
    dates : sequence of dates, length n
    events : sequence of 0/1/NaN, length n
    by : {'month', 'week', 'weekday', 'quarter'}
        Rows of the table: months 1-12, ISO weeks 1-53 (columns are then ISO years, so 2021-01-03
        counts in week 53 of 2020), weekdays Mon..Sun, or quarters 1-4. Every period appears, with
        or without data.

    Returns
    -------
    DataFrame
        Index named ``by``; one float column per year from the first to the last year with an
        observed row (int labels), holding events / observed rows of that period and year (NaN where
        none was observed); then ``'all years'`` (the pooled share: all events / all observed rows of
        the period), ``'events'`` and ``'rows'`` (the pooled counts, int).

    Examples
    --------
    >>> import datetime as dt
    >>> t = rate_table([dt.date(2023, 1, 5), dt.date(2023, 1, 6), dt.date(2024, 1, 5)], [1, 0, 1])
    >>> t.loc[1, [2023, 2024, "all years", "events", "rows"]].tolist()
    [0.5, 1.0, 0.6666666666666666, 2.0, 3.0]
    """
    return rates(dates, events, by).table()


def seasonal_trend(table: pd.DataFrame, degree: int = 2) -> pd.Series:
    """A polynomial trend across the periods of the year, fitted to a :func:`rate_table`.

    The pooled shares of the periods with data are fitted by weighted least squares on the period
    number x = 1, 2, ..., P (weights: the observed rows of each period)::

        minimise  sum_p rows_p * (share_p - (b0 + b1 x_p + ... + b_k x_p^k))^2

    which is the ordinary least-squares fit of the 0/1 events themselves on the polynomial in their
    period number. Periods without data get the fitted value too; the fit is not clipped to [0, 1].

    Parameters
    ----------
    table : DataFrame
        The result of :func:`rate_table`.
    degree : int, default 2
        Polynomial degree k >= 0; needs at least k + 1 periods with data.

    Returns
    -------
    Series named ``'trend'`` on the table's index; ``attrs['coefficients']`` holds
    ``(b0, b1, ..., bk)`` for x = period number (1-based).
    """
    import pandas as pd  # lazy: pandas adds ~0.3 s to start-up (DEVELOPERS.md, The core)

    if not isinstance(table, pd.DataFrame) or ALL_YEARS not in table or ROWS not in table:
        raise InputError(f"`table` must be a table made by rate_table (with the columns "
                         f"{ALL_YEARS!r} and {ROWS!r}); got {type(table).__name__}", argument="table",
                         value=table)
    values, coefs = _trend(table[ROWS].to_numpy(dtype=float), table[ALL_YEARS].to_numpy(dtype=float), degree)
    trend = pd.Series(values, index=table.index, name="trend")
    trend.attrs["coefficients"] = coefs
    return trend


def _trend(rows: np.ndarray, share: np.ndarray, degree: int) -> tuple[np.ndarray, tuple[float, ...]]:
    k = as_int(degree, "degree", minimum=0)
    use = rows > 0
    if use.sum() < k + 1:
        raise InputError(f"`degree` {k} needs at least {k + 1} periods with data; got {int(use.sum())}",
                         argument="degree", value=degree)
    x = np.arange(1, rows.size + 1, dtype=float)
    poly = np.polynomial.Polynomial.fit(x[use], share[use], k, w=np.sqrt(rows[use]))
    coefs = tuple(float(c) for c in poly.convert().coef)
    coefs += (0.0,) * (k + 1 - len(coefs))                   # convert() drops trailing zeros
    return poly(x), coefs
