"""Benchmark: ``tocsin check`` on a refreshed workbook, against ``tocsin refresh`` of the same workbook.

    python bench/check.py [--rows 300000]

The workbook is bench/refresh.py's full-height sheet cut to ``--rows`` hourly rows (invented, seeded;
built once and cached in bench/out/). It is refreshed once (``tocsin refresh`` as a command, a new
process), then checked (``tocsin check``, a new process) and refreshed again with ``--force`` so the
job is computed and the sheet written as at the first refresh. Printed: the seconds of each and the
ratio check / refresh (target: at most 1.5). ``check`` computes every job as the refresh does and
validates the structure of the package, but does not walk the cells of tocsin's own sheets.
"""
from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "bench"))

from refresh import OUT, build, timed  # noqa: E402


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=300_000)
    args = parser.parse_args(argv)
    OUT.mkdir(parents=True, exist_ok=True)
    big = OUT / f"refresh_{args.rows}.xlsx"
    if not big.exists():
        build(big, args.rows)
    with tempfile.TemporaryDirectory(prefix="tocsin-bench-", dir=OUT) as tmp:
        path = Path(tmp) / "book.xlsx"
        shutil.copyfile(big, path)
        first, _ = timed([sys.executable, "-m", "watcher.cli", "refresh", str(path)])
        check, check_mem = timed([sys.executable, "-m", "watcher.cli", "check", str(path)])
        again, again_mem = timed([sys.executable, "-m", "watcher.cli", "refresh", "--force", str(path)])
        size = path.stat().st_size / 2**20
    print(f"tocsin check after a refresh, {args.rows:,} hourly rows ({size:.0f} MiB refreshed):")
    print(f"  refresh (first)      {first:7.2f} s")
    print(f"  check                {check:7.2f} s   peak {check_mem:5.0f} MiB")
    print(f"  refresh --force      {again:7.2f} s   peak {again_mem:5.0f} MiB")
    print(f"  ratio check / refresh --force = {check / again:.2f}  (target <= 1.5)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
