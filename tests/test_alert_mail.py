"""The mail channel (watcher/alert/deliver.py) against a real SMTP server on loopback.

The server is aiosmtpd (an independent SMTP implementation, started by each test on a free port):
plain SMTP (RFC 5321), STARTTLS (RFC 3207) with a throwaway self-signed certificate made by the
``openssl`` command line for the test, and AUTH (RFC 4954) checked by the test's authenticator.
The alerts are driven through the state machine exactly as the refresh will (``ring_job`` per refresh,
the record read back as JSON between refreshes).
"""
from __future__ import annotations

import argparse
import dataclasses
import json
import os
import shlex
import shutil
import socket
import ssl
import subprocess
import time

import pytest
from aiosmtpd.controller import Controller
from aiosmtpd.smtp import AuthResult
from alerting import future, script, stored

from watcher.alert import add_alert_arguments, dispatcher_from_args
from watcher.alert.ring import ring_job

USER = "alerts@example.org"
PASSWORD = "pa55-Wörd:with;odd$chars"  # noqa: S105  (a test password for the test's own server)
RECIPIENTS = ["ops@example.org", "duty@example.org"]


class Inbox:
    """aiosmtpd handler: keeps every mail and every login attempt."""

    def __init__(self, refuse: tuple[str, ...] = (), password: str = PASSWORD) -> None:
        self.mails: list[dict] = []
        self.logins: list[tuple[str, str]] = []
        self.refuse = refuse
        self.password = password

    async def handle_RCPT(self, server, session, envelope, address, rcpt_options):
        if address in self.refuse:
            return "550 5.1.1 no such mailbox"
        envelope.rcpt_tos.append(address)
        return "250 OK"

    async def handle_DATA(self, server, session, envelope):
        import email
        import email.policy
        msg = email.message_from_bytes(envelope.original_content or envelope.content,
                                       policy=email.policy.default)
        self.mails.append({"from": envelope.mail_from, "to": list(envelope.rcpt_tos), "msg": msg,
                           "login": getattr(session, "auth_data", None)})
        return "250 OK"

    def authenticate(self, server, session, envelope, mechanism, auth_data):
        login, password = (x.decode("utf-8") if isinstance(x, bytes) else x
                           for x in (auth_data.login, auth_data.password))
        self.logins.append((login, password))
        return AuthResult(success=(login, password) == (USER, self.password), handled=False)


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture
def serve():
    """Start an SMTP server on loopback: ``serve(inbox, **smtp_options) -> port``; stopped after the test."""
    running = []

    def start(inbox: Inbox, **options) -> int:
        port = free_port()
        controller = Controller(inbox, hostname="127.0.0.1", port=port, **options)
        controller.start()
        running.append(controller)
        return port

    yield start
    for controller in running:
        controller.stop()


@pytest.fixture(scope="module")
def certificate(tmp_path_factory):
    """A throwaway self-signed certificate for 127.0.0.1 (openssl CLI): (cert file, key file)."""
    if shutil.which("openssl") is None:
        if os.environ.get("CI"):
            pytest.fail("the openssl command line is needed to make the test certificate")
        pytest.skip("no openssl command line to make a test certificate")
    folder = tmp_path_factory.mktemp("tls")
    cert, key = folder / "cert.pem", folder / "key.pem"
    subprocess.run(["openssl", "req", "-x509", "-newkey", "ec", "-pkeyopt", "ec_paramgen_curve:prime256v1",
                    "-nodes", "-keyout", str(key), "-out", str(cert), "-days", "2", "-subj", "/CN=127.0.0.1",
                    "-addext", "subjectAltName=IP:127.0.0.1"], check=True, capture_output=True)
    return cert, key


def server_tls(certificate) -> ssl.SSLContext:
    context = ssl.create_default_context(ssl.Purpose.CLIENT_AUTH)
    context.load_cert_chain(*map(str, certificate))
    return context


def dispatcher(port: int, *, env=None, notify: str | None = None, trust=None, timeout: float | None = None):
    argv = ["--mail-to", ",".join(RECIPIENTS), "--smtp", f"127.0.0.1:{port}",
            "--mail-from", "tocsin@example.org"]
    if notify:
        argv += ["--notify", notify]
    args = add_alert_arguments(argparse.ArgumentParser()).parse_args(argv)
    disp = dispatcher_from_args(args, environ=env or {}, timeout=timeout)
    if trust is not None:  # the test's certificate stands in for the system's trusted ones
        disp.mail = dataclasses.replace(disp.mail, tls=lambda: ssl.create_default_context(cafile=str(trust)))
    return disp


def ring(record, forecast, disp, *, job="ferry-capacity"):
    return ring_job(stored(record), workbook="/srv/share/ferry.xlsx", job=job, setting="best",
                    best_method="logistic", future=future(forecast, 0.8 if forecast else 0.2), cutoff=0.5,
                    verdict="logistic did best.", dispatcher=disp)


def run_sequence(disp, forecasts=(1, 1, 1, 1, 0)):
    record, rungs = None, []
    for forecast in forecasts:
        rung = ring(record, forecast, disp)
        rungs.append(rung)
        record = rung.record
    return rungs


# --------------------------------------------------------------------------------- plain SMTP

def test_one_mail_per_change_across_raise_three_unchanged_and_clear(serve):
    inbox = Inbox()
    rungs = run_sequence(dispatcher(serve(inbox)))
    assert [r.failures for r in rungs] == [()] * 5
    assert [m["msg"]["Subject"] for m in inbox.mails] == ["tocsin: RAISED ferry-capacity for 2026-12-03",
                                                         "tocsin: CLEARED ferry-capacity for 2026-12-03"]
    for mail in inbox.mails:
        assert mail["to"] == RECIPIENTS and mail["from"] == "tocsin@example.org"
        assert mail["msg"].get_content_type() == "text/plain"
    assert [r.changed for r in rungs] == [True, False, False, False, True]


def test_a_failing_command_does_not_stop_the_mail_nor_repeat_it(serve, tmp_path):
    inbox = Inbox()
    broken = script(tmp_path / "chat.py", "sys.exit('chat is down')")
    rungs = run_sequence(dispatcher(serve(inbox), notify=shlex.quote(str(broken))))
    assert len(inbox.mails) == 2  # one per change, although the command failed every time
    assert all(len(r.failures) == 1 and "chat is down" in r.failures[0] for r in rungs[:4])
    assert rungs[-1].failures == ()  # cleared before the command ever got "raised": nothing to send it


def test_a_job_name_cannot_reach_a_recipient_or_a_header(serve):
    inbox = Inbox()
    ring(None, 1, dispatcher(serve(inbox)), job="x\r\nBcc: thief@example.net\r\nRCPT TO:<thief@example.net>")
    (mail,) = inbox.mails
    assert mail["to"] == RECIPIENTS and mail["msg"]["Bcc"] is None


def test_a_refused_recipient_is_reported_and_the_others_get_the_mail_once(serve):
    inbox = Inbox(refuse=("duty@example.org",))
    rungs = run_sequence(dispatcher(serve(inbox)), (1, 1))
    assert len(inbox.mails) == 1 and inbox.mails[0]["to"] == ["ops@example.org"]
    (message,) = rungs[0].messages
    assert "not accepted for duty@example.org (550 5.1.1 no such mailbox)" in message
    assert rungs[0].failures == () and rungs[1].alert is None


def test_a_server_that_is_down_is_a_quick_failure_and_retried(serve):
    port = free_port()  # nobody listens
    disp = dispatcher(port, timeout=2)
    first = ring(None, 1, disp)
    assert first.failures == (f"alert mail (raised 'ferry-capacity') to {', '.join(RECIPIENTS)} via "
                              f"127.0.0.1:{port}: Connection refused",)
    inbox = Inbox()
    controller = Controller(inbox, hostname="127.0.0.1", port=port)
    controller.start()
    try:
        second = ring(first.record, 1, disp)
    finally:
        controller.stop()
    assert second.failures == () and len(inbox.mails) == 1


def test_a_server_that_never_answers_times_out():
    with socket.socket() as silent:
        silent.bind(("127.0.0.1", 0))
        silent.listen(1)  # accepts the connection in the backlog, never says hello
        start = time.monotonic()
        rung = ring(None, 1, dispatcher(silent.getsockname()[1], timeout=0.5))
    assert time.monotonic() - start < 10
    assert rung.failures[0].endswith("no answer within 0.5 s")


# -------------------------------------------------------------------------- STARTTLS and login

@pytest.mark.parametrize("password", [PASSWORD, "plain-ASCII-pw"], ids=["utf8-plain", "smtplib-login"])
def test_starttls_and_login_with_the_environment_credentials(serve, certificate, password):
    inbox = Inbox(password=password)
    port = serve(inbox, tls_context=server_tls(certificate), require_starttls=True, auth_required=True,
                 authenticator=inbox.authenticate)
    disp = dispatcher(port, env={"TOCSIN_SMTP_USER": USER, "TOCSIN_SMTP_PASSWORD": password},
                      trust=certificate[0])
    rungs = run_sequence(disp)
    assert [r.failures for r in rungs] == [()] * 5
    assert len(inbox.mails) == 2  # require_starttls: the server takes no mail before STARTTLS
    assert inbox.logins == [(USER, password)] * 2


def test_a_wrong_password_fails_without_showing_it(serve, certificate, capfd, caplog):
    inbox = Inbox()
    port = serve(inbox, tls_context=server_tls(certificate), require_starttls=True, auth_required=True,
                 authenticator=inbox.authenticate)
    wrong = "not-the-Pa55word"
    disp = dispatcher(port, env={"TOCSIN_SMTP_USER": USER, "TOCSIN_SMTP_PASSWORD": wrong},
                      trust=certificate[0])
    rung = ring(None, 1, disp)
    (message,) = rung.failures
    assert "the server refused the login (535" in message
    assert inbox.mails == [] and inbox.logins and set(inbox.logins) == {(USER, wrong)}  # smtplib tries
    # each mechanism the server offers (PLAIN, then LOGIN) before it gives up
    out, err = capfd.readouterr()
    texts = [message, repr(disp), disp.describe(), repr(rung), out, err, caplog.text,
             json.dumps(rung.record)]
    for text in texts:
        assert wrong not in text


def test_credentials_are_never_sent_without_tls(serve):
    """A server that offers AUTH in the clear but no STARTTLS gets neither the login nor the mail."""
    inbox = Inbox()
    port = serve(inbox, auth_require_tls=False, authenticator=inbox.authenticate)
    disp = dispatcher(port, env={"TOCSIN_SMTP_USER": USER, "TOCSIN_SMTP_PASSWORD": PASSWORD})
    rung = ring(None, 1, disp)
    assert "does not offer STARTTLS, so the login was not sent" in rung.failures[0]
    assert inbox.logins == [] and inbox.mails == []
    assert rung.record["announced"] == {}  # retried at the next refresh


def test_an_untrusted_certificate_stops_before_the_login(serve, certificate):
    """The system's trusted certificates do not include the test's self-signed one."""
    inbox = Inbox()
    port = serve(inbox, tls_context=server_tls(certificate), require_starttls=True, auth_required=True,
                 authenticator=inbox.authenticate)
    disp = dispatcher(port, env={"TOCSIN_SMTP_USER": USER, "TOCSIN_SMTP_PASSWORD": PASSWORD})
    rung = ring(None, 1, disp)
    assert "TLS failed (CERTIFICATE_VERIFY_FAILED)" in rung.failures[0]
    assert inbox.logins == [] and PASSWORD not in rung.failures[0]


def test_the_password_is_blanked_even_where_a_server_echoes_it(serve, certificate):
    """A server's reply is quoted in failure messages; a (hostile or broken) server that echoes the
    password, plain or base64 as AUTH PLAIN encodes it, does not get it into a message."""
    import base64

    class Echo(Inbox):
        def authenticate(self, server, session, envelope, mechanism, auth_data):
            return AuthResult(success=False, handled=False, message=f"535 no: {PASSWORD} "
                              + base64.b64encode(f"\0{USER}\0{PASSWORD}".encode()).decode())

    inbox = Echo()
    port = serve(inbox, tls_context=server_tls(certificate), require_starttls=True, auth_required=True,
                 authenticator=inbox.authenticate)
    disp = dispatcher(port, env={"TOCSIN_SMTP_USER": USER, "TOCSIN_SMTP_PASSWORD": PASSWORD},
                      trust=certificate[0])
    (message,) = ring(None, 1, disp).failures
    assert "535 no: ***" in message and PASSWORD not in message
    assert base64.b64encode(f"\0{USER}\0{PASSWORD}".encode()).decode() not in message
