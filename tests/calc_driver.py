"""Drive LibreOffice headless over UNO: open or build workbooks, recalculate, read every value back.

Run by tests/calc_headless.py with the Python that has LibreOffice's ``uno`` module (Debian:
/usr/bin/python3 with python3-uno), never imported by the tests:

    python3 tests/calc_driver.py JOBS.json RESULT.json

JOBS.json: {"soffice": path, "env": ["-env:...", ...], "jobs": [job, ...]}; one soffice process
serves every job (it is started here and terminated at the end). A job is one of

* {"kind": "open", "path": ..., "recalc": bool, "read": bool, "save": [{"path": ..., "filter": ...}]}
* {"kind": "build", "sheets": {name: {"cells": [[addr, value]], "formulas": [[addr, text]],
  "arrays": [[range, text]]}}, "recalc", "read", "save": as above}: a new workbook; a value is a
  number, a text or {"date": "YYYY-MM-DD"} (a date cell) or {"bool": true} (a TRUE/FALSE cell)
* {"kind": "functions", "names": [...]}: Calc's own description of those functions
  (com.sun.star.sheet.FunctionDescriptions)
* {"kind": "bench", "rows": [[...], ...], "formulas": [[range, text], ...], "repeat": n}: the data in
  A1.., then each array formula entered and its first cell read (which makes Calc compute it), timed
  (best of ``repeat``); the formula is removed before the next one

Each result carries "seconds" per step. Values come back as Calc holds them: numbers, texts, and
null for an error cell (whose address is listed in "errors" with Calc's error code).
"""
import datetime as dt
import json
import os
import subprocess
import sys
import time

import uno
from com.sun.star.beans import PropertyValue

FORMULA_ERROR = 4        # com.sun.star.sheet.FormulaResult.ERROR
FORMULA_FLAG = 16        # com.sun.star.sheet.CellFlags.FORMULA


def prop(name, value):
    p = PropertyValue()
    p.Name, p.Value = name, value
    return p


def url(path):
    return uno.systemPathToFileUrl(os.path.abspath(path))


def connect(soffice, env):
    pipe = f"tocsin_test_{os.getpid()}"
    proc = subprocess.Popen([soffice, *env, "--headless", "--invisible", "--norestore", "--nologo",
                             "--nodefault", "--nolockcheck", f"--accept=pipe,name={pipe};urp;"],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    local = uno.getComponentContext()
    resolver = local.ServiceManager.createInstanceWithContext("com.sun.star.bridge.UnoUrlResolver", local)
    deadline = time.monotonic() + 120
    while True:
        try:
            ctx = resolver.resolve(f"uno:pipe,name={pipe};urp;StarOffice.ComponentContext")
            break
        except Exception:  # noqa: BLE001 - not listening yet
            if proc.poll() is not None or time.monotonic() > deadline:
                raise RuntimeError(f"soffice did not start (exit status {proc.poll()})") from None
            time.sleep(0.1)
    desktop = ctx.ServiceManager.createInstanceWithContext("com.sun.star.frame.Desktop", ctx)
    return proc, ctx, desktop


def _address(a):
    def col(c):
        s = ""
        c += 1
        while c:
            c, r = divmod(c - 1, 26)
            s = chr(65 + r) + s
        return s
    first = f"{col(a.StartColumn)}{a.StartRow + 1}"
    last = f"{col(a.EndColumn)}{a.EndRow + 1}"
    return first if first == last else f"{first}:{last}"


def read_sheet(sheet):
    cursor = sheet.createCursor()
    cursor.gotoEndOfUsedArea(False)
    end = cursor.getRangeAddress()
    block = sheet.getCellRangeByPosition(0, 0, end.EndColumn, end.EndRow)
    values = [list(row) for row in block.getDataArray()]
    texts = block.getFormulaArray()
    arrays, formulas, covered = [], {}, set()
    for r, row in enumerate(texts):
        for c, text in enumerate(row):
            if not text.startswith(("=", "{=")) or (r, c) in covered:
                continue
            if text.startswith("{="):
                cur = sheet.createCursorByRange(sheet.getCellByPosition(c, r))
                cur.collapseToCurrentArray()
                a = cur.getRangeAddress()
                covered.update((i, j) for i in range(a.StartRow, a.EndRow + 1)
                               for j in range(a.StartColumn, a.EndColumn + 1))
                arrays.append({"range": _address(a), "row": a.StartRow, "col": a.StartColumn,
                               "rows": a.EndRow - a.StartRow + 1, "cols": a.EndColumn - a.StartColumn + 1,
                               "formula": text[1:-1]})
            else:
                formulas[f"{r},{c}"] = text
    errors = {}
    found = sheet.queryFormulaCells(FORMULA_ERROR)
    for a in found.getRangeAddresses():
        for r in range(a.StartRow, a.EndRow + 1):
            for c in range(a.StartColumn, a.EndColumn + 1):
                errors[f"{r},{c}"] = sheet.getCellByPosition(c, r).getError()
    return {"values": values, "arrays": arrays, "formulas": formulas, "errors": errors}


def put(sheet, doc, addr, value):
    cell = sheet.getCellRangeByName(addr)
    if isinstance(value, dict) and "date" in value:
        d = dt.date.fromisoformat(value["date"])
        cell.setValue((d - dt.date(1899, 12, 30)).days)
        fmt = doc.getNumberFormats().queryKey("YYYY-MM-DD", doc.CharLocale, False)
        if fmt == -1:
            fmt = doc.getNumberFormats().addNew("YYYY-MM-DD", doc.CharLocale)
        cell.NumberFormat = fmt
    elif isinstance(value, dict) and "bool" in value:
        cell.setFormula("=TRUE()" if value["bool"] else "=FALSE()")
    elif isinstance(value, str):
        cell.setString(value)
    else:
        cell.setValue(float(value))


def finish(doc, job, out):
    t0 = time.perf_counter()
    if job.get("recalc"):
        doc.calculateAll()
    out["seconds"]["recalc"] = time.perf_counter() - t0
    if job.get("read"):
        t0 = time.perf_counter()
        out["sheets"] = {name: read_sheet(doc.Sheets.getByName(name)) for name in doc.Sheets.ElementNames}
        out["seconds"]["read"] = time.perf_counter() - t0
    for target in job.get("save", ()):
        t0 = time.perf_counter()
        doc.storeToURL(url(target["path"]), (prop("FilterName", target["filter"]),))
        out["seconds"]["save"] = time.perf_counter() - t0


def run_job(desktop, ctx, job):
    out = {"kind": job["kind"], "seconds": {}}
    hidden = (prop("Hidden", True),)
    if job["kind"] == "open":
        t0 = time.perf_counter()
        doc = desktop.loadComponentFromURL(url(job["path"]), "_blank", 0, hidden)
        out["seconds"]["open"] = time.perf_counter() - t0
    elif job["kind"] == "build":
        doc = desktop.loadComponentFromURL("private:factory/scalc", "_blank", 0, hidden)
        sheets = doc.Sheets
        for i, (name, spec) in enumerate(job["sheets"].items()):
            if i == 0:
                sheets.getByIndex(0).Name = name
            else:
                sheets.insertNewByName(name, i)
            sheet = sheets.getByName(name)
            for addr, value in spec.get("cells", ()):
                put(sheet, doc, addr, value)
            for addr, text in spec.get("formulas", ()):
                sheet.getCellRangeByName(addr).setFormula(text)
        for name, spec in job["sheets"].items():
            for rng, text in spec.get("arrays", ()):
                sheets.getByName(name).getCellRangeByName(rng).setArrayFormula(text)
    elif job["kind"] == "functions":
        descriptions = ctx.ServiceManager.createInstanceWithContext(
            "com.sun.star.sheet.FunctionDescriptions", ctx)
        wanted, found = set(job["names"]), {}
        for i in range(descriptions.getCount()):
            d = {p.Name: p.Value for p in descriptions.getByIndex(i)}
            if d["Name"] in wanted:
                found[d["Name"]] = {"category": d["Category"], "description": d["Description"],
                                    "args": [[a.Name, a.Description, a.IsOptional] for a in d["Arguments"]]}
        out["functions"] = found
        return out
    elif job["kind"] == "bench":
        return bench(desktop, job, out)
    else:
        raise ValueError(f"unknown job kind {job['kind']!r}")
    try:
        finish(doc, job, out)
    finally:
        doc.close(True)
    return out


def bench(desktop, job, out):
    doc = desktop.loadComponentFromURL("private:factory/scalc", "_blank", 0, (prop("Hidden", True),))
    try:
        sheet = doc.Sheets.getByIndex(0)
        rows = job["rows"]
        sheet.getCellRangeByPosition(0, 0, len(rows[0]) - 1, len(rows) - 1).setDataArray(
            tuple(tuple(r) for r in rows))
        out["calls"] = {}
        for rng, text in job["formulas"]:
            best, first = float("inf"), None
            for _ in range(job.get("repeat", 3)):
                target = sheet.getCellRangeByName(rng)
                corner = target.getCellByPosition(0, 0)
                t0 = time.perf_counter()
                target.setArrayFormula(text)
                first = [corner.getValue(), corner.getString()]
                best = min(best, time.perf_counter() - t0)
                target.clearContents(FORMULA_FLAG)
            out["calls"][text] = {"seconds": best, "first": first}
    finally:
        doc.close(True)
    return out


def main():
    with open(sys.argv[1], encoding="utf-8") as fh:
        spec = json.load(fh)
    t0 = time.perf_counter()
    proc, ctx, desktop = connect(spec["soffice"], spec["env"])
    started = time.perf_counter() - t0
    results = []
    try:
        for job in spec["jobs"]:
            results.append(run_job(desktop, ctx, job))
    finally:
        try:
            desktop.terminate()
        except Exception:  # noqa: BLE001 - the bridge drops when soffice exits
            pass
        try:
            proc.wait(60)
        except subprocess.TimeoutExpired:
            proc.kill()
    with open(sys.argv[2], "w", encoding="utf-8") as fh:
        json.dump({"start_seconds": started, "results": results}, fh)


if __name__ == "__main__":
    main()
