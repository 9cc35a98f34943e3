"""The ``tocsin`` command: init, check, refresh, watch and demo (argparse; ``main(argv) -> int``).

Exit codes: 0 success, 1 a job or file failed, 2 usage error, 130 interrupted. Errors print
``error: ...`` on stderr with no traceback unless ``--debug`` is given.
"""
from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence

from watcher import __name__ as _pkg  # noqa: F401  (keeps the import light: no pandas/statsmodels here)

VERSION = "0.1.0"


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="tocsin",
        description="Event forecasts in shared workbooks: will it happen? tocsin reads the job table "
                    "(sheet 'tocsin') of a workbook, forecasts each event with benchmark methods and a "
                    "logistic model, scores them on a validation period and writes forecast sheets "
                    "into the workbook, leaving everything else in the file untouched.",
        epilog="Caution: these are statistical forecasts from past data, not a substitute for official "
               "warnings, clinical or engineering judgement, or the procedures that apply where you work.",
    )
    parser.add_argument("--version", action="version", version=f"tocsin {VERSION}")
    parser.add_argument("--debug", action="store_true", help="show tracebacks on errors")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sub.add_parser("demo", help="copy the sample workbooks into a folder and refresh them")
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help()
        return 2
    print("tocsin: the forecasting commands are not built yet (foundation only).", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
