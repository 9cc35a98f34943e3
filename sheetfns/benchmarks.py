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

from sheetfns.checks import as_events, as_int, as_series
from sheetfns.errors import InputError

__all__ = ["naive", "majority_share", "majority_vote"]


def _prepare(y: Any, horizon: Any, train_size: Any, *, events: bool) -> tuple[np.ndarray, np.ndarray,
                                                                              int, int, int | None]:
    """Validate the common arguments; return (y, observed mask, L, horizon, train_size)."""
    arr = as_events(y, "y") if events else as_series(y, "y")
    n = arr.size
    if n < 2:
        raise InputError(f"`y` must have at least 2 rows; got {n}", argument="y", value=y)
    obs = ~np.isnan(arr)
    if not obs.any():
        raise InputError(f"`y` has no observed values (all {n} rows are blank)", argument="y")
    last = n - 1 - int(np.argmax(obs[::-1]))
    n_obs = last + 1
    h = as_int(horizon, "horizon", minimum=1)
    if h > n_obs:
        raise InputError(f"`horizon` must be at most the number of observed rows ({n_obs}); got {h}",
                         argument="horizon", value=horizon)
    size = as_int(train_size, "train_size", minimum=1, allow_none=True)
    if size is not None:
        if size > n_obs:
            raise InputError(f"`train_size` must be at most the number of observed rows ({n_obs}); "
                             f"got {size}", argument="train_size", value=train_size)
        if not obs[:size].any():
            raise InputError(f"`train_size` {size} leaves no observed training rows: rows 1 to {size} "
                             f"of `y` are blank", argument="train_size", value=train_size)
    return arr, obs, last, h, size


def _at_origin(per_origin: np.ndarray, h: int, last: int, size: int | None, fill: Any) -> np.ndarray:
    """Evaluate ``per_origin[o]`` at every target's origin o(t) (module docstring); ``fill`` where
    o(t) < 0. The origin is t - h except on two runs of rows where it is constant: the frozen
    validation rows N-1+h <= t <= L (o = N-1) and the future rows t > L + h (o = L). So the result is
    a shifted copy and two constant runs: slices, no gather."""
    n = per_origin.size
    out = np.empty_like(per_origin)
    out[:h] = fill
    out[h:] = per_origin[:n - h]
    if last + h + 1 < n:
        out[last + h + 1:] = per_origin[last]
    if size is not None and size - 1 + h <= last:
        out[size - 1 + h:last + 1] = per_origin[size - 1]
    return out


def _ffill(arr: np.ndarray, obs: np.ndarray) -> np.ndarray:
    """For each row p, the most recent observed value at or before p (NaN before the first)."""
    seen = np.cumsum(obs, dtype=_count_type(arr.size))
    return np.concatenate(([np.nan], arr[obs]))[seen]


def _count_type(n: int) -> type:
    return np.int32 if n < 2**31 - 1 else np.int64


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
    arr, obs, last, h, size = _prepare(y, horizon, train_size, events=False)
    period = size if size is not None else last + 1
    m = as_int(season, "season", minimum=1)
    if m > period:
        raise InputError(f"`season` must be at most the training period ({period} rows); got {m}",
                         argument="season", value=season)
    if m == 1:
        return _at_origin(_ffill(arr, obs), h, last, size, np.nan)
    # ffill within each season: row p -> the latest observed row <= p with the same p mod m
    n = arr.size
    rows = -(-n // m)
    grid = np.full(rows * m, -1, dtype=_count_type(n))
    grid[:n][obs] = np.flatnonzero(obs)
    seen = np.maximum.accumulate(grid.reshape(rows, m), axis=0).reshape(-1)[:n]
    same_season = np.where(seen >= 0, arr[np.maximum(seen, 0)], np.nan)
    # with origin t - h the season-mate is row t - k, k = m * ceil(h / m); rows past L carry the last
    # observed season forward, so the future rows need no special case
    k = m * -(-h // m)
    out = np.full(n, np.nan)
    if k < n:
        out[k:] = same_season[:n - k]
    if size is not None and size - 1 + h <= last:            # frozen origin N-1
        t = np.arange(size - 1 + h, last + 1)
        out[t] = same_season[(size - 1) - (size - 1 - t) % m]
    return out


def _window_counts(arr: np.ndarray, obs: np.ndarray, window: Any, h: int, last: int,
                   size: int | None) -> tuple[np.ndarray, np.ndarray]:
    """Events and observed rows among rows (o(t) - w, o(t)] (all rows <= o(t) when window is None)."""
    w = as_int(window, "window", minimum=1, allow_none=True)
    if w is not None and w > last + 1:
        raise InputError(f"`window` must be at most the number of observed rows ({last + 1}); got {w}",
                         argument="window", value=window)
    kind = _count_type(arr.size)
    ev = np.cumsum(arr == 1.0, dtype=kind)                    # NaN == 1.0 is False
    ob = np.cumsum(obs, dtype=kind)
    if w is not None and w < arr.size:
        ev[w:] -= ev[:-w].copy()
        ob[w:] -= ob[:-w].copy()
    return _at_origin(ev, h, last, size, 0), _at_origin(ob, h, last, size, 0)


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
    arr, obs, last, h, size = _prepare(y, horizon, train_size, events=True)
    ev, ob = _window_counts(arr, obs, window, h, last, size)
    with np.errstate(invalid="ignore", divide="ignore"):
        return ev / ob                                        # 0 / 0 -> NaN: no observed row


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
    arr, obs, last, h, size = _prepare(y, horizon, train_size, events=True)
    ev, ob = _window_counts(arr, obs, window, h, last, size)
    twice = 2 * ev
    vote = (twice > ob).astype(float)
    vote[ob == 0] = np.nan
    tie = (twice == ob) & (ob > 0)
    if tie.any():                          # the most recent observed value at or before the origin
        vote[tie] = _at_origin(_ffill(arr, obs), h, last, size, np.nan)[tie]
    return vote
