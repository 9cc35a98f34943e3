"""Benchmark: spreadsheet functions over 100,000 rows, and the range conversion against a naive one.

Run:  python bench/udf.py [ROWS]

Prints, for each function, the time of one call on a range as the add-in hands it over (a list of
one-element rows, None for blanks), and the ratio of the vectorised range conversion
(``sheetfns.udf.coerce``) against a naive cell-by-cell conversion (one ``float()`` per cell, the
obvious way to write it), both measured in this run. Not a timed test: figures depend on the machine.
"""
from __future__ import annotations

import functools
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from _timing import best_of  # noqa: E402

from sheetfns import udf as U  # noqa: E402
from sheetfns.udf import coerce as c  # noqa: E402


def naive_column(rows: list[list[object]]) -> np.ndarray:
    """The reference: walk the cells one by one."""
    out = np.empty(len(rows))
    for i, row in enumerate(rows):
        v = row[0]
        if v is None:
            out[i] = np.nan
        elif isinstance(v, bool):
            out[i] = 1.0 if v else 0.0
        elif isinstance(v, str):
            try:
                out[i] = float(v)
            except ValueError:
                out[i] = np.nan
        else:
            out[i] = float(v)
    return out


def as_cells(arr: np.ndarray) -> list[list[object]]:
    return [[None if v != v else v] for v in arr.tolist()]


def main(argv: list[str] | None = None) -> int:
    args = sys.argv[1:] if argv is None else argv
    n = int(args[0]) if args else 100_000
    rng = np.random.default_rng(1)   # invented data
    values = np.round(1000 + 150 * rng.standard_normal(n), 1)
    values[rng.random(n) < 0.01] = np.nan
    rows = as_cells(values)
    flags = U.EVENT_FLAG(rows, ">=1150")
    actual = [[r[0]] for r in flags]
    forecast = as_cells((rng.random(n) < 0.3).astype(float))
    prob = as_cells(np.round(rng.random(n), 3))

    ours = best_of(lambda: c.number_column(rows, "values"), 5)
    naive = best_of(lambda: naive_column(rows), 5)
    np.testing.assert_array_equal(c.number_column(rows, "values"), naive_column(rows))
    print(f"rows: {n:,}")
    print(f"range conversion: vectorised {ours * 1e3:8.2f} ms, cell by cell {naive * 1e3:8.2f} ms, "
          f"ratio {naive / ours:5.1f}x")
    # the same column as the add-in hands back another function's output: blanks as "" text
    texty = [["" if r[0] is None else r[0]] for r in rows]
    ours_t = best_of(lambda: c.number_column(texty, "values"), 5)
    naive_t = best_of(lambda: naive_column(texty), 5)
    print(f"  with blanks as '' text: vectorised {ours_t * 1e3:8.2f} ms, cell by cell "
          f"{naive_t * 1e3:8.2f} ms, ratio {naive_t / ours_t:5.1f}x")
    calls = {
        "EVENT_FLAG(values, \">=1150\")": lambda: U.EVENT_FLAG(rows, ">=1150"),
        "EVENT_FLAG(values, \"rise%>=5\", 3)": lambda: U.EVENT_FLAG(rows, "rise%>=5", 3),
        "EVENT_SCORES(actual, forecast, probability)": lambda: U.EVENT_SCORES(actual, forecast, prob),
        "EVENT_BRIER(actual, probability)": lambda: U.EVENT_BRIER(actual, prob),
    }
    for name in ("EVENT_NAIVE", "EVENT_MAJORITY", "EVENT_SHARE"):
        if hasattr(U, name):
            calls[f"{name}(events)"] = functools.partial(getattr(U, name), actual)
    train = int(0.8 * n)
    calls[f"EVENT_LOGIT(events, , {train})"] = lambda: U.EVENT_LOGIT(actual, None, train)
    calls[f"EVENT_LOGIT(events, , {train}, 1, 1, 365.25, 2)"] = \
        lambda: U.EVENT_LOGIT(actual, None, train, 1, 1, 365.25, 2)
    calls[f"EVENT_LOGIT_COEFS(events, , {train})"] = lambda: U.EVENT_LOGIT_COEFS(actual, None, train)
    for label, fn in calls.items():
        out = fn()
        assert not (isinstance(out, str) and out.startswith("#tocsin")), out
        print(f"{label:52s} {best_of(fn, 3) * 1e3:8.1f} ms")
    # Roll-forward (no train_rows) refits the model at every origin: its cost grows with rows x fit,
    # so it is timed on a tenth of the rows.
    short = actual[: n // 10]
    t0 = time.perf_counter()
    U.EVENT_LOGIT(short)
    print(f"{'EVENT_LOGIT(events) roll-forward, ' + format(len(short), ',') + ' rows':52s} "
          f"{(time.perf_counter() - t0) * 1e3:8.1f} ms")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
