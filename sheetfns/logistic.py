"""Logistic-regression event forecasts: the logit fit, its design matrix and roll-forward refits.

Public API (DESIGN.md §4):

* :func:`fit` -- maximum-likelihood logit by Newton-Raphson (IRLS) in numpy, with estimates,
  standard errors (inverse Hessian) and log-likelihood to the precision of ``statsmodels`` Logit, and
  honest notes for data that do not allow a plain fit (separation, a constant target, missing values,
  collinear columns).
* :func:`forecast` -- the probability forecast of an event series, aligned to the target row, with a
  coefficient table and notes. Its design matrix is documented in :mod:`sheetfns._logit.design`; the
  estimation schemes (fixed, roll-forward, every N origins) in the docstring of :func:`forecast`.

References
----------
1. Greene, W. H. (2003). *Econometric Analysis* (5th ed.), ch. 21. Prentice Hall.
2. McCullagh, P., & Nelder, J. A. (1989). *Generalized Linear Models* (2nd ed.), §4.4. Chapman & Hall.
3. Albert, A., & Anderson, J. A. (1984). On the existence of maximum likelihood estimates in logistic
   regression models. *Biometrika*, 71(1), 1-10.
"""
from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from sheetfns._logit import design as _design
from sheetfns._logit import irls as _irls
from sheetfns.checks import as_events, as_int, last_observed
from sheetfns.errors import InputError

__all__ = ["LogitFit", "LogitForecast", "fit", "forecast", "coefficient_table", "RIDGE", "min_rows"]

#: Ridge penalty used when the likelihood has no finite maximum (separation): the objective becomes
#: ``llf - RIDGE / 2 * sum_j var(x_j) * b_j**2`` (constant unpenalised), i.e. 0.01 per squared
#: coefficient in standard-deviation units -- small enough to leave well-fitted terms nearly as they
#: are, large enough to keep separated terms finite.
RIDGE = 1e-2
#: Convergence of fit(): the largest change of a fitted linear predictor in the last Newton step. The
#: error left after that step is ~0.1 tol**2 and a free correction step squares it (see _irls).
_TOL = 1e-6


@dataclass(frozen=True)
class LogitFit:
    """Result of :func:`fit`. ``params`` and ``bse``: the constant first, then the columns of X.

    Attributes beyond the five of the contract: ``terms`` (labels), ``iterations`` (Newton steps),
    ``nobs`` (rows used), ``dropped_rows`` (rows with a NaN), ``penalty`` (the ridge factor used, 0
    for plain maximum likelihood), ``fallback`` (the majority share used instead of a logit when the
    target is constant, else None), ``cov`` (covariance matrix of the estimates, or None),
    ``add_constant``.
    """

    params: np.ndarray
    bse: np.ndarray
    llf: float
    converged: bool
    notes: tuple[str, ...] = ()
    terms: tuple[str, ...] = ()
    iterations: int = 0
    nobs: int = 0
    dropped_rows: int = 0
    penalty: float = 0.0
    fallback: float | None = None
    cov: np.ndarray | None = None
    add_constant: bool = True

    @property
    def z(self) -> np.ndarray:
        """Wald statistics ``params / bse``."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return self.params / self.bse

    @property
    def pvalues(self) -> np.ndarray:
        """Two-sided p-values of the Wald statistics under the standard normal: erfc(|z| / sqrt 2)."""
        return np.array([math.erfc(abs(z) / math.sqrt(2.0)) if np.isfinite(z) else np.nan
                         for z in self.z])

    @property
    def clean(self) -> bool:
        """Plain maximum likelihood: converged, no ridge, no dropped term, no fallback."""
        return (self.converged and self.penalty == 0.0 and self.fallback is None
                and not np.isnan(self.params).any())

    def predict(self, X: Any) -> np.ndarray:
        """Probabilities for the rows of ``X`` (same columns as given to :func:`fit`)."""
        x = _as_matrix(X, "X")
        if self.add_constant:
            x = np.column_stack([np.ones(x.shape[0]), x])
        return _predict(x, self.params, self.fallback)

    def table(self):
        """The coefficient table as a pandas DataFrame: term, estimate, std_error, z, p."""
        return coefficient_table(self)


@dataclass(frozen=True)
class LogitForecast:
    """Result of :func:`forecast`: ``prob`` aligned to the target row, the coefficient table, notes.

    Beyond the contract: ``fit`` (the :class:`LogitFit` behind ``coefficients``), ``future_fit`` (the
    fit on all observed rows used for future rows, or None), ``terms``, ``refits`` (number of
    estimations done for the validation / roll-forward rows).
    """

    prob: np.ndarray
    coefficients: Any
    notes: tuple[str, ...] = ()
    fit: LogitFit | None = None
    future_fit: LogitFit | None = None
    terms: tuple[str, ...] = ()
    refits: int = 0


def min_rows(n_terms: int) -> int:
    """Smallest estimation sample for a roll-forward fit: 10 rows per term, at least 30.

    Common practice (the "ten events per variable" rule of thumb; Peduzzi et al., 1996, *J. Clin.
    Epidemiol.* 49(12), 1373-1379, counts events; tocsin counts rows and lets the notes report
    separation when events are too few).
    """
    return max(30, 10 * n_terms)


# ---------------------------------------------------------------------------------------------------
# fit


def _as_matrix(X: Any, name: str) -> np.ndarray:
    if X is None:
        return np.empty((0, 0))
    try:
        x = np.asarray(X, dtype=float)
    except (TypeError, ValueError) as exc:
        raise InputError(f"`{name}` must be a numeric matrix (rows x columns); got "
                         f"{type(X).__name__}") from exc
    if x.ndim == 1:
        x = x[:, None]
    if x.ndim != 2:
        raise InputError(f"`{name}` must be two-dimensional (rows x columns); got shape {x.shape}")
    return x


def _predict(x: np.ndarray, params: np.ndarray, fallback: float | None) -> np.ndarray:
    if fallback is not None:
        out = np.full(x.shape[0], float(fallback))
        out[~np.isfinite(x).all(axis=1)] = np.nan
        return out
    return _irls.expit(x @ np.nan_to_num(params, nan=0.0))


def fit(X: Any, y: Any, add_constant: bool = True, *, start: Any = None,
        names: Sequence[str] | None = None, tol: float = _TOL, maxiter: int = 50) -> LogitFit:
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
    x = _as_matrix(X, "X")
    if x.size == 0 and x.shape[0] == 0:
        x = np.empty((yy.size, 0))
    if x.shape[0] != yy.size:
        raise InputError(f"`X` and `y` must have the same number of rows; `X` has {x.shape[0]}, "
                         f"`y` has {yy.size}")
    if names is None:
        cols = getattr(X, "columns", None)
        names = [str(c) for c in cols] if cols is not None else [f"x{j + 1}" for j in range(x.shape[1])]
    if len(names) != x.shape[1]:
        raise InputError(f"`names` must label the {x.shape[1]} columns of `X`; got {len(names)} names")
    terms = (["constant"] if add_constant else []) + list(names)
    if not terms:
        raise InputError("`X` has no column and `add_constant` is False: there is nothing to fit")
    ok = ~np.isnan(yy)
    if x.shape[1]:
        ok &= ~np.isnan(x).any(axis=1)
    dropped = int(yy.size - ok.sum())
    if not ok.any():
        raise InputError(f"`X` and `y` have no complete row: each of the {yy.size} rows has a missing "
                         f"value in `y` or in a column of `X`")
    if dropped:
        x, yy = x[ok], yy[ok]
    if add_constant:
        x = np.column_stack([np.ones(yy.size), x])
    b0 = None
    if start is not None:
        b0 = np.asarray(start, dtype=float).reshape(-1)
        if b0.size != len(terms):
            raise InputError(f"`start` must hold {len(terms)} values (one per term, constant first); "
                             f"got {b0.size}")
    notes = [f"dropped {dropped} of {dropped + yy.size} rows with a missing value in y or X"] if dropped \
        else []
    return fit_complete(x, yy, terms, add_constant=add_constant, start=b0, tol=tol, maxiter=maxiter,
                        notes=notes, dropped=dropped)


def fit_complete(x: np.ndarray, y: np.ndarray, terms: Sequence[str], *, add_constant: bool = True,
                 start: np.ndarray | None = None, tol: float = _TOL, maxiter: int = 50,
                 need_cov: bool = True, notes: list[str] | None = None, dropped: int = 0) -> LogitFit:
    """:func:`fit` on complete rows of a design matrix that already holds its constant column."""
    notes = list(notes or [])
    n, k = x.shape
    nan_k = np.full(k, np.nan)
    share = float(y.mean())
    if share in (0.0, 1.0):
        notes.append(f"every one of the {n} usable y is {int(share)}: a logit has no finite estimate; "
                     f"the forecast falls back to the majority share {share:g}")
        return LogitFit(nan_k, nan_k.copy(), 0.0, False, tuple(notes), tuple(terms), 0, n, dropped,
                        0.0, share, None, add_constant)
    keep = _irls.independent_columns(x)
    if not keep.all():
        for j in np.flatnonzero(~keep):
            notes.append(f"term {terms[j]!r} dropped: it is constant or a linear combination of earlier "
                         f"terms on the {n} rows used (estimate reported as NaN)")
        x = x[:, keep]
    if start is not None:
        b0 = np.nan_to_num(np.asarray(start, dtype=float)[keep], nan=0.0)
    else:
        b0 = _default_start(x, share, add_constant and bool(keep[0]))
    res = _irls.newton(x, y, b0, tol=tol, maxiter=maxiter, need_hessian=need_cov)
    penalty = 0.0
    if res.diverging:
        eta = x @ res.params
        perfect = int(np.sum(np.where(y > 0.5, eta, -eta) > _irls.SATURATED_ETA))
        pen = _ridge(x, add_constant and bool(keep[0]))
        res = _irls.newton(x, y, _default_start(x, share, add_constant and bool(keep[0])), penalty=pen,
                           tol=tol, maxiter=max(maxiter, 100), need_hessian=need_cov,
                           watch_separation=False)
        penalty = RIDGE
        notes.append(f"perfect or quasi-perfect separation: {perfect} of {n} rows are fitted with "
                     f"probability 0 or 1 while the estimates grow without bound (no finite maximum-"
                     f"likelihood estimate); estimates come from a ridge-penalised fit ({RIDGE:g} x "
                     f"variance x coefficient squared per term, constant unpenalised), shrunk towards "
                     f"0, with approximate standard errors")
    if not res.converged:
        notes.append(f"Newton-Raphson did not converge in {res.iterations} iterations; the estimates "
                     f"are the last iterate")
    params = nan_k.copy()
    params[keep] = res.params
    bse = nan_k.copy()
    cov = None
    if res.hessian is not None:
        c = _irls.inverse_pd(res.hessian)
        cov = np.full((k, k), np.nan)
        cov[np.ix_(keep, keep)] = c
        with np.errstate(invalid="ignore"):
            bse[keep] = np.sqrt(np.diag(c))
    return LogitFit(params, bse, res.llf, res.converged, tuple(notes), tuple(terms), res.iterations, n,
                    dropped, penalty, None, cov, add_constant)


def _default_start(x: np.ndarray, share: float, has_constant: bool) -> np.ndarray:
    b0 = np.zeros(x.shape[1])
    if has_constant:
        b0[0] = math.log(share / (1.0 - share))
    return b0


def _ridge(x: np.ndarray, has_constant: bool) -> np.ndarray:
    if has_constant:
        pen = RIDGE * x.var(axis=0)
        pen[0] = 0.0
    else:
        pen = RIDGE * np.mean(x * x, axis=0)
    return pen


def coefficient_table(res: LogitFit):
    """Coefficient table of a fit as a pandas DataFrame with columns term, estimate, std_error, z, p."""
    import pandas as pd

    return pd.DataFrame({"term": list(res.terms), "estimate": res.params, "std_error": res.bse,
                         "z": res.z, "p": res.pvalues})


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

    Refits after the first are warm-started Newton solves from the previous estimate (one or two
    steps each); a window that is separated, collinear or one-class goes through the full checks of
    :func:`fit`. Results agree with from-scratch fits to about 1e-10.
    """
    yy = as_events(y, "y")
    n = yy.size
    if n < 2:
        raise InputError(f"`y` must have at least 2 rows to forecast from its past; got {n}")
    last = last_observed(yy)
    if last < 0:
        raise InputError(f"`y` has no observed value: all {n} rows are blank (NaN)")
    horizon = as_int(horizon, "horizon", minimum=1)
    lags = as_int(lags, "lags", minimum=0)
    harmonics = as_int(harmonics, "harmonics", minimum=0)
    if horizon + max(lags, 1) - 1 > last:
        longest = last - max(lags, 1) + 1
        raise InputError(f"`horizon` is longer than the data: with {last + 1} rows up to the last "
                         f"observation and lags={lags} it can be at most {max(longest, 0)}; "
                         f"got {horizon}")
    if cycle is not None:
        try:
            cyc = float(cycle)
        except (TypeError, ValueError) as exc:
            raise InputError(f"`cycle` must be a positive number of periods; got {cycle!r}") from exc
        if not (math.isfinite(cyc) and cyc > 0.0):
            raise InputError(f"`cycle` must be a positive number of periods; got {cycle!r}")
        cycle = cyc
    if weekday and dates is None:
        raise InputError("`weekday` needs `dates`; got weekday=True with dates=None")
    every = parse_refit(refit)
    if train_size is not None:
        train_size = as_int(train_size, "train_size", minimum=1, maximum=n)
    design = _design.build(yy, values=values, predictors=predictors, known_ahead=known_ahead,
                           dates=dates, horizon=horizon, lags=lags, cycle=cycle, harmonics=harmonics,
                           weekday=bool(weekday), trend=bool(trend))
    from sheetfns._logit.rolling import run

    return run(yy, design, last=last, horizon=horizon, train_size=train_size, every=every)


def parse_refit(refit: Any) -> int:
    """``"fixed"`` -> 0, ``"roll"`` -> 1, ``"roll N"`` -> N (refit every N origins)."""
    expected = "`refit` must be 'fixed', 'roll' or 'roll N' (N a whole number >= 1)"
    if not isinstance(refit, str):
        raise InputError(f"{expected}; got {refit!r}")
    words = refit.strip().lower().split()
    if words == ["fixed"]:
        return 0
    if words == ["roll"]:
        return 1
    if len(words) == 2 and words[0] == "roll" and words[1].isdigit() and int(words[1]) >= 1:
        return int(words[1])
    raise InputError(f"{expected}; got {refit!r}")
