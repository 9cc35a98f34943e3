"""Shared fixtures: guards that fail a test leaking a thread or raising an unexpected warning."""
from __future__ import annotations

import threading
import time
import warnings

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


class _GuardProbe(UserWarning):
    """The warning the guard below raises to see that warnings are errors."""


def _warnings_are_errors() -> bool:
    with warnings.catch_warnings():          # the probe leaves the filters as they were
        try:
            warnings.warn("tocsin's warning guard", _GuardProbe, stacklevel=1)
        except _GuardProbe:
            return True
    return False


@pytest.fixture(autouse=True)
def no_unexpected_warning():
    """Every warning fails the test that raised it: ``filterwarnings = ["error", ...]`` in pyproject.toml
    turns warnings into errors (with commented ignores for known third-party noise only), and a test
    that expects a warning catches it with ``pytest.warns``. This guard fails a test run without
    that setting, and a test that silences warnings outside a ``with warnings.catch_warnings():``."""
    assert _warnings_are_errors(), ("warnings must fail the tests: run pytest with the project's settings "
                                    "(pyproject.toml [tool.pytest.ini_options] filterwarnings = error)")
    yield
    assert _warnings_are_errors(), ("the test silenced warnings for the rest of the run: silence a "
                                    "third-party warning inside `with warnings.catch_warnings():`")
