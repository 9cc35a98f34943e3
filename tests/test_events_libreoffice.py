"""Event rules on the boundary, decided as the analyst's own spreadsheet decides them (DESIGN.md §5).

The same cells and the same rules are written as spreadsheet formulas into an .xlsx, recalculated by
LibreOffice Calc headless (its own profile, ``tests/libreoffice.py``) and read back as CSV; every
case must agree with ``sheetfns.events.flag``. The rules as formulas (common practice, the way an
analyst writes them): a comparison ``>=c`` is ``=B2>=c``; ``rise>c`` is ``=B2-A2>c``; ``fall>c`` is
``=A2-B2>c``; ``rise%>c`` is ``=(B2-A2)/ABS(A2)*100>c``; ``fall%>c`` is ``=(B2-A2)/ABS(A2)*100<-c``,
where A holds the previous value and B the value. The cases are numbers whose decimal change is
exactly on the threshold but not in binary (4.0 -> 3.8 is a fall of 5.000000000000004 % in binary), and
numbers a few units of the last place away.
"""
from __future__ import annotations

import math

import numpy as np
import openpyxl
from libreoffice import sheets_as_csv

from sheetfns.events import flag

# (previous value, value, criterion) -- the previous value is None for a comparison
CASES = [
    (None, 0.1 + 0.2, "=0.3"), (None, 0.1 + 0.2, "<>0.3"), (None, 0.1 + 0.2, ">0.3"),
    (None, 0.1 + 0.2, "<0.3"), (None, 0.1 + 0.2, ">=0.3"), (None, 0.1 + 0.2, "<=0.3"),
    (None, 1.1 * 3, "=3.3"), (None, 1.1 * 3, ">3.3"), (None, 0.7 + 0.1, "<0.8"),
    (None, 1150 * 1.1, ">=1265"), (None, 3.3000000000000003, "<=3.3"),
    (None, 0.3 + 1e-14, "=0.3"), (None, 0.3 + 1e-14, ">0.3"), (None, 1e-20, ">0"), (None, -1e-20, "<0"),
    (None, 0.0, "=0"), (None, 2.675, ">=2.675"), (None, 1e15 + 0.3, ">1000000000000000.2"),
    (4.0, 3.8, "fall%>5"), (4.0, 3.8, "fall%>=5"), (100.0, 95.0, "fall%>5"), (0.5, 0.6, "rise%>=20"),
    (0.5, 0.6, "rise%>20"), (1.1, 1.21, "rise%>=10"), (1.1, 1.21, "rise%>10"), (0.7, 0.77, "rise%>10"),
    (5.3, 3.3, "fall>2"), (5.3, 3.3, "fall>=2"), (1.2, 1.5, "rise>=0.3"), (1.2, 1.5, "rise>0.3"),
    (0.3, 0.1 + 0.2, "rise"), (0.3, 0.1 + 0.2, "fall"), (0.1 + 0.2, 0.3, "rise"), (0.3, 0.3 + 1e-14, "rise"),
    (3.0, 2.85, "fall%>=5"), (3.0, 2.85, "fall%>5"), (2.2, 2.31, "rise%>=5"), (-4.0, -3.8, "rise%>=5"),
    (-4.0, -3.8, "rise%>5"), (0.35, 0.385, "rise%>=10"), (19.99, 17.991, "fall%>=10"),
]


def formula(prev: float | None, crit: str, row: int) -> str:
    a, b = f"A{row}", f"B{row}"
    low = crit.casefold()
    if low.startswith(("rise", "fall")):
        rest = low[4:]
        percent = rest.startswith("%")
        rest = rest.lstrip("%") or ">0"
        op = ">=" if rest.startswith(">=") else ">"
        c = rest[len(op):]
        if percent:
            change = f"({b}-{a})/ABS({a})*100"
            return f"={change}{op}{c}" if low.startswith("rise") else f"={change}{op.replace('>', '<')}-{c}"
        return f"={b}-{a}{op}{c}" if low.startswith("rise") else f"={a}-{b}{op}{c}"
    for op in (">=", "<=", "<>", ">", "<", "="):
        if crit.startswith(op):
            return f"={b}{op}{crit[len(op):]}"
    raise AssertionError(crit)


def ours(prev: float | None, value: float, crit: str) -> bool:
    out = flag([value] if prev is None else [prev, value], crit)[-1]
    assert not math.isnan(out)
    return bool(out)


def test_boundary_cases_agree_with_libreoffice(tmp_path):
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "cases"
    for i, (prev, value, crit) in enumerate(CASES, start=1):
        if prev is not None:
            ws.cell(i, 1, prev)
        ws.cell(i, 2, value)
        ws.cell(i, 3, formula(prev, crit, i))
        ws.cell(i, 4, crit)
    path = tmp_path / "boundary.xlsx"
    wb.save(path)
    rows = sheets_as_csv(path, tmp_path / "out", recalc=True)["cases"]
    theirs = [r[2] for r in rows]
    assert len(theirs) == len(CASES) and set(theirs) <= {"TRUE", "FALSE"}, theirs
    mine = ["TRUE" if ours(p, v, c) else "FALSE" for p, v, c in CASES]
    diff = [(CASES[i], formula(CASES[i][0], CASES[i][2], i + 1), theirs[i], mine[i])
            for i in range(len(CASES)) if theirs[i] != mine[i]]
    assert not diff, diff
    # the cases are boundary cases: binary arithmetic alone would decide many of them the other way
    exact = [bool(np.asarray(eval_exact(p, v, c))) for p, v, c in CASES]
    assert sum(e != (m == "TRUE") for e, m in zip(exact, mine, strict=True)) >= 10


def eval_exact(prev: float | None, value: float, crit: str) -> bool:
    """The rule in plain binary floating point (no spreadsheet precision), for contrast."""
    low = crit.casefold()
    if low.startswith(("rise", "fall")):
        rest = low[4:]
        percent = rest.startswith("%")
        rest = rest.lstrip("%") or ">0"
        op = ">=" if rest.startswith(">=") else ">"
        c = float(rest[len(op):])
        ch = (value - prev) / abs(prev) * 100 if percent else value - prev
        ch = ch if low.startswith("rise") else -ch
        return ch >= c if op == ">=" else ch > c
    for op in (">=", "<=", "<>", ">", "<", "="):
        if crit.startswith(op):
            c = float(crit[len(op):])
            return {">=": value >= c, "<=": value <= c, "<>": value != c, ">": value > c, "<": value < c,
                    "=": value == c}[op]
    raise AssertionError(crit)
