"""Generate ``formulas_demo.xlsx`` and ``formulas_demo.ods``: tocsin's spreadsheet functions as
formulas next to the ferry data, for Excel (xlwings) and for LibreOffice Calc (tocsin's add-in).

Usage::

    python sample_workbooks/make_formulas_demo.py [--no-ods] [OUTDIR]   # default: this script's folder

or, from the sample generator, ``write_formulas_demo(outdir)`` (the .xlsx) and
``write_formulas_demo_ods(outdir)`` (the .ods; needs LibreOffice headless, unopkg and python3-uno).

The workbook holds the same invented ferry data as ``island_ferry.xlsx`` (same seed) and, next to it,
the spreadsheet functions that reproduce the watcher's forecast sheet of the job "second sailing"
(event ``>=1150``, horizon 1, the default validation period): the event column, every benchmark, the
logistic, two-state chain and value model probabilities, the validation scores of every method, the
logistic coefficients, the confusion table, the Brier decomposition, McNemar's test, the cost cutoff
and the event rate table.
Every formula is a dynamic array formula (it spills in Microsoft 365 / Excel 2021 and later), written
with its computed value cached in the file, so the numbers show before the add-in has run. A sheet
``xlwings.conf`` points the xlwings add-in at ``sheetfns.udf``.

Sheets: "About" (what this is and how to switch the functions on), "Passengers" (data and the
forecast columns), "Scores" (validation scorecard and the logistic model), "Profile" (event rate by
month and year), "xlwings.conf" (the add-in's setting).

The LibreOffice version has the same sheets but xlwings.conf, and the same formulas under the names
LibreOffice 7.x stores for tocsin's add-in (``TOCSIN.EVENT_FLAG``), as array formulas sized to the data
(LibreOffice 7.4 does not spill). It is made by LibreOffice itself: an .xlsx variant with those names
and array formulas is opened in LibreOffice headless with the add-in installed in a throwaway profile
(tests/calc_headless.py), recalculated, and saved as .ods; the document dates, the thumbnail (a
rendering) and the zip timestamps are then fixed, so a rerun on the same LibreOffice gives the same
content.

Needs numpy, xlsxwriter and tocsin itself (the cached values are computed by ``sheetfns.udf``, which
imports xlwings). Deterministic: fixed document properties; xlsxwriter writes fixed zip timestamps.
"""
from __future__ import annotations

import datetime as dt
import importlib.util
import io
import sys
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

HERE = Path(__file__).resolve().parent
try:
    from watcher.refresh.texts import CAUTION  # the one caution (DESIGN.md §9)
except ModuleNotFoundError:
    sys.path.insert(0, str(HERE.parent))          # a source checkout: the repository root
    from watcher.refresh.texts import CAUTION
FILE_NAME = "formulas_demo.xlsx"
ODS_NAME = "formulas_demo.ods"
CALC_PREFIX = "TOCSIN."         # LibreOffice 7.x: the add-in's service name, dot, the function
JOB = "second sailing"          # the job of island_ferry.xlsx these formulas reproduce
CRITERION = ">=1150"
CYCLE, HARMONICS, SEASON = 365.25, 2, 7   # the job table's defaults for daily data (DESIGN.md §7)
COST_FALSE_ALARM, COST_MISS = 1, 4        # an example for EVENT_CUTOFF
FIXED_TIME = dt.datetime(2025, 1, 1, 0, 0, 0)

DATA_SHEET = "Passengers"
ABOUT = (
    "tocsin spreadsheet functions: a demo",
    "",
    "The sheet Passengers holds invented daily passengers of an island ferry (the data of "
    "island_ferry.xlsx). Columns E to S are formulas: the event 'passengers >= 1150' (a second "
    "sailing is needed) and every forecast method; Scores and Profile score them on the validation "
    "period. They are the numbers of the watcher's sheet 'second sailing forecast' in island_ferry.xlsx.",
    "",
    "To make the formulas live (Windows, Excel for Microsoft 365 or 2021 and later, Python with tocsin):",
    "1. pip install 'tocsin[excel]' and run: xlwings addin install",
    "2. Save this workbook as an Excel Macro-Enabled Workbook (.xlsm). In the VBA editor (Alt+F11), "
    "Tools > References, tick xlwings.",
    "3. File > Options > Trust Center > Macro Settings: tick 'Trust access to the VBA project object "
    "model'.",
    "4. The sheet xlwings.conf sets UDF Modules = sheetfns.udf. On the xlwings tab click Import "
    "Functions, then recalculate (Ctrl+Alt+F9).",
    "",
    "Without the add-in the cells show the values saved in the file; a spreadsheet program that "
    "recalculates them shows #NAME? instead.",
    "",
    CAUTION,
)
ABOUT_CALC = (
    "tocsin spreadsheet functions in LibreOffice Calc: a demo",
    ABOUT[1],
    ABOUT[2].replace("island_ferry.xlsx). Columns E to S are formulas",
                     "island_ferry.xlsx). Columns E to S are array formulas"),
    "",
    "To make the formulas live (LibreOffice 7.4 or later on Linux, its Python able to import tocsin):",
    "1. Install tocsin where LibreOffice's Python finds it and point TOCSIN_PYTHONPATH at it (see the "
    "README, section LibreOffice Calc).",
    "2. Run: tocsin calc-addin, then: unopkg add tocsin.oxt (as root: unopkg add --shared tocsin.oxt). "
    "Restart LibreOffice.",
    "3. Open this file and recalculate (Data > Calculate > Recalculate Hard, Ctrl+Shift+F9).",
    "",
    "Without the add-in the cells show the values saved in the file; recalculating them then shows "
    "#NAME?. A result fills an array formula sized to the data: to write a new one, select the range "
    "and enter the formula with Ctrl+Shift+Enter.",
    "",
    ABOUT[-1],
)


# --------------------------------------------------------------------------------------------- plumbing

def _make_samples() -> Any:
    """The sample generator next to this file (shares the ferry data and its seed)."""
    spec = importlib.util.spec_from_file_location("make_samples", HERE / "make_samples.py")
    module = importlib.util.module_from_spec(spec)
    assert spec.loader is not None
    spec.loader.exec_module(module)
    return module


def _udf() -> Any:
    try:
        import sheetfns.udf as udf
    except ModuleNotFoundError as exc:
        if exc.name != "sheetfns":
            raise
        sys.path.insert(0, str(HERE.parent))      # a source checkout: the repository root
        import sheetfns.udf as udf
    return udf


def _col(j: int) -> str:
    from watcher.xlsx.spec import col_letter

    return col_letter(j)


@dataclass(frozen=True)
class Rng:
    """A range of one sheet, 0-based inclusive rows and columns."""

    sheet: str
    r1: int
    c1: int
    r2: int
    c2: int

    def text(self, own: str) -> str:
        ref = f"{_col(self.c1)}{self.r1 + 1}"
        if (self.r2, self.c2) != (self.r1, self.c1):
            ref += f":{_col(self.c2)}{self.r2 + 1}"
        if self.sheet == own:
            return ref
        name = self.sheet
        if not name.replace("_", "").isalnum():
            name = "'" + name.replace("'", "''") + "'"
        return f"{name}!{ref}"


class Omit:
    """An optional argument left empty (``=F(a, , b)``)."""


OMIT = Omit()


@dataclass
class Formula:
    sheet: str
    row: int
    col: int
    name: str
    args: tuple[Any, ...]
    result: Any = None

    def text(self, prefix: str = "") -> str:
        parts = []
        for a in self.args:
            if isinstance(a, Rng):
                parts.append(a.text(self.sheet))
            elif isinstance(a, Omit):
                parts.append("")
            elif isinstance(a, str):
                parts.append('"' + a.replace('"', '""') + '"')
            elif isinstance(a, bool):
                parts.append("TRUE" if a else "FALSE")
            else:
                parts.append(repr(a) if isinstance(a, float) and a != int(a) else str(int(a)))
        return f"={prefix}{self.name}({','.join(parts)})"

    def shape(self) -> tuple[int, int]:
        if isinstance(self.result, list):
            return len(self.result), len(self.result[0])
        return 1, 1


class Grid:
    """The workbook as the generator sees it: data cells and computed spills, evaluated in order."""

    def __init__(self, udf: Any):
        self.udf = udf
        self.cells: dict[tuple[str, int, int], Any] = {}
        self.formulas: list[Formula] = []

    def put_rows(self, sheet: str, rows: Sequence[Sequence[Any]], r0: int = 0, c0: int = 0) -> None:
        for i, row in enumerate(rows):
            for j, v in enumerate(row):
                if v is not None:
                    self.cells[(sheet, r0 + i, c0 + j)] = v

    def values(self, rng: Rng) -> list[list[Any]]:
        return [[self.cells.get((rng.sheet, r, c)) for c in range(rng.c1, rng.c2 + 1)]
                for r in range(rng.r1, rng.r2 + 1)]

    def formula(self, sheet: str, row: int, col: int, name: str, *args: Any) -> Formula:
        """Add ``=name(args)`` at (row, col) of ``sheet``, compute it as the add-in would, spill it."""
        fn: Callable[..., Any] = getattr(self.udf, name)
        call = [self.values(a) if isinstance(a, Rng) else None if isinstance(a, Omit) else a for a in args]
        result = fn(*call)
        if isinstance(result, str) and result.startswith("#tocsin"):
            raise RuntimeError(f"{sheet}!{_col(col)}{row + 1} ={name}(...) gave {result}")
        f = Formula(sheet, row, col, name, tuple(args), result)
        self.put_rows(sheet, result if isinstance(result, list) else [[result]], row, col)
        self.formulas.append(f)
        return f


# --------------------------------------------------------------------------------------------- the plan

@dataclass
class Demo:
    grid: Grid
    data_rows: list[list[Any]]
    train_rows: int
    last_row: int                  # 0-based sheet row of the last observed event
    columns: dict[str, int]        # forecast column label -> 0-based column on the data sheet
    best_benchmark: str


def plan() -> Demo:
    """Lay out every formula of the demo and compute its value."""
    import numpy as np

    udf = _udf()
    from sheetfns import events as events_mod
    from sheetfns import partition, scorecard
    samples = _make_samples()
    rows = samples.ferry_rows(np.random.default_rng(samples.SEEDS["island_ferry"]))
    data = rows[1:]
    n = len(data)
    dates = [r[0] for r in data]
    passengers = np.array([np.nan if r[1] is None else float(r[1]) for r in data])
    ev = events_mod.flag(passengers, CRITERION)
    train = partition.split(np.array(dates, dtype="datetime64[D]"), None, events=ev).train_size
    last = int(np.flatnonzero(~np.isnan(ev))[-1])

    g = Grid(udf)
    g.put_rows(DATA_SHEET, rows)
    top, bottom = 1, n                          # data rows 2 .. n+1 of the sheet (0-based 1 .. n)

    def col(j: int, r1: int = top, r2: int = bottom, sheet: str = DATA_SHEET) -> Rng:
        return Rng(sheet, r1, j, r2, j)

    A, B = 0, 1
    labels = {}
    j = 4                                       # column E: one blank column after the data
    layout = [
        ("event", "EVENT_FLAG", lambda: (col(B), CRITERION)),
        ("naive", "EVENT_NAIVE", lambda: (col(E), 1, 1, train)),
        ("rolling naive", "EVENT_NAIVE", lambda: (col(E),)),
        ("seasonal naive", "EVENT_NAIVE", lambda: (col(E), 1, SEASON, train)),
        ("rolling seasonal naive", "EVENT_NAIVE", lambda: (col(E), 1, SEASON)),
        ("majority vote", "EVENT_MAJORITY", lambda: (col(E), OMIT, train)),
        ("rolling majority", "EVENT_MAJORITY", lambda: (col(E),)),
        ("majority share", "EVENT_SHARE", lambda: (col(E), OMIT, train)),
        ("rolling share", "EVENT_SHARE", lambda: (col(E),)),
        ("logistic probability", "EVENT_LOGIT",
         lambda: (col(E), Rng(DATA_SHEET, 0, B, bottom, B), train, 1, 1, CYCLE, HARMONICS, col(A))),
        ("logistic", "EVENT_FLAG", lambda: (col(labels["logistic probability"]), ">0.5")),
        ("two-state chain probability", "EVENT_MARKOV", lambda: (col(E), train)),
        ("two-state chain", "EVENT_FLAG", lambda: (col(labels["two-state chain probability"]), ">0.5")),
        ("value model probability", "EVENT_VALUE_PROB",
         lambda: (col(B), CRITERION, OMIT, train, 1, 1, CYCLE, HARMONICS, col(A))),
        ("value model", "EVENT_FLAG", lambda: (col(labels["value model probability"]), ">0.5")),
    ]
    E = j
    for label, name, args in layout:
        g.cells[(DATA_SHEET, 0, j)] = label
        labels[label] = j
        g.formula(DATA_SHEET, top, j, name, *args())
        j += 1

    # Scores: each method on the validation rows, probability = the method's own (0/1 forecasts
    # score as probabilities of 0 or 1), brier_skill against the training majority share.
    v1, v2 = top + train, top + last
    probs = {"majority vote": "majority share", "rolling majority": "rolling share",
             "logistic": "logistic probability", "two-state chain": "two-state chain probability",
             "value model": "value model probability"}
    methods = ["naive", "rolling naive", "seasonal naive", "rolling seasonal naive", "majority vote",
               "rolling majority", "two-state chain", "logistic", "value model"]
    sc = "Scores"
    g.cells[(sc, 0, 0)] = (f"Validation period: rows {v1 + 1}-{v2 + 1} of sheet {DATA_SHEET} "
                           f"({dates[train]:%Y-%m-%d} to {dates[last]:%Y-%m-%d}); training rows "
                           f"{top + 1}-{top + train}. brier_skill is against the training majority share.")
    for k, m in enumerate(methods):
        c0 = 3 * k
        g.cells[(sc, 2, c0)] = m
        g.formula(sc, 3, c0, "EVENT_SCORES", col(E, v1, v2), col(labels[m], v1, v2),
                  col(labels[probs.get(m, m)], v1, v2), col(labels["majority share"], v1, v2))
    r = 3 + len(g.formulas[-1].result) + 2
    ev_full = scorecard.evaluate(ev, train_size=train, settings=scorecard.Settings(
        horizon=1, season=SEASON, cycle=CYCLE, harmonics=HARMONICS, lags=1, weekday=True),
        dates=np.array(dates, dtype="datetime64[D]"), values=passengers, criterion=CRITERION,
        raw_values=passengers)
    best = scorecard.METHOD_LABELS[str(ev_full.comparisons["best_benchmark"])]
    g.cells[(sc, r, 0)] = "logistic coefficients (fit on the training rows)"
    g.formula(sc, r + 1, 0, "EVENT_LOGIT_COEFS", col(E), Rng(DATA_SHEET, 0, B, bottom, B), train, 1, 1,
              CYCLE, HARMONICS, col(A))
    g.cells[(sc, r, 6)] = "logistic: confusion table (validation)"
    g.formula(sc, r + 1, 6, "EVENT_CONFUSION", col(E, v1, v2), col(labels["logistic"], v1, v2))
    g.cells[(sc, r, 10)] = "logistic: Brier score and its parts"
    g.formula(sc, r + 1, 10, "EVENT_BRIER", col(E, v1, v2), col(labels["logistic probability"], v1, v2))
    g.cells[(sc, r, 13)] = f"McNemar: logistic vs {best}"
    g.formula(sc, r + 1, 13, "EVENT_COMPARE", col(E, v1, v2), col(labels["logistic"], v1, v2),
              col(labels[best], v1, v2))
    g.cells[(sc, r, 16)] = (f"cutoff for a false alarm costing {COST_FALSE_ALARM} and a miss "
                            f"costing {COST_MISS}")
    g.formula(sc, r + 1, 16, "EVENT_CUTOFF", COST_FALSE_ALARM, COST_MISS)

    g.cells[("Profile", 0, 0)] = f"Share of days with {CRITERION} passengers, by month and year"
    g.formula("Profile", 2, 0, "EVENT_RATE_TABLE", col(A), col(E), "month")
    return Demo(g, rows, train, last, labels, best)


# --------------------------------------------------------------------------------------------- writing

def formulas_demo_bytes(*, calc: bool = False) -> bytes:
    """The bytes of ``formulas_demo.xlsx``; with ``calc``, of its variant for LibreOffice (the names
    LibreOffice stores, array formulas sized to the data, no xlwings.conf), which
    :func:`write_formulas_demo_ods` turns into ``formulas_demo.ods``."""
    import xlsxwriter

    demo = plan()
    g = demo.grid
    buf = io.BytesIO()
    wb = xlsxwriter.Workbook(buf, {"in_memory": True, "strings_to_numbers": False,
                                   "strings_to_formulas": False})
    # No fullCalcOnLoad flag: a program without the add-in then shows the values saved with the
    # formulas instead of #NAME? (Excel recalculates anyway: the file's calcId is older than its own).
    wb.calc_on_load = False
    wb.set_properties({"title": "tocsin sample: spreadsheet functions", "author": "tocsin sample generator",
                       "created": FIXED_TIME})
    bold = wb.add_format({"bold": True})
    wrap = wb.add_format({"text_wrap": True, "valign": "top"})
    fmt = {"date": wb.add_format({"num_format": "yyyy-mm-dd"}),
           "int": wb.add_format({"num_format": "0"}),
           "dec": wb.add_format({"num_format": "0.0000"}),
           "general": wb.add_format({})}

    about = wb.add_worksheet("About")
    about.set_column(0, 0, 110, wrap)
    for i, line in enumerate(ABOUT_CALC if calc else ABOUT):
        about.write_string(i, 0, line, bold if i == 0 else wrap)

    sheets = {name: wb.add_worksheet(name) for name in (DATA_SHEET, "Scores", "Profile")}
    conf = wb.add_worksheet("xlwings.conf") if not calc else None
    if conf is not None:
        # read by the add-in from A1 down to the first blank row: one setting per row, name then value
        conf.write_string(0, 0, "UDF Modules")
        conf.write_string(0, 1, "sheetfns.udf")
        conf.write_string(2, 0, "Read by the xlwings add-in (settings from A1 down to the first blank "
                                "row). UDF Modules names the Python module with tocsin's spreadsheet "
                                "functions.")
        conf.set_column(0, 0, 16)
        conf.set_column(1, 1, 16)

    spilled = set()
    for f in g.formulas:
        h, w = f.shape()
        spilled.update((f.sheet, f.row + i, f.col + j) for i in range(h) for j in range(w))
    data_fmt = {0: fmt["date"], 1: fmt["int"], 2: fmt["general"]}
    for (sheet, r, c), v in sorted(g.cells.items()):
        if (sheet, r, c) in spilled:
            continue
        ws = sheets[sheet]
        if isinstance(v, dt.date):
            ws.write_datetime(r, c, dt.datetime(v.year, v.month, v.day), fmt["date"])
        elif isinstance(v, str):
            ws.write_string(r, c, v, bold if r in (0, 2) else None)
        else:
            ws.write_number(r, c, float(v), data_fmt.get(c) if sheet == DATA_SHEET else None)

    for f in g.formulas:
        ws = sheets[f.sheet]
        h, w = f.shape()
        rows = f.result if isinstance(f.result, list) else [[f.result]]
        cell_fmt = fmt["int"] if f.name in ("EVENT_FLAG", "EVENT_NAIVE", "EVENT_MAJORITY") else fmt["dec"]
        first = rows[0][0]
        if calc:
            ws.write_array_formula(f.row, f.col, f.row + h - 1, f.col + w - 1, f.text(CALC_PREFIX),
                                   cell_fmt, "" if first is None else first)
        else:
            ws.write_dynamic_array_formula(f.row, f.col, f.row + h - 1, f.col + w - 1, f.text(),
                                           cell_fmt, "" if first is None else first)
        for i, row in enumerate(rows):
            for j, v in enumerate(row):
                if i == 0 and j == 0:
                    continue
                if v is None:
                    ws.write_blank(f.row + i, f.col + j, None, cell_fmt)
                elif isinstance(v, str):
                    ws.write_string(f.row + i, f.col + j, v)
                else:
                    ws.write_number(f.row + i, f.col + j, float(v), cell_fmt)

    data = sheets[DATA_SHEET]
    data.freeze_panes(1, 0)
    data.set_column(0, 0, 12)
    data.set_column(1, 2, 11)
    data.set_column(4, 4 + len(demo.columns) - 1, 12)
    data.set_row(0, 30, wb.add_format({"bold": True, "text_wrap": True, "valign": "top"}))
    sheets["Scores"].set_column(0, 20, 14)
    sheets["Profile"].set_column(0, 14, 9)
    wb.close()
    return buf.getvalue()


def write_formulas_demo(outdir: Path | str | None = None) -> Path:
    """Write ``formulas_demo.xlsx`` into ``outdir`` (default: this script's folder); return its path."""
    folder = Path(outdir) if outdir is not None else HERE
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / FILE_NAME
    path.write_bytes(formulas_demo_bytes())
    return path


def normalised_ods(data: bytes) -> bytes:
    """An .ods as LibreOffice saved it, with what changes from run to run fixed: the document dates
    and editing time in meta.xml, the thumbnail (a rendering of the first sheet, left out) and the zip
    timestamps. The stored ``mimetype`` member stays first and uncompressed (ODF 1.3, part 2, 3.3)."""
    import re
    import zipfile

    stamp = FIXED_TIME.strftime("%Y-%m-%dT%H:%M:%S")
    src = zipfile.ZipFile(io.BytesIO(data))
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w") as dst:
        for info in src.infolist():
            if info.filename.startswith("Thumbnails/"):
                continue
            body = src.read(info)
            if info.filename == "meta.xml":
                text = body.decode("utf-8")
                for tag in ("meta:creation-date", "dc:date", "meta:print-date"):
                    text = re.sub(f"<{tag}>[^<]*</{tag}>", f"<{tag}>{stamp}</{tag}>", text)
                text = re.sub(r"<meta:editing-duration>[^<]*</meta:editing-duration>",
                              "<meta:editing-duration>PT0S</meta:editing-duration>", text)
                body = text.encode("utf-8")
            elif info.filename == "META-INF/manifest.xml":
                body = re.sub(rb'\s*<manifest:file-entry[^>]*full-path="Thumbnails/[^"]*"[^>]*/>', b"", body)
            fixed = zipfile.ZipInfo(info.filename, FIXED_TIME.timetuple()[:6])
            fixed.compress_type = info.compress_type
            fixed.external_attr = (0o40755 << 16) | 0x10 if info.is_dir() else 0o644 << 16
            dst.writestr(fixed, body)
    return out.getvalue()


def write_formulas_demo_ods(outdir: Path | str | None = None) -> Path:
    """Write ``formulas_demo.ods`` (made by LibreOffice headless with tocsin's add-in) into ``outdir``."""
    import tempfile

    sys.path.insert(0, str(HERE.parent / "tests"))
    from calc_headless import Calc  # tests/calc_headless.py: a throwaway LibreOffice state

    folder = Path(outdir) if outdir is not None else HERE
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / ODS_NAME
    with tempfile.TemporaryDirectory(prefix="tocsin-ods-") as tmp:
        src, raw = Path(tmp) / "formulas_demo_calc.xlsx", Path(tmp) / "raw.ods"
        src.write_bytes(formulas_demo_bytes(calc=True))
        office = Calc(Path(tmp) / "office")
        office.run([{"kind": "open", "path": str(src), "recalc": True,
                     "save": [{"path": str(raw), "filter": "calc8"}]}])
        path.write_bytes(normalised_ods(raw.read_bytes()))
    return path


def main(argv: list[str] | None = None) -> int:
    args = sys.argv[1:] if argv is None else list(argv)
    ods = "--no-ods" not in args
    args = [a for a in args if a != "--no-ods"]
    if len(args) > 1 or (args and args[0] in ("-h", "--help")):
        print("usage: python make_formulas_demo.py [--no-ods] [OUTDIR]", file=sys.stderr)
        return 2
    print(write_formulas_demo(args[0] if args else None))
    if ods:
        print(write_formulas_demo_ods(args[0] if args else None))
    return 0


if __name__ == "__main__":
    sys.exit(main())
