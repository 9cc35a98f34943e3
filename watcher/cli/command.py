"""The ``tocsin`` command: init, check, refresh, watch and demo (argparse; ``main(argv) -> int``).

Exit codes: 0 success, 1 a job or a workbook failed, 2 usage error, 130 interrupted. Errors print
``error: ...`` on stderr with no traceback unless ``--debug`` is given.

The commands that compute import the refresh when they run, not with this module: the refresh pulls in
numpy, pandas and statsmodels (0.5-0.9 s of imports, ``python -X importtime -c "import
watcher.refresh.workbook"``), while this module and the watcher's arguments take about 0.06 s, so
``tocsin --help`` and a mistyped option answer at once.
"""
from __future__ import annotations

import argparse
import json
import os
import sys
from collections.abc import Sequence
from pathlib import Path
from typing import NoReturn

from watcher.alert.errors import AlertOptionError
from watcher.alert.options import add_alert_arguments, dispatcher_from_args
from watcher.cli.watch import add_watch_arguments, run_watch
from watcher.refresh.texts import CAUTION, VERSION, describe


class _Parser(argparse.ArgumentParser):
    """argparse with our message shape; usage errors exit 2 as usual."""

    def error(self, message: str):  # type: ignore[override]
        self.print_usage(sys.stderr)
        self.exit(2, f"error: {message}\n")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="tocsin",
        description="Event forecasts in shared workbooks: will it happen? tocsin reads the job table "
                    "(sheet 'tocsin') of a workbook, forecasts each event with benchmark methods and a "
                    "logistic model, scores them on a validation period and writes forecast sheets "
                    "into the workbook, leaving everything else in the file untouched.",
        epilog=CAUTION,
    )
    parser.add_argument("--version", action="version", version=f"tocsin {VERSION}")
    parser.add_argument("--debug", action="store_true", help="show tracebacks on errors")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    p = sub.add_parser("init", help="add a job table (sheet 'tocsin') with one job to a workbook",
                       description="Add a 'tocsin' job table with one forecast job to BOOK. Refuses if "
                                   "the workbook already has one. Edit the table afterwards to add jobs.")
    p.add_argument("book", type=Path, metavar="BOOK", help="the .xlsx / .xlsm workbook")
    p.add_argument("--sheet", required=True, help="the data sheet")
    p.add_argument("--value", required=True, metavar="COL", help="value column: header text or letter")
    p.add_argument("--date", metavar="COL", help="date column (guessed when not given)")
    p.add_argument("--event", required=True, metavar="CRIT",
                   help="event criterion, e.g. '>=1150', 'fall', 'rise%%>=2', '=alarm'")
    p.add_argument("--job", help="job name (default: from the value column)")

    p = sub.add_parser("check", help="validate the job table and print each job's scorecard",
                       description="Validate the job table of BOOK and print, per job, the validation "
                                   "scorecard. Writes nothing. Exit 1 on any error.")
    p.add_argument("book", type=Path, metavar="BOOK")

    p = sub.add_parser("refresh", help="compute every job and write the forecast sheets",
                       description="Refresh the forecast and profile sheets of each workbook. A workbook "
                                   "whose inputs are unchanged since the last refresh is not rewritten.")
    p.add_argument("books", type=Path, nargs="+", metavar="BOOK")
    p.add_argument("--json", action="store_true", help="print a machine-readable report")
    p.add_argument("--force", action="store_true", help="rewrite even when the inputs are unchanged")
    add_alert_arguments(p)

    p = sub.add_parser("watch", help="keep forecast sheets current whenever a workbook is saved",
                       description="Watch folders (recursively) or single workbooks and refresh each "
                                   "workbook shortly after it is saved. Stop with Ctrl-C.")
    add_watch_arguments(p)

    p = sub.add_parser("demo", help="copy the sample workbooks into a folder and refresh them",
                       description="Copy the bundled sample workbooks into DIR, refresh them and print "
                                   "their scorecards.")
    p.add_argument("dir", type=Path, nargs="?", default=Path("tocsin-demo"), metavar="DIR",
                   help="target folder (default: ./tocsin-demo)")

    p = sub.add_parser("calc-addin", help="write the LibreOffice Calc add-in tocsin.oxt",
                       description="Write tocsin.oxt, the extension that offers tocsin's spreadsheet "
                                   "functions in LibreOffice Calc. Install it with: unopkg add tocsin.oxt "
                                   "(as root: unopkg add --shared tocsin.oxt), then restart LibreOffice.")
    p.add_argument("--out", type=Path, default=Path("."), metavar="DIR",
                   help="folder to write tocsin.oxt into (default: the current folder)")
    return parser


def _stderr_progress():
    """A progress callback writing to stderr when it is a terminal, else None."""
    if not sys.stderr.isatty():
        return None

    def progress(message: str, *, final: bool = False) -> None:
        sys.stderr.write(f"\r\x1b[K{message}")
        sys.stderr.flush()

    return progress


def _cmd_init(args: argparse.Namespace) -> int:
    from watcher.refresh.newtable import init_workbook  # when it runs (see the module docstring)
    job = init_workbook(args.book, sheet=args.sheet, value=args.value, date=args.date,
                        event=args.event, job=args.job)
    if job.date_column is None and job.guessed:
        print(f"{args.book}: no column of sheet '{args.sheet}' holds dates, so the job has no date column "
              f"(its rows are the periods); give --date COL to name one")
    elif job.guessed:
        print(f"{args.book}: date column '{job.date_column}' (guessed: its cells are dates)")
    print(f"{args.book}: added sheet 'tocsin' with job '{job.name}'. Run: tocsin refresh {args.book}")
    return 0


def _cmd_check(args: argparse.Namespace) -> int:
    from watcher.cli import tables as report  # when it runs (see the module docstring)
    from watcher.refresh.check import check_workbook
    result = check_workbook(args.book, progress=_stderr_progress())
    if sys.stderr.isatty():
        sys.stderr.write("\r\x1b[K")
    print(report.check_text(result))
    for line in report.check_errors(result):
        print(f"error: {line}", file=sys.stderr)
    return 0 if result.ok else 1


def _cmd_refresh(args: argparse.Namespace) -> int:
    from watcher.cli import tables as report  # when it runs (see the module docstring)
    from watcher.refresh import workbook as refresh
    try:
        dispatcher = dispatcher_from_args(args)
    except AlertOptionError as exc:  # a usage error: before any workbook is read
        print(f"error: {exc}", file=sys.stderr)
        return 2
    reports = []
    for book in args.books:
        rep = refresh.refresh_workbook(book, force=args.force, progress=_stderr_progress(),
                                       dispatcher=dispatcher)
        if sys.stderr.isatty():
            sys.stderr.write("\r\x1b[K")
        reports.append(rep)
        if not args.json and not (rep.status == "failed" and not rep.jobs):
            print(report.refresh_text(rep))
        for line in report.refresh_errors(rep):
            print(f"error: {line}", file=sys.stderr)
        for line in report.alert_failures(rep):  # logged; never the refresh's failure
            print(f"alert failed: {line}", file=sys.stderr)
    if args.json:
        print(json.dumps([report.refresh_dict(r) for r in reports], indent=2))
    return 0 if all(r.ok for r in reports) else 1


def _cmd_watch(args: argparse.Namespace) -> int:
    return run_watch(args)


def _cmd_demo(args: argparse.Namespace) -> int:
    from watcher.cli import demo  # when it runs (see the module docstring)
    return demo.run_demo(args.dir, progress=_stderr_progress())


def _cmd_calc_addin(args: argparse.Namespace) -> int:
    from watcher.cli import calc_addin
    path = calc_addin.write_extension(args.out, version=VERSION, caution=CAUTION)
    print(f"{path}: the LibreOffice Calc add-in. Install it with: unopkg add {path}  (as root: unopkg add "
          "--shared ...); LibreOffice's Python must find tocsin: see TOCSIN_PYTHONPATH in the README.")
    return 0


COMMANDS = {"init": _cmd_init, "check": _cmd_check, "refresh": _cmd_refresh, "watch": _cmd_watch,
            "demo": _cmd_demo, "calc-addin": _cmd_calc_addin}


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return 2
    try:
        return COMMANDS[args.command](args)
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
    except (ValueError, OSError) as exc:    # every layer's errors are ValueErrors
        if args.debug:
            raise
        print(f"error: {describe(exc)}", file=sys.stderr)
        return 1
    except Exception as exc:  # a bug of ours: still no traceback unless asked for
        if args.debug:
            raise
        print(f"error: internal error ({type(exc).__name__}: {exc}); run the command again with "
              "--debug for the traceback and report it", file=sys.stderr)
        return 1


def run(argv: Sequence[str] | None = None) -> NoReturn:
    """The console entry point: :func:`main`, then the process ends at once with its exit code.

    When :func:`main` returns, a command has finished with everything it owns (a workbook is written,
    synced to disk and renamed; reports are printed), so only the terminal streams and the log
    handlers are flushed here; the interpreter's teardown (freeing every module, stopping numpy's
    thread pool) is skipped: it took ~50 ms of the ferry sample's ~0.4 s command (bench/small.py)."""
    code = main(argv)
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (OSError, ValueError):  # a closed pipe or stream: nothing more can be said there
            pass
    if "logging" in sys.modules:
        sys.modules["logging"].shutdown()
    os._exit(code)


if __name__ == "__main__":
    run()
