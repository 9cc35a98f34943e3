"""Which files are workbooks, and when a saved workbook is ready to be refreshed.

Two parts, both free of threads' knowledge of file-system events:

* **Name rules** (which files are workbooks, owner files, tocsin's temporaries) live in
  :mod:`watcher.xlsx.names`.
* **The debouncer** (``Debouncer``): one thread and one ``Condition`` for all paths, with a deadline per
  path. Every new event for a path restarts that path's wait. When a path has been quiet for ``quiet``
  seconds, the debouncer checks it through a ``FileProbe``: the file exists (else the path is dropped),
  no owner file says it is open (else it waits, polling, and says so once), size, mtime and inode are the
  same at two looks ``settle`` seconds apart (the first taken ``settle`` seconds before the quiet wait
  ends, so the check adds no delay), and it opens as a complete zip package. Only then does it hand the
  path on, once.

The probe (``watcher.watch.probe.FileProbe``) is the only part that touches the disk; the debouncer is
given one, so it can be tested with synthetic events and a fake probe.
"""
from __future__ import annotations

import logging
import threading
import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Protocol

__all__ = ["Debouncer", "Probe"]

_logger = logging.getLogger(__name__)

Stat = tuple[int, int, int]
"""(size, mtime in ns, inode): what must stay the same for a file to count as settled."""


class Probe(Protocol):
    """What the debouncer asks of the disk (``watcher.watch.probe.FileProbe``)."""

    def owner(self, path: Path) -> Path | None: ...

    def stat(self, path: Path) -> Stat | None: ...

    def complete(self, path: Path) -> bool: ...


@dataclass
class _Pending:
    due: float  # when to look next
    quiet_until: float  # the end of the quiet wait since the last event
    version: int = 0
    stat: Stat | None = None
    owner: Path | None = None
    incomplete: int = 0


def _noop(*_args: object) -> None:
    return None


class Debouncer:
    """Coalesce events per path and hand each path on once it is quiet, settled, closed and complete.

    Parameters
    ----------
    on_ready : callable(Path)
        Called (on the debouncer's thread) once per settled path; must return quickly (queue the work).
    quiet : float
        Seconds without an event before a path is checked (``--quiet``; default 1).
    probe : Probe
        What looks at the disk (``watcher.watch.probe.FileProbe``; tests pass a fake).
    on_waiting : callable(Path, Path), optional
        Called once when a path is held back because its owner file (second argument) exists.
    on_resumed : callable(Path), optional
        Called when the owner file of a waiting path has gone.
    on_rejected : callable(Path, str), optional
        Called when a settled path still does not open as a complete package after ``incomplete_tries``
        looks; the path is dropped until its next event.
    settle : float
        Seconds between the two looks at size/mtime/inode (at most ``quiet``).
    owner_poll : float
        Seconds between looks at an owner file while waiting.
    incomplete_tries : int
        How many settled looks may find an incomplete package before the path is rejected.
    """

    def __init__(
        self,
        on_ready: Callable[[Path], None],
        *,
        quiet: float = 1.0,
        probe: Probe,
        on_waiting: Callable[[Path, Path], None] | None = None,
        on_resumed: Callable[[Path], None] | None = None,
        on_rejected: Callable[[Path, str], None] | None = None,
        settle: float = 0.2,
        owner_poll: float = 0.5,
        incomplete_tries: int = 2,
    ) -> None:
        if quiet < 0:
            raise ValueError(f"`quiet` must be a number of seconds >= 0; got {quiet!r}")
        self._on_ready = on_ready
        self._quiet = float(quiet)
        self._probe = probe
        self._on_waiting = on_waiting or _noop
        self._on_resumed = on_resumed or _noop
        self._on_rejected = on_rejected or _noop
        self._settle = max(min(float(settle), self._quiet), 0.01)
        self._owner_poll = float(owner_poll)
        self._incomplete_tries = max(int(incomplete_tries), 1)
        self._cond = threading.Condition()
        self._pending: dict[Path, _Pending] = {}
        self._stopping = False
        self._thread: threading.Thread | None = None

    # -- intake (any thread) -------------------------------------------------------------------------
    def submit(self, path: Path, *, delay: float | None = None) -> None:
        """Note an event for ``path``: (re)start its wait of ``delay`` seconds (default ``quiet``)."""
        wait = self._quiet if delay is None else max(float(delay), 0.0)
        with self._cond:
            if self._stopping:
                return
            now = time.monotonic()
            quiet_until, due = self._first_look(now, wait)
            state = self._pending.get(path)
            if state is None:
                self._pending[path] = _Pending(due=due, quiet_until=quiet_until)
            else:
                state.due, state.quiet_until = due, quiet_until
                state.version += 1
                state.stat = None
                state.incomplete = 0
            self._cond.notify()

    def _first_look(self, now: float, wait: float) -> tuple[float, float]:
        """(end of the quiet wait, time of the first look): the first look at size/mtime is taken
        ``settle`` seconds before the wait ends, so the second, at its end, adds no delay."""
        return now + wait, now + max(wait - self._settle, 0.0)

    def pending(self) -> list[Path]:
        """The paths waiting now (to quiet down, to settle, or for their owner file to go)."""
        with self._cond:
            return list(self._pending)

    # -- life cycle ----------------------------------------------------------------------------------
    def start(self) -> None:
        """Start the debouncer's thread."""
        self._thread = threading.Thread(target=self._run, name="tocsin-debouncer", daemon=True)
        self._thread.start()

    def stop(self, timeout: float = 2.0) -> list[Path]:
        """Stop the thread and return the paths that were still pending (they are dropped)."""
        with self._cond:
            self._stopping = True
            dropped = list(self._pending)
            self._pending.clear()
            self._cond.notify_all()
        if self._thread is not None:
            self._thread.join(timeout)
        return dropped

    # -- the thread ----------------------------------------------------------------------------------
    def _run(self) -> None:
        while True:
            with self._cond:
                while True:
                    if self._stopping:
                        return
                    now = time.monotonic()
                    due = [p for p, s in self._pending.items() if s.due <= now]
                    if due:
                        break
                    nearest = min((s.due for s in self._pending.values()), default=None)
                    self._cond.wait(None if nearest is None else nearest - now)
            for path in due:
                try:
                    self._check(path)
                except Exception:  # never let one path stop the debouncer
                    _logger.exception("debouncer failed on %s", path)
                    with self._cond:
                        self._pending.pop(path, None)

    def _check(self, path: Path) -> None:
        with self._cond:
            state = self._pending.get(path)
            if state is None or state.due > time.monotonic() or self._stopping:
                return
            version = state.version

        def update(**changes: object) -> bool:
            """Apply changes unless a newer event arrived while we looked (then its wait rules)."""
            with self._cond:
                if self._pending.get(path) is not state or state.version != version:
                    return False
                for key, value in changes.items():
                    setattr(state, key, value)
                return True

        now = time.monotonic
        stat = self._probe.stat(path)
        if stat is None:  # deleted, or moved away: nothing to refresh
            with self._cond:
                if self._pending.get(path) is state and state.version == version:
                    del self._pending[path]
            return
        owner = self._probe.owner(path)
        if owner is not None:
            first = state.owner is None
            if update(owner=owner, due=now() + self._owner_poll) and first:
                self._on_waiting(path, owner)
            return
        if state.owner is not None:
            quiet_until, due = self._first_look(now(), self._quiet)
            if update(owner=None, stat=None, due=due, quiet_until=quiet_until):
                self._on_resumed(path)
            return
        if stat != state.stat:  # first look, or still changing: look again once quiet and settled
            update(stat=stat, due=max(state.quiet_until, now() + self._settle))
            return
        if not self._probe.complete(path):
            tries = state.incomplete + 1
            if tries < self._incomplete_tries:
                quiet_until, due = self._first_look(now(), max(self._quiet, self._settle))
                update(incomplete=tries, stat=None, due=due, quiet_until=quiet_until)
                return
            with self._cond:
                if self._pending.get(path) is not state or state.version != version:
                    return
                del self._pending[path]
            self._on_rejected(path, "does not open as a complete workbook package (damaged, or not a "
                                    "zip file); waiting for its next save")
            return
        with self._cond:
            if self._pending.get(path) is not state or state.version != version or self._stopping:
                return
            del self._pending[path]
        self._on_ready(path)
