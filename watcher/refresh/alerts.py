"""The refresh's side of the alerts (DESIGN.md §13): ring every job of a workbook on every refresh.

:func:`ring_jobs` calls :func:`watcher.alert.ring.ring_job` once per job -- jobs whose inputs are unchanged
included, with the ``future``, best method and verdict recorded at their last computation -- so a delivery
that failed is retried at the next refresh and a save that changes nothing rings nothing. It returns the
alert record to keep per job (in tocsin's record in the workbook, beside the job's fingerprint and
summary, under ``"alert"``) and what each job's alert did, for the report.

Where alerts go (the :class:`~watcher.alert.deliver.Dispatcher`) is the caller's: the command and the
watcher build it from the command line; None means no channels (the state is still kept, and no channel
is marked as told, so a hand-run refresh never swallows an alert the watcher is to send).
"""
from __future__ import annotations

import os
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from watcher.alert.deliver import Dispatcher
from watcher.alert.ring import Rung, ring_job
from watcher.alert.state import BEST, OFF, alert_method
from watcher.refresh.compute import JobOutcome

__all__ = ["RECORD_KEY", "Rang", "no_channels", "ring_jobs"]

RECORD_KEY = "alert"
"""The key of a job's alert record in its entry of tocsin's record (``state["jobs"][name]``)."""


@dataclass(frozen=True)
class Rang:
    """One job's alert in one refresh: the record to keep (None: none), whether it differs from the
    stored one, and the report's ``alert`` entry (None for a job whose alerts are off, and for a row of
    the job table that did not validate and has no record)."""

    record: dict[str, Any] | None
    changed: bool
    entry: dict[str, Any] | None


def no_channels() -> Dispatcher:
    """A dispatcher without channels: states are recorded, nothing is sent."""
    return Dispatcher()


def _entry(setting: str, best: str | None, rung: Rung) -> dict[str, Any] | None:
    """The report's ``alert`` of one job: its setting, the method that rings, the state and period kept,
    the change that rang in this refresh (``raised``/``cleared``, or None), the channels that got it, the
    failures (retried at the next refresh) and a note (why the job cannot ring, partial refusals)."""
    record = rung.record
    if setting == OFF:
        return None  # alerts off: the record is dropped, nothing rings
    notes = [rung.note] if rung.note else []
    notes += [d.message for d in rung.deliveries if d.ok and d.message]
    return {
        "setting": setting,
        "method": (record or {}).get("method") or alert_method(setting, best),
        "state": (record or {}).get("state"),
        "period": (record or {}).get("period"),
        "rang": rung.alert.state if rung.alert is not None else None,
        "delivered": [d.channel for d in rung.deliveries if d.ok],
        "failures": list(rung.failures),
        "note": "; ".join(notes),
    }


def ring_jobs(path: Path, outcomes: Sequence[JobOutcome], records: Mapping[str, Mapping[str, Any]],
              previous: Mapping[str, Mapping[str, Any]], dispatcher: Dispatcher | None) -> dict[str, Rang]:
    """Ring every job of ``outcomes``.

    Parameters
    ----------
    path : Path
        The workbook (named in the alert by its absolute path).
    outcomes : sequence of JobOutcome
        The refresh's outcomes, unchanged jobs included.
    records : mapping
        Job name -> the job's record in this refresh (the report's summary: ``verdict``, ``best_key``,
        ``future``, or ``error``), fresh for a recomputed job and as stored for an unchanged one.
    previous : mapping
        Job name -> the job's entry in tocsin's record as read (its ``"alert"`` is the stored alert record).
    dispatcher : Dispatcher or None
        The channels; None: none.
    """
    dispatcher = dispatcher if dispatcher is not None else no_channels()
    workbook = os.path.abspath(path)
    out: dict[str, Rang] = {}
    for o in outcomes:
        rec = records.get(o.name) or {}
        stored = (previous.get(o.name) or {}).get(RECORD_KEY)
        setting = o.job.alert if o.job is not None else BEST
        failed = o.error is not None or bool(rec.get("error"))
        future = None if failed else rec.get("future")
        best = rec.get("best_key")
        rung = ring_job(stored, workbook=workbook, job=o.name, setting=setting, best_method=best,
                        future=future, cutoff=o.job.cutoff if o.job is not None else None,
                        verdict=str(rec.get("verdict") or ""), dispatcher=dispatcher)
        entry = _entry(setting, best, rung) if o.job is not None or rung.record is not None else None
        out[o.name] = Rang(rung.record, rung.changed, entry)
    return out
