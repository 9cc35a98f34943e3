"""The watcher end to end with real files, real observers and a fake refresh that keeps the contract.

The fake (``FakeRefresh``) behaves like ``watcher.refresh.workbook.refresh_workbook`` as far as the watcher
can tell: it fingerprints the inputs (every zip member but its own marker), answers "unchanged" when the
fingerprint matches what it recorded (its own last write included), answers "conflict" when the file
changed while it computed, raises ``PackageError`` for a file that is not a zip, and otherwise writes a
marker member into the workbook atomically (``.tocsin-*.tmp`` in the same folder, then replace), as the
package writer does. Every test waits in bounded loops with timeouts.
"""
from __future__ import annotations

import hashlib
import io
import json
import os
import shutil
import threading
import time
import uuid
import zipfile
from dataclasses import dataclass
from pathlib import Path

import pytest

from watcher.watch.log import WatchLog
from watcher.watch.service import Watcher
from watcher.xlsx.errors import PackageError

QUIET = 0.4
MARKER = "tocsin/refreshed.txt"


# -- helpers shared with the other watcher tests -------------------------------------------------------
def wait_for(predicate, timeout: float = 15.0, interval: float = 0.02) -> bool:
    deadline = time.monotonic() + timeout
    while not predicate():
        if time.monotonic() > deadline:
            return False
        time.sleep(interval)
    return True


def workbook_bytes(content: str) -> bytes:
    """A small complete zip package that stands in for a saved workbook holding ``content``."""
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", zipfile.ZIP_DEFLATED) as z:
        z.writestr("[Content_Types].xml", '<?xml version="1.0"?><Types/>')
        z.writestr("xl/workbook.xml", "<workbook/>")
        z.writestr("xl/worksheets/sheet1.xml", f"<sheetData>{content}</sheetData>")
    return buf.getvalue()


def input_digest(path: Path) -> str:
    """The fingerprint of a workbook's inputs: every member except tocsin's own (``tocsin/...``)."""
    digest = hashlib.sha256()
    with zipfile.ZipFile(path) as z:
        for name in sorted(z.namelist()):
            if not name.startswith("tocsin/"):
                digest.update(name.encode() + b"\0" + z.read(name))
    return digest.hexdigest()


def digest_of(content: str) -> str:
    digest = hashlib.sha256()
    with zipfile.ZipFile(io.BytesIO(workbook_bytes(content))) as z:
        for name in sorted(z.namelist()):
            digest.update(name.encode() + b"\0" + z.read(name))
    return digest.hexdigest()


def save_by_rename(path: Path, content: str) -> None:
    """Save as spreadsheet programs do: write a temporary file beside the workbook, rename it over."""
    tmp = path.with_name(f"lu{uuid.uuid4().hex[:8]}.tmp")
    tmp.write_bytes(workbook_bytes(content))
    os.replace(tmp, path)


def save_by_swap(path: Path, content: str) -> None:
    """Save in three renames: new file to a temp name, old workbook aside, new one in, old one deleted."""
    new = path.with_name(uuid.uuid4().hex[:8].upper())
    new.write_bytes(workbook_bytes(content))
    old = path.with_name(uuid.uuid4().hex[:8].upper() + ".tmp")
    if path.exists():
        os.replace(path, old)
    os.replace(new, path)
    old.unlink(missing_ok=True)


def save_in_place(path: Path, content: str) -> None:
    """Overwrite the file in place, in chunks (truncate, then several writes)."""
    data = workbook_bytes(content)
    with open(path, "wb") as f:
        for i in range(0, len(data), 64):
            f.write(data[i:i + 64])
            f.flush()


@dataclass(frozen=True)
class FakeJob:
    name: str
    status: str = "ok"
    message: str = ""
    next_forecast: float | None = 0.25
    best_method: str | None = "logistic"


@dataclass(frozen=True)
class FakeReport:
    path: Path
    status: str
    jobs: tuple = ()
    message: str = ""
    duration_s: float = 0.0


@dataclass(frozen=True)
class Call:
    path: Path
    status: str
    digest: str | None


class FakeRefresh:
    """A refresh that keeps ``refresh_workbook``'s contract (see the module docstring)."""

    def __init__(self, compute_s: float = 0.02, fail: dict[str, Exception] | None = None,
                 started_dir: Path | None = None, write_s: float = 0.0) -> None:
        self.compute_s = compute_s
        self.write_s = write_s  # the write takes this long (padding streamed into the temporary file)
        self.fail = fail or {}
        self.started_dir = started_dir
        self.calls: list[Call] = []
        self.started = threading.Event()
        self._recorded: dict[Path, str] = {}
        self._lock = threading.Lock()

    def __getstate__(self) -> dict:
        # sent to a worker process (``workers`` > 1): the lock and the event stay behind, each process
        # keeps calls of its own
        return {k: v for k, v in self.__dict__.items() if k not in ("_lock", "started", "calls")}

    def __setstate__(self, state: dict) -> None:
        self.__dict__.update(state, _lock=threading.Lock(), started=threading.Event(), calls=[])

    def record_current(self, path: Path) -> None:
        """As if tocsin had refreshed ``path`` in an earlier run."""
        self._recorded[path] = input_digest(path)

    def refreshed(self, path: Path) -> list[str]:
        with self._lock:
            return [c.digest for c in self.calls if c.path == path and c.status == "refreshed"]

    def statuses(self, path: Path) -> list[str]:
        with self._lock:
            return [c.status for c in self.calls if c.path == path]

    def _note(self, path: Path, status: str, digest: str | None) -> None:
        with self._lock:
            self.calls.append(Call(path, status, digest))

    def __call__(self, path: Path, *, force: bool = False, progress=None) -> FakeReport:
        start = time.perf_counter()
        if path.name in self.fail:
            self._note(path, "raised", None)
            raise self.fail[path.name]
        try:
            before = os.stat(path)
            digest = input_digest(path)
        except (zipfile.BadZipFile, OSError) as exc:
            self._note(path, "raised", None)
            raise PackageError(f"'{path.name}' is not a workbook package ({exc})") from exc
        if not force and self._recorded.get(path) == digest:
            self._note(path, "unchanged", digest)
            return FakeReport(path, "unchanged", duration_s=time.perf_counter() - start)
        self.started.set()
        if self.started_dir is not None:
            (self.started_dir / f"started-{path.name}").write_text("1")
        end = time.monotonic() + self.compute_s
        while time.monotonic() < end:
            if progress is not None:
                progress("compute")
            time.sleep(min(0.02, max(end - time.monotonic(), 0)))
        if progress is not None:
            progress("write", final=True)  # as the real refresh: the last abandon point, the write follows
        tmp = path.with_name(f".tocsin-{uuid.uuid4().hex[:8]}.tmp")
        try:
            with zipfile.ZipFile(path) as src, zipfile.ZipFile(tmp, "w") as dst:
                for info in src.infolist():
                    if info.filename != MARKER:
                        dst.writestr(info, src.read(info))
                dst.writestr(MARKER, digest)
                if self.write_s:
                    if self.started_dir is not None:
                        (self.started_dir / f"writing-{path.name}").write_text("1")
                    end = time.monotonic() + self.write_s
                    with dst.open("tocsin/padding.bin", "w") as pad:
                        while time.monotonic() < end:
                            pad.write(bytes(65536))
                            time.sleep(0.01)
            after = os.stat(path)  # changed while computing? then write nothing
            if (after.st_size, after.st_mtime_ns, after.st_ino) != (before.st_size, before.st_mtime_ns,
                                                                      before.st_ino):
                self._note(path, "conflict", digest)
                return FakeReport(path, "conflict", message="changed while computing; nothing written")
            os.replace(tmp, path)
        finally:
            tmp.unlink(missing_ok=True)
        self._recorded[path] = digest  # the inputs of what was written (the marker is not an input)
        self._note(path, "refreshed", digest)
        return FakeReport(path, "refreshed", jobs=(FakeJob("crowded"), FakeJob("quiet day")),
                          duration_s=time.perf_counter() - start)


class Rig:
    """A watcher on a temporary folder with a fake refresh and a JSON log to read back."""

    def __init__(self, folder: Path, **kwargs) -> None:
        self.folder = folder
        self.refresh = kwargs.pop("refresh", None) or FakeRefresh()
        self.log_path = folder.parent / f"{folder.name}-log.jsonl"
        self.stream = kwargs.pop("stream", None) or io.StringIO()
        self.log = WatchLog(self.stream, self.log_path)
        self.watcher = Watcher(kwargs.pop("paths", [folder]), refresh=self.refresh,
                               quiet=kwargs.pop("quiet", QUIET), log=self.log, **kwargs)

    def events(self, kind: str | None = None) -> list[dict]:
        lines = self.log_path.read_text(encoding="utf-8").splitlines() if self.log_path.exists() else []
        records = [json.loads(line) for line in lines]
        return [r for r in records if kind is None or r["event"] == kind]

    def settle(self, path: Path, timeout: float = 15.0) -> None:
        """Wait until ``path`` was refreshed and tocsin's own write came back as "unchanged"."""
        def echoed() -> bool:
            statuses = self.refresh.statuses(path)
            return "refreshed" in statuses and statuses[-1] == "unchanged" and self.watcher.idle()
        assert wait_for(echoed, timeout), f"{path.name}: calls {self.refresh.statuses(path)}"

    def __enter__(self) -> Rig:
        self.watcher.start()
        return self

    def __exit__(self, *exc) -> None:
        self.watcher.stop()
        self.log.close()
        alive = [t.name for t in threading.enumerate() if t.name.startswith("tocsin-") and t.is_alive()]
        assert not alive, f"watcher threads still alive: {alive}"


@pytest.fixture
def share(tmp_path: Path) -> Path:
    folder = tmp_path.resolve() / "share"
    folder.mkdir()
    return folder


# -- saving like a person ------------------------------------------------------------------------------
@pytest.mark.parametrize("save", [save_by_rename, save_by_swap, save_in_place], ids=lambda f: f.__name__)
def test_one_save_gives_one_refresh_of_what_was_saved(share, save):
    book = share / "ferry.xlsx"
    book.write_bytes(workbook_bytes("old"))
    with Rig(share, initial=False) as rig:
        save(book, "today's rows")
        rig.settle(book)
        assert rig.refresh.refreshed(book) == [digest_of("today's rows")]
        with zipfile.ZipFile(book) as z:  # the marker on disk is of the final state
            assert z.read(MARKER).decode() == digest_of("today's rows")
        assert not list(share.glob(".tocsin-*.tmp"))
    [line] = rig.events("refresh")[:1]
    assert line["workbook"] == str(book) and line["status"] == "refreshed"
    assert [j["name"] for j in line["jobs"]] == ["crowded", "quiet day"]
    assert line["duration_s"] >= 0 and "time" in line
    assert "refreshed" in rig.stream.getvalue() and "2 jobs ok" in rig.stream.getvalue()


def test_copy_in_from_elsewhere(share, tmp_path):
    outside = tmp_path / "outside.xlsx"
    outside.write_bytes(workbook_bytes("copied"))
    with Rig(share, initial=False) as rig:
        book = share / "copied.xlsx"
        shutil.copy(outside, book)
        rig.settle(book)
        assert rig.refresh.refreshed(book) == [digest_of("copied")]


def test_burst_of_twenty_saves_in_two_seconds_gives_one_refresh_of_the_final_state(share):
    book = share / "bakery.xlsm"
    book.write_bytes(workbook_bytes("v0"))
    with Rig(share, initial=False, quiet=1.0) as rig:
        for i in range(1, 21):
            save_by_rename(book, f"v{i}")
            time.sleep(0.1)
        rig.settle(book)
        assert rig.refresh.refreshed(book) == [digest_of("v20")]


def test_subfolders_are_watched(share):
    deep = share / "2026" / "may"
    deep.mkdir(parents=True)
    with Rig(share, initial=False) as rig:
        book = deep / "pumps.xlsx"
        save_by_rename(book, "alarms")
        rig.settle(book)
        assert rig.refresh.refreshed(book) == [digest_of("alarms")]


def test_temporary_and_owner_files_are_not_workbooks(share):
    with Rig(share, initial=False) as rig:
        for name in ("~$ferry.xlsx", ".~lock.ferry.xlsx#", "ferry.tmp", ".tocsin-1a2b.tmp", "notes.txt",
                     "ferry.xls"):
            (share / name).write_bytes(workbook_bytes(name))
        book = share / "real.xlsx"
        save_by_rename(book, "x")  # a real one afterwards, to know the events above were seen
        rig.settle(book)
        assert {c.path for c in rig.refresh.calls} == {book}


def test_single_workbook_path_watches_that_workbook_only(share):
    book = share / "ferry.xlsx"
    other = share / "other.xlsx"
    book.write_bytes(workbook_bytes("a"))
    with Rig(share, paths=[book], initial=False) as rig:
        save_by_rename(other, "not watched")
        save_by_rename(book, "watched")
        rig.settle(book)
        assert {c.path for c in rig.refresh.calls} == {book}


# -- hands off while open ------------------------------------------------------------------------------
@pytest.mark.parametrize("owner_name", ["~$ferry_log.xlsx", ".~lock.ferry_log.xlsx#", "~$rry_log.xlsx"])
def test_open_workbook_waits_for_its_owner_file_then_one_refresh(share, owner_name):
    book = share / "ferry_log.xlsx"  # a long name (stem of 8 or more): the ~$ + name[2:] form counts too
    book.write_bytes(workbook_bytes("v0"))
    owner = share / owner_name
    with Rig(share, initial=False) as rig:
        owner.write_text("someone")
        save_by_rename(book, "v1")
        assert wait_for(lambda: rig.events("waiting"))
        time.sleep(QUIET + 0.3)  # well past quiet: still nothing written
        assert rig.refresh.calls == []
        with zipfile.ZipFile(book) as z:
            assert MARKER not in z.namelist()
        owner.unlink()
        rig.settle(book)
        assert rig.refresh.refreshed(book) == [digest_of("v1")]
        [waiting] = rig.events("waiting")
        assert waiting["workbook"] == str(book) and waiting["owner_file"] == str(owner)
        assert "is open elsewhere" in rig.stream.getvalue()


# -- bad files and failing refreshes -------------------------------------------------------------------
def test_damaged_file_then_good_one(share):
    with Rig(share, initial=False) as rig:
        (share / "garbage.xlsx").write_bytes(b"this is not a zip file at all" * 10)
        truncated = workbook_bytes("cut short")
        (share / "truncated.xlsx").write_bytes(truncated[: len(truncated) // 2])
        assert wait_for(lambda: len(rig.events("rejected")) == 2)
        good = share / "good.xlsx"
        save_by_rename(good, "fine")
        rig.settle(good)
        assert rig.refresh.refreshed(good) == [digest_of("fine")]
        assert {r["workbook"] for r in rig.events("rejected")} == {str(share / "garbage.xlsx"),
                                                                  str(share / "truncated.xlsx")}
        assert rig.watcher.idle()


def test_refresh_raising_is_logged_with_the_workbook_and_the_watcher_carries_on(share):
    truncated = "'damaged.xlsx' part xl/workbook.xml is truncated"
    fake = FakeRefresh(fail={"broken.xlsx": RuntimeError("job table exploded"),
                             "damaged.xlsx": PackageError(truncated)})
    with Rig(share, refresh=fake, initial=False) as rig:
        save_by_rename(share / "broken.xlsx", "a")
        save_by_rename(share / "damaged.xlsx", "b")
        assert wait_for(lambda: len(rig.events("refresh")) == 2)
        good = share / "good.xlsx"
        save_by_rename(good, "c")
        rig.settle(good)
    failed = {r["workbook"]: r for r in rig.events("refresh") if r["status"] == "failed"}
    assert set(failed) == {str(share / "broken.xlsx"), str(share / "damaged.xlsx")}
    assert "RuntimeError: job table exploded" in failed[str(share / "broken.xlsx")]["message"]
    assert "Traceback" in failed[str(share / "broken.xlsx")]["traceback"]
    assert failed[str(share / "damaged.xlsx")]["message"] == truncated
    text = rig.stream.getvalue()
    assert "broken.xlsx" in text and "Traceback" not in text


def test_a_failed_write_is_logged_and_the_watcher_refreshes_the_next_workbook(share, monkeypatch):
    """The real refresh on two workbooks (statsmodels' macrodata, see test_refresh) whose package write
    fails for one (as on a full disk): that one is logged as failed with the writer's message, nothing
    of it changes, and the other is refreshed."""
    from test_refresh import macro_book

    from watcher.refresh.workbook import refresh_workbook
    from watcher.xlsx import package

    real_write = package.write

    def write(path, *args, **kwargs):
        if Path(path).name == "full.xlsx":
            raise package.PackageError("cannot write 'full.xlsx': No space left on device")
        return real_write(path, *args, **kwargs)

    monkeypatch.setattr(package, "write", write)
    full = macro_book(share / "full.xlsx", stop=60)
    shutil.copyfile(full, share / "good.xlsx")
    saved = full.read_bytes()
    with Rig(share, refresh=refresh_workbook, initial=True) as rig:   # full.xlsx first, then good.xlsx
        assert wait_for(lambda: {r["workbook"] for r in rig.events("refresh")} >= {str(full),
                                                                                  str(share / "good.xlsx")},
                        timeout=60)
    status = {r["workbook"]: r for r in rig.events("refresh")}
    assert status[str(full)]["status"] == "failed"
    assert status[str(full)]["message"] == "cannot write 'full.xlsx': No space left on device"
    assert status[str(share / "good.xlsx")]["status"] == "refreshed"
    assert full.read_bytes() == saved and not list(share.glob(".tocsin-*.tmp"))
    assert "gdp fall forecast" in package.Package.open(share / "good.xlsx").sheet_names


def test_failed_job_is_named_in_the_log(share):
    class OneJobFails(FakeRefresh):
        def __call__(self, path, *, force=False, progress=None):
            report = super().__call__(path, force=force, progress=progress)
            if report.status != "refreshed":
                return report
            return FakeReport(path, "refreshed", jobs=(FakeJob("crowded"), FakeJob(
                "alarms", "failed", "`event` must be a criterion; got 'lots' in row 3 of sheet tocsin")))

    fake = OneJobFails()
    with Rig(share, refresh=fake, initial=False) as rig:
        book = share / "pumps.xlsx"
        save_by_rename(book, "x")
        rig.settle(book)
    text = rig.stream.getvalue()
    assert "2 jobs (1 failed)" in text
    assert "job 'alarms' failed: `event` must be a criterion; got 'lots' in row 3 of sheet tocsin" in text


def test_change_while_computing_is_discarded_and_started_again(share):
    fake = FakeRefresh(compute_s=0.6)
    book = share / "ferry.xlsx"
    with Rig(share, refresh=fake, initial=False) as rig:
        save_by_rename(book, "first")
        assert fake.started.wait(10)
        save_by_rename(book, "second")  # while tocsin computes on "first"
        rig.settle(book)
        assert "conflict" in fake.statuses(book)
        assert fake.refreshed(book) == [digest_of("second")]
        with zipfile.ZipFile(book) as z:
            assert z.read(MARKER).decode() == digest_of("second")


# -- start-up and observers ----------------------------------------------------------------------------
def test_initial_refresh_only_where_inputs_changed(share):
    stale = share / "stale.xlsx"
    current = share / "current.xlsx"
    stale.write_bytes(workbook_bytes("edited while tocsin was off"))
    current.write_bytes(workbook_bytes("as tocsin left it"))
    fake = FakeRefresh()
    fake.record_current(current)
    with Rig(share, refresh=fake) as rig:
        rig.settle(stale)
        assert wait_for(lambda: fake.statuses(current) == ["unchanged"])
        assert fake.refreshed(stale) == [digest_of("edited while tocsin was off")]
    [start] = rig.events("start")
    assert start["folders"] == [str(share.resolve())] and start["initial"] is True
    assert "native observer" in start["observer"]


def test_no_initial_refreshes_nothing_at_start(share):
    book = share / "ferry.xlsx"
    book.write_bytes(workbook_bytes("x"))
    with Rig(share, initial=False) as rig:
        time.sleep(0.3)
        assert rig.refresh.calls == []
        assert "initial refresh off" in rig.stream.getvalue()


def test_polling_observer_path(share):
    book = share / "ferry.xlsx"
    book.write_bytes(workbook_bytes("v0"))
    with Rig(share, initial=False, poll=0.2) as rig:
        save_by_rename(book, "v1")
        rig.settle(book)
        assert rig.refresh.refreshed(book) == [digest_of("v1")]
        save_in_place(book, "v2")
        assert wait_for(lambda: len(rig.refresh.refreshed(book)) == 2)
        rig.settle(book)
        assert rig.refresh.refreshed(book) == [digest_of("v1"), digest_of("v2")]
    assert "polling every 0.2 s" in rig.stream.getvalue()


def test_native_observer_falls_back_to_polling(share, monkeypatch):
    import watchdog.observers

    class Refusing(watchdog.observers.Observer):  # as when the inotify watch limit is reached
        def start(self):
            raise OSError(28, "inotify watch limit reached")

    monkeypatch.setattr(watchdog.observers, "Observer", Refusing)
    monkeypatch.setattr("watcher.watch.service.FALLBACK_POLL", 0.2)
    book = share / "ferry.xlsx"
    with Rig(share, initial=False) as rig:
        save_by_rename(book, "v1")
        rig.settle(book)
        assert rig.refresh.refreshed(book) == [digest_of("v1")]
    assert "polling every 0.2 s (the native observer could not start: OSError" in rig.stream.getvalue()


def test_stop_is_prompt_and_logged(share):
    with Rig(share, initial=False, quiet=5.0) as rig:
        save_by_rename(share / "pending.xlsx", "x")
        assert wait_for(lambda: not rig.watcher.idle(), timeout=5)
        started = time.monotonic()
        rig.watcher.stop("stopped (test)")
        assert time.monotonic() - started < 3.0
    [stop] = rig.events("stop")
    assert stop["reason"] == "stopped (test)" and stop["pending"] == [str(share / "pending.xlsx")]
    assert rig.refresh.calls == []


def test_bad_paths_are_refused_with_a_clear_message(tmp_path):
    from sheetfns.errors import InputError

    with pytest.raises(InputError, match="'.*nowhere' does not exist"):
        Watcher([tmp_path / "nowhere"], refresh=FakeRefresh())
    notes = tmp_path / "notes.txt"
    notes.write_text("x")
    with pytest.raises(InputError, match="must be a folder or an .xlsx/.xlsm workbook; got '.*notes.txt'"):
        Watcher([notes], refresh=FakeRefresh())
    with pytest.raises(InputError, match="`--poll` must be a number of seconds > 0; got 0"):
        Watcher([tmp_path], refresh=FakeRefresh(), poll=0)


def test_workbook_opened_while_queued_behind_another_waits(share):
    fake = FakeRefresh(compute_s=1.5)
    first, second = share / "first.xlsx", share / "second.xlsx"
    with Rig(share, refresh=fake, initial=False) as rig:
        save_by_rename(first, "a")
        assert fake.started.wait(10)
        save_by_rename(second, "b")  # settles while "first" is computing, so it waits in the queue
        assert wait_for(lambda: rig.watcher._debouncer.pending() == [], timeout=5)
        assert fake.statuses(second) == []
        owner = share / ".~lock.second.xlsx#"
        owner.write_text("someone")  # opened before its turn came
        assert wait_for(lambda: rig.events("waiting"), timeout=10)
        assert fake.statuses(second) == []
        owner.unlink()
        rig.settle(second)
        assert fake.refreshed(second) == [digest_of("b")]


def test_busy_answer_from_the_refresh_is_retried(share):
    class BusyOnce(FakeRefresh):  # the owner file came and went between the watcher's look and the refresh's
        answered = False

        def __call__(self, path, *, force=False, progress=None):
            if not self.answered:
                self.answered = True
                self._note(path, "busy", None)
                return FakeReport(path, "busy", message="open in a spreadsheet program")
            return super().__call__(path, force=force, progress=progress)

    fake = BusyOnce()
    book = share / "ferry.xlsx"
    with Rig(share, refresh=fake, initial=False) as rig:
        save_by_rename(book, "v1")
        rig.settle(book)
        assert fake.statuses(book)[:2] == ["busy", "refreshed"]
        assert fake.refreshed(book) == [digest_of("v1")]
    assert "  busy     " not in rig.stream.getvalue()  # no status line: the debouncer's waiting line says it
    assert [r["status"] for r in rig.events("refresh")][:2] == ["busy", "refreshed"]


def test_probe_knows_the_file_tocsin_wrote_by_size_mtime_and_sha256(tmp_path):
    from watcher.watch.probe import FileProbe
    from watcher.xlsx.package import Fingerprint

    path = tmp_path / "book.xlsx"
    data = workbook_bytes("<v>1</v>")
    path.write_bytes(data)
    st = os.stat(path)
    written = Fingerprint(st.st_size, st.st_mtime_ns, hashlib.sha256(data).hexdigest())
    probe = FileProbe()
    assert probe.is_written(path, written)
    # a save of the same size within the same mtime tick: only the hash tells it apart
    path.write_bytes(data[:-30] + bytes(b ^ 1 for b in data[-30:]))
    os.utime(path, ns=(st.st_atime_ns, st.st_mtime_ns))
    assert os.stat(path).st_size == written.size and os.stat(path).st_mtime_ns == written.mtime_ns
    assert not probe.is_written(path, written)
    path.write_bytes(data)  # the same bytes, a later mtime: a save, refreshed (it then answers "unchanged")
    os.utime(path, ns=(st.st_atime_ns, st.st_mtime_ns + 1_000_000_000))
    assert not probe.is_written(path, written)
    path.unlink()
    assert not probe.is_written(path, written)
