"""``tocsin watch``: the watcher's command line -- its arguments, its signals and its exit codes.

The watcher itself (:class:`watcher.watch.service.Watcher`) knows nothing of the command line; this module
parses the arguments, opens the log, turns SIGTERM and Ctrl-C into a clean stop (the write in flight
finished or abandoned, nothing left behind; exit 0) and prints ``error: ...`` for bad arguments (exit 2)
or a watcher that cannot start (exit 1).
"""
from __future__ import annotations

import argparse
import os
import signal
import sys
import threading
from collections.abc import Callable, Sequence
from typing import Any

from sheetfns.errors import InputError
from watcher.alert.errors import AlertOptionError
from watcher.alert.options import add_alert_arguments, dispatcher_from_args

__all__ = ["add_watch_arguments", "default_workers", "main_watch", "run_watch"]


def _seconds(flag: str, *, positive: bool) -> Callable[[str], float]:
    def parse(text: str) -> float:
        try:
            value = float(text)
        except ValueError:
            value = float("nan")
        if not (value > 0 if positive else value >= 0) or value == float("inf"):
            raise argparse.ArgumentTypeError(
                f"`{flag}` must be a number of seconds {'> 0' if positive else '>= 0'}; got '{text}'")
        return value
    return parse


def default_workers() -> int:
    """Workbooks refreshed at once by default: the number of cores, at most 4."""
    return max(1, min(os.cpu_count() or 1, 4))


def _workers(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        value = 0
    if value < 1:
        raise argparse.ArgumentTypeError(f"`--workers` must be a whole number >= 1; got '{text}'")
    return value


def add_watch_arguments(parser: argparse.ArgumentParser) -> argparse.ArgumentParser:
    """Add ``PATH... [--poll SECONDS] [--quiet SECONDS] [--no-initial] [--log FILE] [--workers N]`` to
    ``parser``."""
    parser.add_argument("paths", nargs="+", metavar="PATH",
                        help="folders (watched recursively) and/or .xlsx/.xlsm workbooks")
    parser.add_argument("--poll", type=_seconds("--poll", positive=True), metavar="SECONDS", default=None,
                        help="scan for changes every SECONDS instead of using the system's file events "
                             "(for network shares and synced folders, where those events do not arrive)")
    parser.add_argument("--quiet", type=_seconds("--quiet", positive=False), metavar="SECONDS", default=1.0,
                        help="refresh a workbook once it has been saved and left alone this long "
                             "(default: 1)")
    parser.add_argument("--no-initial", action="store_true",
                        help="do not refresh, at start, the workbooks whose inputs changed while tocsin "
                             "was not watching")
    parser.add_argument("--log", metavar="FILE", default=None,
                        help="also append one JSON object per event (refresh, alert, alert-failed, waiting, "
                             "start, stop) to FILE")
    parser.add_argument("--workers", type=_workers, metavar="N", default=None,
                        help="refresh up to N workbooks at once, each in a process of its own (default: "
                             "the number of cores, at most 4); one workbook is never refreshed twice at once")
    add_alert_arguments(parser)
    return parser


def run_watch(args: argparse.Namespace) -> int:
    """Run the watcher from parsed arguments (see ``add_watch_arguments``); returns the exit code."""
    try:
        dispatcher = dispatcher_from_args(args)
    except AlertOptionError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    workers = args.workers if args.workers is not None else default_workers()
    return main_watch(args.paths, poll=args.poll, quiet=args.quiet, initial=not args.no_initial, log=args.log,
                      dispatcher=dispatcher, workers=workers)


class AlertingRefresh:
    """The refresh with the alert channels. A module-level class, so a worker process can receive it
    (pickled by reference, with the dispatcher); the refresh is imported at the first call (see
    :func:`watcher.watch.service._load_refresh`), not when the command starts."""

    def __init__(self, dispatcher: Any) -> None:
        self.dispatcher = dispatcher

    def __call__(self, path: Any, **options: Any) -> Any:
        from watcher.refresh.workbook import refresh_workbook
        return refresh_workbook(path, dispatcher=self.dispatcher, **options)


def main_watch(
    paths: Sequence[str | os.PathLike[str]],
    poll: float | None = None,
    quiet: float = 1.0,
    initial: bool = True,
    log: str | os.PathLike[str] | None = None,
    *,
    refresh: Callable[..., Any] | None = None,
    stop_event: threading.Event | None = None,
    write_grace: float = 10.0,
    dispatcher: Any = None,
    workers: int = 1,
) -> int:
    """Watch until SIGTERM, Ctrl-C or ``stop_event``; return 0, or 2 for bad arguments, 1 if it cannot run.

    ``dispatcher`` (:func:`watcher.alert.options.dispatcher_from_args`) says where alerts go; None: nowhere
    (the states are still recorded). Errors print ``error: ...`` on stderr, without a traceback.
    """
    # the watcher's modules are imported when it starts: with ctypes, logging and traceback they cost
    # 70-90 ms (python -X importtime), which every other command (refresh, check) would pay
    from watcher.watch.log import WatchLog
    from watcher.watch.service import Watcher

    stop = stop_event if stop_event is not None else threading.Event()
    try:
        watch_log = WatchLog(sys.stderr, log)
    except OSError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    if refresh is None and dispatcher is not None:
        refresh = AlertingRefresh(dispatcher)
    try:
        watcher = Watcher(paths, refresh=refresh, quiet=quiet, poll=poll, initial=initial, log=watch_log,
                          write_grace=write_grace, workers=workers)
    except InputError as exc:
        print(f"error: {exc}", file=sys.stderr)
        watch_log.close()
        return 2
    reason = {"text": "stopped"}

    def on_term(signum: int, _frame: object) -> None:
        reason["text"] = f"stopped ({signal.Signals(signum).name})"
        stop.set()

    if dispatcher is not None and dispatcher.channels:  # before the first refresh can ring
        watch_log.event("alerts", f"tocsin watch: {dispatcher.describe()}",
                        channels=list(dispatcher.channels))
    previous = None
    in_main = threading.current_thread() is threading.main_thread()
    if in_main and hasattr(signal, "SIGTERM"):
        previous = signal.signal(signal.SIGTERM, on_term)
    try:
        try:
            watcher.start()
        except (ImportError, OSError) as exc:
            print(f"error: the watcher cannot start: {exc}", file=sys.stderr)
            return 1
        while not stop.wait(0.2):
            pass
    except KeyboardInterrupt:
        reason["text"] = "stopped (Ctrl-C)"
    finally:
        try:
            watcher.stop(reason["text"])
        except KeyboardInterrupt:  # a second Ctrl-C while stopping: stop harder, still exit 0
            pass
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)
        watch_log.close()
    return 0

