"""Refreshes in worker processes (``tocsin watch --workers N``): independent workbooks in parallel.

A refresh is CPU-bound Python (threads gain nothing), so with more than one worker every worker thread
of :class:`watcher.watch.worker.RefreshWorker` owns one long-lived process (the ``spawn`` start method:
a fresh interpreter, safe beside the watcher's threads), sends it one workbook at a time over a pipe
and waits for its :class:`~watcher.watch.worker.Outcome`. The worker's queue still hands a workbook to
one thread at a time, so no two refreshes of one workbook ever run at once.

Stopping keeps the watcher's rules (:mod:`watcher.watch.worker`): the process reports through a shared
flag when its refresh has begun its write (it then gets the write grace); to abandon, the thread sets
the process's abandon event, which the refresh's next ``progress`` call turns into ``RefreshAbandoned``;
a process that does not call it soon gets SIGTERM, whose handler raises the same exception there (the
writer then removes its temporary file). SIGTERM and SIGINT that reach a process directly (systemd stops
a whole control group; Ctrl-C signals the terminal's process group) are ignored until the watcher itself
asks to abandon, so the watcher alone decides what the refresh in flight gets. A process that dies is
reported as a failed refresh and replaced. A process whose parent dies sees its pipe close and exits.
"""
from __future__ import annotations

import multiprocessing
import os
import pickle
import signal
import time
from pathlib import Path
from typing import Any

from watcher.watch.worker import Outcome, RefreshAbandoned, attempt

__all__ = ["Child", "can_run_in_process"]

_CONTEXT = multiprocessing.get_context("spawn")
_STOPS = {signal.SIGINT, signal.SIGTERM}
_ANSWER_S = 1.0  # how long an abandoned process may take to answer SIGTERM before it is killed


def can_run_in_process(refresh: Any) -> bool:
    """Whether ``refresh`` can be sent to a worker process (pickled by reference, a module-level
    function such as ``watcher.refresh.workbook.refresh_workbook``)."""
    try:
        pickle.dumps(refresh)
    except Exception:  # noqa: BLE001 - any failure to pickle means: run it on threads
        return False
    return True


def _serve(conn: Any, refresh: Any, abandon: Any, writing: Any) -> None:
    """The worker process: refresh the workbooks that come over ``conn`` until it closes."""
    def on_term(_signum: int, _frame: object) -> None:
        if abandon.is_set():
            raise RefreshAbandoned

    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, on_term)
    if hasattr(signal, "pthread_sigmask"):  # blocked by Child.start until these handlers stood
        signal.pthread_sigmask(signal.SIG_UNBLOCK, _STOPS)

    def progress(*_args: object, final: bool = False, **_kwargs: object) -> None:
        if abandon.is_set():
            raise RefreshAbandoned
        if final:
            writing.value = 1

    while True:
        try:
            path = conn.recv()
        except (EOFError, OSError):
            return
        if path is None:
            return
        try:
            outcome = attempt(refresh, path, progress)
        except RefreshAbandoned:  # SIGTERM between the refresh's own try and here
            outcome = _abandoned(path, 0.0)
        try:
            conn.send(outcome)
        except (OSError, RefreshAbandoned):
            return


def _abandoned(path: Path, seconds: float) -> Outcome:
    return Outcome(path, "abandoned", "the watcher is stopping; the refresh was abandoned and nothing was "
                                     "written", seconds)


class Child:
    """One worker process and its pipe, used by one worker thread at a time."""

    def __init__(self, refresh: Any) -> None:
        self._refresh = refresh
        self._proc: Any = None
        self._conn: Any = None
        self._abandon: Any = None
        self._writing: Any = None

    def start(self) -> None:
        """Start the process (it imports the refresh while the watcher goes on)."""
        ours, theirs = _CONTEXT.Pipe()
        self._abandon = _CONTEXT.Event()
        self._writing = _CONTEXT.Value("b", 0, lock=False)
        self._proc = _CONTEXT.Process(target=_serve, name="tocsin-refresh-process", daemon=True,
                                      args=(theirs, self._refresh, self._abandon, self._writing))
        # the new process starts with SIGINT and SIGTERM blocked (a signal mask survives fork and exec),
        # so one that reaches it while it imports cannot end it before _serve's handlers stand
        masked = hasattr(signal, "pthread_sigmask")
        old = signal.pthread_sigmask(signal.SIG_BLOCK, _STOPS) if masked else None
        try:
            self._proc.start()
        finally:
            if masked:
                signal.pthread_sigmask(signal.SIG_SETMASK, old)
        theirs.close()
        self._conn = ours

    def run(self, path: Path, worker: Any) -> Outcome:
        """Refresh ``path`` in the process; ``worker`` (the RefreshWorker) says when to abandon and is
        told when the refresh has begun its write."""
        if self._proc is None or not self._proc.is_alive():
            self.close()
            self.start()
        start = time.perf_counter()
        self._writing.value = 0
        try:
            self._conn.send(path)
            while not self._conn.poll(0.05):
                if worker.abandoning():
                    self._abandon.set()   # the refresh's next progress call raises RefreshAbandoned
                if self._writing.value:
                    worker.writing()
                if not self._proc.is_alive():
                    return self._died(path, start)
            return self._conn.recv()
        except (EOFError, OSError):
            return self._died(path, start)
        except RefreshAbandoned:          # raised in this thread by the worker's stop: make it so there
            return self._stop_refresh(path, start)

    def _stop_refresh(self, path: Path, start: float) -> Outcome:
        self._abandon.set()
        if self._proc is not None and self._proc.is_alive():
            try:
                os.kill(self._proc.pid, signal.SIGTERM)   # raises RefreshAbandoned in the process
            except OSError:
                pass
            try:
                if self._conn.poll(_ANSWER_S):
                    return self._conn.recv()
            except (EOFError, OSError):
                pass
            self._proc.kill()
        return _abandoned(path, time.perf_counter() - start)

    def _died(self, path: Path, start: float) -> Outcome:
        code = None
        if self._proc is not None:
            self._proc.join(1.0)  # its pipe may close before its exit status is there
            code = self._proc.exitcode
        self.close()
        return Outcome(path, "failed", f"the refresh process ended unexpectedly (exit code {code}); "
                                       "nothing was written", time.perf_counter() - start)

    def close(self, wait: float = 2.0) -> None:
        """End the process: ask, wait ``wait`` seconds, then kill it."""
        proc, conn = self._proc, self._conn
        self._proc = self._conn = None
        if conn is not None:
            try:
                conn.send(None)
            except (OSError, ValueError):
                pass
        if proc is not None:
            proc.join(wait)
            if proc.is_alive():
                proc.kill()
                proc.join(1.0)
        if conn is not None:
            conn.close()
