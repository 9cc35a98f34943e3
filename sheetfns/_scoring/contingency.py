r"""The definitions of the categorical scores: one function per score key of ``CATEGORICAL_KEYS``, each
computing the score from the four counts of the 2x2 contingency table and documenting its formula,
range, perfect value, no-skill value, synonyms and sources (the defining source first).

Notation (one for every docstring here):

=====  ==============================================================================
a      hits: forecast 1, event happened (true positives)
b      false alarms: forecast 1, no event (false positives)
c      misses: forecast 0, event happened (false negatives)
d      correct negatives: forecast 0, no event (true negatives)
n      a + b + c + d, the rows scored
s      (a + c) / n, the base rate (share of periods with the event)
q      (a + b) / n, the forecast rate (share of periods the event was forecast)
=====  ==============================================================================

*Perfect* is the value of a forecast that is always right (b = c = 0). *No skill* is the value of a
forecast issued independently of what happens, at the same forecast rate q, whose table is
a = nqs, b = nq(1 - s), c = n(1 - q)s, d = n(1 - q)(1 - s) (the "random forecast" of Gilbert 1884
and Heidke 1926). Where that value is one number for every s and q, ``SCORE_INFO[key].no_skill``
holds it; otherwise it is given here as a function of s and q.

A score whose denominator is zero is NaN (:func:`~sheetfns._scoring.base.ratio`);
:func:`sheetfns.scores.from_counts` calls
these functions and warns once about the NaN ones. Internal: import the scores from
:mod:`sheetfns.scores`; reach a definition as ``SCORE_INFO[key].definition``.
"""
from __future__ import annotations

import math

from sheetfns._scoring.base import ratio


# ------------------------------------------------------------------------------------- the counts
def n(a: float, b: float, c: float, d: float) -> float:
    """Rows scored: n = a + b + c + d.

    Range [0, inf); perfect and no skill n itself: a property of the data, the same for every
    forecast of them.

    References
    ----------
    .. [1] Finley, J. P. (1884). Tornado predictions. *American Meteorological Journal*, 1, 85-88.
    """
    return a + b + c + d


def events(a: float, b: float, c: float, d: float) -> float:
    """Events observed: a + c (the base rate is s = (a + c) / n).

    Range [0, n]; perfect and no skill a + c itself: a property of the observations, the same for
    every forecast of them.

    References
    ----------
    .. [1] Finley, J. P. (1884). Tornado predictions. *American Meteorological Journal*, 1, 85-88.
    """
    return a + c


def hits(a: float, b: float, c: float, d: float) -> float:
    """Hits, a: periods with the event forecast and observed (true positives, TP).

    Range [0, a + c]; perfect a + c (every event forecast); no skill nqs, the hits expected by
    chance.

    References
    ----------
    .. [1] Finley, J. P. (1884). Tornado predictions. *American Meteorological Journal*, 1, 85-88.
    .. [2] Gilbert, G. K. (1884). Finley's tornado predictions. *American Meteorological Journal*, 1,
       166-172.
    """
    return a


def false_alarms(a: float, b: float, c: float, d: float) -> float:
    """False alarms, b: periods with the event forecast but not observed (false positives, FP).

    Range [0, b + d]; perfect 0; no skill nq(1 - s).

    References
    ----------
    .. [1] Finley, J. P. (1884). Tornado predictions. *American Meteorological Journal*, 1, 85-88.
    .. [2] Gilbert, G. K. (1884). Finley's tornado predictions. *American Meteorological Journal*, 1,
       166-172.
    """
    return b


def misses(a: float, b: float, c: float, d: float) -> float:
    """Misses, c: periods with the event observed but not forecast (false negatives, FN).

    Range [0, a + c]; perfect 0; no skill n(1 - q)s.

    References
    ----------
    .. [1] Finley, J. P. (1884). Tornado predictions. *American Meteorological Journal*, 1, 85-88.
    .. [2] Gilbert, G. K. (1884). Finley's tornado predictions. *American Meteorological Journal*, 1,
       166-172.
    """
    return c


def correct_negatives(a: float, b: float, c: float, d: float) -> float:
    """Correct negatives, d: periods with no event forecast and none observed (true negatives, TN).

    Range [0, b + d]; perfect b + d; no skill n(1 - q)(1 - s).

    References
    ----------
    .. [1] Finley, J. P. (1884). Tornado predictions. *American Meteorological Journal*, 1, 85-88.
    .. [2] Gilbert, G. K. (1884). Finley's tornado predictions. *American Meteorological Journal*, 1,
       166-172.
    """
    return d


# ------------------------------------------------------------------------------------ the shares
def accuracy(a: float, b: float, c: float, d: float) -> float:
    r"""Accuracy: the share of periods forecast right (proportion correct, PC; fraction correct).

    .. math:: \mathrm{PC} = \frac{a + d}{n}

    Range [0, 1]; perfect 1; no skill qs + (1 - q)(1 - s). Never forecasting the event (q = 0)
    already scores 1 - s, which is why a high accuracy on a rare event says little (Gilbert's point
    about Finley's 96.6%).

    References
    ----------
    .. [1] Finley, J. P. (1884). Tornado predictions. *American Meteorological Journal*, 1, 85-88.
    .. [2] Gilbert, G. K. (1884). Finley's tornado predictions. *American Meteorological Journal*, 1,
       166-172.
    .. [3] Murphy, A. H. (1996). The Finley affair: a signal event in the history of forecast
       verification. *Weather and Forecasting*, 11, 3-20.
    """
    return ratio(a + d, a + b + c + d)


def error_rate(a: float, b: float, c: float, d: float) -> float:
    r"""Error rate: the share of periods forecast wrong (misclassification rate, 1 - PC).

    .. math:: \frac{b + c}{n}

    Range [0, 1]; perfect 0; no skill q(1 - s) + (1 - q)s.

    References
    ----------
    .. [1] Finley, J. P. (1884). Tornado predictions. *American Meteorological Journal*, 1, 85-88.
       (Its complement, the proportion correct.)
    .. [2] Wilks, D. S. (2011). *Statistical Methods in the Atmospheric Sciences* (3rd ed.),
       section 8.2. Academic Press.
    """
    return ratio(b + c, a + b + c + d)


def sensitivity(a: float, b: float, c: float, d: float) -> float:
    r"""Sensitivity: the share of events that were forecast (probability of detection, POD; hit
    rate; recall; true positive rate).

    .. math:: \mathrm{POD} = \frac{a}{a + c}

    Range [0, 1]; perfect 1; no skill q (a forecast issued at random catches events as often as it
    is issued).

    References
    ----------
    .. [1] Yerushalmy, J. (1947). Statistical problems in assessing methods of medical diagnosis,
       with special reference to X-ray techniques. *Public Health Reports*, 62(40), 1432-1449.
    .. [2] Kent, A., Berry, M. M., Luehrs, F. U., & Perry, J. W. (1955). Machine literature
       searching VIII. Operational criteria for designing information retrieval systems.
       *American Documentation*, 6(2), 93-101. (As recall.)
    """
    return ratio(a, a + c)


def specificity(a: float, b: float, c: float, d: float) -> float:
    r"""Specificity: the share of non-events forecast as such (true negative rate, 1 - POFD).

    .. math:: \frac{d}{b + d}

    Range [0, 1]; perfect 1; no skill 1 - q.

    References
    ----------
    .. [1] Yerushalmy, J. (1947). Statistical problems in assessing methods of medical diagnosis,
       with special reference to X-ray techniques. *Public Health Reports*, 62(40), 1432-1449.
    """
    return ratio(d, b + d)


def precision(a: float, b: float, c: float, d: float) -> float:
    r"""Precision: the share of forecast events that happened (positive predictive value; success
    ratio, SR; 1 - FAR).

    .. math:: \mathrm{SR} = \frac{a}{a + b}

    Range [0, 1]; perfect 1; no skill s (a forecast issued at random is right as often as the
    event occurs).

    References
    ----------
    .. [1] Kent, A., Berry, M. M., Luehrs, F. U., & Perry, J. W. (1955). Machine literature
       searching VIII. Operational criteria for designing information retrieval systems.
       *American Documentation*, 6(2), 93-101.
    .. [2] Roebber, P. J. (2009). Visualizing multiple measures of forecast quality. *Weather and
       Forecasting*, 24, 601-608. (As success ratio.)
    """
    return ratio(a, a + b)


def false_alarm_ratio(a: float, b: float, c: float, d: float) -> float:
    r"""False alarm ratio (FAR): the share of forecast events that did not happen.

    .. math:: \mathrm{FAR} = \frac{b}{a + b}

    Range [0, 1]; perfect 0; no skill 1 - s. Not the false alarm *rate*, :func:`false_alarm_rate`.

    References
    ----------
    .. [1] Donaldson, R. J., Dyer, R. M., & Kraus, M. J. (1975). An objective evaluator of
       techniques for predicting severe weather events. *Preprints, Ninth Conference on Severe
       Local Storms*, American Meteorological Society, 321-326.
    .. [2] Doswell, C. A., Davies-Jones, R., & Keller, D. L. (1990). On summary measures of skill in
       rare event forecasting based on contingency tables. *Weather and Forecasting*, 5, 576-585.
    """
    return ratio(b, a + b)


def false_alarm_rate(a: float, b: float, c: float, d: float) -> float:
    r"""False alarm rate: the share of non-events for which the event was forecast (probability of
    false detection, POFD; false positive rate; 1 - specificity).

    .. math:: \mathrm{POFD} = \frac{b}{b + d}

    Range [0, 1]; perfect 0; no skill q. With the hit rate it makes the ROC point of a 0/1
    forecast.

    References
    ----------
    .. [1] Mason, I. (1982). A model for assessment of weather forecasts. *Australian
       Meteorological Magazine*, 30, 291-303.
    .. [2] Yerushalmy, J. (1947). Statistical problems in assessing methods of medical diagnosis,
       with special reference to X-ray techniques. *Public Health Reports*, 62(40), 1432-1449.
       (As 1 - specificity.)
    """
    return ratio(b, b + d)


def critical_success_index(a: float, b: float, c: float, d: float) -> float:
    r"""Critical success index (CSI): hits over the periods where the event was forecast or
    observed (threat score, TS; Gilbert's "ratio of verification"; Jaccard index).

    .. math:: \mathrm{CSI} = \frac{a}{a + b + c}

    Range [0, 1]; perfect 1; no skill qs / (q + s - qs); 0 when there is no hit.

    References
    ----------
    .. [1] Gilbert, G. K. (1884). Finley's tornado predictions. *American Meteorological Journal*, 1,
       166-172.
    .. [2] Donaldson, R. J., Dyer, R. M., & Kraus, M. J. (1975). An objective evaluator of
       techniques for predicting severe weather events. *Preprints, Ninth Conference on Severe
       Local Storms*, American Meteorological Society, 321-326. (The name CSI.)
    .. [3] Schaefer, J. T. (1990). The critical success index as an indicator of warning skill.
       *Weather and Forecasting*, 5, 570-575.
    """
    return ratio(a, a + b + c)


def frequency_bias(a: float, b: float, c: float, d: float) -> float:
    r"""Frequency bias: events forecast over events observed (bias score, BIAS).

    .. math:: \mathrm{BIAS} = \frac{a + b}{a + c} = \frac{q}{s}

    Range [0, inf); perfect 1 (unbiased); above 1 over-forecasting, below 1 under-forecasting.
    No skill q / s: it measures how often, not how well, so a forecast issued at random has any
    bias its rate gives it, 1 included.

    References
    ----------
    .. [1] Wilks, D. S. (2011). *Statistical Methods in the Atmospheric Sciences* (3rd ed.),
       section 8.2. Academic Press.
    .. [2] Roebber, P. J. (2009). Visualizing multiple measures of forecast quality. *Weather and
       Forecasting*, 24, 601-608.
    """
    return ratio(a + b, a + c)


def f1(a: float, b: float, c: float, d: float) -> float:
    r"""F1 score: the harmonic mean of precision and sensitivity (Dice coefficient; Sørensen index).

    .. math:: F_1 = \frac{2a}{2a + b + c}

    Range [0, 1]; perfect 1; no skill 2qs / (q + s).

    References
    ----------
    .. [1] Dice, L. R. (1945). Measures of the amount of ecologic association between species.
       *Ecology*, 26(3), 297-302.
    .. [2] van Rijsbergen, C. J. (1979). *Information Retrieval* (2nd ed.), chapter 7.
       Butterworths. (As 1 - E with equal weights.)
    """
    return ratio(2 * a, 2 * a + b + c)


# ---------------------------------------------------------------------------- the skill scores
def balanced_accuracy(a: float, b: float, c: float, d: float) -> float:
    r"""Balanced accuracy: the mean of sensitivity and specificity.

    .. math:: \frac12 \left(\frac{a}{a + c} + \frac{d}{b + d}\right)

    Range [0, 1]; perfect 1; no skill 0.5 (q + (1 - q) halved). NaN when either part is undefined.
    Equal to (1 + Peirce skill score) / 2.

    References
    ----------
    .. [1] Brodersen, K. H., Ong, C. S., Stephan, K. E., & Buhmann, J. M. (2010). The balanced
       accuracy and its posterior distribution. *Proceedings of the 20th International Conference
       on Pattern Recognition*, 3121-3124.
    """
    sens, spec = sensitivity(a, b, c, d), specificity(a, b, c, d)
    return (sens + spec) / 2 if not (math.isnan(sens) or math.isnan(spec)) else math.nan


def heidke_skill(a: float, b: float, c: float, d: float) -> float:
    r"""Heidke skill score (HSS): proportion correct measured against the proportion a random
    forecast with the same totals would get right (Cohen's kappa for a 2x2 table).

    .. math:: \mathrm{HSS} = \frac{2(ad - bc)}{(a + c)(c + d) + (a + b)(b + d)}

    Range [-1, 1]; perfect 1; no skill 0.

    References
    ----------
    .. [1] Heidke, P. (1926). Berechnung des Erfolges und der Güte der Windstärkevorhersagen im
       Sturmwarnungsdienst. *Geografiska Annaler*, 8, 301-349.
    .. [2] Cohen, J. (1960). A coefficient of agreement for nominal scales. *Educational and
       Psychological Measurement*, 20, 37-46.
    """
    return ratio(2 * (a * d - b * c), (a + c) * (c + d) + (a + b) * (b + d))


def peirce_skill(a: float, b: float, c: float, d: float) -> float:
    r"""Peirce skill score (PSS): hit rate minus false alarm rate (Hanssen-Kuipers discriminant;
    true skill statistic, TSS; Youden's J).

    .. math:: \mathrm{PSS} = \frac{ad - bc}{(a + c)(b + d)} = \mathrm{POD} - \mathrm{POFD}

    Range [-1, 1]; perfect 1; no skill 0.

    References
    ----------
    .. [1] Peirce, C. S. (1884). The numerical measure of the success of predictions. *Science*, 4,
       453-454.
    .. [2] Hanssen, A. W., & Kuipers, W. J. A. (1965). On the relationship between the frequency of
       rain and various meteorological parameters. *Mededelingen en Verhandelingen*, 81, 2-15.
       Koninklijk Nederlands Meteorologisch Instituut.
    .. [3] Youden, W. J. (1950). Index for rating diagnostic tests. *Cancer*, 3, 32-35.
    """
    return ratio(a * d - b * c, (a + c) * (b + d))


def gilbert_skill(a: float, b: float, c: float, d: float) -> float:
    r"""Gilbert skill score (GSS): the critical success index corrected for the hits expected by
    chance (equitable threat score, ETS).

    .. math:: \mathrm{GSS} = \frac{a - a_r}{a + b + c - a_r}, \quad a_r = \frac{(a + b)(a + c)}{n}

    Range [-1/3, 1]; perfect 1; no skill 0.

    References
    ----------
    .. [1] Gilbert, G. K. (1884). Finley's tornado predictions. *American Meteorological Journal*, 1,
       166-172.
    .. [2] Schaefer, J. T. (1990). The critical success index as an indicator of warning skill.
       *Weather and Forecasting*, 5, 570-575.
    """
    a_random = ratio((a + b) * (a + c), a + b + c + d)
    return ratio(a - a_random, a + b + c - a_random)


def odds_ratio(a: float, b: float, c: float, d: float) -> float:
    r"""Odds ratio (OR, theta): the odds of a hit when the event happens over the odds of a false
    alarm when it does not (cross-product ratio).

    .. math:: \theta = \frac{ad}{bc}

    Range [0, inf); no skill 1; perfect infinite, which this definition reports as NaN (undefined)
    whenever b = 0 or c = 0.

    References
    ----------
    .. [1] Yule, G. U. (1900). On the association of attributes in statistics. *Philosophical
       Transactions of the Royal Society of London, Series A*, 194, 257-319.
    .. [2] Stephenson, D. B. (2000). Use of the "odds ratio" for diagnosing forecast skill.
       *Weather and Forecasting*, 15, 221-232.
    """
    return ratio(a * d, b * c)


def odds_ratio_skill(a: float, b: float, c: float, d: float) -> float:
    r"""Odds ratio skill score (ORSS): the odds ratio mapped onto [-1, 1] (Yule's Q).

    .. math:: \mathrm{ORSS} = \frac{ad - bc}{ad + bc} = \frac{\theta - 1}{\theta + 1}

    Range [-1, 1]; perfect 1; no skill 0.

    References
    ----------
    .. [1] Yule, G. U. (1900). On the association of attributes in statistics. *Philosophical
       Transactions of the Royal Society of London, Series A*, 194, 257-319.
    .. [2] Stephenson, D. B. (2000). Use of the "odds ratio" for diagnosing forecast skill.
       *Weather and Forecasting*, 15, 221-232.
    """
    return ratio(a * d - b * c, a * d + b * c)


def matthews(a: float, b: float, c: float, d: float) -> float:
    r"""Matthews correlation coefficient (MCC): the correlation of the 0/1 forecast with the 0/1
    outcome (phi coefficient).

    .. math:: \mathrm{MCC} = \frac{ad - bc}{\sqrt{(a + b)(a + c)(b + d)(c + d)}}

    Range [-1, 1]; perfect 1; no skill 0. NaN when a row or column total is 0 (scikit-learn returns
    0 there).

    References
    ----------
    .. [1] Matthews, B. W. (1975). Comparison of the predicted and observed secondary structure of
       T4 phage lysozyme. *Biochimica et Biophysica Acta*, 405, 442-451.
    .. [2] Yule, G. U. (1912). On the methods of measuring association between two attributes.
       *Journal of the Royal Statistical Society*, 75, 579-652. (As the phi coefficient.)
    """
    return ratio(a * d - b * c, math.sqrt((a + b) * (a + c) * (b + d) * (c + d)))


#: Every categorical score key, in the order of ``CATEGORICAL_KEYS``, with its definition.
DEFINITIONS = {f.__name__: f for f in (
    n, events, hits, false_alarms, misses, correct_negatives, accuracy, error_rate, sensitivity,
    specificity, precision, false_alarm_ratio, false_alarm_rate, critical_success_index,
    frequency_bias, f1, balanced_accuracy, heidke_skill, peirce_skill, gilbert_skill, odds_ratio,
    odds_ratio_skill, matthews)}
