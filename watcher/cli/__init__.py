"""The ``tocsin`` command (``watcher.cli:main`` is the console entry point)."""
from watcher.cli.command import main

__all__ = ["main"]
