"""The ``--notify`` channel (watcher/alert/deliver.py): the operator's command gets the alert as JSON on its
standard input, runs without a shell, within a time limit, and a failure is reported and retried.

Outside reference: the POSIX shell's quoting rules (IEEE Std 1003.1, Shell Command Language, 2.2 and
2.6) as the standard library's ``shlex`` implements them; RFC 8259 for the JSON.
"""
from __future__ import annotations

import argparse
import dataclasses
import json
import os
import shlex
import time
from pathlib import Path

import pytest
from alerting import future, script, stored

from watcher.alert import add_alert_arguments, dispatcher_from_args
from watcher.alert.ring import ring_job
from watcher.refresh.layout import CAUTION

pytestmark = pytest.mark.skipif(os.name != "posix", reason="the scripts are POSIX executables")


def dispatcher(notify: str, *, timeout: float | None = None):
    parser = add_alert_arguments(argparse.ArgumentParser())
    return dispatcher_from_args(parser.parse_args(["--notify", notify]), timeout=timeout)


def ring(record, forecast, disp, *, job="ferry-capacity", probability=0.8):
    """One refresh of one job, the record read back from the workbook as JSON."""
    return ring_job(stored(record), workbook="/srv/share/ferry.xlsx", job=job, setting="best",
                    best_method="logistic", future=future(forecast, probability), cutoff=0.5,
                    verdict="logistic did best.", dispatcher=disp)


@pytest.fixture
def recorder(tmp_path):
    """A command that appends its argument list and its stdin (one JSON line per run) to files."""
    inbox = tmp_path / "inbox.jsonl"
    argv = tmp_path / "argv.jsonl"
    path = script(tmp_path / "record-alert.py",
                  f"open({str(argv)!r}, 'a').write(json.dumps(sys.argv[1:]) + '\\n')\n"
                  f"open({str(inbox)!r}, 'a').write(sys.stdin.read())")
    return path, inbox, argv


def lines(path: Path) -> list:
    return [json.loads(line) for line in path.read_text().splitlines()] if path.exists() else []


def test_the_command_gets_the_alert_as_json_on_stdin(recorder):
    path, inbox, argv = recorder
    disp = dispatcher(f"{shlex.quote(str(path))} --room 'ops desk'")
    rung = ring(None, 1, disp)
    assert rung.deliveries and rung.failures == () and rung.record["announced"] == {"notify": "event"}
    (got,) = lines(inbox)
    assert got["state"] == "raised" and got["job"] == "ferry-capacity" and got["probability"] == 0.8
    assert got["caution"] == CAUTION
    assert lines(argv) == [["--room", "ops desk"]]  # split once with shell rules, from the operator's text


def test_one_run_per_change_across_raise_three_unchanged_and_clear(recorder):
    path, inbox, _ = recorder
    disp = dispatcher(shlex.quote(str(path)))
    record = None
    for forecast in (1, 1, 1, 1, 0):
        record = ring(record, forecast, disp).record
    assert [a["state"] for a in lines(inbox)] == ["raised", "cleared"]


def test_shell_syntax_in_a_job_name_runs_nothing(recorder, tmp_path):
    path, inbox, argv = recorder
    marks = [tmp_path / f"mark{i}" for i in range(5)]
    job = (f"ferry; touch {marks[0]} && $(touch {marks[1]}) `touch {marks[2]}` | touch {marks[3]}"
           f" > {marks[4]} \n rm -rf ~")
    rung = ring(None, 1, dispatcher(shlex.quote(str(path))), job=job)
    assert rung.failures == ()
    assert [m for m in marks if m.exists()] == []
    assert lines(inbox)[0]["job"] == job  # the name arrives as data, exactly
    assert lines(argv) == [[]]  # and never as an argument


def test_a_failing_command_is_reported_and_retried_at_the_next_refresh(tmp_path):
    ok = tmp_path / "webhook-up"
    runs = tmp_path / "runs"
    path = script(tmp_path / "post-chat.py",
                  f"open({str(runs)!r}, 'a').write('run\\n')\n"
                  f"if not os.path.exists({str(ok)!r}):\n"
                  "    print('posting', file=sys.stderr); print('webhook said 502', file=sys.stderr)\n"
                  "    sys.exit(3)")
    disp = dispatcher(shlex.quote(str(path)))
    first = ring(None, 1, disp)
    (message,) = first.failures
    assert message == ("alert command 'post-chat.py' (raised 'ferry-capacity') exited with code 3: "
                       "webhook said 502")
    assert first.record["announced"] == {} and first.changed
    second = ring(first.record, 1, disp)  # still failing: tried again
    assert len(second.failures) == 1 and second.alert.state == "raised"
    ok.touch()
    third = ring(second.record, 1, disp)
    assert third.failures == () and third.record["announced"] == {"notify": "event"}
    fourth = ring(third.record, 1, disp)
    assert fourth.alert is None and not fourth.changed
    assert runs.read_text().count("run") == 3


def test_a_hanging_command_is_stopped_at_the_limit_and_retried(tmp_path):
    runs = tmp_path / "runs"
    path = script(tmp_path / "hang.py", f"open({str(runs)!r}, 'a').write('run\\n'); time.sleep(60)")
    disp = dispatcher(shlex.quote(str(path)), timeout=0.5)
    start = time.monotonic()
    first = ring(None, 1, disp)
    assert time.monotonic() - start < 10
    assert first.failures == ("alert command 'hang.py' (raised 'ferry-capacity') timed out after 0.5 s "
                              "and was stopped",)
    second = ring(first.record, 1, disp)
    assert len(second.failures) == 1 and runs.read_text().count("run") == 2


def test_the_whole_process_group_is_stopped(tmp_path):
    """A shell script that leaves a child holding stderr open would keep a plain ``subprocess.run``
    waiting after its own kill; the group is killed, and the child with it."""
    pid_file = tmp_path / "child.pid"
    command = f"sh -c 'sleep 60 & echo $! > {shlex.quote(str(pid_file))}; wait'"
    disp = dispatcher(command, timeout=0.5)
    start = time.monotonic()
    rung = ring(None, 1, disp)
    assert time.monotonic() - start < 10 and "timed out after 0.5 s" in rung.failures[0]
    child = int(pid_file.read_text())
    deadline = time.monotonic() + 5
    while time.monotonic() < deadline:
        try:
            os.kill(child, 0)
        except ProcessLookupError:
            break
        time.sleep(0.05)
    else:
        os.kill(child, 9)
        pytest.fail("the command's child outlived the time limit")


def test_a_command_that_cannot_start_is_a_failure_not_an_exception(tmp_path):
    path = script(tmp_path / "gone.py", "pass")
    disp = dispatcher(shlex.quote(str(path)))
    path.unlink()  # found at start-up, gone when the alert comes
    rung = ring(None, 1, disp)
    assert rung.failures == ("alert command 'gone.py' (raised 'ferry-capacity') could not be started: "
                             "No such file or directory",)


def test_a_command_killed_by_a_signal_says_so(tmp_path):
    path = script(tmp_path / "crash.py", "import signal; os.kill(os.getpid(), signal.SIGTERM)")
    rung = ring(None, 1, dispatcher(shlex.quote(str(path))))
    assert rung.failures[0].endswith("was killed by signal 15")


def test_the_command_does_not_see_the_smtp_credentials(tmp_path, monkeypatch):
    monkeypatch.setenv("TOCSIN_SMTP_USER", "alerts@example.org")
    monkeypatch.setenv("TOCSIN_SMTP_PASSWORD", "s3cret-pw")
    monkeypatch.setenv("TOCSIN_TEST_OTHER", "kept")
    seen = tmp_path / "env.json"
    path = script(tmp_path / "env.py", f"json.dump(dict(os.environ), open({str(seen)!r}, 'w'))")
    assert ring(None, 1, dispatcher(shlex.quote(str(path)))).failures == ()
    env = json.loads(seen.read_text())
    assert "TOCSIN_SMTP_PASSWORD" not in env and "TOCSIN_SMTP_USER" not in env
    assert env["TOCSIN_TEST_OTHER"] == "kept"


def test_a_command_that_ignores_stdin_still_succeeds(tmp_path):
    path = script(tmp_path / "quiet.py", "sys.exit(0)")
    assert ring(None, 1, dispatcher(shlex.quote(str(path)))).failures == ()


def test_the_program_is_kept_by_its_full_path():
    disp = dispatcher("sh -c 'exit 0'")
    assert os.path.isabs(disp.command[0]) and disp.command[1:] == ("-c", "exit 0")


def test_send_lists_the_failures_and_never_raises(recorder, tmp_path):
    path, inbox, _ = recorder
    good = dispatcher(shlex.quote(str(path)))
    alert = ring(None, 1, good).alert
    assert good.send(alert) == [] and len(lines(inbox)) == 2
    broken = dataclasses.replace(alert, probability=float("nan"))  # cannot be JSON (RFC 8259: no NaN)
    (message,) = good.send(broken)
    assert message.startswith("notify: internal error (ValueError: Out of range float values")
    failing = dispatcher(shlex.quote(str(script(tmp_path / "no.py", "sys.exit(2)"))))
    assert failing.send(alert) == ["alert command 'no.py' (raised 'ferry-capacity') exited with code 2"]
