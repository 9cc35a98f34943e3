"""Refreshes in worker processes (``tocsin watch --workers N``): independent workbooks in parallel.

A refresh is CPU-bound Python (threads gain nothing), so with more than one worker every worker thread
of :class:`watcher.watch.worker.RefreshWorker` owns one long-lived process, sends it one workbook at a
time and waits for its :class:`~watcher.watch.worker.Outcome`. The worker's queue still hands a
workbook to one thread at a time, so no two refreshes of one workbook ever run at once.

The process is a fresh interpreter (``python -c``, importing the refresh by reference) joined to the
watcher by a socket pair (``multiprocessing.connection``, pickled messages): not ``multiprocessing``'s
own processes, which run the watcher's main script again in every process (a script without an
``if __name__ == "__main__"`` guard, or one read from stdin, would break them). POSIX only; elsewhere the
watcher keeps its threads. Messages: the refresh function, then a path at a time; back come "writing"
(the refresh has begun its write) and ``("done", outcome)``.

Stopping keeps the watcher's rules (:mod:`watcher.watch.worker`): a process that said "writing" gets the
write grace; to abandon, the thread sends SIGUSR1, which makes the refresh's next ``progress`` call raise
``RefreshAbandoned``; a process that does not call it soon gets SIGTERM, whose handler then raises the
same exception there (the writer removes its temporary file). SIGTERM and SIGINT that reach a process
directly (systemd stops a whole control group; Ctrl-C signals the terminal's process group) are ignored
until the watcher itself asks to abandon, so the watcher alone decides what the refresh in flight gets;
they are blocked while a process starts. A process that dies is reported as a failed refresh and
replaced; one whose watcher dies sees its socket close and exits.
"""
from __future__ import annotations

import json
import os
import pickle
import signal
import subprocess
import sys
import time
from multiprocessing.connection import Connection, Pipe
from pathlib import Path
from typing import Any

from watcher.watch.worker import Outcome, RefreshAbandoned, attempt

__all__ = ["Child", "can_run_in_process", "serve"]

_ANSWER_S = 1.0  # how long an abandoned process may take to answer SIGTERM before it is killed
_SIGNALS = ("SIGINT", "SIGTERM", "SIGUSR1")
_START = ("import sys, json; sys.path[:0] = json.loads(sys.argv[1]); "
          "from watcher.watch.procs import serve; serve(int(sys.argv[2]))")


def can_run_in_process(refresh: Any) -> bool:
    """Whether ``refresh`` can run in a worker process: a POSIX system, and ``refresh`` picklable (by
    reference: a module-level function such as ``watcher.refresh.workbook.refresh_workbook``)."""
    if os.name != "posix" or not hasattr(signal, "pthread_sigmask"):
        return False
    try:
        pickle.dumps(refresh)
    except Exception:  # noqa: BLE001 - any failure to pickle means: run it on threads
        return False
    return True


def _stops() -> set[signal.Signals]:
    return {getattr(signal, name) for name in _SIGNALS}


def serve(fd: int) -> None:
    """The worker process: refresh the workbooks that come over the socket ``fd`` until it closes."""
    conn = Connection(fd)
    asked = {"abandon": False}

    def on_usr1(_signum: int, _frame: object) -> None:
        asked["abandon"] = True

    def on_term(_signum: int, _frame: object) -> None:
        if asked["abandon"]:
            raise RefreshAbandoned

    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGUSR1, on_usr1)
    signal.signal(signal.SIGTERM, on_term)
    signal.pthread_sigmask(signal.SIG_UNBLOCK, _stops())  # blocked by Child.start until now

    def progress(*_args: object, final: bool = False, **_kwargs: object) -> None:
        if asked["abandon"]:
            raise RefreshAbandoned
        if final:
            conn.send("writing")

    try:
        refresh = conn.recv()
        while True:
            path = conn.recv()
            if path is None:
                return
            try:
                outcome = attempt(refresh, path, progress)
            except RefreshAbandoned:  # SIGTERM just outside the refresh's own try
                outcome = _abandoned(path, 0.0)
            conn.send(("done", outcome))
    except (EOFError, OSError, RefreshAbandoned):
        return


def _abandoned(path: Path, seconds: float) -> Outcome:
    return Outcome(path, "abandoned", "the watcher is stopping; the refresh was abandoned and nothing was "
                                     "written", seconds)


class Child:
    """One worker process and its socket, used by one worker thread at a time."""

    def __init__(self, refresh: Any) -> None:
        self._refresh = refresh
        self._proc: subprocess.Popen | None = None
        self._conn: Any = None

    def start(self) -> None:
        """Start the process (it imports the refresh while the watcher goes on)."""
        ours, theirs = Pipe()
        fd = theirs.fileno()
        # the new process starts with these signals blocked (a signal mask survives fork and exec), so
        # one that reaches it while it imports cannot end it before serve's handlers stand
        old = signal.pthread_sigmask(signal.SIG_BLOCK, _stops())
        try:
            self._proc = subprocess.Popen([sys.executable, "-c", _START, json.dumps(sys.path), str(fd)],
                                          pass_fds=(fd,), stdin=subprocess.DEVNULL)
        finally:
            signal.pthread_sigmask(signal.SIG_SETMASK, old)
            theirs.close()
        self._conn = ours
        self._conn.send(self._refresh)

    def run(self, path: Path, worker: Any) -> Outcome:
        """Refresh ``path`` in the process; ``worker`` (the RefreshWorker) says when to abandon and is
        told when the refresh has begun its write."""
        if self._proc is None or self._proc.poll() is not None:
            self.close()
            self.start()
        start = time.perf_counter()
        asked = False
        try:
            self._conn.send(path)
            while True:
                if self._conn.poll(0.05):
                    msg = self._conn.recv()
                    if msg == "writing":
                        worker.writing()
                        continue
                    return msg[1]
                if worker.abandoning() and not asked:
                    self._signal(signal.SIGUSR1)   # the refresh's next progress call raises
                    asked = True
                if self._proc.poll() is not None:
                    return self._died(path, start)
        except (EOFError, OSError):
            return self._died(path, start)
        except RefreshAbandoned:          # raised in this thread by the worker's stop: make it so there
            return self._stop_refresh(path, start)

    def _signal(self, signum: int) -> None:
        if self._proc is not None and self._proc.poll() is None:
            try:
                self._proc.send_signal(signum)
            except OSError:
                pass

    def _stop_refresh(self, path: Path, start: float) -> Outcome:
        self._signal(signal.SIGUSR1)
        self._signal(signal.SIGTERM)   # raises RefreshAbandoned in the process, which then answers
        deadline = time.monotonic() + _ANSWER_S
        try:
            while (left := deadline - time.monotonic()) > 0 and self._conn.poll(left):
                msg = self._conn.recv()
                if msg != "writing":
                    return msg[1]
        except (EOFError, OSError):
            pass
        if self._proc is not None and self._proc.poll() is None:
            self._proc.kill()
        return _abandoned(path, time.perf_counter() - start)

    def _died(self, path: Path, start: float) -> Outcome:
        code = None
        if self._proc is not None:
            try:
                code = self._proc.wait(1.0)  # its socket may close before its exit status is there
            except subprocess.TimeoutExpired:
                pass
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
            try:
                proc.wait(wait)
            except subprocess.TimeoutExpired:
                proc.kill()
                proc.wait(1.0)
        if conn is not None:
            conn.close()
