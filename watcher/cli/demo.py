"""``tocsin demo``: copy the bundled sample workbooks into a folder, refresh them, print what came out."""
from __future__ import annotations

import shutil
import sys
from pathlib import Path

from sheetfns.errors import InputError
from watcher.cli import tables as report
from watcher.refresh.texts import CAUTION
from watcher.refresh.workbook import refresh_workbook

SAMPLES = ("island_ferry.xlsx", "bakery_sales.xlsx", "pump_station.xlsx")
EXTRAS = ("formulas_demo.xlsx",)  # spreadsheet-function demo: opened on a desktop, not refreshed


def samples_dir() -> Path:
    """Where the sample workbooks are: inside the installed package, or in a source checkout."""
    here = Path(__file__).resolve().parents[1]  # the watcher package
    for cand in (here / "_samples", here.parent / "sample_workbooks"):
        if (cand / SAMPLES[0]).exists():
            return cand
    raise InputError(f"the sample workbooks are missing (looked in {here / '_samples'} and "
                     f"{here.parent / 'sample_workbooks'}); reinstall tocsin")


def run_demo(target: Path, *, progress=None, out=sys.stdout) -> int:
    src = samples_dir()
    target = Path(target)
    target.mkdir(parents=True, exist_ok=True)
    print(f"tocsin demo: copying the sample workbooks into {target}/", file=out)
    books = []
    for name in SAMPLES + EXTRAS:
        if not (src / name).exists():
            continue
        dest = target / name
        shutil.copyfile(src / name, dest)
        if name in SAMPLES:
            books.append(dest)
    status = 0
    for book in books:
        rep = refresh_workbook(book, force=True, progress=progress)
        if progress:
            sys.stderr.write("\r\x1b[K")
        print("", file=out)
        print(report.refresh_text(rep), file=out)
        for j in rep.jobs:
            if j.evaluation is not None:
                print(f"\n  scorecard of '{j.name}' (validation period; * = best):", file=out)
                print("\n".join("  " + line for line in report.scorecard_text(j.evaluation).splitlines()),
                      file=out)
                print(f"  {j.evaluation.verdict}", file=out)
        if not rep.ok:
            status = 1
    print("", file=out)
    print("Open these in your spreadsheet program and look at the sheets named '... forecast' and "
          "'... profile':", file=out)
    for book in books:
        print(f"  {book}", file=out)
    if any((target / e).exists() for e in EXTRAS):
        print(f"  {target / EXTRAS[0]}  (the spreadsheet functions; needs the xlwings add-in)", file=out)
    print(f"\nKeep them current while colleagues save: tocsin watch {target}", file=out)
    print(f"\n{CAUTION}", file=out)
    return status
