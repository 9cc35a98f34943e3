"""``tocsin calc-addin``: write the LibreOffice Calc add-in ``tocsin.oxt``; and, for maintainers,
``python -m watcher.cli.calc_addin --types``: rebuild the add-in's type library after a change of the
function list (needs ``unoidl-write`` from the LibreOffice SDK, Debian package ``libreoffice-dev``).

The extension itself is assembled in memory by :mod:`sheetfns.udf.calc.extension`; this module only
writes files and runs the SDK tool.
"""
from __future__ import annotations

import os
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

from sheetfns.errors import InputError
from sheetfns.udf.calc import extension

SDK_TOOL = "unoidl-write"
_SDK_PLACES = (Path("/usr/lib/libreoffice/sdk/bin"), Path("/opt/libreoffice/sdk/bin"))


def write_extension(out_dir: Path, *, version: str, caution: str) -> Path:
    """Write ``tocsin.oxt`` into ``out_dir`` (created if missing); return its path."""
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    path = out_dir / extension.FILE_NAME
    tmp = path.with_name(f".{path.name}.tmp")
    tmp.write_bytes(extension.oxt_bytes(version, caution))
    os.replace(tmp, path)
    return path


def find_sdk_tool() -> Path | None:
    """``unoidl-write``: on the PATH or where LibreOffice's SDK puts it; None when absent."""
    found = shutil.which(SDK_TOOL)
    if found:
        return Path(found)
    for place in _SDK_PLACES:
        if (place / SDK_TOOL).exists():
            return place / SDK_TOOL
    return None


def _office_types(tool: Path) -> list[Path]:
    """LibreOffice's own type libraries (the UNO base types and the office API) for the compiler."""
    for program in (tool.resolve().parents[2] / "program", Path("/usr/lib/libreoffice/program")):
        found = [program / "types.rdb", program / "types" / "offapi.rdb"]
        if all(p.exists() for p in found):
            return found
    raise InputError(f"LibreOffice's type libraries (program/types.rdb, program/types/offapi.rdb) were "
                     f"not found next to {tool}")


def build_type_library(dest: Path, *, tool: Path | None = None) -> Path:
    """Compile the add-in's IDL (generated from the function list) into the type library ``dest``."""
    tool = tool or find_sdk_tool()
    if tool is None:
        raise InputError(f"{SDK_TOOL} (LibreOffice SDK) is not installed: on Debian or Ubuntu, "
                         "apt-get install libreoffice-dev")
    with tempfile.TemporaryDirectory(prefix="tocsin-idl-") as tmp:
        idl = Path(tmp) / "XTocsin.idl"
        idl.write_text(extension.idl_text(), encoding="utf-8")
        out = Path(tmp) / extension.TYPES
        proc = subprocess.run([str(tool), *map(str, _office_types(tool)), str(idl), str(out)],
                              capture_output=True, text=True, timeout=120)
        if proc.returncode != 0 or not out.exists():
            raise InputError(f"{SDK_TOOL} failed on the generated IDL: "
                             f"{(proc.stderr or proc.stdout).strip()}")
        Path(dest).write_bytes(out.read_bytes())
    return Path(dest)


def shipped_type_library() -> Path:
    """Where the type library ships in a source checkout."""
    return Path(extension.__file__).resolve().parent / "oxt" / extension.TYPES


def main(argv: list[str] | None = None) -> int:
    args = sys.argv[1:] if argv is None else argv
    if args != ["--types"]:
        print("usage: python -m watcher.cli.calc_addin --types   (rebuild sheetfns/udf/calc/oxt/tocsin.rdb)",
              file=sys.stderr)
        return 2
    try:
        print(build_type_library(shipped_type_library()))
    except InputError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
