"""The file side of a write: the temporary file beside the workbook, what a failed write says, and the
replace of the workbook by the verified new package.

* The new package is written to ``.tocsin-<stem>-<random>.tmp`` in the workbook's folder
  (:mod:`watcher.xlsx.names`), so the replace is a rename within one file system.
* Every failure of the file system (no space, a quota, an I/O error, ...) while the temporary file is
  written ends the write with a :class:`~watcher.xlsx.errors.WriteError` that names the workbook, the
  folder and the cause; the temporary file is removed and the workbook is left as it was.
"""
from __future__ import annotations

import errno
import os
import tempfile
from pathlib import Path

from watcher.xlsx.errors import WriteError
from watcher.xlsx.names import temp_affixes

__all__ = ["create_temp", "remove_quietly", "write_error"]

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


def create_temp(workbook: Path) -> tuple[int, Path]:
    """A new, empty temporary file beside ``workbook``: ``(fd, path)``, open for reading and writing."""
    prefix, suffix = temp_affixes(workbook)
    try:
        fd, name = tempfile.mkstemp(prefix=prefix, suffix=suffix, dir=workbook.parent)
    except OSError as exc:
        raise write_error(exc, workbook, doing="create a temporary file beside") from exc
    return fd, Path(name)


def remove_quietly(path: Path) -> None:
    """Remove ``path`` if it is there; a failure is not an error (nothing more can be done)."""
    try:
        os.unlink(path)
    except OSError:
        pass
