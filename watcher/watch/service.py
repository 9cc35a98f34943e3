"""The long-running watcher (``tocsin watch``): keep forecast sheets current whenever a workbook is saved.

Three roles, three threads of control:

* the **handler** (``_Forwarder``), called on watchdog's observer thread, only forwards the paths of
  created, modified, moved (both ends), closed-after-write and deleted files -- spreadsheet programs save
  by writing a temporary file and renaming it over the workbook, so all of these count alike;
* the **debouncer** (``watcher.watch.debounce.Debouncer``) keeps one deadline per workbook, restarts it on
  every event, and hands a workbook on once it has been quiet for ``--quiet`` seconds, its size and mtime are
  stable, no owner file says a person has it open, and it opens as a complete zip package;
* the **refresh worker** (``watcher.watch.worker.RefreshWorker``) refreshes one workbook at a time per
  worker; with ``workers`` > 1 each worker runs its refreshes in a process of its own
  (:mod:`watcher.watch.procs`), so independent workbooks are refreshed in parallel, and never two
  refreshes of one workbook at once.

No loops: tocsin's own write changes the file, so it comes back through the debouncer. The watcher
keeps the fingerprint of every file it wrote (size, mtime and the SHA-256 the writer verified) and
recognises that file without refreshing it ("unchanged"; reading a large workbook again only to find it
unchanged would cost as much as the read of the refresh). Any other save is refreshed, and a refresh
whose inputs did not change answers "unchanged" without writing. A workbook that changed while
tocsin computed comes back as "conflict" and is started again. One bad workbook never stops the watcher.

At start every workbook already there goes through the same path with no quiet wait (the refresh skips
those whose inputs did not change), unless ``initial`` is off. :meth:`Watcher.stop` finishes the write in
flight, or abandons it cleanly (nothing written, no temporary file left) within the stop time. The
command line (``tocsin watch``, its signals and exit codes) is :mod:`watcher.cli.watch`; this module
knows nothing of it.
"""
from __future__ import annotations

import os
import threading
from collections.abc import Callable, Iterator, Sequence
from pathlib import Path
from typing import Any

from sheetfns.errors import InputError
from watcher.watch.debounce import Debouncer
from watcher.watch.log import WatchLog
from watcher.watch.probe import FileProbe
from watcher.watch.procs import Child, can_run_in_process
from watcher.watch.worker import Outcome, RefreshWorker
from watcher.xlsx.names import is_workbook_name, workbook_of_owner_file

__all__ = ["FALLBACK_POLL", "Watcher"]

FALLBACK_POLL = 2.0
"""Seconds between scans when the native observer cannot start and polling takes over."""

_FORWARDED = frozenset({"created", "modified", "moved", "deleted", "closed"})


class _Forwarder:
    """The watchdog handler: forwards file paths from relevant events, and nothing else."""

    def __init__(self, sink: Callable[[str], None]) -> None:
        self._sink = sink

    def dispatch(self, event: Any) -> None:
        if event.is_directory or event.event_type not in _FORWARDED:
            return
        self._sink(os.fsdecode(event.src_path))
        if event.event_type == "moved" and event.dest_path:
            self._sink(os.fsdecode(event.dest_path))


def _event_filter() -> list[type]:
    # watchdog is imported when the watcher starts, not with this module (55-130 ms of imports,
    # python -X importtime), so `tocsin --help` and the debouncer's tests do without it.
    from watchdog.events import (
        FileClosedEvent,
        FileCreatedEvent,
        FileDeletedEvent,
        FileModifiedEvent,
        FileMovedEvent,
    )
    return [FileCreatedEvent, FileModifiedEvent, FileMovedEvent, FileDeletedEvent, FileClosedEvent]


def _load_refresh() -> Callable[..., Any]:
    # Imported when the watcher starts, not with this module: the refresh pulls in numpy, pandas and
    # statsmodels (about 0.8 s of imports, python -X importtime), which a Watcher given its own refresh
    # (the tests, the benchmark) does not need.
    from watcher.refresh.workbook import refresh_workbook
    return refresh_workbook


class _OwnWrite:
    """The report of a workbook that is the file tocsin itself wrote last: nothing to read or write."""

    status = "unchanged"
    message = "tocsin's own write; not read again"
    jobs = ()
    written = None
    duration_s = 0.0

    def __init__(self, path: Path) -> None:
        self.path = path


class Watcher:
    """Watch folders (recursively) and single workbooks; refresh each workbook once it settles.

    Parameters
    ----------
    paths : sequence of path-like
        Folders (watched recursively) and/or ``.xlsx``/``.xlsm`` workbooks.
    refresh : callable, optional
        ``refresh(path, *, progress=None) -> RefreshReport``; default
        ``watcher.refresh.workbook.refresh_workbook``.
    quiet : float
        Seconds a workbook must be free of events before it is refreshed.
    poll : float, optional
        Use watchdog's polling observer with this interval (seconds) instead of the native one.
    initial : bool
        Refresh (if their inputs changed) the workbooks already there at start.
    log : WatchLog, optional
        Where lines go (default: stderr only).
    workers : int
        Workbooks refreshed at once (one by default). Above one, each refresh runs in a worker process
        when ``refresh`` can be sent to one (a module-level function, as the default), else on a thread.
    probe : FileProbe, optional
        The debouncer's file checks (tests may pass a fake).
    on_outcome : callable(Outcome), optional
        Called after each refresh attempt is logged (tests and the benchmark use it).
    stop_grace : float
        Seconds the refresh in flight may take to finish when stopping, before it is abandoned.
    write_grace : float
        Seconds a refresh that has begun its write may take to finish it when stopping.
    """

    def __init__(
        self,
        paths: Sequence[str | os.PathLike[str]],
        *,
        refresh: Callable[..., Any] | None = None,
        quiet: float = 1.0,
        poll: float | None = None,
        initial: bool = True,
        log: WatchLog | None = None,
        workers: int = 1,
        probe: FileProbe | None = None,
        on_outcome: Callable[[Outcome], None] | None = None,
        stop_grace: float = 2.0,
        write_grace: float = 10.0,
    ) -> None:
        if not paths:
            raise InputError("`PATH` must name at least one folder or workbook to watch; got none")
        if poll is not None and not poll > 0:
            raise InputError(f"`--poll` must be a number of seconds > 0; got {poll!r}")
        if not quiet >= 0:
            raise InputError(f"`--quiet` must be a number of seconds >= 0; got {quiet!r}")
        if isinstance(workers, bool) or not isinstance(workers, int) or workers < 1:
            raise InputError(f"`--workers` must be a whole number >= 1; got {workers!r}")
        self.folders: list[Path] = []
        self.workbooks: list[Path] = []
        for raw in paths:
            path = Path(os.path.realpath(os.fspath(raw)))
            if path.is_dir():
                self.folders.append(path)
            elif path.is_file():
                if not is_workbook_name(path.name):
                    raise InputError(f"`PATH` must be a folder or an .xlsx/.xlsm workbook; got '{raw}'")
                self.workbooks.append(path)
            else:
                raise InputError(f"`PATH` must be an existing folder or workbook; '{raw}' does not exist")
        self._refresh = refresh
        self._quiet = float(quiet)
        self._poll = poll
        self._initial = initial
        self._log = log if log is not None else WatchLog()
        self._on_outcome = on_outcome
        self._stop_grace = stop_grace
        self._write_grace = write_grace
        self._workers = workers
        self._probe = probe
        self._observer: Any = None
        self._debouncer: Debouncer | None = None
        self._worker: RefreshWorker | None = None
        self._stopped = False
        self._lock = threading.Lock()
        self._written: dict[Path, Any] = {}  # workbook -> fingerprint of the file tocsin last wrote there
        self._file_probe: FileProbe | None = None
        self.workers_note = ""
        self.how = ""

    # -- life cycle ----------------------------------------------------------------------------------
    def start(self) -> None:
        """Start the worker, the debouncer and the observer; log the startup line; queue the initial pass."""
        refresh = self._refresh if self._refresh is not None else _load_refresh()
        probe = self._probe if self._probe is not None else FileProbe()
        self._file_probe = probe
        children = None
        if self._workers > 1 and can_run_in_process(refresh):
            children = [Child(refresh) for _ in range(self._workers)]
            for child in children:
                child.start()
        kind = "process" if children else "thread"
        self.workers_note = (f"{self._workers} worker {kind}{'es' if children else 's'}"
                             if self._workers > 1 else "1 worker")
        self._worker = RefreshWorker(
            refresh, on_outcome=self._outcome, workers=self._workers, skip=self._own_write,
            children=children,
            still_ready=lambda path: probe.owner(path) is None,  # opened while queued? wait again
            on_deferred=lambda path: self._debouncer.submit(path, delay=0.0) if self._debouncer else None,
        )
        self._debouncer = Debouncer(
            self._worker.submit, quiet=self._quiet, probe=probe,
            on_waiting=self._waiting, on_resumed=self._resumed, on_rejected=self._rejected,
        )
        self._worker.start()
        self._debouncer.start()
        try:
            self._observer, self.how = self._start_observer()
        except BaseException:
            self._stopped = True
            self._debouncer.stop()
            self._worker.stop(grace=0.0)
            raise
        watched = [f"{p} (folder, recursive)" for p in self.folders]
        watched += [f"{p} (workbook)" for p in self.workbooks]
        self._log.event(
            "start",
            f"tocsin watch: watching {', '.join(watched)}; {self.how}; quiet {self._quiet:g} s; "
            f"initial refresh {'on' if self._initial else 'off'}; {self.workers_note}",
            folders=[str(p) for p in self.folders], workbooks=[str(p) for p in self.workbooks],
            observer=self.how, quiet_s=self._quiet, initial=self._initial, workers=self._workers,
        )
        if self._initial:
            for path in self.existing_workbooks():
                self._debouncer.submit(path, delay=0.0)

    def stop(self, reason: str = "stopped") -> None:
        """Stop observing, drop what is pending, finish or abandon the refresh in flight; log it."""
        with self._lock:
            if self._stopped:
                return
            self._stopped = True
        if self._observer is not None:
            self._observer.stop()
        dropped: list[Path] = []
        if self._debouncer is not None:
            dropped += self._debouncer.stop()
        clean = True
        if self._worker is not None:
            queued, clean = self._worker.stop(grace=self._stop_grace, write_grace=self._write_grace)
            dropped += [p for p in queued if p not in dropped]
        if self._observer is not None:
            self._observer.join(2.0)
        text = f"tocsin watch: {reason}"
        if dropped:
            text += f"; {len(dropped)} workbook(s) not yet refreshed (the next start picks them up)"
        if not clean:
            text += "; a refresh was still running and was left to the atomic write"
        self._log.event("stop", text, reason=reason, pending=[str(p) for p in dropped], clean=clean)

    def __enter__(self) -> Watcher:
        self.start()
        return self

    def __exit__(self, *_exc: object) -> None:
        self.stop()

    def idle(self) -> bool:
        """True when nothing is pending in the debouncer and the worker has nothing to do."""
        pending = self._debouncer is not None and bool(self._debouncer.pending())
        return not pending and not (self._worker is not None and self._worker.busy())

    def existing_workbooks(self) -> Iterator[Path]:
        """The workbooks present now under the watched folders, and the watched workbooks themselves."""
        seen: set[Path] = set()
        for folder in self.folders:
            for root, dirs, files in os.walk(folder):
                dirs.sort()
                for name in sorted(files):
                    path = Path(root) / name
                    if is_workbook_name(name) and path not in seen:
                        seen.add(path)
                        yield path
        for path in self.workbooks:
            if path not in seen:
                seen.add(path)
                yield path

    # -- observer ------------------------------------------------------------------------------------
    def _start_observer(self) -> tuple[Any, str]:
        from watchdog.observers import Observer  # at start, not at import (see _event_filter)
        from watchdog.observers.polling import PollingObserver

        if self._poll is not None:
            observer = self._schedule(PollingObserver(timeout=self._poll))
            observer.start()
            return observer, f"polling every {self._poll:g} s"
        observer = Observer()
        try:
            self._schedule(observer)
            observer.start()
            return observer, f"native observer ({type(observer).__name__})"
        except OSError as exc:  # e.g. the inotify watch limit: fall back to polling
            reason = f"{type(exc).__name__}: {exc}"
            observer.unschedule_all()
        observer = self._schedule(PollingObserver(timeout=FALLBACK_POLL))
        observer.start()
        return observer, f"polling every {FALLBACK_POLL:g} s (the native observer could not start: {reason})"

    def _schedule(self, observer: Any) -> Any:
        handler = _Forwarder(self._forward)
        event_filter = _event_filter()
        for folder in self.folders:
            observer.schedule(handler, str(folder), recursive=True, event_filter=event_filter)
        parents = {p.parent for p in self.workbooks}
        for parent in sorted(parents):
            if not any(parent.is_relative_to(folder) for folder in self.folders):
                observer.schedule(handler, str(parent), recursive=False, event_filter=event_filter)
        return observer

    # -- callbacks -----------------------------------------------------------------------------------
    def _own_write(self, path: Path) -> Any:
        """On a worker thread: the report for ``path`` when it still is the file tocsin wrote last (no
        refresh then), else None."""
        with self._lock:
            written = self._written.pop(path, None)
        if written is not None and self._file_probe.is_written(path, written):
            with self._lock:
                self._written.setdefault(path, written)  # still ours until it changes
            return _OwnWrite(path)
        return None

    def _forward(self, raw: str) -> None:
        """On the observer thread: map a path to the workbook it concerns and note the event. No I/O."""
        path = Path(raw)
        target = path if is_workbook_name(path.name) else workbook_of_owner_file(path)
        if target is None or self._debouncer is None:
            return
        if target in self.workbooks or any(target.is_relative_to(folder) for folder in self.folders):
            self._debouncer.submit(target)

    def _outcome(self, outcome: Outcome) -> None:
        if outcome.written is not None:
            with self._lock:
                self._written[outcome.path] = outcome.written
        self._log.outcome(outcome)
        if outcome.status in ("conflict", "busy") and self._debouncer is not None:
            # conflict: changed while computing; busy: opened just before the refresh looked. Either
            # way start again: the debouncer waits for quiet, and for the owner file to go.
            self._debouncer.submit(outcome.path)
        if self._on_outcome is not None:
            self._on_outcome(outcome)

    def _waiting(self, path: Path, owner: Path) -> None:
        self._log.event("waiting", f"waiting    {path}  is open elsewhere (owner file {owner.name}); "
                                   "refreshing once it is closed", workbook=str(path), owner_file=str(owner))

    def _resumed(self, path: Path) -> None:
        self._log.event("resumed", f"resumed    {path}  was closed; refreshing once it is quiet",
                        workbook=str(path))

    def _rejected(self, path: Path, reason: str) -> None:
        self._log.event("rejected", f"failed     {path}  {reason}", workbook=str(path), message=reason)
