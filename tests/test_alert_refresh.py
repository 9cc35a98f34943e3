"""Alerts through ``tocsin refresh`` on a real workbook (DESIGN.md §13, issue 15).

The forecast turns because the data change: the job's event is ``=1`` on a 0/1 alarm column and its
``alert`` is the rolling naive forecast (``naive_roll``), which forecasts the last observed value (common
practice: the persistence forecast), so filling in an alarm day (openpyxl, as a colleague saves) raises
the alert and a quiet day clears it. The data are invented (``alarmbook``).

The mail goes to a real SMTP server on loopback (aiosmtpd, an independent SMTP implementation, RFC 5321),
the command is a real executable script; the alert record lives in tocsin's record in the workbook, so
every refresh reads it back from the file.
"""
from __future__ import annotations

import json
import os
import shlex
import zipfile

import pytest
from aiosmtpd.controller import Controller
from alarmbook import ALARM_JOB, alarm_book, alarm_values, day, observe
from alerting import script
from test_alert_mail import Inbox, free_port
from test_refresh import run_cli, sheet_part_bytes

from watcher.alert import deliver
from watcher.refresh.texts import CAUTION
from watcher.xlsx import package

posix = pytest.mark.skipif(os.name != "posix", reason="the scripts are POSIX executables")
N = len(alarm_values())


@pytest.fixture
def smtp():
    """A real SMTP server on loopback: (inbox, port)."""
    inbox = Inbox()
    port = free_port()
    controller = Controller(inbox, hostname="127.0.0.1", port=port)
    controller.start()
    yield inbox, port
    controller.stop()


@pytest.fixture(autouse=True)
def no_login(monkeypatch):
    for name in deliver.SECRET_VARIABLES:
        monkeypatch.delenv(name, raising=False)


@pytest.fixture
def recorder(tmp_path):
    """A ``--notify`` command that appends its standard input (one JSON line per alert) to a file."""
    inbox = tmp_path / "alerts.jsonl"
    path = script(tmp_path / "record alert.py", f"open({str(inbox)!r}, 'a').write(sys.stdin.read())")
    return shlex.quote(str(path)), inbox


def received(inbox) -> list[dict]:
    return [json.loads(line) for line in inbox.read_text().splitlines()] if inbox.exists() else []


def refresh(capsys, path, *options):
    """``tocsin refresh --json OPTIONS BOOK``: (the job's report, the workbook's status, stderr)."""
    code, out, err = run_cli(capsys, "refresh", "--json", *options, str(path))
    assert code == 0, err
    (report,) = json.loads(out)
    (job,) = report["jobs"]
    return job, report["status"], err


def test_one_mail_per_change_across_a_raise_three_unchanged_refreshes_and_a_clear(tmp_path, capsys, smtp):
    inbox, port = smtp
    mail = ("--mail-to", "duty@example.org,ops@example.org", "--smtp", f"127.0.0.1:{port}",
            "--mail-from", "tocsin@example.org")
    path = alarm_book(tmp_path / "pumps.xlsx")
    job, status, _ = refresh(capsys, path, *mail)
    assert job["alert"]["state"] == "no_event" and job["alert"]["rang"] is None
    assert inbox.mails == []  # a first sight of no event rings nothing

    observe(path, 1)  # an alarm day: the rolling naive forecast for the next day turns to event
    job, status, _ = refresh(capsys, path, *mail)
    assert status == "refreshed"
    assert job["alert"] == {"setting": "naive_roll", "method": "naive_roll", "state": "event",
                            "period": day(N + 1), "rang": "raised", "delivered": ["mail"], "failures": [],
                            "note": ""}
    assert len(inbox.mails) == 1
    for options in ((), ("--force",), ()):  # unchanged, forced, unchanged: nothing new to say
        job, status, _ = refresh(capsys, path, *mail, *options)
        assert job["alert"]["rang"] is None and job["alert"]["state"] == "event"
        assert status == ("refreshed" if options else "unchanged")
    assert len(inbox.mails) == 1
    observe(path, 1)  # another alarm day: new data, the same state
    refresh(capsys, path, *mail)
    assert len(inbox.mails) == 1

    observe(path, 0)  # a quiet day: cleared
    job, status, _ = refresh(capsys, path, *mail)
    assert job["alert"]["rang"] == "cleared" and job["alert"]["delivered"] == ["mail"]
    assert [m["msg"]["Subject"] for m in inbox.mails] == [
        f"tocsin: RAISED pump alarm for {day(N + 1)}", f"tocsin: CLEARED pump alarm for {day(N + 3)}"]
    for m in inbox.mails:
        assert m["to"] == ["duty@example.org", "ops@example.org"] and m["from"] == "tocsin@example.org"
        body = "".join(m["msg"].get_content().split())  # (lines are wrapped at 76 characters)
        assert str(path) in body and "rollingnaive(naive_roll)" in body
        assert "".join(CAUTION.split()) in body


@posix
def test_the_command_gets_the_alert_as_json(tmp_path, capsys, recorder):
    notify, inbox = recorder
    path = alarm_book(tmp_path / "pumps.xlsx", values=alarm_values(last=1))
    job, status, err = refresh(capsys, path, "--notify", notify)
    (alert,) = received(inbox)  # a first sight of an event rings "raised"
    assert alert == {"workbook": str(path.resolve()), "job": "pump alarm", "state": "raised",
                     "period": day(N), "origin": day(N - 1), "method": "naive_roll", "forecast": 1,
                     "probability": None, "cutoff": None, "verdict": job["message"], "caution": CAUTION}
    assert job["future"][0]["forecasts"]["naive_roll"] == {"forecast": 1, "probability": None}
    assert job["alert"]["delivered"] == ["notify"] and err == ""
    code, out, err = run_cli(capsys, "refresh", "--notify", notify, str(path))
    assert code == 0 and len(received(inbox)) == 1  # unchanged: nothing more


@posix
def test_a_job_name_holding_shell_syntax_runs_nothing(tmp_path, capsys, recorder, monkeypatch):
    notify, inbox = recorder
    monkeypatch.chdir(tmp_path)
    name = "a; touch pwned1 && $(touch pwned2) `touch pwned3` | touch pwned4 > pwned5 'x"
    path = alarm_book(tmp_path / "pumps.xlsx", {**ALARM_JOB, "job": name}, values=alarm_values(last=1))
    job, _, err = refresh(capsys, path, "--notify", notify)
    assert job["job"] == name and job["status"] == "ok", job["message"]
    (alert,) = received(inbox)
    assert alert["job"] == name  # the name arrives as data on stdin, and only there
    assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith("pwned")) == []


@posix
def test_a_failing_command_is_logged_the_refresh_succeeds_and_the_retry_writes_only_the_record(
        tmp_path, capsys, recorder):
    notify, inbox = recorder
    flaky = script(tmp_path / "flaky.py",  # fails until the file "up" exists
                   f"if not os.path.exists({str(tmp_path / 'up')!r}): sys.exit('chat server is down')\n"
                   f"open({str(inbox)!r}, 'a').write(sys.stdin.read())")
    path = alarm_book(tmp_path / "pumps.xlsx", values=alarm_values(last=1))
    code, out, err = run_cli(capsys, "refresh", "--notify", shlex.quote(str(flaky)), str(path))
    assert code == 0  # the refresh itself went well
    assert err == ("alert failed: pumps.xlsx: job 'pump alarm': alert command 'flaky.py' (raised 'pump "
                   "alarm') exited with code 1: chat server is down; tried again at the next refresh\n")
    assert "pump alarm: ok;" in out and "alert raised (naive_roll, " in out and "1 failed" in out
    assert received(inbox) == []
    record = package.Package.open(path).state["jobs"]["pump alarm"]["alert"]
    assert record["state"] == "event" and record["announced"] == {}  # not told yet: retried

    before = {i.filename: i.CRC for i in zipfile.ZipFile(path).infolist()}
    sheet = sheet_part_bytes(path, "pump alarm forecast")
    (tmp_path / "up").touch()
    job, status, err = refresh(capsys, path, "--notify", shlex.quote(str(flaky)))
    assert status == "unchanged" and err == "" and job["alert"]["delivered"] == ["notify"]
    assert [a["state"] for a in received(inbox)] == ["raised"]
    after = {i.filename: i.CRC for i in zipfile.ZipFile(path).infolist()}
    assert [n for n in after if after[n] != before.get(n)] == ["docProps/custom.xml"]  # the record only
    assert sheet_part_bytes(path, "pump alarm forecast") == sheet
    assert package.Package.open(path).state["jobs"]["pump alarm"]["alert"]["announced"] == {"notify": "event"}
    job, status, err = refresh(capsys, path, "--notify", shlex.quote(str(flaky)))
    assert status == "unchanged" and job["alert"]["rang"] is None and len(received(inbox)) == 1


@posix
def test_a_hanging_command_is_stopped_and_logged(tmp_path, capsys, monkeypatch):
    monkeypatch.setattr(deliver, "TIME_LIMIT", 1.0)  # the 30 s limit, shortened for the test
    hang = script(tmp_path / "hang.py", "time.sleep(60)")
    path = alarm_book(tmp_path / "pumps.xlsx", values=alarm_values(last=1))
    job, status, err = refresh(capsys, path, "--notify", shlex.quote(str(hang)))
    assert status == "refreshed" and job["status"] == "ok"
    (failure,) = job["alert"]["failures"]
    assert failure == "alert command 'hang.py' (raised 'pump alarm') timed out after 1 s and was stopped"
    assert err == f"alert failed: pumps.xlsx: job 'pump alarm': {failure}; tried again at the next refresh\n"


def test_a_mail_server_that_is_down_never_fails_the_refresh(tmp_path, capsys):
    port = free_port()  # nobody listens
    path = alarm_book(tmp_path / "pumps.xlsx", values=alarm_values(last=1))
    code, out, err = run_cli(capsys, "refresh", "--mail-to", "duty@example.org", "--smtp",
                             f"127.0.0.1:{port}", str(path))
    assert code == 0
    assert err.startswith("alert failed: pumps.xlsx: job 'pump alarm': alert mail (raised 'pump alarm') to "
                          f"duty@example.org via 127.0.0.1:{port}: ")


def test_alert_off_and_a_bad_alert_setting(tmp_path, capsys):
    path = alarm_book(tmp_path / "pumps.xlsx", {**ALARM_JOB, "alert": "off"},
                      {**ALARM_JOB, "job": "typo", "alert": "logistc"}, values=alarm_values(last=1))
    code, out, err = run_cli(capsys, "refresh", "--json", str(path))
    assert code == 1
    jobs = {j["job"]: j for j in json.loads(out)[0]["jobs"]}
    assert jobs["pump alarm"]["status"] == "ok" and jobs["pump alarm"]["alert"] is None
    assert jobs["typo"]["status"] == "failed" and jobs["typo"]["alert"] is None
    assert ("`alert` must be best, off or a method key (naive, naive_roll, seasonal, seasonal_roll, "
            "majority, majority_roll, markov, logistic, value_model)") in jobs["typo"]["message"]
    assert "got 'logistc' in row 3 of sheet tocsin" in jobs["typo"]["message"]
    assert "alert" not in package.Package.open(path).state["jobs"]["pump alarm"]


def test_bad_alert_options_are_usage_errors(tmp_path, capsys):
    path = alarm_book(tmp_path / "pumps.xlsx")
    before = path.read_bytes()
    for argv, says in ((["--smtp", "mail.example.org"], "`--smtp` needs `--mail-to`"),
                       (["--mail-to", "not an address"], "`--mail-to` must be addresses"),
                       (["--notify", "/no/such/program"], "was not found")):
        code, out, err = run_cli(capsys, "refresh", *argv, str(path))
        assert code == 2 and out == "" and err.startswith("error: ") and says in err, err
    assert path.read_bytes() == before
