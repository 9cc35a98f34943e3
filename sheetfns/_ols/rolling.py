"""Estimation schemes of the value model: fixed origin, roll-forward, every N origins, future rows.

Internal to :mod:`sheetfns.valuemodel`; the schemes, the estimation samples and the rows that get a
forecast are those of the logistic model (:func:`sheetfns.logistic.forecast`, Notes; one plan for both,
:mod:`sheetfns._logit.plan`), with least squares in place of the logit. Row s is usable when its
quantity is observed and its design row complete; the fit "at origin o" uses every usable row s <= o, a
prefix of the usable rows, so the cross products of each window are those of the last window plus the
rows that entered (:mod:`sheetfns._ols.normal`), and every window is solved once however many rows share
it.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from sheetfns._logit.design import Design
from sheetfns._logit.plan import future_notes, plan, rows_text, table_note
from sheetfns._ols.normal import Accumulator, OLSFit, chunks, predict, to_fit


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

    scheme = plan(usable, k, last=last, horizon=horizon, train_size=train_size, every=every)
    notes += scheme.notes
    targets, target_window, fixed_window = scheme.targets, scheme.windows, scheme.fixed_window
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
    windows = _distinct(np.concatenate(wanted)).astype(np.intp)   # each holds more than k rows
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
        notes.append(table_note(table_window, last))
    future_fit = fits.get(usable.size) if fut.size else None
    notes += future_notes(fut, fut[np.isfinite(scale[fut])], usable.size, last=last, horizon=horizon, n=n,
                          table_from_future=table_fit is None and fut.size > 0,
                          unfilled="a predictor (or date) they need is missing, or too few rows to fit")
    if table_fit is None:
        table_fit = future_fit
    if near:
        notes.append(f"near-collinear terms at {near} of {windows.size} fits: solved from the rows by "
                     f"singular value decomposition instead of the normal equations")
    if deficient:
        notes.append(f"a constant or collinear term at {deficient} of {windows.size} fits: the minimum-"
                     f"norm least-squares estimate is used, with n - rank degrees of freedom")
    if table_fit is not None:
        notes.append(f"residual scale of the coefficient-table fit: s = {table_fit.scale:.6g} on "
                     f"{table_fit.dof:g} degrees of freedom")
    refits = int(_distinct(target_window).size)
    return Run(mean, scale, dof, table_fit, future_fit, notes, refits)


def _distinct(a: np.ndarray) -> np.ndarray:
    """The sorted distinct values of ``a`` (``np.unique``'s, whose plain form imports numpy.ma on its
    first call: ~25 ms of a small workbook's command)."""
    s = np.sort(a, axis=None)
    return s[np.concatenate(([True], s[1:] != s[:-1]))] if s.size else s
