"""What the logistic model returns: :class:`LogitFit` (one estimation), :class:`LogitForecast` (a
forecast series with its coefficient table) and the coefficient table itself.

Internal to :mod:`sheetfns.logistic`, which re-exports the public names; import them from there.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property
from typing import Any

import numpy as np

from sheetfns._logit import irls as _irls
from sheetfns.errors import InputError


@dataclass(frozen=True)
class LogitFit:
    """Result of :func:`sheetfns.logistic.fit`. ``params`` and ``bse``: the constant first, then the
    columns of X.

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
        """Probabilities for the rows of ``X`` (same columns as given to :func:`sheetfns.logistic.fit`)."""
        x = as_matrix(X, "X")
        if self.add_constant:
            x = np.column_stack([np.ones(x.shape[0]), x])
        return predict(x, self.params, self.fallback)

    def table(self):
        """The coefficient table as a pandas DataFrame: term, estimate, std_error, z, p."""
        return coefficient_table(self)


@dataclass(frozen=True)
class LogitForecast:
    """Result of :func:`sheetfns.logistic.forecast`: ``prob`` aligned to the target row, the
    coefficient table, notes.

    ``coefficients`` (a pandas DataFrame) is made from ``table_fit`` when first asked for, so that a
    caller who writes the numbers elsewhere (the refresh) never imports pandas.

    Beyond the contract: ``table_fit`` (the :class:`LogitFit` behind ``coefficients``; NaN estimates
    when no fit was made), ``fit`` (the same fit, or None when there was none), ``future_fit`` (the
    fit on all observed rows used for future rows, or None), ``terms``, ``refits`` (number of
    estimations done for the validation / roll-forward rows).
    """

    prob: np.ndarray
    table_fit: LogitFit
    notes: tuple[str, ...] = ()
    fit: LogitFit | None = None
    future_fit: LogitFit | None = None
    terms: tuple[str, ...] = ()
    refits: int = 0

    @cached_property
    def coefficients(self):
        """The coefficient table (DataFrame: term, estimate, std_error, z, p) of ``table_fit``."""
        return coefficient_table(self.table_fit)


def coefficient_table(res: LogitFit):
    """Coefficient table of a fit as a pandas DataFrame with columns term, estimate, std_error, z, p."""
    import pandas as pd  # lazy: pandas adds ~1.5 s to start-up (DEVELOPERS.md, The core)

    return pd.DataFrame({"term": list(res.terms), "estimate": res.params, "std_error": res.bse,
                         "z": res.z, "p": res.pvalues})


def as_matrix(X: Any, name: str) -> np.ndarray:
    """``X`` as a 2-D float array (a 1-D input is one column; None is an empty matrix)."""
    if X is None:
        return np.empty((0, 0))
    try:
        x = np.asarray(X, dtype=float)
    except (TypeError, ValueError) as exc:
        raise InputError(f"`{name}` must be a numeric matrix (rows x columns); got "
                         f"{type(X).__name__}", argument=name, value=X) from exc
    if x.ndim == 1:
        x = x[:, None]
    if x.ndim != 2:
        raise InputError(f"`{name}` must be two-dimensional (rows x columns); got shape {x.shape}",
                         argument=name, value=X)
    return x


def predict(x: np.ndarray, params: np.ndarray, fallback: float | None) -> np.ndarray:
    """Probabilities for the rows of a design matrix that holds its constant column; the majority
    share ``fallback`` where the fit fell back to it; NaN for incomplete rows."""
    if fallback is not None:
        out = np.full(x.shape[0], float(fallback))
        out[~np.isfinite(x).all(axis=1)] = np.nan
        return out
    return _irls.expit(x @ np.nan_to_num(params, nan=0.0))
