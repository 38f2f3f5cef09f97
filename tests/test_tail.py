"""Gamma exceedance probability against independent references."""
from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest
from scipy import stats

from tailstop.core.models.gamma.tail import tail_probability

mpmath.mp.dps = 50


def reference(shape, t):
    """(log p, log(1-p)) from mpmath's regularized incomplete gamma at 50 digits."""
    upper = mpmath.gammainc(shape, t, mpmath.inf, regularized=True)
    lower = mpmath.gammainc(shape, 0, t, regularized=True)
    return float(mpmath.log(upper)), float(mpmath.log(lower))


def relative_error(value, expected):
    if expected == 0:
        return abs(value)
    return abs(value - expected) / abs(expected)


# (shape, t = threshold/scale) spanning p from about 1e-300 to 1 - 1e-15 and beyond
GRID = [
    (0.05, 1e-3), (0.3, 2.0), (0.5, 700.0), (1.0, 1.0), (1.0, 690.0), (2.5, 1e-6), (3.0, 25.0),
    (7.0, 0.05), (10.0, 10.0), (50.0, 5.0), (50.0, 120.0), (200.0, 180.0), (1000.0, 1100.0),
    (2.0, 1e-8), (4.0, 700.0), (0.8, 1e-18), (1e4, 1e4 + 300.0), (30.0, 800.0),
]


@pytest.mark.parametrize("shape,t", GRID)
def test_log_tails_match_mpmath(shape, t):
    # check value: mpmath.gammainc(a, t, inf, regularized=True) at 50 digits (METHOD.md §8)
    result = tail_probability(t * 3.0, shape, 3.0)
    log_p, log_cdf = reference(shape, t)
    # 10 significant digits on each log; a log that is (nearly) 0 is compared absolutely
    assert relative_error(float(result.log_p), log_p) < 1e-10 or abs(float(result.log_p) - log_p) < 1e-15
    assert relative_error(float(result.log_cdf), log_cdf) < 1e-10 or abs(float(result.log_cdf) - log_cdf) < 1e-15
    assert relative_error(float(result.log_odds), log_p - log_cdf) < 1e-10


@pytest.mark.parametrize("target", [1e-300, 1e-200, 1e-100, 1e-30, 1e-12, 1e-3, 0.5, 1 - 1e-6, 1 - 1e-12, 1 - 1e-15])
def test_probability_keeps_ten_digits_across_the_range(target):
    # Find t with p = target for shape 2.7 by mpmath, then compare p, log p, log(1-p) and log-odds.
    # check value: mpmath at 50 digits
    shape = 2.7
    if target < 0.5:
        tail, goal, start = (lambda x: mpmath.gammainc(shape, x, mpmath.inf, regularized=True)), target, stats.gamma.isf(target, shape)
    else:
        tail, goal, start = (lambda x: mpmath.gammainc(shape, 0, x, regularized=True)), 1 - target, stats.gamma.ppf(1 - target, shape)
    t = float(mpmath.findroot(lambda x: mpmath.log(tail(x)) - mpmath.log(goal), start))
    result = tail_probability(t, shape, 1.0)
    log_p, log_cdf = reference(shape, t)
    p_ref = math.exp(log_p)
    # check value: mpmath at 50 digits; tolerance 1e-10: METHOD.md §1 asks for 10 significant digits
    assert relative_error(float(result.p), p_ref) < 1e-10
    assert relative_error(float(result.log_p), log_p) < 1e-10
    assert relative_error(float(result.log_cdf), log_cdf) < 1e-10
    assert relative_error(float(result.log_odds), log_p - log_cdf) < 1e-10


def test_far_tail_beyond_double_precision_is_still_finite_in_logs():
    # p = Q(2, 1e5) ~ e^-1e5 underflows a double; its log does not.
    # check value: mpmath at 50 digits
    result = tail_probability(1e5, 2.0, 1.0)
    log_p, _ = reference(2.0, 1e5)
    assert float(result.p) == 0.0
    assert relative_error(float(result.log_p), log_p) < 1e-12


def test_spreadsheet_route_loses_digits_where_ours_does_not():
    # 1 - CDF is what a spreadsheet computes; at p ~ 1e-20 it returns 0.
    shape, t = 3.0, 55.0
    naive = 1.0 - stats.gamma.cdf(t, shape)
    log_p, _ = reference(shape, t)
    assert naive == 0.0
    # check value: mpmath at 50 digits; tolerance 1e-12, about 4 digits short of a double
    assert relative_error(float(tail_probability(t, shape, 1.0).p), math.exp(log_p)) < 1e-12


@pytest.mark.parametrize("df,critical", [(1, 3.841), (10, 18.307), (20, 31.410)])
def test_chi_square_critical_values(df, critical):
    # check value: NIST/SEMATECH e-Handbook §1.3.6.7.4, upper-tail 0.05 critical values of chi-square
    # (a chi-square with k df is gamma with shape k/2, scale 2); the table gives 3 decimals.
    p = float(tail_probability(critical, df / 2.0, 2.0).p)
    assert abs(p - 0.05) < 2e-4  # 3-decimal rounding of the table moves p by at most ~1e-4
    # and the exact critical value reproduces 0.05 to full precision
    exact = stats.chi2.isf(0.05, df)
    assert abs(float(tail_probability(exact, df / 2.0, 2.0).p) - 0.05) < 1e-13


@pytest.mark.parametrize("k", [1, 2, 5, 12, 40])
@pytest.mark.parametrize("t", [0.1, 3.0, 20.0, 90.0])
def test_erlang_poisson_identity(k, t):
    # check value: Q(k, t) = P(Poisson(t) <= k-1) for integer k
    # (Johnson, Kotz & Balakrishnan, Continuous Univariate Distributions vol. 1); the sum is done in mpmath.
    poisson = mpmath.fsum(mpmath.exp(-t) * mpmath.mpf(t) ** j / mpmath.factorial(j) for j in range(k))
    assert relative_error(float(tail_probability(t, k, 1.0).p), float(poisson)) < 1e-12


def test_exponential_closed_form():
    # check value: shape 1 is the exponential, p = exp(-c/s) (METHOD.md §3)
    c, s = np.array([0.5, 10.0, 400.0]), 2.0
    result = tail_probability(c, 1.0, s)
    # tolerance: 1e-14 on -c/s (exact in the closed form, a few roundings in the code); 1e-13 on
    # log(1 - e^{-t}), whose reference itself is computed in doubles
    np.testing.assert_allclose(result.log_p, -c / s, rtol=1e-14)
    np.testing.assert_allclose(result.log_cdf, np.log1p(-np.exp(-c / s)), rtol=1e-13)


def test_vectorized_matches_scalar_calls():
    thresholds = np.array([10.0, 100.0, 1000.0])
    shapes = np.array([[0.5], [2.0]])
    together = tail_probability(thresholds, shapes, 50.0)
    for i, a in enumerate(shapes[:, 0]):
        for j, c in enumerate(thresholds):
            # property: a vectorized call gives the very bits of the scalar calls
            assert together.log_p[i, j] == float(tail_probability(c, a, 50.0).log_p)


@pytest.mark.parametrize("args", [(1.0, 0.0, 1.0), (1.0, 1.0, -2.0), (-1.0, 1.0, 1.0), (1.0, np.nan, 1.0)])
def test_bad_parameters_raise_value_error(args):
    with pytest.raises(ValueError):
        tail_probability(*args)
