"""One refresh of one workbook: read the job table and the data, compute every job, write tocsin's
sheets in one atomic package write, and report what happened.

* The inputs of every job (its row of the job table, the data columns it reads, the tocsin version)
  are fingerprinted; the fingerprints are stored in tocsin's own state inside the package. When every
  job's fingerprint matches and every output sheet is present, nothing is written ("unchanged"), so
  refreshing twice is a no-op and tocsin's own write never triggers another one.
* A job that fails (a bad setting, data that do not allow a forecast) gets its forecast sheet with
  the error in the status line; the other jobs go on.
* The file is written only if it is still the bytes that were read (``ConcurrentEditError`` ->
  status "conflict": someone saved meanwhile; the watcher retries).
"""
from __future__ import annotations

import dataclasses
import datetime as dt
import hashlib
import json
import math
import time
from collections.abc import Callable, Collection
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from sheetfns.errors import JobError, TocsinError
from watcher.xlsx.errors import ConcurrentEditError, XlsxError

VERSION = "0.1.0"
MAX_TABLE_ROWS = 1_048_575  # data rows below the row table's header (ECMA-376 Part 1, 18.3.1.73)
Progress = Callable[[str], None] | None


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
    status: str  # "refreshed", "unchanged", "failed", "conflict", "busy"
    jobs: tuple[JobReport, ...] = ()
    message: str = ""
    duration_s: float = 0.0

    @property
    def ok(self) -> bool:
        return self.status in ("refreshed", "unchanged") and all(j.status != "failed" for j in self.jobs)


# ----------------------------------------------------------------------------------------- computing

@dataclass(frozen=True)
class JobOutcome:
    """A computed (or failed) job, ready to be laid out."""

    job: Any  # jobs.Job or None when the row did not validate
    name: str
    sheet: str
    profile_sheet: str
    fingerprint: str
    error: str | None = None
    evaluation: Any = None
    data: Any = None
    events: Any = None
    values: Any = None
    profile: Any = None
    trend: Any = None
    notes: tuple[str, ...] = ()
    unchanged: bool = False  # inputs as recorded at the last refresh: not recomputed, sheets kept
    blocked: bool = False  # an output name is a user's sheet: nothing is written for this job


def _digest(job_settings: Any, data: Any) -> str:
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


def _settings_for(job: Any):
    from sheetfns.scorecard import Settings

    return Settings(horizon=job.horizon, season=job.season or 1, cycle=job.cycle,
                    harmonics=job.harmonics, lags=job.lags, refit=job.refit, cutoff=job.cutoff,
                    cost_false_alarm=job.cost_false_alarm, cost_miss=job.cost_miss,
                    weekday=job.frequency == "daily")


def compute_job(job: Any, data: Any) -> JobOutcome:
    """Resolve ``job`` against its data and run every method. Raises TocsinError on bad data."""
    from sheetfns import profile
    from sheetfns.events import flag
    from sheetfns.scorecard import evaluate
    from watcher.refresh import jobs as jobs_mod
    job = jobs_mod.resolve(job, data)
    raw = data.raw[job.value_column] if job.text_columns else data.columns[job.value_column]
    events = flag(raw, job.criterion, job.min_run)
    values = data.columns.get(job.value_column)
    shown = raw if job.text_columns else values  # the row table shows the text of a text criterion
    predictors = {data.names.get(p, p): data.columns[p] for p in job.predictors} or None
    known = {data.names.get(p, p): data.columns[p] for p in job.known_ahead} or None
    notes = list(data.warnings)
    # Without dates the reader cannot tell future rows (trailing rows are blank), so the periods
    # after the last observed row are added here: the next-period forecasts need them.
    pad = min(job.horizon, MAX_TABLE_ROWS - events.size) if data.dates is None and events.size and \
        not np.isnan(events[-1]) else 0
    if pad > 0:
        def more(a: Any) -> Any:
            fill = np.full(pad, None if a.dtype == object else np.nan, dtype=a.dtype)
            return np.concatenate([a, fill])

        events, raw = more(events), more(np.asarray(raw))
        values = more(values) if values is not None else None
        shown = more(np.asarray(shown)) if shown is not None else None
        predictors = {k: more(v) for k, v in predictors.items()} if predictors else None
        known = {k: more(v) for k, v in known.items()} if known else None
        first = events.size - pad + 1
        rows = f"rows {first}-{events.size}: the periods" if pad > 1 else f"row {first}: the period"
        notes.append(f"{rows} after the last data row (the job has no date column)")
    use_values = None
    if values is not None:
        obs = values[~np.isnan(values)]
        if obs.size and not np.isin(obs, (0.0, 1.0)).all():
            use_values = values  # a 0/1 column would enter the model twice (as events and values)
    ev = evaluate(events, train_size=job.train_size, settings=_settings_for(job), dates=data.dates,
                  values=use_values, predictors=predictors, known_ahead=known)
    table = trend = None
    if data.dates is not None:
        by = {"quarterly": "quarter", "weekly": "month"}.get(job.frequency or "", "month")
        table = profile.rate_table(data.dates, events, by=by)
        try:
            trend = profile.seasonal_trend(table, degree=2)
        except TocsinError:
            trend = None
    return JobOutcome(job=job, name=job.name, sheet=job.output_sheet, profile_sheet=job.profile_sheet,
                      fingerprint="", evaluation=ev, data=data, events=events,
                      values=shown if shown is not None else events, profile=table, trend=trend,
                      notes=tuple(notes))


def _event_text(job: Any, data: Any) -> str:
    name = data.names.get(job.value_column, job.value_column) if data is not None else job.value_column
    run = f", held {job.min_run} periods in a row" if job.min_run > 1 else ""
    return f"{name} {job.event}{run}"


# ----------------------------------------------------------------------------------------- the sheets

def _sheets_for(outcome: JobOutcome, refreshed_at: dt.datetime) -> list[Any]:
    from watcher.refresh import layout
    job, data = outcome.job, outcome.data
    ctx = layout.SheetContext(
        job=outcome.name, sheet=outcome.sheet, profile_sheet=outcome.profile_sheet,
        data_sheet=job.data_sheet if job is not None else "?",
        value_name=(data.names.get(job.value_column, job.value_column) if data is not None and job
                    else "value"),
        event_text=_event_text(job, data) if job is not None else "",
        horizon=job.horizon if job is not None else 1, refreshed_at=refreshed_at, notes=outcome.notes)
    if outcome.blocked:
        return []
    if outcome.error is not None:
        return [layout.failed_sheet(ctx, outcome.error)]
    sheets = [layout.forecast_sheet(ctx, outcome.evaluation, dates=data.dates, values=outcome.values,
                                    events=outcome.events)]
    if outcome.profile is not None:
        sheets.append(layout.profile_sheet(ctx, outcome.profile, outcome.trend, outcome.evaluation))
    return sheets


def _summary(o: JobOutcome) -> dict[str, Any]:
    """What the report says of a job, recorded in the state so an unchanged job reports it too."""
    from sheetfns.scorecard import METHOD_LABELS

    if o.error is not None:
        return {"error": o.error}
    ev = o.evaluation
    best = METHOD_LABELS.get(ev.best) if ev.best else None
    out: dict[str, Any] = {"verdict": ev.verdict, "best_method": best, "next_period": None,
                           "next_probability": None}
    if ev.last_observed + 1 < ev.n:
        d = o.data.dates
        out["next_period"] = (str(d[ev.last_observed + 1].astype("datetime64[D]")) if d is not None
                              else f"row {ev.last_observed + 2}")
        if ev.best is not None:
            p = ev.headline()[ev.best][1]
            out["next_probability"] = None if math.isnan(p) else p
    return out


def _job_report(o: JobOutcome, records: dict[str, dict]) -> JobReport:
    rec = _summary(o) if not o.unchanged else records.get(o.name, {})
    status = "unchanged" if o.unchanged else "ok"
    if o.error is not None or rec.get("error"):
        # a blocked job (its sheet is a user's, or another job's) has no sheet of its own
        return JobReport(o.name, "failed", o.error or rec.get("error", ""),
                         sheet=None if o.blocked else o.sheet)
    return JobReport(o.name, status, rec.get("verdict", ""), next_forecast=rec.get("next_probability"),
                     next_period=rec.get("next_period"), best_method=rec.get("best_method"), sheet=o.sheet,
                     evaluation=o.evaluation)


def _blocked(name: str, row: int, sheets: tuple[str, ...], taken: set[str],
             known: dict[str, str]) -> JobOutcome | None:
    """The outcome of a job one of whose output sheets is a user's sheet (None when none is)."""
    clash = next((s for s in sheets if s.casefold() in taken), None)
    if clash is None:
        return None
    msg = (f"sheet {clash!r} is not tocsin's (tocsin did not create it), so tocsin does not write "
           f"over it: rename that sheet, or set another `output_sheet` in row {row} of sheet tocsin")
    fp = _digest(["blocked", clash, msg], None)
    return JobOutcome(None, name, sheets[0], sheets[-1], fp, error=msg, blocked=True,
                      unchanged=known.get(name) == fp)


def evaluate_book(path: Path, progress: Progress = None, *, known: dict[str, str] | None = None,
                  taken: Collection[str] = ()) -> tuple[Any, list[JobOutcome]]:
    """Read the job table and compute every job (nothing is written). Returns (job table, outcomes).

    ``known`` maps job names to the input fingerprints recorded at the last refresh: a job whose
    fingerprint matches is not computed again (its outcome has ``unchanged`` set). ``taken`` holds
    the names of the user's sheets: a job whose output sheet is one of them fails without a sheet
    (``blocked``), and the other jobs go on."""
    from watcher.refresh import jobs as jobs_mod
    from watcher.refresh.reader import Book

    known = known or {}
    taken = {t.casefold() for t in taken}
    outcomes: list[JobOutcome] = []
    with Book(path) as book:
        table = jobs_mod.read_job_table(book)
        # a failed row's red sheet must not take a sheet or a record that another job has (two rows
        # with one job name): such a row is reported under "<name> (row N)" and gets no sheet
        names = {j.name.casefold() for j in table.jobs}
        claimed = {s.casefold() for j in table.jobs for s in (j.output_sheet, j.profile_sheet)}
        for row, errs in table.failed().items():
            name = next((e.job for e in errs if e.job), None)
            if name is None:
                continue
            sheet, prof = jobs_mod.output_names(name)
            if name.casefold() in names:
                name = f"{name} (row {row})"
            names.add(name.casefold())
            blocked = _blocked(name, row, (sheet,), taken, known)
            if blocked is not None:
                outcomes.append(blocked)
                continue
            msg = "; ".join(e.message for e in errs)
            fp = _digest(["error", msg], None)
            outcomes.append(JobOutcome(None, name, sheet, prof, fp, error=msg,
                                       blocked=sheet.casefold() in claimed, unchanged=known.get(name) == fp))
            claimed.add(sheet.casefold())
        for i, job in enumerate(table.jobs, 1):
            sheets = (job.output_sheet,) + ((job.profile_sheet,) if job.date_column is not None else ())
            blocked = _blocked(job.name, job.row, sheets, taken, known)
            if blocked is not None:
                outcomes.append(dataclasses.replace(blocked, job=job, profile_sheet=job.profile_sheet))
                continue
            if progress:
                progress(f"{path.name}: job {i}/{len(table.jobs)} '{job.name}'")
            try:
                data = book.read(job.data_sheet, job.columns, date_column=job.date_column,
                                 text_columns=job.text_columns)
            except (TocsinError, XlsxError) as exc:
                fp = _digest([dict(job.settings), str(exc)], None)
                outcomes.append(JobOutcome(job, job.name, job.output_sheet, job.profile_sheet, fp,
                                           error=str(exc), unchanged=known.get(job.name) == fp))
                continue
            fp = _digest(dict(job.settings), data)
            if known.get(job.name) == fp:
                outcomes.append(JobOutcome(job, job.name, job.output_sheet, job.profile_sheet, fp,
                                           unchanged=True))
                continue
            try:
                outcome = compute_job(job, data)
            except TocsinError as exc:
                outcomes.append(JobOutcome(job, job.name, job.output_sheet, job.profile_sheet, fp,
                                           error=str(exc), data=data))
                continue
            outcomes.append(dataclasses.replace(outcome, fingerprint=fp))
    return table, outcomes


def refresh_workbook(path: Path | str, *, force: bool = False, progress: Progress = None) -> RefreshReport:
    """Refresh every job of the workbook at ``path``; never raises for a bad workbook or job.

    Statuses: "refreshed" (written), "unchanged" (inputs as at the last refresh; nothing written),
    "failed" (the workbook could not be read or written; ``message`` says why), "conflict" (the file
    changed while computing; nothing written), "busy" (open in a spreadsheet program), "nojobs"
    (the workbook has no job table: nothing to do, and an error for a workbook named on purpose).
    """
    from watcher.refresh import jobs as jobs_mod
    from watcher.xlsx import package
    from watcher.xlsx.names import owner_file

    path = Path(path)
    start = time.monotonic()

    def done(status: str, jobs: tuple[JobReport, ...] = (), message: str = "") -> RefreshReport:
        return RefreshReport(path, status, jobs, message, time.monotonic() - start)

    owner = owner_file(path)
    if owner is not None:
        return done("busy", message=f"open in a spreadsheet program ({owner.name} present); "
                                    "left alone until it is closed")
    try:
        pkg = package.Package.open(path)
        if not any(s.casefold() == jobs_mod.TABLE_SHEET for s in pkg.sheet_names):
            return done("nojobs", message=f"{path.name} has no job table: add a sheet named "
                                          f"{jobs_mod.TABLE_SHEET!r} (or run `tocsin init`)")
        state = dict(pkg.state or {})
        old: dict[str, dict] = state.get("jobs", {})
        owned = {s.casefold() for s in pkg.owned}

        def intact(name: str) -> bool:  # recorded, and its sheets still there and tocsin's
            rec = old.get(name)
            return rec is not None and all(s.casefold() in owned for s in rec.get("sheets", []))

        known = {} if force else {n: r["fingerprint"] for n, r in old.items() if intact(n)}
        users = [s for s in pkg.sheet_names if s.casefold() not in owned]
        table, outcomes = evaluate_book(path, progress, known=known, taken=users)
    except (TocsinError, XlsxError, OSError) as exc:
        return done("failed", message=_message(exc))
    disabled = {d.name for d in table.disabled if d.name}
    current = {o.name for o in outcomes} | (disabled & set(old))
    if all(o.unchanged for o in outcomes) and current == set(old):
        return done("unchanged", tuple(_job_report(o, old) for o in outcomes),
                    "inputs unchanged since the last refresh")
    refreshed_at = dt.datetime.now().replace(microsecond=0)
    new: dict[str, dict] = {n: old[n] for n in disabled if n in old}  # a disabled job keeps its sheets
    sheets: list[Any] = []
    for i, o in enumerate(outcomes):
        if o.unchanged:
            new[o.name] = old[o.name]
            continue
        try:
            specs = _sheets_for(o, refreshed_at)
        except (TocsinError, XlsxError) as exc:  # a layout problem of one job must not stop the others
            outcomes[i] = o = dataclasses.replace(o, error=f"could not lay out the sheet: {exc}")
            specs = _sheets_for(o, refreshed_at)
        sheets.extend(specs)
        new[o.name] = {"fingerprint": o.fingerprint, "sheets": [sp.name for sp in specs],
                       **_summary(o)}
    keep = {s.casefold() for rec in new.values() for s in rec.get("sheets", [])}
    remove = [s for s in pkg.owned if s.casefold() not in keep]
    state["jobs"] = new
    state["version"] = VERSION
    try:
        package.write(path, sheets, state=state, remove=remove, expect=pkg.fingerprint)
    except ConcurrentEditError as exc:
        return done("conflict", message=str(exc))
    except (TocsinError, XlsxError, OSError) as exc:
        return done("failed", tuple(_job_report(o, new) for o in outcomes), _message(exc))
    msg = "; ".join(e.message for e in table.errors if not e.job)
    return done("refreshed", tuple(_job_report(o, new) for o in outcomes), msg)


def _message(exc: BaseException) -> str:
    if isinstance(exc, FileNotFoundError):
        return f"{exc.filename}: no such file"
    if isinstance(exc, OSError):
        return f"{exc.filename or ''}: {exc.strerror or exc}".lstrip(": ")
    return str(exc)



# ----------------------------------------------------------------------------------------- check

@dataclass(frozen=True)
class CheckResult:
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
    from watcher.xlsx import package
    path = Path(path)
    try:
        problems = tuple(package.validate(path))
        pkg = package.Package.open(path)
        owned = {s.casefold() for s in pkg.owned}
        users = [s for s in pkg.sheet_names if s.casefold() not in owned]
        table, outcomes = evaluate_book(path, progress, taken=users)
    except (TocsinError, XlsxError, OSError) as exc:
        return CheckResult(path, error=_message(exc))
    return CheckResult(path, table, tuple(outcomes), problems)


# ----------------------------------------------------------------------------------------- init

def init_workbook(path: Path | str, *, sheet: str, value: str, event: str, date: str | None = None,
                  job: str | None = None) -> str:
    """Add a job table with one job to the workbook; return the job's name. Refuses when the
    workbook already has a sheet named 'tocsin'."""
    from sheetfns.events import parse_criterion
    from watcher.refresh import jobs as jobs_mod
    from watcher.refresh.reader import Book
    from watcher.xlsx import package
    from watcher.xlsx.spec import Cells, SheetSpec

    path = Path(path)
    parse_criterion(event)
    pkg = package.Package.open(path)
    if any(s.casefold() == jobs_mod.TABLE_SHEET for s in pkg.sheet_names):
        raise JobError(f"{path.name} already has a job table (sheet {jobs_mod.TABLE_SHEET!r}); edit it "
                       "to add jobs")
    with Book(path) as book:
        data_sheet = book.resolve_sheet(sheet)
        header = book.header(data_sheet)
        header.find(value, what="--value")
        if date is None:
            date = guess_date_column(book, data_sheet, header)
        elif date:
            header.find(date, what="--date")
    name = job or f"{value} {event}".strip()
    rows = jobs_mod.job_table_rows([{"job": name, "data_sheet": data_sheet, "date_column": date,
                                     "value_column": value, "event": event}])
    cells = tuple(tuple((v, "header" if i == 0 else "text" if isinstance(v, str) else "general")
                        for v in row) for i, row in enumerate(rows))
    spec = SheetSpec(jobs_mod.TABLE_SHEET, (Cells(0, 0, cells),), col_widths={0: 24, 1: 16, 3: 16, 4: 12})
    package.write(path, [spec], state=pkg.state, expect=pkg.fingerprint, owned=False)
    return name


def guess_date_column(book: Any, sheet: str, header: Any) -> str | None:
    """The first column whose header says 'date' / 'day' / 'week' / 'month', else the first column
    holding dates."""
    for text in header.texts:
        if text and text.strip().casefold() in ("date", "day", "week", "month", "period", "time"):
            return text
    for text in header.texts:
        if not text:
            continue
        try:
            data = book.read(sheet, [], date_column=text)
        except (TocsinError, XlsxError):
            continue
        if data.dates is not None and data.nrows and (data.dates == data.dates).mean() > 0.9:
            return text
    return None
