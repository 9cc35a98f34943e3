"""Estimation schemes of the value model: fixed origin, roll-forward, every N origins, future rows.

Internal to :mod:`sheetfns.valuemodel`; the schemes, the estimation samples and the rows that get a
forecast are those of the logistic model (:func:`sheetfns.logistic.forecast`, Notes), with least
squares in place of the logit. Row s is usable when its quantity is observed and its design row
complete; the fit "at origin o" uses every usable row s <= o, a prefix of the usable rows, so the
cross products of each window are those of the last window plus the rows that entered
(:mod:`sheetfns._ols.normal`), and every window is solved once however many rows share it.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from sheetfns._logit.design import Design
from sheetfns._ols.normal import Accumulator, OLSFit, chunks, predict, to_fit
from sheetfns.errors import InputError
from sheetfns.logistic import min_rows


@dataclass
class Run:
    """mean, scale and dof of the predictive t per row (NaN without a forecast), the fits behind the
    coefficient table and the future rows, notes, and the number of distinct fits used."""

    mean: np.ndarray
    scale: np.ndarray
    dof: np.ndarray
    table_fit: OLSFit | None
    future_fit: OLSFit | None
    notes: list[str] = field(default_factory=list)
    refits: int = 0


def rows_text(a: int, b: int, verb: str = "") -> str:
    """1-based inclusive row range for notes, with ``verb`` ("has/have") agreeing."""
    text = f"row {a + 1}" if a == b else f"rows {a + 1}-{b + 1}"
    if verb:
        singular, plural = verb.split("/")
        text += " " + (singular if a == b else plural)
    return text


def run(q: np.ndarray, design: Design, *, last: int, horizon: int, train_size: int | None,
        every: int) -> Run:
    """Carry out the estimation scheme (see :func:`sheetfns.valuemodel.forecast`)."""
    n = q.size
    x, terms = design.x, design.terms
    k = len(terms)
    notes = list(design.notes)
    complete = np.isfinite(x).all(axis=1)
    usable = np.flatnonzero(complete & ~np.isnan(q))
    xe, ye = x[usable], q[usable]

    def window(origin):
        return np.searchsorted(usable, origin, side="right")

    targets = np.arange(0, last + 1)
    fixed_window = None
    if train_size is None:
        every = max(every, 1)
        m_need = min_rows(k)
        ok = np.flatnonzero(window(targets - horizon) >= m_need)
        t0 = int(ok[0]) if ok.size else last + 1
        if t0 > 0:
            notes.append(f"{rows_text(0, min(t0, last + 1) - 1, 'has/have')} no forecast: a roll-forward "
                         f"fit needs at least {m_need} usable rows (10 per term, at least 30) observed "
                         f"by its origin")
        scheme = "roll-forward: refitted at every origin" if every == 1 else \
            f"roll-forward: refitted every {every} origins"
        notes.append(f"{scheme} on all usable rows observed by the origin (expanding window)")
    else:
        t0 = train_size
        fixed_window = int(window(t0 - horizon))
        if fixed_window < k + 1:
            raise InputError(f"`train_size` leaves {fixed_window} usable rows for {k} terms at the first "
                             f"validation origin; need at least {k + 1}; got train_size={train_size}")
        fixed_rows = rows_text(0, min(t0 - horizon, last))
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
        notes.append(f"training {rows_text(0, min(t0 - 1, last), 'carries/carry')} no forecast: the "
                     f"model is estimated on them, and an in-sample fit would use observations after "
                     f"the origin")
        if fixed_window < min_rows(k):
            notes.append(f"only {fixed_window} usable rows for {k} terms in the first fit (fewer than "
                         f"{min_rows(k)}): the estimates are unstable")
    targets = targets[t0:]
    if targets.size:
        anchors = t0 + ((targets - t0) // every) * every if every else np.full(targets.size, t0)
        target_window = window(anchors - horizon)
    else:
        target_window = np.empty(0, dtype=np.intp)
    fut = np.arange(last + 1, min(last + horizon, n - 1) + 1)
    if fut.size and usable.size <= k:
        notes.append(f"future {rows_text(int(fut[0]), int(fut[-1]), 'has/have')} no forecast: "
                     f"{usable.size} usable rows cannot fit {k} terms with a residual left over")
        fut = fut[:0]
    wanted = [target_window]
    if fixed_window is not None:
        wanted.append(np.array([fixed_window]))
    if fut.size:
        wanted.append(np.array([usable.size]))
    windows = np.unique(np.concatenate(wanted)).astype(np.intp)   # each holds more than k rows
    table_window = int(target_window[-1]) if targets.size else fixed_window
    mean, scale, dof = (np.full(n, np.nan) for _ in range(3))
    fits: dict[int, OLSFit] = {}
    near = deficient = 0
    if windows.size:
        acc = Accumulator(xe, ye, int(windows[0]))
        pos = np.searchsorted(windows, target_window)
        for sl in chunks(windows):
            sol = acc.solve(windows[sl])
            near += int(sol.svd.sum())
            deficient += int(np.sum(sol.rank < k))
            inside = (pos >= sl.start) & (pos < sl.stop)
            if inside.any():
                rows = targets[inside]
                mean[rows], scale[rows], dof[rows] = predict(sol, pos[inside] - sl.start, x[rows], acc)
            for m in (table_window, usable.size if fut.size else None):
                if m is not None and m in windows[sl]:
                    i = int(np.searchsorted(windows[sl], m))
                    fits[m] = to_fit(sol, i, acc, terms, m)
                    if m == usable.size and fut.size:
                        mean[fut], scale[fut], dof[fut] = predict(
                            sol, np.full(fut.size, i), x[fut], acc)
    table_fit = fits.get(table_window) if table_window is not None else None
    if targets.size:
        missing = int(np.sum(~complete[targets]))
        if missing:
            notes.append(f"{missing} row(s) have no forecast: a lagged value or predictor they need is "
                         f"missing")
        notes.append(f"coefficient table: the fit on the first {table_window} usable rows, used for the "
                     f"forecast of {rows_text(last, last)} (the last observed row)")
    future_fit = fits.get(usable.size) if fut.size else None
    if fut.size:
        filled = fut[np.isfinite(scale[fut])]
        if filled.size:
            notes.append(f"future {rows_text(int(filled[0]), int(filled[-1]))}: forecast from a fit on "
                         f"all {usable.size} usable observed rows")
        if filled.size < fut.size:
            notes.append(f"{fut.size - filled.size} future row(s) within the horizon have no forecast: "
                         f"a predictor (or date) they need is missing, or too few rows to fit")
        if table_fit is None:
            table_fit = future_fit
            notes.append("coefficient table: the fit on all usable observed rows (no row had an earlier "
                         "fit)")
    if last + horizon < n - 1:
        notes.append(f"future {rows_text(last + horizon + 1, n - 1, 'has/have')} no forecast: the lagged "
                     f"inputs end {horizon} row(s) past the last observation")
    if near:
        notes.append(f"near-collinear terms at {near} of {windows.size} fits: solved from the rows by "
                     f"singular value decomposition instead of the normal equations")
    if deficient:
        notes.append(f"a constant or collinear term at {deficient} of {windows.size} fits: the minimum-"
                     f"norm least-squares estimate is used, with n - rank degrees of freedom")
    if table_fit is not None:
        notes.append(f"residual scale of the coefficient-table fit: s = {table_fit.scale:.6g} on "
                     f"{table_fit.dof:g} degrees of freedom")
    refits = int(np.unique(target_window).size)
    return Run(mean, scale, dof, table_fit, future_fit, notes, refits)
