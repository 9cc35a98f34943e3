"""Benchmark: the small end -- ``tocsin refresh`` of the ferry sample as a command, against openpyxl
loading the same workbook, adding a sheet and saving it.

    python bench/small.py [--runs 7]

Each run is a new process on a fresh copy of sample_workbooks/island_ferry.xlsx (2,929 daily rows, two
jobs), so start-up and imports count, as for a user. The project's modules are compiled to bytecode
first (``compileall``), as ``pip install`` does; without that every start would compile them again.
Printed: the median seconds of each, the ratio (target: tocsin at least 2x faster), the refresh itself
inside one process (imports excluded), and what the command spends importing the big libraries
(``python -X importtime``, cumulative milliseconds of each top-level package it imports), and two
floors: the interpreter starting and ending, and the same with numpy, lxml and python-calamine
imported (openpyxl imports numpy too when it is installed).
"""
from __future__ import annotations

import argparse
import compileall
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
FERRY = ROOT / "sample_workbooks" / "island_ferry.xlsx"
ENV = {**os.environ, "PYTHONPATH": str(ROOT)}
OPENPYXL = ("import sys, openpyxl\nwb = openpyxl.load_workbook(sys.argv[1])\nws = wb.create_sheet('new')\n"
            "ws['A1'] = 1\nwb.save(sys.argv[1])\n")
FLOOR = "import numpy, lxml.etree, python_calamine"
WATCHED = ("numpy", "pandas", "scipy", "statsmodels", "lxml.etree", "python_calamine", "openpyxl", "watchdog")


def _run(argv: list[str]) -> float:
    t0 = time.perf_counter()
    subprocess.run(argv, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=ENV)
    return time.perf_counter() - t0


def _imports(argv: list[str]) -> dict[str, float]:
    """Cumulative import milliseconds of the watched top-level packages, from -X importtime."""
    out = subprocess.run([sys.executable, "-X", "importtime", *argv], capture_output=True, text=True,
                         env=ENV).stderr
    got: dict[str, float] = {}
    for line in out.splitlines():
        if not line.startswith("import time:"):
            continue
        parts = line[len("import time:"):].split("|")
        name = parts[2].strip() if len(parts) > 2 else ""
        if name in WATCHED:  # the package's own line: its cumulative time, wherever it was imported
            got[name] = int(parts[1]) / 1000.0
    return got


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=7)
    args = parser.parse_args(argv)
    for package in ("sheetfns", "watcher"):
        compileall.compile_dir(ROOT / package, quiet=1)
    with tempfile.TemporaryDirectory(prefix="tocsin-bench-") as tmp:
        folder = Path(tmp)
        script = folder / "openpyxl_add_sheet.py"
        script.write_text(OPENPYXL)
        ours, theirs, bare, floor = [], [], [], []
        for i in range(args.runs):
            a, b = folder / f"t{i}.xlsx", folder / f"o{i}.xlsx"
            shutil.copyfile(FERRY, a)
            shutil.copyfile(FERRY, b)
            ours.append(_run([sys.executable, "-m", "watcher.cli", "refresh", str(a)]))
            theirs.append(_run([sys.executable, str(script), str(b)]))
            bare.append(_run([sys.executable, "-c", "pass"]))
            floor.append(_run([sys.executable, "-c", FLOOR]))
        shutil.copyfile(FERRY, folder / "inside.xlsx")
        inside = subprocess.run(
            [sys.executable, "-c", "import sys, shutil, time\n"
             "from watcher.refresh.workbook import refresh_workbook\n"
             "refresh_workbook(shutil.copyfile(sys.argv[1], sys.argv[1] + '.1.xlsx'))  # imports, warm-up\n"
             "t = time.perf_counter()\nrefresh_workbook(sys.argv[1])\nprint(time.perf_counter() - t)",
             str(folder / "inside.xlsx")],
            capture_output=True, text=True, env=ENV, check=True).stdout.strip()
        shutil.copyfile(FERRY, folder / "imports.xlsx")
        imports = _imports(["-m", "watcher.cli", "refresh", str(folder / "imports.xlsx")])
    t_ours, t_theirs = statistics.median(ours), statistics.median(theirs)
    print(f"the ferry sample ({FERRY.stat().st_size / 2**10:.0f} KiB, 2 jobs), a new process per run, "
          f"median of {args.runs}; {os.cpu_count()} CPUs")
    print(f"  tocsin refresh (command)              {t_ours:6.2f} s")
    print(f"  openpyxl load, add a sheet, save      {t_theirs:6.2f} s")
    print(f"  ratio openpyxl / tocsin = {t_theirs / t_ours:.2f}  (target >= 2)")
    print(f"  the refresh inside one process (imports done, second workbook) {float(inside):.2f} s")
    print(f"  floors: the interpreter alone {statistics.median(bare):.2f} s; importing numpy, lxml and "
          f"python-calamine {statistics.median(floor):.2f} s")
    print("  imports of the command (cumulative ms): "
          + ", ".join(f"{k} {v:.0f}" for k, v in sorted(imports.items(), key=lambda kv: -kv[1])))
    return 0


if __name__ == "__main__":
    sys.exit(main())
