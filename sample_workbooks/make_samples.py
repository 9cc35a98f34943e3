"""Generate tocsin's three invented demo workbooks (seeded, so every run writes the same bytes).

Usage::

    python sample_workbooks/make_samples.py [OUTDIR]      # default: the folder of this script

Each workbook holds one data sheet (kept clean: a header row, then one row per period) and a ``tocsin``
sheet with the job table (a header row of every setting name, one row per job, blank = default, and a
one-line note below the table). The series are invented but built so that the logistic model has
something to find:

* ``island_ferry.xlsx`` -- sheet "Passengers": daily passengers on an island ferry route, 2017-2024,
  with a weekly and a yearly pattern, a slow upward trend, holiday peaks, windy-day dips and
  autocorrelated noise; a few days are blank (counter fault) and the next 7 dates are listed with blank
  passengers (future periods). Jobs: "second sailing" (``>=1150``, the capacity of one sailing) and
  "second sailing, 7 days" (the same event a week ahead, validated from 2024-01-01).
* ``bakery_sales.xlsx`` -- sheet "Weekly sales": sourdough loaves sold per week, 2015-2024, with
  growth, a Christmas peak, a summer-holiday dip and mean-reverting noise; 4 future weeks. Job:
  "sales fall" (``fall``: fewer loaves than the week before).
* ``pump_station.xlsx`` -- sheet "Pump log": a daily log 2019-2024 of a sewage pump station: a 0/1
  ``high_level_alarm`` (one stretch logged as TRUE/FALSE, a few blank days), the daily ``inflow`` (rain
  driven; alarms follow high inflow) and a ``planned_maintenance`` flag that is known ahead and so is
  filled for the 7 future days as well. Job: "high level alarm" (``=1``, predictor ``inflow``, known
  ahead ``planned_maintenance``, a missed alarm costing four times a false alarm).

Determinism: numpy ``default_rng`` with a fixed seed per workbook, fixed document properties (created and
modified), and a zip repacked with fixed member timestamps. Needs only numpy and openpyxl.
"""
from __future__ import annotations

import datetime as dt
import io
import sys
import zipfile
from pathlib import Path

import numpy as np
from openpyxl import Workbook
from openpyxl.styles import Font
from openpyxl.utils import get_column_letter

# The job table's header row: every setting of the job table, in the documented order.
SETTINGS = ("job", "data_sheet", "date_column", "value_column", "event", "min_run", "season", "cycle",
            "harmonics", "validation", "horizon", "lags", "predictors", "known_ahead", "refit", "alert",
            "cutoff", "cost_false_alarm", "cost_miss", "output_sheet", "enabled")

NOTE = ("Blank settings take their defaults. One row per forecast job; the table ends at the first "
        "blank row. See the README, section 'The job table'.")

FIXED_TIME = dt.datetime(2025, 1, 1, 0, 0, 0)   # document properties of every sample
ZIP_TIME = (2025, 1, 1, 0, 0, 0)                 # timestamp of every zip member
DATE_FORMAT = "yyyy-mm-dd"

SEEDS = {"island_ferry": 20170101, "bakery_sales": 20150105, "pump_station": 20190101}


# --------------------------------------------------------------------------------------------- helpers

def _days(start: dt.date, end: dt.date) -> list[dt.date]:
    return [start + dt.timedelta(days=i) for i in range((end - start).days + 1)]


def _easter(year: int) -> dt.date:
    """Gregorian Easter Sunday (the anonymous Gregorian computus; common practice)."""
    a, b, c = year % 19, year // 100, year % 100
    d, e = b // 4, b % 4
    f = (b + 8) // 25
    g = (b - f + 1) // 3
    h = (19 * a + b - d - g + 15) % 30
    i, k = c // 4, c % 4
    el = (32 + 2 * e + 2 * i - h - k) % 7
    m = (a + 11 * h + 22 * el) // 451
    month = (h + el - 7 * m + 114) // 31
    day = (h + el - 7 * m + 114) % 31 + 1
    return dt.date(year, month, day)


def _ar1(rng: np.random.Generator, n: int, phi: float, sd: float) -> np.ndarray:
    """A stationary AR(1) series with innovation sd ``sd``."""
    eps = rng.normal(0.0, sd, n)
    out = np.empty(n)
    out[0] = eps[0] / np.sqrt(1.0 - phi * phi)
    for t in range(1, n):
        out[t] = phi * out[t - 1] + eps[t]
    return out


def _day_of_year(dates: list[dt.date]) -> np.ndarray:
    return np.array([d.timetuple().tm_yday for d in dates], dtype=float)


# ------------------------------------------------------------------------------------------ the series

def ferry_rows(rng: np.random.Generator) -> list[list[object]]:
    """Daily passengers (and mean wind) on an island ferry route, 2017-2024, plus 7 future dates."""
    dates = _days(dt.date(2017, 1, 1), dt.date(2024, 12, 31))
    n = len(dates)
    years = np.arange(n) / 365.25
    doy = _day_of_year(dates)
    level = 690.0 * np.exp(0.025 * years)                                 # about +3% a year
    angle = 2 * np.pi * (doy - 196.0) / 365.25                           # peak in mid July
    yearly = np.exp(0.45 * np.cos(angle) + 0.08 * np.cos(2 * angle))
    weekly = np.array([0.90, 0.86, 0.88, 0.96, 1.14, 1.22, 1.06])[[d.weekday() for d in dates]]
    holiday = np.ones(n)
    index = {d: i for i, d in enumerate(dates)}

    def bump(day: dt.date, factor: float) -> None:
        if day in index:
            holiday[index[day]] *= factor

    for year in range(2017, 2025):
        easter = _easter(year)
        for off, f in ((-3, 1.15), (-2, 1.35), (-1, 1.30), (0, 1.25), (1, 1.30)):   # Thu..Mon
            bump(easter + dt.timedelta(days=off), f)
        bump(easter + dt.timedelta(days=39), 1.30)                                 # Ascension Day
        for off, f in ((48, 1.20), (49, 1.25), (50, 1.25)):                        # Whitsun weekend
            bump(easter + dt.timedelta(days=off), f)
        midsummer_eve = dt.date(year, 6, 19) + dt.timedelta(days=(4 - dt.date(year, 6, 19).weekday()) % 7)
        bump(midsummer_eve, 1.45)
        bump(midsummer_eve + dt.timedelta(days=1), 1.30)
        for day, f in ((22, 1.20), (23, 1.35), (24, 0.80), (25, 0.45), (26, 1.10), (27, 1.25),
                       (28, 1.20), (29, 1.20), (30, 1.25), (31, 0.90)):
            bump(dt.date(year, 12, day), f)
        bump(dt.date(year, 1, 1), 0.55)
        bump(dt.date(year, 1, 2), 1.25)
        # the island's summer festival: the first Saturday of August and the day before
        festival = dt.date(year, 8, 1) + dt.timedelta(days=(5 - dt.date(year, 8, 1).weekday()) % 7)
        bump(festival - dt.timedelta(days=1), 1.35)
        bump(festival, 1.50)

    # mean wind speed: windier in winter, persistent from day to day; strong wind keeps people home
    wind = np.exp(np.log(6.5) + 0.25 * np.cos(2 * np.pi * (doy - 15.0) / 365.25) + _ar1(rng, n, 0.6, 0.28))
    weather = np.exp(-0.035 * np.clip(wind - 8.0, 0.0, None))
    noise = np.exp(_ar1(rng, n, 0.65, 0.075))
    passengers = np.round(level * yearly * weekly * holiday * weather * noise)

    blank = set(rng.choice(np.arange(400, n - 400), size=4, replace=False).tolist())   # counter faults
    rows: list[list[object]] = [["Date", "Passengers", "Wind (m/s)"]]
    for i, d in enumerate(dates):
        rows.append([d, None if i in blank else int(passengers[i]), round(float(wind[i]), 1)])
    for k in range(1, 8):                                                 # future periods
        rows.append([dates[-1] + dt.timedelta(days=k), None, None])
    return rows


def bakery_rows(rng: np.random.Generator) -> list[list[object]]:
    """Weekly sourdough loaves sold at a bakery, weeks starting Monday, 2015-2024, plus 4 future weeks."""
    start = dt.date(2015, 1, 5)
    dates = [start + dt.timedelta(weeks=i) for i in range(522)]
    n = len(dates)
    years = np.arange(n) / 52.18
    doy = _day_of_year(dates)
    level = 340.0 * np.exp(0.045 * years) * (1.0 + 0.10 / (1.0 + np.exp(-(years - 5.5) * 3.0)))
    angle = 2 * np.pi * (doy - 30.0) / 365.25
    seasonal = np.exp(0.05 * np.cos(angle) + 0.03 * np.sin(2 * angle))
    factor = np.ones(n)
    for i, d in enumerate(dates):
        end = d + dt.timedelta(days=6)
        if dt.date(d.year, 7, 20) <= d <= dt.date(d.year, 8, 24):         # summer holidays: locals away
            factor[i] *= 0.84
        if d <= dt.date(d.year, 12, 24) <= end or (d.month == 12 and d.day >= 15):
            factor[i] *= 1.30                                             # Christmas orders
        if d.month == 1 and d.day <= 7:
            factor[i] *= 0.80                                             # quiet first week of the year
        easter = _easter(d.year)
        if d <= easter - dt.timedelta(days=2) <= end:
            factor[i] *= 1.12
    noise = np.exp(_ar1(rng, n, 0.25, 0.07))                               # mostly week-to-week noise
    loaves = np.round(level * seasonal * factor * noise)
    rows: list[list[object]] = [["Week starting", "Loaves sold"]]
    for i, d in enumerate(dates):
        rows.append([d, int(loaves[i])])
    for k in range(1, 5):
        rows.append([dates[-1] + dt.timedelta(weeks=k), None])
    return rows


def pump_rows(rng: np.random.Generator) -> list[list[object]]:
    """A pump station's daily log 2019-2024: high-level alarm, inflow, planned maintenance; 7 future days."""
    dates = _days(dt.date(2019, 1, 1), dt.date(2024, 12, 31))
    future = [dates[-1] + dt.timedelta(days=k) for k in range(1, 8)]
    n, m = len(dates), len(dates) + len(future)
    doy = _day_of_year(dates)
    # rain: wet days cluster (a two-state chain), wetter from October to February
    wetness = 0.5 + 0.5 * np.cos(2 * np.pi * (doy - 15.0) / 365.25)
    wet = np.zeros(n, dtype=bool)
    for t in range(1, n):
        p = (0.55 if wet[t - 1] else 0.22) + 0.12 * wetness[t]
        wet[t] = rng.random() < p
    rain = np.where(wet, rng.gamma(0.9, 6.0 + 5.0 * wetness), 0.0)     # mm per day
    quick = np.zeros(n)
    slow = np.zeros(n)
    for t in range(n):
        quick[t] = (0.45 * quick[t - 1] if t else 0.0) + 55.0 * rain[t]
        slow[t] = (0.94 * slow[t - 1] if t else 300.0) + 6.0 * rain[t]
    weekday = np.array([1.0, 1.0, 1.0, 1.0, 1.0, 0.94, 0.92])[[d.weekday() for d in dates]]
    base = 1850.0 * weekday * np.exp(rng.normal(0.0, 0.03, n))
    inflow = np.round(base + quick + slow)

    # planned maintenance: the first Tuesday of every month (pumps on one duty pump), plus a two-day
    # overhaul every spring; the schedule is published ahead, so the future rows carry it too
    all_dates = dates + future
    maint = np.zeros(m, dtype=int)
    for i, d in enumerate(all_dates):
        if d.weekday() == 1 and d.day <= 7:
            maint[i] = 1
        if d.month == 4 and d.weekday() in (2, 3) and 8 <= d.day <= 15:
            maint[i] = 1

    # the wet well fills when inflow outruns the pumps; yesterday's inflow still drains in
    z_today = (inflow - 2400.0) / 500.0
    z_yesterday = np.concatenate([[0.0], z_today[:-1]])
    alarm = np.zeros(n, dtype=int)
    for t in range(n):
        persistence = 1.0 if t and alarm[t - 1] else 0.0
        eta = -3.6 + 1.1 * z_today[t] + 0.9 * z_yesterday[t] + 1.8 * maint[t] + persistence
        alarm[t] = int(rng.random() < 1.0 / (1.0 + np.exp(-eta)))

    # one logger firmware wrote TRUE/FALSE for a spring; a few days were lost
    as_bool = {i for i, d in enumerate(dates) if dt.date(2021, 3, 1) <= d <= dt.date(2021, 5, 31)}
    lost = set(rng.choice(np.arange(60, n - 60), size=6, replace=False).tolist())
    rows: list[list[object]] = [["date", "high_level_alarm", "inflow", "planned_maintenance"]]
    for i, d in enumerate(dates):
        if i in lost:
            value: object = None
        elif i in as_bool:
            value = bool(alarm[i])
        else:
            value = int(alarm[i])
        rows.append([d, value, int(inflow[i]), int(maint[i])])
    for k, d in enumerate(future):
        rows.append([d, None, None, int(maint[n + k])])
    return rows


# ------------------------------------------------------------------------------------------- the jobs

def _job(**settings: object) -> list[object]:
    unknown = set(settings) - set(SETTINGS)
    if unknown:
        raise ValueError(f"unknown settings {sorted(unknown)}")
    return [settings.get(name) for name in SETTINGS]


JOBS = {
    "island_ferry": [
        _job(job="second sailing", data_sheet="Passengers", date_column="Date", value_column="Passengers",
             event=">=1150"),
        _job(job="second sailing, 7 days", data_sheet="Passengers", date_column="Date",
             value_column="Passengers", event=">=1150", horizon=7, validation=dt.date(2024, 1, 1)),
    ],
    "bakery_sales": [
        _job(job="sales fall", data_sheet="Weekly sales", date_column="Week starting",
             value_column="Loaves sold", event="fall"),
    ],
    "pump_station": [
        _job(job="high level alarm", data_sheet="Pump log", date_column="date",
             value_column="high_level_alarm", event="=1", predictors="inflow",
             known_ahead="planned_maintenance", cost_false_alarm=1, cost_miss=4),
    ],
}

DATA = {
    "island_ferry": ("Passengers", ferry_rows, (12, 12, 11)),
    "bakery_sales": ("Weekly sales", bakery_rows, (14, 12)),
    "pump_station": ("Pump log", pump_rows, (12, 17, 9, 20)),
}


# ------------------------------------------------------------------------------------------ the files

def build_workbook(name: str) -> Workbook:
    """The workbook ``name`` (one of ``SEEDS``) as an openpyxl object, not yet saved."""
    sheet_name, make_rows, widths = DATA[name]
    rows = make_rows(np.random.default_rng(SEEDS[name]))
    wb = Workbook()
    ws = wb.active
    ws.title = sheet_name
    for row in rows:
        ws.append(row)
    for cell in ws[1]:
        cell.font = Font(bold=True)
    for r in range(2, len(rows) + 1):
        ws.cell(row=r, column=1).number_format = DATE_FORMAT
    for j, w in enumerate(widths, start=1):
        ws.column_dimensions[get_column_letter(j)].width = w
    ws.freeze_panes = "A2"

    table = wb.create_sheet("tocsin")
    table.append(list(SETTINGS))
    for cell in table[1]:
        cell.font = Font(bold=True)
    for job in JOBS[name]:
        table.append(job)
    for row in table.iter_rows(min_row=2):
        for cell in row:
            if isinstance(cell.value, dt.date):
                cell.number_format = DATE_FORMAT
            elif isinstance(cell.value, str) and cell.value.startswith("="):
                cell.data_type = "s"          # a criterion such as "=1" is text, not a formula,
                cell.quotePrefix = True       # shown and typed as '=1 in a spreadsheet program
    table.cell(row=len(JOBS[name]) + 3, column=1, value=NOTE).font = Font(italic=True)
    for j, setting in enumerate(SETTINGS, start=1):
        longest = max([len(setting)] + [len(str(job[j - 1])) for job in JOBS[name] if job[j - 1] is not None])
        table.column_dimensions[get_column_letter(j)].width = min(max(longest + 2, 8), 26)

    wb.properties.creator = "tocsin sample generator"
    wb.properties.title = f"tocsin sample: {name.replace('_', ' ')}"
    wb.properties.created = FIXED_TIME
    wb.properties.modified = FIXED_TIME
    wb.properties.lastModifiedBy = "tocsin sample generator"
    return wb


def workbook_bytes(name: str) -> bytes:
    """The bytes of the sample ``name``: openpyxl's package, repacked with fixed timestamps and the
    fixed document properties (openpyxl stamps 'modified' with the clock when it saves)."""
    from openpyxl.xml.functions import tostring

    wb = build_workbook(name)
    raw = io.BytesIO()
    wb.save(raw)
    wb.properties.modified = FIXED_TIME
    core = tostring(wb.properties.to_tree())
    out = io.BytesIO()
    with zipfile.ZipFile(raw) as src, zipfile.ZipFile(out, "w") as dst:
        for info in src.infolist():
            data = core if info.filename == "docProps/core.xml" else src.read(info.filename)
            fixed = zipfile.ZipInfo(info.filename, date_time=ZIP_TIME)
            fixed.compress_type = zipfile.ZIP_DEFLATED
            fixed.external_attr = 0o600 << 16
            dst.writestr(fixed, data)
    return out.getvalue()


def write_samples(outdir: Path | str | None = None) -> list[Path]:
    """Write the three samples into ``outdir`` (default: this script's folder); return their paths."""
    folder = Path(outdir) if outdir is not None else Path(__file__).resolve().parent
    folder.mkdir(parents=True, exist_ok=True)
    paths = []
    for name in SEEDS:
        path = folder / f"{name}.xlsx"
        path.write_bytes(workbook_bytes(name))
        paths.append(path)
    return paths


def main(argv: list[str] | None = None) -> int:
    args = sys.argv[1:] if argv is None else argv
    if len(args) > 1 or (args and args[0] in ("-h", "--help")):
        print("usage: python make_samples.py [OUTDIR]", file=sys.stderr)
        return 2
    for path in write_samples(args[0] if args else None):
        print(path)
    # The spreadsheet-function demo is built with xlsxwriter (the test extra) and tocsin's own
    # functions for its cached values; without them the three refresh samples are still written.
    sys.path.insert(0, str(Path(__file__).resolve().parent))
    try:
        from make_formulas_demo import write_formulas_demo
    except ImportError as exc:
        print(f"formulas_demo.xlsx not rebuilt ({exc}); install '.[test]' to rebuild it", file=sys.stderr)
    else:
        print(write_formulas_demo(args[0] if args else None))
    return 0


if __name__ == "__main__":
    sys.exit(main())
