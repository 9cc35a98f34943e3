"""Crash safety of the package writer: a writing process killed with SIGKILL at random moments always
leaves a workbook that opens, passes the structural validator and is one whole version (its sheet and
its state agree), never a mixture or a broken file.

The writer runs in a forked child that rewrites the workbook again and again (each write a new version
number, both in tocsin's state and in the sheet's cells); the parent kills it after a random delay
spread over a few write durations, so the kill lands in every phase: reading, building the temporary
file, syncing, checking, replacing. Seeded, so a failure can be replayed.
"""
from __future__ import annotations

import multiprocessing
import os
import random
import signal
import time

import corpus
import numpy as np
import pytest
from python_calamine import CalamineWorkbook

from watcher.xlsx.package import Package, validate, write
from watcher.xlsx.spec import Column, SheetSpec, Table

pytestmark = pytest.mark.skipif(os.name != "posix" or "fork" not in multiprocessing.get_all_start_methods(),
                                reason="needs fork and SIGKILL")
TRIALS = 60
ROWS = 3_000


def _spec(version: int) -> SheetSpec:
    col = np.full(ROWS, float(version))
    noise = np.arange(ROWS) / 7.0 + version
    return SheetSpec("Fc", (Table(0, 0, ("version", "noise"), (Column(col), Column(noise, "dec3"))),))


def _writer_loop(path: str, start: int) -> None:  # runs in the child until killed
    version = start
    while True:
        version += 1
        p = Package.open(path)
        write(path, [_spec(version)], state={"version": version}, expect=p.fingerprint)


def _version_of(path) -> int:
    p = Package.open(path)
    rows = CalamineWorkbook.from_path(str(path)).get_sheet_by_name("Fc").to_python()
    in_sheet = {r[0] for r in rows[1:]}
    assert len(in_sheet) == 1 and len(rows) == ROWS + 1, "the sheet mixes versions"
    version = p.state["version"]
    assert in_sheet == {float(version)}, f"state says {version}, sheet says {in_sheet}"
    return version


def test_sigkill_at_random_moments(tmp_path, tmp_path_factory):
    books = corpus.build(tmp_path_factory.mktemp("crash-corpus"), with_libreoffice=False)
    path = corpus.copy_book(books, "names", tmp_path)
    write(path, [_spec(0)], state={"version": 0}, expect=Package.open(path).fingerprint)
    t0 = time.perf_counter()
    for v in (1, 2, 3):
        write(path, [_spec(v)], state={"version": v}, expect=Package.open(path).fingerprint)
    one_write = (time.perf_counter() - t0) / 3
    rng = random.Random(4242)
    ctx = multiprocessing.get_context("fork")
    version = _version_of(path)
    kept_old = got_new = 0
    for trial in range(TRIALS):
        child = ctx.Process(target=_writer_loop, args=(str(path), version), daemon=True)
        child.start()
        time.sleep(rng.uniform(0.0, 4.0 * one_write))
        os.kill(child.pid, signal.SIGKILL)
        child.join(10)
        assert child.exitcode == -signal.SIGKILL, f"trial {trial}: the writer was not killed"
        problems = validate(path)
        assert problems == [], f"trial {trial}: {problems}"
        now = _version_of(path)
        assert now >= version, f"trial {trial}: went back to version {now}"
        kept_old += now == version
        got_new += now > version
        version = now
        for stray in tmp_path.glob(".tocsin-*.tmp"):  # what a killed writer leaves; never the workbook
            stray.unlink()
    # both outcomes happened, so kills landed before and after the replace (and in between)
    assert kept_old >= 3 and got_new >= 3, (kept_old, got_new)
    assert sorted(p.name for p in tmp_path.iterdir()) == [path.name]
