"""Where alerts go: the operator's ``--notify`` command and mail (``--mail-to``, ``--smtp``).

Both channels are configured on the command line only (:mod:`watcher.alert.options`); nothing from a
workbook becomes part of an argument list, a host or a recipient: the alert reaches the command as JSON
on its standard input, and the mail as its subject and body.

* **Command.** The argument list is split once, at start-up, with shell rules (:func:`shlex.split`) and run
  without a shell, in a process group of its own, with the alert's JSON on stdin and a time limit (30 s).
  A non-zero exit, the time limit (the whole process group is killed) or a command that cannot start is a
  failure whose message names the command, the exit code or the limit, and the last line of stderr. The
  command's environment is tocsin's without the ``TOCSIN_SMTP_*`` credentials.
* **Mail.** One plain-text mail per alert to every recipient, through the SMTP server (port 25 unless
  given). With ``TOCSIN_SMTP_USER`` and ``TOCSIN_SMTP_PASSWORD`` set, the connection is upgraded with
  STARTTLS (RFC 3207; the server's certificate is verified against the system's trusted certificates,
  ``SSL_CERT_FILE`` adds one) before the login (RFC 4954); a server that does not offer STARTTLS gets no
  login and no mail. The password appears in no message, log line or ``repr``.

:meth:`Dispatcher.deliver` never raises: each channel's outcome is a :class:`Delivery`, and a failure of one
channel does not stop the other.
"""
from __future__ import annotations

import base64
import os
import signal
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING

from watcher.alert.state import CHANNELS

if TYPE_CHECKING:  # the alert's text needs the sheet layout (numpy, the scorecard); delivery does not
    import smtplib
    import ssl
    import subprocess

    from watcher.alert.message import Alert

__all__ = ["SECRET_VARIABLES", "Delivery", "Dispatcher", "MailSettings", "TIME_LIMIT"]

TIME_LIMIT = 30.0
"""Seconds a ``--notify`` command and an SMTP conversation may take (DESIGN.md §13)."""
SECRET_VARIABLES = ("TOCSIN_SMTP_USER", "TOCSIN_SMTP_PASSWORD")
STDERR_CHARS = 300  # of the command's last stderr line in a failure message


@dataclass(frozen=True)
class Delivery:
    """One channel's outcome for one alert. ``ok``: the channel got it (its ``announced`` moves on);
    ``message``: why not, or what went partly wrong ("" when all is well)."""

    channel: str
    ok: bool
    message: str = ""


@dataclass(frozen=True)
class MailSettings:
    """Where mail goes (validated by :func:`watcher.alert.options.dispatcher_from_args`)."""

    recipients: tuple[str, ...]
    sender: str
    host: str = "localhost"
    port: int = 25
    user: str | None = None
    password: str | None = field(default=None, repr=False)
    tls: Callable[[], ssl.SSLContext] | None = field(default=None, repr=False)  # None: the system's trust

    @property
    def where(self) -> str:
        host = f"[{self.host}]" if ":" in self.host else self.host
        return f"{host}:{self.port}"


class Dispatcher:
    """Deliver alerts to the configured channels.

    Parameters
    ----------
    command : sequence of str, optional
        The ``--notify`` argument list, split once with shell rules by :mod:`watcher.alert.options`; it
        is run as it is, without a shell.
    mail : MailSettings, optional
        Where mail goes.
    timeout : float
        Seconds per command run and per SMTP conversation (30; tests lower it).
    """

    def __init__(self, *, command: Sequence[str] | None = None, mail: MailSettings | None = None,
                 timeout: float = TIME_LIMIT) -> None:
        self.command = tuple(command) if command else None
        self.mail = mail
        self.timeout = float(timeout)

    def __repr__(self) -> str:
        return f"Dispatcher(command={self.command!r}, mail={self.mail!r}, timeout={self.timeout!r})"

    @property
    def channels(self) -> tuple[str, ...]:
        """The configured channels, in :data:`CHANNELS` order (empty: alerts are only recorded)."""
        on = {"notify": self.command is not None, "mail": self.mail is not None}
        return tuple(c for c in CHANNELS if on[c])

    def describe(self) -> str:
        """One line for the watcher's start message (no credentials, no command arguments)."""
        parts = []
        if self.command:  # the program only: an argument may hold a token the log should not keep
            more = len(self.command) - 1
            parts.append(f"command {self.command[0]}" + (f" (and {more} argument{'s' * (more > 1)})"
                                                         if more else ""))
        if self.mail:
            login = " (STARTTLS, login)" if self.mail.user else ""
            parts.append(f"mail to {', '.join(self.mail.recipients)} via {self.mail.where}{login}")
        return "alerts: " + ("; ".join(parts) if parts else "none (states are recorded, nothing is sent)")

    def deliver(self, alert: Alert, channels: Sequence[str] | None = None) -> tuple[Delivery, ...]:
        """Send ``alert`` to ``channels`` (default: every configured one); one :class:`Delivery` each.
        Never raises."""
        wanted = self.channels if channels is None else tuple(c for c in self.channels if c in channels)
        out = []
        for channel in wanted:
            try:
                ok, message = self._notify(alert) if channel == "notify" else self._mail(alert)
            except Exception as exc:  # a bug of ours must not stop a refresh or the watcher
                ok, message = False, f"{channel}: internal error ({type(exc).__name__}: {exc})"
            out.append(Delivery(channel, ok, self._redact(message)))
        return tuple(out)

    def send(self, alert: Alert) -> list[str]:
        """Send ``alert`` everywhere; the failure (and warning) messages, empty when all went well."""
        return [d.message for d in self.deliver(alert) if d.message]

    # ------------------------------------------------------------------------------------ the command

    def _notify(self, alert: Alert) -> tuple[bool, str]:
        assert self.command is not None
        name = os.path.basename(self.command[0])
        head = f"alert command {name!r} ({alert.state} {_quote(alert.job)})"
        env = {k: v for k, v in os.environ.items() if k not in SECRET_VARIABLES}
        posix = os.name == "posix"
        payload = (alert.to_json() + "\n").encode("utf-8")  # before the start: a bad alert starts nothing
        import subprocess  # lazy: a refresh that runs no command does not load it (~5 ms)

        try:
            proc = subprocess.Popen(  # noqa: S603  (the operator's own argument list; no shell)
                self.command, stdin=subprocess.PIPE, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE,
                env=env, shell=False, start_new_session=posix,
                creationflags=0 if posix else subprocess.CREATE_NEW_PROCESS_GROUP)
        except OSError as exc:
            return False, f"{head} could not be started: {exc.strerror or exc}"
        try:
            _, err = proc.communicate(payload, timeout=self.timeout)
        except subprocess.TimeoutExpired:
            _kill_group(proc)
            try:
                _, err = proc.communicate(timeout=5)
            except subprocess.TimeoutExpired:  # a grandchild escaped the group and holds stderr open
                err = b""
            finally:
                _reap(proc)
            return False, f"{head} timed out after {self.timeout:g} s and was stopped{_last_line(err)}"
        if proc.returncode != 0:
            code = proc.returncode
            how = f"was killed by signal {-code}" if code < 0 else f"exited with code {code}"
            return False, f"{head} {how}{_last_line(err)}"
        return True, ""

    # ------------------------------------------------------------------------------------------ mail

    def _mail(self, alert: Alert) -> tuple[bool, str]:
        mail = self.mail
        assert mail is not None
        head = (f"alert mail ({alert.state} {_quote(alert.job)}) to {', '.join(mail.recipients)} "
                f"via {mail.where}")
        msg = alert.mail(sender=mail.sender, recipients=mail.recipients)
        import smtplib  # lazy, as ssl: a refresh that sends no mail does not load them (~15 ms)
        import ssl
        try:
            with smtplib.SMTP(mail.host, mail.port, timeout=self.timeout) as smtp:
                smtp.ehlo()
                if mail.user is not None:
                    if not smtp.has_extn("starttls"):
                        return False, (f"{head}: the server does not offer STARTTLS, so the login was not "
                                       "sent and the mail was not sent")
                    smtp.starttls(context=mail.tls() if mail.tls else ssl.create_default_context())
                    smtp.ehlo()
                    _login(smtp, mail.user, mail.password or "")
                refused = smtp.send_message(msg, from_addr=mail.sender, to_addrs=list(mail.recipients))
        except smtplib.SMTPAuthenticationError as exc:
            return False, f"{head}: the server refused the login ({_reply(exc.smtp_code, exc.smtp_error)})"
        except smtplib.SMTPRecipientsRefused as exc:
            return False, f"{head}: every recipient was refused ({_refusals(exc.recipients)})"
        except smtplib.SMTPResponseException as exc:
            return False, f"{head}: the server answered {_reply(exc.smtp_code, exc.smtp_error)}"
        except ssl.SSLError as exc:
            return False, f"{head}: TLS failed ({exc.reason or exc})"
        except smtplib.SMTPException as exc:  # (an OSError too: before the OSError clause)
            if isinstance(exc.__context__, TimeoutError):  # smtplib re-raises a timeout as "disconnected"
                return False, f"{head}: no answer within {self.timeout:g} s"
            return False, f"{head}: {exc or type(exc).__name__}"
        except TimeoutError:
            return False, f"{head}: no answer within {self.timeout:g} s"
        except OSError as exc:
            return False, f"{head}: {exc.strerror or exc}"
        if refused:
            return True, f"{head}: not accepted for {_refusals(refused)}; the other recipients got it"
        return True, ""

    def _redact(self, text: str) -> str:
        """``text`` with the SMTP password (plain, and as the AUTH exchanges encode it) blanked out."""
        mail = self.mail
        if not text or mail is None or not mail.password:
            return text
        user = mail.user or ""
        secrets = {mail.password}
        for raw in (mail.password, f"\0{user}\0{mail.password}"):
            secrets.add(base64.b64encode(raw.encode("utf-8")).decode("ascii"))
        for secret in sorted(secrets, key=len, reverse=True):
            text = text.replace(secret, "***")
        return text


def _login(smtp: smtplib.SMTP, user: str, password: str) -> None:
    """Log in. smtplib sends credentials as ASCII only; a user name or password beyond ASCII goes as
    AUTH PLAIN in UTF-8 (RFC 4616, section 2), which is the one mechanism that defines it."""
    import smtplib

    if (user + password).isascii():
        smtp.login(user, password)
        return
    if "PLAIN" not in smtp.esmtp_features.get("auth", "").upper().split():
        raise smtplib.SMTPException("the server does not offer AUTH PLAIN, the only login that carries a "
                                    "user name or password with non-ASCII characters")
    token = base64.b64encode(f"\0{user}\0{password}".encode()).decode("ascii")
    code, answer = smtp.docmd("AUTH", f"PLAIN {token}")
    if code not in (235, 503):  # 503: already authenticated
        raise smtplib.SMTPAuthenticationError(code, answer)


def _reap(proc: subprocess.Popen) -> None:
    """Close our ends of the pipes and collect the killed child, so nothing is left open."""
    import subprocess

    for pipe in (proc.stdin, proc.stdout, proc.stderr):
        if pipe is not None:
            try:
                pipe.close()
            except OSError:
                pass
    try:
        proc.wait(timeout=5)
    except subprocess.TimeoutExpired:
        pass


def _kill_group(proc: subprocess.Popen) -> None:
    try:
        if os.name == "posix":
            os.killpg(proc.pid, signal.SIGKILL)
        else:
            proc.kill()
    except (ProcessLookupError, PermissionError, OSError):
        pass


def _last_line(err: bytes | None) -> str:
    lines = [line.strip() for line in (err or b"").decode("utf-8", "replace").splitlines() if line.strip()]
    if not lines:
        return ""
    last = "".join(c if c.isprintable() else " " for c in lines[-1])
    if len(last) > STDERR_CHARS:
        last = last[:STDERR_CHARS - 3] + "..."
    return f": {last}"


def _quote(text: str) -> str:
    """A workbook's text (a job name) for a log line: quoted, on one line, not too long."""
    one = "".join(c if c.isprintable() else " " for c in str(text))
    return repr(one if len(one) <= 80 else one[:77] + "...")


def _reply(code: int, text: bytes | str) -> str:
    if isinstance(text, bytes):
        text = text.decode("utf-8", "replace")
    return f"{code} {' '.join(str(text).split())}".strip()


def _refusals(refused: dict) -> str:
    return "; ".join(f"{rcpt} ({_reply(*answer)})" for rcpt, answer in refused.items())
