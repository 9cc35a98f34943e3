"""Benchmark of the forecasting core on a full sheet column (1,048,575 rows), printed as ratios.

    python bench/core.py [ROWS]

For every benchmark method (sheetfns.benchmarks) it prints our time (best of 3), and the ratio against
two reference approaches measured in the same run:

* ``pandas``: what one writes with pandas (``ffill().shift(h)``, a per-season ``groupby().ffill()``,
  ``expanding().mean()`` / ``rolling(w, min_periods=1).mean()`` shifted by the horizon), with the
  largest difference from ours on the observed rows (it must be 0 up to rounding);
* ``loop``: a plain, incremental O(n) Python loop over the rows, run on the first 100,000 rows and
  scaled to the full length.

Then the event flags (sheetfns.events.flag) and the split (sheetfns.partition.split) on the same
column, and finally, if ``bench/core_logistic.py`` is present, its logistic benchmarks, so one script
prints all core figures. The data are invented (seeded generator). Not a timed test: figures depend
on the machine.
"""
from __future__ import annotations

import math
import sys
import time
from collections import deque
from pathlib import Path

import numpy as np

if __package__ in (None, ""):
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
sys.path.insert(0, str(Path(__file__).resolve().parent))

from _timing import best_of  # noqa: E402

from sheetfns import benchmarks as B  # noqa: E402
from sheetfns.events import flag  # noqa: E402
from sheetfns.partition import split  # noqa: E402

N_ROWS = 1_048_575
LOOP_ROWS = 100_000
NAN = float("nan")




def make_data(n: int, seed: int = 20240611) -> tuple[np.ndarray, np.ndarray, int]:
    """Daily-like values with a weekly pattern, their 0/1 events (2% blanks, 60 future rows) and a
    training size of 80% of the rows."""
    rng = np.random.default_rng(seed)
    t = np.arange(n)
    values = 100 + 10 * np.sin(2 * np.pi * t / 7) + rng.normal(0, 8, n)
    values[rng.random(n) < 0.02] = np.nan
    values[-60:] = np.nan
    events = np.where(np.isnan(values), np.nan, (values >= 105).astype(float))
    return values, events, int(0.8 * (n - 60))


# ---------------------------------------------------------------- pandas references


def pd_naive(y: np.ndarray, h: int, m: int = 1) -> np.ndarray:
    import pandas as pd

    s = pd.Series(y)
    if m == 1:
        return s.ffill().shift(h).to_numpy()
    return s.groupby(np.arange(y.size) % m).ffill().shift(m * math.ceil(h / m)).to_numpy()


def pd_share(y: np.ndarray, h: int, w: int | None = None) -> np.ndarray:
    import pandas as pd

    s = pd.Series(y)
    roll = s.expanding() if w is None else s.rolling(w, min_periods=1)
    return roll.mean().shift(h).to_numpy()


def pd_vote(y: np.ndarray, h: int, w: int | None = None) -> np.ndarray:
    import pandas as pd

    share = pd_share(y, h, w)
    recent = pd.Series(y).ffill().shift(h).to_numpy()
    return np.where(share > 0.5, 1.0, np.where(share < 0.5, 0.0, np.where(share == 0.5, recent, np.nan)))


# ---------------------------------------------------------------- plain Python loops (O(n))


def loop_naive(y: list[float], h: int, m: int = 1, n_train: int | None = None) -> list[float]:
    n = len(y)
    last_obs = max(i for i, v in enumerate(y) if v == v)
    seen = [NAN] * m                      # latest observed value per season, up to the origin
    frozen = None
    out = [NAN] * n
    for t in range(n):
        o = t - h
        if 0 <= o <= last_obs and y[o] == y[o]:
            seen[o % m] = y[o]
        if n_train is not None and t == n_train - 1 + h:
            frozen = list(seen)
        if n_train is not None and n_train <= t <= last_obs and frozen is not None:
            out[t] = frozen[t % m]
        else:
            out[t] = seen[t % m]
    return out


def loop_share(y: list[float], h: int, w: int | None = None, vote: bool = False) -> list[float]:
    n = len(y)
    last_obs = max(i for i, v in enumerate(y) if v == v)
    events = count = 0
    recent = NAN
    window: deque[tuple[int, float]] = deque()
    out = [NAN] * n
    for t in range(n):
        o = min(t - h, last_obs)         # future rows keep the window ending at the last observation
        if o >= 0 and o == t - h:
            v = y[o]
            if v == v:
                events += int(v)
                count += 1
                recent = v
                window.append((o, v))
            if w is not None:
                while window and window[0][0] <= o - w:
                    _, old = window.popleft()
                    events -= int(old)
                    count -= 1
        if count:
            share = events / count
            out[t] = share if not vote else (1.0 if 2 * events > count else 0.0 if 2 * events < count
                                             else recent)
    return out


def loop_fixed_share(y: list[float], h: int, n_train: int, vote: bool = False) -> list[float]:
    n = len(y)
    last_obs = max(i for i, v in enumerate(y) if v == v)
    events = count = 0
    recent = NAN
    frozen = None
    out = [NAN] * n
    for t in range(n):
        o = t - h
        if 0 <= o and y[o] == y[o]:
            events += int(y[o])
            count += 1
            recent = y[o]
        if t == n_train - 1 + h:
            frozen = (events, count, recent)
        fixed = frozen is not None and n_train <= t <= last_obs
        e, c, r = frozen if fixed else (events, count, recent)
        if c:
            out[t] = e / c if not vote else (1.0 if 2 * e > c else 0.0 if 2 * e < c else r)
    return out


# ---------------------------------------------------------------- the run


def main(argv: list[str] | None = None) -> int:
    args = sys.argv[1:] if argv is None else argv
    n = int(args[0]) if args else N_ROWS
    values, y, n_train = make_data(n)
    sub = y[:LOOP_ROWS].tolist()
    scale = n / min(LOOP_ROWS, n)
    sub_train = n_train if n <= LOOP_ROWS else int(0.8 * LOOP_ROWS)
    observed = np.arange(n) <= np.flatnonzero(~np.isnan(y))[-1]
    cases = [
        ("naive h=1", lambda: B.naive(y), lambda: pd_naive(y, 1), lambda: loop_naive(sub, 1)),
        ("naive h=7", lambda: B.naive(y, horizon=7), lambda: pd_naive(y, 7), lambda: loop_naive(sub, 7)),
        ("naive fixed origin", lambda: B.naive(y, train_size=n_train), None,
         lambda: loop_naive(sub, 1, 1, sub_train)),
        ("seasonal naive m=7", lambda: B.naive(y, season=7), lambda: pd_naive(y, 1, 7),
         lambda: loop_naive(sub, 1, 7)),
        ("seasonal naive m=365 h=3", lambda: B.naive(y, horizon=3, season=365),
         lambda: pd_naive(y, 3, 365), lambda: loop_naive(sub, 3, 365)),
        ("majority share expanding", lambda: B.majority_share(y), lambda: pd_share(y, 1),
         lambda: loop_share(sub, 1)),
        ("majority share window=30", lambda: B.majority_share(y, window=30), lambda: pd_share(y, 1, 30),
         lambda: loop_share(sub, 1, 30)),
        ("majority share fixed origin", lambda: B.majority_share(y, train_size=n_train), None,
         lambda: loop_fixed_share(sub, 1, sub_train)),
        ("majority vote expanding", lambda: B.majority_vote(y), lambda: pd_vote(y, 1),
         lambda: loop_share(sub, 1, vote=True)),
        ("majority vote window=30 h=2", lambda: B.majority_vote(y, window=30, horizon=2),
         lambda: pd_vote(y, 2, 30), lambda: loop_share(sub, 2, 30, vote=True)),
        ("majority vote fixed origin", lambda: B.majority_vote(y, train_size=n_train), None,
         lambda: loop_fixed_share(sub, 1, sub_train, vote=True)),
    ]
    print(f"benchmark methods on {n:,} rows (best of 3; ratio = reference time / ours, above 1: we are "
          f"faster)")
    print(f"{'method':30s} {'ours ms':>8s} {'pandas ms':>10s} {'ratio':>6s} {'max diff':>9s} "
          f"{'loop ms':>9s} {'ratio':>6s}")
    total = 0.0
    for name, ours_fn, pd_fn, loop_fn in cases:
        ours = best_of(ours_fn)
        total += ours
        mine = ours_fn()
        if pd_fn is not None:
            theirs = best_of(pd_fn)
            ref = pd_fn()
            diff = float(np.nanmax(np.abs(mine[observed] - ref[observed])))
            pd_cols = f"{theirs * 1e3:10.1f} {theirs / ours:6.1f} {diff:9.1e}"
        else:
            pd_cols = f"{'-':>10s} {'-':>6s} {'-':>9s}"
        t0 = time.perf_counter()
        looped = loop_fn()
        loop = (time.perf_counter() - t0) * scale
        if n <= LOOP_ROWS:     # the loops are also a check when they see the whole series
            assert np.allclose(mine, looped, equal_nan=True), name
        print(f"{name:30s} {ours * 1e3:8.1f} {pd_cols} {loop * 1e3:9.0f} {loop / ours:6.0f}")
    print(f"{'all benchmark methods':30s} {total * 1e3:8.1f} ms  (target: well under 1,000 ms)")

    print()
    t_flag = best_of(lambda: flag(values, ">=105"))
    t_run = best_of(lambda: flag(values, "rise%>=5", min_run=3))
    t_list = best_of(lambda: flag(values.tolist(), ">=105"), repeat=1)
    t_split = best_of(lambda: split(n, 0.2 * n // 1, events=y))
    print(f"events.flag '>=105' on an array {t_flag * 1e3:8.1f} ms; 'rise%>=5' min_run=3 "
          f"{t_run * 1e3:8.1f} ms; '>=105' on a Python list {t_list * 1e3:8.1f} ms")
    print(f"partition.split by count with events {t_split * 1e3:8.1f} ms")

    try:
        from bench import core_logistic
    except ImportError:
        try:
            import core_logistic  # type: ignore[no-redef]   # run as a script from bench/
        except ImportError:
            core_logistic = None
    if core_logistic is not None and hasattr(core_logistic, "run"):
        print()
        core_logistic.run(print)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
