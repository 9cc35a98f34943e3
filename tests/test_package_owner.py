"""A write keeps who owns the workbook: owner, group, permission bits, extended attributes and the POSIX
ACL; a read-only workbook is left alone. The second user is real: the write runs in a process started
with ``setpriv --reuid=65534 --regid=65534 --clear-groups`` (util-linux) on a workbook of uid 1000."""
from __future__ import annotations

import errno
import json
import os
import shutil
import struct
import subprocess
import sys
import tempfile
from pathlib import Path

import corpus
import pytest

from watcher.xlsx import replace
from watcher.xlsx.errors import PackageError, ReadOnlyWorkbookError, WriteError
from watcher.xlsx.package import Package, check_writable, validate, write

ROOT = Path(__file__).resolve().parent.parent
PUMP = ROOT / "sample_workbooks" / "pump_station.xlsx"
OWNER, OTHER = 1000, 65534
SCRIPT = """
import json, sys
sys.path[:0] = [{root!r}, {tests!r}]
import corpus
from watcher.xlsx.errors import XlsxError
from watcher.xlsx.package import write
spec, _ = corpus.forecast_spec("Fc", n=200)
try:
    write(sys.argv[1], [spec], state={{}}, expect=None)
    print(json.dumps({{"ok": True}}))
except XlsxError as exc:
    print(json.dumps({{"ok": False, "type": type(exc).__name__, "message": str(exc),
                      "reason": getattr(exc, "reason", None)}}))
""".format(root=str(ROOT), tests=str(ROOT / "tests"))

needs_root = pytest.mark.skipif(os.name != "posix" or os.geteuid() != 0,
                                reason="changing owners and running as a second user needs root")


@pytest.fixture
def shared(request):
    """A folder both users may write: ``sticky`` (mode 1777, like /tmp) or ``group`` (0775, group 65534)."""
    base = Path(tempfile.mkdtemp(prefix="tocsin-owner-"))
    os.chmod(base, 0o755)
    folder = base / "shared"
    folder.mkdir()
    if getattr(request, "param", "sticky") == "sticky":
        os.chmod(folder, 0o1777)
    else:
        os.chown(folder, 0, OTHER)
        os.chmod(folder, 0o775)
    yield folder
    shutil.rmtree(base, ignore_errors=True)


def _book(folder: Path, uid: int, gid: int, mode: int) -> Path:
    path = folder / "pump_station.xlsx"
    shutil.copy(PUMP, path)
    os.chown(path, uid, gid)
    os.chmod(path, mode)
    return path


def _as_other_user(path: Path) -> dict:
    if not shutil.which("setpriv"):
        pytest.skip("setpriv (util-linux) is not installed")
    proc = subprocess.run(["setpriv", f"--reuid={OTHER}", f"--regid={OTHER}", "--clear-groups",
                           sys.executable, "-c", SCRIPT, str(path)], capture_output=True, text=True,
                          timeout=120, env={**os.environ, "PYTHONDONTWRITEBYTECODE": "1"})
    assert proc.returncode == 0, proc.stderr
    return json.loads(proc.stdout.strip().splitlines()[-1])


def _temps(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.startswith(".tocsin-"))


@needs_root
@pytest.mark.parametrize("shared", ["sticky", "group"], indirect=True)
def test_another_user_keeps_owner_group_and_mode(shared):
    path = _book(shared, OWNER, OTHER, 0o664)  # the second user may write it through its group
    ino = path.stat().st_ino
    assert _as_other_user(path) == {"ok": True}
    st = path.stat()
    assert (st.st_uid, st.st_gid, st.st_mode & 0o7777) == (OWNER, OTHER, 0o664)
    assert st.st_ino == ino  # written in place: the rename could not have kept the owner
    assert Package.open(path).owned == ("Fc",) and validate(path) == []
    assert _temps(shared) == []


@needs_root
@pytest.mark.parametrize("runner", ["other user", "root"])
def test_a_read_only_workbook_is_left_alone(shared, runner):
    path = _book(shared, OWNER, OTHER, 0o444)
    before = path.read_bytes()
    if runner == "other user":
        out = _as_other_user(path)
        assert (out["ok"], out["type"], out["reason"]) == (False, "ReadOnlyWorkbookError", "mode")
        message = out["message"]
    else:
        with pytest.raises(ReadOnlyWorkbookError) as err:
            write(path, [corpus.forecast_spec("Fc", n=20)[0]], state={}, expect=None)
        assert (err.value.mode, err.value.owner, err.value.reason) == (0o444, OWNER, "mode")
        message = str(err.value)
    assert message.startswith("workbook 'pump_station.xlsx' is read-only (mode 444: no one may write it)")
    assert path.read_bytes() == before and path.stat().st_mode & 0o7777 == 0o444
    assert _temps(shared) == []


@needs_root
def test_a_workbook_this_user_may_not_write_names_who_should_run_tocsin(shared):
    path = _book(shared, OWNER, OWNER, 0o664)  # the second user is neither owner nor in the group
    before = path.read_bytes()
    out = _as_other_user(path)
    assert (out["ok"], out["type"], out["reason"]) == (False, "ReadOnlyWorkbookError", "permission")
    assert f"(uid {OWNER}) and the user running tocsin" in out["message"]
    assert f"(uid {OTHER}), may not write it (mode 664)" in out["message"]
    assert "Run tocsin as " in out["message"]
    assert path.read_bytes() == before and path.stat().st_uid == OWNER
    check_writable(path)  # root may write it


# ACL (Linux, acl(5) extended-attribute form): version 2, then (tag, permissions, id) entries:
# USER_OBJ rw-, USER 4242 rw-, GROUP_OBJ r--, MASK rw-, OTHER ---
_NONE = 0xFFFFFFFF
_ACL = struct.pack("<I", 2) + b"".join(struct.pack("<HHI", tag, perm, uid) for tag, perm, uid in (
    (0x01, 6, _NONE), (0x02, 6, 4242), (0x04, 4, _NONE), (0x10, 6, _NONE), (0x20, 0, _NONE)))


def _attrs(path: Path) -> dict:
    return {n: os.getxattr(path, n) for n in os.listxattr(path)}


@needs_root
def test_root_keeps_owner_mode_attributes_and_acl(tmp_path):
    path = _book(tmp_path, OWNER, OWNER, 0o640)
    try:
        os.setxattr(path, "user.project", b"pumps")
        os.setxattr(path, "system.posix_acl_access", _ACL)
    except OSError as exc:
        pytest.skip(f"this file system does not keep extended attributes or ACLs: {exc}")
    before = (path.stat().st_uid, path.stat().st_gid, path.stat().st_mode & 0o7777, _attrs(path))
    ino = path.stat().st_ino
    write(path, [corpus.forecast_spec("Fc", n=20)[0]], state={}, expect=None)
    st = path.stat()
    assert (st.st_uid, st.st_gid, st.st_mode & 0o7777, _attrs(path)) == before
    assert st.st_ino != ino  # root can give the new file everything: the atomic rename was used
    assert Package.open(path).owned == ("Fc",) and _temps(tmp_path) == []


def test_a_hard_linked_workbook_is_written_in_place(tmp_path):
    path = tmp_path / "pump_station.xlsx"
    shutil.copy(PUMP, path)
    other = tmp_path / "also here.xlsx"
    os.link(path, other)
    write(path, [corpus.forecast_spec("Fc", n=20)[0]], state={}, expect=None)
    assert path.stat().st_nlink == 2 and Package.open(other).owned == ("Fc",)
    assert _temps(tmp_path) == []


def test_an_io_error_while_writing_in_place_keeps_the_complete_copy(tmp_path, monkeypatch):
    path = tmp_path / "pump_station.xlsx"
    shutil.copy(PUMP, path)
    os.link(path, tmp_path / "link.xlsx")  # forces the in-place write
    real_write = os.write
    calls = []

    def failing_write(fd, data):
        calls.append(len(data))
        if len(calls) == 2:
            raise OSError(errno.EIO, os.strerror(errno.EIO))
        return real_write(fd, data[:4096])  # short writes, so the write goes round its loop

    monkeypatch.setattr(replace.os, "write", failing_write)
    with pytest.raises(WriteError, match=r"writing into 'pump_station.xlsx' failed \(Input/output error\); "
                                         r"the complete new workbook is kept beside it as '\.tocsin-"):
        write(path, [corpus.forecast_spec("Fc", n=20)[0]], state={}, expect=None)
    monkeypatch.undo()
    copies = [p for p in tmp_path.iterdir() if p.name.endswith(".copy.xlsx")]
    assert len(copies) == 1 and Package.open(copies[0]).owned == ("Fc",) and validate(copies[0]) == []


def test_a_damaged_workbook_names_the_copy_an_interrupted_write_left(tmp_path):
    path = tmp_path / "pump_station.xlsx"
    shutil.copy(PUMP, path)
    copy = tmp_path / ".tocsin-pump_station-k3x9.copy.xlsx"  # what write_in_place keeps until it is done
    shutil.copy(PUMP, copy)
    path.write_bytes(PUMP.read_bytes()[:20_000])  # the workbook cut short, as by a crash mid-write
    with pytest.raises(PackageError, match=r"an interrupted tocsin write left the complete new workbook "
                                           r"beside it as '\.tocsin-pump_station-k3x9\.copy\.xlsx': "
                                           r"rename that file to 'pump_station\.xlsx'"):
        Package.open(path)
