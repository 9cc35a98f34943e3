"""The alert room's errors: every one a ``ValueError`` (through :class:`sheetfns.errors.TocsinError`), so the
command's ``error: ...`` handling catches them like any other tocsin error."""
from __future__ import annotations

from sheetfns.errors import TocsinError

__all__ = ["AlertError", "AlertOptionError", "AlertSettingError"]


class AlertError(TocsinError):
    """Base class of the alert room's errors."""


class AlertOptionError(AlertError):
    """An alert option of the command line (``--notify``, ``--mail-to``, ``--mail-from``, ``--smtp``) or an
    ``TOCSIN_SMTP_*`` environment variable is invalid; the message names the option and the value."""


class AlertSettingError(AlertError):
    """The job table's ``alert`` setting is not ``best``, ``off`` or a method key; the caller adds the row."""
