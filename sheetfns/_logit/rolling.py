"""Estimation schemes of the logistic forecast: fixed origin, roll-forward, every N origins, future rows.

Internal to :mod:`sheetfns.logistic` (see the Notes of :func:`sheetfns.logistic.forecast` for the
schemes). The work shared between origins:

* the estimation rows are gathered once; the sample of the fit at origin o is a *prefix* of them
  (every usable row s <= o), so each window is a view, never a copy;
* origins that add no usable row reuse the previous fit;
* once one window gives a plain maximum-likelihood fit (both classes, full rank, no separation) every
  larger window does too (adding rows can only raise the rank, cannot create separation, cannot
  remove a class), so later refits skip those checks;
* those refits make a pass over the window only now and then: the roller keeps an *anchor*, the exact
  gradient g and Hessian H (and, once windows drift slowly enough to repay their cost, the third
  derivatives T) of a window at a point b_a, and adds the rows that enter at b_a (exact again for
  the larger window; O(k^3) per row). The estimate of a window solves the local model
  ``g - H d - T[d, d] / 2 = 0`` from the anchor (Newton's step without T; a few k x k solves).
  Its error in a fitted linear predictor is of order ``c D^2`` (Newton) or ``c D^3`` (with T), where
  ``D = sum_j |d_j| max|x_j|`` bounds the largest ``|x_i' d|``; while that stays below ``_SKIP_TOL``
  no pass is made. Otherwise one pass over the window at the model's estimate makes a new anchor,
  from which the model's step is tiny -- and measures the error the model made there, which keeps
  ``c`` honest (it starts at 0.25 and 0.05, above the largest measured on daily data, 0.17 and
  0.037, and only grows). Windows drift by O(1/m) per row, so with T passes come ever more rarely as
  windows grow: the cost per origin does not grow with the window (roll-forward over 65,536 daily
  rows took 3.1-3.2 times as long as over 16,384; bench/core_logistic.py). A refit the model cannot
  take (a singular H, a step beyond its reach) falls back to the full checks of
  :func:`sheetfns._logit.estimate.fit_complete`.
"""
from __future__ import annotations

from collections import Counter

import numpy as np

from sheetfns._logit import irls as _irls
from sheetfns._logit.design import Design
from sheetfns._logit.estimate import TOL, fit_complete
from sheetfns._logit.plan import future_notes, plan, table_note
from sheetfns._logit.results import LogitFit, LogitForecast

#: Error allowed in a fitted linear predictor of a warm refit (see the module docstring); the
#: probabilities are then within 1e-9 of the exact maximum-likelihood ones (measured: 4.5e-10 on
#: 16,384 daily rows).
_SKIP_TOL = 4e-9


class _Anchor:
    """Exact gradient, Hessian and (when kept) third derivatives of the window ``xe[:m]`` at ``b``."""

    __slots__ = ("b", "g", "h", "t", "m", "served")

    def __init__(self, b: np.ndarray, g: np.ndarray, h: np.ndarray, t: np.ndarray | None, m: int) -> None:
        self.b, self.g, self.h, self.t, self.m = b, g, h, t, m
        self.served = 0  # windows solved from this anchor

    def extend(self, xe: np.ndarray, ye: np.ndarray, m: int) -> None:
        """Add the rows ``m_old..m-1`` at ``b``: exact for the window ``xe[:m]``."""
        g, h, t = _irls.row_terms(xe[self.m:m], ye[self.m:m], self.b, third=self.t is not None)
        self.g, self.h, self.m = self.g + g, self.h + h, m
        if self.t is not None:
            self.t = self.t + t

    def step(self, colmax: np.ndarray) -> tuple[np.ndarray, float] | None:
        """The root ``d`` of the local model ``g - H d - T[d, d] / 2`` (``T`` when kept; a fixed-point
        iteration from the Newton step) and its bound ``sum_j |d_j| max|x_j|``; None when H is
        singular."""
        hinv = _irls.inverse_pd(self.h)
        if not np.all(np.isfinite(hinv)):
            return None
        d = hinv @ self.g
        if self.t is not None:
            for _ in range(8):
                d_new = hinv @ (self.g - 0.5 * ((self.t @ d) @ d))
                change = float(np.abs(d_new - d) @ colmax)
                d = d_new
                if change < 1e-3 * _SKIP_TOL:
                    break
        if not np.all(np.isfinite(d)):
            return None
        return d, float(np.abs(d) @ colmax)


class _Roller:
    """Fits on growing prefixes ``xe[:m]`` of the estimation rows, warm-starting each from the last."""

    def __init__(self, xe: np.ndarray, ye: np.ndarray, terms: list[str]):
        self.xe, self.ye, self.terms = xe, ye, terms
        self.clean = False
        self.b: np.ndarray | None = None
        self.cache: dict[int, LogitFit] = {}
        self.counts: Counter[str] = Counter()
        self.anchor: _Anchor | None = None
        self.colmax: np.ndarray | None = None   # row m-1: max |x_j| over the window xe[:m]
        # error of the Newton (2) and cubic (3) models per D**order: measured, and only grows
        self.c_err = {2: 0.25, 3: 0.05}
        self.drift = np.inf                      # bound of the change of the estimate per window
        self.checked: set[int] = set()   # windows fitted with full checks and covariance

    def get(self, m: int, *, need_cov: bool = False) -> LogitFit:
        f = self.cache.get(m)
        if f is not None and (not need_cov or m in self.checked):
            return f
        f = self._warm(m) if self.clean and not need_cov and self.b is not None else None
        if f is None:
            f = fit_complete(self.xe[:m], self.ye[:m], self.terms, start=self.b,
                             tol=TOL, need_cov=need_cov)
            self.counts["checked"] += 1
            if need_cov:
                self.checked.add(m)
            if f.fallback is not None:
                self.counts["fallback"] += 1
            if f.penalty:
                self.counts["ridge"] += 1
            if f.fallback is None and np.isnan(f.params).any():
                self.counts["collinear"] += 1
            if not f.converged and f.fallback is None:
                self.counts["unconverged"] += 1
            if f.clean:
                self.clean = True
        self.counts["iterations"] += f.iterations
        if f.fallback is None:
            self.b = f.params if f.clean else np.nan_to_num(f.params, nan=0.0)
        self.cache[m] = f
        return f

    def _warm(self, m: int, maxiter: int = 10) -> LogitFit | None:
        """The estimate of the window ``xe[:m]`` from the local model at the anchor (module
        docstring), with a pass over the window only when the model's error bound is too large."""
        xe, ye = self.xe, self.ye
        if self.colmax is None:
            # running maxima over the window only: taking them over all rows would let later rows
            # steer the stopping test, a (tiny) look-ahead
            self.colmax = np.maximum.accumulate(np.abs(xe), axis=0)
        colmax = self.colmax[m - 1]
        a = self.anchor
        if a is not None and a.m > m:
            a = None
        elif a is not None and a.m < m:
            a.extend(xe, ye, m)
        b = self.b
        passes = 0
        last = 0.0     # the bound of the model's estimate a new anchor is made at
        order = 0      # and the order of that model's error (2 Newton, 3 cubic)
        for _ in range(maxiter):
            if a is None:
                # third derivatives only where they pay: when the window drifts slowly enough for
                # the cubic model to serve 3 windows or more (they cost 2-3 passes)
                cubic = 3.0 * self.drift <= (_SKIP_TOL / self.c_err[3]) ** (1.0 / 3.0)
                g, h, t = _irls.evaluate3(xe[:m], ye[:m], b, third=cubic)
                a = self.anchor = _Anchor(np.array(b, dtype=float), g, h, t, m)
                passes += 1
            got = a.step(colmax)
            if got is None or got[1] > 1.0:
                # a singular H, or a step too long for a local model (many new rows, a changed
                # regime): the line-searched solve of fit_complete takes over
                self.anchor = None
                return None
            d, bound = got
            if order and last ** order > 1e-9:  # the step from the new anchor is the error the
                self.c_err[order] = max(self.c_err[order], 2.0 * bound / last ** order)  # model made
            q = 2 if a.t is None else 3
            b = a.b + d
            if not passes:  # no pass yet at this window: the drift per window since the anchor
                self.drift = bound / (a.served + 1)
            if self.c_err[q] * bound ** q <= _SKIP_TOL:
                a.served += 1
                self.counts["warm"] += 1
                self.counts["passes"] += passes
                nan_k = np.full(len(self.terms), np.nan)
                return LogitFit(b, nan_k, np.nan, True, (), tuple(self.terms), passes, m)
            last, order, a = bound, q, None
        self.anchor = None
        return None


def _predict_groups(x: np.ndarray, targets: np.ndarray, group: np.ndarray,
                    fits: list[LogitFit]) -> np.ndarray:
    """prob for ``targets``, row i using ``fits[group[i]]``."""
    params = np.array([np.nan_to_num(f.params, nan=0.0) for f in fits])
    xt = x[targets]
    prob = _irls.expit(np.einsum("ij,ij->i", xt, params[group]))
    share = np.array([np.nan if f.fallback is None else f.fallback for f in fits])[group]
    fb = ~np.isnan(share)
    prob[fb] = share[fb]
    prob[~np.isfinite(xt).all(axis=1)] = np.nan
    return prob


def run(y: np.ndarray, design: Design, *, last: int, horizon: int, train_size: int | None,
        every: int) -> LogitForecast:
    """Carry out the estimation scheme; see :func:`sheetfns.logistic.forecast`."""
    n = y.size
    x, terms = design.x, design.terms
    k = len(terms)
    notes = list(design.notes)
    complete = np.isfinite(x).all(axis=1)
    usable = np.flatnonzero(complete & ~np.isnan(y))
    if usable.size and usable[-1] - usable[0] + 1 == usable.size:  # no gap: a view, not a copy
        xe, ye = x[usable[0]:usable[-1] + 1], y[usable[0]:usable[-1] + 1]
    else:
        xe, ye = x[usable], y[usable]
    roller = _Roller(xe, ye, terms)
    prob = np.full(n, np.nan)
    scheme = plan(usable, k, last=last, horizon=horizon, train_size=train_size, every=every)
    notes += scheme.notes
    targets = scheme.targets
    fit_table: LogitFit | None = None
    if scheme.fixed_window is not None:
        fit_table = roller.get(scheme.fixed_window, need_cov=(scheme.every == 0))
    refits = 0
    if targets.size:
        uniq, group = np.unique(scheme.windows, return_inverse=True)
        fits = [roller.get(int(m)) for m in uniq]
        refits = len({f.nobs for f in fits})
        prob[targets] = _predict_groups(x, targets, group, fits)
        missing = int(np.sum(~complete[targets]))
        if missing:
            notes.append(f"{missing} row(s) have no forecast: a lagged event, value or predictor they "
                         f"need is missing")
        fit_table = roller.get(fits[-1].nobs, need_cov=True)
        notes.append(table_note(fit_table.nobs, last))
    future_fit = None
    fut = np.arange(last + 1, min(last + horizon, n - 1) + 1)
    if fut.size:
        future_fit = roller.get(usable.size, need_cov=True)
        prob[fut] = _predict_groups(x, fut, np.zeros(fut.size, dtype=int), [future_fit])
    notes += future_notes(fut, fut[np.isfinite(prob[fut])], usable.size, last=last, horizon=horizon, n=n,
                          table_from_future=fit_table is None and fut.size > 0,
                          unfilled="a predictor (or date) they need is missing")
    if fit_table is None:
        fit_table = future_fit
    notes += _roller_notes(roller, fit_table)
    shown = fit_table if fit_table is not None else LogitFit(
        np.full(k, np.nan), np.full(k, np.nan), np.nan, False, (), tuple(terms))
    return LogitForecast(prob, shown, tuple(notes), fit_table, future_fit, tuple(terms), refits)


def _roller_notes(roller: _Roller, fit_table: LogitFit | None) -> list[str]:
    c = roller.counts
    total = c["warm"] + c["checked"]
    out = []
    if c["fallback"]:
        out.append(f"majority share used instead of a logit at {c['fallback']} of {total} fits (only "
                   f"one class observed)")
    if c["ridge"]:
        out.append(f"ridge penalty used at {c['ridge']} of {total} fits (separation)")
    if c["collinear"]:
        out.append(f"a constant or collinear term was dropped at {c['collinear']} of {total} fits")
    if c["unconverged"]:
        out.append(f"Newton-Raphson did not converge at {c['unconverged']} of {total} fits")
    if fit_table is not None:
        out += [f"coefficient-table fit: {t}" for t in fit_table.notes]
    return out
