"""LibreOffice headless as a test oracle: open our output in the real spreadsheet program.

Facts (as found on this machine, LibreOffice 7.4): every soffice process gets its own profile (a shared
profile loses files when runs overlap); the exit status is 0 even when a file cannot be loaded, so we
check stderr and that the output exists; the default profile never recalculates .xlsx formulas, so a
profile can be seeded with OOXMLRecalcMode=0 when a test needs recalculation.
"""
from __future__ import annotations

import csv
import os
import shutil
import subprocess
import tempfile
from pathlib import Path

import pytest

# One CSV file per sheet, UTF-8, comma separated, formatted values as shown.
CSV_ALL_SHEETS = "csv:Text - txt - csv (StarCalc):44,34,76,1,,0,false,true,true,false,false,-1"

_RECALC_XCU = """<?xml version="1.0" encoding="UTF-8"?>
<oor:items xmlns:oor="http://openoffice.org/2001/registry" xmlns:xs="http://www.w3.org/2001/XMLSchema"
 xmlns:xsi="http://www.w3.org/2001/XMLSchema-instance">
<item oor:path="/org.openoffice.Office.Calc/Formula/Load"><prop oor:name="OOXMLRecalcMode" oor:op="fuse">
<value>0</value></prop></item>
</oor:items>
"""


def soffice() -> str | None:
    return shutil.which("soffice") or shutil.which("libreoffice")


def require_soffice() -> str:
    """The soffice binary; skip only where it is absent *and* CI is unset (under CI it must run)."""
    exe = soffice()
    if exe is None:
        if os.environ.get("CI"):
            pytest.fail("LibreOffice (soffice) is required under CI but was not found")
        pytest.skip("LibreOffice (soffice) not installed")
    return exe


def convert(path: Path, fmt: str, outdir: Path, *, recalc: bool = False, timeout: float = 180) -> list[Path]:
    """Convert ``path`` with LibreOffice headless; return the files produced. Fails the test when
    LibreOffice cannot load the file or produces nothing."""
    exe = require_soffice()
    outdir.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory(prefix="tocsin-lo-profile-") as profile:
        if recalc:
            user = Path(profile) / "user"
            user.mkdir(parents=True)
            (user / "registrymodifications.xcu").write_text(_RECALC_XCU, encoding="utf-8")
        before = set(outdir.iterdir())
        proc = subprocess.run(
            [exe, f"-env:UserInstallation=file://{profile}", "--headless", "--norestore",
             "--convert-to", fmt, "--outdir", str(outdir), str(path)],
            capture_output=True, text=True, timeout=timeout,
        )
    err = proc.stderr + proc.stdout
    assert "could not be loaded" not in err, f"LibreOffice could not load {path.name}: {err}"
    produced = sorted(set(outdir.iterdir()) - before)
    assert produced, f"LibreOffice produced nothing for {path.name}: {err}"
    return produced


def sheets_as_csv(path: Path, outdir: Path, **kw) -> dict[str, list[list[str]]]:
    """Every sheet of the workbook as CSV rows, keyed by sheet name (LibreOffice names the files
    ``<stem>-<sheet>.csv``)."""
    files = convert(path, CSV_ALL_SHEETS, outdir, **kw)
    out: dict[str, list[list[str]]] = {}
    for f in files:
        if f.suffix != ".csv":
            continue
        sheet = f.stem[len(path.stem) + 1:] if f.stem.startswith(path.stem + "-") else f.stem
        with f.open(newline="", encoding="utf-8") as fh:
            out[sheet] = list(csv.reader(fh))
    return out
