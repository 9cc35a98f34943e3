"""The watcher's refresh worker: refresh settled workbooks one at a time, off the observer thread.

A small pool of threads (one by default) takes paths from a queue and calls the refresh. A path is never
refreshed by two threads at once: a path that becomes ready again while it is being refreshed is run
once more right after. Whatever the refresh does -- returns a report, raises ``PackageError`` for a
damaged package, or raises anything else -- the worker turns it into one ``Outcome`` and carries on.

Stopping: the queue is dropped (those workbooks are picked up by the next start's initial refresh, since
their inputs changed), the refresh in flight gets ``grace`` seconds to finish its write, and after that
the ``progress`` callback the worker passed to the refresh raises ``RefreshAbandoned`` -- a
``BaseException``, so a refresh that catches ``Exception`` per job does not mistake it for a failed job --
and the refresh abandons cleanly (its temporary file is removed, the workbook is untouched).
"""
from __future__ import annotations

import logging
import threading
import time
import traceback
from collections import deque
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from watcher.xlsx.errors import PackageError

__all__ = ["Outcome", "RefreshAbandoned", "RefreshWorker"]

_logger = logging.getLogger(__name__)


class RefreshAbandoned(BaseException):  # noqa: N818  (not an error: a request to stop)
    """Raised from the ``progress`` callback when the watcher stops: abandon this refresh cleanly."""


@dataclass(frozen=True)
class JobOutcome:
    """One job's line in an outcome (copied from the refresh's ``JobReport``)."""

    name: str
    status: str
    message: str = ""
    next_forecast: Any = None
    best_method: Any = None


@dataclass(frozen=True)
class Outcome:
    """What one refresh attempt came to, whatever happened inside it.

    ``status`` is the report's status ("refreshed", "unchanged", "failed", "conflict", "busy"), or
    "failed" when the refresh raised, or "abandoned" when the watcher stopped it.
    """

    path: Path
    status: str
    message: str
    duration_s: float
    jobs: tuple[JobOutcome, ...] = ()
    traceback: str | None = None

    @classmethod
    def from_report(cls, path: Path, report: Any, duration_s: float) -> Outcome:
        """Copy a ``RefreshReport`` (duck-typed: status, message, jobs, duration_s)."""
        jobs = tuple(
            JobOutcome(
                name=str(getattr(job, "name", "?")),
                status=str(getattr(job, "status", "?")),
                message=str(getattr(job, "message", "") or ""),
                next_forecast=getattr(job, "next_forecast", None),
                best_method=getattr(job, "best_method", None),
            )
            for job in (getattr(report, "jobs", ()) or ())
        )
        reported = getattr(report, "duration_s", None)
        return cls(
            path=path,
            status=str(getattr(report, "status", "failed")),
            message=str(getattr(report, "message", "") or ""),
            duration_s=float(reported) if reported is not None else duration_s,
            jobs=jobs,
        )


RefreshFn = Callable[..., Any]


class RefreshWorker:
    """Run ``refresh(path, progress=...)`` for submitted paths on ``workers`` threads.

    Parameters
    ----------
    refresh : callable
        ``refresh(path, *, progress=None) -> RefreshReport`` (``watcher.refresh.workbook.refresh_workbook``).
    on_outcome : callable(Outcome)
        Called on the worker thread after every attempt (log it; resubmit a conflict).
    workers : int
        Number of threads (1: one workbook at a time).
    still_ready : callable(Path) -> bool, optional
        Asked just before each refresh (a path may wait in the queue behind others); when it answers
        False (say, the workbook has been opened meanwhile) the path goes to ``on_deferred`` instead.
    on_deferred : callable(Path), optional
        Where a path that is no longer ready goes (back to the debouncer).
    """

    def __init__(
        self, refresh: RefreshFn, *, on_outcome: Callable[[Outcome], None], workers: int = 1,
        still_ready: Callable[[Path], bool] | None = None, on_deferred: Callable[[Path], None] | None = None,
    ) -> None:
        if workers < 1:
            raise ValueError(f"`workers` must be at least 1; got {workers!r}")
        self._refresh = refresh
        self._on_outcome = on_outcome
        self._still_ready = still_ready
        self._on_deferred = on_deferred
        self._workers = workers
        self._cond = threading.Condition()
        self._queue: deque[Path] = deque()
        self._running: set[Path] = set()
        self._again: set[Path] = set()
        self._closing = False
        self._abandon = threading.Event()
        self._threads: list[threading.Thread] = []

    def start(self) -> None:
        """Start the worker threads."""
        for i in range(self._workers):
            thread = threading.Thread(target=self._run, name=f"tocsin-refresh-{i}", daemon=True)
            thread.start()
            self._threads.append(thread)

    def submit(self, path: Path) -> None:
        """Queue ``path`` (once); if it is being refreshed now, run it again right after."""
        with self._cond:
            if self._closing:
                return
            if path in self._running:
                self._again.add(path)
            elif path not in self._queue:
                self._queue.append(path)
                self._cond.notify()

    def busy(self) -> bool:
        """True while a refresh runs or paths are queued."""
        with self._cond:
            return bool(self._running or self._queue or self._again)

    def stop(self, grace: float = 2.0, abandon_wait: float = 2.0) -> tuple[list[Path], bool]:
        """Stop taking work; let the refresh in flight finish for ``grace`` s, then abandon it.

        Returns
        -------
        dropped : list of Path
            Queued paths that were not refreshed.
        clean : bool
            False when a refresh was still running after ``grace + abandon_wait`` seconds (its thread
            is a daemon and dies with the process; the write is atomic, so the workbook is either the
            old or the new file).
        """
        with self._cond:
            self._closing = True
            dropped = list(self._queue) + [p for p in self._again if p not in self._queue]
            self._queue.clear()
            self._again.clear()
            self._cond.notify_all()
        deadline = time.monotonic() + grace
        for thread in self._threads:
            thread.join(max(deadline - time.monotonic(), 0.0))
        if any(t.is_alive() for t in self._threads):
            self._abandon.set()
            deadline = time.monotonic() + abandon_wait
            for thread in self._threads:
                thread.join(max(deadline - time.monotonic(), 0.0))
        return dropped, not any(t.is_alive() for t in self._threads)

    def progress(self, *_args: object, **_kwargs: object) -> None:
        """The ``progress`` callback handed to the refresh: raises ``RefreshAbandoned`` when stopping."""
        if self._abandon.is_set():
            raise RefreshAbandoned

    # -- threads -------------------------------------------------------------------------------------
    def _take(self) -> Path | None:
        with self._cond:
            while True:
                if self._closing:
                    return None
                for path in self._queue:
                    if path not in self._running:
                        self._queue.remove(path)
                        self._running.add(path)
                        return path
                self._cond.wait()

    def _run(self) -> None:
        while True:
            path = self._take()
            if path is None:
                return
            try:
                if self._still_ready is not None and self._on_deferred is not None \
                        and not self._still_ready(path):
                    self._on_deferred(path)
                    continue
                outcome = self._attempt(path)
                try:
                    self._on_outcome(outcome)
                except Exception:
                    _logger.exception("reporting the refresh of %s failed", path)
            finally:
                with self._cond:
                    self._running.discard(path)
                    if path in self._again:
                        self._again.discard(path)
                        if not self._closing and path not in self._queue:
                            self._queue.append(path)
                    self._cond.notify_all()

    def _attempt(self, path: Path) -> Outcome:
        start = time.perf_counter()
        try:
            report = self._refresh(path, progress=self.progress)
        except RefreshAbandoned:
            return Outcome(path, "abandoned", "the watcher is stopping; the refresh was abandoned and "
                                             "nothing was written", time.perf_counter() - start)
        except PackageError as exc:
            return Outcome(path, "failed", str(exc), time.perf_counter() - start)
        except Exception as exc:
            return Outcome(path, "failed", f"unexpected error ({type(exc).__name__}: {exc})",
                           time.perf_counter() - start, traceback=traceback.format_exc())
        return Outcome.from_report(path, report, time.perf_counter() - start)
