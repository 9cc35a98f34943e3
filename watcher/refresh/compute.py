"""Computing one job: resolve it against its data, run every method and the profile, and say what came out.

* :func:`compute_job` turns a validated job and its columns into a :class:`JobOutcome` (the evaluation,
  the profile table, the notes for the sheet); it raises the refresh's or the core's errors for data that
  do not allow a forecast.
* :func:`digest` fingerprints a job's inputs (its settings, its columns and the tocsin version), so an
  unchanged job is neither recomputed nor rewritten.
* :func:`summary` is what a report says of a job; it is kept in tocsin's state inside the package, so
  an unchanged job reports it too.

The modelling policy the spreadsheet functions share (weekday terms for daily data, the value series as
a term only when it is not itself 0/1, the profile's period) comes from :mod:`sheetfns.scorecard`.
"""
from __future__ import annotations

import hashlib
import json
import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from sheetfns import profile
from sheetfns.events import flag
from sheetfns.scorecard import (
    METHOD_LABELS,
    PROBABILITY_METHODS,
    Settings,
    evaluate,
    model_values,
    profile_period,
    weekday_terms,
)
from watcher.refresh.jobs import Job, resolve
from watcher.refresh.periods import MAX_TABLE_ROWS, in_time_order, period_text, with_future
from watcher.refresh.texts import VERSION

__all__ = ["MAX_TABLE_ROWS", "JobOutcome", "compute_job", "digest", "event_text", "settings_for", "summary"]



@dataclass(frozen=True)
class JobOutcome:
    """A computed (or failed) job, ready to be laid out."""

    job: Job | None  # None when the row did not validate
    name: str
    sheet: str
    profile_sheet: str
    fingerprint: str
    error: str | None = None
    evaluation: Any = None
    data: Any = None
    events: Any = None
    values: Any = None
    profile: Any = None  # sheetfns.profile.Rates of the event by period of year (dated jobs)
    trend: Any = None
    notes: tuple[str, ...] = ()  # what the forecast sheet's notes say of the data (the warnings first)
    warnings: tuple[str, ...] = ()  # the notes that warn (cells read as missing, gaps, holidays, ...)
    unchanged: bool = False  # inputs as recorded at the last refresh: not recomputed, sheets kept
    source: Any = None  # the key of the job's read (watcher.refresh.parts.source_key), kept in the state
    blocked: bool = False  # no sheet of its own is written (a user's sheet, or the name is taken)


def digest(job_settings: Any, data: Any) -> str:
    """The fingerprint of a job's inputs: its settings (any JSON-able value), its data columns and
    the tocsin version."""
    h = hashlib.sha256()
    h.update(VERSION.encode())
    h.update(json.dumps(job_settings, default=str, sort_keys=True).encode())
    if data is not None:
        for key in sorted(data.columns):
            h.update(key.encode())
            h.update(np.ascontiguousarray(data.columns[key]).tobytes())
        for key in sorted(data.raw):
            h.update(("raw:" + key).encode())
            h.update(repr(data.raw[key].tolist()).encode())
        if data.dates is not None:
            h.update(np.ascontiguousarray(data.dates.astype("datetime64[s]")).tobytes())
    return h.hexdigest()[:32]


def settings_for(job: Job) -> Settings:
    """The model settings of a resolved job."""
    return Settings(horizon=job.horizon, season=job.season or 1, cycle=job.cycle,
                    harmonics=job.harmonics, lags=job.lags, refit=job.refit, cutoff=job.cutoff,
                    cost_false_alarm=job.cost_false_alarm, cost_miss=job.cost_miss,
                    weekday=weekday_terms(job.frequency))


def compute_job(job: Job, data: Any) -> JobOutcome:
    """Resolve ``job`` against its data and run every method. Raises a ValueError (the refresh's
    JobError, or the core's errors) for data that do not allow a forecast.

    Dates that run newest first are read oldest first, and the periods after the last observation
    are added as future rows (:mod:`watcher.refresh.periods`): the outcome's ``data`` is the data so
    laid out, the forecast sheet's rows."""
    data, order_note = in_time_order(data)
    job = resolve(job, data)
    raw = data.raw[job.value_column] if job.text_columns else data.columns[job.value_column]
    events = flag(raw, job.criterion, job.min_run)
    data, events, future_note = with_future(data, events, horizon=job.horizon, frequency=job.frequency,
                                            dated=job.date_column is not None)
    raw = data.raw[job.value_column] if job.text_columns else data.columns[job.value_column]
    values = data.columns.get(job.value_column)
    shown = raw if job.text_columns else values  # the row table shows the text of a text criterion
    predictors = {data.names.get(p, p): data.columns[p] for p in job.predictors} or None
    known = {data.names.get(p, p): data.columns[p] for p in job.known_ahead} or None
    warnings = (*data.warnings, *((order_note,) if order_note else ()), *job.date_notes,
                *_skipped(data, job, raw, events))
    notes = (*warnings, *((future_note,) if future_note else ()))
    ev = evaluate(events, train_size=job.train_size, settings=settings_for(job), dates=data.dates,
                  values=model_values(values), predictors=predictors, known_ahead=known,
                  criterion=job.criterion, raw_values=raw, min_run=job.min_run)
    table = trend = None
    if data.dates is not None:
        table = profile.rates(data.dates, events, by=profile_period(job.frequency))
        try:
            trend = table.trend(degree=2)[0]
        except ValueError:      # too few periods for a trend: the table goes without one
            trend = None
    return JobOutcome(job=job, name=job.name, sheet=job.output_sheet, profile_sheet=job.profile_sheet,
                      fingerprint="", evaluation=ev, data=data, events=events,
                      values=shown if shown is not None else events, profile=table, trend=trend,
                      notes=notes, warnings=warnings)


def _skipped(data: Any, job: Job, raw: np.ndarray, events: np.ndarray) -> tuple[str, ...]:
    """The warning for the rows up to the last observation that hold no value (blank, or a cell read
    as missing): every method skips them."""
    observed = np.flatnonzero(events == events)
    if not observed.size:
        return ()
    head = raw[:observed[-1] + 1]
    empty = int(np.count_nonzero(head == None if head.dtype == object else np.isnan(head)))  # noqa: E711
    if not empty:
        return ()
    rows = f"{empty} row{'s' * (empty > 1)} up to the last observation {'have' if empty > 1 else 'has'}"
    return (f"{rows} no value in column {data.letters[job.value_column]} (blank, or a cell read as "
            f"missing): the methods skip {'them' if empty > 1 else 'it'}",)


def event_text(job: Job, data: Any) -> str:
    """The event in words for the sheets: 'Passengers >=1150, held 2 periods in a row'."""
    name = data.names.get(job.value_column, job.value_column) if data is not None else job.value_column
    run = f", held {job.min_run} periods in a row" if job.min_run > 1 else ""
    return f"{name} {job.event}{run}"


def summary(o: JobOutcome) -> dict[str, Any]:
    """What the report says of a job, recorded in the state so an unchanged job reports it too."""
    if o.error is not None:
        return {"error": o.error}
    ev = o.evaluation
    best = METHOD_LABELS.get(ev.best) if ev.best else None
    out: dict[str, Any] = {"verdict": ev.verdict, "best_method": best, "next_period": None,
                           "next_probability": None}
    if ev.last_observed + 1 < ev.n:
        named = period_text(o.data.dates, ev.last_observed + 1)
        out["next_period"] = named if named is not None else f"row {ev.last_observed + 2}"
        if ev.best in PROBABILITY_METHODS:  # a 0/1 method states no chance (DESIGN.md §8)
            p = ev.headline()[ev.best][1]
            out["next_probability"] = None if math.isnan(p) else p
    return out
