"""One refresh of one workbook: read the job table and the data, compute every job, write tocsin's
sheets in one atomic package write, and report what happened.

* The inputs of every job (its row of the job table, the data columns it reads, the tocsin version)
  are fingerprinted; the fingerprints are stored in tocsin's own state inside the package. When every
  job's fingerprint matches and every output sheet is present, nothing is written ("unchanged"), so
  refreshing twice is a no-op and tocsin's own write never triggers another one.
* Everything that can fail for one job (its settings, its data sheet's part, its columns, its data, the
  layout of its sheets) fails that job alone: it gets its forecast sheet with the error in the status
  line (or, when even that sheet cannot be written, no sheet), and the other jobs go on.
  :func:`evaluate_book` and :func:`lay_out` are shared with ``tocsin check``
  (:mod:`watcher.refresh.check`), so a check never passes what a refresh refuses.
* The file is written only if it is still the bytes that were read (a concurrent edit -> status
  "conflict": someone saved meanwhile; the watcher retries). A workbook marked read-only is left alone
  (status "readonly").
"""
from __future__ import annotations

import dataclasses
import datetime as dt
import logging
import os
import time
from collections.abc import Callable, Collection
from pathlib import Path
from typing import Any

from watcher.alert.deliver import Dispatcher
from watcher.refresh import forecast_sheet, layout
from watcher.refresh.alerts import RECORD_KEY, Rang, ring_jobs
from watcher.refresh.compute import JobOutcome, compute_job, digest, event_text
from watcher.refresh.jobs import TABLE_SHEET, JobTable, read_job_table
from watcher.refresh.parts import same_source, source_key
from watcher.refresh.reader import Book
from watcher.refresh.report import JobReport, RefreshReport, job_record, job_report
from watcher.refresh.settings import Row
from watcher.refresh.sheetnames import output_names
from watcher.refresh.texts import VERSION, describe
from watcher.xlsx import package
from watcher.xlsx.errors import ConcurrentEditError
from watcher.xlsx.names import owner_file

__all__ = ["Progress", "evaluate_book", "lay_out", "refresh_workbook"]

Progress = Callable[..., None] | None
"""``progress(message, *, final=False)``: called before each job and, with ``final``, just before the
write; the watcher's callback may raise there to abandon the refresh."""
_logger = logging.getLogger(__name__)


# ----------------------------------------------------------------------------------------- the sheets

def _sheets_for(outcome: JobOutcome, refreshed_at: dt.datetime) -> list[Any]:
    job, data = outcome.job, outcome.data
    ctx = layout.SheetContext(
        job=outcome.name, sheet=outcome.sheet, profile_sheet=outcome.profile_sheet,
        data_sheet=job.data_sheet if job is not None else "?",
        value_name=(data.names.get(job.value_column, job.value_column) if data is not None and job
                    else "value"),
        event_text=event_text(job, data) if job is not None else "",
        horizon=job.horizon if job is not None else 1, refreshed_at=refreshed_at, notes=outcome.notes)
    if outcome.blocked:
        return []
    if outcome.error is not None:
        return [layout.failed_sheet(ctx, outcome.error)]
    sheets = [forecast_sheet.forecast_sheet(ctx, outcome.evaluation, dates=data.dates,
                                            values=outcome.values, events=outcome.events)]
    if outcome.profile is not None:
        sheets.append(layout.profile_sheet(ctx, outcome.profile, outcome.trend, outcome.evaluation))
    return sheets


def lay_out(outcome: JobOutcome, refreshed_at: dt.datetime) -> tuple[JobOutcome, list[Any]]:
    """The sheets of one outcome, checked as the writer will check them. A layout the writer would
    refuse fails that job alone: it gets its failed sheet instead, or no sheet when even that one cannot
    be written. Returns the (possibly failed) outcome and its sheets."""
    try:
        return outcome, _sheets_for(outcome, refreshed_at)
    except ValueError as exc:   # the sheet spec's own checks (the writer's rules)
        outcome = dataclasses.replace(outcome, error=f"could not lay out the sheet: {exc}")
    try:
        return outcome, _sheets_for(outcome, refreshed_at)
    except ValueError:
        return dataclasses.replace(outcome, blocked=True), []


# ----------------------------------------------------------------------------------------- computing

def _blocked(name: str, row: int, sheets: tuple[str, ...], taken: set[str],
             known: dict[str, str]) -> JobOutcome | None:
    """The outcome of a job one of whose output sheets is a user's sheet (None when none is)."""
    clash = next((s for s in sheets if s.casefold() in taken), None)
    if clash is None:
        return None
    msg = (f"sheet {clash!r} is not tocsin's (tocsin did not create it), so tocsin does not write "
           f"over it: rename that sheet, or set another `output_sheet` in row {row} of sheet tocsin")
    fp = digest(["blocked", clash, msg], None)
    return JobOutcome(None, name, sheets[0], sheets[-1], fp, error=msg, blocked=True,
                      unchanged=known.get(name) == fp)


def _failed_rows(table: JobTable, taken: set[str], known: dict[str, str]) -> list[JobOutcome]:
    """One failed outcome per invalid row that has a name. Its red sheet must not take a sheet or a
    record that another job has (two rows with one job name): such a row is reported under
    "<name> (row N)" and gets no sheet."""
    outcomes = []
    names = {j.name.casefold() for j in table.jobs}
    claimed = {s.casefold() for j in table.jobs for s in (j.output_sheet, j.profile_sheet)}
    for row, errs in table.failed().items():
        name = next((e.job for e in errs if e.job), None)
        if name is None:
            continue
        sheet, prof = output_names(name)
        if name.casefold() in names:
            name = f"{name} (row {row})"
        names.add(name.casefold())
        blocked = _blocked(name, row, (sheet,), taken, known)
        if blocked is not None:
            outcomes.append(blocked)
            continue
        msg = "; ".join(e.message for e in errs)
        fp = digest(["error", msg], None)
        outcomes.append(JobOutcome(None, name, sheet, prof, fp, error=msg,
                                   blocked=sheet.casefold() in claimed, unchanged=known.get(name) == fp))
        claimed.add(sheet.casefold())
    return outcomes


def evaluate_book(path: Path, progress: Progress = None, *, known: dict[str, str] | None = None,
                  taken: Collection[str] = (), sources: dict[str, Any] | None = None
                  ) -> tuple[JobTable, list[JobOutcome]]:
    """Read the job table and compute every job (nothing is written). Returns (job table, outcomes).

    ``known`` maps job names to the input fingerprints recorded at the last refresh: a job whose
    fingerprint matches is not computed again (its outcome has ``unchanged`` set). ``sources`` maps job
    names to the keys of their reads recorded then (:mod:`watcher.refresh.parts`): a known job whose
    key is the same is not even read. ``taken`` holds the names of the user's sheets: a job whose output
    sheet is one of them fails without a sheet (``blocked``), and the other jobs go on."""
    known = known or {}
    sources = sources or {}
    taken = {t.casefold() for t in taken}
    with Book(path) as book:
        table = read_job_table(book, user_sheets=taken)
        outcomes = _failed_rows(table, taken, known)
        for i, job in enumerate(table.jobs, 1):
            sheets = (job.output_sheet,) + ((job.profile_sheet,) if job.date_column is not None else ())
            blocked = _blocked(job.name, job.row, sheets, taken, known)
            if blocked is not None:
                outcomes.append(dataclasses.replace(blocked, job=job, profile_sheet=job.profile_sheet))
                continue
            if progress:
                progress(f"{path.name}: job {i}/{len(table.jobs)} '{job.name}'")
            outcomes.append(_evaluate_job(book, job, known, table.sheet, sources.get(job.name)))
    return table, outcomes


def _evaluate_job(book: Book, job: Any, known: dict[str, str], sheet: str, recorded: Any = None
                  ) -> JobOutcome:
    """Read and compute one job; whatever fails fails this job alone. A job whose read would see what
    it saw at the last refresh (``recorded``, see :func:`watcher.refresh.parts.same_source`) is not read."""
    def failed(message: str, fp: str, data: Any = None) -> JobOutcome:
        return JobOutcome(job, job.name, job.output_sheet, job.profile_sheet, fp, error=message, data=data,
                          unchanged=data is None and known.get(job.name) == fp)

    try:
        source = source_key(book.path, book.resolve_sheet(job.data_sheet), dict(job.settings))
    except ValueError:
        source = None
    if job.name in known and same_source(recorded, source, book.path):
        return JobOutcome(job, job.name, job.output_sheet, job.profile_sheet, known[job.name], unchanged=True,
                          source=source)
    try:
        data = book.read(job.data_sheet, job.columns, date_column=job.date_column,
                         text_columns=job.text_columns)
    except ValueError as exc:       # the reader's errors: a damaged sheet, columns without data
        msg = str(Row(dict(job.settings), job.row, sheet).bad(
            "data_sheet", "must name a sheet whose columns can be read", value=job.data_sheet, hint=str(exc)))
        return failed(msg, digest([dict(job.settings), msg], None))
    # the `alert` setting changes no sheet: turning alerts on or off rings (or silences) without a recompute
    fp = digest({k: v for k, v in job.settings if k != "alert"}, data)
    if known.get(job.name) == fp:
        return JobOutcome(job, job.name, job.output_sheet, job.profile_sheet, fp, unchanged=True)
    try:
        outcome = dataclasses.replace(compute_job(job, data), source=source)
    except ValueError as exc:       # the data do not allow a forecast (the message names the setting)
        return failed(str(exc), fp, data)
    except Exception as exc:        # a fault of ours: this job fails, the others go on
        _logger.debug("job %r failed", job.name, exc_info=True)
        return failed(f"internal error ({type(exc).__name__}: {exc}); the other jobs are not affected; "
                      "please report it", fp, data)
    return dataclasses.replace(outcome, fingerprint=fp)


# ----------------------------------------------------------------------------------------- refreshing

def _read_only(path: Path) -> bool:
    """Whether the workbook is marked read-only (no write permission bit at all), or this user may
    not write it."""
    try:
        mode = path.stat().st_mode
    except OSError:
        return False            # gone: opening it says so
    return mode & 0o222 == 0 or not os.access(path, os.W_OK)


def refresh_workbook(path: Path | str, *, force: bool = False, progress: Progress = None,
                     dispatcher: Dispatcher | None = None) -> RefreshReport:
    """Refresh every job of the workbook at ``path``; never raises for a bad workbook or job.

    Statuses are those of :mod:`watcher.refresh.report`. ``progress`` (see :data:`Progress`) is called
    before each job and before the write; the watcher's callback may raise there to abandon the refresh
    (nothing is written then). ``dispatcher`` says where alerts go (:mod:`watcher.refresh.alerts`; None:
    nowhere, the alert states are still kept). Every job rings on every refresh, unchanged ones on what
    was recorded last time; a delivery that fails is reported in the job's ``alert`` and never fails the
    refresh. When only the alert records changed, only tocsin's record is written (status "unchanged").
    """
    path = Path(path)
    start = time.monotonic()

    def done(status: str, jobs: tuple[JobReport, ...] = (), message: str = "", written=None) -> RefreshReport:
        return RefreshReport(path, status, jobs, message, time.monotonic() - start, written)

    owner = owner_file(path)
    if owner is not None:
        return done("busy", message=f"open in a spreadsheet program ({owner.name} present); "
                                    "left alone until it is closed")
    try:
        pkg = package.Package.open(path)
        if not any(s.casefold() == TABLE_SHEET for s in pkg.sheet_names):
            return done("nojobs", message=f"{path.name} has no job table: add a sheet named "
                                          f"{TABLE_SHEET!r} (or run `tocsin init`)")
        if _read_only(path):
            return done("readonly", message=f"{path.name} is read-only, so tocsin leaves it alone: make it "
                                            "writable (for the user who runs tocsin) to have it refreshed")
        state = dict(pkg.state or {})
        old: dict[str, dict] = state.get("jobs", {})
        owned = {s.casefold() for s in pkg.owned}

        def intact(name: str) -> bool:  # recorded, and its sheets still there and tocsin's
            rec = old.get(name)
            return rec is not None and all(s.casefold() in owned for s in rec.get("sheets", []))

        known = {} if force else {n: r["fingerprint"] for n, r in old.items() if intact(n)}
        sources = {n: old[n].get("source") for n in known}
        users = [s for s in pkg.sheet_names if s.casefold() not in owned]
        table, outcomes = evaluate_book(path, progress, known=known, taken=users, sources=sources)
    except (ValueError, OSError) as exc:     # every layer's errors are ValueErrors
        return done("failed", message=describe(exc))
    disabled = {d.name for d in table.disabled if d.name}
    current = {o.name for o in outcomes} | (disabled & set(old))
    if all(o.unchanged for o in outcomes) and current == set(old):
        rang = _ring(path, outcomes, old, old, dispatcher, progress)
        reports = tuple(job_report(o, old, rang[o.name].entry) for o in outcomes)
        if not any(r.changed for r in rang.values()):
            return done("unchanged", reports, "inputs unchanged since the last refresh")
        new = {n: _with_alert(r, rang.get(n)) for n, r in old.items()}
        status, msg, written = _write(path, pkg, [], {**state, "jobs": new}, (), progress)
        if status != "refreshed":
            return done(status, reports if status == "failed" else (), msg)
        return done("unchanged", reports, "inputs unchanged since the last refresh; the alert record was "
                                          "updated", written)
    refreshed_at = dt.datetime.now().replace(microsecond=0)
    new: dict[str, dict] = {n: old[n] for n in disabled if n in old}  # a disabled job keeps its sheets
    sheets: list[Any] = []
    for i, o in enumerate(outcomes):
        if o.unchanged:
            new[o.name] = old[o.name]
            continue
        outcomes[i], specs = lay_out(o, refreshed_at)
        sheets.extend(specs)
        new[o.name] = {"fingerprint": o.fingerprint, "sheets": [sp.name for sp in specs],
                       **job_record(outcomes[i]), **({"source": o.source} if o.source else {})}
    rang = _ring(path, outcomes, new, old, dispatcher, progress)
    new = {n: _with_alert(r, rang.get(n)) for n, r in new.items()}
    reports = tuple(job_report(o, new, rang[o.name].entry) for o in outcomes)
    keep = {s.casefold() for rec in new.values() for s in rec.get("sheets", [])}
    remove = [s for s in pkg.owned if s.casefold() not in keep]
    state["jobs"] = new
    state["version"] = VERSION
    status, msg, written = _write(path, pkg, sheets, state, remove, progress)
    if status != "refreshed":
        return done(status, reports if status == "failed" else (), msg)
    msg = "; ".join(e.message for e in table.errors if not e.job)
    return done("refreshed", reports, msg, written)


def _ring(path: Path, outcomes: list[JobOutcome], records: dict[str, dict], old: dict[str, dict],
          dispatcher: Dispatcher | None, progress: Progress) -> dict[str, Rang]:
    """Ring every job (:func:`watcher.refresh.alerts.ring_jobs`); with channels, say so first (the
    watcher may abandon the refresh there, before anything is sent)."""
    if progress and dispatcher is not None and dispatcher.channels:
        progress(f"{path.name}: alerts")
    return ring_jobs(path, outcomes, records, old, dispatcher)


def _with_alert(record: dict, rang: Rang | None) -> dict:
    """A job's entry of tocsin's record with the alert record ``rang`` keeps (a job not rung keeps its
    own: a disabled job)."""
    if rang is None:
        return record
    out = {k: v for k, v in record.items() if k != RECORD_KEY}
    if rang.record is not None:
        out[RECORD_KEY] = rang.record
    return out


def _write(path: Path, pkg: Any, sheets: list[Any], state: dict, remove: Any,
           progress: Progress) -> tuple[str, str, Any]:
    """The one write of a refresh: ("refreshed", "", the fingerprint the writer verified) or (status,
    message of what went wrong, None)."""
    if progress:
        progress(f"{path.name}: writing", final=True)   # the last point where it may be abandoned
    try:
        result = package.write(path, sheets, state=state, remove=remove, expect=pkg.fingerprint)
    except ConcurrentEditError as exc:
        return "conflict", str(exc), None
    except (ValueError, OSError) as exc:
        return "failed", describe(exc), None
    return "refreshed", "", result.fingerprint
