"""The watcher as a process: SIGTERM and Ctrl-C stop it within a few seconds with exit code 0.

A subprocess runs ``watcher.cli.watch.main_watch`` on a temporary folder with the contract-keeping fake
refresh of ``test_watch`` (its computing time set per test), so the signal can land while it is idle,
while a refresh is computing for a long time (abandoned cleanly: nothing written, no temporary left) or
just before the write of a short refresh (finished within the grace period).
"""
from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
import zipfile
from pathlib import Path

import pytest
from test_watch import MARKER, digest_of, save_by_rename, wait_for

pytestmark = pytest.mark.skipif(not hasattr(signal, "SIGTERM") or os.name == "nt",
                                reason="POSIX signals")

TESTS = Path(__file__).resolve().parent
ROOT = TESTS.parent
SCRIPT = """
import sys
from pathlib import Path
sys.path.insert(0, sys.argv[1])
from test_watch import FakeRefresh
from watcher.cli.watch import main_watch
fake = FakeRefresh(compute_s=float(sys.argv[4]), started_dir=Path(sys.argv[3]), write_s=float(sys.argv[6]))
sys.exit(main_watch([sys.argv[2]], quiet=0.2, initial=False, log=sys.argv[5], refresh=fake,
                    write_grace=float(sys.argv[7]), workers=int(sys.argv[8])))
"""
WORKERS = [pytest.param(1, id="thread"), pytest.param(2, id="processes")]


class Proc:
    def __init__(self, tmp_path: Path, compute_s: float, write_s: float = 0.0,
                 write_grace: float = 10.0, workers: int = 1, new_group: bool = False) -> None:
        self.share = tmp_path.resolve() / "share"
        self.share.mkdir()
        self.markers = tmp_path / "markers"
        self.markers.mkdir()
        self.log = tmp_path / "log.jsonl"
        env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")]))
        self.popen = subprocess.Popen(
            [sys.executable, "-c", SCRIPT, str(TESTS), str(self.share), str(self.markers), str(compute_s),
             str(self.log), str(write_s), str(write_grace), str(workers)],
            env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, start_new_session=new_group)
        assert wait_for(lambda: self.events("start") or self.popen.poll() is not None, timeout=30)
        assert self.popen.poll() is None, self.popen.communicate()

    def events(self, kind: str) -> list[dict]:
        if not self.log.exists():
            return []
        lines = self.log.read_text(encoding="utf-8").splitlines()
        return [r for r in map(json.loads, lines) if r["event"] == kind]

    def signal_and_wait(self, signum: int, limit: float, group: bool = False) -> tuple[int, float, str]:
        sent = time.monotonic()
        if group:  # as a terminal's Ctrl-C or systemd's stop: every process of the group gets it
            os.killpg(self.popen.pid, signum)
        else:
            self.popen.send_signal(signum)
        try:
            _out, err = self.popen.communicate(timeout=limit + 10)
        except subprocess.TimeoutExpired:
            self.popen.kill()
            self.popen.communicate()
            pytest.fail(f"the watcher did not exit within {limit + 10} s of the signal")
        return self.popen.returncode, time.monotonic() - sent, err

    def kill(self) -> None:
        if self.popen.poll() is None:
            self.popen.kill()
            self.popen.communicate()


@pytest.fixture
def proc_factory(tmp_path):
    made: list[Proc] = []

    def make(compute_s: float, **kwargs) -> Proc:
        proc = Proc(tmp_path, compute_s, **kwargs)
        made.append(proc)
        return proc

    yield make
    for proc in made:
        proc.kill()


@pytest.mark.parametrize(("signum", "reason"), [(signal.SIGTERM, "stopped (SIGTERM)"),
                                                (signal.SIGINT, "stopped (Ctrl-C)")])
def test_idle_watcher_exits_zero_on_signal(proc_factory, signum, reason):
    proc = proc_factory(compute_s=0.01)
    code, took, err = proc.signal_and_wait(signum, limit=3.0)
    assert code == 0 and took < 3.0, err
    assert "tocsin watch: watching" in err and reason in err
    assert "Traceback" not in err
    [stop] = proc.events("stop")
    assert stop["reason"] == reason and stop["clean"] is True


@pytest.mark.parametrize("workers", WORKERS)
def test_long_refresh_in_flight_is_abandoned_cleanly(proc_factory, workers):
    proc = proc_factory(compute_s=60.0, workers=workers)
    book = proc.share / "ferry.xlsx"
    save_by_rename(book, "today")
    saved = book.read_bytes()
    assert wait_for(lambda: (proc.markers / "started-ferry.xlsx").exists(), timeout=15)
    code, took, err = proc.signal_and_wait(signal.SIGTERM, limit=6.0)
    assert code == 0 and took < 6.0, err
    assert book.read_bytes() == saved  # nothing written
    assert not list(proc.share.glob(".tocsin-*.tmp"))
    [attempt] = proc.events("refresh")
    assert attempt["status"] == "abandoned" and attempt["workbook"] == str(book)
    [stop] = proc.events("stop")
    assert stop["clean"] is True


@pytest.mark.parametrize("workers", WORKERS)
def test_short_refresh_in_flight_finishes_its_write(proc_factory, workers):
    proc = proc_factory(compute_s=1.0, workers=workers)
    book = proc.share / "ferry.xlsx"
    save_by_rename(book, "today")
    assert wait_for(lambda: (proc.markers / "started-ferry.xlsx").exists(), timeout=15)
    code, took, err = proc.signal_and_wait(signal.SIGTERM, limit=4.0)
    assert code == 0 and took < 4.0, err
    with zipfile.ZipFile(book) as z:
        assert z.read(MARKER).decode() == digest_of("today")
    assert [r["status"] for r in proc.events("refresh")] == ["refreshed"]


@pytest.mark.parametrize("workers", WORKERS)
def test_long_write_in_flight_is_abandoned_within_the_stop_time_and_leaves_nothing(proc_factory, workers):
    """A write that outlasts the write grace (here 1 s; 10 s by default) gets RefreshAbandoned raised
    in its thread (or its worker process): the temporary file goes, the workbook is the one that was
    saved, exit 0."""
    proc = proc_factory(compute_s=0.01, write_s=60.0, write_grace=1.0, workers=workers)
    book = proc.share / "ferry.xlsx"
    save_by_rename(book, "today")
    saved = book.read_bytes()
    assert wait_for(lambda: (proc.markers / "writing-ferry.xlsx").exists(), timeout=15)
    assert wait_for(lambda: len(list(proc.share.glob(".tocsin-*.tmp"))) == 1, timeout=5)
    code, took, err = proc.signal_and_wait(signal.SIGTERM, limit=6.0)
    assert code == 0 and took < 6.0, err
    assert book.read_bytes() == saved
    assert not list(proc.share.glob(".tocsin-*.tmp"))
    [attempt] = proc.events("refresh")
    assert attempt["status"] == "abandoned"
    [stop] = proc.events("stop")
    assert stop["clean"] is True


def test_bad_path_is_an_error_message_not_a_traceback(tmp_path):
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")]))
    run = subprocess.run([sys.executable, "-m", "watcher.cli", "watch", str(tmp_path / "nowhere"),
                          "--quiet", "0.5"],
                         env=env, capture_output=True, text=True, timeout=60)
    assert run.returncode == 2
    assert run.stderr.startswith("error: `PATH` must be an existing folder or workbook;")
    assert "Traceback" not in run.stderr
    bad = subprocess.run([sys.executable, "-m", "watcher.cli", "watch", str(tmp_path), "--poll", "soon"],
                         env=env, capture_output=True, text=True, timeout=60)
    assert bad.returncode == 2 and "`--poll` must be a number of seconds > 0; got 'soon'" in bad.stderr


@pytest.mark.parametrize("signum", [signal.SIGTERM, signal.SIGINT])
def test_signal_to_the_whole_group_leaves_the_write_to_the_watcher(proc_factory, signum):
    # worker processes ignore a signal that reaches them directly (systemd's stop, a terminal's Ctrl-C)
    # until the watcher asks them to abandon: the short refresh in flight still finishes its write
    proc = proc_factory(compute_s=1.5, workers=2, new_group=True)
    book = proc.share / "ferry.xlsx"
    save_by_rename(book, "today")
    assert wait_for(lambda: (proc.markers / "started-ferry.xlsx").exists(), timeout=30)
    code, took, err = proc.signal_and_wait(signum, limit=4.0, group=True)
    assert code == 0 and took < 4.0, err
    assert "2 worker processes" in err and "Traceback" not in err
    with zipfile.ZipFile(book) as z:
        assert z.read(MARKER).decode() == digest_of("today")
    assert [r["status"] for r in proc.events("refresh")] == ["refreshed"]
    [stop] = proc.events("stop")
    assert stop["clean"] is True
