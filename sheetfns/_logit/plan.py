"""The plan of an estimation scheme, shared by the logistic model and the value model: which rows get a
forecast, the fit (estimation window) behind each, the roll-forward minimum, the check of
``train_size`` and the notes that say so.

Internal to :mod:`sheetfns.logistic` (which re-exports ``min_rows``; the schemes are in the Notes of
:func:`sheetfns.logistic.forecast`), used by :mod:`sheetfns._logit.rolling` and
:mod:`sheetfns._ols.rolling`, which carry the plan out with their own estimators.

Row s is usable when its target is observed and its design row complete; the fit "at origin o" uses
every usable row s <= o, a prefix of the usable rows, so a fit is named by its *window*: the number of
usable rows it holds.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from sheetfns.errors import InputError


def min_rows(n_terms: int) -> int:
    """Smallest estimation sample for a roll-forward fit: 10 rows per term, at least 30.

    Common practice (the "ten events per variable" rule of thumb; Peduzzi et al., 1996, *J. Clin.
    Epidemiol.* 49(12), 1373-1379, counts events; tocsin counts rows and lets the notes report
    separation when events are too few).
    """
    return max(30, 10 * n_terms)


def rows_text(a: int, b: int, verb: str = "") -> str:
    """1-based inclusive row range for notes, with ``verb`` ("has/have", "carries/carry") agreeing."""
    text = f"row {a + 1}" if a == b else f"rows {a + 1}-{b + 1}"
    if verb:
        singular, plural = verb.split("/")
        text += " " + (singular if a == b else plural)
    return text


@dataclass(frozen=True)
class Plan:
    """Where the fits go.

    ``targets`` are the observed rows that get a fit (``first``..last), ``windows[i]`` the window of
    the fit behind ``targets[i]`` (non-decreasing; rows sharing a refit origin share a window);
    ``fixed_window`` the window of the first fit, at the first validation origin (None without a
    training period); ``every`` the refit interval in origins (0: fixed; roll-forward is at least 1);
    ``notes`` say which scheme, and which rows get no forecast and why.
    """

    first: int
    targets: np.ndarray
    windows: np.ndarray
    fixed_window: int | None
    every: int
    notes: list[str] = field(default_factory=list)


def plan(usable: np.ndarray, n_terms: int, *, last: int, horizon: int, train_size: int | None,
         every: int) -> Plan:
    """The plan of a scheme over rows 0..``last`` (the last observed row).

    ``usable`` holds the usable rows, ascending; ``every`` is :func:`sheetfns.logistic.parse_refit`'s
    (0 fixed, N every N origins; roll-forward, ``train_size=None``, refits at least every origin).

    Raises
    ------
    InputError
        ``train_size`` leaves no more usable rows than ``n_terms`` at the first validation origin
        (``argument="train_size"``, ``value`` the size given).
    """
    k = n_terms
    notes: list[str] = []

    def window(origin: np.ndarray | int) -> np.ndarray:
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
                             f"validation origin; need at least {k + 1}; got train_size={train_size}",
                             argument="train_size", value=train_size)
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
    # the first target of each refit: its fit is the one at origin anchor - horizon
    anchors = t0 + ((targets - t0) // every) * every if every else np.full(targets.size, t0)
    windows = window(anchors - horizon).astype(np.intp)
    return Plan(t0, targets, windows, fixed_window, every, notes)


def table_note(window: int, last: int) -> str:
    """The note on the coefficient table: the fit of ``window`` usable rows behind the forecast of the
    last observed row."""
    return (f"coefficient table: the fit on the first {window} usable rows, used for the forecast of "
            f"{rows_text(last, last)} (the last observed row)")


def future_notes(fut: np.ndarray, filled: np.ndarray, usable: int, *, last: int, horizon: int, n: int,
                 table_from_future: bool, unfilled: str) -> list[str]:
    """The notes on the future rows: ``fut`` within the horizon, of which ``filled`` got a forecast
    from the fit on all ``usable`` observed rows (``unfilled`` says why the others did not); that
    fit shown as the coefficient table when ``table_from_future``; the rows beyond the horizon."""
    notes = []
    if fut.size:
        if filled.size:
            notes.append(f"future {rows_text(int(filled[0]), int(filled[-1]))}: forecast from a fit on all "
                         f"{usable} usable observed rows")
        if filled.size < fut.size:
            notes.append(f"{fut.size - filled.size} future row(s) within the horizon have no forecast: "
                         f"{unfilled}")
        if table_from_future:
            notes.append("coefficient table: the fit on all usable observed rows (no row had an earlier "
                         "fit)")
    if last + horizon < n - 1:
        notes.append(f"future {rows_text(last + horizon + 1, n - 1, 'has/have')} no forecast: the lagged "
                     f"inputs end {horizon} row(s) past the last observation")
    return notes
