"""``tocsin watch --workers N``: independent workbooks refreshed in parallel worker processes, never two
refreshes of one workbook at once; a worker process that dies is a failed refresh and is replaced.

The refresh here (``TimedRefresh``, invented for these tests) writes nothing: it notes when it began and
ended and in which process, so the overlap of refreshes can be read back from its notes.
"""
from __future__ import annotations

import os
import time
from dataclasses import dataclass
from pathlib import Path

import pytest
from test_watch import FakeJob, FakeReport, Rig, save_by_rename, wait_for

from watcher.cli.watch import default_workers


@pytest.fixture
def share(tmp_path: Path) -> Path:
    folder = tmp_path.resolve() / "share"
    folder.mkdir()
    return folder


@dataclass(frozen=True)
class TimedRefresh:
    """Computes for ``compute_s`` seconds and notes (start, end, pid) in ``notes``; a workbook named
    crash*.xlsx ends its process."""

    notes: str
    compute_s: float = 0.8

    def __call__(self, path: Path, *, force: bool = False, progress=None) -> FakeReport:
        if path.name.startswith("crash"):
            os._exit(3)
        start = time.time()
        end = time.monotonic() + self.compute_s
        while time.monotonic() < end:
            if progress is not None:
                progress("compute")
            time.sleep(0.01)
        note = Path(self.notes) / f"{path.stem}-{time.monotonic_ns()}.txt"
        note.write_text(f"{path.name} {start} {time.time()} {os.getpid()}")
        return FakeReport(path, "refreshed", jobs=(FakeJob("crowded"),))

    def intervals(self) -> list[tuple[str, float, float, int]]:
        out = []
        for f in Path(self.notes).glob("*.txt"):
            name, a, b, pid = f.read_text().split()
            out.append((name, float(a), float(b), int(pid)))
        return sorted(out, key=lambda r: r[1])


def test_independent_workbooks_in_parallel_processes_never_one_workbook_twice(share, tmp_path):
    notes = tmp_path / "notes"
    notes.mkdir()
    refresh = TimedRefresh(str(notes))
    books = [share / f"book{i}.xlsx" for i in range(4)]
    with Rig(share, refresh=refresh, workers=2, quiet=0.2, initial=False) as rig:
        assert "2 worker processes" in rig.stream.getvalue()
        for book in books:
            save_by_rename(book, "v1")
        time.sleep(0.3)
        save_by_rename(books[0], "v2")  # saved again while (or before) it is refreshed
        assert wait_for(lambda: len(refresh.intervals()) >= 5 and rig.watcher.idle(), timeout=60), \
            refresh.intervals()
    got = refresh.intervals()
    assert {name for name, *_ in got} == {b.name for b in books}
    assert os.getpid() not in {pid for *_, pid in got} and len({pid for *_, pid in got}) == 2
    overlaps = [(a, b) for i, a in enumerate(got) for b in got[i + 1:] if b[1] < a[2]]
    assert overlaps, "no two workbooks were refreshed at the same time"
    assert all(a[0] != b[0] for a, b in overlaps), "one workbook was refreshed twice at once"
    events = sorted([(a, 1) for _, a, _, _ in got] + [(b, -1) for _, _, b, _ in got])
    running = [0]
    for _, step in events:
        running.append(running[-1] + step)
    assert max(running) == 2  # two workers: two at once, never more


def test_a_dying_worker_process_is_a_failed_refresh_and_is_replaced(share, tmp_path):
    notes = tmp_path / "notes"
    notes.mkdir()
    refresh = TimedRefresh(str(notes), compute_s=0.05)
    with Rig(share, refresh=refresh, workers=2, quiet=0.2, initial=False) as rig:
        save_by_rename(share / "crash.xlsx", "v1")
        assert wait_for(lambda: any(r["status"] == "failed" for r in rig.events("refresh")), timeout=60)
        [failed] = [r for r in rig.events("refresh") if r["status"] == "failed"]
        assert "ended unexpectedly (exit code 3)" in failed["message"]
        for i in range(3):
            save_by_rename(share / f"ok{i}.xlsx", "v1")
        assert wait_for(lambda: len(refresh.intervals()) == 3 and rig.watcher.idle(), timeout=60)


def test_unpicklable_refresh_runs_on_threads(share):
    # a refresh that cannot be sent to a process (a closure, as the tests' fakes with locks) keeps the
    # threads: the watcher still refreshes two workbooks at once, in its own process
    seen = []

    def refresh(path, *, force=False, progress=None):
        seen.append(os.getpid())
        return FakeReport(path, "refreshed")

    with Rig(share, refresh=refresh, workers=2, quiet=0.2, initial=False) as rig:
        assert "2 worker threads" in rig.stream.getvalue()
        save_by_rename(share / "a.xlsx", "v1")
        assert wait_for(lambda: seen and rig.watcher.idle(), timeout=30)
    assert set(seen) == {os.getpid()}


def test_default_workers_is_the_cores_at_most_four():
    assert default_workers() == max(1, min(os.cpu_count() or 1, 4))


def test_worker_processes_do_not_run_the_watchers_main_script_again(tmp_path):
    # a watcher started from a script read on stdin (no file to import again, no __main__ guard): the
    # worker processes start from watcher.watch.procs alone, never from the caller's main script
    import subprocess
    import sys

    (tmp_path / "share").mkdir()
    (tmp_path / "notes").mkdir()
    script = f"""
import sys, time
sys.path.insert(0, {str(Path(__file__).parent)!r})
from test_watch import save_by_rename, wait_for
from test_watch_procs import TimedRefresh
from watcher.watch.log import WatchLog
from watcher.watch.service import Watcher
refresh = TimedRefresh({str(tmp_path / "notes")!r}, compute_s=0.05)
share = __import__("pathlib").Path({str(tmp_path / "share")!r})
with Watcher([share], refresh=refresh, workers=2, quiet=0.2, initial=False, log=WatchLog(None)) as w:
    for i in range(3):
        save_by_rename(share / f"b{{i}}.xlsx", "v1")
    ok = wait_for(lambda: len(refresh.intervals()) == 3 and w.idle(), timeout=60)
print("MAIN RAN", ok)
"""
    out = subprocess.run([sys.executable, "-"], input=script, capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    assert out.stdout.count("MAIN RAN") == 1 and "MAIN RAN True" in out.stdout
    assert "Traceback" not in out.stderr
