"""The report of one refresh: what happened to the workbook (:class:`RefreshReport`) and to each job
(:class:`JobReport`). The command prints it (``watcher.cli.tables``), the watcher logs it.

Workbook statuses: "refreshed" (written), "unchanged" (inputs as at the last refresh; nothing written),
"failed" (the workbook could not be read or written; ``message`` says why), "conflict" (the file changed
while computing; nothing written), "busy" (open in a spreadsheet program), "readonly" (the file is marked
read-only: left alone), "nojobs" (no job table). Job statuses: "ok", "unchanged", "failed".
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from watcher.refresh.compute import JobOutcome, summary

__all__ = ["JobReport", "RefreshReport", "job_report"]


@dataclass(frozen=True)
class JobReport:
    """The outcome of one job."""

    name: str
    status: str  # "ok", "failed" or "unchanged"
    message: str = ""
    next_forecast: float | None = None  # probability of the event in the next period (best method)
    next_period: str | None = None
    best_method: str | None = None
    sheet: str | None = None
    evaluation: Any = field(default=None, repr=False, compare=False)


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


def job_report(o: JobOutcome, records: dict[str, dict]) -> JobReport:
    """The report of one job: from the outcome, or from the state recorded when it is unchanged."""
    rec = summary(o) if not o.unchanged else records.get(o.name, {})
    status = "unchanged" if o.unchanged else "ok"
    if o.error is not None or rec.get("error"):
        # a blocked job (its sheet is a user's, or another job's) has no sheet of its own
        return JobReport(o.name, "failed", o.error or rec.get("error", ""),
                         sheet=None if o.blocked else o.sheet)
    return JobReport(o.name, status, rec.get("verdict", ""), next_forecast=rec.get("next_probability"),
                     next_period=rec.get("next_period"), best_method=rec.get("best_method"), sheet=o.sheet,
                     evaluation=o.evaluation)
