"""The forecast sheet's parts that the end-to-end tests (tests/test_refresh.py) meet only on the samples:
no future period, periods ahead further than the horizon, the residual of the base rate, the left
panel's width. Built from simulated series (seeded), named as such; read from the SheetSpec."""
from __future__ import annotations

import datetime as dt

import numpy as np

from sheetfns.scorecard import PROBABILITY_METHODS, Settings, evaluate
from watcher.refresh.forecast_sheet import forecast_sheet, panel_width, table_col
from watcher.refresh.layout import SheetContext
from watcher.xlsx.spec import Cells, Table

CTX = SheetContext(job="j", sheet="j forecast", profile_sheet="j profile", data_sheet="D", value_name="v",
                   event_text="v =1", horizon=1, refreshed_at=dt.datetime(2026, 1, 1))


def _texts(spec) -> list[str]:
    return [v for b in spec.blocks if isinstance(b, Cells) for row in b.rows for v, _ in row
            if isinstance(v, str)]


def _tables(spec) -> dict[tuple[str, ...], Table]:
    return {b.header: b for b in spec.blocks if isinstance(b, Table) and b.header}


def _chain(n: int, future: int, seed: int = 2) -> np.ndarray:
    rng = np.random.default_rng(seed)
    y = np.zeros(n)
    for t in range(1, n):
        y[t] = rng.random() < (0.7 if y[t - 1] else 0.2)
    y[n - future:] = np.nan
    return y


def test_no_future_period_says_so_and_the_row_table_follows_the_panel():
    y = _chain(300, 0)
    ev = evaluate(y, train_size=200)
    spec = forecast_sheet(CTX, ev, dates=None, values=y, events=y)
    assert any(t.startswith("forecasts for the periods ahead: none, the data end with an observed period")
               for t in _texts(spec))
    assert not any(h[:2] == ("period", "made at") for h in _tables(spec))
    row_table = next(b for b in spec.blocks if isinstance(b, Table) and b.row == 0)
    assert row_table.col == table_col(ev) == panel_width(ev) + 1
    widest = max(b.col + b.width for b in spec.blocks if isinstance(b, Table) and b is not row_table)
    assert widest <= panel_width(ev) < row_table.col


def test_periods_beyond_the_horizon_are_made_at_the_last_observation():
    # horizon 2 and five blank rows: rows 300, 301 from origins 298, 299; 302-304 from 299 (the
    # benchmarks fill them, the models stop at the horizon)
    y = _chain(305, 5)
    ev = evaluate(y, train_size=200, settings=Settings(horizon=2))
    spec = forecast_sheet(CTX, ev, dates=None, values=y, events=y)
    tables = _tables(spec)
    labels = tuple(m.label for m in ev.methods)
    zero_one = tables[("period", "made at", *labels)]
    assert zero_one.columns[0].values == tuple(f"row {i}" for i in range(301, 306))
    assert zero_one.columns[1].values == ("row 299", "row 300", "row 300", "row 300", "row 300")
    chain = zero_one.columns[2 + labels.index("two-state chain")].values
    assert np.isfinite(chain[:2]).all() and np.isnan(chain[2:]).all()
    naive = zero_one.columns[2 + labels.index("rolling naive")].values
    assert np.isfinite(naive).all()
    bold = zero_one.columns[2 + labels.index("rolling naive")].bold
    assert bold is None or (bold == (naive == 1.0)).all()          # an event forecast is bold
    chance = [m for m in ev.methods if m.key in PROBABILITY_METHODS]
    probs = tables[("period", "made at", "majority share", "rolling share", "two-state chain", "logistic")]
    assert [m.key for m in chance] == ["majority", "majority_roll", "markov", "logistic"]
    np.testing.assert_array_equal(probs.columns[4].values, ev.method("markov").prob[300:])


def test_the_residual_is_the_base_rates_when_no_method_is_named():
    rng = np.random.default_rng(14)            # independent events: nothing beats the share
    y = np.r_[(rng.random(1200) < 0.3).astype(float), np.nan]
    ev = evaluate(y, train_size=900)
    assert ev.best is None
    spec = forecast_sheet(CTX, ev, dates=None, values=y, events=y)
    row_table = next(b for b in spec.blocks if isinstance(b, Table) and b.row == 0)
    assert row_table.header[-1] == "residual (majority share)"
    np.testing.assert_array_equal(row_table.columns[-1].values, y - ev.method("majority").prob)
    assert row_table.columns[-1].fmt == "dec3"
    assert "probability" not in " ".join(h for h in row_table.header if "majority" in h)
