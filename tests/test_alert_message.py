"""What an alert says (watcher/alert/message.py): its JSON and its plain-text mail.

Outside references: RFC 8259 (JSON: no NaN, UTF-8) read back with the standard library's strict parser;
RFC 5322 (internet message format: a header field is one logical line; 2.1.1 line length) and
RFC 2047 (non-ASCII header text) read back with the standard library's ``email`` parser.
"""
from __future__ import annotations

import email
import email.policy
import json

import pytest
from alerting import future

from watcher.alert.message import Alert, build_alert
from watcher.alert.state import CLEARED, RAISED, next_reading
from watcher.refresh.layout import CAUTION

FIELDS = ["workbook", "job", "state", "period", "origin", "method", "forecast", "probability", "cutoff",
          "verdict", "caution"]
VERDICT = "logistic did best on the validation period (Brier skill +0.21 against the majority share)."


def make(job="ferry-capacity", change=RAISED, forecast=1, probability=0.713, method="logistic", **kw):
    reading = next_reading(future(forecast, probability, method=method, **kw), method)
    return build_alert(reading, change, workbook="/srv/share/ferry.xlsx", job=job, cutoff=0.5,
                       verdict=VERDICT)


def parse(alert: Alert, **kw):
    raw = alert.mail(sender="tocsin@example.org", recipients=["ops@example.org", "duty@example.org"],
                     **kw).as_bytes()
    return raw, email.message_from_bytes(raw, policy=email.policy.default)


def one_line(text: str) -> str:
    return " ".join(text.split())


# ------------------------------------------------------------------------------------------ JSON

def test_json_has_the_fields_in_order_and_parses_strictly():
    alert = make()
    text = alert.to_json()
    assert "\n" not in text
    got = json.loads(text, parse_constant=lambda c: pytest.fail(f"non-standard JSON constant {c}"))
    assert list(got) == FIELDS
    assert got == {"workbook": "/srv/share/ferry.xlsx", "job": "ferry-capacity", "state": "raised",
                   "period": "2026-12-03", "origin": "2026-12-02", "method": "logistic", "forecast": 1,
                   "probability": 0.713, "cutoff": 0.5, "verdict": VERDICT, "caution": CAUTION}


def test_a_01_method_reports_neither_a_probability_nor_a_cutoff():
    got = json.loads(make(method="naive_roll", probability=None).to_json())
    assert got["probability"] is None and got["cutoff"] is None and got["forecast"] == 1


def test_a_cleared_alert_carries_forecast_0_and_a_row_number_period():
    got = json.loads(make(change=CLEARED, forecast=0, probability=0.31, period=57, origin=56).to_json())
    assert (got["state"], got["forecast"], got["period"], got["origin"]) == ("cleared", 0, 57, 56)


def test_the_caution_is_the_one_caution_text():
    assert make().caution is CAUTION and "not a substitute for official warnings" in CAUTION


def test_a_job_name_with_quotes_and_line_breaks_stays_exact_in_json():
    job = 'pump "A"\n; rm -rf / $(x) `y` \u00e9t\u00e9'
    assert json.loads(make(job=job).to_json())["job"] == job


def test_an_unknown_change_is_a_programming_error():
    reading = next_reading(future(1, 0.7), "logistic")
    with pytest.raises(ValueError, match="`change` must be 'raised' or 'cleared'; got 'rang'"):
        build_alert(reading, "rang", workbook="w", job="j", cutoff=0.5)


# ------------------------------------------------------------------------------------------ mail

def test_subject_says_raised_or_cleared_the_job_and_the_period():
    assert make().subject == "tocsin: RAISED ferry-capacity for 2026-12-03"
    assert make(change=CLEARED, forecast=0, period=57).subject == "tocsin: CLEARED ferry-capacity for row 57"


def test_mail_is_plain_text_with_the_fields_in_words_ending_with_the_caution():
    raw, msg = parse(make())
    assert not msg.is_multipart() and msg.get_content_type() == "text/plain"
    assert b"<html" not in raw.lower()
    assert msg["Subject"] == "tocsin: RAISED ferry-capacity for 2026-12-03"
    assert msg["To"] == "ops@example.org, duty@example.org" and msg["From"] == "tocsin@example.org"
    body = msg.get_content()
    for words in ("Workbook:    /srv/share/ferry.xlsx", "Job:         ferry-capacity",
                  "Period:      2026-12-03", "Made from:   the data through 2026-12-02",
                  "Method:      logistic", "Forecast:    event",
                  "Probability: 71.3 % (an event is forecast above the cutoff of 50 %)"):
        assert words in body
    assert one_line(VERDICT) in one_line(body)
    assert one_line(body).endswith(one_line(CAUTION))
    assert max(len(line) for line in body.splitlines()) <= 78  # RFC 5322, 2.1.1


def test_mail_of_a_01_method_says_it_states_no_chance():
    body = parse(make(method="naive_roll", probability=None))[1].get_content()
    assert "Method:      rolling naive (naive_roll)" in body
    assert "none stated: the rolling naive forecast is a 0/1 forecast, not a probability" in one_line(body)
    assert "%" not in body


@pytest.mark.parametrize("p, words", [(0.5, "50 %"), (0.0004, "under 0.1 %"), (0.99996, "over 99.9 %"),
                                      (0.0, "0 %"), (1.0, "100 %")])
def test_probabilities_read_as_a_person_reads_a_chance(p, words):
    body = parse(make(probability=p))[1].get_content()
    assert f"Probability: {words}" in body


def test_a_job_name_cannot_add_a_header_or_a_recipient():
    """RFC 5322: a header field ends at CRLF, so a line break in a job name would start a new field."""
    raw, msg = parse(make(job="pump\r\nBcc: thief@example.net\nX-Evil: 1"))
    assert msg["Bcc"] is None and msg["X-Evil"] is None
    assert b"\nBcc:" not in raw and b"\nX-Evil:" not in raw
    assert msg["Subject"] == "tocsin: RAISED pump Bcc: thief@example.net X-Evil: 1 for 2026-12-03"
    assert msg["To"] == "ops@example.org, duty@example.org"


def test_non_ascii_job_names_travel_encoded_and_read_back():
    """RFC 2047 encoded words in the subject; a UTF-8 body."""
    raw, msg = parse(make(job="f\u00e4hre \u00d6land"))
    assert b"Subject: tocsin: RAISED =?utf-8?" in raw  # an RFC 2047 encoded word, not raw 8-bit text
    assert msg["Subject"] == "tocsin: RAISED f\u00e4hre \u00d6land for 2026-12-03"
    assert "f\u00e4hre \u00d6land" in msg.get_content()


def test_a_very_long_job_name_is_cut_in_the_subject_only():
    job = "x" * 300
    alert = make(job=job)
    assert len(alert.subject) < 120 and alert.subject.endswith("... for 2026-12-03")
    assert json.loads(alert.to_json())["job"] == job
