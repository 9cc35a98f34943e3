"""The workbook writer's room (``watcher/xlsx``) stands alone: it imports nothing of ``sheetfns`` nor of the
rest of ``watcher`` (DESIGN.md §2), and its errors are its own ValueErrors."""
from __future__ import annotations

import ast
from pathlib import Path

import watcher.xlsx

ROOM = Path(watcher.xlsx.__file__).parent


def _imports(path: Path) -> set[str]:
    out = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            out.update(a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            out.add(node.module)
    return out


def test_the_room_imports_only_itself_of_the_project():
    bad = {}
    for path in sorted(ROOM.glob("*.py")):
        wrong = sorted(m for m in _imports(path) if m.split(".")[0] in ("sheetfns", "watcher")
                       and not (m == "watcher.xlsx" or m.startswith("watcher.xlsx.")))
        if wrong:
            bad[path.name] = wrong
    assert bad == {}


def test_every_error_is_an_xlsx_error_and_a_value_error():
    from watcher.xlsx import errors

    for name in errors.__all__:
        cls = getattr(errors, name)
        assert issubclass(cls, errors.XlsxError) and issubclass(cls, ValueError), name
