"""Parity of the formulas demo (sample_workbooks/formulas_demo.xlsx).

Every formula of the workbook is parsed from its text (tests/formula_eval.py, our own tiny parser)
and evaluated by calling tocsin's spreadsheet functions with the referenced ranges read from the
workbook, the way the xlwings add-in calls them. The results must equal

* the values cached in the file (so the committed demo is current), and
* the watcher's forecast and profile sheets for the same job ("second sailing" of island_ferry.xlsx,
  refreshed by watcher.refresh) to 1e-12: every forecast column, the validation scorecard,
  McNemar's test, the logistic coefficients and the event rate table.
"""
from __future__ import annotations

import importlib.util
import io
import math
import shutil
import sys
from pathlib import Path

import pytest
from formula_eval import Evaluator, parse
from openpyxl import Workbook, load_workbook
from openpyxl.worksheet.formula import ArrayFormula

from sheetfns import udf as U

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "sample_workbooks"
DEMO = SAMPLES / "formulas_demo.xlsx"
FERRY = SAMPLES / "island_ferry.xlsx"
TOL = 1e-12


def _generator():
    spec = importlib.util.spec_from_file_location("make_formulas_demo", SAMPLES / "make_formulas_demo.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module          # its dataclasses look their module up there
    spec.loader.exec_module(module)
    return module


def _close(a, b) -> bool:
    if a is None or b is None or (isinstance(a, float) and math.isnan(a)) or (
            isinstance(b, float) and math.isnan(b)):
        return (a is None or a != a) and (b is None or b != b)
    if isinstance(a, str) or isinstance(b, str):
        return a == b
    return abs(float(a) - float(b)) <= TOL * max(1.0, abs(float(b)))


@pytest.fixture(scope="module")
def demo():
    if not DEMO.exists():
        pytest.fail(f"{DEMO} is missing: run python sample_workbooks/make_formulas_demo.py")
    wb = load_workbook(DEMO)
    ev = Evaluator(wb, {name: getattr(U, name) for name in U.__all__})
    for sheet, row, col in list(ev.anchors):
        ev.evaluate(sheet, row, col)
    return ev, load_workbook(DEMO, data_only=True)


# The committed demo is current when a regenerated one holds the same sheets, formulas, texts, dates,
# formats and (to a relative 1e-9) numbers. Not byte for byte: a cached logistic probability may differ
# in its last digits on another numpy / BLAS build.
REL = 1e-9


def _same_cell(a, b) -> bool:
    if isinstance(a, ArrayFormula) or isinstance(b, ArrayFormula):
        return (isinstance(a, ArrayFormula) and isinstance(b, ArrayFormula)
                and (a.ref, a.text) == (b.ref, b.text))
    numeric = (int, float)
    if isinstance(a, numeric) and isinstance(b, numeric) and not isinstance(a, bool) \
            and not isinstance(b, bool):
        return math.isclose(a, b, rel_tol=REL, abs_tol=1e-12) or (math.isnan(a) and math.isnan(b))
    return type(a) is type(b) and a == b


def _differences(ours: Workbook, theirs: Workbook, *, formats: bool) -> list[str]:
    if ours.sheetnames != theirs.sheetnames:
        return [f"sheets {ours.sheetnames} vs {theirs.sheetnames}"]
    out = []
    for name in ours.sheetnames:
        a, b = ours[name], theirs[name]
        if formats:
            if a.freeze_panes != b.freeze_panes:
                out.append(f"{name}: frozen panes {a.freeze_panes} vs {b.freeze_panes}")
            widths = [{k: d.width for k, d in ws.column_dimensions.items()} for ws in (a, b)]
            if widths[0] != widths[1]:
                out.append(f"{name}: column widths {widths[0]} vs {widths[1]}")
        cells = {c.coordinate for ws in (a, b) for row in ws.iter_rows() for c in row}
        for ref in sorted(cells):
            x, y = a[ref], b[ref]
            if not _same_cell(x.value, y.value):
                out.append(f"{name}!{ref}: {x.value!r} vs {y.value!r}")
            elif formats and (x.number_format, bool(x.font.b)) != (y.number_format, bool(y.font.b)):
                out.append(f"{name}!{ref}: format {x.number_format!r} bold={x.font.b} vs "
                           f"{y.number_format!r} bold={y.font.b}")
    return out


def test_demo_file_is_current():
    fresh = _generator().formulas_demo_bytes()
    stale = "formulas_demo.xlsx is stale: run python sample_workbooks/make_formulas_demo.py"
    for data_only in (False, True):      # formulas and spilled values; then the values cached with them
        ours = load_workbook(io.BytesIO(fresh), data_only=data_only)
        theirs = load_workbook(DEMO, data_only=data_only)
        diff = _differences(ours, theirs, formats=not data_only)
        assert not diff, f"{stale}; {len(diff)} difference(s), the first: {diff[:5]}"


def test_the_demo_comparison_sees_a_change():
    # the comparison above must not be vacuous: a changed number, text or formula is a difference
    wb = load_workbook(DEMO)
    changed = load_workbook(DEMO)
    ws = changed["Passengers"]
    ws["B3"] = ws["B3"].value * (1 + 1e-6)
    ws["A1"] = "Datum"
    ws["E2"] = ArrayFormula(ws["E2"].value.ref, ws["E2"].value.text.replace(">", ">="))
    diff = _differences(wb, changed, formats=True)
    assert [d.split(":")[0] for d in diff] == ["Passengers!A1", "Passengers!B3", "Passengers!E2"]
    ws["B3"] = wb["Passengers"]["B3"].value * (1 + 1e-12)     # within the tolerance
    assert "Passengers!B3" not in " ".join(_differences(wb, changed, formats=True))


def test_every_formula_is_a_tocsin_function_and_every_function_is_shown(demo):
    ev, _ = demo
    names = [parse(text).name for _, _, text in ev.formulas()]
    assert set(names) <= set(U.__all__)
    assert set(names) == set(U.__all__), f"not in the demo: {set(U.__all__) - set(names)}"


def test_every_formula_gives_the_values_cached_in_the_file(demo):
    ev, values = demo
    for (sheet, row, col), (text, spill) in ev.anchors.items():
        out = ev.results[(sheet, row, col)]
        assert not (isinstance(out, str) and out.startswith("#tocsin")), (sheet, row, col, out)
        rows = out if isinstance(out, list) else [[out]]
        assert (spill.max_row - spill.min_row + 1, spill.max_col - spill.min_col + 1) == \
            (len(rows), len(rows[0])), f"{sheet} {text}: spill range differs from the result"
        ws = values[sheet]
        for i, r in enumerate(rows):
            for j, v in enumerate(r):
                cached = ws.cell(row=row + i, column=col + j).value
                if cached == "" and v is None:
                    continue
                assert _close(v, cached), f"{sheet} {text}: row {i + 1} col {j + 1}: {v!r} vs {cached!r}"


def test_xlwings_conf_sheet_points_the_add_in_at_sheetfns_udf(demo):
    _, values = demo
    ws = values["xlwings.conf"]
    # the add-in reads settings from A1 down to the first blank row (xlwings.bas, GetConfigFromSheet)
    settings = {}
    r = 1
    while ws.cell(row=r, column=1).value not in (None, ""):
        settings[ws.cell(row=r, column=1).value.upper()] = ws.cell(row=r, column=2).value
        r += 1
    assert settings == {"UDF MODULES": "sheetfns.udf"}
    assert importlib.util.find_spec(settings["UDF MODULES"]) is not None


def test_demo_data_are_the_ferry_sample(demo):
    _, values = demo
    ferry = load_workbook(FERRY, data_only=True)["Passengers"]
    ws = values["Passengers"]
    a = [[c.value for c in row] for row in ferry.iter_rows(max_col=3)]
    b = [[c.value for c in row] for row in ws.iter_rows(max_row=len(a), max_col=3)]
    assert a == b


# ------------------------------------------------------------------------------ against the watcher
def _table_below(ws, first_text: str, col: int = 1):
    """The rows under the first cell of column ``col`` whose text starts with ``first_text``."""
    for r in range(1, ws.max_row + 1):
        v = ws.cell(row=r, column=col).value
        if isinstance(v, str) and v.startswith(first_text):
            return r
    raise AssertionError(f"no cell starting with {first_text!r} in column {col} of {ws.title}")


@pytest.fixture(scope="module")
def watcher_sheets(tmp_path_factory):
    from watcher.refresh.workbook import refresh_workbook

    book = tmp_path_factory.mktemp("ferry") / FERRY.name
    shutil.copyfile(FERRY, book)
    report = refresh_workbook(book, force=True)
    assert report.ok, report
    wb = load_workbook(book, data_only=True)
    return wb["second sailing forecast"], wb["second sailing profile"]


def _demo_columns(ev):
    """Demo forecast columns by their header label: label -> list of values (evaluated, not cached)."""
    ws = ev.wb["Passengers"]
    out = {}
    for c in range(1, ws.max_column + 1):
        label = ws.cell(row=1, column=c).value
        if ("Passengers", 2, c) in ev.results:
            out[label] = [r[0] for r in ev.results[("Passengers", 2, c)]]
    return out


def test_forecast_columns_equal_the_watchers_sheet(demo, watcher_sheets):
    ev, _ = demo
    sheet, _ = watcher_sheets
    ours = _demo_columns(ev)
    header = [c.value for c in sheet[1]]
    start = header.index("date")
    compared = 0
    for j, label in enumerate(header[start:], start=start + 1):
        # the residual is arithmetic (actual - probability), not a tocsin function: tests/test_refresh.py
        if label in ("date", "Passengers", "period") or label.startswith("residual ("):
            continue
        theirs = [sheet.cell(row=r, column=j).value for r in range(2, sheet.max_row + 1)]
        theirs = theirs[:len(ours[label])]
        assert len(theirs) == len(ours[label]) == 2929
        bad = [i for i, (a, b) in enumerate(zip(ours[label], theirs, strict=True)) if not _close(a, b)]
        assert not bad, f"{label}: row {bad[0] + 2}: {ours[label][bad[0]]!r} vs {theirs[bad[0]]!r}"
        compared += 1
    # event, 6 benchmarks, the two-state chain, logistic and value model: 0/1 and probability each
    assert compared == 13


def test_scorecard_equals_the_watchers_sheet(demo, watcher_sheets):
    from sheetfns.scorecard import SCORE_ROWS

    ev, _ = demo
    sheet, _ = watcher_sheets
    labels = {label: key for key, label, *_ in SCORE_ROWS}
    r0 = _table_below(sheet, "measure")
    methods = []
    while sheet.cell(row=r0, column=len(methods) + 2).value:     # up to the first blank cell
        methods.append(sheet.cell(row=r0, column=len(methods) + 2).value)
    scores_ws = ev.wb["Scores"]
    ours = {}
    for c in range(1, scores_ws.max_column + 1):
        if ("Scores", 4, c) in ev.results:
            ours[scores_ws.cell(row=3, column=c).value] = dict(ev.results[("Scores", 4, c)][1:])
    assert set(methods) == set(ours)
    checked = 0
    for r in range(r0 + 1, r0 + 1 + len(SCORE_ROWS)):
        label = sheet.cell(row=r, column=1).value
        key = labels[label]
        if key == "expected_cost":           # needs the job's costs: not one of EVENT_SCORES' measures
            continue
        for j, m in enumerate(methods, start=2):
            assert _close(ours[m][key], sheet.cell(row=r, column=j).value), (m, key)
            checked += 1
    assert checked == len(methods) * (len(SCORE_ROWS) - 1)


def test_mcnemar_and_coefficients_equal_the_watchers_sheet(demo, watcher_sheets):
    ev, _ = demo
    sheet, _ = watcher_sheets
    scores_ws = ev.wb["Scores"]
    found = {}
    for (s, r, c), out in ev.results.items():
        if s == "Scores":
            found[parse(ev.anchors[(s, r, c)][0]).name] = (r, c, out)
    r, c, out = found["EVENT_COMPARE"]
    title = scores_ws.cell(row=r - 1, column=c).value           # "McNemar: logistic vs <method>"
    r0 = _table_below(sheet, "each model against the best benchmark, ")
    best = title.split(" vs ", 1)[1]
    assert sheet.cell(row=r0, column=1).value == \
        f"each model against the best benchmark, {best} (validation period)"
    assert sheet.cell(row=r0 + 1, column=2).value == "McNemar (0/1)"
    mc = _table_below(sheet, "logistic")                       # the logistic model's row
    assert mc > r0
    assert _close(out[1][1], sheet.cell(row=mc, column=2).value)
    assert _close(out[2][1], sheet.cell(row=mc, column=3).value)

    _, _, coefs = found["EVENT_LOGIT_COEFS"]
    t0 = _table_below(sheet, "term")
    theirs = []
    r = t0 + 1
    while sheet.cell(row=r, column=1).value:
        theirs.append([sheet.cell(row=r, column=k).value for k in range(1, 6)])
        r += 1
    terms = [row for row in coefs[1:] if not row[0].startswith("note:")]
    assert len(terms) == len(theirs)
    for a, b in zip(terms, theirs, strict=True):
        # the watcher calls the value lag "value t-h"; the formula passes it as the predictor "Passengers"
        assert a[0] == b[0] or (a[0] == "Passengers" and b[0].startswith("value")), (a[0], b[0])
        assert all(_close(x, y) for x, y in zip(a[1:], b[1:], strict=True)), (a, b)


def test_rate_table_equals_the_watchers_profile_sheet(demo, watcher_sheets):
    ev, _ = demo
    _, profile = watcher_sheets
    (key,) = [k for k in ev.results if k[0] == "Profile"]
    ours = ev.results[key]
    h = _table_below(profile, "month")
    header = [profile.cell(row=h, column=c).value for c in range(1, profile.max_column + 1)]
    names = [str(x) for x in ours[0]]
    months = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")
    for i, row in enumerate(ours[1:]):
        assert profile.cell(row=h + 1 + i, column=1).value == months[row[0] - 1]
        for name, v in zip(names[1:], row[1:], strict=True):
            theirs = profile.cell(row=h + 1 + i, column=header.index(name) + 1).value
            assert _close(v, theirs), (months[i], name, v, theirs)


@pytest.mark.libreoffice
def test_libreoffice_opens_the_demo(demo, tmp_path):
    """The package opens in a real spreadsheet program. LibreOffice has no tocsin functions, so it
    shows #NAME? in the formula cells (the About sheet says so); the data and settings are intact."""
    import libreoffice  # tests/libreoffice.py

    _, values = demo
    sheets = libreoffice.sheets_as_csv(DEMO, tmp_path)
    assert {"About", "Passengers", "Scores", "Profile", "xlwings.conf"} <= set(sheets)
    rows = sheets["Passengers"]
    assert rows[0][:5] == ["Date", "Passengers", "Wind (m/s)", "", "event"]
    ws = values["Passengers"]
    shown = [r[1] for r in rows[1:2930]]
    expected = ["" if ws.cell(row=i, column=2).value is None else str(ws.cell(row=i, column=2).value)
                for i in range(2, 2931)]
    assert shown == expected
    assert sheets["xlwings.conf"][0][:2] == ["UDF Modules", "sheetfns.udf"]


def test_demo_package_validates_against_office_open_xml():
    # ECMA-376 schema and package rules, checked by openxml-audit (a general-purpose OOXML validator)
    import subprocess

    proc = subprocess.run([sys.executable, "-m", "openxml_audit", "-f", "microsoft365", str(DEMO)],
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0 and "Errors: 0" in proc.stdout, proc.stdout + proc.stderr
