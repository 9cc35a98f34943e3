"""Alerts under the watcher (DESIGN.md §13, issue 15): a burst of saves rings once; a failing command is
logged (stderr line, ``alert-failed`` event in the JSON-lines log), retried, and never stops the watcher.

Real folder, real observer, real refresh (as tests/test_watch_e2e.py); the workbook is the invented alarm
log of ``alarmbook`` with its alert on the rolling naive forecast, edited with openpyxl on a copy outside
the watched folder and saved into it by rename, as spreadsheet programs save.
"""
from __future__ import annotations

import argparse
import functools
import io
import json
import os
import shlex
import shutil
import threading
import time
from pathlib import Path

import pytest
from alarmbook import alarm_book, alarm_values, day, observe
from alerting import script
from test_watch import wait_for
from test_watch_e2e import Outcomes, save_by_rename

from watcher.alert import add_alert_arguments, dispatcher_from_args
from watcher.cli.command import build_parser
from watcher.cli.watch import main_watch
from watcher.refresh.workbook import refresh_workbook
from watcher.watch.log import WatchLog
from watcher.watch.service import Watcher

pytestmark = [pytest.mark.slow, pytest.mark.skipif(os.name != "posix", reason="POSIX executables")]
TIMEOUT = 120
N = len(alarm_values())


def versions(book: Path, scratch: Path, values: list[int]) -> list[bytes]:
    """The bytes of ``book`` after a colleague filled in each of ``values`` in turn (one save each)."""
    copy = scratch / book.name
    shutil.copy(book, copy)
    out = []
    for value in values:
        observe(copy, value)
        out.append(copy.read_bytes())
    return out


def log_events(path: Path) -> list[dict]:
    return [json.loads(line) for line in path.read_text().splitlines()] if path.exists() else []


def test_a_burst_of_saves_rings_once(tmp_path):
    share = tmp_path.resolve() / "share"
    scratch = tmp_path / "scratch"
    share.mkdir()
    scratch.mkdir()
    inbox = tmp_path / "alerts.jsonl"
    notify = script(tmp_path / "record.py", f"open({str(inbox)!r}, 'a').write(sys.stdin.read())")
    args = add_alert_arguments(argparse.ArgumentParser()).parse_args(["--notify", shlex.quote(str(notify))])
    refresh = functools.partial(refresh_workbook, dispatcher=dispatcher_from_args(args))
    book = alarm_book(share / "pumps.xlsx")
    outcomes = Outcomes()
    stream = io.StringIO()
    log = WatchLog(stream, tmp_path / "log.jsonl")
    with Watcher([share], refresh=refresh, quiet=1.0, log=log, on_outcome=outcomes) as watcher:
        assert wait_for(lambda: outcomes.statuses(book)[-1:] == ["unchanged"] and watcher.idle(), TIMEOUT), \
            outcomes.statuses(book)
        assert not inbox.exists()  # no event at first sight: nothing
        # five saves within a fraction of a second, the forecast turning at each: one refresh, one alert
        burst = versions(book, scratch, [1, 0, 1, 0, 1])
        start = len(outcomes.statuses(book))
        for data in burst:
            save_by_rename(book, data)
            time.sleep(0.05)

        def settled() -> bool:
            return "unchanged" in outcomes.statuses(book)[start:] and watcher.idle()
        assert wait_for(settled, TIMEOUT), outcomes.statuses(book)
        assert outcomes.statuses(book)[start:] == ["refreshed", "unchanged"]
    log.close()
    (alert,) = [json.loads(line) for line in inbox.read_text().splitlines()]
    assert alert["state"] == "raised" and alert["period"] == day(N + 5) and alert["job"] == "pump alarm"
    rang = [e for e in log_events(tmp_path / "log.jsonl") if e["event"] == "alert"]
    assert [(e["job"], e["state"], e["channels"]) for e in rang] == [("pump alarm", "raised", ["notify"])]
    assert "alert      " in stream.getvalue() and "raised (naive_roll, " in stream.getvalue()


def test_a_failing_command_is_logged_retried_and_the_watcher_carries_on(tmp_path, capsys):
    share = tmp_path.resolve() / "share"
    scratch = tmp_path / "scratch"
    share.mkdir()
    scratch.mkdir()
    broken = script(tmp_path / "chat.py", "sys.exit('chat server is down')")
    book = alarm_book(share / "pumps.xlsx", values=alarm_values(last=1))
    log = tmp_path / "log.jsonl"
    args = build_parser().parse_args(["watch", str(share), "--quiet", "0.3", "--log", str(log),
                                      "--notify", shlex.quote(str(broken))])
    stop = threading.Event()
    result = {}

    def run() -> None:
        result["code"] = main_watch(args.paths, quiet=args.quiet, log=args.log, stop_event=stop,
                                    dispatcher=dispatcher_from_args(args))

    thread = threading.Thread(target=run, name="watch")
    thread.start()
    try:
        def events(kind: str) -> list[dict]:
            return [e for e in log_events(log) if e["event"] == kind]

        assert wait_for(lambda: len(events("alert-failed")) == 1 and events("refresh"), TIMEOUT)
        (failed,) = events("alert-failed")
        assert failed["job"] == "pump alarm" and failed["state"] == "raised"
        assert failed["message"] == ("alert command 'chat.py' (raised 'pump alarm') exited with code 1: "
                                     "chat server is down")
        assert events("refresh")[0]["status"] == "refreshed"
        assert events("alerts")[0]["channels"] == ["notify"]
        # the next save is refreshed as usual, and the alert is tried again
        (data,) = versions(book, scratch, [1])
        save_by_rename(book, data)
        assert wait_for(lambda: len(events("alert-failed")) == 2, TIMEOUT), log.read_text()
        # (the second refresh may find its inputs unchanged: the saved version can equal the data, and
        # a refresh that only retries an alert writes nothing but tocsin's record)
        first, second = [e["status"] for e in events("refresh")][:2]
        assert first == "refreshed" and second in ("refreshed", "unchanged")
    finally:
        stop.set()
        thread.join(30)
    assert result == {"code": 0}
    err = capsys.readouterr().err
    assert "alert failed  " in err and "chat server is down; tried again at the next refresh" in err
    assert "Traceback" not in err
