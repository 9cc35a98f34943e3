"""The small end: a refresh imports only what it needs (measured costs in DEVELOPERS.md, The core):
no scipy (the Diebold-Mariano tail comes from sheetfns/_ols/tdist.py, checked against scipy in
tests/test_stats_t.py and tests/test_scores_reference.py), no statsmodels, no pandas (the sheets are
written from arrays; the DataFrame tables of the library are made only when asked for), no numpy.ma
(np.median's first call imports it: ~25 ms), and no watcher machinery for a command that does not
watch."""
from __future__ import annotations

import shutil
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def test_refresh_command_imports_no_scipy_statsmodels_pandas_or_watcher(tmp_path):
    book = tmp_path / "ferry.xlsx"
    shutil.copyfile(ROOT / "sample_workbooks" / "island_ferry.xlsx", book)
    code = ("import sys\nfrom watcher.cli import main\nrc = main(['refresh', sys.argv[1]])\n"
            "print(rc, sorted(m for m in ('scipy', 'statsmodels', 'pandas', 'watcher.watch.service', "
            "'watchdog', 'smtplib', 'importlib.metadata', 'numpy.ma', 'statistics', 'socket', "
            "'subprocess') "
            "if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code, str(book)], capture_output=True, text=True, timeout=300,
                         cwd=ROOT)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip().splitlines()[-1] == "0 []"


def test_the_command_ends_at_once_with_its_output_flushed_and_its_exit_code(tmp_path):
    """The entry point skips the interpreter's teardown (watcher.cli.command.run): what the command
    printed into a pipe still arrives whole, and the exit code is the command's."""
    import json

    book = tmp_path / "ferry.xlsx"
    shutil.copyfile(ROOT / "sample_workbooks" / "island_ferry.xlsx", book)
    out = subprocess.run([sys.executable, "-m", "watcher.cli", "refresh", "--json", str(book)],
                         capture_output=True, text=True, timeout=300, cwd=ROOT)
    assert out.returncode == 0, out.stderr
    report = json.loads(out.stdout)
    assert [r["status"] for r in report] == ["refreshed"]
    gone = subprocess.run([sys.executable, "-m", "watcher.cli", "refresh", str(tmp_path / "none.xlsx")],
                          capture_output=True, text=True, timeout=300, cwd=ROOT)
    assert gone.returncode == 1 and "none.xlsx" in gone.stderr
