"""Lossless writing of tocsin's sheets into an existing ``.xlsx`` / ``.xlsm`` package.

tocsin edits the package (Office Open XML, ECMA-376 / ISO/IEC 29500) at the level of its parts: it adds
or replaces only its own parts and copies every other member as the same compressed bytes.

Public API
----------
``Package.open(path)``
    Read a workbook safely (not a zip, truncated, DTD/entity bomb, over-size parts: a clear
    :class:`~watcher.xlsx.errors.PackageError` naming the file). Exposes ``sheet_names`` (in order),
    ``sheets`` (:class:`SheetInfo`), ``owned`` (names of tocsin's sheets), ``date1904``, ``state`` (the
    small dict tocsin keeps in the package), ``fingerprint`` (size, mtime_ns, sha256 of the bytes read)
    and, checked when asked, ``problems`` / ``sheet_problems`` (damaged or hostile members, found by
    inflating them against their declared size and CRC-32 and looking for a document type declaration);
    ``check_sheet(name)`` raises :class:`~watcher.xlsx.errors.PackageError` for a sheet with one, so a
    refresh can fail the jobs that read that sheet and go on with the others.
``write(path, sheets, *, state, remove=(), expect)`` (also ``Package.write``)
    One atomic write of all of tocsin's sheets (:class:`~watcher.xlsx.spec.SheetSpec`): new sheets are
    appended after the user's, tocsin's sheets of the same name are replaced in place, tocsin's sheets
    named in ``remove`` are deleted. Raises :class:`~watcher.xlsx.errors.OwnershipError` for a user's sheet
    of a requested name (naming it) and :class:`~watcher.xlsx.errors.ConcurrentEditError` when the file no
    longer holds the bytes ``expect`` describes (someone saved while tocsin computed: nothing is
    written; try again later). Returns a :class:`WriteResult`.
``validate(path, *, skip_cells=())``
    Structural problems of a package as messages (see :mod:`watcher.xlsx.validate`); the rows of the
    sheets in ``skip_cells`` are not walked.
``check_writable(path)``
    Raises :class:`~watcher.xlsx.errors.ReadOnlyWorkbookError` for a workbook that is read-only (no write
    bit for anyone, or not writable by the user running tocsin); ``write`` raises it too, before writing.

The work is split: :mod:`watcher.xlsx.source` reads a package, :mod:`watcher.xlsx.plan` plans and emits a
write, :mod:`watcher.xlsx.worksheet` and :mod:`watcher.xlsx.chart` produce tocsin's parts,
:mod:`watcher.xlsx.styles` its cell formats, :mod:`watcher.xlsx.archive` and :mod:`watcher.xlsx.opc` the zip
and packaging layers; this module holds the public API and the atomic replace.

Ownership and state
-------------------
A custom document property (``docProps/custom.xml``, ECMA-376 Part 1, §22.3) carries a JSON record
``{"format": 1, "sheets": [...], "state": {...}}`` split over properties ``tocsin.000``, ``tocsin.001``,
... of at most 255 characters each (spreadsheet programs limit the length of one value). Spreadsheet
programs keep custom properties when they save, so ownership and state survive a round trip through
them. Each of tocsin's sheets also carries a mark of its own: a hidden defined name ``_tocsin_owned``
scoped to it (``localSheetId``), which spreadsheet programs keep with the sheet, move with it and delete
with it. A sheet is tocsin's only if its name is in the record *and* it carries the mark, so a user's
sheet made under the same name after deleting tocsin's is never taken for tocsin's. The user's own custom
properties are kept as they are. A user who renames a tocsin sheet makes it theirs (tocsin writes a
fresh one).

What changes in a write
-----------------------
Only these registry parts may change: ``xl/workbook.xml`` (new ``<sheet>`` entries and their marks,
``fullCalcOnLoad``),
``xl/_rels/workbook.xml.rels``, ``[Content_Types].xml``, ``xl/styles.xml`` (cell formats appended, never
renumbered), ``docProps/custom.xml`` (and ``_rels/.rels`` when that part is new) and
``xl/calcChain.xml`` (entries of rewritten sheets dropped); each is rewritten only when its content
changes. Text is written as inline strings, so ``sharedStrings.xml`` stays as it is. Sheets are appended,
so positional references (``activeTab``, ``firstSheet``, ``localSheetId``) do not shift; when a sheet of
tocsin's is removed from among others they are corrected.

The write is atomic: the new package is built in a temporary file in the workbook's folder
(``.tocsin-<name>-<random>.tmp``), synced, checked to open, the source is checked to still hold the
bytes that were read (size and SHA-256), and ``os.replace`` puts the new file in place. A crash at any
moment leaves the old or the new workbook. Output is deterministic: the same inputs give the same bytes.
"""
from __future__ import annotations

import hashlib
import json
import os
import time
import zipfile
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

from watcher.xlsx.archive import MAX_TOTAL, ZipSource
from watcher.xlsx.errors import ConcurrentEditError, PackageError, SpecError
from watcher.xlsx.names import is_copy_of
from watcher.xlsx.opc import ContentTypes, parse_xml
from watcher.xlsx.plan import check_request, make_plan
from watcher.xlsx.plan import emit as _emit
from watcher.xlsx.replace import (
    Identity,
    TempFile,
    check_writable,
    copy_meta,
    fsync_dir,
    identity,
    read_meta,
    remove_abandoned,
    remove_quietly,
    rename_over,
    write_error,
    write_in_place,
)
from watcher.xlsx.replace import digest as file_digest
from watcher.xlsx.source import MARKER_PREFIX, SHEET_MARK, SheetInfo, Source, member_problems
from watcher.xlsx.spec import SheetSpec
from watcher.xlsx.validate import check_package

__all__ = ["Fingerprint", "Package", "SheetInfo", "WriteResult", "MARKER_PREFIX", "SHEET_MARK",
           "check_writable", "fingerprint_of", "validate", "write"]



@dataclass(frozen=True)
class Fingerprint:
    """What identifies the bytes of a file: size, modification time (ns) and SHA-256."""

    size: int
    mtime_ns: int
    sha256: str

    def same_bytes(self, other: Fingerprint) -> bool:
        return self.size == other.size and self.sha256 == other.sha256


@dataclass(frozen=True)
class WriteResult:
    """What one write did."""

    path: Path
    fingerprint: Fingerprint
    added: tuple[str, ...]
    replaced: tuple[str, ...]
    removed: tuple[str, ...]
    changed_parts: tuple[str, ...]
    new_parts: tuple[str, ...]
    deleted_parts: tuple[str, ...]
    seconds: float


def fingerprint_of(data: bytes, st: os.stat_result) -> Fingerprint:
    return Fingerprint(st.st_size, st.st_mtime_ns, hashlib.sha256(data).hexdigest())


def _read_file(path: Path) -> tuple[bytes, Fingerprint]:
    data, fp, _ = _read_with_stat(path)
    return data, fp


def _read_with_stat(path: Path) -> tuple[bytes, Fingerprint, os.stat_result]:
    label = path.name
    try:
        with open(path, "rb") as fh:
            before = os.fstat(fh.fileno())
            if before.st_size > MAX_TOTAL:
                raise PackageError(f"workbook '{label}' is {before.st_size / 1024**3:.1f} GiB; tocsin reads "
                                   f"workbooks up to {MAX_TOTAL // 1024**3} GiB",
                                   workbook=label, limit=MAX_TOTAL)
            data = fh.read()
            after = os.fstat(fh.fileno())
    except FileNotFoundError as exc:
        raise PackageError(f"workbook '{path}' does not exist", workbook=label) from exc
    except IsADirectoryError as exc:
        raise PackageError(f"'{path}' is a folder, not a workbook", workbook=label) from exc
    except OSError as exc:
        raise PackageError(f"workbook '{label}' cannot be read: {exc.strerror or exc}",
                           workbook=label) from exc
    moved = (before.st_size, before.st_mtime_ns) != (after.st_size, after.st_mtime_ns)
    if moved or len(data) != after.st_size:
        raise ConcurrentEditError(f"workbook '{label}' changed while tocsin read it; try again when it is "
                                  "saved", workbook=label)
    return data, fingerprint_of(data, after), after


def _source(data: bytes, path: Path) -> Source:
    """The package read from ``data``; a damaged workbook with the complete copy of an interrupted
    in-place write beside it says where that copy is."""
    try:
        return Source(data, path.name)
    except PackageError as exc:
        try:
            copies = sorted(e.name for e in os.scandir(path.parent) if is_copy_of(e.name, path))
        except OSError:
            copies = []
        if not copies:
            raise
        raise PackageError(f"{exc}; an interrupted tocsin write left the complete new workbook beside it as "
                           f"'{copies[-1]}': rename that file to '{path.name}'", workbook=path.name,
                           part=exc.part) from exc


# -- the public reader ---------------------------------------------------------------------------
@dataclass(frozen=True)
class Package:
    """A workbook package as read by :meth:`open` (see the module docstring)."""

    path: Path
    fingerprint: Fingerprint
    sheets: tuple[SheetInfo, ...]
    date1904: bool
    macro_enabled: bool
    state: dict = field(default_factory=dict)
    marker_problem: str | None = None
    _checked: dict = field(default_factory=dict, repr=False, compare=False)  # part -> problem or None

    @classmethod
    def open(cls, path: str | os.PathLike) -> Package:
        """Read the workbook at ``path`` safely."""
        path = Path(os.path.realpath(path))
        data, fp = _read_file(path)
        src = _source(data, path)
        return cls(path, fp, tuple(src.sheets), src.date1904, src.macro_enabled,
                   json.loads(json.dumps(src.marker["state"])), src.marker_problem)

    def _problems_of(self, parts: Sequence[str] | None) -> dict[str, str]:
        """Problems of ``parts`` (all members when None), checked once from the file's bytes, which must
        still be those this object was read from."""
        if parts is None or any(p not in self._checked for p in parts):
            label = self.path.name
            data, fp = _read_file(self.path)
            if not fp.same_bytes(self.fingerprint):
                raise ConcurrentEditError(f"workbook '{label}' was saved by someone else since tocsin read "
                                          "it; try again when it is saved", workbook=label)
            zs = ZipSource(data, label)
            ct = ContentTypes(parse_xml(zs.read(zs.find("[Content_Types].xml")), "[Content_Types].xml",
                                        label))
            todo = zs.names if parts is None else [p for p in parts if p not in self._checked]
            found = member_problems(zs, ct, [p for p in todo if p in zs.members])
            self._checked.update({p: found.get(p) for p in todo})
        return {p: m for p, m in self._checked.items() if m and (parts is None or p in parts)}

    @property
    def problems(self) -> dict[str, str]:
        """What is wrong with each damaged or hostile member, by member name: its data do not inflate to
        the declared size and CRC-32, or an XML part declares a document type (inflates every member
        once; see :func:`~watcher.xlsx.source.member_problems`)."""
        return self._problems_of(None)

    @property
    def sheet_problems(self) -> dict[str, str]:
        """The problems of the sheets' own parts, by sheet name (see :meth:`check_sheet`)."""
        parts = [s.part for s in self.sheets if s.part]
        found = self._problems_of(parts)
        return {s.name: found[s.part] for s in self.sheets if s.part in found}

    def check_sheet(self, name: str) -> None:
        """Raise :class:`~watcher.xlsx.errors.PackageError` (its ``part`` named) when the part of sheet
        ``name`` is damaged (its data do not match the declared size or CRC-32) or hostile (a document
        type declaration), so a reader never parses it; only that part is inflated. Names match ignoring
        case; an unknown name is not an error here. Raises ConcurrentEditError when the file changed
        since it was opened."""
        info = next((s for s in self.sheets if s.name.casefold() == name.casefold()), None)
        if info is None or not info.part:
            return
        found = self._problems_of([info.part])
        if info.part in found:
            raise PackageError(f"sheet '{info.name}' cannot be read: {found[info.part]}",
                               workbook=self.path.name, part=info.part)

    @property
    def sheet_names(self) -> tuple[str, ...]:
        return tuple(s.name for s in self.sheets)

    @property
    def owned(self) -> tuple[str, ...]:
        """Names of the sheets that are tocsin's, in tab order."""
        return tuple(s.name for s in self.sheets if s.owned)

    def write(self, sheets: Sequence[SheetSpec], *, state: dict, remove: Sequence[str] = (),
              owned: bool = True) -> WriteResult:
        """:func:`write` to this package's path, expecting the bytes this object was read from."""
        return write(self.path, sheets, state=state, remove=remove, expect=self.fingerprint, owned=owned)


def validate(path: str | os.PathLike, *, skip_cells: Sequence[str] | frozenset[str] = ()) -> list[str]:
    """Structural problems of the package at ``path`` (empty when none); see :mod:`watcher.xlsx.validate`.
    The rows and cells of the sheets named in ``skip_cells`` are not looked at."""
    return check_package(path, skip_cells=skip_cells)


def _still_same(path: Path, expect: Fingerprint, label: str) -> Identity:
    """Check that the workbook still holds the bytes ``expect`` describes (size and SHA-256); return
    the identity of the file so checked, for the last look just before the replace."""
    try:
        data, now, st = _read_with_stat(path)
    except PackageError as exc:
        raise ConcurrentEditError(f"workbook '{label}' changed while tocsin computed ({exc}); nothing was "
                                  "written, try again later", workbook=label) from exc
    if not now.same_bytes(expect):
        raise ConcurrentEditError(f"workbook '{label}' was saved by someone else while tocsin computed; "
                                  "nothing was written, try again later", workbook=label)
    return identity(st)


def write(path: str | os.PathLike, sheets: Sequence[SheetSpec], *, state: dict,
          remove: Sequence[str] = (), expect: Fingerprint | None, owned: bool = True) -> WriteResult:
    """Write tocsin's sheets into the workbook at ``path`` in one atomic replace.

    Parameters
    ----------
    path : path-like
        The workbook (``.xlsx`` / ``.xlsm``); a symbolic link is followed and the file it names replaced.
    sheets : sequence of SheetSpec
        Sheets to write: a name tocsin owns is replaced in place, a new name is appended after the others.
    state : dict
        JSON-serialisable record kept in the package (see the module docstring); replaces the old one.
    remove : sequence of str
        Names of tocsin's sheets to delete (names not present are ignored).
    expect : Fingerprint or None
        The fingerprint of the bytes the caller read (``Package.fingerprint``); None skips that check
        (the check just before the replace still runs).
    owned : bool
        False hands the new sheets to the user (e.g. the job table ``tocsin init`` creates): they are
        not recorded as tocsin's and carry no mark, so tocsin never rewrites or removes them. Such
        sheets can only be added: a name that exists is an error.

    Returns
    -------
    WriteResult

    Raises
    ------
    OwnershipError
        A requested name belongs to a user's sheet.
    ConcurrentEditError
        The file changed since ``expect`` was taken, or while the new package was built.
    PackageError
        The file is not a workbook tocsin can edit, or cannot be written.
    """
    t0 = time.perf_counter()
    path = Path(os.path.realpath(path))
    label = path.name
    if not isinstance(state, dict):
        raise SpecError(f"`state` must be a dict; got {type(state).__name__}", where="state")
    if isinstance(remove, str):
        remove = (remove,)
    data, fp = _read_file(path)
    check_writable(path)
    if expect is not None and not fp.same_bytes(expect):
        raise ConcurrentEditError(f"workbook '{label}' was saved by someone else since tocsin read it; "
                                  "nothing was written, try again later", workbook=label)
    expect = fp
    src = _source(data, path)
    check_request(src, sheets, remove, owned=owned)
    plan = make_plan(src, sheets, state, remove, owned=owned)
    folder = path.parent
    remove_abandoned(path)
    with TempFile(path) as temp:
        tmp = temp.path
        try:
            try:
                with temp.open() as fh:
                    written_new = _emit(plan, fh)
                    fh.flush()
                    os.fsync(fh.fileno())
                    digest, size = file_digest(fh)
                    try:  # the new package opens as a zip and holds what was written
                        with zipfile.ZipFile(fh) as check:
                            present = {n.casefold() for n in check.namelist()}
                    except zipfile.BadZipFile as exc:
                        raise PackageError(f"internal error: the new package of '{label}' does not open",
                                           workbook=label) from exc
            except OSError as exc:  # no space, a quota, an I/O error: in the writer or its deflate thread
                raise write_error(exc, path) from exc
            missing = [n for n in written_new if n.casefold() not in present]
            if missing:
                raise PackageError(f"internal error: the new package of '{label}' lacks {missing}",
                                   workbook=label)
            meta = read_meta(path)
            in_place = meta is None or meta.nlink > 1 or not copy_meta(meta, tmp)
            seen = _still_same(path, expect, label)  # the bytes (SHA-256); then only a stat before the rename
            if in_place or not rename_over(tmp, path, seen):
                write_in_place(path, tmp, digest, size, seen)
        except BaseException:
            remove_quietly(tmp)
            raise
    fsync_dir(folder)
    st = os.stat(path)
    new_fp = Fingerprint(st.st_size, st.st_mtime_ns, digest)
    return WriteResult(path, new_fp, tuple(plan.added), tuple(plan.replaced), tuple(plan.removed),
                       tuple(sorted(plan.registry)), tuple(written_new),
                       tuple(sorted(n for n in src.zip.names if n.casefold() in plan.deleted
                                    and n.casefold() not in {w.casefold() for w in written_new})),
                       time.perf_counter() - t0)
