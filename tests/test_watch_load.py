"""Load test of the watcher: 50 workbooks in one folder, many saves spread over time.

By default 100 saves over about 10 s (to keep the suite fast); ``TOCSIN_LOAD_TEST=1`` runs the full
300 saves over 60 s. Checks: every workbook's final state is refreshed, no state is refreshed twice,
memory traced by ``tracemalloc`` does not grow between the middle and the end of the run, and the
number of threads stays the same. The saves are invented (a seeded generator).
"""
from __future__ import annotations

import gc
import os
import random
import threading
import time
import tracemalloc
from collections import Counter
from pathlib import Path

import pytest
from test_watch import Rig, digest_of, save_by_rename, wait_for, workbook_bytes

FULL = os.environ.get("TOCSIN_LOAD_TEST") == "1"
BOOKS = 50
SAVES, SPAN_S = (300, 60.0) if FULL else (100, 10.0)
QUIET = 0.5


class NullStream:
    """Discards the human log lines (a captured log would grow and blur the memory figures)."""

    def write(self, text: str) -> int:
        return len(text)

    def flush(self) -> None:
        pass


def own_memory() -> int:
    """Bytes traced to allocations made in the watcher's and watchdog's own code."""
    snapshot = tracemalloc.take_snapshot().filter_traces(
        [tracemalloc.Filter(True, "*/watcher/*"), tracemalloc.Filter(True, "*/watchdog/*")])
    return sum(stat.size for stat in snapshot.statistics("filename"))


def rss_kib() -> int | None:
    try:
        with open("/proc/self/status") as f:
            for line in f:
                if line.startswith("VmRSS:"):
                    return int(line.split()[1])
    except OSError:
        return None
    return None


@pytest.mark.slow
def test_many_workbooks_many_saves(tmp_path: Path, record_property):
    share = tmp_path.resolve() / "share"
    share.mkdir()
    books = [share / f"site{i:02d}.xlsx" for i in range(BOOKS)]
    for book in books:
        book.write_bytes(workbook_bytes(f"{book.name} v0"))
    rng = random.Random(20260509)
    plan = sorted((rng.uniform(0.0, SPAN_S), rng.randrange(BOOKS)) for _ in range(SAVES))

    tracemalloc.start()
    try:
        with Rig(share, initial=False, quiet=QUIET, stream=NullStream()) as rig:
            threads_running = threading.active_count()
            final: dict[Path, str] = {}
            memory_mid = rss_mid = None
            t0 = time.monotonic()
            for k, (at, b) in enumerate(plan):
                delay = t0 + at - time.monotonic()
                if delay > 0:
                    time.sleep(delay)
                content = f"{books[b].name} save {k}"
                save_by_rename(books[b], content)
                final[books[b]] = digest_of(content)
                if k == SAVES // 2:
                    gc.collect()
                    memory_mid, rss_mid = tracemalloc.get_traced_memory()[0], rss_kib()
                    own_mid = own_memory()
                    assert threading.active_count() == threads_running

            def all_final_refreshed() -> bool:
                return all(rig.refresh.refreshed(book)[-1:] == [digest] for book, digest in final.items())

            assert wait_for(all_final_refreshed, timeout=60 + 2 * SAVES * 0.05), "final states not refreshed"
            assert wait_for(rig.watcher.idle, timeout=30)
            time.sleep(2 * QUIET)  # a stray second refresh would show up by now
            assert rig.watcher.idle()
            gc.collect()
            memory_end, memory_peak = tracemalloc.get_traced_memory()
            own_end = own_memory()
            rss_end = rss_kib()
            assert threading.active_count() == threads_running

            for book in books:
                refreshed = rig.refresh.refreshed(book)
                repeated = [d for d, n in Counter(refreshed).items() if n > 1]
                assert not repeated, f"{book.name}: a state was refreshed twice"
                if book in final:
                    assert refreshed.count(final[book]) == 1
                else:
                    assert refreshed == []
            calls = Counter(c.status for c in rig.refresh.calls)
    finally:
        tracemalloc.stop()

    growth = memory_end - memory_mid
    summary = (f"load: {len(final)} workbooks saved {SAVES} times over {SPAN_S:g} s; "
               f"refresh calls {dict(calls)}; "
               f"traced memory mid {memory_mid / 1024:.0f} KiB, end {memory_end / 1024:.0f} KiB "
               f"(growth {growth / 1024:+.0f} KiB), peak {memory_peak / 1024:.0f} KiB; watcher and watchdog "
               f"code {own_mid / 1024:.1f} -> {own_end / 1024:.1f} KiB; "
               f"RSS mid {rss_mid} KiB, end {rss_end} KiB")
    print(summary)
    record_property("load_summary", summary)
    # Flat: the second half adds only the test's own records (calls list, captured log), well under 1 MiB.
    assert growth < 1024 * 1024, summary
    assert own_end - own_mid < 16 * 1024, summary  # the watcher's own state does not pile up
