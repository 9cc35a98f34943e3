"""Unit tests of the watcher's name rules, event forwarding and debouncer, with synthetic events.

Nothing here touches the disk: the debouncer looks through a fake probe, and events are watchdog event
objects built in the test. Owner-file names follow the two families of spreadsheet programs (common
practice: ``~$name`` beside an open workbook, LibreOffice's ``.~lock.name#``).
"""
from __future__ import annotations

import functools
import threading
import time
from pathlib import Path

import pytest
from test_watch import wait_for as _wait_for
from watchdog.events import (
    DirModifiedEvent,
    FileClosedEvent,
    FileClosedNoWriteEvent,
    FileCreatedEvent,
    FileDeletedEvent,
    FileModifiedEvent,
    FileMovedEvent,
    FileOpenedEvent,
)

from watcher.watch.debounce import Debouncer
from watcher.watch.service import _Forwarder
from watcher.xlsx.names import is_workbook_name, owner_file_candidates, workbook_of_owner_file

QUIET = 0.1
BOOK = Path("/share/ferry.xlsx")
OTHER = Path("/share/bakery.xlsm")


# the shared helper, with a shorter deadline and a finer poll: no disk here, only synthetic events
wait_for = functools.partial(_wait_for, timeout=5.0, interval=0.005)


class FakeProbe:
    """Answers the debouncer's questions from dictionaries the test changes while it runs."""

    def __init__(self) -> None:
        self.stats: dict[Path, object] = {}
        self.owners: dict[Path, Path] = {}
        self.incomplete: set[Path] = set()
        self.looks: list[tuple[str, Path]] = []
        self.on_stat = None

    def owner(self, path: Path) -> Path | None:
        self.looks.append(("owner", path))
        return self.owners.get(path)

    def stat(self, path: Path):
        self.looks.append(("stat", path))
        if self.on_stat is not None:
            self.on_stat(path)
        return self.stats.get(path)

    def complete(self, path: Path) -> bool:
        self.looks.append(("complete", path))
        return path not in self.incomplete


class Recorder:
    def __init__(self) -> None:
        self.ready: list[tuple[Path, float]] = []
        self.waiting: list[tuple[Path, Path]] = []
        self.resumed: list[Path] = []
        self.rejected: list[tuple[Path, str]] = []

    def paths(self) -> list[Path]:
        return [p for p, _ in self.ready]


@pytest.fixture
def rig():
    probe = FakeProbe()
    probe.stats = {BOOK: (100, 1, 7), OTHER: (200, 2, 8)}
    rec = Recorder()
    made: list[Debouncer] = []

    def make(**kwargs) -> Debouncer:
        deb = Debouncer(
            lambda p: rec.ready.append((p, time.monotonic())), quiet=kwargs.pop("quiet", QUIET), probe=probe,
            on_waiting=lambda p, o: rec.waiting.append((p, o)), on_resumed=rec.resumed.append,
            on_rejected=lambda p, why: rec.rejected.append((p, why)),
            owner_poll=kwargs.pop("owner_poll", 0.02), **kwargs,
        )
        deb.start()
        made.append(deb)
        return deb

    yield make, probe, rec
    for deb in made:
        deb.stop()


# -- name rules ----------------------------------------------------------------------------------------
@pytest.mark.parametrize(("name", "expected"), [
    ("ferry.xlsx", True), ("Pumps.XLSM", True), ("a b.xlsx", True),
    ("~$ferry.xlsx", False), (".~lock.ferry.xlsx#", False), ("ferry.tmp", False), ("ferry.xlsx.tmp", False),
    (".tocsin-3f2a.tmp", False), (".tocsin-ferry.xlsx", False), ("ferry.xls", False), ("ferry.csv", False),
    ("ferry.xlsb", False), ("ferry", False),
])
def test_workbook_names(name, expected):
    assert is_workbook_name(name) is expected


def test_owner_files_map_back_to_their_workbook():
    assert workbook_of_owner_file(Path("/s/~$ferry.xlsx")) == Path("/s/ferry.xlsx")
    assert workbook_of_owner_file(Path("/s/.~lock.ferry.xlsx#")) == Path("/s/ferry.xlsx")
    assert workbook_of_owner_file(Path("/s/ferry.xlsx")) is None
    assert workbook_of_owner_file(Path("/s/~$notes.txt")) is None
    names = [p.name for p in owner_file_candidates(Path("/s/passengers.xlsx"))]
    assert names == ["~$passengers.xlsx", "~$ssengers.xlsx", ".~lock.passengers.xlsx#"]


# -- the handler ---------------------------------------------------------------------------------------
def test_forwarder_passes_paths_of_writes_and_moves_only():
    seen: list[str] = []
    fwd = _Forwarder(seen.append)
    fwd.dispatch(FileCreatedEvent("/s/a.xlsx"))
    fwd.dispatch(FileModifiedEvent("/s/b.xlsx"))
    fwd.dispatch(FileMovedEvent("/s/~tmp123.tmp", "/s/c.xlsx"))
    fwd.dispatch(FileClosedEvent("/s/d.xlsx"))
    fwd.dispatch(FileDeletedEvent("/s/~$e.xlsx"))
    # reads (ours included) and directory events are not forwarded: no feedback from our own looks
    fwd.dispatch(FileOpenedEvent("/s/x.xlsx"))
    fwd.dispatch(FileClosedNoWriteEvent("/s/x.xlsx"))
    fwd.dispatch(DirModifiedEvent("/s"))
    assert seen == ["/s/a.xlsx", "/s/b.xlsx", "/s/~tmp123.tmp", "/s/c.xlsx", "/s/d.xlsx", "/s/~$e.xlsx"]


# -- the debouncer -------------------------------------------------------------------------------------
def test_burst_of_events_gives_one_hand_over_after_quiet(rig):
    make, probe, rec = rig
    deb = make()
    for _ in range(10):
        deb.submit(BOOK)
        last = time.monotonic()
        time.sleep(QUIET / 5)
    assert wait_for(lambda: rec.ready)
    time.sleep(2 * QUIET)
    assert rec.paths() == [BOOK]
    assert rec.ready[0][1] >= last + QUIET
    assert deb.pending() == []


def test_every_event_restarts_the_wait(rig):
    make, probe, rec = rig
    deb = make()
    first = time.monotonic()
    for _ in range(6):  # gaps of 0.6 quiet: never quiet long enough until the last one
        deb.submit(BOOK)
        time.sleep(0.6 * QUIET)
        assert rec.ready == []
    assert wait_for(lambda: rec.ready)
    assert rec.ready[0][1] - first >= 5 * 0.6 * QUIET + QUIET


def test_paths_are_debounced_independently(rig):
    make, probe, rec = rig
    deb = make()
    deb.submit(BOOK)
    time.sleep(QUIET / 2)
    deb.submit(OTHER)
    assert wait_for(lambda: len(rec.ready) == 2)
    assert rec.paths() == [BOOK, OTHER]


def test_size_or_mtime_still_changing_holds_the_path_back(rig):
    make, probe, rec = rig
    deb = make()
    sizes = iter(range(1000, 1005))

    def growing(path):  # a copy in progress with no events arriving (a network share)
        size = next(sizes, 1004)
        probe.stats[path] = (size, size, 7)

    probe.on_stat = growing
    deb.submit(BOOK)
    assert wait_for(lambda: rec.ready)
    stat_looks = [kind for kind, _ in probe.looks if kind == "stat"]
    assert len(stat_looks) >= 6  # five changing looks, then one that matched the previous
    assert rec.paths() == [BOOK]


def test_incomplete_package_is_retried_then_rejected_once(rig):
    make, probe, rec = rig
    deb = make()
    probe.incomplete.add(BOOK)
    deb.submit(BOOK)
    assert wait_for(lambda: rec.rejected)
    time.sleep(2 * QUIET)
    assert [p for p, _ in rec.rejected] == [BOOK]
    assert "complete workbook package" in rec.rejected[0][1]
    assert rec.ready == []
    assert [k for k, _ in probe.looks].count("complete") == 2
    # the next save is complete: it goes through
    probe.incomplete.clear()
    deb.submit(BOOK)
    assert wait_for(lambda: rec.ready)
    assert rec.paths() == [BOOK]


def test_package_completed_on_second_look_is_not_rejected(rig):
    make, probe, rec = rig
    deb = make()
    probe.incomplete.add(BOOK)
    original = probe.complete

    def complete_later(path):
        answer = original(path)
        probe.incomplete.discard(path)
        return answer

    probe.complete = complete_later
    deb.submit(BOOK)
    assert wait_for(lambda: rec.ready)
    assert rec.rejected == []


def test_owner_file_holds_the_path_until_it_is_gone(rig):
    make, probe, rec = rig
    deb = make(owner_poll=0.02)
    owner = BOOK.with_name("~$ferry.xlsx")
    probe.owners[BOOK] = owner
    deb.submit(BOOK)
    assert wait_for(lambda: [k for k, _ in probe.looks].count("owner") >= 5)  # polled several times
    assert rec.waiting == [(BOOK, owner)]  # said once
    assert rec.ready == []
    deb.submit(BOOK)  # another save while open: still one waiting line
    time.sleep(2 * QUIET)
    assert rec.waiting == [(BOOK, owner)]
    del probe.owners[BOOK]
    closed = time.monotonic()
    assert wait_for(lambda: rec.ready)
    assert rec.resumed == [BOOK]
    assert rec.paths() == [BOOK]
    assert rec.ready[0][1] >= closed + QUIET  # the program may write on close: quiet again first


def test_vanished_file_is_dropped_silently(rig):
    make, probe, rec = rig
    deb = make()
    gone = Path("/share/deleted.xlsx")
    deb.submit(gone)
    assert wait_for(lambda: ("stat", gone) in probe.looks)
    assert wait_for(lambda: deb.pending() == [])
    assert rec.ready == [] and rec.rejected == []


def test_event_arriving_during_a_look_wins(rig):
    make, probe, rec = rig
    deb = make()
    state = {"fired": False, "at": 0.0}

    def event_meanwhile(path):
        if not state["fired"]:
            state["fired"] = True
            state["at"] = time.monotonic()
            deb.submit(path)

    probe.on_stat = event_meanwhile
    deb.submit(BOOK)
    assert wait_for(lambda: rec.ready)
    time.sleep(2 * QUIET)
    assert rec.paths() == [BOOK]
    assert rec.ready[0][1] >= state["at"] + QUIET


def test_zero_delay_submission_is_prompt(rig):
    make, probe, rec = rig
    deb = make(quiet=1.0)
    start = time.monotonic()
    deb.submit(BOOK, delay=0.0)
    assert wait_for(lambda: rec.ready)
    assert rec.ready[0][1] - start < 0.5  # only the settle look, no quiet wait


def test_failing_callback_does_not_stop_the_debouncer(rig):
    make, probe, rec = rig
    calls: list[Path] = []

    def ready(path):
        calls.append(path)
        if path == BOOK:
            raise RuntimeError("boom")

    deb = Debouncer(ready, quiet=QUIET, probe=probe)
    deb.start()
    try:
        deb.submit(BOOK)
        assert wait_for(lambda: calls == [BOOK])
        deb.submit(OTHER)
        assert wait_for(lambda: calls == [BOOK, OTHER])
    finally:
        deb.stop()


def test_stop_drops_pending_paths_and_ends_the_thread(rig):
    make, probe, rec = rig
    deb = make(quiet=5.0)
    deb.submit(BOOK)
    deb.submit(OTHER)
    before = time.monotonic()
    assert sorted(deb.stop()) == sorted([BOOK, OTHER])
    assert time.monotonic() - before < 1.0
    assert not any(t.name == "tocsin-debouncer" and t.is_alive() for t in threading.enumerate())
    deb.submit(BOOK)  # after stop: ignored
    assert deb.pending() == []
    assert rec.ready == []


def test_negative_quiet_is_refused():
    with pytest.raises(ValueError, match="`quiet` must be a number of seconds >= 0; got -1"):
        Debouncer(lambda p: None, quiet=-1, probe=FakeProbe())


def test_size_and_mtime_look_adds_no_delay_to_the_quiet_wait(rig):
    make, probe, rec = rig
    deb = make(quiet=0.3)  # settle 0.2: first look at 0.1 s, second (equal) look at 0.3 s
    deb.submit(BOOK)
    submitted = time.monotonic()
    assert wait_for(lambda: rec.ready)
    assert 0.3 <= rec.ready[0][1] - submitted < 0.3 + 0.1
    assert [kind for kind, _ in probe.looks].count("stat") == 2
