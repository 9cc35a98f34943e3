"""The Student t distribution function in numpy, without scipy (the refresh path imports no scipy).

For x >= 0 and nu degrees of freedom the upper tail is half a regularized incomplete beta function,

.. math:: P(T > x) = \\tfrac12 I_w(\\nu/2, 1/2), \\qquad w = \\frac{\\nu}{\\nu + x^2},

and P(T <= x) = 1 - P(T > x); the lower tail follows by symmetry. ``I_w(a, b)`` is evaluated as in
Press et al. (2007, §6.4): the prefactor ``w^a (1-w)^b / (a B(a, b))`` times the continued fraction of
the incomplete beta function (modified Lentz), on the side of ``(a + 1) / (a + b + 2)`` where the
fraction converges quickly (else through ``I_w(a, b) = 1 - I_{1-w}(b, a)``). The tail is computed
directly, never as 1 minus the other side, so small tail probabilities keep their relative precision.

``log B(nu/2, 1/2)`` uses ``math.lgamma`` for small nu and, for nu/2 >= 15, Stirling's series for the
difference ``log Gamma(a) - log Gamma(a + 1/2)`` (Abramowitz & Stegun 1964, 6.1.41), which avoids the
cancellation of two large log-gamma values.

References
----------
1. Press, W. H., Teukolsky, S. A., Vetterling, W. T., & Flannery, B. P. (2007). *Numerical Recipes:
   The Art of Scientific Computing* (3rd ed.), §6.4 Incomplete Beta Function and §6.14.7 Student's
   t-distribution. Cambridge University Press.
2. Abramowitz, M., & Stegun, I. A. (1964). *Handbook of Mathematical Functions*, 6.1.41 and 26.7.1.
   National Bureau of Standards.
"""
from __future__ import annotations

import math
from typing import Any

import numpy as np

__all__ = ["t_cdf", "t_sf"]

_EPS = 1e-16          # relative change of the continued fraction at which it has converged
_FPMIN = 1e-300       # the Lentz guard against a zero denominator
_MAXIT = 100_000      # far above what nu up to 1e8 needs (the count grows like sqrt(nu))
_STIRLING_FROM = 15.0
_SERIES_A, _SERIES_X2 = 20.0, 16.0   # where the series replaces the continued fraction
# Stirling's series of log Gamma(z) - [(z - 1/2) log z - z + log(2 pi) / 2]: 1/(12 z) - 1/(360 z^3) ...
_STIRLING = (1.0 / 12.0, -1.0 / 360.0, 1.0 / 1260.0, -1.0 / 1680.0, 1.0 / 1188.0, -691.0 / 360360.0,
             1.0 / 156.0)


def _stirling_tail(z: np.ndarray) -> np.ndarray:
    r = 1.0 / (z * z)
    out = np.zeros_like(z)
    for c in reversed(_STIRLING):
        out = out * r + c
    return out / z


def _log_beta_half(a: np.ndarray) -> np.ndarray:
    """log B(a, 1/2) = log Gamma(a) + log Gamma(1/2) - log Gamma(a + 1/2), for a > 0."""
    out = np.empty_like(a)
    big = a >= _STIRLING_FROM
    if big.any():
        z = a[big]
        # log Gamma(z) - log Gamma(z + 1/2) = -log(z)/2 - z log1p(1/(2z)) + 1/2 + S(z) - S(z + 1/2)
        out[big] = (0.5 * math.log(math.pi) - 0.5 * np.log(z) - z * np.log1p(0.5 / z) + 0.5
                    + _stirling_tail(z) - _stirling_tail(z + 0.5))
    small = ~big
    if small.any():
        uniq, inv = np.unique(a[small], return_inverse=True)
        vals = np.array([math.lgamma(v) + math.lgamma(0.5) - math.lgamma(v + 0.5) for v in uniq])
        out[small] = vals[inv]
    return out


def _betacf(a: np.ndarray, b: np.ndarray, x: np.ndarray) -> np.ndarray:
    """The continued fraction of the incomplete beta function (Press et al. 2007, §6.4, betacf),
    element-wise; each element stops when its last factor is within _EPS of 1."""
    qab, qap, qam = a + b, a + 1.0, a - 1.0
    c = np.ones_like(x)
    d = 1.0 - qab * x / qap
    d = np.where(np.abs(d) < _FPMIN, _FPMIN, d)
    d = 1.0 / d
    h = d.copy()
    active = np.arange(x.size)
    for m in range(1, _MAXIT + 1):
        aa_, bb_, x_ = a[active], b[active], x[active]
        cc, dd, hh = c[active], d[active], h[active]
        m2 = 2 * m
        num = m * (bb_ - m) * x_ / ((qam[active] + m2) * (aa_ + m2))
        dd = 1.0 + num * dd
        dd = np.where(np.abs(dd) < _FPMIN, _FPMIN, dd)
        cc = 1.0 + num / cc
        cc = np.where(np.abs(cc) < _FPMIN, _FPMIN, cc)
        dd = 1.0 / dd
        hh = hh * dd * cc
        num = -(aa_ + m) * (qab[active] + m) * x_ / ((aa_ + m2) * (qap[active] + m2))
        dd = 1.0 + num * dd
        dd = np.where(np.abs(dd) < _FPMIN, _FPMIN, dd)
        cc = 1.0 + num / cc
        cc = np.where(np.abs(cc) < _FPMIN, _FPMIN, cc)
        dd = 1.0 / dd
        step = dd * cc
        hh = hh * step
        c[active], d[active], h[active] = cc, dd, hh
        going = np.abs(step - 1.0) >= _EPS
        if not going.any():
            break
        active = active[going]
    return h


def _series(a: np.ndarray, y: np.ndarray) -> np.ndarray:
    """sum_n (a + 1/2)_n / (3/2)_n y^n, the hypergeometric series 2F1(a + 1/2, 1; 3/2; y) of
    I_y(1/2, a) (Abramowitz & Stegun 1964, 26.5.23); positive terms, element-wise until each term
    is below _EPS of its sum. Used where a is large and y = x^2 / (nu + x^2) small: about x^2 / 2
    terms, independent of nu."""
    term = np.ones_like(y)
    total = np.ones_like(y)
    active = np.arange(y.size)
    for n in range(_MAXIT):
        term[active] *= (a[active] + 0.5 + n) * y[active] / (1.5 + n)
        total[active] += term[active]
        going = term[active] >= _EPS * total[active]
        if not going.any():
            break
        active = active[going]
    return total


def _upper_tail(x: np.ndarray, nu: np.ndarray) -> np.ndarray:
    """P(T > x) for finite x > 0 and nu > 0."""
    a = 0.5 * nu
    b = np.full_like(a, 0.5)
    with np.errstate(over="ignore", divide="ignore"):
        x2 = x * x
        w = 1.0 / (1.0 + x2 / nu)              # nu / (nu + x^2)
        one_w = 1.0 / (1.0 + nu / x2)          # x^2 / (nu + x^2)
        log_w = -np.log1p(x2 / nu)             # both without cancellation for every x
        log_1w = -np.log1p(nu / x2)
    # front = w^a (1-w)^(1/2) / B(a, 1/2)
    front = np.exp(a * log_w + 0.5 * log_1w - _log_beta_half(a))
    series = (a >= _SERIES_A) & (x2 < _SERIES_X2)
    direct = ~series & (w < (a + 1.0) / (a + 2.5))
    rest = ~series & ~direct
    out = np.empty_like(x)
    if series.any():
        # 1/2 I_w(a, 1/2) = 1/2 (1 - I_{1-w}(1/2, a)), I_{1-w}(1/2, a) = 2 front * series
        out[series] = 0.5 - front[series] * _series(a[series], one_w[series])
    if direct.any():
        i = direct
        out[i] = 0.5 * front[i] * _betacf(a[i], b[i], w[i]) / a[i]
    if rest.any():
        i = rest
        out[i] = 0.5 - front[i] * _betacf(b[i], a[i], one_w[i])   # 1/2 (1 - front cf / (1/2))
    return out


def t_sf(x: Any, dof: Any) -> np.ndarray:
    """Upper tail P(T > x) of Student's t with ``dof`` degrees of freedom, element-wise.

    Parameters
    ----------
    x : array_like
    dof : array_like, broadcast against ``x``
        Degrees of freedom > 0 (need not be whole); NaN or <= 0 gives NaN.

    Returns
    -------
    ndarray of float: NaN where x or dof is NaN or dof <= 0; 0 at x = +inf, 1 at x = -inf.
    """
    xx, nu = np.broadcast_arrays(np.asarray(x, dtype=float), np.asarray(dof, dtype=float))
    shape = xx.shape
    xx, nu = xx.reshape(-1), nu.reshape(-1)
    out = np.full(xx.size, np.nan)
    with np.errstate(invalid="ignore"):
        ok = np.isfinite(nu) & (nu > 0) & ~np.isnan(xx)
    out[ok & (xx == 0)] = 0.5
    out[ok & (xx == np.inf)] = 0.0
    out[ok & (xx == -np.inf)] = 1.0
    finite = ok & np.isfinite(xx) & (xx != 0)
    if finite.any():
        ax = np.abs(xx[finite])
        tail = _upper_tail(ax, nu[finite])
        out[finite] = np.where(xx[finite] > 0, tail, 1.0 - tail)
    return out.reshape(shape)


def t_cdf(x: Any, dof: Any) -> np.ndarray:
    """Distribution function P(T <= x) of Student's t with ``dof`` degrees of freedom, element-wise.

    Same arguments and conventions as :func:`t_sf`; ``t_cdf(x, dof) = t_sf(-x, dof)`` exactly (the
    lower tail keeps its relative precision).

    Examples
    --------
    >>> abs(float(t_cdf(2.0, 1.0)) - (0.5 + math.atan(2.0) / math.pi)) < 1e-15  # Cauchy at 1 dof
    True
    """
    return t_sf(-np.asarray(x, dtype=float), dof)
