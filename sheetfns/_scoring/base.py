"""Shared plumbing of the verification scores: the warning for undefined scores, the division rule
(zero denominator -> NaN plus one warning per call) and the coercion of paired inputs.

Public names are re-exported by :mod:`sheetfns.scores`; import them from there.
"""
from __future__ import annotations

import math
import warnings
from typing import Any

import numpy as np

from sheetfns.checks import as_events, as_prob, same_length


class UndefinedScoreWarning(RuntimeWarning):
    """A score has a zero denominator for these data and was set to NaN.

    Raised through :func:`warnings.warn`, never as an exception: a scorecard with one undefined
    cell is still a scorecard. The message names every score that was undefined in the call.
    """


def ratio(num: float, den: float) -> float:
    """``num / den``; NaN when the denominator is zero or either part is NaN (an undefined score)."""
    if den == 0 or math.isnan(den) or math.isnan(num):
        return math.nan
    return num / den


class Quotient:
    """Collects ``num / den`` divisions; a zero (or NaN) denominator gives NaN and is remembered,
    so one call warns once, naming every undefined score."""

    def __init__(self) -> None:
        self.undefined: list[str] = []

    def __call__(self, name: str, num: float, den: float) -> float:
        out = ratio(num, den)
        if math.isnan(out):
            self.undefined.append(name)
        return out

    def mark(self, name: str) -> float:
        """Record ``name`` as undefined and return NaN."""
        self.undefined.append(name)
        return math.nan

    def warn(self, why: str = "zero denominator", stacklevel: int = 3,
             order: tuple[str, ...] = ()) -> None:
        """Warn once, naming every undefined score (in ``order`` where it lists them)."""
        if self.undefined:
            rank = {k: i for i, k in enumerate(order)}
            seen = list(dict.fromkeys(self.undefined))
            names = ", ".join(sorted(seen, key=lambda k: rank.get(k, len(rank))))
            warnings.warn(f"undefined for these data ({why}), set to NaN: {names}",
                          UndefinedScoreWarning, stacklevel=stacklevel)


def paired_events(actual: Any, forecast: Any, *, forecast_name: str = "forecast"
                  ) -> tuple[np.ndarray, np.ndarray]:
    """Validate two event series of equal length and drop the rows where either is NaN."""
    a = as_events(actual, "actual")
    f = as_events(forecast, forecast_name)
    same_length(actual=a, **{forecast_name: f})
    keep = ~(np.isnan(a) | np.isnan(f))
    return a[keep], f[keep]


def paired_prob(actual: Any, **probs: Any) -> tuple[np.ndarray, ...]:
    """Validate an event series and named probability series of equal length; drop every row where
    any of them is NaN. Returns ``(actual, *probs)`` in the order given."""
    a = as_events(actual, "actual")
    ps = [as_prob(v, k) for k, v in probs.items()]
    same_length(actual=a, **dict(zip(probs, ps, strict=True)))
    keep = ~np.isnan(a)
    for p in ps:
        keep &= ~np.isnan(p)
    return (a[keep], *(p[keep] for p in ps))
