"""The alert state machine (watcher/alert/state.py): when a job rings, and what its record keeps.

The rules are DESIGN.md §13 and the decisions in DEVELOPERS.md "Alerts"; the data are invented.
"""
from __future__ import annotations

import json

import pytest
from alerting import future, stored
from hypothesis import given, settings
from hypothesis import strategies as st

from sheetfns.scorecard import METHOD_LABELS
from watcher.alert import (
    CHANNELS,
    CLEARED,
    EVENT,
    NO_EVENT,
    RAISED,
    AlertSettingError,
    Reading,
    alert_method,
    alert_setting,
    decide,
    next_reading,
    settle,
)

BOTH = ("notify", "mail")


def reading(forecast: int, probability: float | None = None, **kw) -> Reading:
    return next_reading(future(forecast, probability, **kw), kw.get("method", "logistic"))


def step(record, forecast, *, channels=BOTH, delivered=None):
    """One refresh: decide, deliver to ``delivered`` (default: every pending channel), settle."""
    decision = decide(stored(record), None if forecast is None else reading(forecast), channels=channels)
    ok = decision.pending if delivered is None else [c for c in decision.pending if c in delivered]
    return decision, settle(decision.record, ok)


# ------------------------------------------------------------------------------------ first sight

def test_first_sight_of_an_event_rings_raised_to_every_channel():
    decision = decide(None, reading(1, 0.8), channels=BOTH)
    assert decision.change == RAISED and decision.pending == BOTH
    assert decision.record == {"state": EVENT, "method": "logistic", "period": "2026-12-03", "announced": {}}


def test_first_sight_of_no_event_rings_nothing_and_never_cleared():
    decision = decide(None, reading(0, 0.2), channels=BOTH)
    assert decision.change is None and decision.pending == ()
    assert decision.record["state"] == NO_EVENT


# ---------------------------------------------------------------------------- changes ring once

def test_raise_then_unchanged_then_clear_rings_exactly_twice():
    record, rung = None, []
    for forecast in (1, 1, 1, 1, 0, 0):
        decision, record = step(record, forecast)
        rung.append(decision.change)
    assert rung == [RAISED, None, None, None, CLEARED, None]
    assert record["announced"] == {"notify": NO_EVENT, "mail": NO_EVENT}


def test_ten_saves_a_forced_refresh_or_a_restart_ring_nothing_new():
    """The record is all the memory there is: the same record and forecast give the same silence,
    however often and by whichever process (a restart reads the record back from the workbook)."""
    _, record = step(None, 1)
    for _ in range(10):
        decision, again = step(record, 1)
        assert decision.change is None and again == record


def test_a_new_period_with_the_same_state_rings_nothing():
    _, record = step(None, 1)
    decision = decide(stored(record), reading(1, period="2026-12-04", origin="2026-12-03"), channels=BOTH)
    assert decision.change is None and decision.record["period"] == "2026-12-04"


# -------------------------------------------------------------------------------------- retries

def test_a_failed_channel_is_retried_and_the_other_is_not_told_twice():
    decision, record = step(None, 1, delivered={"mail"})
    assert decision.pending == BOTH and record["announced"] == {"mail": EVENT}
    decision, record = step(record, 1, delivered={"mail"})  # notify still failing
    assert decision.change == RAISED and decision.pending == ("notify",)
    decision, record = step(record, 1)  # notify works again
    assert decision.pending == ("notify",) and record["announced"] == {"mail": EVENT, "notify": EVENT}
    decision, record = step(record, 1)
    assert decision.change is None


def test_a_state_that_flips_back_before_the_retry_sends_nothing():
    _, record = step(None, 1, delivered=set())  # raised, but nobody got it
    assert record["announced"] == {}
    decision, record = step(record, 0)
    assert decision.change is None and decision.pending == ()


def test_a_retry_after_a_flip_carries_the_new_state():
    """mail got "raised", notify did not; the forecast clears: mail hears "cleared", notify nothing."""
    _, record = step(None, 1, delivered={"mail"})
    decision, record = step(record, 0)
    assert decision.change == CLEARED and decision.pending == ("mail",)


def test_channels_not_configured_keep_what_they_were_told():
    """A hand-run refresh without channels beside the watcher must not swallow the watcher's alert."""
    _, record = step(None, 1, channels=())
    assert record == {"state": EVENT, "method": "logistic", "period": "2026-12-03", "announced": {}}
    decision, _ = step(record, 1, channels=("mail",))
    assert decision.change == RAISED and decision.pending == ("mail",)


def test_a_channel_added_later_hears_of_a_standing_event_but_not_of_an_old_clearing():
    _, record = step(None, 1, channels=("mail",))
    decision, record = step(record, 1, channels=BOTH)
    assert decision.pending == ("notify",)
    _, record = step(None, 0, channels=("mail",))
    decision, _ = step(record, 0, channels=BOTH)
    assert decision.pending == ()


# ---------------------------------------------------------------------------- nothing to ring on

def test_no_reading_keeps_the_record_and_rings_nothing():
    """A job that fails for one save does not ring cleared and raised again."""
    _, record = step(None, 1)
    decision, held = step(record, None)
    assert decision.change is None and held == record
    decision, _ = step(held, 1)
    assert decision.change is None


def test_off_drops_the_record_and_on_again_is_a_first_sight():
    _, record = step(None, 1)
    assert decide(stored(record), reading(1), channels=BOTH, setting="off").record is None
    decision = decide(None, reading(1), channels=BOTH)
    assert decision.change == RAISED


@pytest.mark.parametrize("bad", ["event", {"state": "maybe"}, {"state": EVENT, "announced": "all"},
                                 {"state": EVENT, "announced": {"notify": "yes", "pager": EVENT}}, [1, 2]])
def test_a_damaged_record_reads_as_far_as_it_goes(bad):
    decision = decide(bad, reading(1), channels=BOTH)
    assert decision.record["state"] == EVENT and set(decision.record["announced"]) <= set(CHANNELS)
    json.dumps(decision.record)


def test_the_record_is_plain_json():
    _, record = step(None, 1, delivered={"notify"})
    assert stored(record) == record and json.loads(json.dumps(record)) == record


# ------------------------------------------------------------------------------------ the reading

def test_next_reading_takes_the_first_future_period_of_the_method():
    got = next_reading(future(1, 0.7, more=3), "logistic")
    assert got == Reading("logistic", "2026-12-03", "2026-12-02", 1, 0.7)
    assert next_reading(future(0, None, period=57, origin=56), "logistic").period == 57


@pytest.mark.parametrize("fut, method", [
    (future(1, 0.7), None), ([], "logistic"), (None, "logistic"), (future(1, 0.7), "markov"),
    (future(None, None), "logistic"), (future(float("nan"), None), "logistic"), (future(2, None), "logistic"),
    (future(True, None), "logistic"), ([{"period": "x"}], "logistic"), (["junk"], "logistic"),
])
def test_next_reading_is_none_without_a_usable_forecast(fut, method):
    assert next_reading(fut, method) is None


def test_next_reading_passes_a_null_probability_and_drops_an_impossible_one():
    assert next_reading(future(1, None, method="naive_roll"), "naive_roll").probability is None
    assert next_reading(future(1, 1.5), "logistic").probability is None
    assert next_reading(future(1, float("nan")), "logistic").probability is None


# ------------------------------------------------------------------------------------ the setting

@pytest.mark.parametrize("text, want", [(None, "best"), ("", "best"), ("  ", "best"), ("Best", "best"),
                                        ("OFF", "off"), ("logistic", "logistic"),
                                        ("naive roll", "naive_roll"), ("Majority-Roll", "majority_roll")])
def test_alert_setting_reads_like_the_other_settings(text, want):
    assert alert_setting(text, methods=METHOD_LABELS) == want


@pytest.mark.parametrize("text", ["loud", "logit", 3, "best of"])
def test_alert_setting_names_the_allowed_values(text):
    with pytest.raises(AlertSettingError, match=r"`alert` must be best, off or a method key \(naive, "):
        alert_setting(text, methods=METHOD_LABELS)


def test_alert_method_resolves_best_off_and_a_named_method():
    assert alert_method("best", "logistic") == "logistic"
    assert alert_method("best", None) is None  # no method beat the base rate: nothing to ring on
    assert alert_method("off", "logistic") is None
    assert alert_method("naive_roll", "logistic") == "naive_roll"


# ------------------------------------------------------------------------------ property: no spam

events = st.lists(st.tuples(st.sampled_from([0, 1, None]), st.booleans(), st.booleans()), max_size=30)


@settings(max_examples=300, deadline=None)
@given(events)
def test_each_channel_is_told_every_change_once_and_nothing_twice(sequence):
    """Invented sequences of forecasts and delivery outcomes. Per channel: what it is sent differs from
    what it last received (no repeats), always matches the current state, and the first thing a channel
    ever receives is "raised" (it never hears "cleared" of an event it did not hear of)."""
    record = None
    told: dict[str, str] = {}
    for forecast, notify_ok, mail_ok in sequence:
        works = {"notify": notify_ok, "mail": mail_ok}
        decision, record = step(record, forecast, delivered={c for c in BOTH if works[c]})
        for channel in decision.pending:
            state = EVENT if decision.change == RAISED else NO_EVENT
            assert state == decision.record["state"]
            assert told.get(channel, NO_EVENT) != state
            if works[channel]:
                told[channel] = state
        if record is not None:
            assert {c: s for c, s in record["announced"].items()} == told


# ------------------------------------------------------------------------ ring_job without channels

def quiet_ring(record, fut, *, setting="best", best="logistic"):
    from watcher.alert.deliver import Dispatcher
    from watcher.alert.ring import ring_job
    return ring_job(stored(record), workbook="w.xlsx", job="j", setting=setting, best_method=best,
                    future=fut, cutoff=0.5, verdict="", dispatcher=Dispatcher())


def test_ring_job_without_channels_records_the_state_and_says_when_to_write():
    first = quiet_ring(None, future(1, 0.9))
    assert first.alert is None and first.deliveries == () and first.changed
    assert first.record == {"state": EVENT, "method": "logistic", "period": "2026-12-03", "announced": {}}
    assert not quiet_ring(first.record, future(1, 0.8)).changed  # nothing new: no write
    assert quiet_ring(first.record, future(0, 0.1)).changed
    off = quiet_ring(first.record, future(1, 0.9), setting="off")
    assert off.record is None and off.changed and not quiet_ring(None, None, setting="off").changed


def test_ring_job_notes_a_named_method_without_a_forecast():
    rung = quiet_ring(None, future(1, 0.9), setting="markov")
    assert rung.note == ("alert: the markov method has no forecast for the next period, so this job "
                         "cannot ring") and rung.record is None
    assert quiet_ring(None, future(1, 0.9), best=None).note == ""  # best without a best method: silent
    assert quiet_ring(None, None).note == ""  # a failed job says so elsewhere
