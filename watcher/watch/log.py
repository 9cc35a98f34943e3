"""The watcher's log: one human line per event on stderr, and optionally a JSON-lines file.

Every refresh gives one line: local time, status, workbook, jobs, duration (and a line per failed job
naming it); an "unchanged" answer (nothing to do) is in the JSON file only. The JSON-lines file
(``--log FILE``) carries the same facts as one object per line, for a scheduler or a monitoring script
to read::

    {"time": "2026-05-09T10:11:12+02:00", "event": "refresh", "workbook": "/share/ferry.xlsx",
     "status": "refreshed", "duration_s": 0.84, "message": "", "jobs": [{"name": "crowded", ...}]}

Each job's entry carries the report's ``warnings``, ``future`` and ``alert`` (DESIGN.md §8, §13). An alert
that rang gives an "alert" event, a delivery that failed an "alert-failed" event (both also on stderr,
whatever the refresh's status: a retry of an unchanged workbook's alert is news).

Other events: "start" (what is watched and how), "alerts" (where alerts go), "waiting" (owner file
present), "resumed", "rejected" (incomplete package), "stop". The file is opened for appending and flushed
after every line.
"""
from __future__ import annotations

import json
import math
import sys
import threading
from datetime import datetime
from pathlib import Path
from typing import IO, Any

from watcher.watch.worker import Outcome

__all__ = ["WatchLog"]


def _plain(value: Any) -> Any:
    """A JSON-safe copy: NaN/inf -> None, paths and other objects -> str, containers recursively."""
    if value is None or isinstance(value, bool | int | str):
        return value
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_plain(v) for v in value]
    try:
        number = float(value)  # numpy scalars
    except (TypeError, ValueError):
        return str(value)
    return number if math.isfinite(number) else None


class WatchLog:
    """Write the watcher's events to a text stream and, if given, a JSON-lines file.

    Parameters
    ----------
    stream : text stream, optional
        Where human lines go (default ``sys.stderr``); None for no human lines.
    json_path : path-like, optional
        The JSON-lines file (appended to).
    """

    def __init__(self, stream: IO[str] | None = sys.stderr, json_path: str | Path | None = None) -> None:
        self._stream = stream
        self._lock = threading.Lock()
        self._json: IO[str] | None = None
        self._told_nojobs: set[str] = set()
        if json_path is not None:
            try:
                self._json = open(json_path, "a", encoding="utf-8")  # noqa: SIM115  (closed in close())
            except OSError as exc:
                raise OSError(f"cannot open the log file '{json_path}' for appending: "
                              f"{exc.strerror or exc}") from exc

    def close(self) -> None:
        """Close the JSON-lines file."""
        with self._lock:
            if self._json is not None:
                self._json.close()
                self._json = None

    def event(self, kind: str, text: str, *, on_stream: bool = True, **fields: Any) -> None:
        """Log one event: ``text`` on the stream, ``{"time", "event": kind, **fields}`` in the file."""
        now = datetime.now().astimezone()
        record = {"time": now.isoformat(timespec="milliseconds"), "event": kind}
        record.update({k: _plain(v) for k, v in fields.items()})
        with self._lock:
            if self._stream is not None and on_stream:
                try:
                    self._stream.write(f"{now:%Y-%m-%d %H:%M:%S}  {text}\n")
                    self._stream.flush()
                except (OSError, ValueError):
                    pass  # a closed stderr must not stop the watcher
            if self._json is not None:
                self._json.write(json.dumps(record, ensure_ascii=False) + "\n")
                self._json.flush()

    def outcome(self, outcome: Outcome) -> None:
        """Log one refresh attempt (and one extra line per failed job).

        "unchanged" (nothing to do; tocsin's own write coming back is one) and "busy" (open in a
        spreadsheet program; the "waiting" line says so) go to the JSON file only, so the human log
        shows what was written or went wrong.
        """
        jobs = outcome.jobs
        failed = [job for job in jobs if job.status == "failed"]
        if not jobs:
            jobs_text = "no jobs run"
        elif failed:
            jobs_text = f"{len(jobs)} job{'s' * (len(jobs) != 1)} ({len(failed)} failed)"
        else:
            jobs_text = f"{len(jobs)} job{'s' * (len(jobs) != 1)} ok"
        text = f"{outcome.status:<9}  {outcome.path}  {jobs_text}  {outcome.duration_s:.2f} s"
        if outcome.message:
            text += f"  {outcome.message}"
        for job in failed:
            text += f"\n    job '{job.name}' {job.status}: {job.message}"
        fields: dict[str, Any] = {
            "workbook": str(outcome.path),
            "status": outcome.status,
            "duration_s": round(outcome.duration_s, 4),
            "message": outcome.message,
            "jobs": [
                {"name": j.name, "status": j.status, "message": j.message,
                 "next_forecast": j.next_forecast, "best_method": j.best_method,
                 "next_period": j.next_period, "warnings": list(j.warnings), "future": list(j.future),
                 "alert": j.alert}
                for j in jobs
            ],
        }
        if outcome.traceback:
            fields["traceback"] = outcome.traceback
        quiet = outcome.status in ("unchanged", "busy")  # busy: the "waiting" line says it
        if outcome.status == "nojobs":  # a workbook without a job table: say so once, not per save
            quiet = str(outcome.path) in self._told_nojobs
            self._told_nojobs.add(str(outcome.path))
        self.event("refresh", text, on_stream=not quiet, **fields)
        for job in jobs:
            self._alert(outcome, job)

    def _alert(self, outcome: Outcome, job: Any) -> None:
        """An "alert" event for an alert that went out, an "alert-failed" event per failed delivery."""
        alert = job.alert if isinstance(job.alert, dict) else None
        if not alert:
            return
        fields = {"workbook": str(outcome.path), "job": job.name, "state": alert.get("rang"),
                  "method": alert.get("method"), "period": alert.get("period")}
        if alert.get("rang") and alert.get("delivered"):
            self.event("alert", f"alert      {outcome.path}  job '{job.name}' {alert['rang']} "
                                f"({alert.get('method')}, {alert.get('period')}): sent to "
                                f"{', '.join(alert['delivered'])}", channels=alert["delivered"], **fields)
        for failure in alert.get("failures") or ():
            self.event("alert-failed", f"alert failed  {outcome.path}  job '{job.name}': {failure}; tried "
                                       "again at the next refresh", message=failure, **fields)
