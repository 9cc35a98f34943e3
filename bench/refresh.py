"""Benchmark: ``tocsin refresh`` as a command, against the same refresh done with openpyxl.

    python bench/refresh.py [--rows N] [--runs R] [--skip-big] [--skip-reference] [--verify]

(a) **The ferry sample** (2,929 daily rows, two jobs): ``python -m watcher.cli refresh`` on a fresh
    copy, as a user runs it (a new interpreter, so import costs are included), median of R runs
    (default 5); then the no-op second refresh ("unchanged"). Target: well under 2 s.
(b) **A full-height sheet**: N data rows (default 1,048,575, the most a sheet holds below its header).
    The series is **hourly** (from 1900-03-01 00:00, so 1,048,575 hours end in 2019: real dates, which
    a daily series of that length could not have -- it would need 2,870 years), an invented AR(1)
    "level" with a daily cycle and a few blanks, and one job: ``level >1.5``. Built once with
    xlsxwriter's constant_memory mode and cached in bench/out/. Target: under 60 s and 2 GB.

The reference approach for both: what one writes without tocsin's reader and writer -- openpyxl
``load_workbook`` (full mode: the workbook is to be saved), the data columns read from its cells, the
**same core and the same sheets** (``watcher.refresh.compute.compute_job`` and the SheetSpecs of
``watcher.refresh.layout``, written cell by cell with their number formats; no charts), ``save``. Every run is
a fresh process on a fresh copy; wall time and peak resident memory come from ``os.wait4``. The ratio
printed is reference time / tocsin time (target >= 5x on the full-height sheet).
"""
from __future__ import annotations

import argparse
import datetime as dt
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
OUT = ROOT / "bench" / "out"
FERRY = ROOT / "sample_workbooks" / "island_ferry.xlsx"
FULL = 1_048_575
SETTINGS = ("job", "data_sheet", "date_column", "value_column", "event")


# ------------------------------------------------------------------------------------------ building

def build(path: Path, rows: int) -> None:
    """An hourly sheet 'Data' (Time, Level) of ``rows`` rows and a job table with one job."""
    import numpy as np
    import xlsxwriter

    rng = np.random.default_rng(19000301)
    noise = rng.normal(scale=0.35, size=rows)
    level = np.empty(rows)
    x = 0.0
    for i in range(rows):  # AR(1): persistent, so yesterday's level says something about today's
        x = 0.97 * x + noise[i]
        level[i] = x
    level += 0.8 * np.sin(2 * np.pi * np.arange(rows) / 24.0)  # a daily cycle
    blanks = set(rng.choice(rows, size=min(200, rows // 10), replace=False).tolist())
    future = 24  # the next day is listed with blank levels
    wb = xlsxwriter.Workbook(str(path), {"constant_memory": True})
    ws = wb.add_worksheet("Data")
    stamp = wb.add_format({"num_format": "yyyy-mm-dd hh:mm"})
    ws.write_row(0, 0, ["Time", "Level"])
    start = dt.datetime(1900, 3, 1)
    for i in range(rows):
        r = i + 1
        ws.write_datetime(r, 0, start + dt.timedelta(hours=i), stamp)
        if i < rows - future and i not in blanks:
            ws.write_number(r, 1, float(level[i]))
    table = wb.add_worksheet("tocsin")
    table.write_row(0, 0, SETTINGS)
    for j, v in enumerate(("high level", "Data", "Time", "Level", ">1.5")):
        table.write_string(1, j, v)
    wb.close()


# ----------------------------------------------------------------------------------- the reference

def reference_refresh(path: Path) -> None:
    """The same refresh with openpyxl: load (full mode), read the columns from the cells, compute with
    tocsin's core, lay out tocsin's sheets, write them cell by cell, save."""
    sys.path.insert(0, str(ROOT))
    from types import MappingProxyType

    import numpy as np
    import openpyxl
    from openpyxl.styles import Font

    from watcher.refresh import jobs
    from watcher.refresh.compute import compute_job
    from watcher.refresh.reader import Book, Header, SheetData
    from watcher.refresh.workbook import lay_out
    from watcher.xlsx.spec import Cells, Table

    with Book(path) as book:  # the job table (a few cells) with tocsin's own reader
        table = jobs.read_job_table(book)
    wb = openpyxl.load_workbook(path)
    now = dt.datetime.now().replace(microsecond=0)
    for job in table.jobs:
        ws = wb[job.data_sheet]
        rows = ws.iter_rows(values_only=True)
        header = Header(path.name, job.data_sheet, tuple("" if h is None else str(h) for h in next(rows)), 1)
        keys = list(job.columns)
        where = [header.find(k) for k in keys]
        jd = header.find(job.date_column)
        stamps: list = []
        cols: list[list] = [[] for _ in keys]
        for row in rows:
            stamps.append(row[jd])
            for c, j in zip(cols, where, strict=True):
                v = row[j]
                c.append(float(v) if isinstance(v, (int, float)) else np.nan)
        while stamps and stamps[-1] is None:  # trailing blank rows
            stamps.pop()
            for c in cols:
                c.pop()
        names = {k: header.texts[j] for k, j in zip(keys, where, strict=True)}
        data = SheetData(book=path.name, sheet=job.data_sheet, header=header,
                         columns=MappingProxyType({k: np.array(c) for k, c in zip(keys, cols, strict=True)}),
                         raw=MappingProxyType({}),
                         letters=MappingProxyType({k: "?" for k in [*keys, job.date_column]}),
                         names=MappingProxyType({**names, job.date_column: header.texts[jd]}),
                         dates=np.array(stamps, dtype="datetime64[s]"), date_key=job.date_column,
                         warnings=(), nrows=len(stamps), first_row=2, backend="openpyxl")
        outcome = compute_job(job, data)
        for spec in lay_out(outcome, now)[1]:
            out = wb.create_sheet(spec.name)
            for block in spec.blocks:
                _write_block(out, block, Cells, Table, Font)
            if spec.freeze:
                out.freeze_panes = out.cell(spec.freeze[0] + 1, spec.freeze[1] + 1)
    wb.save(path)


_NUMBER_FORMATS = {"integer": "0", "dec3": "0.000", "percent": "0.0%", "date": "yyyy-mm-dd",
                   "datetime": "yyyy-mm-dd hh:mm", "text": "@"}


def _write_block(ws, block, Cells, Table, Font) -> None:
    import numpy as np

    bold = Font(bold=True)

    def put(r: int, c: int, v, fmt: str) -> None:
        if v is None or (isinstance(v, float) and v != v):
            return
        if isinstance(v, np.datetime64):
            if np.isnat(v):
                return
            v = v.astype("datetime64[ms]").astype(dt.datetime)
        elif isinstance(v, np.generic):
            v = v.item()
        cell = ws.cell(r + 1, c + 1, v)
        if fmt in _NUMBER_FORMATS:
            cell.number_format = _NUMBER_FORMATS[fmt]
        elif fmt in ("bold", "title", "header", "warning", "good"):
            cell.font = bold

    if isinstance(block, Cells):
        for i, row in enumerate(block.rows):
            for j, (v, fmt) in enumerate(row):
                put(block.row + i, block.col + j, v, fmt)
        return
    if block.header is not None:
        for j, h in enumerate(block.header):
            put(block.row, block.col + j, h, "header")
    r0 = block.first_data_row
    for j, col in enumerate(block.columns):
        vals = col.values
        for i in range(len(vals)):
            put(r0 + i, block.col + j, vals[i], col.fmt)


# ------------------------------------------------------------------------------------------ timing

def timed(argv: list[str]) -> tuple[float, float]:
    """Run ``argv`` in a new process; return (wall seconds, peak resident MiB) from os.wait4."""
    t0 = time.perf_counter()
    proc = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                            env={**os.environ, "PYTHONPATH": str(ROOT)})
    _, status, usage = os.wait4(proc.pid, 0)
    seconds = time.perf_counter() - t0
    proc.returncode = os.waitstatus_to_exitcode(status)
    err = proc.stderr.read().decode() if proc.stderr else ""
    if proc.returncode not in (0,):
        raise SystemExit(f"{' '.join(argv)} failed ({proc.returncode}): {err}")
    return seconds, usage.ru_maxrss / 1024.0  # KiB on Linux


def tocsin_cmd(path: Path, *extra: str) -> list[str]:
    return [sys.executable, "-m", "watcher.cli", "refresh", *extra, str(path)]


def reference_cmd(path: Path) -> list[str]:
    return [sys.executable, __file__, "--reference", str(path)]


def fresh(src: Path, folder: Path, i: int) -> Path:
    dest = folder / f"{src.stem}-{i}{src.suffix}"
    shutil.copyfile(src, dest)
    return dest


def runs(cmd, src: Path, folder: Path, n: int) -> tuple[float, float]:
    """Median wall time and the largest peak memory over ``n`` runs, each on a fresh copy."""
    times, peaks = [], []
    for i in range(n):
        path = fresh(src, folder, i)
        s, m = timed(cmd(path))
        times.append(s)
        peaks.append(m)
        path.unlink()
    return statistics.median(times), max(peaks)


def verify(a: Path, b: Path, sheet: str) -> str:
    """Compare the forecast sheets of tocsin's and the reference's outputs cell by cell. openpyxl
    writes floats with 16 significant digits (not always the shortest round-trip repr), so its
    numbers may differ from tocsin's beyond the 16th digit; those are counted apart."""
    import math

    import python_calamine

    def grid(p: Path):
        return python_calamine.CalamineWorkbook.from_path(str(p)).get_sheet_by_name(sheet).to_python()

    ga, gb = grid(a), grid(b)
    if len(ga) != len(gb):
        return f"DIFFERENT: {len(ga)} rows against {len(gb)}"
    cells = rounded = 0
    for i, (ra, rb) in enumerate(zip(ga, gb, strict=True)):
        if i == 2:  # "refreshed at"
            continue
        for x, y in zip(ra, rb, strict=True):
            cells += 1
            if x == y:
                continue
            if isinstance(x, float) and isinstance(y, float) and math.isclose(x, y, rel_tol=1e-15, abs_tol=0):
                rounded += 1
                continue
            return f"DIFFERENT at row {i + 1}: {x!r} against {y!r}"
    return (f"same cells ({cells:,}; {rounded:,} numbers differ beyond the 16th significant digit, "
            "where openpyxl rounds)")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=FULL, help="rows of the full-height sheet (b)")
    parser.add_argument("--runs", type=int, default=5, help="runs of (a), median reported")
    parser.add_argument("--skip-big", action="store_true", help="only (a)")
    parser.add_argument("--skip-reference", action="store_true", help="do not run openpyxl on (b)")
    parser.add_argument("--verify", action="store_true", help="compare the two outputs of (b) cell by cell")
    parser.add_argument("--reference", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.reference:
        reference_refresh(Path(args.reference))
        return 0
    OUT.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory(prefix="tocsin-bench-", dir=OUT) as tmp:
        folder = Path(tmp)
        print(f"(a) island_ferry.xlsx ({FERRY.stat().st_size / 2**10:.0f} KiB, 2 jobs), a new process per "
              f"run, median of {args.runs}")
        t, m = runs(lambda p: tocsin_cmd(p), FERRY, folder, args.runs)
        path = fresh(FERRY, folder, 99)
        timed(tocsin_cmd(path))
        t_same, _ = statistics.median([timed(tocsin_cmd(path))[0] for _ in range(args.runs)]), 0
        r, rm = runs(reference_cmd, FERRY, folder, max(1, min(args.runs, 3)))
        print(f"    tocsin refresh            {t:7.2f} s  peak {m:6.0f} MiB")
        print(f"    tocsin refresh, unchanged {t_same:7.2f} s  (second run: nothing written)")
        print(f"    openpyxl load/compute/save {r:6.2f} s  peak {rm:6.0f} MiB   ratio {r / t:5.1f}x")
        if args.skip_big:
            return 0
        big = OUT / f"refresh_{args.rows}.xlsx"
        if not big.exists():
            t0 = time.perf_counter()
            build(big, args.rows)
            size = big.stat().st_size / 2**20
            print(f"built {big.name} ({size:.1f} MiB) in {time.perf_counter() - t0:.0f} s")
        print(f"(b) {args.rows:,} hourly rows, 1 job, a new process on a fresh copy")
        a = fresh(big, folder, 0)
        t, m = timed(tocsin_cmd(a))
        print(f"    tocsin refresh             {t:7.1f} s  peak {m:6.0f} MiB")
        t_same, _ = timed(tocsin_cmd(a))
        print(f"    tocsin refresh, unchanged  {t_same:7.1f} s")
        if args.skip_reference:
            return 0
        b = fresh(big, folder, 1)
        r, rm = timed(reference_cmd(b))
        print(f"    openpyxl load/compute/save {r:7.1f} s  peak {rm:6.0f} MiB   ratio {r / t:5.1f}x")
        if args.verify:
            print(f"    outputs: {verify(a, b, 'high level forecast')}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
