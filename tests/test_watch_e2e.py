"""The watcher with the real refresh, on a copy of a sample workbook (island ferry, 2 jobs).

Checks the whole loop: the initial refresh writes the forecast sheets; tocsin's own write comes back as
"unchanged" without being read again (the refresh is not called for it); a colleague's save (one data
cell edited inside the package, every other part kept, as a spreadsheet program re-saves) gives
exactly one more refresh; a damaged workbook is logged and the watcher carries on;
``python -m watcher.cli watch`` stops on SIGTERM with exit code 0.
"""
from __future__ import annotations

import io
import json
import os
import re
import shutil
import signal
import subprocess
import sys
import threading
import time
import zipfile
from pathlib import Path
from xml.etree import ElementTree

import pytest
from test_watch import wait_for

from watcher.refresh.workbook import refresh_workbook
from watcher.watch.log import WatchLog
from watcher.watch.service import Watcher

ROOT = Path(__file__).resolve().parent.parent
SAMPLE = ROOT / "sample_workbooks" / "island_ferry.xlsx"
NS = {"m": "http://schemas.openxmlformats.org/spreadsheetml/2006/main",
      "r": "http://schemas.openxmlformats.org/officeDocument/2006/relationships",
      "p": "http://schemas.openxmlformats.org/package/2006/relationships"}
TIMEOUT = 180  # the real refresh of two logistic jobs on a shared 2-core machine

pytestmark = pytest.mark.slow


def sheet_names(path: Path) -> list[str]:
    with zipfile.ZipFile(path) as z:
        root = ElementTree.fromstring(z.read("xl/workbook.xml"))
    return [s.get("name") for s in root.find("m:sheets", NS)]


def sheet_part(z: zipfile.ZipFile, name: str) -> str:
    """The package part of the sheet called ``name`` (ECMA-376 part 1: workbook -> relationship)."""
    book = ElementTree.fromstring(z.read("xl/workbook.xml"))
    rid = next(s.get(f"{{{NS['r']}}}id") for s in book.find("m:sheets", NS) if s.get("name") == name)
    rels = ElementTree.fromstring(z.read("xl/_rels/workbook.xml.rels"))
    target = next(r.get("Target") for r in rels if r.get("Id") == rid)
    return target.lstrip("/") if target.startswith("/") else "xl/" + target


def with_cell_edited(path: Path, sheet: str, ref: str, value: float) -> bytes:
    """The package bytes with one numeric cell changed and every other part copied unchanged."""
    out = io.BytesIO()
    with zipfile.ZipFile(path) as src, zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst:
        part = sheet_part(src, sheet)
        for info in src.infolist():
            data = src.read(info)
            if info.filename == part:
                text, count = re.subn(rf'(<c r="{ref}"[^>]*><v>)[^<]*(</v>)', rf"\g<1>{value!r}\g<2>",
                                      data.decode("utf-8"))
                assert count == 1, f"cell {ref} not found in {part}"
                data = text.encode("utf-8")
            dst.writestr(info, data)
    return out.getvalue()


def save_by_rename(path: Path, data: bytes) -> None:
    tmp = path.with_name("lu4711.tmp")
    tmp.write_bytes(data)
    os.replace(tmp, path)


class Outcomes:
    def __init__(self) -> None:
        self.items: list = []
        self.lock = threading.Lock()

    def __call__(self, outcome) -> None:
        with self.lock:
            self.items.append(outcome)

    def statuses(self, path: Path) -> list[str]:
        with self.lock:
            return [o.status for o in self.items if o.path == path]


def test_real_refresh_initial_pass_then_a_colleagues_save(tmp_path):
    share = tmp_path.resolve() / "share"
    share.mkdir()
    book = share / "ferry.xlsx"
    shutil.copy(SAMPLE, book)
    broken = share / "broken.xlsx"
    with zipfile.ZipFile(broken, "w") as z:  # a complete zip, but not a readable workbook
        z.writestr("[Content_Types].xml", "<Types/>")
        z.writestr("xl/workbook.xml", "<workbook><sheets>")
    outcomes = Outcomes()
    stream = io.StringIO()
    log = WatchLog(stream, tmp_path / "log.jsonl")
    calls: list[Path] = []

    def counted(path, **kwargs):
        calls.append(path)
        return refresh_workbook(path, **kwargs)

    with Watcher([share], quiet=0.5, log=log, on_outcome=outcomes, refresh=counted) as watcher:
        assert wait_for(lambda: "unchanged" in outcomes.statuses(book) and watcher.idle(), TIMEOUT), \
            outcomes.statuses(book)
        assert outcomes.statuses(book) == ["refreshed", "unchanged"]
        assert calls.count(book) == 1  # its own write came back and was known without a refresh
        with outcomes.lock:
            assert "own write" in [o for o in outcomes.items if o.path == book][-1].message
        assert outcomes.statuses(broken) == ["failed"]
        names = sheet_names(book)
        assert {"Passengers", "tocsin", "second sailing forecast"} <= set(names)

        save_by_rename(book, with_cell_edited(book, "Passengers", "B2923", 1999.0))
        def settled_again() -> bool:
            return outcomes.statuses(book).count("unchanged") == 2 and watcher.idle()
        assert wait_for(settled_again, TIMEOUT), outcomes.statuses(book)
        assert outcomes.statuses(book) == ["refreshed", "unchanged", "refreshed", "unchanged"]
        assert calls.count(book) == 2
        assert sheet_names(book) == names
    log.close()
    text = stream.getvalue()
    assert "broken.xlsx" in text and "failed" in text
    assert "Traceback" not in text
    records = [json.loads(x) for x in (tmp_path / "log.jsonl").read_text().splitlines()]
    refreshed = [r for r in records if r["event"] == "refresh" and r["status"] == "refreshed"]
    assert {j["name"] for j in refreshed[0]["jobs"]} == {"second sailing", "second sailing, 7 days"}
    assert not list(share.glob(".tocsin-*"))


@pytest.mark.skipif(os.name == "nt", reason="POSIX signals")
def test_module_entry_with_the_real_refresh_stops_on_sigterm(tmp_path):
    share = tmp_path.resolve() / "share"
    share.mkdir()
    shutil.copy(SAMPLE, share / "ferry.xlsx")
    log = tmp_path / "log.jsonl"
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")]))
    proc = subprocess.Popen([sys.executable, "-m", "watcher.cli", "watch", str(share), "--quiet", "0.3",
                             "--log", str(log)], env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True)
    try:
        def refreshed() -> bool:
            lines = log.read_text().splitlines() if log.exists() else []
            return any(json.loads(x).get("status") == "refreshed" for x in lines) or proc.poll() is not None
        assert wait_for(refreshed, TIMEOUT)
        assert proc.poll() is None, proc.communicate()
        sent = time.monotonic()
        proc.send_signal(signal.SIGTERM)
        _out, err = proc.communicate(timeout=20)
        assert proc.returncode == 0, err
        assert time.monotonic() - sent < 6.0
        assert "tocsin watch: watching" in err and "stopped (SIGTERM)" in err
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.communicate()
