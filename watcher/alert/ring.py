"""One job's alert in one refresh: decide from the stored record, deliver, and give back the new record.

This is the one call the refresh makes per job (:func:`ring_job`), on every refresh, jobs whose inputs are
unchanged included (with the ``future``, best method and verdict recorded last time), so a delivery
that failed is retried at the next refresh. The refresh stores :attr:`Rung.record` in tocsin's record in
the workbook (under the job's name) when :attr:`Rung.changed` says it differs from what was stored.

Delivery comes before the record is written: if the write then fails (someone saved meanwhile), the
next refresh sends the alert again. A duplicate is the lesser harm; a lost alert is the greater.
"""
from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from watcher.alert.deliver import Delivery, Dispatcher
from watcher.alert.message import Alert, build_alert
from watcher.alert.state import alert_method, decide, next_reading, settle

__all__ = ["Rung", "ring_job"]


@dataclass(frozen=True)
class Rung:
    """The outcome of :func:`ring_job`.

    ``record``: the job's alert record to keep (None: drop it). ``changed``: it differs from the stored
    one, so the workbook's record must be written. ``alert``: the alert that was due (None when nothing
    was). ``deliveries``: one per channel it went to. ``note``: why the job could not ring this time
    (e.g. the named method has no forecast), or "".
    """

    record: dict[str, Any] | None
    changed: bool
    alert: Alert | None = None
    deliveries: tuple[Delivery, ...] = ()
    note: str = ""

    @property
    def failures(self) -> tuple[str, ...]:
        """Messages of the channels that did not get the alert (log them; they are retried)."""
        return tuple(d.message for d in self.deliveries if not d.ok)

    @property
    def messages(self) -> tuple[str, ...]:
        """Every delivery message: failures and partial refusals."""
        return tuple(d.message for d in self.deliveries if d.message)


def ring_job(previous: Mapping[str, Any] | None, *, workbook: str, job: str, setting: str,
             best_method: str | None, future: Sequence[Mapping[str, Any]] | None,
             cutoff: float | None, verdict: str, dispatcher: Dispatcher) -> Rung:
    """Decide and deliver one job's alert.

    Parameters
    ----------
    previous : dict or None
        The job's alert record as stored in the workbook (None: none yet).
    workbook, job : str
        Named in the alert (the workbook's path as the report shows it; the job's name).
    setting : str
        The job's ``alert`` setting (:func:`watcher.alert.state.alert_setting`): ``"best"``, ``"off"`` or a
        method key.
    best_method : str or None
        The report's ``best_method`` (None when no method beat the base rate).
    future : list of dict or None
        The report's ``future`` (DESIGN.md §8); None for a job that failed.
    cutoff : float or None
        The job's cutoff (reported with a probability only).
    verdict : str
        The verdict line.
    dispatcher : Dispatcher
        The channels (:func:`watcher.alert.options.dispatcher_from_args`).
    """
    method = alert_method(setting, best_method)
    reading = next_reading(future, method)
    decision = decide(previous, reading, channels=dispatcher.channels, setting=setting)
    note = ""
    if method is not None and reading is None and future is not None:
        note = f"alert: the {method} method has no forecast for the next period, so this job cannot ring"
    alert = None
    deliveries: tuple[Delivery, ...] = ()
    record = decision.record
    if decision.change is not None and decision.reading is not None:
        alert = build_alert(decision.reading, decision.change, workbook=workbook, job=job, cutoff=cutoff,
                            verdict=verdict)
        deliveries = dispatcher.deliver(alert, decision.pending)
        record = settle(record, [d.channel for d in deliveries if d.ok])
    stored = dict(previous) if isinstance(previous, Mapping) else previous
    return Rung(record=record, changed=record != stored,
                alert=alert, deliveries=deliveries, note=note)
