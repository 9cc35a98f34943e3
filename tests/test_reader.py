"""watcher.refresh.reader: columns by header or letter, dates in both date systems, text cells read as missing
with a warning, trailing rows, errors naming workbook, sheet and column, and the openpyxl fallback.

External references: the date systems of ECMA-376 (Office Open XML, 5th ed., 2016), Part 1, 18.17.4.1
-- serial 0 is 1899-12-30 (for serials from 61) in the 1900 system and 1904-01-01 in the 1904 system, so
the same date's serials differ by 1,462 days; workbooks are built with xlsxwriter (an independent
writer) and read back with both parsers, which must agree with each other and with the dates written.
"""
from __future__ import annotations

import datetime as dt
import re
import zipfile
from pathlib import Path

import numpy as np
import pytest
import xlsxwriter
from openpyxl import Workbook, load_workbook

from sheetfns.errors import InputError, TocsinError
from watcher.refresh import reader
from watcher.refresh.errors import BookError
from watcher.refresh.reader import (
    ReaderError,
    column_index,
    column_letter,
    open_book,
    read_header,
    read_sheet,
)

SAMPLES = Path(__file__).resolve().parent.parent / "sample_workbooks"
BACKENDS = ("calamine", "openpyxl")


def _xlsx(path: Path, rows: list[list], *, sheet: str = "Data", date_1904: bool = False,
          origin: tuple[int, int] = (0, 0), extra_sheets: dict | None = None) -> Path:
    """A workbook written by xlsxwriter; datetimes get a date format; rows start at ``origin``."""
    wb = xlsxwriter.Workbook(str(path), {"date_1904": date_1904})
    day = wb.add_format({"num_format": "yyyy-mm-dd"})
    stamp = wb.add_format({"num_format": "yyyy-mm-dd hh:mm:ss"})
    for name, content in {sheet: rows, **(extra_sheets or {})}.items():
        ws = wb.add_worksheet(name)
        for i, row in enumerate(content):
            for j, v in enumerate(row):
                r, c = origin[0] + i, origin[1] + j
                if v is None:
                    continue
                if isinstance(v, dt.datetime):
                    ws.write_datetime(r, c, v, stamp)
                elif isinstance(v, dt.date):
                    ws.write_datetime(r, c, dt.datetime(v.year, v.month, v.day), day)
                elif isinstance(v, bool):
                    ws.write_boolean(r, c, v)
                elif isinstance(v, str):
                    ws.write_string(r, c, v)
                else:
                    ws.write_number(r, c, v)
    wb.close()
    return path


def _d(text: str) -> np.datetime64:
    return np.datetime64(text, "s")


# ------------------------------------------------------------------------------------- column names

def test_column_letters_round_trip(tmp_path):
    assert [column_letter(i) for i in (0, 25, 26, 27, 51, 52, 701, 702, 16383)] == \
        ["A", "Z", "AA", "AB", "AZ", "BA", "ZZ", "AAA", "XFD"]   # XFD: the last column (ECMA-376)
    assert all(column_index(column_letter(i)) == i for i in range(0, 16384, 97))
    assert column_index(" bc ") == 54
    with pytest.raises(InputError, match="column letter"):
        column_index("A1")
    path = _xlsx(Path(tmp_path) / "b.xlsx", [["Date", "Flag"], [dt.date(2024, 1, 1), 1]])
    with pytest.raises(ReaderError, match=r"'Flg' is outside the used columns A:B .*; did you mean 'Flag'\?"):
        read_sheet(path, "Data", ["Flg"])     # FLG is a column letter too, far to the right
    with pytest.raises(InputError, match="A to XFD"):
        column_index("XFE")


@pytest.mark.parametrize("backend", BACKENDS)
def test_columns_by_header_or_letter(tmp_path, backend):
    path = _xlsx(tmp_path / "b.xlsx", [["Day", " Passengers ", "ID"], [dt.date(2024, 1, 1), 5, 7],
                                       [dt.date(2024, 1, 2), 6, 8]])
    data = read_sheet(path, "Data", ["passengers", "c", "ID", "B"], date_column="a", backend=backend)
    assert data.backend == backend
    np.testing.assert_array_equal(data.columns["passengers"], [5.0, 6.0])
    np.testing.assert_array_equal(data.columns["B"], [5.0, 6.0])
    np.testing.assert_array_equal(data.columns["c"], [7.0, 8.0])
    # the header text "ID" wins over the column letter ID
    np.testing.assert_array_equal(data.columns["ID"], [7.0, 8.0])
    assert dict(data.letters) == {"passengers": "B", "c": "C", "ID": "C", "B": "B", "a": "A"}
    assert data.names["passengers"] == "Passengers" and data.names["a"] == "Day"
    assert data.headers == ("Day", "Passengers", "ID")
    assert list(data.dates) == [_d("2024-01-01"), _d("2024-01-02")]


def test_missing_column_names_workbook_sheet_and_closest_header(tmp_path):
    path = _xlsx(tmp_path / "ferry.xlsx", [["Date", "Passengers"], [dt.date(2024, 1, 1), 5]],
                 sheet="Daily")
    with pytest.raises(ReaderError) as err:
        read_sheet(path, "Daily", ["Pasengers"], date_column="Date")
    msg = str(err.value)
    assert "'Pasengers' not found" in msg and "sheet 'Daily'" in msg and "ferry.xlsx" in msg
    assert "did you mean 'Passengers'?" in msg
    with pytest.raises(ReaderError, match=r"date column 'When' not found .* the headers are 'Date', "):
        read_sheet(path, "Daily", ["Passengers"], date_column="When")
    with pytest.raises(ReaderError, match=r"^column 'E' is outside the used columns A:B of sheet 'Daily' "
                                          r"in ferry.xlsx$"):
        read_sheet(path, "Daily", ["E"])
    assert isinstance(err.value, InputError) and isinstance(err.value, TocsinError)


def test_duplicate_header_is_an_error_but_its_letter_works(tmp_path):
    path = _xlsx(tmp_path / "b.xlsx", [["Date", "Count", "count"], [dt.date(2024, 1, 1), 1, 2]])
    with pytest.raises(ReaderError, match="matches the header of columns B and C"):
        read_sheet(path, "Data", ["Count"])
    assert read_sheet(path, "Data", ["C"]).columns["C"][0] == 2.0


def test_missing_sheet_suggests_closest_and_matches_case_insensitively(tmp_path):
    path = _xlsx(tmp_path / "b.xlsx", [["Date", "x"], [dt.date(2024, 1, 1), 1]], sheet="Pump log")
    assert read_sheet(path, "PUMP LOG", ["x"]).sheet == "Pump log"
    with pytest.raises(ReaderError,
                       match=r"sheet 'Pump logs' not found in b.xlsx; did you mean 'Pump log'\?"):
        read_sheet(path, "Pump logs", ["x"])
    with pytest.raises(ReaderError, match=r"sheet 'Other' not found in b.xlsx; the sheets are 'Pump log'"):
        read_header(path, "Other")


@pytest.mark.parametrize("backend", BACKENDS)
def test_empty_sheet_and_header_without_data(tmp_path, backend):
    path = _xlsx(tmp_path / "b.xlsx", [["Date", "x"]], extra_sheets={"Blank": []})
    with pytest.raises(ReaderError, match=r"sheet 'Blank' in b.xlsx is empty"):
        read_sheet(path, "Blank", ["x"], backend=backend)
    with pytest.raises(ReaderError, match=r"sheet 'Data' in b.xlsx has a header row but no data"):
        read_sheet(path, "Data", ["x"], date_column="Date", backend=backend)


def test_missing_file_and_non_workbook(tmp_path):
    with pytest.raises(BookError, match="not found"):
        read_sheet(tmp_path / "nope.xlsx", "Data", ["x"])
    fake = tmp_path / "notes.xlsx"
    fake.write_text("just text", encoding="utf-8")
    with pytest.raises(BookError, match="notes.xlsx is not a workbook"):
        read_sheet(fake, "Data", ["x"])


# --------------------------------------------------------------------------------------------- cells

@pytest.mark.parametrize("backend", BACKENDS)
def test_text_in_numeric_column_is_missing_with_a_warning_per_cell_then_a_count(tmp_path, backend):
    rows = [["Date", "Level"]]
    for i in range(30):
        rows.append([dt.date(2024, 1, 1) + dt.timedelta(days=i), "n/a" if 5 <= i < 18 else float(i)])
    rows[2][1] = " 1150 "          # a number stored as text is a number
    rows[3][1] = True              # TRUE counts as 1
    path = _xlsx(tmp_path / "b.xlsx", rows)
    data = read_sheet(path, "Data", ["Level"], date_column="Date", backend=backend, max_warnings=10)
    level = data.columns["Level"]
    assert level[1] == 1150.0 and level[2] == 1.0 and level[0] == 0.0
    assert np.isnan(level[5:18]).all() and level[18] == 18.0
    # row i of the data is sheet row i + 2; 'n/a' sits in rows 7..19 (13 cells): 10 named, then a count
    assert data.warnings[0] == "B7: 'n/a' read as missing"
    assert data.warnings[9] == "B16: 'n/a' read as missing"
    assert data.warnings[10] == "... and 3 more cells in column B read as missing"
    assert len(data.warnings) == 11
    assert data.cell("Level", 5) == "B7"


@pytest.mark.parametrize("backend", BACKENDS)
def test_text_columns_keep_text_as_raw_objects_without_warnings(tmp_path, backend):
    rows = [["Date", "State"], [dt.date(2024, 1, 1), "alarm"], [dt.date(2024, 1, 2), 0],
            [dt.date(2024, 1, 3), None], [dt.date(2024, 1, 4), True], [dt.date(2024, 1, 5), " Alarm "]]
    path = _xlsx(tmp_path / "b.xlsx", rows)
    data = read_sheet(path, "Data", ["State"], date_column="Date", text_columns=["State"], backend=backend)
    assert data.warnings == ()
    assert list(data.raw["State"]) == ["alarm", 0.0, None, 1.0, " Alarm "]
    assert data.raw["State"].dtype == object
    np.testing.assert_array_equal(data.columns["State"], [np.nan, 0.0, np.nan, 1.0, np.nan])


@pytest.mark.parametrize("backend", BACKENDS)
def test_trailing_blank_rows_dropped_dated_blank_rows_kept(tmp_path, backend):
    rows = [["Date", "Value", "Note"],
            [dt.date(2024, 1, 1), 1, None],
            [dt.date(2024, 1, 2), None, None],          # interior gap
            [dt.date(2024, 1, 3), 3, None],
            [dt.date(2024, 1, 4), None, None],          # future periods: a date, no value
            [dt.date(2024, 1, 5), None, None],
            [None, None, None], [None, None, None],
            [None, None, "a note far below"]]           # other columns do not extend the data
    path = _xlsx(tmp_path / "b.xlsx", rows)
    data = read_sheet(path, "Data", ["Value"], date_column="Date", backend=backend)
    assert data.nrows == 5
    np.testing.assert_array_equal(data.columns["Value"], [1.0, np.nan, 3.0, np.nan, np.nan])
    assert data.dates[-1] == _d("2024-01-05")
    without_dates = read_sheet(path, "Data", ["Value"], backend=backend)
    assert without_dates.nrows == 3 and without_dates.dates is None


@pytest.mark.parametrize("backend", BACKENDS)
def test_table_not_at_a1_keeps_sheet_letters_and_rows(tmp_path, backend):
    rows = [["Date", "Value"], [dt.date(2024, 1, 1), "x"], [dt.date(2024, 1, 2), 2]]
    path = _xlsx(tmp_path / "b.xlsx", rows, origin=(2, 2))    # header in C3
    data = read_sheet(path, "Data", ["Value", "D"], date_column="C", backend=backend)
    assert data.header.row == 3 and data.first_row == 4
    assert data.headers == ("", "", "Date", "Value")
    assert data.letters["Value"] == "D"
    assert data.warnings == ("D4: 'x' read as missing",) * 2   # asked twice, under two names
    np.testing.assert_array_equal(data.columns["D"], [np.nan, 2.0])


# --------------------------------------------------------------------------------------------- dates

def _serials(path: Path) -> list[float]:
    with zipfile.ZipFile(path) as z:
        xml = z.read("xl/worksheets/sheet1.xml").decode()
    return [float(v) for v in re.findall(r'<c r="A\d+" s="\d+"><v>([^<]+)</v>', xml)]


@pytest.mark.parametrize("backend", BACKENDS)
def test_dates_in_both_date_systems(tmp_path, backend):
    dates = [dt.datetime(1904, 1, 2), dt.datetime(1999, 12, 31, 23, 59, 59), dt.datetime(2020, 2, 29),
             dt.datetime(2024, 3, 1, 6, 30)]
    rows = [["When", "x"]] + [[d, i] for i, d in enumerate(dates)]
    p1900 = _xlsx(tmp_path / "d1900.xlsx", rows)
    p1904 = _xlsx(tmp_path / "d1904.xlsx", rows, date_1904=True)
    # ECMA-376 Part 1, 18.17.4.1: the same date is 1,462 days lower in the 1904 system
    np.testing.assert_allclose(np.array(_serials(p1900)) - np.array(_serials(p1904)), 1462.0)
    assert _serials(p1900)[2] == 43890.0     # 2020-02-29 in the 1900 system (ECMA-376 18.17.4.1)
    expected = [np.datetime64(d, "s") for d in dates]
    for path in (p1900, p1904):
        data = read_sheet(path, "Data", ["x"], date_column="When", backend=backend)
        assert list(data.dates) == expected, path.name
        assert data.dates.dtype == np.dtype("datetime64[s]")


@pytest.mark.parametrize("date_1904", [False, True])
def test_serial_numbers_in_a_date_column_use_the_workbooks_date_system(tmp_path, date_1904):
    offset = 1462 if date_1904 else 0
    rows = [["Date", "x"], [45292 - offset, 1], [45293 - offset, 2]]   # 2024-01-01, 2024-01-02
    path = _xlsx(tmp_path / "b.xlsx", rows, date_1904=date_1904)
    for backend in BACKENDS:
        data = read_sheet(path, "Data", ["x"], date_column="Date", backend=backend)
        assert list(data.dates) == [_d("2024-01-01"), _d("2024-01-02")], backend
        system = "1904" if date_1904 else "1900"
        assert data.warnings == (f"date column A: 2 cells hold numbers, not dates; read them as serial "
                                 f"dates of the {system} date system (format the cells as dates to make "
                                 f"this explicit)",)


def test_years_iso_text_and_bad_dates(tmp_path):
    path = _xlsx(tmp_path / "b.xlsx", [["Year", "x"], [2001, 1], [2002, 2], [None, 3], [2004, 4]])
    data = read_sheet(path, "Data", ["x"], date_column="Year")
    assert list(data.dates[[0, 1, 3]]) == [_d("2001-01-01"), _d("2002-01-01"), _d("2004-01-01")]
    assert np.isnat(data.dates[2]) and data.warnings == ()
    path = _xlsx(tmp_path / "c.xlsx", [["Date", "x"], ["2024-03-01", 1], ["2024-03-02 06:00", 2],
                                       ["03/04/2024", 3], [dt.date(2024, 3, 4), 4]])
    for backend in BACKENDS:
        data = read_sheet(path, "Data", ["x"], date_column="Date", backend=backend)
        assert data.dates[0] == _d("2024-03-01") and data.dates[1] == _d("2024-03-02T06:00")
        assert np.isnat(data.dates[2]) and data.dates[3] == _d("2024-03-04")
        assert data.warnings == ("A4: '03/04/2024' is not a date (read as missing)",)


# ------------------------------------------------------------------------------------------ backends

def test_error_cells_are_missing(tmp_path):
    path = tmp_path / "e.xlsx"
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("Data")
    ws.write_row(0, 0, ["x"])
    ws.write_number(1, 0, 1)
    ws.write_formula(2, 0, "=1/0", None, "#DIV/0!")
    ws.write_formula(3, 0, "=2+3", None, 5)
    wb.close()
    cal = read_sheet(path, "Data", ["x"], backend="calamine")
    opx = read_sheet(path, "Data", ["x"], backend="openpyxl")
    for data in (cal, opx):     # a formula's cached value is read; an error value is missing
        np.testing.assert_array_equal(data.columns["x"], [1.0, np.nan, 5.0])
    assert cal.warnings == ()   # calamine reports error values as blank cells
    assert opx.warnings == ("A3: '#DIV/0!' read as missing",)


def test_both_backends_read_the_samples_identically():
    for name, sheet, cols, date in [("pump_station", "Pump log", ["high_level_alarm", "inflow",
                                                                  "planned_maintenance"], "date"),
                                    ("island_ferry", "Passengers", ["Passengers", "Wind (m/s)"], "Date")]:
        path = SAMPLES / f"{name}.xlsx"
        a = read_sheet(path, sheet, cols, date_column=date, text_columns=[cols[0]], backend="calamine")
        b = read_sheet(path, sheet, cols, date_column=date, text_columns=[cols[0]], backend="openpyxl")
        assert (a.nrows, a.first_row, a.headers, a.warnings) == (b.nrows, b.first_row, b.headers, b.warnings)
        assert np.array_equal(a.dates, b.dates)
        for k in cols:
            np.testing.assert_array_equal(a.columns[k], b.columns[k])
        assert list(a.raw[cols[0]]) == list(b.raw[cols[0]])
        # against openpyxl's own cell values, read independently
        wb = load_workbook(path, read_only=True)
        cells = [row for row in wb[sheet].iter_rows(min_row=2, values_only=True)]
        wb.close()                                      # read-only workbooks keep the file open
        assert a.nrows == len(cells)
        for j, k in enumerate(cols, start=1):
            want = [np.nan if row[j] is None else float(row[j]) for row in cells]
            np.testing.assert_array_equal(a.columns[k], want)


def test_pump_sample_booleans_and_blanks():
    data = read_sheet(SAMPLES / "pump_station.xlsx", "Pump log", ["high_level_alarm", "planned_maintenance"],
                      date_column="date")
    alarm = data.columns["high_level_alarm"]
    assert set(np.unique(alarm[~np.isnan(alarm)])) == {0.0, 1.0}
    assert np.isnan(alarm[-7:]).all() and not np.isnan(data.columns["planned_maintenance"]).any()
    assert data.dates[0] == _d("2019-01-01") and data.dates[-1] == _d("2025-01-07")


def test_falls_back_to_openpyxl_when_calamine_cannot(tmp_path, monkeypatch):
    path = _xlsx(tmp_path / "b.xlsx", [["Date", "x"], [dt.date(2024, 1, 1), 1]])
    import python_calamine

    class Broken:
        @staticmethod
        def from_path(*args, **kwargs):
            raise python_calamine.CalamineError("simulated parser failure")

    monkeypatch.setattr(python_calamine, "CalamineWorkbook", Broken)
    data = read_sheet(path, "Data", ["x"], date_column="Date")
    assert data.backend == "openpyxl" and data.columns["x"][0] == 1.0
    with pytest.raises(BookError, match="simulated parser failure"):
        read_sheet(path, "Data", ["x"], backend="calamine")


def test_falls_back_per_sheet_when_calamine_fails_on_a_sheet(tmp_path, monkeypatch):
    path = _xlsx(tmp_path / "b.xlsx", [["Date", "x"], [dt.date(2024, 1, 1), 1]])
    real = reader.Book._load
    calls = []

    def flaky(self, name):
        calls.append(self.backend)
        if self.backend == "calamine":
            raise RuntimeError("simulated sheet failure")
        return real(self, name)

    monkeypatch.setattr(reader.Book, "_load", flaky)
    with open_book(path) as book:
        assert book.read("Data", ["x"]).backend == "openpyxl"
    assert calls == ["calamine", "openpyxl"]


def test_book_serves_header_cells_and_data_from_one_parse(tmp_path, monkeypatch):
    path = _xlsx(tmp_path / "b.xlsx", [["Date", "x"], [dt.date(2024, 1, 1), True], [None, None]],
                 extra_sheets={"tocsin": [["job", "enabled"], ["a", False], [None, None], ["note", None]]})
    loads = []
    real = reader.Book._load
    monkeypatch.setattr(reader.Book, "_load", lambda self, name: loads.append(name) or real(self, name))
    with open_book(path) as book:
        assert book.sheet_names == ["Data", "tocsin"]
        assert book.header("Data").texts == ("Date", "x")
        assert book.cells("tocsin") == [["job", "enabled"], ["a", False], [None, None], ["note", None]]
        assert book.first_row("tocsin") == 1
        assert book.read("Data", ["x"]).columns["x"][0] == 1.0
    assert loads == ["tocsin", "Data"]      # the header row alone does not load the data sheet


@pytest.mark.parametrize("backend", BACKENDS)
def test_garbage_collector_paused_while_a_sheet_is_parsed_and_restored_after(tmp_path, backend):
    # the parse makes a list per row; the cyclic collector waits (module reader, _collector_paused)
    # and is back as it was afterwards, also when the parse fails
    import gc

    path = _xlsx(tmp_path / "g.xlsx", [["n"], [1.0], [2.0]])
    seen = []
    with open_book(path, backend=backend) as book:

        class Probe:
            def __init__(self, real):
                self.real = real

            def get_sheet_by_name(self, name):
                seen.append(gc.isenabled())
                return self.real.get_sheet_by_name(name)

            def __getattr__(self, attr):
                return getattr(self.real, attr)

            def __getitem__(self, name):
                seen.append(gc.isenabled())
                raise KeyError(name)

        if book._cal is not None:
            book._cal = Probe(book._cal)
            assert book.read("Data", ["n"]).columns["n"].tolist() == [1.0, 2.0]
        else:
            opx, book._opx = book._opx, Probe(None)
            with pytest.raises(KeyError):
                book._load("Data")
            book._opx = opx
        assert seen == [False] and gc.isenabled()
        gc.disable()
        try:
            book._grids.clear()
            book._load("Data")
            assert not gc.isenabled()         # left off when it was off
        finally:
            gc.enable()


def test_sheet_data_is_frozen(tmp_path):
    path = _xlsx(tmp_path / "b.xlsx", [["x"], [1]])
    data = read_sheet(path, "Data", ["x"])
    with pytest.raises(AttributeError):
        data.nrows = 3
    with pytest.raises(TypeError):
        data.columns["y"] = np.zeros(1)


def test_openpyxl_written_workbook(tmp_path):
    # the other writer the project uses: openpyxl (shared strings, inline strings, booleans)
    wb = Workbook()
    ws = wb.active
    ws.title = "Log"
    ws.append(["Date", "Flag"])
    ws.append([dt.date(2024, 1, 1), True])
    ws.append([dt.date(2024, 1, 2), "n/a"])
    wb.save(tmp_path / "o.xlsx")
    for backend in BACKENDS:
        data = read_sheet(tmp_path / "o.xlsx", "Log", ["Flag"], date_column="Date", backend=backend)
        np.testing.assert_array_equal(data.columns["Flag"], [1.0, np.nan])
        assert data.warnings == ("B3: 'n/a' read as missing",)


@pytest.mark.parametrize("bulk", [True, False])
def test_vectorised_date_column_matches_the_cell_by_cell_rules(bulk, monkeypatch):
    """The date column is converted in bulk (pandas for date cells, numpy for serial numbers); the
    result is the cell-by-cell rule of watcher.refresh.cells on every kind of cell (invented cells:
    dates and date-times with sub-second noise as parsers give them, serials, ISO text, junk, blanks)."""
    from watcher.refresh import columns
    from watcher.refresh.cells import serial_stamp, text_stamp
    from watcher.refresh.columns import dates_of

    monkeypatch.setattr(columns, "_use_pandas", lambda cells: bulk)     # pandas, or the cell loop

    rng = np.random.default_rng(5)
    start = dt.datetime(1900, 3, 1)
    col: list = []
    for i in range(3000):
        kind = i % 7
        stamp = start + dt.timedelta(days=float(rng.uniform(0, 60000)))
        col.append([stamp, stamp.date(), stamp.replace(microsecond=499_999 + i % 2),
                    float(rng.uniform(0, 80000)) if i % 3 else int(rng.integers(1, 80000)),
                    stamp.date().isoformat(), ["n/a", "", None, True][i % 4], 1e12][kind])

    def one(v):                     # the cell-by-cell rule, to the nearest second (half up)
        if isinstance(v, bool) or v is None or (isinstance(v, str) and not v.strip()):
            return None
        if isinstance(v, (int, float)):
            v = serial_stamp(v)
        elif isinstance(v, str):
            v = text_stamp(v)
        if v is None:
            return None
        if not isinstance(v, dt.datetime):
            v = dt.datetime(v.year, v.month, v.day)
        up = np.timedelta64(int(v.microsecond >= 500_000), "s")
        return np.datetime64(v.replace(microsecond=0), "s") + up

    got, msgs = dates_of(col, "A", 2, lambda: False, max_warnings=3)
    want = np.array([one(v) or np.datetime64("NaT") for v in col], dtype="datetime64[s]")
    assert (np.isnat(got) == np.isnat(want)).all()
    assert (got[~np.isnat(got)] == want[~np.isnat(want)]).all()
    bad = sum(1 for v in col if one(v) is None and not (v is None or v == ""))
    assert msgs[0].startswith("date column A: ") and msgs[-1] == (
        f"... and {bad - 3:,} more cells in column A is not a date (read as missing)")


def _grid_header(path: Path, sheet: str) -> reader.Header:
    with open_book(path) as book:
        book._grid(sheet)                   # the sheet read in full: the header as the full reader sees it
        return book.header(sheet)


@pytest.mark.parametrize("sample", ["island_ferry.xlsx", "bakery_sales.xlsx", "pump_station.xlsx",
                                    "formulas_demo.xlsx"])
def test_header_row_read_alone_is_the_full_readers(sample):
    """The header row read from the start of a sheet's part is the one the full reader finds, on every
    sheet of the sample workbooks (written by our generator) -- or the quick reading declines."""
    path = Path(__file__).resolve().parent.parent / "sample_workbooks" / sample
    with open_book(path) as book:
        names = book.sheet_names
    quick = 0
    for name in names:
        with open_book(path) as book:
            try:
                head = book.header(name)
            except ReaderError:
                continue
            was_quick = name not in book._grids
        quick += was_quick
        assert head == _grid_header(path, name), (sample, name)
    assert quick >= 1


def test_header_row_read_alone_by_writers_and_declined_where_unsure(tmp_path):
    """openpyxl and xlsxwriter (shared and inline strings, numbers as headers, blank rows above) give the
    full reader's header; a date or a styled number in the header row, or a blank last header cell
    with data beyond it, make the quick reading decline (the sheet is then read in full)."""
    wb = Workbook()
    ws = wb.active
    ws.title = "Data"
    ws.append([])
    ws.append([None, "Passengers", 2024, "  Wind  speed "])
    ws.append([1.0, 2.0, 3.0, 4.0])
    wb.save(tmp_path / "opx.xlsx")
    cases = {"opx.xlsx": True}
    for name, header, quick in (("dated.xlsx", ["Value", dt.date(2024, 1, 1)], False),
                                ("blank_last.xlsx", ["Value", "Other", None], False),
                                ("strings.xlsx", ["Value", "Other", "x"], True)):
        book = xlsxwriter.Workbook(str(tmp_path / name))
        sheet = book.add_worksheet("Data")
        fmt = book.add_format({"num_format": "yyyy-mm-dd"})
        for j, v in enumerate(header):
            if isinstance(v, dt.date):
                sheet.write_datetime(0, j, dt.datetime(v.year, v.month, v.day), fmt)
            elif v is not None:
                sheet.write(0, j, v)
        for j in range(3):
            sheet.write_number(1, j, j + 0.5)
        book.close()
        cases[name] = quick
    for name, quick in cases.items():
        with open_book(tmp_path / name) as book:
            head = book.header("Data")
            assert ("Data" not in book._grids) == quick, name
        assert head == _grid_header(tmp_path / name, "Data"), name


def test_a_big_read_imports_pandas_while_calamine_parses(tmp_path):
    # In a fresh interpreter (pandas not yet imported): reading a job's columns of a workbook from
    # PREFETCH_FROM bytes with a date column starts importing pandas in a thread (without one, it does
    # not); the columns read are those of a read without it. Dates written by xlsxwriter, an
    # independent writer (module docstring).
    import subprocess
    import sys

    path = _xlsx(tmp_path / "d.xlsx", [["date", "n"], *[[dt.date(2024, 1, 1) + dt.timedelta(days=i), float(i)]
                                                      for i in range(40)]])
    script = (
        "import sys, threading\n"
        "from watcher.refresh import reader\n"
        "assert 'pandas' not in sys.modules\n"
        f"plain = reader.read_sheet({str(path)!r}, 'Data', ['n'], date_column='date')\n"
        "assert 'pandas' not in sys.modules  # below PREFETCH_FROM (and 100,000 cells): no pandas\n"
        "reader.PREFETCH_FROM = 0\n"
        f"reader.read_sheet({str(path)!r}, 'Data', ['n'])\n"
        "assert 'pandas' not in sys.modules  # no date column: nothing needs pandas\n"
        f"data = reader.read_sheet({str(path)!r}, 'Data', ['n'], date_column='date')\n"
        "for t in threading.enumerate():\n"
        "    if t.name == 'tocsin-import-pandas':\n"
        "        t.join()\n"
        "assert 'pandas' in sys.modules\n"
        "assert (data.columns['n'] == plain.columns['n']).all() and (data.dates == plain.dates).all()\n"
        "print(len(data.dates), str(data.dates[-1]))\n")
    root = Path(__file__).resolve().parent.parent
    out = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, cwd=tmp_path,
                         env={**__import__("os").environ, "PYTHONPATH": str(root)}, timeout=120)
    assert out.returncode == 0, out.stderr
    assert out.stdout.split() == ["40", "2024-02-09T00:00:00"]
