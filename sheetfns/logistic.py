"""Logistic-regression event forecasts: the logit fit, its design matrix and roll-forward refits.

Public API (DESIGN.md §4):

* :func:`fit` -- maximum-likelihood logit by Newton-Raphson (IRLS) in numpy, with estimates,
  standard errors (inverse Hessian) and log-likelihood to the precision of ``statsmodels`` Logit, and
  honest notes for data that do not allow a plain fit (separation, a constant target, missing values,
  collinear columns).
* :func:`forecast` -- the probability forecast of an event series, aligned to the target row, with a
  coefficient table and notes. Its design matrix is documented in :mod:`sheetfns._logit.design`; the
  estimation schemes (fixed, roll-forward, every N origins) in the docstring of :func:`forecast`.

The work is done in :mod:`sheetfns._logit` (``results``: the result types; ``estimate``: one fit with
its checks; ``irls``: the Newton solver; ``design``: the design matrix; ``rolling``: the refit
schemes); this module checks the arguments, calls them and re-exports the result types. Imports run
one way: this module -> ``_logit`` modules, never back.

References
----------
1. Greene, W. H. (2003). *Econometric Analysis* (5th ed.), ch. 21. Prentice Hall.
2. McCullagh, P., & Nelder, J. A. (1989). *Generalized Linear Models* (2nd ed.), §4.4. Chapman & Hall.
3. Albert, A., & Anderson, J. A. (1984). On the existence of maximum likelihood estimates in logistic
   regression models. *Biometrika*, 71(1), 1-10.
"""
from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from sheetfns._logit import design as _design
from sheetfns._logit.estimate import RIDGE, TOL, fit_complete
from sheetfns._logit.plan import min_rows
from sheetfns._logit.results import LogitFit, LogitForecast, as_matrix, coefficient_table
from sheetfns._logit.rolling import run
from sheetfns.checks import as_cycle, as_events, as_int, last_observed, weekday_needs_dates
from sheetfns.errors import InputError

__all__ = ["LogitFit", "LogitForecast", "fit", "forecast", "coefficient_table", "RIDGE", "min_rows"]


def fit(X: Any, y: Any, add_constant: bool = True, *, start: Any = None,
        names: Sequence[str] | None = None, tol: float = TOL, maxiter: int = 50) -> LogitFit:
    """Maximum-likelihood logit of a 0/1 target on the columns of ``X``.

    The model is :math:`P(y_i = 1) = 1 / (1 + e^{-x_i' b})`; the estimate maximises the
    log-likelihood :math:`\\sum_i y_i x_i' b - \\log(1 + e^{x_i' b})` by Newton-Raphson (IRLS) with
    step-halving, solved by a Jacobi-scaled Cholesky factorisation. Standard errors are the square
    roots of the diagonal of the inverse Hessian :math:`(X' W X)^{-1}` at the estimate.

    Parameters
    ----------
    X : array_like, shape (n, k) or (n,)
        Explanatory columns (a DataFrame's column names label the terms). ``None`` or zero columns
        with ``add_constant=True`` fits the constant alone.
    y : array_like, shape (n,)
        0/1 target (NaN allowed: such rows are dropped).
    add_constant : bool, default True
        Put a constant column first.
    start : array_like, shape (k + add_constant,), optional
        Warm start (e.g. the estimate of a neighbouring sample); NaN entries count as 0.
    names : sequence of str, optional
        Labels of the columns of X (default: DataFrame column names, else ``x1``, ``x2``, ...).
    tol : float, default 1e-6
        Stop when the last Newton step changed no fitted linear predictor by ``tol`` or more (then
        one correction step from the gradient and Hessian already at hand, so the estimate is exact
        to about ``(0.1 tol**2)**2``).
    maxiter : int, default 50
        Most Newton steps.

    Returns
    -------
    LogitFit
        ``params`` and ``bse`` (constant first), ``llf``, ``converged``, ``notes`` and more.

    Notes
    -----
    What the notes report, and what happens:

    * rows with NaN in ``y`` or any column of ``X`` are dropped (the note gives the count);
    * a column that is a linear combination of earlier columns (the constant included) is dropped;
      its estimate and standard error are NaN;
    * a constant target (every usable ``y`` 0, or every one 1) has no finite logit; the model falls
      back to the majority share (``fallback``), estimates NaN, ``llf`` 0;
    * perfect or quasi-perfect separation (Albert & Anderson, 1984): Newton's linear predictors keep
      growing while some fitted probabilities reach 0 or 1; the estimate then maximises the
      likelihood with the ridge penalty :data:`RIDGE` (constant unpenalised), which has a finite
      maximum. Its standard errors come from the penalised Hessian and are approximate.

    Examples
    --------
    >>> import numpy as np
    >>> res = fit(np.array([0., 1., 2., 3., 4., 5.]), np.array([0, 0, 1, 0, 1, 1]))  # statsmodels agrees
    >>> [round(float(v), 4) for v in res.params]
    [-3.0351, 1.214]
    """
    yy = as_events(y, "y", allow_empty=True)
    x = as_matrix(X, "X")
    if x.size == 0 and x.shape[0] == 0:
        x = np.empty((yy.size, 0))
    if x.shape[0] != yy.size:
        raise InputError(f"`X` and `y` must have the same number of rows; `X` has {x.shape[0]}, "
                         f"`y` has {yy.size}", argument="X", value=X)
    if names is None:
        cols = getattr(X, "columns", None)
        names = [str(c) for c in cols] if cols is not None else [f"x{j + 1}" for j in range(x.shape[1])]
    if len(names) != x.shape[1]:
        raise InputError(f"`names` must label the {x.shape[1]} columns of `X`; got {len(names)} names",
                         argument="names", value=names)
    terms = (["constant"] if add_constant else []) + list(names)
    if not terms:
        raise InputError("`X` has no column and `add_constant` is False: there is nothing to fit",
                         argument="X", value=X)
    ok = ~np.isnan(yy)
    if x.shape[1]:
        ok &= ~np.isnan(x).any(axis=1)
    dropped = int(yy.size - ok.sum())
    if not ok.any():
        raise InputError(f"`X` and `y` have no complete row: each of the {yy.size} rows has a missing "
                         f"value in `y` or in a column of `X`", argument="X", value=X)
    if dropped:
        x, yy = x[ok], yy[ok]
    if add_constant:
        x = np.column_stack([np.ones(yy.size), x])
    b0 = None
    if start is not None:
        b0 = np.asarray(start, dtype=float).reshape(-1)
        if b0.size != len(terms):
            raise InputError(f"`start` must hold {len(terms)} values (one per term, constant first); "
                             f"got {b0.size}", argument="start", value=start)
    notes = [f"dropped {dropped} of {dropped + yy.size} rows with a missing value in y or X"] if dropped \
        else []
    return fit_complete(x, yy, terms, add_constant=add_constant, start=b0, tol=tol, maxiter=maxiter,
                        notes=notes, dropped=dropped)


# ---------------------------------------------------------------------------------------------------
# forecast


def forecast(y: Any, *, values: Any = None, predictors: Mapping[str, Any] | None = None,
             known_ahead: Mapping[str, Any] | None = None, dates: Any = None,
             train_size: int | None = None, horizon: int = 1, lags: int = 1,
             cycle: float | None = None, harmonics: int = 2, weekday: bool = False,
             trend: bool = False, refit: str = "fixed") -> LogitForecast:
    """Logistic probability forecast of an event series, aligned to the target row.

    ``prob[t]`` is the forecast for period t made at origin t - horizon: its design row (see
    :mod:`sheetfns._logit.design`) and its coefficients use only observations at or before t - horizon
    (``known_ahead`` values at t excepted: that is what they are).

    Parameters
    ----------
    y : array_like, shape (n,)
        Event series (0, 1, NaN). Trailing NaN rows are future periods.
    values : array_like, shape (n,), optional
        The numeric series the events came from; its value at t - horizon becomes a term.
    predictors : mapping name -> array_like (n,), optional
        Extra predictors, read at t - horizon; names label the coefficient table.
    known_ahead : mapping name -> array_like (n,), optional
        Predictors known in advance (holidays, timetables), read at t itself; their future values
        let the model fill future rows.
    dates : sequence of dates, shape (n,), optional
        The time axis for the Fourier terms and the trend, needed for ``weekday``.
    train_size : int, optional
        None: roll-forward everywhere. N: the first N rows are the training period.
    horizon : int, default 1
        Periods between origin and target.
    lags : int, default 1
        Event lags y[t-horizon], ..., y[t-horizon-lags+1]; 0 for none.
    cycle : float, optional
        Period of the Fourier terms in the units of :mod:`sheetfns._logit.design` (365.25 for a year of
        daily rows); None for no Fourier terms.
    harmonics : int, default 2
        Number of sine/cosine pairs.
    weekday, trend : bool, default False
        Weekday indicators (needs ``dates``) and a linear trend.
    refit : {"fixed", "roll", "roll N"}, default "fixed"
        Estimation scheme with a training period, see Notes.

    Returns
    -------
    LogitForecast
        ``prob`` (length n), ``coefficients`` (DataFrame: term, estimate, std_error, z, p) and
        ``notes``.

    Notes
    -----
    Estimation samples. Row s is usable when y[s] is observed and its design row is complete; a fit
    "at origin o" uses every usable row s <= o (an expanding window).

    * ``train_size=None`` (roll-forward everywhere): each row t gets the fit at origin t - horizon,
      refitted at every origin (``refit="roll N"``: every N origins, the rows in between keep the last
      fit). Rows whose origin has fewer than :func:`min_rows` usable rows get NaN (a note says which).
    * ``train_size=N``, ``refit="fixed"``: one fit at origin N - horizon, the first validation origin
      (for horizon 1 exactly the training rows 0..N-1; for a longer horizon the last horizon - 1
      training rows are not yet observed there, and using them would look ahead); it serves every
      validation row t >= N. ``"roll"`` refits at every validation origin t - horizon, each Newton
      solve warm-started from the previous estimate; ``"roll N"`` every N origins. Training rows get
      NaN: their only honest forecast would need a fit that had not seen them.
    * Future rows (after the last observed event): one fit on all usable rows, filling rows up to
      ``horizon`` past the last observation where the design row is complete; later rows are NaN.

    ``coefficients`` is the table of the fit behind the last observed row's forecast (the fixed fit
    under ``"fixed"``); with no such row, the future fit's.

    Refits after the first solve a local model of the likelihood kept up to date row by row, with a
    pass over the window only when the model's error bound calls for one (see
    ``sheetfns/_logit/rolling.py``); a window that is separated, collinear or one-class goes through
    the full checks of :func:`fit`. Probabilities agree with from-scratch fits to about 1e-9.
    """
    yy = as_events(y, "y")
    n = yy.size
    if n < 2:
        raise InputError(f"`y` must have at least 2 rows to forecast from its past; got {n}", argument="y",
                         value=y)
    last = last_observed(yy)
    if last < 0:
        raise InputError(f"`y` has no observed value: all {n} rows are blank (NaN)", argument="y", value=y)
    horizon = as_int(horizon, "horizon", minimum=1)
    lags = as_int(lags, "lags", minimum=0)
    harmonics = as_int(harmonics, "harmonics", minimum=0)
    if horizon + max(lags, 1) - 1 > last:
        longest = last - max(lags, 1) + 1
        raise InputError(f"`horizon` is longer than the data: with {last + 1} rows up to the last "
                         f"observation and lags={lags} it can be at most {max(longest, 0)}; "
                         f"got {horizon}", argument="horizon", value=horizon)
    cycle = as_cycle(cycle)
    weekday_needs_dates(weekday, dates)
    every = parse_refit(refit)
    if train_size is not None:
        train_size = as_int(train_size, "train_size", minimum=1, maximum=n)
    design = _design.build(yy, values=values, predictors=predictors, known_ahead=known_ahead,
                           dates=dates, horizon=horizon, lags=lags, cycle=cycle, harmonics=harmonics,
                           weekday=bool(weekday), trend=bool(trend))
    return run(yy, design, last=last, horizon=horizon, train_size=train_size, every=every)


def parse_refit(refit: Any) -> int:
    """``"fixed"`` -> 0, ``"roll"`` -> 1, ``"roll N"`` -> N (refit every N origins)."""
    expected = "`refit` must be 'fixed', 'roll' or 'roll N' (N a whole number >= 1)"
    if not isinstance(refit, str):
        raise InputError(f"{expected}; got {refit!r}", argument="refit", value=refit)
    words = refit.strip().lower().split()
    if words == ["fixed"]:
        return 0
    if words == ["roll"]:
        return 1
    if len(words) == 2 and words[0] == "roll" and words[1].isdigit() and int(words[1]) >= 1:
        return int(words[1])
    raise InputError(f"{expected}; got {refit!r}", argument="refit", value=refit)
