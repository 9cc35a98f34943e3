"""Estimation schemes of the logistic forecast: fixed origin, roll-forward, every N origins, future rows.

Internal to :mod:`sheetfns.logistic` (see the Notes of :func:`sheetfns.logistic.forecast` for the
schemes). The work shared between origins:

* the estimation rows are gathered once; the sample of the fit at origin o is a *prefix* of them
  (every usable row s <= o), so each window is a view, never a copy;
* origins that add no usable row reuse the previous fit;
* once one window gives a plain maximum-likelihood fit (both classes, full rank, no separation) every
  larger window does too (adding rows can only raise the rank, cannot create separation, cannot
  remove a class), so later refits skip those checks and run warm-started Newton from the previous
  estimate: after one new row the previous estimate is within O(1/n) of the new one and Newton's
  quadratic convergence needs one or two steps. A refit that fails to converge falls back to the full
  checks of :func:`sheetfns._logit.estimate.fit_complete`.
"""
from __future__ import annotations

from collections import Counter

import numpy as np

from sheetfns._logit import irls as _irls
from sheetfns._logit.design import Design
from sheetfns._logit.estimate import TOL, fit_complete, min_rows
from sheetfns._logit.results import LogitFit, LogitForecast, coefficient_table
from sheetfns.errors import InputError

#: Convergence of the warm-started refits: the bound on the largest change of a fitted linear
#: predictor in the last step. Newton's error after that step is of order C tol**2 with C about 0.1
#: here (measured), i.e. ~1e-11 -- far below the 1e-6 the forecasts are checked to.
_WARM_TOL = 1e-5


def _rows(a: int, b: int, verb: str = "") -> str:
    """1-based inclusive row range for notes, with ``verb`` ("has"/"have", "carries"/"carry") agreeing."""
    text = f"row {a + 1}" if a == b else f"rows {a + 1}-{b + 1}"
    if verb:
        singular, plural = verb.split("/")
        text += " " + (singular if a == b else plural)
    return text


class _Roller:
    """Fits on growing prefixes ``xe[:m]`` of the estimation rows, warm-starting each from the last."""

    def __init__(self, xe: np.ndarray, ye: np.ndarray, terms: list[str]):
        self.xe, self.ye, self.terms = xe, ye, terms
        self.clean = False
        self.b: np.ndarray | None = None
        self.cache: dict[int, LogitFit] = {}
        self.counts: Counter[str] = Counter()
        self.point: tuple[np.ndarray, np.ndarray, np.ndarray, int] | None = None
        self.colmax: np.ndarray | None = None
        self.colmax_m = 0
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
        """Warm-started Newton on ``xe[:m]`` without line search (the start is close).

        ``self.point`` keeps (b, g, H, m') with the exact gradient and Hessian of the window
        ``xe[:m']`` at b. The first step adds the new rows' share of g and H at that b (O(k^2) per
        row) and solves, with no pass over the old rows; each further step is one pass. The test for
        convergence bounds the largest change of a fitted linear predictor by sum_j |d_j| max|x_j|.
        """
        xe, ye = self.xe, self.ye
        # max |x_j| over the window only (kept up to date row block by row block): taking it over
        # all rows would let later rows steer the stopping test, a (tiny) look-ahead
        if self.colmax_m < m:
            block = np.max(np.abs(xe[self.colmax_m:m]), axis=0)
            self.colmax = block if self.colmax is None else np.maximum(self.colmax, block)
            self.colmax_m = m
        b = self.b
        steps = 0
        if self.point is not None and self.point[3] <= m:
            b0, g, h, m0 = self.point
            if m0 < m:
                xn = xe[m0:m]
                p = _irls.expit(xn @ b0)
                g = g + xn.T @ (ye[m0:m] - p)
                h = h + _irls.hessian(xn, p - p * p)
            d = _irls.solve_spd(h, g)
            b = b0 + d
            steps = 1
        x, y = xe[:m], ye[:m]
        for _ in range(maxiter):
            _, g, h, _ = _irls.evaluate(x, y, b, need_llf=False)
            d = _irls.solve_spd(h, g)
            if not np.all(np.isfinite(d)):
                return None
            self.point = (b, g, h, m)
            bound = float(np.abs(d) @ self.colmax)  # type: ignore[operator]
            if bound > 1.0:
                # too far for an undamped step (many new rows, or a changed regime): let the
                # line-searched solve of fit_complete take over
                self.point = None
                return None
            b = b + d
            steps += 1
            if bound < _WARM_TOL:
                self.counts["warm"] += 1
                nan_k = np.full(len(self.terms), np.nan)
                return LogitFit(b, nan_k, np.nan, True, (), tuple(self.terms), steps, m)
        self.point = None
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

    def window(origin: np.ndarray | int):
        return np.searchsorted(usable, origin, side="right")

    targets = np.arange(0, last + 1)
    if train_size is None:
        every = max(every, 1)
        m_need = min_rows(k)
        ok = np.flatnonzero(window(targets - horizon) >= m_need)
        t0 = int(ok[0]) if ok.size else last + 1
        if t0 > 0:
            notes.append(f"{_rows(0, min(t0, last + 1) - 1, 'has/have')} no forecast: a roll-forward "
                         f"fit needs at least {m_need} usable rows (10 per term, at least 30) observed "
                         f"by its origin")
        scheme = "roll-forward: refitted at every origin" if every == 1 else \
            f"roll-forward: refitted every {every} origins"
        notes.append(f"{scheme} on all usable rows observed by the origin (expanding window)")
    else:
        t0 = train_size
        m0 = int(window(t0 - horizon))
        if m0 < k + 1:
            raise InputError(f"`train_size` leaves {m0} usable rows for {k} terms at the first "
                             f"validation origin; need at least {k + 1}; got train_size={train_size}",
                             argument="train_size", value=train_size)
        fixed_rows = _rows(0, min(t0 - horizon, last))
        if every == 0:
            notes.append(f"fixed: coefficients estimated once on {fixed_rows} (the rows observed at the "
                         f"first validation origin) and used for every validation row")
        else:
            how = "every validation origin" if every == 1 else f"every {every} validation origins"
            notes.append(f"roll: refitted at {how} on all usable rows observed by the origin, the first "
                         f"fit on {fixed_rows}")
        if horizon > 1:
            notes.append(f"horizon {horizon}: the last {horizon - 1} training row(s) are not yet "
                         f"observed at the first validation origin, so the first fit leaves them out")
        notes.append(f"training {_rows(0, min(t0 - 1, last), 'carries/carry')} no forecast: the model is "
                     f"estimated on them, "
                     f"and an in-sample fit would use observations after the origin")
        if m0 < min_rows(k):
            notes.append(f"only {m0} usable rows for {k} terms in the first fit (fewer than "
                         f"{min_rows(k)}): the estimates are unstable")
    targets = targets[t0:]
    fit_table: LogitFit | None = None
    if train_size is not None:
        fit_table = roller.get(int(window(t0 - horizon)), need_cov=(every == 0))
    refits = 0
    if targets.size:
        anchors = t0 + ((targets - t0) // every) * every if every else np.full(targets.size, t0)
        uniq, group = np.unique(anchors, return_inverse=True)
        fits = [roller.get(int(window(a - horizon))) for a in uniq]
        refits = len({f.nobs for f in fits})
        prob[targets] = _predict_groups(x, targets, group, fits)
        missing = int(np.sum(~complete[targets]))
        if missing:
            notes.append(f"{missing} row(s) have no forecast: a lagged event, value or predictor they "
                         f"need is missing")
        fit_table = roller.get(fits[-1].nobs, need_cov=True)
        notes.append(f"coefficient table: the fit on the first {fit_table.nobs} usable rows, used for "
                     f"the forecast of {_rows(last, last)} (the last observed row)")
    future_fit = None
    fut = np.arange(last + 1, min(last + horizon, n - 1) + 1)
    if fut.size:
        future_fit = roller.get(usable.size, need_cov=True)
        prob[fut] = _predict_groups(x, fut, np.zeros(fut.size, dtype=int), [future_fit])
        filled = fut[np.isfinite(prob[fut])]
        if filled.size:
            notes.append(f"future {_rows(int(filled[0]), int(filled[-1]))}: forecast from a fit on all "
                         f"{usable.size} usable observed rows")
        if filled.size < fut.size:
            notes.append(f"{fut.size - filled.size} future row(s) within the horizon have no forecast: "
                         f"a predictor (or date) they need is missing")
        if fit_table is None:
            fit_table = future_fit
            notes.append("coefficient table: the fit on all usable observed rows (no row had an "
                         "earlier fit)")
    if last + horizon < n - 1:
        notes.append(f"future {_rows(last + horizon + 1, n - 1, 'has/have')} no forecast: the lagged "
                     f"inputs end {horizon} row(s) past the last observation")
    notes += _roller_notes(roller, fit_table)
    table = coefficient_table(fit_table) if fit_table is not None else coefficient_table(
        LogitFit(np.full(k, np.nan), np.full(k, np.nan), np.nan, False, (), tuple(terms)))
    return LogitForecast(prob, table, tuple(notes), fit_table, future_fit, tuple(terms), refits)


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
