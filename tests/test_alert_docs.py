"""The alert examples of the README's section "Alerts" work: the chat script it points to
(docs/alert-to-chat.py), run as the ``--notify`` command, posts the alert to a webhook (a small HTTP
server on loopback, Python's ``http.server``); the section names every option and JSON field."""
from __future__ import annotations

import argparse
import json
import os
import re
import shlex
import threading
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path

import pytest
from alerting import future, script

from watcher.alert import add_alert_arguments, dispatcher_from_args
from watcher.alert.ring import ring_job
from watcher.refresh.layout import CAUTION

ROOT = Path(__file__).resolve().parents[1]
CHAT_SCRIPT = ROOT / "docs" / "alert-to-chat.py"


def readme_section(title: str) -> str:
    """The README's section ``## title``, up to the next section of the same level."""
    text = ROOT.joinpath("README.md").read_text(encoding="utf-8")
    (section,) = re.findall(rf"^## {re.escape(title)}\n(.*?)(?=^## |\Z)", text, flags=re.S | re.M)
    return section


@pytest.fixture
def webhook():
    posts: list[dict] = []

    class Hook(BaseHTTPRequestHandler):
        def do_POST(self):
            body = self.rfile.read(int(self.headers["Content-Length"]))
            posts.append({"path": self.path, "type": self.headers["Content-Type"], "body": json.loads(body)})
            status = 500 if self.path.endswith("/down") else 200
            self.send_response(status)
            self.end_headers()

        def log_message(self, *args):
            pass

    server = ThreadingHTTPServer(("127.0.0.1", 0), Hook)
    thread = threading.Thread(target=server.serve_forever, name="webhook")
    thread.start()
    yield f"http://127.0.0.1:{server.server_address[1]}/hooks/abc123", posts
    server.shutdown()
    server.server_close()
    thread.join()


@pytest.mark.skipif(os.name != "posix", reason="the script is a POSIX executable")
def test_the_chat_script_of_the_docs_posts_the_alert_and_fails_loudly(tmp_path, webhook, monkeypatch):
    assert "docs/alert-to-chat.py" in readme_section("Alerts") and os.access(CHAT_SCRIPT, os.X_OK)
    path = script(tmp_path / "alert-to-chat.py", CHAT_SCRIPT.read_text(encoding="utf-8"))
    url, posts = webhook
    args = add_alert_arguments(argparse.ArgumentParser()).parse_args(["--notify", shlex.quote(str(path))])
    disp = dispatcher_from_args(args, environ={})

    def ring(record, forecast):
        return ring_job(record, workbook="/srv/share/ferry.xlsx", job="ferry-capacity", setting="best",
                        best_method="logistic", future=future(forecast, 0.713), cutoff=0.5,
                        verdict="logistic did best.", dispatcher=disp)

    for name in ("no_proxy", "NO_PROXY"):  # the loopback webhook is never reached through a proxy
        monkeypatch.setenv(name, "127.0.0.1,localhost")
    monkeypatch.setenv("CHAT_WEBHOOK_URL", url)
    rung = ring(None, 1)
    assert rung.failures == ()
    (post,) = posts
    assert post["path"] == "/hooks/abc123" and post["type"] == "application/json"
    assert post["body"]["text"] == ("tocsin RAISED: ferry-capacity: event forecast for 2026-12-03 "
                                    f"(71% chance) by the logistic method. {CAUTION}")
    monkeypatch.setenv("CHAT_WEBHOOK_URL", url + "/down")
    (message,) = ring(rung.record, 0).failures
    assert message.startswith("alert command 'alert-to-chat.py' (cleared 'ferry-capacity') exited with "
                              "code 1: chat webhook failed: HTTP Error 500")


def test_the_readme_names_every_alert_option_and_json_field():
    from watcher.alert.message import Alert
    text = readme_section("Alerts")
    parser = add_alert_arguments(argparse.ArgumentParser())
    for action in parser._actions:
        for option in action.option_strings:
            if option not in ("-h", "--help"):
                assert option in text, option
    for field in Alert.__dataclass_fields__:
        assert f"| `{field}`" in text, field
    assert " ".join(CAUTION.split()) in " ".join(text.replace("*", "").split())
