"""Asymptotic variances σ² = n·Var(log q̂) against closed forms and mpmath."""
from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest

from tailstop.core.models.gamma.variance import log_odds_shape_derivative, sigma2_fitted_shape, sigma2_known_shape, sigma2_pass_fail

mpmath.mp.dps = 40


def mp_log_odds(a, t):
    q = mpmath.gammainc(a, t, mpmath.inf, regularized=True)
    return mpmath.log(q) - mpmath.log(1 - q)


@pytest.mark.parametrize("t", [0.05, 1.0, 3.0, 40.0])
def test_known_shape_exponential_closed_form(t):
    # check value: METHOD.md §3 hand check — shape 1, p = e^{-t}: σ² = t² / (1 - p)²
    p = math.exp(-t)
    # tolerance 1e-13: gammaincc and logs against exp, a few roundings
    assert float(sigma2_known_shape(1.0, t)) == pytest.approx(t * t / (1 - p) ** 2, rel=1e-13)


def test_pass_fail_closed_form():
    # check value: METHOD.md §3 — σ² = 1/(p(1-p)); 4 at p = 0.5
    assert float(sigma2_pass_fail(0.5)) == 4.0
    assert float(sigma2_pass_fail(0.1)) == pytest.approx(1 / 0.09, rel=1e-15)  # tolerance: one rounding


@pytest.mark.parametrize("a,t", [(0.3, 0.1), (1.0, 1.0), (2.5, 0.3), (0.4, 30.0), (50.0, 80.0), (3.0, 1e-3), (500.0, 450.0)])
def test_shape_derivative_matches_mpmath(a, t):
    # check value: mpmath.diff of the log-odds at 40 digits
    expected = float(mpmath.diff(lambda x: mp_log_odds(x, t), a))
    assert float(log_odds_shape_derivative(a, t)) == pytest.approx(expected, rel=1e-9)


def mp_fitted_sigma2(a, t):
    """gᵀ I⁻¹ g / (p(1-p))² with rate b = 1 (t = c b), built from mpmath derivatives and matrix inverse."""
    c = mpmath.mpf(t)
    p = lambda aa, bb: mpmath.gammainc(aa, c * bb, mpmath.inf, regularized=True)  # noqa: E731
    pa = mpmath.diff(lambda aa: p(aa, 1), a)
    pb = mpmath.diff(lambda bb: p(a, bb), 1)
    info = mpmath.matrix([[mpmath.psi(1, a), -1], [-1, a]])
    g = mpmath.matrix([pa, pb])
    quad = (g.T * info ** -1 * g)[0]
    pv = p(a, 1)
    return float(quad / (pv * (1 - pv)) ** 2)


@pytest.mark.parametrize("a,t", [(0.5, 0.2), (1.0, 2.0), (2.0, 1.5), (6.0, 12.0), (40.0, 30.0), (0.05, 3.0),
                                 (0.3, 0.01)])
def test_fitted_shape_matches_fisher_information_in_mpmath(a, t):
    # check value: METHOD.md §3 formula evaluated independently in mpmath (numerical derivatives + matrix inverse);
    # tolerance 1e-12: the package's shape derivative is good to about 12 digits (test above at 1e-9 is its floor)
    assert float(sigma2_fitted_shape(a, t)) == pytest.approx(mp_fitted_sigma2(a, t), rel=1e-12)


@pytest.mark.parametrize("a,t", [(200.0, 260.0), (1000.0, 1100.0), (1e4, 9750.0), (1e5, 100300.0),
                                 (1e5, 98504.02706509772), (1e5, 112176.85724295325)])
def test_fitted_shape_keeps_its_digits_at_huge_shapes(a, t):
    # check value: as above, mpmath at 40 digits. Near t = a the two terms of a u² - 2uv + ψ'(a) v²
    # cancel to 1/a of their size; written as v²/a + G²/(a(aψ' - 1)) nothing cancels
    # (1e-4 of σ² used to be lost at a = 1e5, 1e-2 at t = a + 300).
    assert float(sigma2_fitted_shape(a, t)) == pytest.approx(mp_fitted_sigma2(a, t), rel=3e-12)


def test_units_required_at_a_huge_fitted_shape_rounds_up():
    from tailstop.sheet import UNITS_REQUIRED

    # check value: mpmath at 40 digits, n* = (z / ln 1.5)² σ² = 7036.0006 for a = 1e5, t = 98504.03
    z = float(mpmath.sqrt(2) * mpmath.erfinv(mpmath.mpf("0.95")))
    n_star = (z / math.log(1.5)) ** 2 * mp_fitted_sigma2(1e5, 98504.02706509772)
    assert 7036.0 < n_star < 7036.001
    assert UNITS_REQUIRED(98504.02706509772, 1e5, 1, 1.5, 0.95, "fitted-shape") == 7037


def test_fitting_the_shape_costs_variance():
    # Estimating one more parameter can never reduce the asymptotic variance.
    a = np.array([0.5, 1.0, 3.0, 10.0])
    t = np.array([0.3, 2.0, 5.0, 9.0])
    assert np.all(sigma2_fitted_shape(a, t) >= sigma2_known_shape(a, t))


def test_known_shape_variance_by_simulation():
    # common practice: the delta-method variance is checked against the spread of simulated estimates
    from tailstop.core.methods import SufficientStatistics, estimate_from_statistics

    rng = np.random.default_rng(21)
    a, s, c, n = 2.0, 1.0, 3.0, 400
    x = rng.gamma(a, s, size=(4000, n))
    stats_ = SufficientStatistics(n=np.full(4000, n), sum_x=x.sum(axis=1), log_ratio=np.zeros(4000),
                                  exceedances=np.zeros(4000))
    log_q = estimate_from_statistics(stats_, c, "known-shape", a).log_odds
    # check value: the METHOD.md §3 σ² against a seeded simulation written here (common practice);
    # the sample variance of 4000 draws has a relative standard error of about sqrt(2/4000) = 2.2 %;
    # tolerance 0.08: about 3.6 of those standard errors, with room for the O(1/n) bias of the delta method
    assert n * np.var(log_q) == pytest.approx(float(sigma2_known_shape(a, c / s)), rel=0.08)
