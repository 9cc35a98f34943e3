"""The alert options of ``tocsin refresh`` and ``tocsin watch``, and the :class:`Dispatcher` they build.

``--notify CMD``, ``--mail-to ADDR[,ADDR]``, ``--mail-from ADDR``, ``--smtp HOST[:PORT]``; the SMTP login
comes from the environment only (``TOCSIN_SMTP_USER``, ``TOCSIN_SMTP_PASSWORD``), never from the command
line. Everything is validated once, at start-up, so a typo is an error before the first refresh rather
than a failed alert at the first change. Light to import (the command builds its parser from it).
"""
from __future__ import annotations

import argparse
import ipaddress
import os
import re
import shlex
import shutil
from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

from watcher.alert.errors import AlertOptionError

if TYPE_CHECKING:
    from watcher.alert.deliver import Dispatcher

__all__ = ["add_alert_arguments", "dispatcher_from_args", "parse_addresses", "parse_smtp"]

SMTP_PORT = 25
USER_VARIABLE = "TOCSIN_SMTP_USER"
PASSWORD_VARIABLE = "TOCSIN_SMTP_PASSWORD"

# RFC 5322, 3.2.3 and 3.4.1: a dot-atom local part and a domain of dot-separated labels (no quoted local
# parts, no address literals, ASCII only): the simple addresses an operator types.
_ATOM = r"[A-Za-z0-9!#$%&'*+/=?^_`{|}~-]+"
_LABEL = r"[A-Za-z0-9](?:[A-Za-z0-9-]{0,61}[A-Za-z0-9])?"
_ADDRESS = re.compile(rf"{_ATOM}(?:\.{_ATOM})*@{_LABEL}(?:\.{_LABEL})*")
_HOST = re.compile(rf"{_LABEL}(?:\.{_LABEL})*\.?")


def add_alert_arguments(parser: argparse.ArgumentParser) -> argparse.ArgumentParser:
    """Add the alert options to ``parser`` (``tocsin refresh`` and ``tocsin watch``)."""
    group = parser.add_argument_group(
        "alerts", "A job rings when its next-period forecast turns to event (raised) or back (cleared). "
                  f"The SMTP login is read from {USER_VARIABLE} and {PASSWORD_VARIABLE} in the "
                  "environment, never from the command line.")
    group.add_argument("--notify", metavar="CMD", default=None,
                       help="run CMD for every alert, with the alert as JSON on its standard input (CMD is "
                            "split like a shell command line but run without a shell; 30 s limit)")
    group.add_argument("--mail-to", metavar="ADDR[,ADDR]", action="append", default=None,
                       help="mail every alert to these addresses (the option may be repeated)")
    group.add_argument("--mail-from", metavar="ADDR", default=None,
                       help=f"the sender of alert mail (default: {USER_VARIABLE} when it is an address, "
                            "else tocsin@ this host's name)")
    group.add_argument("--smtp", metavar="HOST[:PORT]", default=None,
                       help=f"the mail server (default: localhost:{SMTP_PORT}); with {USER_VARIABLE} and "
                            f"{PASSWORD_VARIABLE} set, tocsin uses STARTTLS and logs in")
    return parser


def dispatcher_from_args(args: argparse.Namespace, *, environ: Mapping[str, str] | None = None,
                         timeout: float | None = None) -> Dispatcher:
    """The :class:`Dispatcher` for the parsed options (no option: a dispatcher with no channels).

    ``environ`` stands in for ``os.environ`` and ``timeout`` for the 30 s limit (both for tests).

    Raises
    ------
    AlertOptionError
        An option or a ``TOCSIN_SMTP_*`` variable is invalid; the message names it and what is wrong.
    """
    # Imported here, not at the top: the command builds its parser from this module, and delivery's
    # smtplib, ssl and subprocess cost 60 ms (measured after the parser is built) that `tocsin --help`
    # need not pay.
    from watcher.alert.deliver import TIME_LIMIT, Dispatcher, MailSettings

    limit = TIME_LIMIT if timeout is None else timeout
    env = os.environ if environ is None else environ
    notify = getattr(args, "notify", None)
    mail_to = getattr(args, "mail_to", None)
    mail_from = getattr(args, "mail_from", None)
    smtp = getattr(args, "smtp", None)
    command = _command(notify) if notify is not None else None
    if not mail_to:
        for option, value in (("--smtp", smtp), ("--mail-from", mail_from)):
            if value is not None:
                raise AlertOptionError(f"`{option}` needs `--mail-to` (the addresses to mail); got "
                                       f"{option} {value!r} alone")
        return Dispatcher(command=command, timeout=limit)
    texts = [mail_to] if isinstance(mail_to, str) else list(mail_to)
    recipients: list[str] = []
    for address in (a for text in texts for a in parse_addresses(text, option="--mail-to")):
        if address.lower() not in (r.lower() for r in recipients):
            recipients.append(address)
    host, port = parse_smtp(smtp) if smtp is not None else ("localhost", SMTP_PORT)
    user, password = _login(env)
    if mail_from is not None:
        sender = parse_addresses(mail_from, option="--mail-from")
        if len(sender) != 1:
            raise AlertOptionError(f"`--mail-from` must be one address; got {mail_from!r}")
        sender_address = sender[0]
    elif user is not None and _ADDRESS.fullmatch(user):
        sender_address = user
    else:
        sender_address = _default_sender()
    mail = MailSettings(recipients=tuple(recipients), sender=sender_address, host=host, port=port, user=user,
                        password=password)
    return Dispatcher(command=command, mail=mail, timeout=limit)


def parse_addresses(text: Any, *, option: str = "--mail-to") -> tuple[str, ...]:
    """``ADDR[,ADDR]`` as a tuple of addresses (simple syntax, no line breaks; a repeat is dropped)."""
    if not isinstance(text, str) or not text.strip():
        raise AlertOptionError(f"`{option}` must be one or more addresses like ops@example.org, separated "
                               f"by commas; got {text!r}")
    out: list[str] = []
    for i, item in enumerate(text.split(","), start=1):
        address = item.strip(" \t")  # blanks around commas; a line break is an error below
        if not _ADDRESS.fullmatch(address) or len(address) > 254:
            where = f" (item {i} of {text!r})" if "," in text else ""
            raise AlertOptionError(f"`{option}` must be addresses like ops@example.org, separated by commas; "
                                   f"got {address!r}{where}")
        if address.lower() not in (a.lower() for a in out):
            out.append(address)
    return tuple(out)


def parse_smtp(text: Any) -> tuple[str, int]:
    """``HOST[:PORT]`` (an IPv6 address in brackets: ``[::1]:2525``) as ``(host, port)``; port 25 default."""
    expected = "`--smtp` must be HOST or HOST:PORT (a port from 1 to 65535), e.g. mail.example.org:587"
    if not isinstance(text, str) or not text.strip():
        raise AlertOptionError(f"{expected}; got {text!r}")
    raw = text.strip()
    host, port_text = raw, ""
    if raw.startswith("["):
        inside, bracket, rest = raw[1:].partition("]")
        if not bracket or (rest and not rest.startswith(":")):
            raise AlertOptionError(f"{expected}; got {text!r}")
        host, port_text = inside, rest[1:]
        try:
            ipaddress.IPv6Address(host)
        except ValueError:
            raise AlertOptionError(f"{expected}; got {text!r} ({host!r} is not an IPv6 address)") from None
    else:
        if raw.count(":") == 1:
            host, _, port_text = raw.partition(":")
        if not _HOST.fullmatch(host):
            raise AlertOptionError(f"{expected}; got {text!r}")
    port = SMTP_PORT
    if port_text or raw.endswith(":"):
        if not port_text.isdigit() or not 1 <= int(port_text) <= 65535:
            raise AlertOptionError(f"{expected}; got {text!r}")
        port = int(port_text)
    return host, port


def _command(text: str) -> tuple[str, ...]:
    """``--notify`` split once with shell rules; the program must be found now (on PATH, or a path to an
    executable), and is kept by its full path so a later change of directory or PATH does not matter."""
    try:
        argv = shlex.split(text)
    except ValueError as exc:
        raise AlertOptionError(f"`--notify` must be a command line; got {text!r} ({exc})") from None
    if not argv:
        raise AlertOptionError(f"`--notify` must name a command; got {text!r}")
    found = shutil.which(argv[0])
    if found is None:
        raise AlertOptionError(f"`--notify`: the command {argv[0]!r} was not found (not on PATH, or not an "
                               "executable file)")
    return (os.path.abspath(found), *argv[1:])


def _login(env: Mapping[str, str]) -> tuple[str | None, str | None]:
    user = env.get(USER_VARIABLE) or None
    password = env.get(PASSWORD_VARIABLE) or None
    if (user is None) != (password is None):
        have, lack = (USER_VARIABLE, PASSWORD_VARIABLE) if user else (PASSWORD_VARIABLE, USER_VARIABLE)
        raise AlertOptionError(f"{have} is set but {lack} is not: set both for a login to the mail server, "
                               "or neither")
    if user is not None and any(not c.isprintable() for c in user):
        raise AlertOptionError(f"{USER_VARIABLE} must be a user name on one line; it holds a line break or "
                               "another control character")
    if password is not None and any(c in password for c in "\r\n\0"):
        raise AlertOptionError(f"{PASSWORD_VARIABLE} must be on one line; it holds a line break or a NUL")
    return user, password


def _default_sender() -> str:
    import socket  # lazy: only a mail needs the host's name

    name = socket.getfqdn()
    address = f"tocsin@{name}"
    return address if _ADDRESS.fullmatch(address) else "tocsin@localhost"
