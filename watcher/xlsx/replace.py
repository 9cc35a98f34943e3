"""The file side of a write: the temporary file beside the workbook, what a failed write says, and the
replace of the workbook by the verified new package.

* The new package is written to ``.tocsin-<stem>-<random>.tmp`` in the workbook's folder
  (:mod:`watcher.xlsx.names`), so the replace is a rename within one file system. The writer holds an
  exclusive ``flock`` on it (:class:`TempFile`); the next write of the workbook removes the temporary
  files whose lock it can take -- those of killed or stopped writes -- never one still locked
  (:func:`remove_abandoned`).
* Every failure of the file system (no space, a quota, an I/O error, ...) while the temporary file is
  written ends the write with a :class:`~watcher.xlsx.errors.WriteError` that names the workbook, the
  folder and the cause; the temporary file is removed and the workbook is left as it was.
* A workbook nobody may write (no write bit) or the user running tocsin may not write is left alone:
  :func:`check_writable` raises :class:`~watcher.xlsx.errors.ReadOnlyWorkbookError`.
* Ownership is kept: the new file gets the workbook's owner, group, permission bits and extended
  attributes (POSIX ACLs travel in ``system.posix_acl_access``), and is renamed over the workbook only
  when all of them came across (:func:`copy_meta`). Otherwise -- tocsin is not root and not the owner, a
  sticky folder forbids the rename, an attribute cannot be set, the workbook has other hard links -- the
  verified new bytes are written into the workbook file itself (:func:`write_in_place`), which keeps
  its inode and so everything about it. The complete new package waits beside it as
  ``.tocsin-<stem>-<random>.copy.xlsx`` until that write is done and verified.
"""
from __future__ import annotations

import errno
import hashlib
import os
import stat
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

from watcher.xlsx.errors import ConcurrentEditError, PackageError, ReadOnlyWorkbookError, WriteError
from watcher.xlsx.names import copy_name, is_copy_of, is_temp_of, temp_affixes

try:
    import fcntl  # POSIX
except ImportError:  # pragma: no cover - Windows: abandoned temporary files are found by age
    fcntl = None

__all__ = ["FileMeta", "Identity", "TempFile", "check_writable", "copy_meta", "digest", "fsync_dir",
           "identity", "read_meta", "remove_abandoned", "remove_quietly", "rename_over", "write_error",
           "write_in_place"]

_PIECE = 1 << 20
_FRESH_SECONDS = 5.0      # an empty temporary file this young may not be locked yet
_STALE_SECONDS = 3600.0   # without flock: a temporary file this old is abandoned

_CAUSES = {
    errno.ENOSPC: "no space left on the device holding '{folder}'",
    errno.EDQUOT: "the disk quota of the user running tocsin is used up on '{folder}'",
    errno.EIO: "an input/output error on the device holding '{folder}'",
    errno.EFBIG: "the new workbook would be larger than '{folder}' allows for one file",
    errno.EROFS: "'{folder}' is on a read-only file system",
    errno.EACCES: "the user running tocsin may not create files in '{folder}'",
    errno.EPERM: "the user running tocsin may not create files in '{folder}'",
}


def write_error(exc: OSError, workbook: Path, *, doing: str = "write") -> WriteError:
    """The :class:`WriteError` for a file-system failure ``exc`` while writing beside ``workbook``."""
    folder = str(workbook.parent)
    cause = _CAUSES.get(exc.errno, "{strerror} in '{folder}'").format(
        folder=folder, strerror=exc.strerror or type(exc).__name__)
    return WriteError(f"cannot {doing} '{workbook.name}': {cause}; the workbook was left as it was",
                      workbook=workbook.name, folder=folder, errno=exc.errno)


class TempFile:
    """A new, empty temporary file beside ``workbook``, locked (``flock``, exclusive) for as long as this
    object is open, so a later write can tell an abandoned temporary file (its lock is free: the writer
    was killed) from one in use. :meth:`open` gives a file object for writing; the lock stays when that
    is closed, and when the file is renamed; :meth:`close` releases it."""

    def __init__(self, workbook: Path) -> None:
        prefix, suffix = temp_affixes(workbook)
        try:
            fd, name = tempfile.mkstemp(prefix=prefix, suffix=suffix, dir=workbook.parent)
        except OSError as exc:
            raise write_error(exc, workbook, doing="create a temporary file beside") from exc
        self.path = Path(name)
        self._fd = fd
        if fcntl is not None:
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except OSError:  # a file system without flock: cleaned up by age instead
                pass

    def open(self):
        """The file for reading and writing (its own descriptor; closing it keeps the lock)."""
        return os.fdopen(os.dup(self._fd), "w+b")

    def close(self) -> None:
        if self._fd >= 0:
            os.close(self._fd)
            self._fd = -1

    def __enter__(self) -> TempFile:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def _abandoned(path: str, now: float) -> bool:
    """Whether the temporary file at ``path`` belongs to no running write: its lock can be taken (an
    empty file younger than a few seconds may be one that was just made and not locked yet)."""
    if fcntl is None:
        try:
            return now - os.stat(path).st_mtime > _STALE_SECONDS
        except OSError:
            return False
    try:
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0))
    except OSError:
        return False
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        st = os.fstat(fd)
        return not (st.st_size == 0 and now - st.st_mtime < _FRESH_SECONDS)
    except OSError:  # locked by a running write (or no flock here)
        return False
    finally:
        os.close(fd)  # the lock, if taken, goes with it; the name is removed just after


def remove_abandoned(workbook: Path) -> list[str]:
    """Remove what killed or stopped writes of ``workbook`` left beside it: temporary files and in-place
    copies no running write holds locked. Call it only when the workbook reads as a package (so an
    in-place copy is no longer needed). Returns the names removed."""
    now = time.time()
    removed = []
    try:
        entries = list(os.scandir(workbook.parent))
    except OSError:
        return removed
    for entry in entries:
        if (is_temp_of(entry.name, workbook) or is_copy_of(entry.name, workbook)) and \
                _abandoned(entry.path, now):
            try:
                os.unlink(entry.path)
                removed.append(entry.name)
            except OSError:
                pass
    return removed


def remove_quietly(path: Path) -> None:
    """Remove ``path`` if it is there; a failure is not an error (nothing more can be done)."""
    try:
        os.unlink(path)
    except OSError:
        pass


def _user(uid: int) -> str:
    try:
        import pwd  # POSIX only

        return f"'{pwd.getpwuid(uid).pw_name}' (uid {uid})"
    except (ImportError, KeyError):
        return f"uid {uid}"


def check_writable(path: Path, st: os.stat_result | None = None) -> None:
    """Raise :class:`ReadOnlyWorkbookError` when the workbook at ``path`` is read-only: no write
    permission bit for anyone, or the user running tocsin may not write it."""
    st = st or os.stat(path)
    mode = stat.S_IMODE(st.st_mode)
    label = path.name
    if os.name == "posix" and not mode & 0o222:
        raise ReadOnlyWorkbookError(f"workbook '{label}' is read-only (mode {mode:o}: no one may write it); "
                                    "tocsin leaves it alone. Make it writable to let tocsin refresh it",
                                    workbook=label, mode=mode, owner=st.st_uid, user=_uid(), reason="mode")
    if not os.access(path, os.W_OK, effective_ids=os.access in os.supports_effective_ids):
        me = _uid()
        who = f"the user running tocsin, {_user(me)}," if me is not None else "the user running tocsin"
        owner = _user(st.st_uid) if os.name == "posix" else "its owner"
        raise ReadOnlyWorkbookError(f"workbook '{label}' belongs to {owner} and {who} may not write it "
                                    f"(mode {mode:o}); tocsin leaves it alone. Run tocsin as {owner}, or "
                                    "give this user write permission on the workbook",
                                    workbook=label, mode=mode, owner=st.st_uid, user=me,
                                    reason="permission")


def _uid() -> int | None:
    return os.geteuid() if hasattr(os, "geteuid") else None


@dataclass(frozen=True)
class FileMeta:
    """What a file's owner sees of it besides its bytes."""

    uid: int
    gid: int
    mode: int
    nlink: int
    ino: int
    xattrs: tuple[tuple[str, bytes], ...]


def _xattrs(path: Path) -> dict[str, bytes] | None:
    """The extended attributes of ``path`` (None when they cannot all be read)."""
    if not hasattr(os, "listxattr"):
        return {}
    try:
        names = os.listxattr(path)
    except OSError as exc:
        return {} if exc.errno in (errno.ENOTSUP, errno.EOPNOTSUPP) else None
    out = {}
    for name in names:
        try:
            out[name] = os.getxattr(path, name)
        except OSError:
            return None
    return out


def read_meta(path: Path) -> FileMeta | None:
    """Owner, group, permission bits, link count, inode and extended attributes of ``path`` (None when
    the extended attributes cannot be read, so they could not be kept by a rename)."""
    st = os.stat(path)
    xattrs = _xattrs(path)
    if xattrs is None:
        return None
    return FileMeta(st.st_uid, st.st_gid, stat.S_IMODE(st.st_mode), st.st_nlink, st.st_ino,
                    tuple(sorted(xattrs.items())))


def copy_meta(meta: FileMeta, tmp: Path) -> bool:
    """Give ``tmp`` the owner, group, permission bits and extended attributes of ``meta``; True when
    all of them came across (checked by reading them back), False when a rename would lose any."""
    try:
        if hasattr(os, "chown"):
            st = os.stat(tmp)
            if (st.st_uid, st.st_gid) != (meta.uid, meta.gid):
                os.chown(tmp, meta.uid, meta.gid)
        want = dict(meta.xattrs)
        have = _xattrs(tmp)
        if have is None:
            return False
        for name in have.keys() - want.keys():  # e.g. an ACL inherited from the folder's default ACL
            os.removexattr(tmp, name)
        for name, value in want.items():
            if have.get(name) != value:
                os.setxattr(tmp, name, value)
        os.chmod(tmp, meta.mode)
        st = os.stat(tmp)
    except OSError:
        return False
    return ((st.st_uid, st.st_gid, stat.S_IMODE(st.st_mode)) == (meta.uid, meta.gid, meta.mode)
            and _xattrs(tmp) == dict(meta.xattrs))


def digest(fh) -> tuple[str, int]:
    """SHA-256 and size of an open file read from its start in 1 MiB pieces."""
    fh.seek(0)
    sha = hashlib.sha256()
    size = 0
    while chunk := fh.read(_PIECE):
        sha.update(chunk)
        size += len(chunk)
    return sha.hexdigest(), size


def fsync_dir(folder: Path) -> None:
    """Make a rename in ``folder`` durable (POSIX); failures are ignored (the rename itself happened)."""
    if os.name != "posix":
        return
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


Identity = tuple[int, int, int, int]
"""(device, inode, size, mtime in ns): what must not change between the last check of the workbook's
bytes and the replace."""


def identity(st: os.stat_result) -> Identity:
    return st.st_dev, st.st_ino, st.st_size, st.st_mtime_ns


def _moved(label: str) -> ConcurrentEditError:
    return ConcurrentEditError(f"workbook '{label}' was saved by someone else while tocsin wrote; nothing "
                               "was written, try again later", workbook=label)


def rename_over(tmp: Path, path: Path, seen: Identity) -> bool:
    """Rename ``tmp`` over the workbook ``path`` if the workbook is still the file last checked
    (``seen``): one ``stat`` and the rename, nothing in between. False when the folder does not let
    this user rename over the workbook (a sticky folder); the caller then writes in place."""
    if identity(os.stat(path)) != seen:
        raise _moved(path.name)
    try:
        os.replace(tmp, path)
    except PermissionError:
        return False
    except OSError as exc:
        raise PackageError(f"cannot replace '{path.name}' (is it open in a spreadsheet program?): "
                           f"{exc.strerror or exc}", workbook=path.name) from exc
    return True


def write_in_place(path: Path, tmp: Path, sha: str, size: int, seen: Identity) -> None:
    """Write the verified new package ``tmp`` (``size`` bytes, SHA-256 ``sha``) into the workbook file
    ``path`` itself, keeping its inode (owner, group, mode, ACLs, attributes, hard links).

    ``tmp`` is first renamed to its copy name (:func:`~watcher.xlsx.names.copy_name`) and stays there,
    complete, until the workbook holds the same bytes; then it is removed. Space for a bigger package is
    reserved before the first byte is overwritten, so a full disk leaves the workbook as it was. An
    error after that (an I/O error) leaves the copy in place and says where it is.
    """
    label = path.name
    copy = copy_name(tmp, path)
    try:
        fd = os.open(path, os.O_WRONLY)
    except OSError as exc:
        raise write_error(exc, path, doing="write into") from exc
    try:
        os.replace(tmp, copy)
    except OSError as exc:
        os.close(fd)
        raise write_error(exc, path) from exc
    fsync_dir(path.parent)
    started = False
    try:
        st = os.fstat(fd)
        if identity(st) != seen:  # the last look, just before the first byte is overwritten
            os.close(fd)
            remove_quietly(copy)
            raise _moved(label)
        old_size = st.st_size
        if size > old_size and hasattr(os, "posix_fallocate"):
            try:
                os.posix_fallocate(fd, 0, size)
            except OSError as exc:
                os.ftruncate(fd, old_size)  # nothing of the old bytes was touched
                if exc.errno not in (errno.EOPNOTSUPP, errno.ENOTSUP, errno.EINVAL):
                    raise
        started = True
        with open(copy, "rb") as src:
            while piece := src.read(_PIECE):
                view = memoryview(piece)
                while view:
                    view = view[os.write(fd, view):]
        os.ftruncate(fd, size)
        os.fsync(fd)
    except OSError as exc:
        os.close(fd)
        if not started:
            remove_quietly(copy)
            raise write_error(exc, path) from exc
        raise WriteError(f"writing into '{label}' failed ({exc.strerror or exc}); the complete new workbook "
                         f"is kept beside it as '{copy.name}': rename that file to '{label}'",
                         workbook=label, folder=str(path.parent), errno=exc.errno) from exc
    os.close(fd)
    with open(path, "rb") as fh:
        if digest(fh) != (sha, size):
            raise PackageError(f"writing into '{label}' did not give the new bytes back; the complete new "
                               f"workbook is kept beside it as '{copy.name}': rename that file to '{label}'",
                               workbook=label)
    remove_quietly(copy)
    fsync_dir(path.parent)
