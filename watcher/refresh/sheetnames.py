"""The names of a job's output sheets. The rule a sheet name must meet is the writer's
(:func:`watcher.xlsx.spec.check_sheet_name`: at most 31 characters, none of ``: \\ / ? * [ ]`` nor a
control character, no apostrophe at either end, not ``History``); this module only applies it, so the
job table refuses exactly what the writer would refuse.

The default forecast sheet is ``"<job> forecast"`` and the profile sheet ``"<job> profile"``, where the
characters of the job name that a sheet name cannot hold become ``-`` and a job name longer than 22
characters is cut to 22 (so both names fit and stay a pair). With an explicit ``output_sheet`` the
profile sheet is that name with a trailing `` forecast`` replaced by `` profile`` (or `` profile``
appended, the base cut to 23 characters).
"""
from __future__ import annotations

import functools

from watcher.xlsx.spec import check_sheet_name

__all__ = ["FORECAST_SUFFIX", "PROFILE_SUFFIX", "SHEET_NAME_MAX", "output_names", "sheet_name_problem"]

SHEET_NAME_MAX = 31
FORECAST_SUFFIX, PROFILE_SUFFIX = " forecast", " profile"
_STEM_MAX = SHEET_NAME_MAX - len(FORECAST_SUFFIX)          # 22


def sheet_name_problem(name: str) -> str | None:
    """Why the writer would refuse ``name`` as a sheet name (its own words), or None when it would not."""
    try:
        check_sheet_name(name)
    except ValueError as exc:   # the writer's error family (ValueError subclasses)
        return str(exc)
    return None


@functools.lru_cache(maxsize=512)
def _allowed(ch: str) -> bool:
    """Whether a sheet name may hold ``ch`` in its middle (asked of the writer's rule)."""
    return sheet_name_problem(f"a{ch}a") is None


def _stem(job: str) -> str:
    s = "".join(ch if _allowed(ch) else "-" for ch in job).strip("'").strip()
    return s[:_STEM_MAX].rstrip().rstrip("'") or "job"


def output_names(job: str, output_sheet: str | None = None) -> tuple[str, str]:
    """The forecast and profile sheet names of a job (the rules of the module docstring).

    >>> output_names("second sailing")
    ('second sailing forecast', 'second sailing profile')
    >>> output_names("pump station high level alarm")
    ('pump station high leve forecast', 'pump station high leve profile')
    >>> output_names("ferry", "Ferry forecast")
    ('Ferry forecast', 'Ferry profile')
    >>> output_names("bell\\x07 / siren")
    ('bell- - siren forecast', 'bell- - siren profile')
    """
    if output_sheet is None:
        stem = _stem(job)
        return stem + FORECAST_SUFFIX, stem + PROFILE_SUFFIX
    base = output_sheet[:-len(FORECAST_SUFFIX)] if output_sheet.lower().endswith(FORECAST_SUFFIX) \
        else output_sheet
    base = base[:SHEET_NAME_MAX - len(PROFILE_SUFFIX)].rstrip()
    return output_sheet, (base or "job") + PROFILE_SUFFIX
