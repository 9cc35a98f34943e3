"""Tests of sheetfns._ols.tdist: Student's t distribution function without scipy.

External references, named beside each check:
* ``scipy.stats.t`` (scipy 1.17, a general-purpose reference library) over a grid of degrees of
  freedom and arguments.
* Closed forms of the t distribution for 1, 2 and 4 degrees of freedom (common practice; e.g.
  Johnson, Kotz & Balakrishnan, *Continuous Univariate Distributions*, vol. 2, 2nd ed., 1995, ch. 28,
  recalled from memory): F(x; 1) = 1/2 + atan(x)/pi (Cauchy), F(x; 2) = 1/2 + x / (2 sqrt(2 + x^2)),
  F(x; 4) = 1/2 + 3/4 u (1 - u^2/3) with u = x / sqrt(4 + x^2).
"""
from __future__ import annotations

import math
import subprocess
import sys

import numpy as np
import pytest

from sheetfns._ols.tdist import t_cdf, t_sf

stats = pytest.importorskip("scipy.stats")

DOF = [0.3, 0.5, 1.0, 1.5, 2.0, 3.0, 4.5, 7.0, 10.0, 14.5, 15.0, 29.0, 30.0, 39.5, 40.0, 41.0, 57.25,
       100.0, 333.3, 1000.0, 4321.0, 1e4, 1e5, 1e6]
X = np.r_[-np.logspace(-3, 3, 61), 0.0, np.logspace(-3, 3, 61), np.linspace(-8.0, 8.0, 161)]


@pytest.mark.parametrize("dof", DOF)
def test_cdf_matches_scipy_to_1e12(dof):
    # scipy.stats.t.cdf as reference, absolute difference below 1e-12 on every grid point
    ours = t_cdf(X, dof)
    ref = stats.t.cdf(X, dof)
    np.testing.assert_allclose(ours, ref, rtol=0, atol=1e-12)


@pytest.mark.parametrize("dof", [1.0, 3.0, 30.0, 1000.0, 1e5])
def test_small_tails_keep_relative_precision(dof):
    # scipy.stats.t.sf as reference: the tail is computed directly, not as 1 minus the other side
    x = np.logspace(0.5, 4, 40)
    ref = stats.t.sf(x, dof)
    keep = ref > 1e-290
    np.testing.assert_allclose(t_sf(x, dof)[keep], ref[keep], rtol=1e-9)
    np.testing.assert_allclose(t_cdf(-x, dof)[keep], ref[keep], rtol=1e-9)


def test_closed_forms_for_one_two_and_four_dof():
    # closed forms (common practice, see the module docstring); they also cover |x| < 1e-5, where
    # scipy's t.cdf at 1 dof loses digits (measured: 1.6e-9 off at x = -1e-8 with scipy 1.17)
    x = np.r_[-np.logspace(-10, 4, 80), 0.0, np.logspace(-10, 4, 80)]
    np.testing.assert_allclose(t_cdf(x, 1.0), 0.5 + np.arctan(x) / np.pi, rtol=0, atol=1e-15)
    np.testing.assert_allclose(t_cdf(x, 2.0), 0.5 + x / (2.0 * np.sqrt(2.0 + x * x)), rtol=0, atol=1e-15)
    u = x / np.sqrt(4.0 + x * x)
    np.testing.assert_allclose(t_cdf(x, 4.0), 0.5 + 0.75 * u * (1.0 - u * u / 3.0), rtol=0, atol=2e-15)


def test_symmetry_and_sum_to_one():
    rng = np.random.default_rng(0)
    x = rng.standard_normal(500) * 4
    dof = rng.uniform(0.5, 500.0, 500)
    np.testing.assert_allclose(t_cdf(x, dof) + t_cdf(-x, dof), 1.0, rtol=0, atol=2e-16 * 4)
    np.testing.assert_array_equal(t_cdf(x, dof), t_sf(-x, dof))


def test_broadcasting_and_special_values():
    out = t_cdf([[np.inf], [-np.inf], [np.nan], [0.0]], [3.0, 0.0, -1.0, np.nan])
    assert out.shape == (4, 4)
    np.testing.assert_array_equal(out[:, 0], [1.0, 0.0, np.nan, 0.5])
    assert np.isnan(out[:, 1:]).all()           # dof <= 0 or NaN has no distribution
    assert t_cdf(1e300, 1.0) == 1.0 and t_sf(1e300, 1.0) == 0.0
    assert float(t_cdf(np.float64(-2.5), 7)) == pytest.approx(stats.t.cdf(-2.5, 7), abs=1e-15)


def test_large_dof_approaches_the_normal():
    # the normal distribution as the limit (common practice): at 1e8 dof the difference is O(1/dof)
    x = np.linspace(-5, 5, 101)
    normal = 0.5 * np.array([math.erfc(-v / math.sqrt(2.0)) for v in x])
    np.testing.assert_allclose(t_cdf(x, 1e8), normal, rtol=0, atol=1e-8)


def test_no_scipy_on_import():
    code = "import sys, sheetfns._ols.tdist; print('scipy' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


def test_docstring_example():
    import doctest

    import sheetfns._ols.tdist as mod

    assert doctest.testmod(mod).failed == 0
