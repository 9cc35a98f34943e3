"""File-name rules: which files are workbooks, which are owner files of an open workbook, and the names
of tocsin's own temporary files. One home for all of them: the writer names its temporary files here,
the watcher ignores them and waits on owner files by these rules.

* Workbooks: ``*.xlsx`` and ``*.xlsm`` (any case), except owner and temporary files.
* Owner files (a spreadsheet program keeps one beside a workbook while it is open): ``~$name`` and
  ``.~lock.name#`` (common practice of the two families of programs); for long names (a stem of 8 or
  more characters) one family replaces the first two characters of the name by ``~$`` instead
  (recalled from memory).
* tocsin's temporary files: ``.tocsin-<stem>-<random>.tmp`` in the workbook's folder; while a workbook
  is rewritten in place, the complete new package waits beside it as ``.tocsin-<stem>-<random>.copy.xlsx``
  (``.xlsm`` for a macro workbook), so an interrupted write loses nothing.
"""
from __future__ import annotations

from pathlib import Path

__all__ = [
    "LONG_STEM",
    "TOCSIN_TEMP_PREFIX",
    "WORKBOOK_SUFFIXES",
    "copy_name",
    "is_copy_of",
    "is_temp_of",
    "is_workbook_name",
    "owner_file",
    "owner_file_candidates",
    "temp_affixes",
    "workbook_of_owner_file",
]

WORKBOOK_SUFFIXES = (".xlsx", ".xlsm")
TOCSIN_TEMP_PREFIX = ".tocsin-"
"""How every temporary file tocsin writes beside a workbook starts (the watcher ignores such files)."""
_TEMP_SUFFIX = ".tmp"
_COPY_INFIX = ".copy"
_EXCEL_OWNER_PREFIX = "~$"
_LIBRE_LOCK_PREFIX = ".~lock."
_LIBRE_LOCK_SUFFIX = "#"
LONG_STEM = 8
"""A workbook whose name without its extension has this many characters or more gets the owner file
``~$`` + ``name[2:]`` from one family of spreadsheet programs (recalled from memory)."""


def is_workbook_name(name: str) -> bool:
    """True when a file name is a workbook tocsin may refresh (not a temporary or owner file).

    Parameters
    ----------
    name : str
        The file name (the last path component).

    Examples
    --------
    >>> [is_workbook_name(n) for n in ("ferry.xlsx", "Pumps.XLSM", "~$ferry.xlsx", ".tocsin-ab12.tmp")]
    [True, True, False, False]
    """
    lower = name.lower()
    if not lower.endswith(WORKBOOK_SUFFIXES):
        return False
    return not (
        name.startswith(_EXCEL_OWNER_PREFIX)
        or name.startswith(_LIBRE_LOCK_PREFIX)
        or name.startswith(TOCSIN_TEMP_PREFIX)
    )


def temp_affixes(workbook: Path) -> tuple[str, str]:
    """``(prefix, suffix)`` of the temporary files a write of ``workbook`` makes in its folder:
    ``('.tocsin-<stem>-', '.tmp')``; the random part goes between them."""
    return f"{TOCSIN_TEMP_PREFIX}{workbook.stem}-", _TEMP_SUFFIX


def is_temp_of(name: str, workbook: Path) -> bool:
    """True when the file name ``name`` is a temporary file of a write of ``workbook``."""
    prefix, suffix = temp_affixes(workbook)
    return name.startswith(prefix) and name.endswith(suffix) and len(name) > len(prefix) + len(suffix)


def copy_name(temp: Path, workbook: Path) -> Path:
    """The name a temporary file of ``workbook`` takes while the workbook is rewritten in place:
    ``.tocsin-<stem>-<random>.copy.xlsx``."""
    return temp.with_name(temp.name[:-len(_TEMP_SUFFIX)] + _COPY_INFIX + workbook.suffix.lower())


def is_copy_of(name: str, workbook: Path) -> bool:
    """True when the file name ``name`` is the complete new copy of an in-place write of ``workbook``."""
    prefix, _ = temp_affixes(workbook)
    suffix = _COPY_INFIX + workbook.suffix.lower()
    return name.startswith(prefix) and name.endswith(suffix) and len(name) > len(prefix) + len(suffix)


def owner_file_candidates(path: Path) -> tuple[Path, ...]:
    """The owner files that, when present, mean ``path`` is open in a spreadsheet program.

    ``~$name`` and ``.~lock.name#`` (common practice of the two families of programs). For a long name,
    one family replaces the first two characters of the name by ``~$`` instead of prefixing it (recalled
    from memory: a stem of :data:`LONG_STEM` or more characters), so ``~$`` + ``name[2:]`` is a candidate
    for such names only.
    """
    name = path.name
    candidates = [path.with_name(_EXCEL_OWNER_PREFIX + name)]
    if _is_long(path):
        candidates.append(path.with_name(_EXCEL_OWNER_PREFIX + name[2:]))
    candidates.append(path.with_name(_LIBRE_LOCK_PREFIX + name + _LIBRE_LOCK_SUFFIX))
    return tuple(candidates)


def _is_long(path: Path) -> bool:
    return len(path.stem) >= LONG_STEM


def owner_file(path: Path) -> Path | None:
    """The owner file of ``path`` that exists now, or None when the workbook is not open anywhere.

    ``~$`` + ``name[2:]`` is also the plain owner file of the workbook ``name[2:]`` when that name is
    short; if that workbook exists beside ``path``, the owner file is taken to be its own, so
    ``~$report.xlsx`` (report.xlsx open) does not make ``xxreport.xlsx`` busy.
    """
    short_twin = path.with_name(path.name[2:])
    for candidate in owner_file_candidates(path):
        if candidate.name == _EXCEL_OWNER_PREFIX + short_twin.name and not _is_long(short_twin) \
                and short_twin.exists():
            continue
        if candidate.exists():
            return candidate
    return None


def workbook_of_owner_file(path: Path) -> Path | None:
    """The workbook an owner file belongs to (``~$ferry.xlsx`` -> ``ferry.xlsx``), or None.

    Only the untruncated forms map back; a waiting workbook notices a truncated owner file's removal by
    polling (see ``watcher.watch.debounce.Debouncer``).
    """
    name = path.name
    if name.startswith(_LIBRE_LOCK_PREFIX) and name.endswith(_LIBRE_LOCK_SUFFIX):
        inner = name[len(_LIBRE_LOCK_PREFIX):-len(_LIBRE_LOCK_SUFFIX)]
    elif name.startswith(_EXCEL_OWNER_PREFIX):
        inner = name[len(_EXCEL_OWNER_PREFIX):]
    else:
        return None
    return path.with_name(inner) if is_workbook_name(inner) else None
