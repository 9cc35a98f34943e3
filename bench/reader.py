"""Benchmark: reading 4 columns of a full-height sheet with tocsin's reader against openpyxl read-only.

    python bench/reader.py [--rows N] [--skip-openpyxl-backend]

Builds (once, cached in bench/out/) a workbook with one sheet of N data rows (default 1,048,575, the
most a sheet holds below its header) x 4 columns: an hourly timestamp, a float level with a few blanks
and 'n/a' text cells, a 0/1 alarm with some TRUE/FALSE cells, and an integer count. Then, each in a
fresh interpreter (so import costs and peak memory are measured alone), it times

* ``tocsin``          -- ``watcher.refresh.reader.read_sheet`` (python-calamine), dates and 3 value columns;
* ``tocsin-openpyxl`` -- the same reader on its openpyxl fallback;
* ``openpyxl``        -- the reference: openpyxl ``load_workbook(read_only=True, data_only=True)``,
  ``iter_rows(values_only=True)`` into lists, then numpy arrays (what one writes without tocsin),

and prints seconds, peak resident memory and the ratio of each to the reference.
"""
from __future__ import annotations

import argparse
import datetime as dt
import json
import os
import resource
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
OUT = ROOT / "bench" / "out"


def build(path: Path, rows: int) -> None:
    import numpy as np
    import xlsxwriter

    rng = np.random.default_rng(20240101)
    level = rng.normal(size=rows).cumsum()
    alarm = rng.random(rows) < 0.1
    count = rng.integers(0, 100, rows)
    odd = set(rng.choice(rows, size=min(50, rows), replace=False).tolist())
    wb = xlsxwriter.Workbook(str(path), {"constant_memory": True})
    ws = wb.add_worksheet("Data")
    stamp = wb.add_format({"num_format": "yyyy-mm-dd hh:mm"})
    ws.write_row(0, 0, ["Time", "Level", "Alarm", "Count"])
    start = dt.datetime(1900, 3, 1)
    for i in range(rows):
        r = i + 1
        ws.write_datetime(r, 0, start + dt.timedelta(hours=i), stamp)
        if i in odd:
            ws.write_string(r, 1, "n/a") if i % 2 else ws.write_blank(r, 1, None)
        else:
            ws.write_number(r, 1, float(level[i]))
        if 1000 <= i < 2000:
            ws.write_boolean(r, 2, bool(alarm[i]))
        else:
            ws.write_number(r, 2, int(alarm[i]))
        ws.write_number(r, 3, int(count[i]))
    wb.close()


def run_one(approach: str, path: Path) -> dict:
    t0 = time.perf_counter()
    if approach.startswith("tocsin"):
        sys.path.insert(0, str(ROOT))
        from watcher.refresh.reader import read_sheet

        backend = "openpyxl" if approach == "tocsin-openpyxl" else "calamine"
        data = read_sheet(path, "Data", ["Level", "Alarm", "Count"], date_column="Time", backend=backend)
        n = data.nrows
        check = float(sum(float(abs(v[~(v != v)]).sum()) for v in data.columns.values()))
    else:
        import numpy as np
        import openpyxl

        wb = openpyxl.load_workbook(path, read_only=True, data_only=True)
        cols: list[list] = [[], [], [], []]
        for row in wb["Data"].iter_rows(min_row=2, max_col=4, values_only=True):
            for j in range(4):
                cols[j].append(row[j])
        wb.close()
        dates = np.array(cols[0], dtype="datetime64[s]")
        values = [np.array([v if isinstance(v, (int, float)) else np.nan for v in c], dtype=float)
                  for c in cols[1:]]
        n = len(dates)
        check = float(sum(float(abs(v[~np.isnan(v)]).sum()) for v in values))
    seconds = time.perf_counter() - t0
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0   # KiB on Linux
    return {"approach": approach, "seconds": seconds, "rows": n, "peak_mib": rss, "check": check}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=1_048_575)
    parser.add_argument("--skip-openpyxl-backend", action="store_true",
                        help="do not time the reader's openpyxl fallback (it costs as much as the reference)")
    parser.add_argument("--one", help=argparse.SUPPRESS)
    parser.add_argument("--path", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.one:
        print(json.dumps(run_one(args.one, Path(args.path))))
        return 0
    OUT.mkdir(parents=True, exist_ok=True)
    path = OUT / f"reader_{args.rows}.xlsx"
    if not path.exists():
        t0 = time.perf_counter()
        build(path, args.rows)
        size = path.stat().st_size / 2**20
        print(f"built {path.name} ({size:.1f} MiB) in {time.perf_counter() - t0:.1f} s")
    approaches = ["tocsin"] + ([] if args.skip_openpyxl_backend else ["tocsin-openpyxl"]) + ["openpyxl"]
    results = {}
    for approach in approaches:
        proc = subprocess.run([sys.executable, __file__, "--one", approach, "--path", str(path)],
                              capture_output=True, text=True, env={**os.environ, "PYTHONHASHSEED": "0"})
        if proc.returncode:
            print(proc.stderr, file=sys.stderr)
            return 1
        results[approach] = json.loads(proc.stdout.strip().splitlines()[-1])
    ref = results["openpyxl"]
    print(f"{args.rows:,} rows x 4 columns")
    for r in results.values():
        same = "same data" if abs(r["check"] - ref["check"]) <= 1e-9 * max(1.0, ref["check"]) else "DIFFERENT"
        print(f"  {r['approach']:<16} {r['seconds']:8.2f} s  peak {r['peak_mib']:7.0f} MiB  "
              f"openpyxl/this = {ref['seconds'] / r['seconds']:5.1f}x  ({r['rows']:,} rows, {same})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
