"""The texts every face of tocsin shares: the caution line (DESIGN.md §9) and the version.

One home each: the forecast and profile sheets, the command's help and the demo print these, and the
refresh fingerprints record :data:`VERSION` (a new version recomputes every job once).
"""
from __future__ import annotations

from importlib import metadata

__all__ = ["CAUTION", "VERSION"]

CAUTION = ("Caution: these are statistical forecasts from past data, not a substitute for official "
           "warnings, clinical or engineering judgement, or the procedures that apply where you work.")


def _installed_version() -> str:
    """The version of the installed distribution ``tocsin``; a source tree that was never installed
    says so rather than guessing a number."""
    try:
        return metadata.version("tocsin")
    except metadata.PackageNotFoundError:
        return "0+unknown (not installed)"


VERSION = _installed_version()
