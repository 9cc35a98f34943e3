"""The two-state chain: the chance of an event given whether there was one ``horizon`` periods back.

For a 0/1 series the two-state Markov chain is the classic benchmark between persistence (the naive
forecast) and the base rate (the majority share): Kedem & Fokianos (2002, ch. 2). At horizon h the
forecast for period t, made at origin t - h, is the share of events among the earlier periods t'
whose state h periods before was the same as the state at t - h (DESIGN.md §11):

.. math:: p[t] = \\frac{\\#\\{t' \\le e(t): y_{t'-h} = s, y_{t'} = 1\\}}
                      {\\#\\{t' \\le e(t): y_{t'-h} = s, y_{t'} \\text{ observed}\\}},
          \\qquad s = y_{t-h}

counting only the pairs (t' - h, t') observed by the estimation origin e(t) <= t - h: the h-step
transition shares estimated directly, not the one-step chain raised to the power h (which would
assume the series is a first-order chain). A state that no counted pair starts from gets the
majority share of the rows observed by e(t) (:func:`sheetfns.benchmarks.majority_share`).

References
----------
1. Kedem, B., & Fokianos, K. (2002). *Regression Models for Time Series Analysis*, ch. 2
   (binary time series). Wiley.
2. Wilks, D. S. (2011). *Statistical Methods in the Atmospheric Sciences* (3rd ed.), §9.2 Markov
   chains. Academic Press.
"""
from __future__ import annotations

from typing import Any

import numpy as np

from sheetfns.benchmarks import majority_share
from sheetfns.checks import as_events, as_int, last_observed
from sheetfns.errors import InputError
from sheetfns.logistic import parse_refit

__all__ = ["forecast", "origins"]


def origins(n: int, last: int, first: int, *, horizon: int, train_size: int | None,
            every: int) -> np.ndarray:
    """The estimation origin e(t) of every row (-1 where the row gets no forecast).

    ``first`` is the first observed row, ``last`` the last; ``every`` the refit interval of
    :func:`sheetfns.logistic.parse_refit` (0 fixed, 1 every origin, N every N origins).
    """
    t = np.arange(n)
    e = t - horizon                                       # roll-forward at every origin
    start = train_size if train_size is not None else first + horizon
    if train_size is None:
        every = max(every, 1)
    valid = (t >= start) & (t <= last)
    if every == 0:
        e[valid] = start - horizon                        # fixed: the first validation origin
    elif every > 1:
        e[valid] = start + ((t[valid] - start) // every) * every - horizon
    e[t > last] = last                                    # future rows: every observed row
    e[t > last + horizon] = -1                            # beyond the horizon: no state to read
    return e


def forecast(y: Any, *, train_size: int | None = None, horizon: int = 1,
             refit: str = "fixed") -> np.ndarray:
    """Two-state chain probability forecast of an event series, aligned to the target row.

    Parameters
    ----------
    y : array_like, shape (n,)
        Event series (0, 1, NaN). Trailing NaN rows are future periods.
    train_size : int, optional
        None: roll-forward everywhere. N: the first N rows are the training period.
    horizon : int, default 1
        Periods between origin and target; the state is read at t - horizon.
    refit : {"fixed", "roll", "roll N"}, default "fixed"
        Which pairs count for a validation row (with ``train_size``), as the logistic model's
        estimation samples: ``"fixed"`` the pairs observed at the first validation origin
        N - horizon (the training pairs at horizon 1); ``"roll"`` the pairs observed at each
        origin t - horizon; ``"roll N"`` those observed at the origin of every N-th validation row,
        kept for the rows in between. Without ``train_size`` ``"fixed"`` means ``"roll"``.

    Returns
    -------
    ndarray of float, length n
        NaN where no state is known at or before t - horizon, or where no row is observed by the
        origin.

    Notes
    -----
    * A pair (t' - h, t') counts when both of its rows are observed; pairs with a blank end are
      skipped. The state for the forecast is y[t - h]; where that row is blank, the most recent
      observed value before it (as the naive forecast reads it, DESIGN.md §3).
    * Training rows (and, without ``train_size``, every row) get the roll-forward forecast from the
      pairs observed at t - h, as the benchmark methods do: it looks at nothing after its origin.
    * Future rows up to ``horizon`` past the last observation (whose state is observed data) use every
      observed pair; later rows are NaN.

    Examples
    --------
    >>> forecast([0, 0, 1, 1, 0, 1, 1, 1, None]).round(3).tolist()
    [nan, 0.0, 0.0, 0.333, 1.0, 0.5, 0.5, 0.667, 0.75]
    """
    yy = as_events(y, "y")
    n = yy.size
    if n < 2:
        raise InputError(f"`y` must have at least 2 rows to forecast from its past; got {n}")
    last = last_observed(yy)
    if last < 0:
        raise InputError(f"`y` has no observed value: all {n} rows are blank (NaN)")
    h = as_int(horizon, "horizon", minimum=1)
    if h > last:
        raise InputError(f"`horizon` must be smaller than the number of rows up to the last observation "
                         f"({last + 1}), so that one pair (t - horizon, t) exists; got {h}")
    every = parse_refit(refit)
    size = as_int(train_size, "train_size", minimum=1, maximum=n, allow_none=True)
    obs = ~np.isnan(yy)
    first = int(np.argmax(obs))
    # pairs (t' - h, t') by their end t': counts per starting state, cumulated over t'
    start = np.r_[np.full(h, np.nan), yy[:-h]]
    pair = obs & ~np.isnan(start)
    from0, from1 = pair & (start == 0.0), pair & (start == 1.0)
    n0, n1 = np.cumsum(from0), np.cumsum(from1)
    e0, e1 = np.cumsum(from0 & (yy == 1.0)), np.cumsum(from1 & (yy == 1.0))
    # the state at t - h: the most recent observed value at or before it
    seen = np.maximum.accumulate(np.where(obs, np.arange(n), -1))
    state_row = np.arange(n) - h
    has_state = state_row >= 0
    state_idx = np.where(has_state, seen[np.maximum(state_row, 0)], -1)
    state = np.where(state_idx >= 0, yy[np.maximum(state_idx, 0)], np.nan)
    e = origins(n, last, first, horizon=h, train_size=size, every=every)
    ok = (e >= 0) & ~np.isnan(state)
    ei = np.maximum(e, 0)
    pairs = np.where(state == 1.0, n1[ei], n0[ei])
    events = np.where(state == 1.0, e1[ei], e0[ei])
    # the majority share of the rows observed by e: share[e + 1] of the series with one row appended
    share = majority_share(np.r_[yy, np.nan], horizon=1)[ei + 1]
    with np.errstate(invalid="ignore", divide="ignore"):
        out = np.where(pairs > 0, events / np.maximum(pairs, 1), share)
    out[~ok] = np.nan
    return out
