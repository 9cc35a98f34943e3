"""``python -m watcher.cli``: the ``tocsin`` command without the console script."""
import sys

from watcher.cli.command import main

sys.exit(main())
