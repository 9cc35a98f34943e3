"""The watcher's refresh worker: refresh settled workbooks one at a time, off the observer thread.

A small pool of threads (one by default) takes paths from a queue and calls the refresh. A path is never
refreshed by two threads at once: a path that becomes ready again while it is being refreshed is run
once more right after. Whatever the refresh does -- returns a report, raises ``PackageError`` for a
damaged package, or raises anything else -- the worker turns it into one ``Outcome`` and carries on.

Stopping: the queue is dropped (those workbooks are picked up by the next start's initial refresh, since
their inputs changed). The refresh in flight gets ``grace`` seconds to finish; a refresh that has begun
its write (it said so by calling ``progress(..., final=True)``) gets ``write_grace`` seconds, so a write
is finished rather than thrown away. After that the ``progress`` callback the worker passed to the
refresh raises ``RefreshAbandoned`` -- a ``BaseException``, so a refresh that catches ``Exception`` per job
does not mistake it for a failed job -- and a refresh that does not call it soon (a long computation, a
long write) gets the same exception raised in its thread. Either way it abandons cleanly: the package
writer removes its temporary file on any exception, and the workbook is untouched. So a stop takes at
most ``grace`` (or ``write_grace``) + ``abandon_wait`` seconds and leaves nothing behind.
"""
from __future__ import annotations

import ctypes
import logging
import threading
import time
import traceback
from collections import deque
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

__all__ = ["Outcome", "RefreshAbandoned", "RefreshWorker", "attempt"]

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
    next_period: Any = None
    warnings: tuple[str, ...] = ()
    future: tuple[Any, ...] = ()
    alert: Any = None  # what the job's alert did in this refresh (the report's ``alert``)


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
    written: Any = None  # the fingerprint of the file the refresh wrote (size, mtime_ns, sha256), if it wrote

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
                next_period=getattr(job, "next_period", None),
                warnings=tuple(getattr(job, "warnings", ()) or ()),
                future=tuple(getattr(job, "future", ()) or ()),
                alert=getattr(job, "alert", None),
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
            written=getattr(report, "written", None),
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
    skip : callable(Path) -> report or None, optional
        Asked on the worker thread before each refresh: a report to use instead of refreshing (the
        watcher's own write coming back), or None to refresh.
    children : list, optional
        One worker process per thread (:class:`watcher.watch.procs.Child`, started): each refresh runs
        in the thread's process, the thread only waits for it (``workers`` is then their number).
    """

    def __init__(
        self, refresh: RefreshFn, *, on_outcome: Callable[[Outcome], None], workers: int = 1,
        still_ready: Callable[[Path], bool] | None = None, on_deferred: Callable[[Path], None] | None = None,
        skip: Callable[[Path], Any] | None = None, children: list[Any] | None = None,
    ) -> None:
        if children:
            workers = len(children)
        if workers < 1:
            raise ValueError(f"`workers` must be at least 1; got {workers!r}")
        self._refresh = refresh
        self._skip = skip
        self._children: list[Any] = list(children or ())
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
        self._writing: set[int] = set()  # idents of the threads whose refresh has begun its write
        self._threads: list[threading.Thread] = []

    def start(self) -> None:
        """Start the worker threads."""
        for i in range(self._workers):
            child = self._children[i] if self._children else None
            thread = threading.Thread(target=self._run, args=(child,), name=f"tocsin-refresh-{i}",
                                      daemon=True)
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

    def stop(self, grace: float = 2.0, abandon_wait: float = 2.0,
             write_grace: float = 10.0) -> tuple[list[Path], bool]:
        """Stop taking work; let the refresh in flight finish (``grace`` s, ``write_grace`` s once it is
        writing), then abandon it within ``abandon_wait`` s.

        Returns
        -------
        dropped : list of Path
            Queued paths that were not refreshed.
        clean : bool
            False when a refresh was still running at the end (its thread is a daemon and dies with the
            process; the write is atomic, so the workbook is either the old or the new file).
        """
        with self._cond:
            self._closing = True
            dropped = list(self._queue) + [p for p in self._again if p not in self._queue]
            self._queue.clear()
            self._again.clear()
            self._cond.notify_all()
        start = time.monotonic()
        for thread in self._threads:
            while thread.is_alive():
                limit = write_grace if thread.ident in self._writing else grace
                if time.monotonic() - start >= limit:
                    break
                thread.join(0.05)
        if any(t.is_alive() for t in self._threads):
            self._abandon.set()             # the next progress call raises RefreshAbandoned
            deadline = time.monotonic() + abandon_wait / 2
            for thread in self._threads:
                thread.join(max(deadline - time.monotonic(), 0.0))
            for thread in self._threads:    # no progress call came: raise it in the thread itself
                if thread.is_alive():
                    _raise_in(thread, RefreshAbandoned)
            deadline = time.monotonic() + abandon_wait / 2
            for thread in self._threads:
                thread.join(max(deadline - time.monotonic(), 0.0))
        for child in self._children:
            child.close()
        return dropped, not any(t.is_alive() for t in self._threads)

    def abandoning(self) -> bool:
        """True once the stop asks the refresh in flight to abandon (a worker process polls it)."""
        return self._abandon.is_set()

    def writing(self) -> None:
        """The refresh of the calling thread has begun its write (said by its worker process)."""
        self._writing.add(threading.get_ident())

    def progress(self, *_args: object, final: bool = False, **_kwargs: object) -> None:
        """The ``progress`` callback handed to the refresh: raises ``RefreshAbandoned`` when stopping.
        ``final`` marks the last call before the write (the write then gets ``write_grace``)."""
        if self._abandon.is_set():
            raise RefreshAbandoned
        if final:
            self._writing.add(threading.get_ident())

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

    def _run(self, child: Any = None) -> None:
        while True:
            path = self._take()
            if path is None:
                return
            try:
                if self._still_ready is not None and self._on_deferred is not None \
                        and not self._still_ready(path):
                    self._on_deferred(path)
                    continue
                outcome = self._attempt(path, child)
                try:
                    self._on_outcome(outcome)
                except Exception:
                    _logger.exception("reporting the refresh of %s failed", path)
            finally:
                self._writing.discard(threading.get_ident())
                with self._cond:
                    self._running.discard(path)
                    if path in self._again:
                        self._again.discard(path)
                        if not self._closing and path not in self._queue:
                            self._queue.append(path)
                    self._cond.notify_all()

    def _attempt(self, path: Path, child: Any = None) -> Outcome:
        if self._skip is not None:
            start = time.perf_counter()
            report = self._skip(path)
            if report is not None:
                return Outcome.from_report(path, report, time.perf_counter() - start)
        if child is not None:
            return child.run(path, self)
        return attempt(self._refresh, path, self.progress)


def attempt(refresh: RefreshFn, path: Path, progress: Callable[..., None]) -> Outcome:
    """``refresh(path, progress=progress)`` as one :class:`Outcome`, whatever happens inside it."""
    start = time.perf_counter()
    try:
        report = refresh(path, progress=progress)
    except RefreshAbandoned:
        return Outcome(path, "abandoned", "the watcher is stopping; the refresh was abandoned and "
                                         "nothing was written", time.perf_counter() - start)
    except ValueError as exc:  # every layer's errors (the writer's included) are ValueErrors
        return Outcome(path, "failed", str(exc), time.perf_counter() - start)
    except Exception as exc:
        return Outcome(path, "failed", f"unexpected error ({type(exc).__name__}: {exc})",
                       time.perf_counter() - start, traceback=traceback.format_exc())
    return Outcome.from_report(path, report, time.perf_counter() - start)


def _raise_in(thread: threading.Thread, exc: type[BaseException]) -> bool:
    """Raise ``exc`` in ``thread`` at its next Python instruction (CPython's PyThreadState_SetAsyncExc).
    A thread blocked in a system call gets it when the call returns. Returns whether it was set."""
    if thread.ident is None:
        return False
    ident = ctypes.c_ulong(thread.ident)
    hit = ctypes.pythonapi.PyThreadState_SetAsyncExc(ident, ctypes.py_object(exc))
    if hit > 1:  # never: one ident names one thread; undo rather than hit several
        ctypes.pythonapi.PyThreadState_SetAsyncExc(ident, None)
        return False
    return hit == 1
