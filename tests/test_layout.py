"""The house rules of the layout (DESIGN.md section 2), read from the source with ``ast``:

* imports run one way between the rooms: the writer (``watcher.xlsx``) imports nothing else of the
  project; the core (``sheetfns``) imports nothing of ``watcher``; one refresh (``watcher.refresh``)
  knows nothing of watching (``watcher.watch``) or of the command (``watcher.cli``); the watcher
  knows nothing of the command. Every import counts here, those inside functions too.
* no import circle among the project's modules (module-level imports: those run when a module is
  imported; imports inside functions and under ``if TYPE_CHECKING:`` run later or never);
* no module over 600 lines; each ``__init__.py`` only re-exports (a docstring, imports and dunder
  names such as ``__all__``; no def, no class).

These are tocsin's own rules (common practice for a layered package), not an outside source.
"""
from __future__ import annotations

import ast
from dataclasses import dataclass
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGES = ("sheetfns", "watcher")
MAX_LINES = 600


@dataclass(frozen=True)
class Import:
    source: str        # the importing module
    target: str        # the imported project module (the deepest one the statement names)
    line: int
    top_level: bool    # runs when the source module is imported


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _sources() -> dict[str, Path]:
    out = {}
    for package in PACKAGES:
        for path in sorted((ROOT / package).rglob("*.py")):
            out[_module_name(path)] = path
    return out


SOURCES = _sources()
MODULES = set(SOURCES)


def _is_package(name: str) -> bool:
    return SOURCES[name].name == "__init__.py"


def _in_project(name: str) -> bool:
    return name.split(".")[0] in PACKAGES


def _deepest_module(name: str) -> str:
    """The longest prefix of a dotted name that is a project module (``a.b.c`` for ``a.b.c.f``)."""
    parts = name.split(".")
    for k in range(len(parts), 0, -1):
        candidate = ".".join(parts[:k])
        if candidate in MODULES:
            return candidate
    return name


def _absolute(source: str, node: ast.ImportFrom) -> str:
    if not node.level:
        return node.module or ""
    base = source.split(".")
    if not _is_package(source):
        base = base[:-1]
    base = base[:len(base) - (node.level - 1)]
    return ".".join(base + ([node.module] if node.module else []))


def _type_checking(test: ast.expr) -> bool:
    return (isinstance(test, ast.Name) and test.id == "TYPE_CHECKING") or (
        isinstance(test, ast.Attribute) and test.attr == "TYPE_CHECKING")


def _imports(source: str, tree: ast.Module) -> list[Import]:
    out: list[Import] = []

    def visit(node: ast.AST, top_level: bool) -> None:
        for child in ast.iter_child_nodes(node):
            if isinstance(child, (ast.FunctionDef, ast.AsyncFunctionDef, ast.Lambda)):
                visit(child, False)
                continue
            if isinstance(child, ast.If) and _type_checking(child.test):
                for stmt in child.body:
                    visit(ast.Module(body=[stmt], type_ignores=[]), False)
                for stmt in child.orelse:
                    visit(ast.Module(body=[stmt], type_ignores=[]), top_level)
                continue
            if isinstance(child, ast.Import):
                for alias in child.names:
                    if _in_project(alias.name):
                        out.append(Import(source, _deepest_module(alias.name), child.lineno, top_level))
            elif isinstance(child, ast.ImportFrom):
                base = _absolute(source, child)
                if _in_project(base):
                    for alias in child.names:
                        sub = f"{base}.{alias.name}"
                        target = sub if sub in MODULES else _deepest_module(base)
                        out.append(Import(source, target, child.lineno, top_level))
            visit(child, top_level)

    visit(tree, True)
    return out


def _parse(name: str) -> ast.Module:
    return ast.parse(SOURCES[name].read_text(encoding="utf-8"), filename=str(SOURCES[name]))


IMPORTS = [imp for name in sorted(SOURCES) for imp in _imports(name, _parse(name))]


def _within(name: str, package: str) -> bool:
    return name == package or name.startswith(package + ".")


def _show(found: list[Import]) -> str:
    where = (f"  {SOURCES[i.source].relative_to(ROOT)}:{i.line} imports {i.target}" for i in found)
    lines = dict.fromkeys(where)
    return "\n".join(lines)


# The forbidden directions: (the importing room, the rooms it must not import, why).
RULES = [
    ("watcher.xlsx", lambda t: not _within(t, "watcher.xlsx"),
     "the lossless writer imports nothing of the project outside watcher.xlsx"),
    ("sheetfns", lambda t: _within(t, "watcher"), "the core imports nothing of watcher"),
    ("watcher.refresh", lambda t: _within(t, "watcher.watch") or _within(t, "watcher.cli"),
     "one refresh knows nothing of watching or of the command"),
    ("watcher.watch", lambda t: _within(t, "watcher.cli"), "the watcher knows nothing of the command"),
]


@pytest.mark.parametrize("room, forbidden, why", RULES, ids=[r[0] for r in RULES])
def test_imports_run_one_way(room, forbidden, why):
    bad = [i for i in IMPORTS if _within(i.source, room) and forbidden(i.target)]
    assert not bad, f"{why}:\n{_show(bad)}"


def test_the_guard_sees_the_rooms():
    # the rules above would pass vacuously if the parser found nothing: it must see real imports
    assert {"sheetfns.logistic", "sheetfns.scores", "watcher.cli"} <= MODULES
    assert any(i.source == "sheetfns.logistic" and i.target == "sheetfns._logit.rolling" for i in IMPORTS)
    assert any(not i.top_level for i in IMPORTS), "function-level imports are read too"


def _cycles(edges: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components with more than one module (or a module importing itself)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    out: list[list[str]] = []

    def connect(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in sorted(edges.get(v, ())):
            if w not in index:
                connect(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            component = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                component.append(w)
                if w == v:
                    break
            if len(component) > 1 or v in edges.get(v, ()):
                out.append(sorted(component))

    for v in sorted(edges):
        if v not in index:
            connect(v)
    return out


def _circles(imports: list[Import]) -> str:
    edges: dict[str, set[str]] = {}
    for i in imports:
        if i.target in MODULES and i.target != i.source:
            edges.setdefault(i.source, set()).add(i.target)
    shown = []
    for component in _cycles(edges):
        members = set(component)
        links = [i for i in imports if i.source in members and i.target in members]
        shown.append(" <-> ".join(component) + "\n" + _show(links))
    return "\n".join(shown)


def test_no_import_circle():
    circles = _circles([i for i in IMPORTS if i.top_level])
    assert not circles, "import circles among module-level imports:\n" + circles


def test_no_import_circle_hidden_in_a_function():
    # a circle closed by an import inside a function is still a circle (logistic.py and the refit
    # schemes once imported each other that way): the two modules cannot be read or moved apart
    circles = _circles(IMPORTS)
    assert not circles, "import circles closed by function-level imports:\n" + circles


def test_the_circle_finder_finds_a_circle():
    assert _cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]
    assert _cycles({"a": {"b"}, "b": set()}) == []


def test_no_module_over_600_lines():
    long = {str(p.relative_to(ROOT)): n for p in SOURCES.values()
            if (n := len(p.read_text(encoding="utf-8").splitlines())) > MAX_LINES}
    assert not long, f"modules over {MAX_LINES} lines: {long}"


def _import_choice(node: ast.stmt) -> bool:
    """A try/except that only chooses what to import (and re-raises what it does not expect)."""
    if not isinstance(node, ast.Try):
        return False
    stmts = [*node.body, *node.orelse, *node.finalbody, *(s for h in node.handlers for s in h.body)]
    while stmts:
        st = stmts.pop()
        if isinstance(st, ast.If):
            stmts.extend([*st.body, *st.orelse])
        elif not isinstance(st, (ast.Import, ast.ImportFrom, ast.Raise)):
            return False
    return True


def _only_reexports(tree: ast.Module) -> list[str]:
    problems = []
    for node in ast.walk(tree):
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)):
            problems.append(f"line {node.lineno}: {type(node).__name__} {node.name}")
    for i, node in enumerate(tree.body):
        if i == 0 and isinstance(node, ast.Expr) and isinstance(node.value, ast.Constant):
            continue                                                       # the docstring
        if isinstance(node, (ast.Import, ast.ImportFrom)) or _import_choice(node):
            continue
        targets = node.targets if isinstance(node, ast.Assign) else [node.target] if isinstance(
            node, ast.AnnAssign) else []
        if targets and all(isinstance(t, ast.Name) and t.id.startswith("__") and t.id.endswith("__")
                           for t in targets):
            continue                                                       # __all__, __version__
        problems.append(f"line {node.lineno}: {type(node).__name__}")
    return problems


@pytest.mark.parametrize("name", sorted(n for n in SOURCES if _is_package(n)))
def test_init_only_reexports(name):
    problems = _only_reexports(_parse(name))
    assert not problems, f"{SOURCES[name].relative_to(ROOT)} must only re-export: {problems}"


def test_the_init_check_sees_code():
    choice = "try:\n    from a import b\nexcept ImportError as e:\n    if e.name != 'a':\n        raise\n"
    assert _only_reexports(ast.parse(choice)) == []
    assert _only_reexports(ast.parse("try:\n    x = 1\nexcept ImportError:\n    pass\n")) == ["line 1: Try"]
    assert _only_reexports(ast.parse('"""doc"""\nfrom a import b\n__all__ = ["b"]\n')) == []
    assert _only_reexports(ast.parse("def f():\n    pass\n")) == ["line 1: FunctionDef f",
                                                                  "line 1: FunctionDef"]
