"""The package installs, imports and answers --help; the core stays free of file and desktop libraries."""
from __future__ import annotations

import subprocess
import sys

import pytest

CORE = ["sheetfns", "sheetfns.errors", "sheetfns.checks", "sheetfns.events", "sheetfns.partition",
        "sheetfns.benchmarks", "sheetfns.logistic", "sheetfns.scores", "sheetfns.profile"]


def test_errors_are_value_errors():
    from sheetfns import errors
    from watcher.refresh import errors as refresh_errors
    from watcher.xlsx import errors as xlsx_errors
    for name in ("TocsinError", "InputError", "CriterionError", "PartitionError"):
        assert issubclass(getattr(errors, name), ValueError), name
    for name in ("JobError", "ReaderError", "BookError"):
        assert issubclass(getattr(refresh_errors, name), ValueError), name
    for name in ("XlsxError", "SpecError", "SheetNameError", "PackageError", "OwnershipError",
                 "ConcurrentEditError"):
        assert issubclass(getattr(xlsx_errors, name), xlsx_errors.XlsxError), name


def test_core_imports_neither_xlwings_nor_watchdog():
    code = ("import importlib, sys\n"
            f"for m in {CORE!r}:\n"
            "    importlib.import_module(m)\n"
            "bad = [m for m in ('xlwings', 'watchdog', 'openpyxl', 'python_calamine') if m in sys.modules]\n"
            "print(','.join(bad))\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "", f"core pulled in: {out.stdout.strip()}"


def test_cli_help_lists_commands():
    out = subprocess.run([sys.executable, "-m", "watcher.cli", "--help"], capture_output=True, text=True)
    assert out.returncode == 0
    for word in ("refresh", "check", "init", "watch", "demo"):
        assert word in out.stdout
    assert "not a substitute for official warnings" in " ".join(out.stdout.split())


@pytest.mark.parametrize("argv", [["--version"]])
def test_cli_version(argv):
    out = subprocess.run([sys.executable, "-m", "watcher.cli", *argv], capture_output=True, text=True)
    assert out.returncode == 0 and out.stdout.startswith("tocsin ")


def test_version_has_one_home():
    """pyproject.toml takes the version from watcher/refresh/texts.py (read at build time), so the
    installed distribution's metadata and the version the command prints are the same."""
    from importlib import metadata

    from watcher.refresh.texts import VERSION
    assert metadata.version("tocsin") == VERSION
    out = subprocess.run([sys.executable, "-m", "watcher.cli", "--version"], capture_output=True, text=True)
    assert out.stdout.split()[1] == VERSION
