"""The ``tocsin`` command (``watcher.cli:run`` is the console entry point; :func:`main` runs a command
and returns its exit code, for callers in Python)."""
from watcher.cli.command import main, run

__all__ = ["main", "run"]
