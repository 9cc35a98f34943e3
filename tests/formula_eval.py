"""A tiny evaluator for the formulas of tocsin's demo workbook, for the parity tests.

It understands exactly the formulas the demo uses: ``=NAME(arg, arg, ...)`` where NAME is one of
tocsin's spreadsheet functions and each argument is a cell or range reference (``B2``, ``$B$2:$B$99``,
``Passengers!D2:D99``, ``'Ferry data'!A2:A9``), a number, a quoted text (``">=1150"``, with ``""`` for
a quote), TRUE / FALSE, or left empty (an omitted optional argument). Anything else is a
``FormulaSyntaxError`` naming the formula and the position.

Evaluation calls the Python function the way the add-in would: every range as a list of rows (None
for a blank cell), every literal as its value, and an omitted argument (left empty, or left out at
the end) as the default of the Python signature, which is what xlwings passes for a missing optional
argument. A referenced cell that lies in the spill range of another formula takes
that formula's (recursively evaluated) result, so chains such as EVENT_NAIVE(EVENT_FLAG's column)
work without a spreadsheet program.
"""
from __future__ import annotations

import inspect
import re
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

from openpyxl.utils.cell import range_boundaries


class FormulaSyntaxError(ValueError):
    """A formula the tiny parser does not understand."""


@dataclass(frozen=True)
class Ref:
    """A rectangular range: sheet (None = the formula's own sheet), 1-based inclusive bounds."""

    sheet: str | None
    min_row: int
    min_col: int
    max_row: int
    max_col: int


@dataclass(frozen=True)
class Call:
    name: str
    args: tuple[Any, ...]   # Ref, float, str, bool, or OMITTED


OMITTED = object()

_TOKEN = re.compile(r"""
    \s*(?:
      (?P<string>"(?:[^"]|"")*")
    | (?P<ref>(?:(?:'(?:[^']|'')+'|[A-Za-z_][\w.]*)!)?\$?[A-Za-z]{1,3}\$?\d+(?::\$?[A-Za-z]{1,3}\$?\d+)?)
    | (?P<number>[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)
    | (?P<bool>TRUE|FALSE)(?![\w(])
    | (?P<comma>,)
    | (?P<close>\))
    )""", re.VERBOSE | re.IGNORECASE)
_HEAD = re.compile(r"\s*=\s*(?P<name>[A-Za-z_][\w.]*)\s*\(")


def _ref(text: str) -> Ref:
    sheet = None
    if "!" in text:
        sheet, text = text.rsplit("!", 1)
        if sheet.startswith("'"):
            sheet = sheet[1:-1].replace("''", "'")
    text = text.replace("$", "")
    if ":" not in text:
        text = f"{text}:{text}"
    min_col, min_row, max_col, max_row = range_boundaries(text)
    return Ref(sheet, min_row, min_col, max_row, max_col)


def parse(formula: str) -> Call:
    """Parse ``=NAME(arg, ...)``; see the module docstring for the arguments understood."""
    head = _HEAD.match(formula)
    if not head:
        raise FormulaSyntaxError(f"{formula!r}: expected '=NAME(' at the start")
    pos = head.end()
    args: list[Any] = []
    current: Any = OMITTED
    while True:
        m = _TOKEN.match(formula, pos)
        if not m:
            raise FormulaSyntaxError(f"{formula!r}: cannot read the argument at position {pos + 1}")
        pos = m.end()
        kind = m.lastgroup
        if kind in ("comma", "close"):
            args.append(current)
            current = OMITTED
            if kind == "close":
                break
            continue
        if current is not OMITTED:
            raise FormulaSyntaxError(f"{formula!r}: expected ',' or ')' before position {m.start() + 1}")
        value = m.group(kind)
        if kind == "string":
            current = value[1:-1].replace('""', '"')
        elif kind == "number":
            current = float(value)
        elif kind == "bool":
            current = value.upper() == "TRUE"
        else:
            current = _ref(value)
    if formula[pos:].strip():
        raise FormulaSyntaxError(f"{formula!r}: unexpected text after ')' at position {pos + 1}")
    if args == [OMITTED]:
        args = []
    return Call(head.group("name").upper(), tuple(args))


class Evaluator:
    """Evaluate the formulas of a workbook loaded by openpyxl (``data_only=False``).

    ``functions`` maps a formula name to the Python function. Results are memoised per anchor cell.
    """

    def __init__(self, workbook: Any, functions: Mapping[str, Callable[..., Any]]):
        self.wb = workbook
        self.functions = functions
        self.anchors: dict[tuple[str, int, int], tuple[str, Ref]] = {}
        for ws in workbook.worksheets:
            for row in ws.iter_rows():
                for c in row:
                    text, ref = _formula_of(c)
                    if text is not None:
                        self.anchors[(ws.title, c.row, c.column)] = (text, ref)
        self.owner: dict[tuple[str, int, int], tuple[str, int, int]] = {}   # spilled cell -> anchor
        for key, (_, spill) in self.anchors.items():
            for r in range(spill.min_row, spill.max_row + 1):
                for c in range(spill.min_col, spill.max_col + 1):
                    self.owner[(key[0], r, c)] = key
        self.results: dict[tuple[str, int, int], Any] = {}
        self._busy: set[tuple[str, int, int]] = set()

    def formulas(self) -> list[tuple[str, str, str]]:
        """Every formula as (sheet, anchor cell, formula text), in sheet and row order."""
        from openpyxl.utils import get_column_letter

        return [(s, f"{get_column_letter(c)}{r}", text) for (s, r, c), (text, _) in self.anchors.items()]

    def evaluate(self, sheet: str, row: int, col: int) -> Any:
        key = (sheet, row, col)
        if key in self.results:
            return self.results[key]
        if key in self._busy:
            raise FormulaSyntaxError(f"circular reference at {sheet}!R{row}C{col}")
        self._busy.add(key)
        text, _ = self.anchors[key]
        call = parse(text)
        fn = self.functions[call.name]
        params = list(inspect.signature(fn).parameters.values())
        if len(call.args) > len(params):
            raise FormulaSyntaxError(f"{text!r}: {call.name} takes {len(params)} arguments")
        values = []
        for i, p in enumerate(params):
            a = call.args[i] if i < len(call.args) else OMITTED
            if a is OMITTED:
                if p.default is inspect.Parameter.empty:
                    raise FormulaSyntaxError(f"{text!r}: argument {p.name!r} is required")
                values.append(p.default)
            else:
                values.append(self._value(a, sheet) if isinstance(a, Ref) else a)
        self.results[key] = fn(*values)
        self._busy.discard(key)
        return self.results[key]

    def _value(self, ref: Ref, own_sheet: str) -> list[list[Any]]:
        sheet = ref.sheet or own_sheet
        ws = self.wb[sheet]
        rows = []
        for r in range(ref.min_row, ref.max_row + 1):
            rows.append([self.cell(sheet, r, c, ws) for c in range(ref.min_col, ref.max_col + 1)])
        return rows

    def cell(self, sheet: str, row: int, col: int, ws: Any = None) -> Any:
        """The value of one cell: a data cell's value, or the spilled value of a formula."""
        anchor = self.owner.get((sheet, row, col))
        if anchor is not None:
            out = self.evaluate(*anchor)
            i, j = row - anchor[1], col - anchor[2]
            if isinstance(out, list):
                return out[i][j] if i < len(out) and j < len(out[i]) else None
            return out if (i, j) == (0, 0) else None
        ws = ws if ws is not None else self.wb[sheet]
        return ws.cell(row=row, column=col).value


def _formula_of(cell: Any) -> tuple[str | None, Ref]:
    """The formula text of a cell and the range it fills (its spill range, or the cell itself)."""
    v = cell.value
    one = Ref(None, cell.row, cell.column, cell.row, cell.column)
    text = getattr(v, "text", None)       # openpyxl ArrayFormula (dynamic or legacy array)
    if text is not None:
        ref = _ref(v.ref) if getattr(v, "ref", None) else one
        return text, ref
    if isinstance(v, str) and v.startswith("="):
        return v, one
    return None, one


__all__ = ["Call", "Evaluator", "FormulaSyntaxError", "OMITTED", "Ref", "parse"]
