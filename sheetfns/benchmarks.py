"""Benchmark forecasts of an event series: naive, seasonal naive, majority share and majority vote.

Every method returns an array aligned to the target row (DESIGN.md §3): ``f[t]`` is the forecast for
row t, made at the origin ``o(t)``, and uses only observed rows at or before ``o(t)``. With n rows,
L the last observed row, h the horizon and N the training size::

    roll-forward (train_size=None)   o(t) = min(t - h, L)
    fixed origin (train_size=N)      o(t) = min(t - h, N - 1)   for validation rows N <= t <= L
                                     o(t) = min(t - h, L)       for training rows and future rows

so the origin is frozen at the last training row but never later than t - h (no look-ahead), and the
trailing future rows t > L use every observed row. Rows whose origin precedes the first observation
(no information yet) are NaN. Interior blanks are skipped. All methods are O(n): cumulative maxima and
cumulative sums, no Python loop per row.
"""
from __future__ import annotations

from typing import Any

import numpy as np

from sheetfns.checks import as_events, as_int, as_series, last_observed
from sheetfns.errors import InputError

__all__ = ["naive", "majority_share", "majority_vote"]


def _prepare(y: Any, horizon: Any, train_size: Any, *, events: bool) -> tuple[np.ndarray, int, int,
                                                                              int | None, np.ndarray]:
    """Validate the common arguments; return (y, L, horizon, train_size, origin per row)."""
    arr = as_events(y, "y") if events else as_series(y, "y")
    n = arr.size
    if n < 2:
        raise InputError(f"`y` must have at least 2 rows; got {n}")
    last = last_observed(arr)
    if last < 0:
        raise InputError(f"`y` has no observed values (all {n} rows are blank)")
    n_obs = last + 1
    h = as_int(horizon, "horizon", minimum=1)
    if h > n_obs:
        raise InputError(f"`horizon` must be at most the number of observed rows ({n_obs}); got {h}")
    size = as_int(train_size, "train_size", minimum=1, allow_none=True)
    if size is not None:
        if size > n_obs:
            raise InputError(f"`train_size` must be at most the number of observed rows ({n_obs}); "
                             f"got {size}")
        if np.isnan(arr[:size]).all():
            raise InputError(f"`train_size` {size} leaves no observed training rows: rows 1 to {size} "
                             f"of `y` are blank")
    t = np.arange(n)
    origin = np.minimum(t - h, last)
    if size is not None:
        valid = slice(size, n_obs)
        origin[valid] = np.minimum(origin[valid], size - 1)
    return arr, last, h, size, origin


def _last_seen(obs: np.ndarray) -> np.ndarray:
    """For each row p, the most recent observed row at or before p (-1 if none)."""
    return np.maximum.accumulate(np.where(obs, np.arange(obs.size), -1))


def naive(y: Any, horizon: int = 1, season: int = 1, train_size: int | None = None) -> np.ndarray:
    """Naive and seasonal naive forecasts.

    Seasonal naive with period m (Hyndman & Athanasopoulos 2021, §5.2), adapted to blanks::

        f[t] = y[s],  s = the most recent observed row with s <= o(t) and s = t (mod m)

    With m = 1 this is the naive forecast: the most recent observed value at or before the origin.
    Without blanks and with roll-forward origins it is the textbook ``y[t - m * ceil(h / m)]``, i.e.
    ``yhat[T+h|T] = y[T+h-m(k+1)]`` with ``k = floor((h-1)/m)`` and ``T = t - h``. Future rows repeat
    the last observation (m = 1) or the last observed season.

    Parameters
    ----------
    y : sequence of float, length n
        The series (usually a 0/1 event series; any numbers work). Blanks are NaN; trailing blanks
        are future rows.
    horizon : int, default 1
        Steps from origin to target, 1 <= horizon <= number of observed rows.
    season : int, default 1
        Seasonal period m, at most the training period (``train_size``, or all observed rows).
    train_size : int or None
        None: roll-forward. N: the first N rows are training rows and the origin of every validation
        row is frozen at row N-1 (see the module docstring).

    Returns
    -------
    ndarray of float, length n (NaN where no observed value qualifies)

    References
    ----------
    1. Hyndman, R. J., & Athanasopoulos, G. (2021). *Forecasting: Principles and Practice* (3rd ed.),
       §5.2 Some simple forecasting methods. OTexts.

    Examples
    --------
    >>> naive([1, 0, None, 1, None], horizon=1)
    array([nan,  1.,  0.,  0.,  1.])
    >>> naive([1, 0, 0, 1, 1, 0, None, None], season=3)
    array([nan, nan, nan,  1.,  0.,  0.,  1.,  1.])
    """
    arr, last, h, size, origin = _prepare(y, horizon, train_size, events=False)
    period = size if size is not None else last + 1
    m = as_int(season, "season", minimum=1)
    if m > period:
        raise InputError(f"`season` must be at most the training period ({period} rows); got {m}")
    n = arr.size
    obs = ~np.isnan(arr)
    if m == 1:
        seen = _last_seen(obs)
        src = np.where(origin >= 0, seen[np.maximum(origin, 0)], -1)
    else:
        rows = -(-n // m)
        grid = np.full(rows * m, -1, dtype=np.int64)
        grid[:n] = np.where(obs, np.arange(n), -1)
        seen = np.maximum.accumulate(grid.reshape(rows, m), axis=0).reshape(-1)
        t = np.arange(n)
        p = origin - (origin - t) % m            # the latest row <= origin in the target's season
        src = np.where(p >= 0, seen[np.maximum(p, 0)], -1)
    return np.where(src >= 0, arr[np.maximum(src, 0)], np.nan)


def _window_counts(arr: np.ndarray, origin: np.ndarray, window: Any, last: int) -> tuple[np.ndarray,
                                                                                          np.ndarray]:
    """Events and observed rows among rows (o - w, o] (all rows <= o when window is None)."""
    w = as_int(window, "window", minimum=1, allow_none=True)
    if w is not None and w > last + 1:
        raise InputError(f"`window` must be at most the number of observed rows ({last + 1}); got {w}")
    obs = ~np.isnan(arr)
    ev_cs = np.concatenate(([0], np.cumsum(obs & (arr == 1.0), dtype=np.int64)))
    ob_cs = np.concatenate(([0], np.cumsum(obs, dtype=np.int64)))
    hi = np.maximum(origin + 1, 0)               # rows < hi; hi = 0 means no row
    lo = np.zeros_like(hi) if w is None else np.maximum(hi - w, 0)
    return ev_cs[hi] - ev_cs[lo], ob_cs[hi] - ob_cs[lo]


def majority_share(y: Any, window: int | None = None, train_size: int | None = None,
                   horizon: int = 1) -> np.ndarray:
    """Share of events among the observed rows of the window ending at the origin.

    .. math:: p[t] = \\frac{\\sum_{s \\in W(t)} y_s}{\\#\\{s \\in W(t): y_s \\text{ observed}\\}},
              \\quad W(t) = \\{s: o(t) - w < s \\le o(t)\\}

    (every row at or before o(t) when ``window`` is None: an expanding mean). This is the majority
    method's probability forecast, the usual no-skill reference ("climatology") of the Brier skill
    score (common practice).

    Parameters
    ----------
    y : sequence of 0/1/NaN, length n
    window : int or None
        Rows (periods, blanks included) in a sliding window; None expands from the first row.
        Early windows are shorter (rows before the data do not exist). 1 <= window <= observed rows.
    train_size, horizon
        As for :func:`naive`.

    Returns
    -------
    ndarray of float, length n; NaN where the window holds no observed row.

    Examples
    --------
    >>> majority_share([1, 0, 0, 1, None, None]).round(3)
    array([  nan, 1.   , 0.5  , 0.333, 0.5  , 0.5  ])
    """
    arr, last, _, _, origin = _prepare(y, horizon, train_size, events=True)
    ev, ob = _window_counts(arr, origin, window, last)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(ob > 0, ev / np.maximum(ob, 1), np.nan)


def majority_vote(y: Any, window: int | None = None, train_size: int | None = None,
                  horizon: int = 1) -> np.ndarray:
    """Majority vote: 1 where the share of events in the window is above 0.5, 0 below, and on an
    exact tie the most recent observed value at or before the origin (DESIGN.md §3).

    Parameters
    ----------
    y, window, train_size, horizon
        As for :func:`majority_share`.

    Returns
    -------
    ndarray of float (0.0, 1.0 or NaN), length n

    Notes
    -----
    The vote hides how close the share was to 0.5: 1,300 events in 3,653 training days give a share
    of 1300 / 3653 = 0.356 and a fixed vote of 0 for every validation day. Show the share beside it.

    Examples
    --------
    >>> majority_vote([1, 0, 0, 1, None, None])
    array([nan,  1.,  0.,  0.,  1.,  1.])
    """
    arr, last, _, _, origin = _prepare(y, horizon, train_size, events=True)
    ev, ob = _window_counts(arr, origin, window, last)
    seen = _last_seen(~np.isnan(arr))
    recent = arr[np.maximum(seen[np.maximum(origin, 0)], 0)]    # only read where ob > 0
    vote = np.where(2 * ev > ob, 1.0, np.where(2 * ev < ob, 0.0, recent))
    return np.where(ob > 0, vote, np.nan)
