"""The alert state of one job and the decision whether it rings (DESIGN.md §13). Pure: dicts in, dicts out.

A job's *state* is what the alert method forecasts for the next future period: ``"event"`` or
``"no_event"``. It rings when the state changes: no event -> event is ``"raised"``, event -> no event is
``"cleared"``. The state is kept in tocsin's record in the workbook as a small JSON-able dict, the
**alert record**::

    {"state": "event",                  # the current state
     "method": "logistic",              # the method whose forecast it is
     "period": "2026-12-03",            # the period it is for (ISO date, or a row number)
     "announced": {"mail": "event",     # per channel: the state that channel was last told
                   "notify": "no_event"}}

``announced`` is kept per channel (``"notify"``: the ``--notify`` command, ``"mail"``: ``--mail-to``), apart
from ``state``, so that

* an unchanged state, ten saves, a ``--force`` refresh or a restart ring nothing (``announced`` equals
  ``state`` for every channel);
* a failed delivery leaves that channel's ``announced`` as it was, and the next decision retries it,
  while a channel that got the alert is not told twice;
* a state that flips back before a retry succeeds sends nothing (``announced`` equals ``state`` again);
* a channel never told anything counts as told "no_event": on the first sight of a job (no record) an
  event rings "raised" and no event rings nothing; a channel added later hears about an event already
  standing, and is never sent a "cleared" for an event it did not hear of;
* a channel not configured in this run keeps its ``announced`` untouched, so a refresh run without
  channels (a hand-run ``tocsin refresh`` beside the watcher) never swallows an alert the watcher is
  to deliver.

A job with nothing to ring on in this refresh (it failed, the alert method has no forecast for the next
period, no method beat the base rate with ``alert`` = ``best``) keeps its record as it was: a job broken
for one save does not ring "cleared" and then "raised" again. ``alert`` = ``off`` drops the record, so
turning it on again is a first sight.

Typical use (the refresh, once per job on every refresh, unchanged jobs included)::

    reading = next_reading(report_future, alert_method(setting, best_method))
    decision = decide(previous_record, reading, channels=dispatcher.channels)
    ... deliver decision.change to decision.pending ...
    record = settle(decision.record, delivered_channels)
"""
from __future__ import annotations

import math
from collections.abc import Collection, Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from watcher.alert.errors import AlertSettingError

__all__ = ["BEST", "CHANNELS", "CLEARED", "EVENT", "NO_EVENT", "OFF", "RAISED", "Decision", "Reading",
           "alert_method", "alert_setting", "decide", "next_reading", "settle"]

EVENT = "event"
NO_EVENT = "no_event"
RAISED = "raised"
CLEARED = "cleared"
BEST = "best"
OFF = "off"
CHANNELS = ("notify", "mail")
"""The delivery channels, by the option that configures them; the keys of a record's ``announced``."""

_STATES = (EVENT, NO_EVENT)


@dataclass(frozen=True)
class Reading:
    """The alert method's forecast for the next future period (one entry of the report's ``future``)."""

    method: str
    period: str | int  # ISO date, or the row number for a job without dates
    origin: str | int  # the last observed period the forecast was made from
    forecast: int  # 0 or 1
    probability: float | None  # None for a 0/1 method (it states no chance)

    @property
    def state(self) -> str:
        return EVENT if self.forecast == 1 else NO_EVENT


@dataclass(frozen=True)
class Decision:
    """What one refresh decided for one job.

    ``record`` is the record to keep (``None``: drop it); ``change`` is ``"raised"`` or ``"cleared"`` when
    some configured channel has not been told the current state, and ``pending`` names those channels.
    After delivering, :func:`settle` moves ``announced`` on for the channels that got it.
    """

    record: dict[str, Any] | None
    change: str | None = None
    pending: tuple[str, ...] = ()
    reading: Reading | None = None


def alert_setting(text: Any, *, methods: Collection[str]) -> str:
    """The job table's ``alert`` cell as a setting: ``"best"`` (blank), ``"off"`` or one of ``methods``.

    Case and surrounding blanks are ignored; spaces and hyphens read as underscores (as setting names do).

    Raises
    ------
    AlertSettingError
        Anything else; the message names the allowed values (the caller adds the row).
    """
    if text is None or (isinstance(text, float) and math.isnan(text)):
        return BEST
    if not isinstance(text, str):
        raise AlertSettingError(f"`alert` must be best, off or a method key ({', '.join(methods)}); "
                                f"got {text!r}")
    key = "_".join(text.strip().lower().replace("-", " ").split())
    if key == "":
        return BEST
    if key in (BEST, OFF) or key in methods:
        return key
    raise AlertSettingError(f"`alert` must be best, off or a method key ({', '.join(methods)}); "
                            f"got {text.strip()!r}")


def alert_method(setting: str, best_method: str | None) -> str | None:
    """The method whose forecast rings: the job's best method for ``"best"``, None for ``"off"`` (and for
    ``"best"`` when no method beat the base rate), else the named method."""
    if setting == OFF:
        return None
    if setting == BEST:
        return best_method or None
    return setting


def _scalar(value: Any) -> float | None:
    if value is None or isinstance(value, bool):
        return None
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return number if math.isfinite(number) else None


def next_reading(future: Sequence[Mapping[str, Any]] | None, method: str | None) -> Reading | None:
    """The ``method``'s forecast for the next future period, read from the report's ``future`` list.

    ``future`` is the report's list (DESIGN.md §8): one entry per future period in time order, each
    ``{"period", "origin", "forecasts": {method key: {"forecast": 0 or 1, "probability": p or None}}}``.
    None when there is no method, no future period, or no usable forecast of the method for the first one.
    The probability is taken as the report gives it (null for a 0/1 method): the rule of which method
    states a chance lives with the report, not here.
    """
    if not method or not future:
        return None
    first = future[0]
    if not isinstance(first, Mapping):
        return None
    forecasts = first.get("forecasts")
    entry = forecasts.get(method) if isinstance(forecasts, Mapping) else None
    if not isinstance(entry, Mapping):
        return None
    forecast = _scalar(entry.get("forecast"))
    if forecast not in (0.0, 1.0):
        return None
    probability = _scalar(entry.get("probability"))
    if probability is not None and not 0.0 <= probability <= 1.0:
        probability = None
    period, origin = first.get("period"), first.get("origin")
    if not isinstance(period, str | int) or isinstance(period, bool):
        return None
    if not isinstance(origin, str | int) or isinstance(origin, bool):
        origin = ""
    return Reading(method=method, period=period, origin=origin, forecast=int(forecast),
                   probability=probability)


def _load(previous: Any) -> dict[str, Any] | None:
    """A clean copy of a stored record, or None for no record or one that does not read (the record sits
    in the workbook, where anything can happen to it: a bad one counts as a first sight)."""
    if not isinstance(previous, Mapping) or previous.get("state") not in _STATES:
        return None
    announced = previous.get("announced")
    announced = announced if isinstance(announced, Mapping) else {}
    record: dict[str, Any] = {"state": previous["state"]}
    for key in ("method", "period"):
        value = previous.get(key)
        if isinstance(value, str | int) and not isinstance(value, bool):
            record[key] = value
    record["announced"] = {c: announced[c] for c in CHANNELS if announced.get(c) in _STATES}
    return record


def decide(previous: Mapping[str, Any] | None, reading: Reading | None, *, channels: Sequence[str] = (),
           setting: str = BEST) -> Decision:
    """Decide one job's alert from its stored record and its current reading.

    Parameters
    ----------
    previous : dict or None
        The job's alert record from tocsin's record in the workbook (None: first sight).
    reading : Reading or None
        :func:`next_reading` of the alert method; None when there is nothing to ring on this time.
    channels : sequence of str
        The channels configured in this run (:attr:`Dispatcher.channels`); others keep their
        ``announced`` untouched.
    setting : str
        The job's ``alert`` setting; ``"off"`` drops the record and rings nothing.
    """
    if setting == OFF:
        return Decision(record=None)
    old = _load(previous)
    if reading is None:
        return Decision(record=old)
    announced = dict(old["announced"]) if old else {}
    state = reading.state
    pending = tuple(c for c in channels if c in CHANNELS and announced.get(c, NO_EVENT) != state)
    record = {"state": state, "method": reading.method, "period": reading.period, "announced": announced}
    change = (RAISED if state == EVENT else CLEARED) if pending else None
    return Decision(record=record, change=change, pending=pending, reading=reading)


def settle(record: Mapping[str, Any] | None, delivered: Iterable[str]) -> dict[str, Any] | None:
    """The record after delivery: ``announced`` := ``state`` for each channel in ``delivered``."""
    if record is None:
        return None
    announced = dict(record.get("announced") or {})
    for channel in delivered:
        if channel in CHANNELS:
            announced[channel] = record["state"]
    return {**record, "announced": announced}
