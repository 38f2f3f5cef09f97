"""Pieces of the Weibull and lognormal models that the decision column and the fits lean on, each
against a reference the package did not compute: scipy's densities, the definition of a lower bound,
a running sum done the plain way over a log longer than one chunk, and the AIC written out."""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from tailstop.core.models import get_model
from tailstop.core.models import lognormal, weibull
from tailstop.core.models.compare import CLEARLY_BETTER, better_model, compare_models

SCIPY = {"weibull": lambda shape: stats.weibull_min(shape), "lognormal": lambda shape: stats.lognorm(shape)}


@pytest.mark.parametrize("model", ["weibull", "lognormal"])
@pytest.mark.parametrize("shape", [0.4, 1.0, 2.5, 9.0])
@pytest.mark.parametrize("t", [0.02, 0.7, 1.0, 3.0])
def test_density_term_is_t_times_the_density(model, shape, t):
    # check value: scipy.stats weibull_min(c=β) / lognorm(s=σ) at scale 1: log(t f(t)) = log t + logpdf(t)
    # (the density of log X at log t, base.LifetimeModel.log_density_term); tolerance 1e-12: both are a few
    # double operations on the same logs
    expected = math.log(t) + float(SCIPY[model](shape).logpdf(t))
    assert float(get_model(model).log_density_term(shape, t)) == pytest.approx(expected, rel=1e-12, abs=1e-13)


FLOOR_RANGES = [(-3.0, 2.0), (-0.5, 0.9), (0.1, 0.3), (0.5, 4.0), (-8.0, -6.0), (0.40, 0.45), (0.0, 0.0)]


@pytest.mark.parametrize("model", ["weibull", "lognormal"])
@pytest.mark.parametrize("method", ["known-shape", "fitted-shape"])
@pytest.mark.parametrize("low,high", FLOOR_RANGES)
def test_sigma2_floor_is_a_lower_bound_and_is_reached(model, method, low, high):
    # property (definition of a lower bound, base.LifetimeModel.sigma2_floor): the floor is at most σ² at every
    # score of [low, high] (tolerance 1e-12: rounding of the same closed forms). Where σ² is monotone on each
    # side of one point (known-shape; lognormal fitted-shape, least at z = 0) the floor is the minimum itself,
    # reached on the grid to 1e-6 (20,001 points come that close to the least point). The Weibull
    # fitted-shape floor is a product of two minima (u/(1-p) least at the low end, the shape factor least at
    # w = 1 - γ) and only a bound; its σ² falls for w below about -0.29, so a range reaching below that
    # (-3 .. 2, -8 .. -6) has its least σ² inside, not at the low end.
    lifetime = get_model(model)
    scores = np.linspace(low, high, 20_001)
    values = lifetime.sigma2_of_score[method](scores)
    floor = float(lifetime.sigma2_floor(method, low, high))
    # property: a lower bound of the closed forms; tolerance 1e-12 (rounding) and 1e-6 (the grid), see above
    assert 0 < floor <= float(values.min()) * (1 + 1e-12)
    if not (model == "weibull" and method == "fitted-shape"):
        assert floor == pytest.approx(float(values.min()), rel=1e-6)


def test_weibull_known_shape_running_scale_over_a_log_longer_than_a_chunk():
    # check value: η̂_n = (mean of x_i^β over the first n)^(1/β) (METHOD.md, Weibull with β known), the
    # running mean taken here with numpy's logaddexp.accumulate. The log is longer than the 65,536 values
    # the package sums at a time, and its largest value comes after the first chunk, so the carried sum
    # must be rescaled the right way. Tolerance 1e-11: a running log-sum of 70,000 terms loses a few
    # digits to rounding in either route.
    rng = np.random.default_rng(11)
    x = rng.weibull(1.7, 70_000) * 100.0
    x[69_000] = 2_000.0  # far beyond the rest (the others are below about 500)
    beta = 1.7
    result = weibull.statistics(x, "known-shape", beta, running=True).known_log_scale
    log_powers = beta * np.log(x)
    expected = (np.logaddexp.accumulate(log_powers) - np.log(np.arange(1, x.size + 1))) / beta
    # check value: numpy's logaddexp.accumulate route above; tolerance 1e-11 (rounding, see above)
    for n in (2, 65_536, 65_537, 69_000, 69_001, 70_000):
        assert result[n - 1] == pytest.approx(expected[n - 1], rel=1e-11)


def test_lognormal_running_statistics_are_the_ml_ones():
    # check value: the ML of a lognormal is mean(log x) and the root mean square of log x - mean with divisor n
    # (scipy.stats.lognorm.fit with floc=0 gives the same; numpy's mean and std with ddof=0 here);
    # tolerance 1e-10: running sums of squares centred on the first value against a two-pass variance
    x = np.random.default_rng(12).lognormal(3.0, 0.8, 300)
    running = lognormal.statistics(x, "fitted-shape", running=True)
    for n in (2, 3, 10, 300):
        logs = np.log(x[:n])
        assert running.mean_log[n - 1] == pytest.approx(logs.mean(), rel=1e-12)
        assert running.sd_log[n - 1] == pytest.approx(logs.std(ddof=0), rel=1e-10)
    shape, _, scale = stats.lognorm.fit(x, floc=0)
    # tolerance 1e-6: scipy's lognorm fit with floc uses the same closed form, to its own rounding
    assert running.sd_log[-1] == pytest.approx(shape, rel=1e-6)
    assert math.exp(running.mean_log[-1]) == pytest.approx(scale, rel=1e-6)


def test_fit_compare_aic_is_four_minus_twice_the_log_likelihood():
    # check value: AIC = 2k - 2 log L with k = 2 parameters (Akaike 1974; Burnham & Anderson 2002 §2.2, from
    # memory), log L summed here from scipy's logpdf at the fitted parameters; tolerance 1e-10: the same sum
    # of 40 logs in two routes
    x = np.random.default_rng(13).weibull(1.5, 40) * 300.0
    dist = {"gamma": lambda f: stats.gamma(f.shape, scale=f.scale),
            "weibull": lambda f: stats.weibull_min(f.shape, scale=f.scale),
            "lognormal": lambda f: stats.lognorm(f.shape, scale=f.scale)}
    for row in compare_models(x, pvalues=False):
        log_likelihood = float(np.sum(dist[row.model](row.fit).logpdf(x)))
        assert row.fit.log_likelihood == pytest.approx(log_likelihood, rel=1e-10)
        # check value: AIC = 2·2 - 2 log L written out; tolerance 1e-10 as above
        assert row.aic == pytest.approx(4.0 - 2.0 * log_likelihood, rel=1e-10)


def test_clearly_better_holds_at_exactly_the_difference(monkeypatch):
    # property: "clearly better" is an AIC difference of CLEARLY_BETTER or more (compare.py, Burnham &
    # Anderson 2002 §2.6, from memory). Log-likelihoods -100 and -102 give AICs 204 and 208, exactly 4
    # apart in doubles; 4 - 1e-9 apart is not clearly better.
    from tailstop.core.models import compare as compare_module
    from tailstop.core.models.base import ModelFit

    def rows(gap):
        fits = [ModelFit("weibull", 1.5, 300.0, 40, -100.0), ModelFit("gamma", 2.0, 150.0, 40, -100.0 - gap / 2),
                ModelFit("lognormal", 0.7, 250.0, 40, -110.0)]
        return tuple(sorted((compare_module.ModelComparison(fit) for fit in fits), key=lambda row: row.aic))

    # property: the threshold is 4 (from memory, Burnham & Anderson 2002 §2.6), gaps of 4 and 4 - 1e-9
    assert CLEARLY_BETTER == 4.0
    monkeypatch.setattr(compare_module, "compare_models", lambda observations, pvalues=True: rows(4.0))
    chosen = better_model([1.0, 2.0], "gamma")
    assert chosen is not None and chosen.model == "weibull"
    monkeypatch.setattr(compare_module, "compare_models", lambda observations, pvalues=True: rows(4.0 - 1e-9))
    # property: a gap below 4 is not clearly better
    assert better_model([1.0, 2.0], "gamma") is None


def test_fit_compare_rows_hold_each_model_s_own_shape_and_scale():
    # check value: scipy.stats gamma / weibull_min / lognorm .fit with floc=0 on the same values, column by
    # column of the table (model, shape, scale, log-likelihood, AIC, p-value); tolerance 1e-4: scipy's
    # general optimiser (common practice), ample to tell a shape from a scale (here 1.5 against about 300)
    from tailstop.sheet import FIT_COMPARE

    x = np.random.default_rng(15).weibull(1.5, 50) * 300.0
    table = FIT_COMPARE([[float(v)] for v in x])
    rows = {row[0]: row for row in table[1:]}
    for name, law in (("gamma", stats.gamma), ("weibull", stats.weibull_min), ("lognormal", stats.lognorm)):
        shape, _, scale = law.fit(x, floc=0)
        # check value: scipy's fits (above), tolerance 1e-4 as said there
        assert rows[name][1] == pytest.approx(shape, rel=1e-4)
        assert rows[name][2] == pytest.approx(scale, rel=1e-4)
        assert 0 < rows[name][5] <= 1
