"""The verdict of a scorecard in plain words, and the checks of the validation period behind it.

Internal to :mod:`sheetfns.scorecard` (which ranks the methods and calls these with their labels);
no method names are decided here.

* :func:`check_periods` compares the event rate of the validation period with the training period's
  (the pooled two-proportion z test, :func:`sheetfns._scoring.significance.two_proportion`, at
  :data:`SHIFT_LEVEL`) and counts the validation events (fewer than :data:`MIN_VALID_EVENTS` are too
  few to rank methods). :meth:`PeriodCheck.warnings` says what it found, one sentence each.
* :func:`choose` names a best method only when it beats the majority share (positive Brier skill) and
  is not a 0/1 forecast that said the same on every validation period (it tells no period from
  another: its Peirce skill is 0; Wilks 2011, section 8.2.4 -- its low Brier score comes from the
  event's rarity alone).
* :func:`verdict_text` puts it in words.

References
----------
1. Agresti, A. (2013). *Categorical Data Analysis* (3rd ed.), section 3.1.2. Wiley.
2. Wilks, D. S. (2011). *Statistical Methods in the Atmospheric Sciences* (3rd ed.), chapter 8.
   Academic Press.
"""
from __future__ import annotations

import math
import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from sheetfns._scoring.significance import two_proportion

MIN_VALID_EVENTS = 10
"""Fewer validation events than this are too few to rank methods (common practice: a Brier score
difference resting on a handful of events is noise)."""
SHIFT_LEVEL = 0.01
"""Significance level of the two-proportion test that flags a validation period unlike the training
period (DESIGN.md §8)."""


def p_text(p: float) -> str:
    """A p-value as the verdict writes it: 'p < 0.001' or 'p = 0.004'."""
    return "p < 0.001" if p < 0.001 else f"p = {p:.3f}"


@dataclass(frozen=True)
class PeriodCheck:
    """Events and periods observed in training and validation, and the two-proportion test."""

    train_events: int
    train_n: int
    valid_events: int
    valid_n: int
    statistic: float = math.nan
    pvalue: float = math.nan

    @property
    def train_rate(self) -> float:
        return self.train_events / self.train_n if self.train_n else math.nan

    @property
    def valid_rate(self) -> float:
        return self.valid_events / self.valid_n if self.valid_n else math.nan

    @property
    def shifted(self) -> bool:
        """The rates differ beyond chance (two-sided p below :data:`SHIFT_LEVEL`)."""
        return not math.isnan(self.pvalue) and self.pvalue < SHIFT_LEVEL

    @property
    def few(self) -> bool:
        """Too few validation events to rank methods."""
        return self.valid_events < MIN_VALID_EVENTS

    def warnings(self) -> tuple[str, ...]:
        """What the check found, one plain sentence each (none when all is well)."""
        out = []
        if self.shifted:
            out.append(f"The validation period is unlike the training period: the event rate was "
                       f"{self.train_rate:.1%} in training ({self.train_events} of {self.train_n} periods) "
                       f"and {self.valid_rate:.1%} in validation ({self.valid_events} of {self.valid_n}); "
                       f"a two-proportion z test gives {p_text(self.pvalue)} (below 1%), so scores on the "
                       f"validation period may not hold for the periods ahead.")
        if self.few and self.valid_n:
            held = "no event" if self.valid_events == 0 else \
                f"only {self.valid_events} event{'s' if self.valid_events != 1 else ''}"
            out.append(f"The validation period holds {held} in {self.valid_n} periods (fewer than "
                       f"{MIN_VALID_EVENTS}): too few to rank the methods.")
        return tuple(out)


def check_periods(train: np.ndarray, valid: np.ndarray) -> PeriodCheck:
    """Compare the observed events of the training rows with the validation rows (NaN skipped)."""
    counts = []
    for part in (train, valid):
        seen = part[~np.isnan(part)]
        counts += [int(np.count_nonzero(seen == 1.0)), int(seen.size)]
    xt, nt, xv, nv = counts
    if nt == 0 or nv == 0:
        return PeriodCheck(xt, nt, xv, nv)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")      # no variation to test: NaN, not flagged
        z, p = two_proportion(xt, nt, xv, nv)
    return PeriodCheck(xt, nt, xv, nv, z, p)


def choose(ranked: Sequence[str], skill: Mapping[str, float], constant: Mapping[str, float],
           check: PeriodCheck) -> tuple[str | None, list[str]]:
    """The method to name best, and the better-scored methods passed over for it.

    ``ranked``: method keys by validation Brier score, best first; ``skill``: Brier skill against the
    majority share; ``constant``: the 0/1 methods whose validation forecast was one value throughout
    (key -> that value). None when the validation period is too short of events, or no method has
    positive skill without being constant.
    """
    if check.few:
        return None, []
    passed: list[str] = []
    for key in ranked:
        s = skill.get(key, math.nan)
        if math.isnan(s) or s <= 0.0:
            return None, passed
        if key in constant:
            passed.append(key)
            continue
        return key, passed
    return None, passed


def verdict_text(best: str | None, lowest: str | None, passed: Sequence[str], labels: Mapping[str, str],
                 card: Mapping[str, Mapping[str, float]], constant: Mapping[str, float],
                 check: PeriodCheck, dm_pvalue: float) -> str:
    """The verdict in plain words (see the module docstring).

    ``best`` from :func:`choose`, ``lowest`` the method with the lowest Brier score, ``dm_pvalue`` the
    Diebold-Mariano p-value of ``best`` against the majority share.
    """
    if lowest is None:
        return "No method could be scored: the validation period holds no usable rows."
    if check.few:
        held = "no event" if check.valid_events == 0 else \
            f"only {check.valid_events} event{'s' if check.valid_events != 1 else ''}"
        text = (f"Too few events to rank the methods: the validation period holds {held} in "
                f"{check.valid_n} periods (at least {MIN_VALID_EVENTS} are needed), so no method is named "
                f"best.")
    elif best is None:
        which = "that tells one period from another " if passed else ""
        text = (f"No method {which}beat the event's base rate on the validation period: the majority "
                f"share (the training share of periods with the event, {check.train_rate:.1%}) is the "
                f"forecast to use.")
    else:
        brier, bss = card[best]["brier"], card[best]["brier_skill"]
        if math.isnan(dm_pvalue):
            sig = "the significance of the difference could not be tested"
        elif dm_pvalue < 0.05:
            sig = f"the difference is significant at 5% (Diebold-Mariano {p_text(dm_pvalue)})"
        else:
            sig = f"the difference is not significant at 5% (Diebold-Mariano {p_text(dm_pvalue)})"
        text = (f"Best on the validation period: {labels[best]} (Brier {brier:.3f}, skill {bss:+.1%} "
                f"against the majority share); {sig}.")
    if passed:
        said = {1.0: "the event", 0.0: "no event"}
        names = "; ".join(f"{labels[k]} (Brier {card[k]['brier']:.3f}) forecast {said[constant[k]]} for "
                          f"every validation period" for k in passed)
        tell = "it tells" if len(passed) == 1 else "they tell"
        text += f" Not named although scored lower: {names}, so {tell} no period from another."
    if check.shifted:
        text += (f" Caution: the event rate changed from {check.train_rate:.1%} in training to "
                 f"{check.valid_rate:.1%} in validation (two-proportion z test {p_text(check.pvalue)}), "
                 f"so these scores may not hold for the periods ahead.")
    return text
