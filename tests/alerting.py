"""Helpers of the alert tests: report ``future`` lists, the workbook's record round trip, small scripts.

The ``future`` lists follow the report's shape (DESIGN.md §8) and hold invented numbers.
"""
from __future__ import annotations

import json
import os
import stat
import sys
from pathlib import Path
from typing import Any


def future(forecast: int | None, probability: float | None = None, *, method: str = "logistic",
           period: str | int = "2026-12-03", origin: str | int = "2026-12-02",
           more: int = 0) -> list[dict[str, Any]]:
    """A report ``future`` list whose first period holds ``method``'s forecast (and ``more`` later ones)."""
    entries = [{"period": period, "origin": origin,
                "forecasts": {method: {"forecast": forecast, "probability": probability},
                              "naive": {"forecast": 0, "probability": None}}}]
    for i in range(more):
        entries.append({"period": f"later-{i}", "origin": origin,
                        "forecasts": {method: {"forecast": 1 - (forecast or 0), "probability": None}}})
    return entries


def stored(record: Any) -> Any:
    """The record as it comes back from tocsin's record in the workbook (JSON text in between)."""
    return None if record is None else json.loads(json.dumps(record))


def script(path: Path, body: str) -> Path:
    """An executable Python script at ``path`` (run by this interpreter) with ``body`` after the imports."""
    path.write_text(f"#!{sys.executable}\nimport json, os, sys, time\n{body}\n", encoding="utf-8")
    path.chmod(path.stat().st_mode | stat.S_IXUSR)
    return path


def posix_only() -> bool:
    return os.name == "posix"
