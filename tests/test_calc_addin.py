"""tocsin's spreadsheet functions as a LibreOffice Calc add-in (sheetfns/udf/calc), proven in Calc itself.

Without LibreOffice: the Calc face lists every function of the xlwings face with the same arguments
(one function list drives both), maps Calc's arguments and results as documented, and the extension
package holds what LibreOffice needs.

With LibreOffice (marked ``libreoffice``; skipped only where it is absent and CI is unset): the add-in
is built from this checkout, installed into a throwaway LibreOffice state (tests/calc_headless.py),
and one soffice session

* recalculates every formula of the committed ``formulas_demo.ods`` and reads the values back; they
  equal the Python functions' values on the same data (the generator's plan) and the watcher's
  forecast sheet of the same job to 1e-12;
* builds a second workbook with blanks, TRUE/FALSE cells, dates, text, an error cell and options
  taken from blank cells, recalculates it, and every result equals what the plain functions give for
  the same cells passed the way Excel passes them (None for a blank, True/False, dates);
* lists the functions as Calc describes them (names, argument names, help).

The type library shipped in the package is regenerated from the function list with the SDK's
``unoidl-write`` and must describe the same interface.
"""
from __future__ import annotations

import datetime as dt
import importlib.util
import inspect
import io
import json
import math
import os
import re
import shutil
import subprocess
import sys
import zipfile
from pathlib import Path

import calc_headless  # tests/calc_headless.py
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetfns.udf import excel
from sheetfns.udf import functions as F
from sheetfns.udf.calc import extension, face
from sheetfns.udf.registry import FUNCTIONS
from watcher.xlsx.spec import col_letter

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "sample_workbooks"
DEMO_ODS = SAMPLES / "formulas_demo.ods"
TOL = 1e-12


def _close(ours, theirs) -> bool:
    """``theirs`` as Calc shows it ('' for a blank) against ``ours`` as the plain functions give it."""
    if ours is None or (isinstance(ours, float) and math.isnan(ours)):
        return theirs == ""
    if isinstance(ours, str) or isinstance(theirs, str):
        return ours == theirs
    return abs(float(ours) - float(theirs)) <= TOL * max(1.0, abs(float(ours)))


# ------------------------------------------------------------------------- one list, every face
def test_the_calc_face_offers_every_function_of_the_xlwings_face():
    assert set(FUNCTIONS) == set(excel.__all__) == set(F.__all__)
    table = extension.functions_table()
    assert [f["name"] for f in table["functions"]] == list(FUNCTIONS)
    methods = re.findall(r"sequence< sequence< any > > (\w+)\((.*)\);", extension.idl_text())
    assert [m for m, _ in methods] == list(FUNCTIONS), "the IDL leaves a function out"
    for (name, params), row in zip(methods, table["functions"], strict=True):
        face_params = inspect.signature(getattr(excel, name)).parameters
        assert [a["name"] for a in row["args"]] == list(face_params), name
        assert [a["optional"] for a in row["args"]] == [
            p.default is not inspect.Parameter.empty for p in face_params.values()], name
        idl = [p.split()[-1] for p in params.split(", ")]
        assert idl == [extension.idl_name(a["name"]) for a in row["args"]], name
        # only `any` is optional in a Calc add-in (sc/source/core/tool/addincol.cxx)
        for p, a in zip(params.split(", "), FUNCTIONS[name].args, strict=True):
            assert p.startswith("[in] any ") == (a.optional or not a.is_range), (name, p)
        assert row["help"] == excel.__dict__[name].__doc__


def test_help_is_one_line_and_fits_the_wizards():
    for spec in FUNCTIONS.values():
        assert "\n" not in spec.help and len(spec.help) <= 255
        assert f"Example: ={spec.name}(" in spec.help
        for a in spec.args:
            assert a.help.startswith("Optional") == a.optional, (spec.name, a.name)


# ------------------------------------------------------------------------- the Calc face, unit level
def test_calc_arguments_become_what_the_plain_functions_expect():
    naive = FUNCTIONS["EVENT_NAIVE"]
    horizon, season = naive.arg("horizon"), naive.arg("season")
    assert face.argument(horizon, None) == 1        # left out
    assert face.argument(horizon, 0.0) == 1         # a blank cell arrives as 0: omitted
    assert face.argument(season, 7.0) == 7.0
    lags = FUNCTIONS["EVENT_LOGIT"].arg("lags")
    assert face.argument(lags, 0.0) == 0.0          # 0 lags is a choice, not a blank
    assert face.argument(lags, None) == 1
    crit = FUNCTIONS["EVENT_FLAG"].arg("criterion")
    assert face.argument(crit, 0.0) == 0.0          # a required value: "=0"


def test_calc_results_are_rows_with_empty_text_for_blanks():
    assert face.result([[1.0], [None], [float("nan")], [np.int64(3)], [True]]) == \
        ((1.0,), ("",), ("",), (3.0,), (1.0,))
    assert face.result(0.2) == ((0.2,),)
    assert face.result("#tocsin: `x` must be a number") == (("#tocsin: `x` must be a number",),)
    assert face.result([["measure", "value"], ["n", 4]]) == (("measure", "value"), ("n", 4.0))


def test_calc_ranges_give_the_values_excel_ranges_give():
    # Calc hands a range over as rows of numbers and texts, '' for an empty cell, TRUE as 1.0 and a
    # date as its serial number; Excel (xlwings) as None, True and datetime. Same answers.
    base = dt.date(2024, 1, 1)
    days = [base + dt.timedelta(days=i) for i in range(60)]
    serial = [float((d - dt.date(1899, 12, 30)).days) for d in days]
    ev = [None if i % 11 == 5 else (i * 7 % 3 == 0) for i in range(60)]
    excel_rows = [[v] for v in ev]
    calc_rows = tuple(("" if v is None else float(v),) for v in ev)
    assert face.call("EVENT_SHARE", (calc_rows, None, 0.0, None)) == \
        face.result(F.EVENT_SHARE(excel_rows))
    assert face.call("EVENT_RATE_TABLE", (tuple((s,) for s in serial), calc_rows, "weekday")) == \
        face.result(F.EVENT_RATE_TABLE([[d] for d in days], excel_rows, "weekday"))


def test_calc_face_messages():
    assert face.call("EVENT_NOPE", ())[0][0].startswith("#tocsin: EVENT_NOPE is not a function")
    assert "takes 2 arguments" in face.call("EVENT_CUTOFF", (1.0,))[0][0]
    assert face.call("EVENT_CUTOFF", (1.0, None)) == \
        (("#tocsin: `cost_miss` is required: the cost of one miss, a number; got a blank",),)


# What Calc can pass: None (left out), a number (always a float), a text, or a range (rows of floats
# and texts, '' for an empty cell).
_calc_cell = st.one_of(st.floats(allow_nan=False), st.sampled_from(["", "n/a", ">=1", "rise", "month",
                                                                   "1150", "TRUE"]))
_calc_value = st.one_of(st.none(), _calc_cell,
                        st.integers(1, 40).flatmap(lambda n: st.lists(
                            st.lists(_calc_cell, min_size=1, max_size=2).map(tuple), min_size=n,
                            max_size=n).map(tuple)))


@pytest.mark.parametrize("name", list(FUNCTIONS))
@settings(max_examples=40, deadline=None)
@given(args=st.lists(_calc_value, min_size=8, max_size=8))
def test_any_calc_arguments_give_rectangular_cells_or_a_message(name, args):
    out = face.call(name, tuple(args[:len(FUNCTIONS[name].args)]))
    assert isinstance(out, tuple) and out and all(isinstance(r, tuple) for r in out)
    assert len({len(r) for r in out}) == 1, "Calc needs a rectangular result"
    assert all(type(v) in (float, str) for r in out for v in r), out
    if len(out) == 1 and isinstance(out[0][0], str) and out[0][0].startswith("#tocsin"):
        assert "unexpected error" not in out[0][0], out


# ------------------------------------------------------------------------- the extension package
def test_extension_package_holds_what_libreoffice_needs(tmp_path):
    from watcher.cli.command import CAUTION, VERSION, main

    assert main(["calc-addin", "--out", str(tmp_path)]) == 0
    data = (tmp_path / "tocsin.oxt").read_bytes()
    assert data == extension.oxt_bytes(VERSION, CAUTION)          # deterministic
    z = zipfile.ZipFile(io.BytesIO(data))
    assert set(z.namelist()) == {"META-INF/manifest.xml", "description.xml", "description-en.txt",
                                 "tocsin.components", "tocsin_addin.py", "tocsin_functions.json",
                                 "tocsin.rdb"}
    manifest = z.read("META-INF/manifest.xml").decode()
    assert 'full-path="tocsin.rdb" manifest:media-type="application/vnd.sun.star.uno-typelibrary;type=RDB"' \
        in manifest
    assert 'full-path="tocsin.components" manifest:media-type="application/vnd.sun.star.uno-components"' \
        in manifest
    components = z.read("tocsin.components").decode()
    assert 'loader="com.sun.star.loader.Python" uri="tocsin_addin.py"' in components
    assert '<service name="com.sun.star.sheet.AddIn"/>' in components and '<service name="tocsin"/>' \
        in components
    assert f'<version value="{VERSION}"/>' in z.read("description.xml").decode()
    assert CAUTION in z.read("description-en.txt").decode()
    assert json.loads(z.read("tocsin_functions.json")) == extension.functions_table()
    assert z.read("tocsin.rdb") == extension.shipped("tocsin.rdb")
    source = z.read("tocsin_addin.py").decode()
    compile(source, "tocsin_addin.py", "exec")
    assert "TOCSIN_PYTHONPATH" in source and "g_ImplementationHelper" in source


@pytest.mark.libreoffice
def test_shipped_type_library_is_the_compiled_function_list(tmp_path):
    from watcher.cli import calc_addin

    tool = calc_addin.find_sdk_tool()
    if tool is None:
        if os.environ.get("CI"):
            pytest.fail("unoidl-write (libreoffice-dev) is required under CI but was not found")
        pytest.skip("unoidl-write (LibreOffice SDK, Debian libreoffice-dev) not installed")
    built = calc_addin.build_type_library(tmp_path / "tocsin.rdb", tool=tool)
    shipped = calc_addin.shipped_type_library()
    if built.read_bytes() != shipped.read_bytes():
        reader = tool.with_name("unoidl-read")
        show = [subprocess.run([str(reader), str(p)], capture_output=True, text=True).stdout
                for p in (built, shipped)]
        assert show[0] == show[1], ("sheetfns/udf/calc/oxt/tocsin.rdb is stale: run "
                                    "python -m watcher.cli.calc_addin --types")


# ------------------------------------------------------------------------- in LibreOffice
def _generator():
    spec = importlib.util.spec_from_file_location("make_formulas_demo", SAMPLES / "make_formulas_demo.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module
    spec.loader.exec_module(module)
    return module


# The second workbook: invented data (seeded) with every kind of cell Calc can hand over.
N = 120
_rng = np.random.default_rng(2024)
DAYS = [dt.date(2023, 3, 1) + dt.timedelta(days=i) for i in range(N)]
VALUES: list = [float(v) for v in np.round(5 + 2 * _rng.standard_normal(N), 2)]
VALUES[3], VALUES[10], VALUES[11], VALUES[40] = None, "n/a", True, None     # blank, text, TRUE, blank
EVENTS: list = [float(v) for v in (_rng.random(N) < 0.35)]
EVENTS[7], EVENTS[20], EVENTS[21] = None, True, False                        # blank, TRUE, FALSE
EVENTS[-4:] = [None] * 4                                                     # future periods
OPTIONS = {"H1": None, "H2": 7.0, "H3": "weekday", "H4": 1.0, "H5": 4.0}
OMIT = object()

# (anchor, function, args): "A1:A120"-style ranges, "H1"-style cells, literals, OMIT; a range may
# point at an earlier formula's column (chained as in a worksheet)
BUILT = [
    ("C1", "EVENT_FLAG", ("A1:A120", ">=5")),
    ("D1", "EVENT_FLAG", ("A1:A120", "rise", "H1")),            # blank min_run: omitted
    ("E1", "EVENT_NAIVE", ("B1:B120", "H1", "H2")),              # blank horizon, season from a cell
    ("F1", "EVENT_MAJORITY", ("B1:B120", OMIT, "H1")),           # left out and blank
    ("G1", "EVENT_SHARE", ("B1:B120", 10)),
    ("J1", "EVENT_LOGIT", ("B1:B120", OMIT, 80, 1, 1, OMIT, 2, "K1:K120")),
    ("L1", "EVENT_LOGIT", ("B1:B120", OMIT, 80, "H1", "H1")),  # blank lags: 0 in Calc (see below)
    ("N1", "EVENT_SCORES", ("B1:B116", "E1:E116", "G1:G116", "G1:G116")),
    ("Q1", "EVENT_CONFUSION", ("B1:B116", "F1:F116")),
    ("Q5", "EVENT_BRIER", ("B1:B116", "J1:J116")),
    ("Q12", "EVENT_COMPARE", ("B1:B116", "E1:E116", "F1:F116")),
    ("Q16", "EVENT_CUTOFF", ("H4", "H5")),
    ("U1", "EVENT_RATE_TABLE", ("K1:K120", "B1:B120", "H3")),
    ("AB1", "EVENT_LOGIT_COEFS", ("B1:B120", "G1:G120", 80, OMIT, OMIT, 7)),
    ("AH1", "EVENT_FLAG", ("A1:A120", "rise>=x")),               # a message, in every cell
]
ERROR_INPUT = ("AJ1", "EVENT_NAIVE", ("AI1:AI10",))              # AI5 holds =1/0


def _col(letters: str) -> int:
    n = 0
    for ch in letters:
        n = n * 26 + ord(ch) - 64
    return n - 1


def _cell(addr: str) -> tuple[int, int]:
    m = re.fullmatch(r"([A-Z]+)(\d+)", addr)
    return int(m.group(2)) - 1, _col(m.group(1))




class Model:
    """The second workbook as Python sees it: cells by (row, col), formulas evaluated in order."""

    def __init__(self):
        self.cells: dict[tuple[int, int], object] = {}
        for i in range(N):
            self.cells[(i, 0)], self.cells[(i, 1)], self.cells[(i, 10)] = VALUES[i], EVENTS[i], DAYS[i]
        for addr, v in OPTIONS.items():
            self.cells[_cell(addr)] = v
        self.results: dict[str, object] = {}

    def rows(self, ref: str) -> list[list]:
        a, b = ref.split(":")
        (r1, c1), (r2, c2) = _cell(a), _cell(b)
        return [[self.cells.get((r, c)) for c in range(c1, c2 + 1)] for r in range(r1, r2 + 1)]

    def evaluate(self, anchor: str, name: str, args: tuple) -> object:
        spec = FUNCTIONS[name]
        call = []
        for a, arg in zip(args, spec.args, strict=False):
            if a is OMIT:
                call.append(arg.default)
            elif isinstance(a, str) and ":" in a:
                call.append(self.rows(a))
            elif isinstance(a, str) and re.fullmatch(r"[A-Z]+\d+", a):
                call.append(self.cells.get(_cell(a)))                  # Excel: None for a blank
            else:
                call.append(a)
        if anchor == "L1":
            call[4] = 0.0     # Calc passes a blank cell as 0, and 0 lags is a choice: no lag terms
        out = getattr(F, name)(*call)
        r0, c0 = _cell(anchor)
        for i, row in enumerate(out if isinstance(out, list) else [[out]]):
            for j, v in enumerate(row):
                self.cells[(r0 + i, c0 + j)] = v
        self.results[anchor] = out
        return out


def _lo_value(v):
    if isinstance(v, bool):
        return {"bool": v}
    if isinstance(v, dt.date):
        return {"date": v.isoformat()}
    return v


def _formula(name: str, args: tuple) -> str:
    parts = []
    for a in args:
        if a is OMIT:
            parts.append("")
        elif isinstance(a, str) and (":" in a or re.fullmatch(r"[A-Z]+\d+", a)):
            parts.append(a)
        elif isinstance(a, str):
            parts.append('"' + a + '"')
        else:
            parts.append(repr(a))
    return f"={name}({';'.join(parts)})"


def _built_workbook(model: Model) -> dict:
    cells = [[f"{col_letter(c)}{r + 1}", _lo_value(v)] for (r, c), v in model.cells.items() if v is not None]
    arrays = []
    for anchor, name, args in BUILT:
        out = model.evaluate(anchor, name, args)
        rows = out if isinstance(out, list) else [[out]] * (N if isinstance(out, str) else 1)
        r0, c0 = _cell(anchor)
        extra = 1 if anchor == "C1" else 0                 # one row more than the data: #N/A
        arrays.append([f"{anchor}:{col_letter(c0 + len(rows[0]) - 1)}{r0 + len(rows) + extra}",
                       _formula(name, args)])
    cells += [[f"AI{i}", float(i)] for i in range(1, 11) if i != 5]
    anchor, name, args = ERROR_INPUT
    arrays.append([f"{anchor}:AJ10", _formula(name, args)])
    return {"Data": {"cells": cells, "formulas": [["AI5", "=1/0"]], "arrays": arrays}}


@pytest.fixture(scope="module")
def office():
    """The add-in built from this checkout, installed once for the module into a throwaway state."""
    try:
        state = calc_headless.Calc()
    except calc_headless.CalcUnavailable as exc:
        if os.environ.get("CI"):
            pytest.fail(f"LibreOffice with python3-uno is required under CI: {exc}")
        pytest.skip(f"LibreOffice Calc add-in tests: {exc}")
    yield state
    state.close()


@pytest.fixture(scope="module")
def calc(office):
    """One soffice session: the demo, the built workbook, Calc's function list."""
    model = Model()
    out = office.run([
        {"kind": "open", "path": str(DEMO_ODS), "recalc": True, "read": True},
        {"kind": "build", "sheets": _built_workbook(model), "recalc": True, "read": True},
        {"kind": "functions", "names": list(FUNCTIONS)},
    ])
    demo, built, described = out["results"]
    return {"demo": demo, "built": built, "model": model, "functions": described["functions"]}


@pytest.mark.libreoffice
def test_without_tocsin_on_its_path_every_recalculated_cell_says_what_to_set(office, tmp_path):
    # A second session whose TOCSIN_PYTHONPATH names an empty folder: LibreOffice's Python cannot
    # import tocsin. Recalculating the committed demo (whose cells hold saved values) must call the
    # add-in again, and every formula cell then says why it cannot compute and what to set.
    out = office.run([{"kind": "open", "path": str(DEMO_ODS), "recalc": True, "read": True}],
                     pythonpath=str(tmp_path))
    sheets = out["results"][0]["sheets"]
    expected = (f"#tocsin: LibreOffice's Python {sys.version_info[0]}.{sys.version_info[1]} cannot import "
                "tocsin (ModuleNotFoundError: No module named 'sheetfns'); set TOCSIN_PYTHONPATH to the "
                "site-packages folder of a Python")
    checked = 0
    for sheet in sheets.values():
        for a in sheet["arrays"]:
            for i in range(a["rows"]):
                for j in range(a["cols"]):
                    assert sheet["values"][a["row"] + i][a["col"] + j].startswith(expected), a["formula"]
                    checked += 1
    assert checked > 30_000


@pytest.mark.libreoffice
def test_calc_lists_every_function_with_its_arguments_and_help(calc):
    described = calc["functions"]
    assert set(described) == set(FUNCTIONS), f"not offered in Calc: {set(FUNCTIONS) - set(described)}"
    for name, spec in FUNCTIONS.items():
        d = described[name]
        assert d["description"] == spec.help
        assert [a[0] for a in d["args"]] == [a.name for a in spec.args]
        assert [a[1] for a in d["args"]] == [a.help for a in spec.args]


@pytest.mark.libreoffice
def test_every_demo_formula_recalculated_in_calc_equals_the_python_functions(calc):
    plan = _generator().plan()
    sheets = calc["demo"]["sheets"]
    arrays = {(s, a["row"], a["col"]): a for s, sheet in sheets.items() for a in sheet["arrays"]}
    assert len(arrays) == len(plan.grid.formulas) and not any(s["formulas"] for s in sheets.values())
    for f in plan.grid.formulas:
        a = arrays[(f.sheet, f.row, f.col)]
        assert a["formula"].startswith(f"=TOCSIN.{f.name}("), a
        rows = f.result if isinstance(f.result, list) else [[f.result]]
        assert (a["rows"], a["cols"]) == (len(rows), len(rows[0])), f"{f.sheet} {a['range']}: not sized"
        shown = sheets[f.sheet]["values"]
        for i, row in enumerate(rows):
            for j, v in enumerate(row):
                got = shown[f.row + i][f.col + j]
                assert _close(v, got), f"{f.sheet} {a['formula']} row {i + 1} col {j + 1}: {v!r} vs {got!r}"
    assert not any(s["errors"] for s in sheets.values())
    # the data are the ferry sample's
    data = plan.data_rows[1:]
    got = sheets["Passengers"]["values"]
    assert [r[1] for r in got[1:len(data) + 1]] == ["" if r[1] is None else float(r[1]) for r in data]


@pytest.mark.libreoffice
def test_demo_forecast_columns_in_calc_equal_the_watchers_sheet(calc, tmp_path):
    from openpyxl import load_workbook

    from watcher.refresh.workbook import refresh_workbook

    book = tmp_path / "island_ferry.xlsx"
    shutil.copyfile(SAMPLES / "island_ferry.xlsx", book)
    assert refresh_workbook(book, force=True).ok
    sheet = load_workbook(book, data_only=True)["second sailing forecast"]
    header = [c.value for c in sheet[1]]
    ours = calc["demo"]["sheets"]["Passengers"]["values"]
    labels = ours[0]
    compared = 0
    for j, label in enumerate(header[header.index("date"):], start=header.index("date") + 1):
        # the residual is arithmetic (actual - probability), not a tocsin function: tests/test_refresh.py
        if label in ("date", "Passengers", "period") or label.startswith("residual ("):
            continue
        k = labels.index(label)
        theirs = [sheet.cell(row=r, column=j).value for r in range(2, 2931)]
        for i, t in enumerate(theirs):
            got = ours[i + 1][k]
            assert _close(t, got), f"{label} row {i + 2}: watcher {t!r}, Calc {got!r}"
        compared += 1
    assert compared == 13   # event, 6 benchmarks; chain, logistic, value model: 0/1 and probability


@pytest.mark.libreoffice
def test_built_workbook_recalculated_in_calc_equals_the_functions_called_as_excel_calls_them(calc):
    model, sheet = calc["model"], calc["built"]["sheets"]["Data"]
    shown, errors = sheet["values"], sheet["errors"]
    for anchor, name, _ in BUILT:
        out = model.results[anchor]
        rows = out if isinstance(out, list) else [[out]]
        r0, c0 = _cell(anchor)
        for i, row in enumerate(rows):
            for j, v in enumerate(row):
                got = shown[r0 + i][c0 + j]
                assert _close(v, got), f"{anchor} {name} row {i + 1} col {j + 1}: {v!r} vs {got!r}"
    # the options from blank cells were read as left out, except lags (0 there means no lags)
    assert model.results["D1"] == F.EVENT_FLAG(model.rows("A1:A120"), "rise")
    assert model.results["E1"] == F.EVENT_NAIVE(model.rows("B1:B120"), 1, 7)
    assert model.results["L1"] != F.EVENT_LOGIT(model.rows("B1:B120"), None, 80)
    # a message fills the whole array; a row beyond the result shows #N/A (Calc's error 32767); an
    # error cell in an input range (here #DIV/0!) stops the call before tocsin sees it: Calc 7.4
    # shows Err:504 ("error in the parameter list") in the formula's cells
    assert all(shown[i][_col("AH")].startswith("#tocsin: criterion 'rise>=x'") for i in range(N))
    assert errors == {f"{N},{_col('C')}": 32767, f"4,{_col('AI')}": 532,
                      **{f"{i},{_col('AJ')}": 504 for i in range(10)}}
