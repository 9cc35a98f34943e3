"""Writes that fail on the way: a nearly full disk (a real 2 MB tmpfs, filled to several levels), a file
that fails at every single write call of a part, I/O errors and quotas. Each write returns within a time
bound (run in a thread, so a hang fails the test instead of hanging pytest), ends with a clear
WriteError naming the workbook and the cause, leaves no temporary file and the workbook byte-identical."""
from __future__ import annotations

import errno
import io
import os
import shutil
import signal
import subprocess
import sys
import threading
import time
import zlib
from pathlib import Path

import corpus
import pytest

from watcher.xlsx import archive
from watcher.xlsx import package as pkg
from watcher.xlsx.errors import PackageError, WriteError
from watcher.xlsx.package import Package, write

PUMP = Path(__file__).resolve().parent.parent / "sample_workbooks" / "pump_station.xlsx"
BOUND = 30.0  # seconds a failing write may take at most (it takes well under one)


def _in_thread(fn, bound: float = BOUND):
    """Run ``fn`` in a daemon thread; return ("ok", value) or ("error", exc); fail if it is not done in
    ``bound`` seconds (a hang)."""
    out: dict = {}

    def run():
        try:
            out["ok"] = fn()
        except BaseException as exc:  # noqa: BLE001 - reported to the test
            out["error"] = exc

    t = threading.Thread(target=run, daemon=True, name="test-write")
    t.start()
    t.join(bound)
    assert not t.is_alive(), f"the write did not return within {bound} s (it hangs)"
    return ("ok", out["ok"]) if "ok" in out else ("error", out["error"])


def _temps(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.startswith(".tocsin-"))


# -- a real nearly full disk ---------------------------------------------------------------------------
@pytest.fixture
def small_tmpfs(tmp_path):
    """A 2 MB tmpfs (needs root and permission to mount; skipped with the reason otherwise)."""
    mnt = tmp_path / "mnt"
    mnt.mkdir()
    if os.geteuid() != 0 or not shutil.which("mount"):
        pytest.skip("mounting a tmpfs needs root (the full-disk tests run as root in CI)")

    def mount():
        proc = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=2m", "tmpfs", str(mnt)],
                              capture_output=True, text=True)
        if proc.returncode != 0:
            pytest.skip(f"mounting a tmpfs is not permitted here: {proc.stderr.strip()}")

    def unmount():
        subprocess.run(["umount", "-l", str(mnt)], capture_output=True)

    yield mnt, mount, unmount
    unmount()


def test_a_nearly_full_disk_never_hangs_the_write(small_tmpfs, tmp_path):
    mnt, mount, unmount = small_tmpfs
    spec, _ = corpus.forecast_spec("Fc", n=4000)  # invented data; a new package of about 350 KB
    roomy = tmp_path / "roomy.xlsx"
    shutil.copy(PUMP, roomy)
    write(roomy, [spec], state={}, expect=None)
    need = roomy.stat().st_size // 1024
    # 100-400 KB free in steps, and 4 KB steps around the size of the new package, where the last
    # write calls (the end of the deflate stream, the central directory) are the ones that fail
    levels = sorted(set(range(100, 401, 25)) | set(range(need - 40, need + 12, 4)))
    outcomes = []
    for free_kb in levels:
        mount()
        try:
            book = mnt / "pump_station.xlsx"
            shutil.copy(PUMP, book)
            st = os.statvfs(mnt)
            with open(mnt / "filler", "wb") as fh:
                fh.write(b"\0" * max(st.f_bavail * st.f_frsize - free_kb * 1024, 0))
            before = book.read_bytes()
            t0 = time.monotonic()
            kind, value = _in_thread(lambda book=book: write(book, [spec], state={}, expect=None))
            assert time.monotonic() - t0 < BOUND
            assert _temps(mnt) == [], f"{free_kb} KB free: temporary file left behind"
            if kind == "ok":
                assert Package.open(book).owned == ("Fc",)
            else:
                assert isinstance(value, WriteError), f"{free_kb} KB free: {value!r}"
                assert str(value) == (f"cannot write 'pump_station.xlsx': no space left on the device "
                                      f"holding '{mnt}'; the workbook was left as it was")
                assert (value.errno, value.folder, value.workbook) == (errno.ENOSPC, str(mnt),
                                                                       "pump_station.xlsx")
                assert book.read_bytes() == before
            outcomes.append(kind)
        finally:
            unmount()
    assert "error" in outcomes and "ok" in outcomes  # both sides of the edge were tried


# -- a failure at every write call of a streamed part -------------------------------------------------
class _FailingFile(io.BytesIO):
    """A file whose ``fail_at``-th write call raises ``OSError(code)`` (0: never; counts the calls)."""

    def __init__(self, fail_at: int = 0, code: int = errno.ENOSPC) -> None:
        super().__init__()
        self.calls, self.fail_at, self.code = 0, fail_at, code

    def write(self, data) -> int:
        self.calls += 1
        if self.calls == self.fail_at:
            raise OSError(self.code, os.strerror(self.code))
        return super().write(data)


def _stream(fh) -> None:
    chunks = [os.urandom(50_000) for _ in range(6)] + [b"x" * 200_000]  # invented data
    zw = archive.ZipWriter(fh)
    zw.write_stream("xl/worksheets/sheet9.xml", iter(chunks), level=1)
    zw.close()


def test_a_failure_at_any_write_call_of_a_stream_ends_it():
    counter = _FailingFile()
    _stream(counter)
    assert counter.calls > 5
    for k in range(1, counter.calls + 1):  # the last ones write the end of the stream and the directory
        kind, value = _in_thread(lambda k=k: _stream(_FailingFile(k)))
        assert kind == "error" and isinstance(value, OSError) and value.errno == errno.ENOSPC, (k, value)


def test_an_unexpected_error_in_the_deflate_thread_is_a_package_error(monkeypatch):
    class Broken:
        def compress(self, data):
            raise zlib.error("invented failure")

        def flush(self):
            return b""

    monkeypatch.setattr(archive, "_compressor", lambda level: Broken())
    kind, value = _in_thread(lambda: _stream(io.BytesIO()))
    assert kind == "error" and isinstance(value, PackageError) and not isinstance(value, WriteError)
    assert "compressing part 'xl/worksheets/sheet9.xml' failed (error: invented failure)" in str(value)
    assert value.part == "xl/worksheets/sheet9.xml"


@pytest.mark.parametrize("code, cause", [
    (errno.EIO, "an input/output error on the device holding"),
    (errno.EDQUOT, "the disk quota of the user running tocsin is used up on"),
])
def test_io_errors_and_quotas_are_named(tmp_path, monkeypatch, code, cause):
    book = tmp_path / "pump_station.xlsx"
    shutil.copy(PUMP, book)
    before = book.read_bytes()

    def failing_fsync(fd):
        raise OSError(code, os.strerror(code))

    monkeypatch.setattr(pkg.os, "fsync", failing_fsync)
    spec, _ = corpus.forecast_spec("Fc", n=50)
    with pytest.raises(WriteError, match=f"cannot write 'pump_station.xlsx': {cause} '{tmp_path}'") as err:
        write(book, [spec], state={}, expect=None)
    assert err.value.errno == code
    assert book.read_bytes() == before and _temps(tmp_path) == []


# -- killed and stopped writes --------------------------------------------------------------------------
_BIG_WRITE = f"""
import sys
sys.path.insert(0, {str(PUMP.parent.parent)!r})
import numpy as np
from watcher.xlsx.errors import ConcurrentEditError
from watcher.xlsx.package import write
from watcher.xlsx.spec import Column, SheetSpec, Table
x = np.arange(600_000) / 7.0  # invented data: a sheet big enough to take a few seconds
try:
    write(sys.argv[1], [SheetSpec("Big", (Table(0, 0, ("a", "b"), (Column(x), Column(x * 3))),))],
          state={{}}, expect=None)
except ConcurrentEditError:
    sys.exit(3)
"""


def _start_big_write(book: Path) -> tuple[subprocess.Popen, Path]:
    """A writing process, and its temporary file once it has grown (the write is well under way)."""
    before = set(_temps(book.parent))
    proc = subprocess.Popen([sys.executable, "-c", _BIG_WRITE, str(book)])
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        mine = [book.parent / n for n in set(_temps(book.parent)) - before]
        if mine and mine[0].exists() and mine[0].stat().st_size > 256 * 1024:
            return proc, mine[0]
        assert proc.poll() is None, "the writing process ended before it was under way"
        time.sleep(0.02)
    proc.kill()
    raise AssertionError("the writing process made no temporary file within 60 s")


@pytest.mark.skipif(os.name != "posix", reason="SIGKILL, SIGSTOP and flock")
def test_killed_writes_are_cleaned_up_and_running_ones_are_not(tmp_path):
    book = tmp_path / "pump_station.xlsx"
    shutil.copy(PUMP, book)
    before = book.read_bytes()
    killed = []
    for _ in range(3):  # each new write removes what the killed one before it left
        proc, temp = _start_big_write(book)
        proc.send_signal(signal.SIGKILL)
        proc.wait(30)
        killed.append(temp)
    assert book.read_bytes() == before
    assert killed[-1].exists() and not killed[0].exists() and not killed[1].exists()
    stopped, busy = _start_big_write(book)  # the next write of the killed one's: it is removed ...
    assert not killed[-1].exists()
    stopped.send_signal(signal.SIGSTOP)  # ... a stopped write still holds its lock
    try:
        spec, _ = corpus.forecast_spec("Fc", n=30)
        write(book, [spec], state={}, expect=None)  # a clean write while the other one is stopped
        assert busy.exists() and _temps(tmp_path) == [busy.name]
        assert Package.open(book).owned == ("Fc",)
    finally:
        stopped.send_signal(signal.SIGCONT)
    assert stopped.wait(60) == 3  # it finds the workbook changed: nothing written, its temp removed
    assert _temps(tmp_path) == [] and Package.open(book).owned == ("Fc",)


# -- a save between the last check of the bytes and the replace ------------------------------------------
@pytest.mark.parametrize("how", ["rename-save, same bytes", "save in place"])
@pytest.mark.parametrize("route", ["rename", "in place"])
def test_a_save_after_the_last_byte_check_is_caught_by_the_final_look(tmp_path, monkeypatch, how, route):
    book = tmp_path / "pump_station.xlsx"
    shutil.copy(PUMP, book)
    if route == "in place":
        os.link(book, tmp_path / "link.xlsx")  # a hard link makes the writer write in place
    real = pkg._still_same
    saved = {}

    def check_then_someone_saves(path, expect, label):
        seen = real(path, expect, label)
        data = book.read_bytes()
        if how == "rename-save, same bytes":  # what spreadsheet programs do: new file, renamed over
            other = tmp_path / "~saving.tmp"
            other.write_bytes(data)
            os.replace(other, book)
        else:
            with open(book, "r+b") as fh:
                fh.seek(0, os.SEEK_END)
                fh.write(b"\0" * 10)
        saved["bytes"] = book.read_bytes()
        return seen

    monkeypatch.setattr(pkg, "_still_same", check_then_someone_saves)
    with pytest.raises(pkg.ConcurrentEditError, match="was saved by someone else while tocsin wrote"):
        write(book, [corpus.forecast_spec("Fc", n=20)[0]], state={}, expect=None)
    assert book.read_bytes() == saved["bytes"]  # the colleague's save stands
    assert _temps(tmp_path) == []
