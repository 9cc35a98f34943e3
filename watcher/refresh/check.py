"""``tocsin check``: validate the job table and compute every job's scorecard, writing nothing.

The check runs the refresh's own steps (:func:`watcher.refresh.workbook.evaluate_book` and
:func:`watcher.refresh.workbook.lay_out`), so it never passes a job that a refresh would refuse, and it
adds the package's structural problems (:func:`watcher.xlsx.package.validate`) -- without walking the
rows of tocsin's own sheets, which the next refresh rewrites anyway (their parts are still checked
against their size and CRC-32, and what surrounds their rows is checked).
"""
from __future__ import annotations

import datetime as dt
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from watcher.refresh.compute import JobOutcome
from watcher.refresh.texts import describe
from watcher.refresh.workbook import Progress, evaluate_book, lay_out
from watcher.xlsx import package

__all__ = ["CheckResult", "check_workbook"]


@dataclass(frozen=True)
class CheckResult:
    """What ``tocsin check`` found: the job table, each job's outcome, the package's problems, or the
    error that stopped the check."""

    path: Path
    table: Any = None
    outcomes: tuple[JobOutcome, ...] = ()
    problems: tuple[str, ...] = ()
    error: str | None = None

    @property
    def ok(self) -> bool:
        return (self.error is None and not self.problems and self.table is not None
                and not self.table.errors and all(o.error is None for o in self.outcomes))


def check_workbook(path: Path | str, *, progress: Progress = None) -> CheckResult:
    """Validate the job table and compute every job's scorecard; write nothing."""
    path = Path(path)
    try:
        pkg = package.Package.open(path)
        problems = _package_problems(path, pkg.owned)
        owned = {s.casefold() for s in pkg.owned}
        users = [s for s in pkg.sheet_names if s.casefold() not in owned]
        table, outcomes = evaluate_book(path, progress, taken=users)
    except (ValueError, OSError) as exc:     # every layer's errors are ValueErrors
        return CheckResult(path, error=describe(exc))
    now = dt.datetime.now().replace(microsecond=0)
    laid = tuple(lay_out(o, now)[0] for o in outcomes)   # the sheets are built and checked, not written
    return CheckResult(path, table, laid, problems)


def _package_problems(path: Path, owned) -> tuple[str, ...]:
    """The structural problems of the package, not looking at the rows of tocsin's own sheets
    (``owned``); a part the validator cannot even read (a damaged member: the parsers' own
    exceptions) is one problem, and the jobs are still checked."""
    try:
        return tuple(package.validate(path, skip_cells=owned))
    except (ValueError, OSError):
        raise
    except Exception as exc:
        return (f"a part of the package cannot be read ({type(exc).__name__}: {exc})",)
