"""The model argument of the spreadsheet formulas, and the FIT_* formulas."""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from tailstop import sheet

# Deep-groove ball bearings, millions of revolutions (Lieblein & Zelen 1956; tabled in Lawless 2003).
BALL_BEARINGS = [17.88, 28.92, 33.00, 41.52, 42.12, 45.60, 48.48, 51.84, 51.96, 54.12, 55.56, 67.80,
                 68.64, 68.64, 68.88, 84.12, 93.12, 98.64, 105.12, 105.84, 127.92, 128.04, 173.40]
COLUMN = [[v] for v in BALL_BEARINGS]
Z95 = 1.959964  # check value: NIST/SEMATECH §1.3.6.7.1


def test_tail_prob_takes_the_model():
    # check value: Weibull e^{-(c/η)^β} by hand (math.exp); scipy.stats.lognorm.sf
    # tolerance 1e-15 on e^-1 (exp of an exact -1), 1e-13 against scipy's lognorm.sf (a few roundings apart)
    assert sheet.TAIL_PROB(1000, 2, 1000, "weibull") == pytest.approx(math.exp(-1.0), rel=1e-15)
    assert sheet.TAIL_PROB(1000, 2, 1000, "WeiBull ") == pytest.approx(math.exp(-1.0), rel=1e-15)
    assert sheet.TAIL_PROB(2000, 0.5, 1000, "lognormal") == pytest.approx(stats.lognorm.sf(2000, 0.5, scale=1000), rel=1e-13)
    # default and explicit gamma: the same bits (check value: scipy.stats.gamma.sf)
    assert sheet.TAIL_PROB(1800, 2, 600) == sheet.TAIL_PROB(1800, 2, 600, "gamma") == sheet.TAIL_PROB(1800, 2, 600, None)
    # tolerance 1e-13: scipy's gammaincc and ours, a few roundings apart in the body
    assert sheet.TAIL_PROB(1800, 2, 600) == pytest.approx(stats.gamma.sf(1800, 2, scale=600), rel=1e-13)


def test_bad_model_and_parameters_list_the_models():
    # common practice, no published source: the cell says what to type
    assert sheet.TAIL_PROB(1, 2, 3, "normal") == "#TAILSTOP! model must be one of gamma, weibull, lognormal (got 'normal')"
    assert sheet.TAIL_PROB(1, 2, 3, 7) == "#TAILSTOP! model must be one of gamma, weibull, lognormal"
    for text in (sheet.TAIL_PROB(1, -2, 3, "lognormal"), sheet.UNITS_REQUIRED(1, 2, 0, 1.5, 0.95, None, "weibull")):
        assert text.startswith("#TAILSTOP!") and "gamma, weibull, lognormal" in text
    assert sheet.TAIL_PROB_EST(COLUMN, 50, "known-shape", None, "lognormal") == \
        "#TAILSTOP! known-shape needs the lognormal shape (the shape argument)"
    assert sheet.FIT_SHAPE(COLUMN, "exponential").startswith("#TAILSTOP! model must be one of")


def test_estimates_under_each_model_match_scipy_fits():
    # check value: scipy.stats.weibull_min.fit / lognorm.fit with floc=0, then their sf at the threshold
    threshold = 75.0
    shape, _, scale = stats.weibull_min.fit(BALL_BEARINGS, floc=0)
    # tolerance 1e-5 on the Weibull (scipy's optimiser tolerance); 1e-10 on the closed-form lognormal ML;
    # 1e-13 on the known-shape closed form
    assert sheet.TAIL_PROB_EST(COLUMN, threshold, "fitted-shape", None, "weibull") == \
        pytest.approx(stats.weibull_min.sf(threshold, shape, scale=scale), rel=1e-5)
    shape, _, scale = stats.lognorm.fit(BALL_BEARINGS, floc=0)
    assert sheet.TAIL_PROB_EST(COLUMN, threshold, "fitted-shape", None, "lognormal") == \
        pytest.approx(stats.lognorm.sf(threshold, shape, scale=scale), rel=1e-10)
    # known shape: η̂ = (mean x^β)^{1/β} (closed form, numpy)
    eta = np.mean(np.array(BALL_BEARINGS) ** 2.0) ** 0.5
    # check value: closed form above; tolerance 1e-13, a few roundings of the same exp
    assert sheet.TAIL_PROB_EST(COLUMN, threshold, "known-shape", 2, "weibull") == pytest.approx(math.exp(-(threshold / eta) ** 2), rel=1e-13)
    # pass-fail ignores the model
    assert sheet.TAIL_PROB_EST(COLUMN, threshold, None, None, "weibull") == sheet.TAIL_PROB_EST(COLUMN, threshold)


def test_bounds_are_the_fixed_accuracy_interval_of_the_model_estimate():
    # check value: METHOD.md §2, p_low = q/(d+q), p_high = dq/(1+dq) with q the estimated odds
    p = sheet.TAIL_PROB_EST(COLUMN, 75.0, "fitted-shape", None, "lognormal")
    q = p / (1 - p)
    [[low, high]] = sheet.TAIL_PROB_BOUNDS(COLUMN, 75.0, 1.5, "fitted-shape", None, "lognormal")
    # tolerance 1e-12 (the closed forms in doubles); 1e-10 on the odds, p/(1-p) amplifies the rounding of p
    assert (low, high) == pytest.approx((q / (1.5 + q), 1.5 * q / (1 + 1.5 * q)), rel=1e-12)
    [[odds_low, odds_high]] = sheet.TAIL_ODDS_BOUNDS(COLUMN, 75.0, 1.5, "fitted-shape", None, "weibull")
    p = sheet.TAIL_PROB_EST(COLUMN, 75.0, "fitted-shape", None, "weibull")
    assert (odds_low, odds_high) == pytest.approx((p / (1 - p) / 1.5, p / (1 - p) * 1.5), rel=1e-10)


def test_units_required_and_accuracy_for_units_under_a_weibull_guess():
    # check value: METHOD.md §3-4 hand check for the exponential (Weibull β = 1), σ² = t²/(1-p)², t = c/η,
    # n* = (z / ln d)² σ², z = 1.959964 (NIST/SEMATECH §1.3.6.7.1)
    t = 0.5
    sigma2 = t * t / (1 - math.exp(-t)) ** 2
    n_star = (Z95 / math.log(1.5)) ** 2 * sigma2
    assert sheet.UNITS_REQUIRED(500, 1, 1000, 1.5, 0.95, "known-shape", "weibull") == math.ceil(n_star)
    assert sheet.ACCURACY_FOR_UNITS(100, 500, 1, 1000, 0.95, "known-shape", "weibull") == \
        pytest.approx(math.exp(Z95 * math.sqrt(sigma2 / 100)), rel=1e-6)  # tolerance: Z95 has 7 digits
    # pass-fail under a model: σ² = 1/(p(1-p)) with p from that model (METHOD.md §3)
    p = math.exp(-0.5)
    assert sheet.UNITS_REQUIRED(500, 1, 1000, 1.5, 0.95, None, "weibull") == math.ceil((Z95 / math.log(1.5)) ** 2 / (p * (1 - p)))


def test_fit_formulas_match_the_textbook_fits():
    # check value: Lawless (2003), ball bearing data: Weibull β̂ = 2.102, η̂ = 81.88; lognormal μ̂ = 4.150,
    # σ̂ = 0.522 (from memory, to the digits quoted); gamma as GAMMA_FIT_SHAPE
    assert round(sheet.FIT_SHAPE(COLUMN, "weibull"), 3) == 2.102
    assert round(sheet.FIT_SCALE(COLUMN, "weibull"), 2) == 81.88
    assert round(sheet.FIT_SHAPE(COLUMN, "lognormal"), 3) == 0.522
    assert round(math.log(sheet.FIT_SCALE(COLUMN, "lognormal")), 3) == 4.150
    assert sheet.FIT_SHAPE(COLUMN) == sheet.GAMMA_FIT_SHAPE(COLUMN)
    assert sheet.FIT_PVALUE(COLUMN) == sheet.GAMMA_FIT_PVALUE(COLUMN)
    assert 0 < sheet.FIT_PVALUE(COLUMN, "weibull") <= 1


def test_fit_compare_ranks_by_aic():
    # check value: log-likelihoods from scipy.stats logpdf at scipy's own fits (floc=0); AIC = 4 - 2 log L
    table = sheet.FIT_COMPARE(COLUMN)
    assert table[0] == ["model", "shape", "scale", "log-likelihood", "AIC", "fit p-value"]
    rows = {row[0]: row for row in table[1:]}
    assert set(rows) == {"gamma", "weibull", "lognormal"}
    for name, distribution in (("gamma", stats.gamma), ("weibull", stats.weibull_min), ("lognormal", stats.lognorm)):
        shape, _, scale = distribution.fit(BALL_BEARINGS, floc=0)
        reference = distribution.logpdf(BALL_BEARINGS, shape, 0, scale).sum()
        # check value: scipy logpdf at scipy's fits (above); tolerance 1e-6 absolute: scipy's Weibull optimiser
        # stops within about 1e-6 of the maximum of log L; AIC written out, rel 1e-15 (exact arithmetic)
        assert rows[name][3] == pytest.approx(reference, abs=1e-6)
        assert rows[name][4] == pytest.approx(4 - 2 * rows[name][3], rel=1e-15)
    aics = [row[4] for row in table[1:]]
    assert aics == sorted(aics)
    # from memory (Lawless 2003): the lognormal fits these data better than the Weibull
    assert aics.index(rows["lognormal"][4]) < aics.index(rows["weibull"][4])
