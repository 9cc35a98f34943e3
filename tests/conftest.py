"""Shared fixtures: a guard that fails any test leaking a thread."""
from __future__ import annotations

import threading
import time

import pytest


@pytest.fixture(autouse=True)
def no_thread_leak():
    before = set(threading.enumerate())
    yield
    deadline = time.monotonic() + 5.0
    while True:
        leaked = [t for t in threading.enumerate() if t not in before and t.is_alive() and not t.daemon]
        if not leaked or time.monotonic() > deadline:
            break
        time.sleep(0.05)
    assert not leaked, f"test leaked threads: {[t.name for t in leaked]}"
