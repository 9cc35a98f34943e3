"""What an alert says: the JSON a ``--notify`` command reads on its standard input, and the plain-text mail.

The JSON (one object, UTF-8, one line, RFC 8259; no NaN)::

    {"workbook": "/srv/share/ferry.xlsx", "job": "ferry-capacity", "state": "raised",
     "period": "2026-12-03", "origin": "2026-12-02", "method": "logistic", "forecast": 1,
     "probability": 0.713, "cutoff": 0.5, "verdict": "...", "caution": "Caution: ..."}

``state`` is ``"raised"`` (the forecast turned to event) or ``"cleared"`` (back to no event); ``forecast``
is the method's 0/1 forecast for ``period``, made from the data through ``origin``. ``probability`` is
null for a 0/1 method (naive or majority vote: they state no chance), and so is ``cutoff`` then (the
cutoff turns a probability into the 0/1 forecast; without a probability there is none).

The mail is plain text (no HTML): the subject says raised/cleared, the job and the period
(``tocsin: RAISED ferry-capacity for 2026-12-03``); the body lists the same fields in words and ends
with the caution. Nothing from the workbook can reach a mail header as more than text: control
characters (a line break in a job name) become spaces, and the recipients are the operator's.
"""
from __future__ import annotations

import json
import math
import textwrap
import unicodedata
from collections.abc import Sequence
from dataclasses import asdict, dataclass
from typing import TYPE_CHECKING, Any

from sheetfns.scorecard import METHOD_LABELS
from watcher.alert.state import CLEARED, RAISED, Reading
from watcher.refresh.texts import CAUTION

if TYPE_CHECKING:
    from email.message import EmailMessage

__all__ = ["Alert", "build_alert"]

WIDTH = 76  # body line length (RFC 5322, 2.1.1: lines should be at most 78 characters)
SUBJECT_JOB = 80  # characters of the job name in the subject


@dataclass(frozen=True)
class Alert:
    """One alert: a job's forecast for its next period turned (raised) or turned back (cleared)."""

    workbook: str
    job: str
    state: str  # "raised" or "cleared"
    period: str | int
    origin: str | int
    method: str
    forecast: int
    probability: float | None
    cutoff: float | None
    verdict: str
    caution: str = CAUTION

    def as_dict(self) -> dict[str, Any]:
        """The alert as a JSON-able dict, fields in the documented order."""
        return asdict(self)

    def to_json(self) -> str:
        """The alert as one line of JSON (what a ``--notify`` command reads on its standard input)."""
        return json.dumps(self.as_dict(), ensure_ascii=False, allow_nan=False)

    @property
    def subject(self) -> str:
        """``tocsin: RAISED <job> for <period>``, on one line."""
        return f"tocsin: {self.state.upper()} {_line(self.job, SUBJECT_JOB)} for {_period(self.period)}"

    @property
    def text(self) -> str:
        """The mail body: the fields in words, then the verdict, then the caution."""
        label = METHOD_LABELS.get(self.method, self.method)
        method = label if label == self.method else f"{label} ({self.method})"
        turned = ("turned from no event to event" if self.state == RAISED
                  else "turned back from event to no event")
        if self.probability is None:
            chance = f"none stated: the {label} forecast is a 0/1 forecast, not a probability"
        else:
            chance = f"{_percent(self.probability)}"
            if self.cutoff is not None:
                chance += f" (an event is forecast above the cutoff of {_percent(self.cutoff)})"
        rows = [
            ("Alert", f"{self.state}: the forecast for the next period {turned}"),
            ("Workbook", _line(self.workbook)),
            ("Job", _line(self.job)),
            ("Period", _period(self.period)),
            ("Made from", f"the data through {_period(self.origin)}" if self.origin != "" else "-"),
            ("Method", method),
            ("Forecast", "event" if self.forecast == 1 else "no event"),
            ("Probability", chance),
        ]
        lines = [f"tocsin {self.state} an alert for the job {_line(self.job)!r}.", ""]
        for name, value in rows:
            lines.extend(textwrap.wrap(value, WIDTH, initial_indent=f"{name + ':':<13}",
                                       subsequent_indent=" " * 13) or [f"{name}:"])
        if self.verdict:
            lines += ["", *textwrap.wrap("Verdict: " + _line(self.verdict), WIDTH)]
        lines += ["", *textwrap.wrap(self.caution, WIDTH)]
        return "\n".join(lines) + "\n"

    def mail(self, *, sender: str, recipients: Sequence[str]) -> EmailMessage:
        """The alert as a plain-text mail from ``sender`` to ``recipients`` (the operator's addresses)."""
        from email.message import EmailMessage  # lazy: only a mail needs the email package
        from email.utils import formatdate, make_msgid

        msg = EmailMessage()
        msg["Subject"] = self.subject
        msg["From"] = sender
        msg["To"] = ", ".join(recipients)
        msg["Date"] = formatdate(localtime=True)
        msg["Message-ID"] = make_msgid("tocsin", domain=sender.rpartition("@")[2] or None)
        msg.set_content(self.text)
        return msg


def build_alert(reading: Reading, change: str, *, workbook: str, job: str, cutoff: float | None,
                verdict: str = "") -> Alert:
    """The alert for ``change`` (``"raised"`` or ``"cleared"``) from the alert method's ``reading``.

    ``cutoff`` is the job's cutoff; it is reported only with a probability.
    """
    if change not in (RAISED, CLEARED):
        raise ValueError(f"`change` must be {RAISED!r} or {CLEARED!r}; got {change!r}")
    probability = reading.probability
    if cutoff is not None and not math.isfinite(cutoff):
        cutoff = None
    return Alert(workbook=str(workbook), job=str(job), state=change, period=reading.period,
                 origin=reading.origin, method=reading.method, forecast=reading.forecast,
                 probability=probability, cutoff=cutoff if probability is not None else None,
                 verdict=str(verdict or ""))


def _line(text: Any, limit: int | None = None) -> str:
    """``text`` on one line: control and format characters (line breaks among them) become spaces."""
    out = " ".join("".join(" " if unicodedata.category(c).startswith("C") else c for c in str(text)).split())
    if limit is not None and len(out) > limit:
        out = out[:limit - 3] + "..."
    return out


def _period(period: str | int) -> str:
    return f"row {period}" if isinstance(period, int) else _line(period, 40)


def _percent(p: float) -> str:
    """71.3 %, 50 %; never a rounded 0 % or 100 % for a chance that is neither."""
    value = 100 * p
    text = f"{value:.1f}".removesuffix(".0")
    if text == "0" and value > 0:
        return "under 0.1 %"
    if text == "100" and value < 100:
        return "over 99.9 %"
    return f"{text} %"
