"""Unit tests of the watcher's refresh worker and log, with synthetic refresh callables (no disk)."""
from __future__ import annotations

import io
import json
import threading
import time
from dataclasses import dataclass
from pathlib import Path

import pytest

from watcher.watch.log import WatchLog
from watcher.watch.worker import Outcome, RefreshWorker
from watcher.xlsx.errors import PackageError

A = Path("/share/ferry.xlsx")
B = Path("/share/bakery.xlsx")


def wait_for(predicate, timeout: float = 5.0) -> bool:
    deadline = time.monotonic() + timeout
    while not predicate():
        if time.monotonic() > deadline:
            return False
        time.sleep(0.005)
    return True


@dataclass(frozen=True)
class Job:
    name: str
    status: str
    message: str = ""
    next_forecast: float | None = None
    best_method: str | None = None


@dataclass(frozen=True)
class Report:
    path: Path
    status: str
    jobs: tuple = ()
    message: str = ""
    duration_s: float = 0.5


class Gate:
    """A refresh that blocks until released, recording who ran and how many ran at once."""

    def __init__(self) -> None:
        self.release = threading.Event()
        self.calls: list[Path] = []
        self.active = 0
        self.most_active = 0
        self.lock = threading.Lock()

    def __call__(self, path: Path, *, progress=None) -> Report:
        with self.lock:
            self.calls.append(path)
            self.active += 1
            self.most_active = max(self.most_active, self.active)
        try:
            while not self.release.wait(0.01):
                if progress is not None:
                    progress("computing")
        finally:
            with self.lock:
                self.active -= 1
        return Report(path, "refreshed", jobs=(Job("crowded", "ok"),))


def run(worker: RefreshWorker):
    worker.start()
    return worker


def test_a_path_saved_again_during_its_refresh_runs_once_more_after_never_twice_at_once():
    gate = Gate()
    outcomes: list[Outcome] = []
    worker = run(RefreshWorker(gate, on_outcome=outcomes.append, workers=2))
    try:
        worker.submit(A)
        assert wait_for(lambda: gate.calls == [A])
        worker.submit(A)  # ready again while running
        worker.submit(A)  # and again: still only one more run
        time.sleep(0.05)
        assert gate.calls == [A] and gate.most_active == 1  # the second thread did not take A
        gate.release.set()
        assert wait_for(lambda: len(outcomes) == 2)
        time.sleep(0.05)
        assert gate.calls == [A, A]
        assert not worker.busy()
    finally:
        worker.stop()


def test_one_workbook_at_a_time_by_default():
    gate = Gate()
    outcomes: list[Outcome] = []
    worker = run(RefreshWorker(gate, on_outcome=outcomes.append))
    try:
        worker.submit(A)
        worker.submit(B)
        worker.submit(B)  # queued once
        assert wait_for(lambda: gate.calls == [A])
        gate.release.set()
        assert wait_for(lambda: len(outcomes) == 2)
        assert gate.most_active == 1 and gate.calls == [A, B]
        assert [o.status for o in outcomes] == ["refreshed", "refreshed"]
        assert outcomes[0].jobs[0].name == "crowded" and outcomes[0].duration_s == 0.5  # the report's
    finally:
        worker.stop()


def test_exceptions_become_failed_outcomes_and_the_worker_carries_on():
    def refresh(path, *, progress=None):
        if path == A:
            raise PackageError("'ferry.xlsx' is not a zip package")
        if path == B:
            raise KeyError("Passengers")
        return Report(path, "unchanged")

    outcomes: list[Outcome] = []
    worker = run(RefreshWorker(refresh, on_outcome=outcomes.append))
    try:
        for path in (A, B, Path("/share/ok.xlsx")):
            worker.submit(path)
        assert wait_for(lambda: len(outcomes) == 3)
    finally:
        worker.stop()
    first, second, third = outcomes
    assert (first.status, first.message) == ("failed", "'ferry.xlsx' is not a zip package")
    assert first.traceback is None  # an expected error: its message says it all
    assert second.status == "failed" and second.message == "unexpected error (KeyError: 'Passengers')"
    assert "Traceback" in second.traceback
    assert third.status == "unchanged"


def test_stop_drops_the_queue_and_abandons_a_long_refresh_through_progress():
    gate = Gate()  # never released: only the progress callback can end it
    outcomes: list[Outcome] = []
    worker = run(RefreshWorker(gate, on_outcome=outcomes.append))
    worker.submit(A)
    worker.submit(B)
    assert wait_for(lambda: gate.calls == [A])
    started = time.monotonic()
    dropped, clean = worker.stop(grace=0.2, abandon_wait=2.0)
    assert time.monotonic() - started < 1.5
    assert dropped == [B] and clean
    assert [o.status for o in outcomes] == ["abandoned"]
    assert gate.calls == [A]


def test_a_write_error_of_another_layer_is_a_failed_outcome_without_traceback():
    """The writer's exception family is its own (ValueError subclasses): a failed write is an expected
    error, logged with its message, and the next workbook is refreshed."""
    class WriteError(ValueError):   # stands for the writer's family, which is not the core's
        pass

    def refresh(path, *, progress=None):
        if path == A:
            raise WriteError("cannot write 'ferry.xlsx': No space left on device")
        return Report(path, "refreshed")

    outcomes: list[Outcome] = []
    worker = run(RefreshWorker(refresh, on_outcome=outcomes.append))
    try:
        worker.submit(A)
        worker.submit(B)
        assert wait_for(lambda: len(outcomes) == 2)
    finally:
        worker.stop()
    assert [(o.path, o.status) for o in outcomes] == [(A, "failed"), (B, "refreshed")]
    assert outcomes[0].message == "cannot write 'ferry.xlsx': No space left on device"
    assert outcomes[0].traceback is None


class LongStep:
    """A refresh that, after its last progress call, runs a long step that never calls progress (a
    long computation, or -- with ``final`` -- a long write), cleaning up after itself as the package
    writer does (its temporary file removed on any exception)."""

    def __init__(self, *, final: bool, step_s: float) -> None:
        self.final, self.step_s = final, step_s
        self.started = threading.Event()
        self.cleaned = threading.Event()
        self.finished = threading.Event()

    def __call__(self, path: Path, *, progress=None) -> Report:
        progress("last call", final=self.final)
        self.started.set()
        try:
            end = time.monotonic() + self.step_s
            while time.monotonic() < end:
                sum(range(1000))        # busy in Python, never calling progress
        except BaseException:
            self.cleaned.set()
            raise
        self.finished.set()
        return Report(path, "refreshed")


def test_stop_abandons_a_long_step_that_never_calls_progress():
    step = LongStep(final=False, step_s=60.0)
    outcomes: list[Outcome] = []
    worker = run(RefreshWorker(step, on_outcome=outcomes.append))
    worker.submit(A)
    assert step.started.wait(5)
    started = time.monotonic()
    dropped, clean = worker.stop(grace=0.2, abandon_wait=1.0)
    assert time.monotonic() - started < 2.0
    assert clean and step.cleaned.is_set() and not step.finished.is_set()
    assert [o.status for o in outcomes] == ["abandoned"]


def test_stop_lets_a_write_finish_within_write_grace_then_abandons_a_longer_one():
    short = LongStep(final=True, step_s=1.0)     # longer than grace, shorter than write_grace
    outcomes: list[Outcome] = []
    worker = run(RefreshWorker(short, on_outcome=outcomes.append))
    worker.submit(A)
    assert short.started.wait(5)
    dropped, clean = worker.stop(grace=0.1, write_grace=5.0, abandon_wait=1.0)
    assert clean and short.finished.is_set() and [o.status for o in outcomes] == ["refreshed"]

    long = LongStep(final=True, step_s=60.0)
    outcomes.clear()
    worker = run(RefreshWorker(long, on_outcome=outcomes.append))
    worker.submit(A)
    assert long.started.wait(5)
    started = time.monotonic()
    dropped, clean = worker.stop(grace=0.1, write_grace=0.5, abandon_wait=1.0)
    assert time.monotonic() - started < 2.5
    assert clean and long.cleaned.is_set() and [o.status for o in outcomes] == ["abandoned"]


def test_stop_lets_a_short_refresh_finish():
    gate = Gate()
    outcomes: list[Outcome] = []
    worker = run(RefreshWorker(gate, on_outcome=outcomes.append))
    worker.submit(A)
    assert wait_for(lambda: gate.calls == [A])
    threading.Timer(0.1, gate.release.set).start()
    dropped, clean = worker.stop(grace=2.0)
    assert dropped == [] and clean
    assert [o.status for o in outcomes] == ["refreshed"]


def test_a_path_no_longer_ready_is_deferred_not_refreshed():
    calls: list[Path] = []
    deferred: list[Path] = []
    worker = run(RefreshWorker(lambda p, progress=None: calls.append(p) or Report(p, "refreshed"),
                               on_outcome=lambda o: None, still_ready=lambda p: p != A,
                               on_deferred=deferred.append))
    try:
        worker.submit(A)
        worker.submit(B)
        assert wait_for(lambda: calls == [B] and deferred == [A])
    finally:
        worker.stop()


def test_log_lines_and_json_records(tmp_path):
    stream = io.StringIO()
    log = WatchLog(stream, tmp_path / "log.jsonl")
    log.outcome(Outcome(A, "refreshed", "", 1.234, jobs=Outcome.from_report(A, Report(A, "refreshed", jobs=(
        Job("crowded", "ok", next_forecast=float("nan"), best_method="majority vote"),
        Job("alarms", "failed", "`event` must be a criterion; got 'lots' in row 3 of sheet tocsin"),
    )), 0.0).jobs))
    log.outcome(Outcome(B, "unchanged", "", 0.01))
    log.event("waiting", "waiting ...", workbook=str(B), owner_file=Path("/share/~$bakery.xlsx"))
    log.close()
    lines = stream.getvalue().splitlines()
    assert "refreshed  /share/ferry.xlsx  2 jobs (1 failed)  1.23 s" in lines[0]
    assert lines[1] == ("    job 'alarms' failed: `event` must be a criterion; got 'lots' in row 3 of "
                        "sheet tocsin")
    assert not any("bakery" in line and "unchanged" in line for line in lines)  # file only
    records = [json.loads(x) for x in (tmp_path / "log.jsonl").read_text().splitlines()]
    assert [r["event"] for r in records] == ["refresh", "refresh", "waiting"]
    assert records[0]["jobs"][0] == {"name": "crowded", "status": "ok", "message": "",
                                     "next_forecast": None, "best_method": "majority vote",
                                     "next_period": None, "warnings": [], "future": [], "alert": None}
    assert records[1]["status"] == "unchanged"
    assert records[2]["owner_file"] == "/share/~$bakery.xlsx"


@pytest.mark.parametrize("module", ["watcher.watch.service", "watcher.cli.command"])
def test_importing_the_watcher_and_the_command_stays_light(module):
    # `tocsin --help` builds the watch parser: no watchdog or computation stack until it starts (the
    # lazy imports' comments give the measured cost)
    import subprocess
    import sys

    code = (f"import sys, {module}; print(sorted(m for m in ('watchdog', 'pandas', "
            "'statsmodels', 'numpy', 'scipy', 'openpyxl', 'watcher.refresh.workbook') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60,
                         cwd=Path(__file__).resolve().parent.parent)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "[]"


def test_workbook_without_job_table_is_told_once(tmp_path):
    """A workbook with no job table in a watched folder: one line on stderr, not one per save."""
    import io

    from watcher.watch.log import WatchLog
    from watcher.watch.worker import Outcome

    stream = io.StringIO()
    log = WatchLog(stream, tmp_path / "log.jsonl")
    book = tmp_path / "notes.xlsx"
    for _ in range(3):
        log.outcome(Outcome(book, "nojobs", "notes.xlsx has no job table", 0.01))
    log.close()
    assert stream.getvalue().count("nojobs") == 1
    assert (tmp_path / "log.jsonl").read_text().count('"nojobs"') == 3
