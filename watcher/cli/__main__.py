"""``python -m watcher.cli``: the ``tocsin`` command without the console script."""
from watcher.cli.command import run

run()
