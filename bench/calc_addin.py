"""Benchmark: tocsin's spreadsheet functions in LibreOffice Calc, through the add-in (UNO).

Run:  python bench/calc_addin.py [ROWS]        (needs LibreOffice headless, unopkg and python3-uno)

Prints
* the time to start LibreOffice headless (with the add-in installed in a throwaway state), and to open,
  recalculate and export (save as .xlsx) the ferry formulas demo, ``formulas_demo.ods``;
* for each spreadsheet function, the time of one call on ROWS rows (default 100,000) in Calc: the
  array formula entered and its first cell read, which makes Calc hand the ranges to the add-in,
  the add-in convert them and call tocsin, and Calc store the result in the cells; next to it, the
  time of calling the plain Python function (``sheetfns.udf.functions``) directly on the same
  values as lists of rows, measured here in this run, and the ratio; and, for scale, Calc's own
  array formula ``=B1:B<ROWS>*1`` on the same range (what any array formula of that size costs).
Not a timed test: figures depend on the machine.
"""
from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from _timing import best_of  # noqa: E402
from calc_headless import Calc  # noqa: E402  (tests/calc_headless.py)

from sheetfns.udf import functions as F  # noqa: E402
from watcher.xlsx.spec import col_letter  # noqa: E402

DEMO = ROOT / "sample_workbooks" / "formulas_demo.ods"




def main(argv: list[str] | None = None) -> int:
    args = sys.argv[1:] if argv is None else argv
    n = int(args[0]) if args else 100_000
    rng = np.random.default_rng(1)   # invented data
    serial = 36526.0 + np.arange(n)                       # daily dates from 2000-01-01
    values = np.round(1000 + 150 * rng.standard_normal(n), 1)
    values[rng.random(n) < 0.01] = np.nan
    actual = np.where(np.isnan(values), np.nan, (values >= 1150).astype(float))
    forecast = (rng.random(n) < 0.3).astype(float)
    forecast_b = np.where(rng.random(n) < 0.8, np.nan_to_num(actual), 1.0 - np.nan_to_num(actual))
    prob = np.round(rng.random(n), 3)
    columns = [serial, values, actual, forecast, forecast_b, prob]       # A .. F
    sheet_rows = [["" if v != v else v for v in row]
                  for row in zip(*(c.tolist() for c in columns), strict=True)]
    py = {k: [[None if v != v else v] for v in c.tolist()] for k, c in zip("ABCDEF", columns, strict=True)}
    epoch = np.datetime64("1899-12-30", "D")
    py["A"] = [[(epoch + np.timedelta64(int(v), "D")).astype(object)] for v in serial]   # dates
    train = int(0.8 * n)
    last = n
    cases = [  # (formula in Calc, the plain call)
        (f'EVENT_FLAG(B1:B{last};">=1150")', lambda: F.EVENT_FLAG(py["B"], ">=1150")),
        (f"EVENT_NAIVE(C1:C{last};1;7)", lambda: F.EVENT_NAIVE(py["C"], 1, 7)),
        (f"EVENT_MAJORITY(C1:C{last};28)", lambda: F.EVENT_MAJORITY(py["C"], 28)),
        (f"EVENT_SHARE(C1:C{last})", lambda: F.EVENT_SHARE(py["C"])),
        (f"EVENT_LOGIT(C1:C{last};;{train})", lambda: F.EVENT_LOGIT(py["C"], None, train)),
        (f"EVENT_LOGIT_COEFS(C1:C{last};;{train})", lambda: F.EVENT_LOGIT_COEFS(py["C"], None, train)),
        (f"EVENT_RATE_TABLE(A1:A{last};C1:C{last};\"weekday\")",
         lambda: F.EVENT_RATE_TABLE(py["A"], py["C"], "weekday")),
        (f"EVENT_SCORES(C1:C{last};D1:D{last};F1:F{last})",
         lambda: F.EVENT_SCORES(py["C"], py["D"], py["F"])),
        (f"EVENT_CONFUSION(C1:C{last};D1:D{last})", lambda: F.EVENT_CONFUSION(py["C"], py["D"])),
        (f"EVENT_BRIER(C1:C{last};F1:F{last})", lambda: F.EVENT_BRIER(py["C"], py["F"])),
        ("EVENT_CUTOFF(1;4)", lambda: F.EVENT_CUTOFF(1.0, 4.0)),
        (f"EVENT_COMPARE(C1:C{last};D1:D{last};E1:E{last})",
         lambda: F.EVENT_COMPARE(py["C"], py["D"], py["E"])),
    ]
    formulas, plain = [[f"H1:H{last}", f"=B1:B{last}*1"]], {}
    for text, call in cases:
        out = call()
        assert not (isinstance(out, str) and out.startswith("#tocsin")), (text, out)
        rows = out if isinstance(out, list) else [[out]]
        target = f"H1:{col_letter(7 + len(rows[0]) - 1)}{len(rows)}"
        formulas.append([target, "=" + text])
        plain[text] = (best_of(call, 3), rows[0][0])
    with tempfile.TemporaryDirectory(prefix="tocsin-bench-") as tmp:
        t0 = time.perf_counter()
        office = Calc(Path(tmp) / "office")
        installed = time.perf_counter() - t0
        out = office.run([
            {"kind": "open", "path": str(DEMO), "recalc": True, "read": True,
             "save": [{"path": str(Path(tmp) / "demo.xlsx"), "filter": "Calc Office Open XML"}]},
            {"kind": "bench", "rows": sheet_rows, "formulas": formulas, "repeat": 2},
        ], timeout=3600)
    demo, bench = out["results"]
    s = demo["seconds"]
    print(f"install the add-in (unopkg, throwaway state): {installed:6.2f} s")
    print(f"start LibreOffice headless:                   {out['start_seconds']:6.2f} s")
    print(f"formulas_demo.ods (2,929 rows, 24 formulas): open {s['open']:.2f} s, recalculate "
          f"{s['recalc']:.2f} s (the first call imports tocsin), read every value {s['read']:.2f} s, "
          f"export to .xlsx {s['save']:.2f} s; total {sum(s.values()):.2f} s")
    print(f"\none call on {n:,} rows: in Calc (UNO add-in) vs the plain Python function, ratio")
    own = bench["calls"][formulas[0][1]]["seconds"]
    print(f"  {'=B1:B' + str(last) + '*1':18s} {own * 1e3:9.1f} ms   (Calc's own array formula, for scale)")
    for text, _ in cases:
        calc = bench["calls"]["=" + text]
        ours, first = plain[text]
        shown = calc["first"][1] if isinstance(first, str) else calc["first"][0]
        ok = shown == first if isinstance(first, str) else (first is None or abs(shown - first) < 1e-9)
        print(f"  {text.split('(')[0]:18s} {calc['seconds'] * 1e3:9.1f} ms {ours * 1e3:9.1f} ms "
              f"{calc['seconds'] / ours:7.1f}x{'' if ok else '  (first cell differs!)'}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
