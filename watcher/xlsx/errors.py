"""The workbook writer's own exceptions. Every one is a ``ValueError`` (catch :class:`XlsxError` for all).

Each error carries what it is about as attributes, so a caller reads ``exc.workbook``, ``exc.sheet``,
``exc.part`` or ``exc.limit`` instead of parsing the message; the message (``str(exc)``) is the plain
sentence for the user: what is wrong, where, and what to do.

::

    XlsxError                  base of every error the writer raises on purpose
    +-- SpecError              a sheet description (SheetSpec, Table, Column, ...) or an argument is invalid
    |   +-- SheetNameError     a sheet name breaks a rule of the format (.name, .rule, .limit)
    +-- PackageError           the workbook cannot be read or written safely (.workbook, .part, .limit)
        +-- OwnershipError     a sheet to write or remove is the user's, not tocsin's (.sheet)
        +-- ConcurrentEditError  the workbook changed on disk while tocsin computed; nothing written
        +-- WriteError         the new package could not be written (disk full, quota, I/O error, ...)
        +-- ReadOnlyWorkbookError  the workbook is read-only (for everyone, or for tocsin's user)
"""
from __future__ import annotations

__all__ = ["ConcurrentEditError", "OwnershipError", "PackageError", "SheetNameError", "SpecError",
           "ReadOnlyWorkbookError", "WriteError", "XlsxError"]


class XlsxError(ValueError):
    """Base class of every error the workbook writer raises on purpose.

    Attributes
    ----------
    workbook : str or None
        The workbook's file name, where the error concerns one.
    """

    def __init__(self, message: str, *, workbook: str | None = None) -> None:
        super().__init__(message)
        self.workbook = workbook


class SpecError(XlsxError):
    """A description of a sheet (:class:`~watcher.xlsx.spec.SheetSpec`, its blocks and charts) or an
    argument of :func:`~watcher.xlsx.package.write` is invalid; raised before any file is touched.

    Attributes
    ----------
    where : str or None
        The thing that is wrong, e.g. ``"Table at C3"`` or ``"chart 'ROC curve'"``.
    """

    def __init__(self, message: str, *, where: str | None = None, workbook: str | None = None) -> None:
        super().__init__(message, workbook=workbook)
        self.where = where


class SheetNameError(SpecError):
    """A sheet name breaks one of the format's rules (:func:`~watcher.xlsx.spec.check_sheet_name`).

    Attributes
    ----------
    name : object
        The name as given.
    rule : str
        Which rule: ``"type"`` (not text), ``"empty"``, ``"length"``, ``"characters"`` (one of
        ``[]:*?/\\``), ``"control"`` (a control character), ``"apostrophe"`` (at the start or end),
        ``"reserved"`` (``History``).
    limit : int or None
        The limit a ``"length"`` error broke (31).
    """

    def __init__(self, message: str, *, name: object = None, rule: str = "",
                 limit: int | None = None) -> None:
        super().__init__(message, where="sheet name")
        self.name = name
        self.rule = rule
        self.limit = limit


class PackageError(XlsxError):
    """A workbook package cannot be read or written safely (not a zip, truncated, unsafe XML, too big,
    a file-system failure, ...); nothing was changed.

    Attributes
    ----------
    workbook : str or None
        The workbook's file name.
    part : str or None
        The package member concerned, if one is (e.g. ``"xl/workbook.xml"``).
    limit : int or None
        The limit that was exceeded, in bytes (or members), if the error is about one.
    """

    def __init__(self, message: str, *, workbook: str | None = None, part: str | None = None,
                 limit: int | None = None) -> None:
        super().__init__(message, workbook=workbook)
        self.part = part
        self.limit = limit


class OwnershipError(PackageError):
    """A sheet tocsin was asked to write or remove is not tocsin's (a user's sheet of that name).

    Attributes
    ----------
    sheet : str or None
        The sheet's name as the workbook spells it.
    unmarked : bool
        True when the sheet has tocsin's name in tocsin's record but not tocsin's mark on the sheet
        (someone made it after deleting tocsin's).
    """

    def __init__(self, message: str, *, workbook: str | None = None, sheet: str | None = None,
                 unmarked: bool = False) -> None:
        super().__init__(message, workbook=workbook)
        self.sheet = sheet
        self.unmarked = unmarked


class ConcurrentEditError(PackageError):
    """The workbook changed on disk while tocsin read it or computed; nothing was written (try later)."""


class WriteError(PackageError):
    """The new package could not be written beside the workbook (no space left, a quota, an I/O error,
    ...); the temporary file is removed and the workbook is as it was.

    Attributes
    ----------
    folder : str or None
        The folder the write went to.
    errno : int or None
        The operating system's error number (``errno.ENOSPC``, ``errno.EDQUOT``, ``errno.EIO``, ...).
    """

    def __init__(self, message: str, *, workbook: str | None = None, folder: str | None = None,
                 errno: int | None = None) -> None:
        super().__init__(message, workbook=workbook)
        self.folder = folder
        self.errno = errno


class ReadOnlyWorkbookError(PackageError):
    """The workbook is read-only and is left alone: no write permission bit for anyone (``reason``
    ``"mode"``), or the user running tocsin may not write it (``reason`` ``"permission"``).

    Attributes
    ----------
    mode : int or None
        The workbook's permission bits (e.g. ``0o444``).
    owner : int or None
        The workbook owner's user id.
    user : int or None
        The user id tocsin runs as.
    reason : str
        ``"mode"`` or ``"permission"``.
    """

    def __init__(self, message: str, *, workbook: str | None = None, mode: int | None = None,
                 owner: int | None = None, user: int | None = None, reason: str = "mode") -> None:
        super().__init__(message, workbook=workbook)
        self.mode = mode
        self.owner = owner
        self.user = user
        self.reason = reason
