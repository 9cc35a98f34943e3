"""Timing helper shared by the benchmark scripts (benchmarks print ratios; they assert nothing)."""
from __future__ import annotations

import time
from collections.abc import Callable


def best_of(fn: Callable[[], object], repeat: int = 3) -> float:
    """The shortest wall-clock time of ``repeat`` calls of ``fn``, in seconds."""
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best
