"""The report of one refresh: what happened to the workbook (:class:`RefreshReport`) and to each job
(:class:`JobReport`). The command prints it (``watcher.cli.tables``), the watcher logs it.

Workbook statuses: "refreshed" (written), "unchanged" (inputs as at the last refresh; nothing written but,
at most, tocsin's record of the alerts), "failed" (the workbook could not be read or written; ``message``
says why), "conflict" (the file changed while computing; nothing written), "busy" (open in a spreadsheet
program), "readonly" (the file is marked read-only: left alone), "nojobs" (no job table). Job statuses:
"ok", "unchanged", "failed".

This module is the one home of what a job's report holds (DESIGN.md §8): :func:`job_record` builds it from
a computed job -- the verdict, the next period, ``warnings`` and ``future`` (:func:`future_entries`, the
only place the report's ``future`` is made from :meth:`sheetfns.scorecard.Evaluation.future`) -- and the
refresh keeps it in tocsin's record in the workbook, so an unchanged job reports the same.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from watcher.refresh.compute import JobOutcome, summary
from watcher.refresh.periods import period_text

__all__ = ["JobReport", "RefreshReport", "future_entries", "job_record", "job_report", "job_warnings"]


@dataclass(frozen=True)
class JobReport:
    """The outcome of one job.

    ``future`` and ``warnings`` are the report's lists (DESIGN.md §8); ``best_key`` is the best method's
    key (``best_method`` its label); ``alert`` is what the job's alert did in this refresh
    (:func:`watcher.refresh.workbook.refresh_workbook`), None for a job whose alerts are off and have no
    record.
    """

    name: str
    status: str  # "ok", "failed" or "unchanged"
    message: str = ""
    next_forecast: float | None = None  # probability of the event in the next period (best method)
    next_period: str | None = None
    best_method: str | None = None
    sheet: str | None = None
    evaluation: Any = field(default=None, repr=False, compare=False)
    warnings: tuple[str, ...] = ()
    future: tuple[dict[str, Any], ...] = field(default=(), repr=False)
    best_key: str | None = None
    alert: dict[str, Any] | None = None


@dataclass(frozen=True)
class RefreshReport:
    """The outcome of one workbook's refresh."""

    path: Path
    status: str  # see the module docstring
    jobs: tuple[JobReport, ...] = ()
    message: str = ""
    duration_s: float = 0.0
    written: Any = field(default=None, compare=False)
    """When tocsin wrote the workbook: the file it left (``watcher.xlsx.package.Fingerprint``: size,
    mtime_ns and the SHA-256 the writer verified), so the watcher knows its own write when it comes back."""

    @property
    def ok(self) -> bool:
        return self.status in ("refreshed", "unchanged") and all(j.status != "failed" for j in self.jobs)


def _period(dates: Any, t: int) -> str | int:
    """Row ``t``'s period as the report names it: its ISO date (with the time of day when there is one,
    :func:`~watcher.refresh.periods.period_text`), or the period's number (1-based) for a job without
    dates or a row without a date."""
    text = period_text(dates, t)
    return t + 1 if text is None else text


def future_entries(evaluation: Any, dates: Any = None) -> list[dict[str, Any]]:
    """The report's ``future``: one entry per future period in time order, ``{"period", "origin",
    "forecasts": {method key: {"forecast": 0 or 1, "probability": p or None}}}`` (DESIGN.md §8).

    ``dates`` are the job's dates (None without dates). The probability is None for a 0/1 method (the
    rule and its home: :data:`sheetfns.scorecard.PROBABILITY_METHODS`, applied by ``Evaluation.future``).
    """
    out = []
    for fp in evaluation.future():
        forecasts = {key: {"forecast": int(f), "probability": None if p is None or not math.isfinite(p)
                           else float(p)} for key, (f, p) in fp.forecasts.items()}
        out.append({"period": _period(dates, fp.row), "origin": _period(dates, fp.origin),
                    "forecasts": forecasts})
    return out


def job_warnings(o: JobOutcome) -> list[str]:
    """The job's warnings, plain sentences in the order found, each once: the outcome's own (the data's,
    read as the reader found them) and the evaluation's."""
    own = getattr(o, "warnings", None)
    if own is None:  # an outcome without its own list: the reader's warnings are the data's
        own = getattr(o.data, "warnings", ()) if o.data is not None else ()
    found = [*own, *getattr(o.evaluation, "warnings", ())]
    return list(dict.fromkeys(str(w) for w in found if w))


def job_record(o: JobOutcome) -> dict[str, Any]:
    """What the report says of a computed job (:func:`watcher.refresh.compute.summary` with ``warnings``,
    ``future`` and the best method's key); the refresh keeps it in tocsin's record in the workbook."""
    out = summary(o)
    if o.error is not None or o.evaluation is None:
        return out
    dates = o.data.dates if o.data is not None else None
    out.update(best_key=o.evaluation.best, warnings=job_warnings(o),
               future=future_entries(o.evaluation, dates))
    return out


def job_report(o: JobOutcome, records: dict[str, dict], alert: dict[str, Any] | None = None) -> JobReport:
    """The report of one job: from the outcome, or from the state recorded when it is unchanged."""
    rec = job_record(o) if not o.unchanged else records.get(o.name, {})
    status = "unchanged" if o.unchanged else "ok"
    if o.error is not None or rec.get("error"):
        # a blocked job (its sheet is a user's, or another job's) has no sheet of its own
        return JobReport(o.name, "failed", o.error or rec.get("error", ""),
                         sheet=None if o.blocked else o.sheet, alert=alert)
    return JobReport(o.name, status, rec.get("verdict", ""), next_forecast=rec.get("next_probability"),
                     next_period=rec.get("next_period"), best_method=rec.get("best_method"), sheet=o.sheet,
                     evaluation=o.evaluation, warnings=tuple(rec.get("warnings") or ()),
                     future=tuple(rec.get("future") or ()), best_key=rec.get("best_key"), alert=alert)
