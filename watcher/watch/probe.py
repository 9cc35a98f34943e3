"""Whether a saved workbook is ready to be refreshed: the debouncer's eyes on the disk.

A workbook is ready when no owner file says a person has it open, its size, mtime and inode stay the
same between two looks (the debouncer takes them), and it opens as a complete zip package. This is the
only part of the watcher's intake that touches the disk, so the debouncer (timing only) can be tested
with a fake probe. :meth:`FileProbe.is_written` tells tocsin's own write when its save event comes back.
"""
from __future__ import annotations

import os
import zipfile
from pathlib import Path

from watcher.watch.debounce import Stat
from watcher.xlsx.names import owner_file
from watcher.xlsx.replace import digest

__all__ = ["FileProbe"]


class FileProbe:
    """The debouncer's eyes on the disk: owner file, size/mtime/inode, and zip completeness."""

    def owner(self, path: Path) -> Path | None:
        """The owner file present beside ``path``, or None."""
        return owner_file(path)

    def stat(self, path: Path) -> Stat | None:
        """(size, mtime_ns, inode) of ``path``, or None when it does not exist (or cannot be read)."""
        try:
            st = os.stat(path)
        except OSError:
            return None
        return (st.st_size, st.st_mtime_ns, st.st_ino)

    def complete(self, path: Path) -> bool:
        """True when ``path`` opens as a complete zip package holding ``[Content_Types].xml``.

        Opening reads the end-of-central-directory record, which a truncated or half-written file lacks.
        """
        try:
            with zipfile.ZipFile(path) as package:
                package.getinfo("[Content_Types].xml")
        except (zipfile.BadZipFile, KeyError, OSError, EOFError, ValueError):
            return False
        return True

    def is_written(self, path: Path, written) -> bool:
        """True when ``path`` still is the file tocsin wrote: ``written`` (the writer's fingerprint)
        has its size and mtime, and its SHA-256 is the one the writer verified. The stat rules most
        saves out at once; the hash makes sure (a save of the same size within one mtime tick)."""
        try:
            with open(path, "rb") as fh:
                st = os.fstat(fh.fileno())
                if (st.st_size, st.st_mtime_ns) != (written.size, written.mtime_ns):
                    return False
                return digest(fh) == (written.sha256, written.size)
        except OSError:
            return False
