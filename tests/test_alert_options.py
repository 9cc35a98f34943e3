"""The alert options (watcher/alert/options.py): parsed and validated once, at start-up, with one error
per documented mistake; the SMTP login from the environment only.

Outside references: RFC 5322, 3.4.1 (addr-spec; the dot-atom form), RFC 3986, 3.2.2 (an IPv6 host in
brackets), POSIX shell quoting via ``shlex``.
"""
from __future__ import annotations

import argparse
import subprocess
import sys

import pytest

from watcher.alert import AlertOptionError, add_alert_arguments, dispatcher_from_args
from watcher.alert.options import parse_addresses, parse_smtp

ENV = {"TOCSIN_SMTP_USER": "alerts@example.org", "TOCSIN_SMTP_PASSWORD": "s3cret pw"}


def build(*argv: str, env=None):
    args = add_alert_arguments(argparse.ArgumentParser()).parse_args(list(argv))
    return dispatcher_from_args(args, environ={} if env is None else env)


def test_no_option_gives_a_dispatcher_with_no_channels():
    disp = build()
    assert disp.channels == () and disp.describe().startswith("alerts: none")


def test_every_option_together():
    disp = build("--notify", "sh -c 'cat > /dev/null'", "--mail-to", "ops@example.org, duty@example.org",
                 "--mail-to", "Ops@example.org,night@example.org", "--smtp", "mail.example.org:587", env=ENV)
    assert disp.channels == ("notify", "mail")
    assert disp.command[1:] == ("-c", "cat > /dev/null")
    assert disp.mail.recipients == ("ops@example.org", "duty@example.org", "night@example.org")
    assert (disp.mail.host, disp.mail.port) == ("mail.example.org", 587)
    assert disp.mail.user == "alerts@example.org" and disp.mail.sender == "alerts@example.org"
    assert disp.timeout == 30
    assert disp.describe().endswith("via mail.example.org:587 (STARTTLS, login)")
    assert "(and 2 arguments)" in disp.describe() and "/dev/null" not in disp.describe()


def test_defaults_localhost_port_25_and_a_sender_of_this_host():
    disp = build("--mail-to", "ops@example.org")
    assert (disp.mail.host, disp.mail.port, disp.mail.user) == ("localhost", 25, None)
    assert disp.mail.sender.startswith("tocsin@")


def test_mail_from_wins_over_the_login_name():
    assert build("--mail-to", "a@example.org", "--mail-from", "noreply@example.org",
                 env=ENV).mail.sender == "noreply@example.org"


@pytest.mark.parametrize("text, want", [("mail.example.org", ("mail.example.org", 25)),
                                        ("127.0.0.1:2525", ("127.0.0.1", 2525)),
                                        ("[::1]:2525", ("::1", 2525)),
                                        ("[2001:db8::25]", ("2001:db8::25", 25)),
                                        ("relay", ("relay", 25))])
def test_parse_smtp(text, want):
    assert parse_smtp(text) == want


@pytest.mark.parametrize("text", ["", "mail.example.org:0", "mail.example.org:65536", "host:smtp", "host:",
                                  "::1", "[::1", "[nothost]:25", "a b", "host\n:25", "-bad.example.org",
                                  "mail.example.org:25:26"])
def test_parse_smtp_errors(text):
    with pytest.raises(AlertOptionError, match=r"^`--smtp` must be HOST or HOST:PORT"):
        parse_smtp(text)


@pytest.mark.parametrize("text", ["ops@example.org", "first.last+alerts@mail.example.org", "root@localhost",
                                  "o'brien@example.org"])
def test_simple_addresses_pass(text):
    assert parse_addresses(text) == (text,)


@pytest.mark.parametrize("text, where", [
    ("ops", "'ops'"), ("ops@", "'ops@'"), ("@example.org", "'@example.org'"),
    ("ops@example.org\nBcc: thief@example.net", "'ops@example.org\\nBcc: thief@example.net'"),
    ("ops@example.org,,duty@example.org", "'' (item 2 of"),
    ("Ops <ops@example.org>", "'Ops <ops@example.org>'"),
    ("a..b@example.org", "'a..b@example.org'"), ("ops@exa mple.org", "'ops@exa mple.org'"),
    ("ops@-example.org", "'ops@-example.org'"), ("ops@example.org\r", "'ops@example.org\\r'"),
])
def test_bad_addresses_are_named(text, where):
    with pytest.raises(AlertOptionError) as info:
        build("--mail-to", text)
    assert str(info.value).startswith("`--mail-to` must be addresses like ops@example.org")
    assert where in str(info.value)


@pytest.mark.parametrize("argv, message", [
    (["--smtp", "mail.example.org"], "`--smtp` needs `--mail-to` (the addresses to mail); got --smtp "
                                     "'mail.example.org' alone"),
    (["--mail-from", "x@example.org"], "`--mail-from` needs `--mail-to`"),
    (["--mail-to", "a@example.org", "--mail-from", "a@example.org,b@example.org"],
     "`--mail-from` must be one address; got 'a@example.org,b@example.org'"),
    (["--notify", ""], "`--notify` must name a command; got ''"),
    (["--notify", "post 'unclosed"], "`--notify` must be a command line; got \"post 'unclosed\" "
                                     "(No closing quotation)"),
    (["--notify", "no-such-command-tocsin-test --flag"], "`--notify`: the command "
                                                         "'no-such-command-tocsin-test' was not found"),
])
def test_option_errors(argv, message):
    with pytest.raises(AlertOptionError) as info:
        build(*argv)
    assert str(info.value).startswith(message)


@pytest.mark.parametrize("env, message", [
    ({"TOCSIN_SMTP_USER": "u"}, "TOCSIN_SMTP_USER is set but TOCSIN_SMTP_PASSWORD is not"),
    ({"TOCSIN_SMTP_PASSWORD": "p"}, "TOCSIN_SMTP_PASSWORD is set but TOCSIN_SMTP_USER is not"),
    ({"TOCSIN_SMTP_USER": "u\nRCPT TO:<x@y>", "TOCSIN_SMTP_PASSWORD": "p"},
     "TOCSIN_SMTP_USER must be a user"),
    ({"TOCSIN_SMTP_USER": "u", "TOCSIN_SMTP_PASSWORD": "p\r\nQUIT"},
     "TOCSIN_SMTP_PASSWORD must be on one line"),
])
def test_login_variable_errors_never_quote_the_password(env, message):
    with pytest.raises(AlertOptionError) as info:
        build("--mail-to", "a@example.org", env=env)
    assert str(info.value).startswith(message)
    assert "QUIT" not in str(info.value) and "'p'" not in str(info.value)


def test_empty_login_variables_count_as_unset():
    assert build("--mail-to", "a@example.org", env={"TOCSIN_SMTP_USER": "", "TOCSIN_SMTP_PASSWORD": ""}
                 ).mail.user is None


def test_the_password_is_in_no_repr_and_no_description():
    disp = build("--mail-to", "a@example.org", env=ENV)
    assert "s3cret" not in repr(disp) and "s3cret" not in disp.describe() and "s3cret" not in repr(disp.mail)


def test_the_password_cannot_be_given_on_the_command_line():
    parser = add_alert_arguments(argparse.ArgumentParser(exit_on_error=False))
    actions = {o for a in parser._actions for o in a.option_strings}
    assert actions == {"-h", "--help", "--notify", "--mail-to", "--mail-from", "--smtp"}


def test_the_help_names_the_options_and_the_environment_variables():
    parser = add_alert_arguments(argparse.ArgumentParser(prog="tocsin refresh"))
    text = " ".join(parser.format_help().split())
    for words in ("--notify CMD", "--mail-to ADDR[,ADDR]", "--smtp HOST[:PORT]", "TOCSIN_SMTP_USER",
                  "TOCSIN_SMTP_PASSWORD", "run without a shell; 30 s limit"):
        assert words in text


def test_importing_the_options_costs_no_delivery_and_no_computation():
    """The command builds its parser from these options: smtplib, ssl, subprocess and numpy stay out."""
    code = ("import sys, watcher.alert.options\n"
            "print(','.join(m for m in ('smtplib', 'ssl', 'subprocess', 'numpy') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""
