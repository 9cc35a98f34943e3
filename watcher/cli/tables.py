"""What the ``tocsin`` command prints: one line per job, scorecards as terminal tables, JSON reports."""
from __future__ import annotations

import math
from typing import Any

from sheetfns.scorecard import SCORE_ROWS, best_mask


def _shown(name: str) -> str:
    """A name as the terminal should print it: control characters escaped (a bell in a job name must
    not ring, a newline must not start a line of its own)."""
    return "".join(ch if ch.isprintable() else ascii(ch)[1:-1] for ch in name)


def _pct(p: float | None) -> str:
    return "-" if p is None or (isinstance(p, float) and math.isnan(p)) else f"{p:.0%}"


WARNINGS_SHOWN = 5
"""Warning sentences printed under a job before a count of the rest takes over."""


def _next(j: Any) -> str:
    """The next period's forecast of the best method in words: a chance for a method that states one,
    the 0/1 forecast for one that does not (a naive or majority-vote forecast is never a chance)."""
    if not j.next_period:
        return "no future period in the data"
    if j.next_forecast is not None or not j.best_key:
        return f"next period {j.next_period}: {_pct(j.next_forecast)} chance of the event"
    first = j.future[0]["forecasts"].get(j.best_key) if j.future else None
    if first is None:
        return f"next period {j.next_period}: no forecast"
    return f"next period {j.next_period}: {'event' if first['forecast'] else 'no event'} forecast"


def _alert_text(alert: dict[str, Any] | None) -> str | None:
    """The job's alert in this refresh, on one line (None when nothing rang and nothing failed)."""
    if not alert or not (alert.get("rang") or alert.get("failures")):
        return None
    sent = ", ".join(alert.get("delivered") or ())
    text = (f"alert {alert.get('rang') or 'due'} ({alert.get('method')}, {alert.get('period')}): "
            + (f"sent to {sent}" if sent else "not sent"))
    if alert.get("failures"):
        text += f"; {len(alert['failures'])} failed (tried again at the next refresh)"
    return text


def refresh_text(rep: Any) -> str:
    """One line for the workbook, then one line per job, its warnings (one line each, capped) and its
    alert."""
    head = f"{rep.path.name}: {rep.status}" + (f" ({rep.message})" if rep.message else "") + \
        f" in {rep.duration_s:.1f} s"
    lines = [head]
    for j in rep.jobs:
        if j.status == "failed":
            lines.append(f"  {_shown(j.name)}: FAILED: {_shown(j.message)}")
            continue
        lines.append(f"  {_shown(j.name)}: {j.status}; {_next(j)} (best: {j.best_method or 'none named'})")
        warnings = list(getattr(j, "warnings", ()))
        lines += [f"    warning: {_shown(w)}" for w in warnings[:WARNINGS_SHOWN]]
        if len(warnings) > WARNINGS_SHOWN:
            more = len(warnings) - WARNINGS_SHOWN
            lines.append(f"    ... and {more} more warning{'s' * (more > 1)} (see --json or the sheet's "
                         "notes)")
        alert = _alert_text(getattr(j, "alert", None))
        if alert:
            lines.append(f"    {_shown(alert)}")
    return "\n".join(lines)


def refresh_errors(rep: Any) -> list[str]:
    """The errors of a refresh, one line each, for stderr: the workbook's, then each failed job's."""
    name = rep.path.name
    out = [f"{name}: {rep.message}"] if rep.status in ("failed", "nojobs") else []
    if rep.status in ("busy", "conflict", "readonly"):  # not refreshed this time
        out.append(f"{name}: not refreshed: {rep.message}")
    out += [f"{name}: job {j.name!r}: {j.message}" for j in rep.jobs if j.status == "failed"]
    return [_shown(line) for line in out]


def alert_failures(rep: Any) -> list[str]:
    """The alert deliveries that failed, one line each, for stderr (they never fail the refresh)."""
    return [_shown(f"{rep.path.name}: job {j.name!r}: {failure}; tried again at the next refresh")
            for j in rep.jobs for failure in ((getattr(j, "alert", None) or {}).get("failures") or ())]


def refresh_dict(rep: Any) -> dict[str, Any]:
    """A machine-readable report for scheduled runs (DESIGN.md §8)."""
    def clean(x: Any) -> Any:
        return None if isinstance(x, float) and math.isnan(x) else x

    return {
        "workbook": str(rep.path),
        "status": rep.status,
        "ok": rep.ok,
        "message": rep.message,
        "duration_s": round(rep.duration_s, 3),
        "jobs": [{"job": j.name, "status": j.status, "message": j.message, "sheet": j.sheet,
                  "next_period": j.next_period, "next_probability": clean(j.next_forecast),
                  "best_method": j.best_method, "warnings": list(getattr(j, "warnings", ())),
                  "future": list(getattr(j, "future", ())), "alert": getattr(j, "alert", None)}
                 for j in rep.jobs],
    }


def _cell(v: float, fmt: str) -> str:
    if v is None or (isinstance(v, float) and math.isnan(v)):
        return "-"
    if fmt == "integer":
        return f"{v:.0f}"
    if fmt == "percent":
        return f"{v:.1%}"
    return f"{v:.3f}"


def scorecard_text(ev: Any) -> str:
    """The validation scorecard as a fixed-width table (methods as columns; * marks the best).
    Long method names are split over two header lines so the table fits a terminal."""
    labels = [m.label for m in ev.methods]
    heads = [_two_lines(x) for x in labels]
    widths = [max(8, *(len(h) for h in pair)) + 2 for pair in heads]
    first = max(len(label) for _, label, _, _ in SCORE_ROWS) + 1
    out = ["".ljust(first) + "".join(h[0].rjust(w) for h, w in zip(heads, widths, strict=True)),
           "".ljust(first) + "".join(h[1].rjust(w) for h, w in zip(heads, widths, strict=True))]
    for key, label, fmt, better in SCORE_ROWS:
        vals = [ev.scorecard[m.key].get(key, math.nan) for m in ev.methods]
        marks = best_mask(vals, better)
        cells = [(_cell(v, fmt) + ("*" if mark else " ")).rjust(w)
                 for v, mark, w in zip(vals, marks, widths, strict=True)]
        out.append(label.ljust(first) + "".join(cells))
    return "\n".join(line.rstrip() for line in out)


def _two_lines(label: str) -> tuple[str, str]:
    words = label.split()
    if len(words) == 1:
        return "", label
    cut = max(range(1, len(words)), key=lambda i: -abs(len(" ".join(words[:i])) - len(" ".join(words[i:]))))
    return " ".join(words[:cut]), " ".join(words[cut:])


def check_errors(result: Any) -> list[str]:
    """The errors ``tocsin check`` found, one line each (for stderr): the workbook's, the package's
    structural problems, the job table's rows, then each job that could not be computed."""
    name = result.path.name
    if result.error:
        return [f"{name}: {result.error}"]
    lines = [f"{name}: package problem: {p}" for p in result.problems]
    lines += [f"{name}: {e.message}" for e in result.table.errors]
    lines += [f"{name}: job {o.name!r}: {o.error}" for o in result.outcomes
              if o.error and (o.job is not None or o.blocked)]
    return [_shown(line) for line in lines]


def check_text(result: Any) -> str:
    """The report of ``tocsin check`` (stdout): per job its scorecard and verdict, then the status.
    The errors are :func:`check_errors` (stderr)."""
    name = result.path.name
    if result.error:
        return f"{name}: problems found"
    lines = []
    table = result.table
    for d in table.disabled:
        lines.append(f"{name}: job {d.name!r} (row {d.row}) is disabled")
    for o in result.outcomes:
        if o.error:
            lines.append(f"{name}: job {o.name!r}: not computed (see the error)")
            continue
        ev = o.evaluation
        lines.append("")
        lines.append(f"== {o.name} ({ev.train_size} training, {ev.last_observed + 1 - ev.train_size} "
                     f"validation, {ev.n - ev.last_observed - 1} future rows)")
        lines.append(scorecard_text(ev))
        lines.append(ev.verdict)
        lines += [f"warning: {w}" for w in ev.warnings]
    status = "ok" if result.ok else "problems found"
    lines.append("")
    lines.append(f"{name}: {status}")
    return "\n".join(lines)
