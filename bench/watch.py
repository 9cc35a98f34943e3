"""Benchmark: from the rename of a saved workbook to tocsin's sheets on disk, through the watcher.

Usage::

    python bench/watch.py [--rows 4000] [--repeats 20] [--quiet 1.0] [--poll SECONDS]
    python bench/watch.py --own-write 300000
    python bench/watch.py --many 20

A 4,000-row daily workbook (invented, seeded) with one forecast job is saved the way spreadsheet
programs save (temporary file in the folder, renamed over the workbook) ``--repeats`` times, each time
with a changed last value. The time measured runs from the rename to the watcher's report that the
refreshed workbook has replaced the file (the refresh reports after its atomic replace), and the bench
checks that the forecast sheet is in the file on disk.

Printed in the same run:
* the median (and 90th percentile) latency against the target ``--quiet + 1 s``, as a ratio;
* the reference: the same refresh called directly, without the watcher (median of the same versions),
  so the watcher's own share (latency - quiet - direct refresh) is visible.

``--own-write N``: when tocsin's own write comes back as a save event, the watcher recognises the file
(size, mtime and the SHA-256 the writer verified: ``FileProbe.is_written``) instead of refreshing it again
to find it unchanged. Timed on a refreshed N-row workbook (bench/refresh.py's full-height sheet, cached in
bench/out/), against the refresh that answers "unchanged" (what the watcher did before).

``--many K``: K workbooks (the same 4,000-row daily workbook under K names) are saved at once, twice
(the first round warms the workers up: a worker process imports the refresh when it starts); the time
from the first rename of the second round to the last refreshed workbook is measured under a watcher
with one worker and with two (``--workers 2``: worker processes), and their ratio printed.
"""
from __future__ import annotations

import argparse
import datetime as dt
import io
import os
import statistics
import sys
import tempfile
import threading
import time
import zipfile
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "sample_workbooks"))


def build_versions(rows: int, count: int) -> list[bytes]:
    """``count`` saves of one workbook: ``rows`` days of invented passengers, the last value changing."""
    import numpy as np
    import xlsxwriter
    from make_samples import SETTINGS  # the job table's header row, as the samples write it

    rng = np.random.default_rng(4000)
    days = np.arange(rows)
    level = 900 + 0.05 * days + 180 * np.sin(2 * np.pi * days / 365.25) + 90 * (days % 7 >= 5)
    values = np.round(level + rng.normal(0, 110, rows)).astype(int)
    start = dt.date(2014, 1, 1)
    job = {"job": "second sailing", "data_sheet": "Passengers", "date_column": "Date",
           "value_column": "Passengers", "event": ">=1150"}
    versions = []
    for k in range(count):
        buf = io.BytesIO()
        wb = xlsxwriter.Workbook(buf, {"in_memory": True})
        wb.set_properties({"created": dt.datetime(2025, 1, 1)})
        date_format = wb.add_format({"num_format": "yyyy-mm-dd"})
        ws = wb.add_worksheet("Passengers")
        ws.write_row(0, 0, ["Date", "Passengers"])
        ws.write_column(1, 0, [start + dt.timedelta(days=int(i)) for i in days], date_format)
        column = values.tolist()
        column[-1] += 37 * (k + 1)  # each save changes the inputs
        ws.write_column(1, 1, column)
        table = wb.add_worksheet("tocsin")
        table.write_row(0, 0, list(SETTINGS))
        table.write_row(1, 0, [job.get(name) for name in SETTINGS])
        wb.close()
        versions.append(buf.getvalue())
    return versions


def save_by_rename(path: Path, data: bytes) -> float:
    """Write ``data`` to a temporary file beside ``path`` and rename it over; the time of the rename."""
    tmp = path.with_name(f"lu{os.getpid()}{time.perf_counter_ns() % 100000}.tmp")
    with open(tmp, "wb") as f:
        f.write(data)
        f.flush()
        os.fsync(f.fileno())
    os.replace(tmp, path)
    return time.perf_counter()


def sheet_names(path: Path) -> set[str]:
    with zipfile.ZipFile(path) as z:
        return {n for n in z.namelist() if n.startswith("xl/worksheets/")}


def own_write(rows: int) -> int:
    """Time recognising tocsin's own write against refreshing it to find it unchanged."""
    sys.path.insert(0, str(ROOT / "bench"))
    import shutil

    from _timing import best_of
    from refresh import OUT, build

    from watcher.refresh.workbook import refresh_workbook
    from watcher.watch.probe import FileProbe

    OUT.mkdir(parents=True, exist_ok=True)
    big = OUT / f"refresh_{rows}.xlsx"
    if not big.exists():
        build(big, rows)
    with tempfile.TemporaryDirectory(prefix="tocsin-bench-", dir=OUT) as tmp:
        path = Path(tmp) / "book.xlsx"
        shutil.copyfile(big, path)
        report = refresh_workbook(path)
        if report.status != "refreshed" or report.written is None:
            raise SystemExit(f"refresh: {report.status}: {report.message}")
        probe = FileProbe()
        if not probe.is_written(path, report.written):
            raise SystemExit("the written file was not recognised")
        t_probe = best_of(lambda: probe.is_written(path, report.written))
        t_same = best_of(lambda: refresh_workbook(path), repeat=2)
        size = path.stat().st_size / 2**20
    print(f"own write of a refreshed {rows:,}-row workbook ({size:.0f} MiB) coming back to the watcher:")
    print(f"  recognised (size, mtime, SHA-256)  {t_probe:7.3f} s")
    print(f"  refreshed again, 'unchanged'       {t_same:7.3f} s   ratio {t_same / t_probe:5.1f}x")
    return 0


def _many_once(workers: int, count: int, versions: list[bytes], quiet: float) -> tuple[float, str]:
    """Seconds from the first of ``count`` renames to the last refreshed workbook (second round)."""
    from watcher.refresh.workbook import refresh_workbook
    from watcher.watch.log import WatchLog
    from watcher.watch.service import Watcher

    with tempfile.TemporaryDirectory() as tmp:
        share = Path(tmp).resolve() / "share"
        share.mkdir()
        books = [share / f"book{i:02d}.xlsx" for i in range(count)]
        done: list[tuple[float, Path]] = []
        arrived = threading.Condition()

        def on_outcome(outcome) -> None:
            if outcome.status == "refreshed":
                with arrived:
                    done.append((time.perf_counter(), outcome.path))
                    arrived.notify_all()

        def round_of(data: bytes) -> float:
            with arrived:
                done.clear()
            first = time.perf_counter()
            for book in books:
                save_by_rename(book, data)
            deadline = time.monotonic() + 600
            with arrived:
                while len({p for _, p in done}) < count:
                    if time.monotonic() > deadline:
                        raise SystemExit(f"only {len(done)} of {count} refreshed")
                    arrived.wait(0.1)
                return max(t for t, _ in done) - first

        with Watcher([share], refresh=refresh_workbook, quiet=quiet, initial=False, log=WatchLog(None),
                     on_outcome=on_outcome, workers=workers) as watcher:
            round_of(versions[1])  # warm-up: worker processes import the refresh
            while not watcher.idle():
                time.sleep(0.05)
            return round_of(versions[2]), watcher.workers_note


def many(count: int, rows: int, quiet: float) -> int:
    """K workbooks saved at once: one worker against two."""
    versions = build_versions(rows, 3)
    times = {}
    for workers in (1, 2):
        times[workers], note = _many_once(workers, count, versions, quiet)
        print(f"  {note:20s} {count} workbooks saved at once: all refreshed after {times[workers]:6.2f} s")
    print(f"  ratio one worker / two = {times[1] / times[2]:.2f}; after the quiet wait of {quiet:g} s: "
          f"{(times[1] - quiet) / (times[2] - quiet):.2f}  ({os.cpu_count()} CPUs)")
    return 0


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=4000)
    parser.add_argument("--repeats", type=int, default=20)
    parser.add_argument("--quiet", type=float, default=1.0)
    parser.add_argument("--poll", type=float, default=None)
    parser.add_argument("--own-write", type=int, metavar="N", help="time recognising tocsin's own write")
    parser.add_argument("--many", type=int, metavar="K",
                        help="K workbooks saved at once, one worker against two")
    args = parser.parse_args(argv)
    if args.own_write:
        return own_write(args.own_write)
    if args.many:
        return many(args.many, args.rows, args.quiet)

    from watcher.refresh.workbook import refresh_workbook
    from watcher.watch.log import WatchLog
    from watcher.watch.service import Watcher

    versions = build_versions(args.rows, args.repeats + 1)
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp).resolve()
        # reference: the refresh called directly on each version (first call warms imports up)
        direct_book = folder / "direct" / "ferry.xlsx"
        direct_book.parent.mkdir()
        direct = []
        for k, data in enumerate(versions):
            direct_book.write_bytes(data)
            t0 = time.perf_counter()
            report = refresh_workbook(direct_book)
            if k:
                direct.append(time.perf_counter() - t0)
            if report.status != "refreshed":
                print(f"direct refresh: {report.status}: {report.message}", file=sys.stderr)
                return 1

        share = folder / "share"
        share.mkdir()
        book = share / "ferry.xlsx"
        book.write_bytes(versions[0])
        refresh_workbook(book)  # as left by an earlier run
        outcomes: list[tuple[float, str]] = []
        arrived = threading.Condition()

        def on_outcome(outcome) -> None:
            with arrived:
                outcomes.append((time.perf_counter(), outcome.status))
                arrived.notify_all()

        def wait_status(status: str, after: float, timeout: float = 60.0) -> float:
            deadline = time.monotonic() + timeout
            with arrived:
                while True:
                    for at, got in outcomes:
                        if at >= after and got == status:
                            return at
                    if time.monotonic() > deadline:
                        raise SystemExit(f"no '{status}' report within {timeout} s: {outcomes[-3:]}")
                    arrived.wait(0.05)

        latencies = []
        saved_sheets = len(sheet_names_bytes(versions[1]))
        with Watcher([share], refresh=refresh_workbook, quiet=args.quiet, poll=args.poll, initial=False,
                     log=WatchLog(None), on_outcome=on_outcome) as watcher:
            for data in versions[1:]:
                renamed = save_by_rename(book, data)
                done = wait_status("refreshed", renamed)
                if len(sheet_names(book)) <= saved_sheets:
                    raise SystemExit("the refreshed workbook on disk has no forecast sheet")
                latencies.append(done - renamed)
                wait_status("unchanged", done)  # tocsin's own write came back as a no-op
                while not watcher.idle():
                    time.sleep(0.02)
            how = watcher.how

    target = args.quiet + 1.0
    median = statistics.median(latencies)
    p90 = sorted(latencies)[max(int(round(0.9 * len(latencies))) - 1, 0)]
    direct_median = statistics.median(direct)
    print(f"watch latency, rename -> sheet on disk ({args.rows} rows, {args.repeats} saves, {how}):")
    print(f"  median {median:.3f} s   p90 {p90:.3f} s   "
          f"min {min(latencies):.3f} s   max {max(latencies):.3f} s")
    print(f"  target --quiet + 1 s = {target:.3f} s   ratio median/target = {median / target:.2f}"
          f"   {'MET' if median < target else 'NOT MET'}")
    print(f"  reference: the refresh called directly, median {direct_median:.3f} s "
          f"(ratio latency/direct = {median / direct_median:.1f})")
    print(f"  watcher's own share: latency - quiet - direct = {median - args.quiet - direct_median:.3f} s")
    return 0


def sheet_names_bytes(data: bytes) -> set[str]:
    with zipfile.ZipFile(io.BytesIO(data)) as z:
        return {n for n in z.namelist() if n.startswith("xl/worksheets/")}


if __name__ == "__main__":
    sys.exit(main())
