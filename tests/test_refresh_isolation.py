"""One bad job never stops the others (issues 10 and 11), end to end through ``tocsin refresh`` and
``tocsin check``: a sheet name the writer refuses (``History``), control characters in job names, a
damaged or hostile data sheet (flipped bytes in its zip member, an entity-expansion DTD, a member whose
declared size lies), a job reading another job's output sheet. Each fails its own job with the row and
the setting named; the other jobs are written (their numbers checked against the core by
``test_refresh.check_book``); ``check`` refuses what ``refresh`` refuses.

Data: the bakery sample's weekly sales (invented, ``sample_workbooks/make_samples.py``) and statsmodels'
``macrodata`` (US quarterly 1959-2009, FRED data compiled by S. Seabold, shipped in
statsmodels.datasets). The damaged packages are built here from those workbooks.
"""
from __future__ import annotations

import json
import struct
import zipfile
from pathlib import Path

import pytest
from test_refresh import (
    GDP_JOB,
    SAMPLES,
    _edit_job_table,
    check_book,
    grid_calamine,
    job_table,
    macro_book,
    macrodata_rows,
    run_cli,
    sheet_part_bytes,
    write_book,
)

from watcher.refresh import jobs
from watcher.xlsx import package
from watcher.xlsx.spec import check_sheet_name

RISE = {**GDP_JOB, "job": "gdp rise", "event": "rise"}


def reports(out: str) -> dict[str, dict]:
    """The jobs of the one workbook of a ``refresh --json`` report, by name."""
    [book] = json.loads(out)
    return {j["job"]: j for j in book["jobs"]}


def no_internal_error(*texts: str) -> None:
    for text in texts:
        assert "internal error" not in text and "Traceback" not in text, text


# --------------------------------------------------------------------------- the writer's name rule

def test_history_as_output_sheet_fails_that_job_alone(tmp_path, capsys):
    """The bakery's weekly sales with the sample's job (output_sheet set to 'History', a name the
    writer refuses) and a second job: before, the whole workbook failed with no row named."""
    with pytest.raises(ValueError):
        check_sheet_name("History")
    sales = grid_calamine(SAMPLES / "bakery_sales.xlsx", "Weekly sales")
    fall = {"job": "sales fall", "data_sheet": "Weekly sales", "date_column": "Week starting",
            "value_column": "Loaves sold", "event": "fall", "output_sheet": "History"}
    rise = {**fall, "job": "sales rise", "event": "rise", "output_sheet": None}
    path = write_book(tmp_path / "bakery.xlsx", {"Weekly sales": sales, "tocsin": job_table(fall, rise)})

    code, out, err = run_cli(capsys, "check", str(path))
    assert code == 1
    assert ("`output_sheet` must be a sheet name the workbook can hold; got 'History' in row 2 of sheet "
            "tocsin") in err
    code, out, err = run_cli(capsys, "refresh", "--json", str(path))
    no_internal_error(out, err)
    assert code == 1 and json.loads(out)[0]["status"] == "refreshed"
    rep = reports(out)
    assert rep["sales rise"]["status"] == "ok"
    assert rep["sales fall"]["status"] == "failed"
    assert "'History' in row 2 of sheet tocsin" in rep["sales fall"]["message"]
    assert "sheet name 'History' is reserved" in rep["sales fall"]["message"]   # the writer's reason
    names = package.Package.open(path).sheet_names
    assert "History" not in names and "sales rise forecast" in names
    check_book(path, all_valid=False)   # the good job's numbers are the core's


# ----------------------------------------------------------------------------- names of the jobs

def test_control_characters_in_job_names_fail_their_rows_alone(tmp_path, capsys):
    bell = {**GDP_JOB, "job": "bell\x07"}
    newline = {**GDP_JOB, "job": "two\nlines", "horizon": 0}       # a second error in that row
    path = macro_book(tmp_path / "names.xlsx", bell, newline, RISE)
    code, out, err = run_cli(capsys, "check", str(path))
    assert code == 1
    assert "`job` must be plain text without control characters; got 'bell\\x07' in row 2" in err
    code, out, err = run_cli(capsys, "refresh", "--json", str(path))
    no_internal_error(out, err)
    assert code == 1
    rep = reports(out)
    assert rep["gdp rise"]["status"] == "ok"
    assert rep["bell\x07"]["status"] == "failed" and "row 2" in rep["bell\x07"]["message"]
    assert rep["two lines"]["status"] == "failed"
    assert "`horizon` must be a whole number >= 1; got 0 in row 3" in rep["two lines"]["message"]
    assert "\x07" not in err                  # the terminal shows the name escaped: no bell rings
    names = package.Package.open(path).sheet_names
    assert {"gdp rise forecast", "bell- forecast", "two lines forecast"} <= set(names)
    assert all(check_sheet_name(n) == n for n in names)
    check_book(path, all_valid=False)


# ------------------------------------------------------------------------- a damaged data sheet

_BOMB = ('<!DOCTYPE w [<!ENTITY a "aaaaaaaaaa">' + "".join(
    f'<!ENTITY {chr(98 + k)} "{("&" + chr(97 + k) + ";") * 10}">' for k in range(8)) + "]>")
"""An entity-expansion ("billion laughs") DTD: 10**9 characters from a few hundred bytes."""


def _damage(path: Path, member: str, how: str) -> None:
    """Rewrite the package with ``member`` damaged: 'flip' (bytes of its compressed data flipped),
    'dtd' (an expanding DTD, the entity used in a cell) or 'size' (its declared size a lie)."""
    with zipfile.ZipFile(path) as z:
        infos = z.infolist()
        parts = {i.filename: z.read(i.filename) for i in infos}
    if how == "dtd":
        xml = parts[member].decode()
        at = xml.index("<worksheet")
        xml = xml[:at] + _BOMB + xml[at:]
        parts[member] = xml.replace("<sheetData>", '<sheetData><row r="5000"><c r="Z5000" t="inlineStr">'
                                                   "<is><t>&i;</t></is></c></row>", 1).encode()
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as z:
        for info in infos:
            z.writestr(info.filename, parts[info.filename])
    raw = bytearray(path.read_bytes())
    with zipfile.ZipFile(path) as z:
        info = z.getinfo(member)
    local = info.header_offset
    if how == "flip":                  # 40 bytes inside the deflate stream (local header is 30 + name)
        start = local + 30 + len(info.filename.encode()) + 16
        for k in range(start, start + 40):
            raw[k] ^= 0x5A
    elif how == "size":                # ECMA-376 packages are zip files (APPNOTE 4.3.7, 4.3.12)
        central = raw.rfind(b"PK\x01\x02", 0, raw.rfind(member.encode()))
        struct.pack_into("<I", raw, central + 24, 10)
        struct.pack_into("<I", raw, local + 22, 10)
    path.write_bytes(bytes(raw))


def _member_by_order(path: Path, sheet: str) -> str:
    """The zip member of a worksheet written by xlsxwriter (it numbers the parts in sheet order)."""
    names = package.Package.open(path).sheet_names
    return f"xl/worksheets/sheet{list(names).index(sheet) + 1}.xml"


@pytest.mark.parametrize("how", ["flip", "dtd", "size"])
def test_damaged_data_sheet_fails_its_job_alone(tmp_path, capsys, how):
    other = {**RISE, "data_sheet": "Copy"}
    path = macro_book(tmp_path / f"{how}.xlsx", GDP_JOB, other, extra={"Copy": macrodata_rows()})
    _damage(path, _member_by_order(path, "Macro"), how)
    code, out, err = run_cli(capsys, "check", str(path))
    no_internal_error(out, err)
    assert code == 1
    assert "`data_sheet` must name a sheet with a header row and data; got 'Macro' in row 2" in err
    code, out, err = run_cli(capsys, "refresh", "--json", str(path))
    no_internal_error(out, err)
    rep = reports(out)
    assert code == 1 and json.loads(out)[0]["status"] == "refreshed"
    assert rep["gdp rise"]["status"] == "ok"
    assert rep["gdp fall"]["status"] == "failed"
    message = rep["gdp fall"]["message"]
    assert "sheet 'Macro' in " in message and "damaged or unsafe" in message
    check_book(path, readers={"calamine": grid_calamine}, all_valid=False)  # openpyxl reads every part


# ------------------------------------------------------------------- one job reading another's output

def test_a_job_reading_another_jobs_output_is_the_readers_error(tmp_path, capsys):
    path = macro_book(tmp_path / "chain.xlsx", GDP_JOB)
    code, out, err = run_cli(capsys, "refresh", str(path))
    assert code == 0, err
    col = {s: i + 1 for i, s in enumerate(jobs.SETTINGS)}

    def add_reader(ws):
        for setting, value in {"job": "reader", "data_sheet": "gdp fall forecast", "value_column": "B",
                               "event": ">0"}.items():
            ws.cell(3, col[setting], value)

    _edit_job_table(path, add_reader)
    written = sheet_part_bytes(path, "gdp fall forecast")
    code, out, err = run_cli(capsys, "check", str(path))
    assert code == 1 and "job in row 2" in err and "got 'gdp fall forecast' in row 3" in err
    code, out, err = run_cli(capsys, "refresh", "--json", str(path))
    rep = reports(out)
    assert code == 1
    assert rep["gdp fall"]["status"] == "unchanged"               # not blamed, not rewritten
    assert sheet_part_bytes(path, "gdp fall forecast") == written
    message = rep["reader"]["message"]
    assert rep["reader"]["status"] == "failed"
    assert message.startswith("`data_sheet` must be a sheet of data, not tocsin's output: 'gdp fall "
                              "forecast' is the forecast sheet of the job in row 2; got 'gdp fall forecast' "
                              "in row 3")


def test_a_user_sheet_read_by_one_job_and_written_by_another_blames_the_writer(tmp_path, capsys):
    """The other way round: the sheet is the user's data, so the job writing over it is at fault."""
    reader = {**RISE, "data_sheet": "Copy"}
    writer = {**GDP_JOB, "output_sheet": "Copy"}
    path = macro_book(tmp_path / "over.xlsx", writer, reader, extra={"Copy": macrodata_rows()})
    code, out, err = run_cli(capsys, "refresh", "--json", str(path))
    rep = reports(out)
    assert code == 1 and rep["gdp rise"]["status"] == "ok"
    assert rep["gdp fall"]["status"] == "failed" and "`output_sheet`" in rep["gdp fall"]["message"]
    check_book(path, all_valid=False)
