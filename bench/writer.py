"""Benchmark: writing a 10-column forecast table into a workbook, against reference approaches.

    python bench/writer.py                 # 1,048,575 rows (a full worksheet with its header row)
    python bench/writer.py --rows 100000   # quicker
    python bench/writer.py --skip-load-save

What is timed (each approach in its own process, so peak memory is its own):

* ``tocsin write``    -- ``watcher.xlsx.package.write`` of the table as a new sheet into a small existing
  workbook (open, build, fsync, replace: end to end);
* ``tocsin refresh``  -- the same call again on the result: the big sheet of tocsin's is replaced;
* ``tocsin plain``    -- the same two calls without the optional fast libraries (numbers through
  ``repr`` instead of ``orjson``, deflate through zlib instead of ``isal``): same bytes of XML;
* ``openpyxl write-only`` -- a new workbook in openpyxl's write-only mode, ``append`` per row;
* ``xlsxwriter constant-memory`` -- a new workbook in xlsxwriter's constant-memory mode, ``write_row``;
* ``openpyxl load+save`` -- loading the workbook holding the table and saving it again (what a general
  library would do to refresh a sheet in place), compared with ``tocsin refresh``.

All get the same invented, seeded data: date, value (one decimal), event (0/1), period (text), naive,
seasonal naive and majority-vote forecasts (0/1), majority share and logistic probability (full
precision doubles), logistic forecast (0/1); blanks where the methods have no forecast. The reference
writers receive ready-made Python rows (preparing them is not timed); tocsin receives numpy columns.
Prints seconds, peak resident memory and the ratios.
"""
from __future__ import annotations

import argparse
import json
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

HEADER = ("date", "value", "event", "period", "naive", "seasonal naive", "majority vote", "majority share",
          "logistic probability", "logistic forecast")


def make_columns(n: int, seed: int = 2025) -> dict[str, np.ndarray]:
    rng = np.random.default_rng(seed)
    dates = np.arange(np.datetime64("2000-01-01"), np.datetime64("2000-01-01") + n)
    value = np.round(rng.normal(800.0, 90.0, n), 1)
    event = (value > 900.0).astype(float)
    naive = np.concatenate([[np.nan], event[:-1]])
    seasonal = np.concatenate([np.full(7, np.nan), event[:-7]])
    counts = np.cumsum(event)
    share = np.concatenate([[np.nan], counts[:-1] / np.arange(1, n)])
    vote = np.where(np.isnan(share), np.nan, (share > 0.5).astype(float))
    z = -2.0 + 0.004 * (np.concatenate([[value[0]], value[:-1]]) - 800.0) + rng.normal(0, 0.3, n)
    prob = 1.0 / (1.0 + np.exp(-z))
    logit = (prob > 0.5).astype(float)
    third = n - n // 5
    period = np.array(["training"] * third + ["validation"] * (n - third - min(7, n - third))
                      + ["future"] * min(7, n - third), dtype=object)
    return dict(date=dates, value=value, event=event, period=period, naive=naive, seasonal=seasonal,
                vote=vote, share=share, prob=prob, logit=logit)


def _spec(cols: dict):
    from watcher.xlsx.spec import Column, SheetSpec, Table

    fmts = ("date", "general", "integer", "text", "integer", "integer", "integer", "dec3", "percent",
            "integer")
    columns = tuple(Column(v, f) for v, f in zip(cols.values(), fmts, strict=True))
    return SheetSpec("Forecast", (Table(0, 0, HEADER, columns),), freeze=(1, 1))


def _rows(cols: dict) -> list[tuple]:
    import datetime as dt

    lists = []
    for key, v in cols.items():
        if key == "date":
            lists.append([dt.date.fromisoformat(str(d)) for d in v])
        elif v.dtype == object:
            lists.append(v.tolist())
        else:
            lists.append([None if x != x else x for x in v.tolist()])
    return list(zip(*lists, strict=True))


def _small_workbook(path: Path) -> None:
    import xlsxwriter

    wb = xlsxwriter.Workbook(path)
    ws = wb.add_worksheet("Data")
    ws.write_row(0, 0, ["day", "passengers"])
    for i in range(50):
        ws.write_row(i + 1, 0, [i, 800 + i])
    wb.close()


def _peak_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


# -- one approach per process --------------------------------------------------------------------
def child(name: str, n: int, folder: Path) -> dict:
    cols = make_columns(n)
    out: dict = {}
    if name in ("tocsin", "tocsin_plain"):
        import zlib

        from watcher.xlsx import archive, xmlwriter
        from watcher.xlsx.package import Package, write

        if name == "tocsin_plain":
            xmlwriter._orjson = None
            archive._isal, archive._crc32 = None, zlib.crc32

        spec = _spec(cols)
        path = folder / f"{name}.xlsx"
        _small_workbook(path)
        t = time.perf_counter()
        res = write(path, [spec], state={"bench": 1}, expect=Package.open(path).fingerprint)
        out["write"] = time.perf_counter() - t
        t = time.perf_counter()
        res = write(path, [spec], state={"bench": 2}, expect=Package.open(path).fingerprint)
        out["refresh"] = time.perf_counter() - t
        out["changed"] = list(res.changed_parts) + list(res.new_parts)
        out["size_mb"] = path.stat().st_size / 1e6
    elif name == "openpyxl_wo":
        import openpyxl
        from openpyxl.styles import NamedStyle  # noqa: F401  (import cost outside the clock)

        rows = _rows(cols)
        t = time.perf_counter()
        wb = openpyxl.Workbook(write_only=True)
        ws = wb.create_sheet("Forecast")
        ws.append(HEADER)
        for r in rows:
            ws.append(r)
        wb.save(folder / "openpyxl.xlsx")
        out["write"] = time.perf_counter() - t
    elif name == "xlsxwriter_cm":
        import xlsxwriter

        rows = _rows(cols)
        t = time.perf_counter()
        wb = xlsxwriter.Workbook(folder / "xlsxwriter.xlsx", {"constant_memory": True})
        ws = wb.add_worksheet("Forecast")
        date_fmt = wb.add_format({"num_format": "yyyy-mm-dd"})
        ws.write_row(0, 0, HEADER)
        for i, r in enumerate(rows, start=1):
            ws.write_datetime(i, 0, r[0], date_fmt)
            ws.write_row(i, 1, r[1:])
        wb.close()
        out["write"] = time.perf_counter() - t
    elif name == "openpyxl_load_save":
        import openpyxl

        src = folder / "tocsin.xlsx"
        path = folder / "loadsave.xlsx"
        shutil.copy(src, path)
        t = time.perf_counter()
        wb = openpyxl.load_workbook(path)
        wb.save(path)
        out["write"] = time.perf_counter() - t
    else:
        raise SystemExit(f"unknown approach {name!r}")
    out["peak_mb"] = _peak_mb()
    return out


def _run(name: str, n: int, folder: Path) -> dict:
    cmd = [sys.executable, __file__, "--child", name, "--rows", str(n), "--folder", str(folder)]
    proc = subprocess.run(cmd, capture_output=True, text=True, env={**os.environ, "PYTHONPATH": str(ROOT)})
    if proc.returncode != 0:
        raise SystemExit(f"{name} failed:\n{proc.stderr}")
    return json.loads(proc.stdout.strip().splitlines()[-1])


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=1_048_575)
    ap.add_argument("--skip-load-save", action="store_true", help="skip openpyxl load+save (slow, big)")
    ap.add_argument("--child", help=argparse.SUPPRESS)
    ap.add_argument("--folder", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.child:
        print(json.dumps(child(args.child, args.rows, Path(args.folder))))
        return 0
    n = args.rows
    print(f"writing a 10-column forecast table of {n:,} rows (+ header); {os.cpu_count()} CPUs")
    with tempfile.TemporaryDirectory(prefix="tocsin-bench-") as tmp:
        folder = Path(tmp)
        ours = _run("tocsin", n, folder)
        print(f"  tocsin write        {ours['write']:8.2f} s   refresh {ours['refresh']:8.2f} s   "
              f"peak {ours['peak_mb']:7.0f} MB   file {ours['size_mb']:.1f} MB")
        print(f"  refresh changed only: {', '.join(ours['changed'])}")
        plain = _run("tocsin_plain", n, folder)
        print(f"  tocsin without orjson/isal: write {plain['write']:8.2f} s   "
              f"refresh {plain['refresh']:8.2f} s   "
              f"(fast paths: write {plain['write'] / ours['write']:.1f}x, "
              f"refresh {plain['refresh'] / ours['refresh']:.1f}x)")
        rows = [("openpyxl write-only", "openpyxl_wo", "write"),
                ("xlsxwriter constant-memory", "xlsxwriter_cm", "write")]
        if not args.skip_load_save:
            rows.append(("openpyxl load+save", "openpyxl_load_save", "refresh"))
        for label, name, ours_key in rows:
            ref = _run(name, n, folder)
            ratio = ref["write"] / ours[ours_key]
            print(f"  {label:27s} {ref['write']:8.2f} s   peak {ref['peak_mb']:7.0f} MB   "
                  f"tocsin {ours_key} is {ratio:5.1f}x faster")
    return 0


if __name__ == "__main__":
    sys.exit(main())
