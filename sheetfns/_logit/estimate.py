"""One estimation of the logit on complete rows: the checks of :func:`sheetfns.logistic.fit` (a
constant target, collinear terms, separation) around the Newton solver of :mod:`sheetfns._logit.irls`.

Internal to :mod:`sheetfns.logistic` (which re-exports ``RIDGE``) and used by the refit schemes of
:mod:`sheetfns._logit.rolling`.
"""
from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from sheetfns._logit import irls as _irls
from sheetfns._logit.results import LogitFit

#: Ridge penalty used when the likelihood has no finite maximum (separation): the objective becomes
#: ``llf - RIDGE / 2 * sum_j var(x_j) * b_j**2`` (constant unpenalised), i.e. 0.01 per squared
#: coefficient in standard-deviation units -- small enough to leave well-fitted terms nearly as they
#: are, large enough to keep separated terms finite.
RIDGE = 1e-2
#: Convergence of a fit: the largest change of a fitted linear predictor in the last Newton step. The
#: error left after that step is ~0.1 tol**2 and a free correction step squares it (see _irls).
TOL = 1e-6


def fit_complete(x: np.ndarray, y: np.ndarray, terms: Sequence[str], *, add_constant: bool = True,
                 start: np.ndarray | None = None, tol: float = TOL, maxiter: int = 50,
                 need_cov: bool = True, notes: list[str] | None = None, dropped: int = 0) -> LogitFit:
    """:func:`sheetfns.logistic.fit` on complete rows of a design matrix that already holds its
    constant column."""
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
