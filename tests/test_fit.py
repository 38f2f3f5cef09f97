"""Gamma ML from the sufficient statistics, and the goodness-of-fit p-value."""
from __future__ import annotations

import mpmath
import numpy as np
import pytest
from scipy import stats

from tailstop.core.models.gamma.fit import fit_gamma, gamma_fit_pvalue, log_minus_digamma, shape_from_log_ratio, trigamma_excess
from tailstop.core.methods import SufficientStatistics


@pytest.mark.parametrize("shape", [0.2, 0.9, 2.5, 30.0, 800.0])
def test_ml_matches_scipy_gamma_fit(shape):
    # check value: scipy.stats.gamma.fit with floc=0 (METHOD.md §8), a general-purpose reference
    x = np.random.default_rng(11).gamma(shape, 37.0, size=150)
    ours = fit_gamma(x)
    a, _, s = stats.gamma.fit(x, floc=0)
    assert ours.shape == pytest.approx(a, rel=1e-7)  # scipy's own solver tolerance
    assert ours.scale == pytest.approx(s, rel=1e-7)
    assert ours.mean == pytest.approx(x.mean(), rel=1e-12)  # ML property: â·ŝ = x̄


@pytest.mark.parametrize("a", [0.01, 0.5, 1.0, 7.3, 19.99, 20.0, 150.0, 1e5])
def test_shape_equation_is_solved(a):
    # check value: mpmath's log and digamma at 40 digits give s; we must invert it back to a
    mpmath.mp.dps = 40
    s = float(mpmath.log(a) - mpmath.digamma(a))
    assert float(shape_from_log_ratio(s)) == pytest.approx(a, rel=1e-11)


@pytest.mark.parametrize("a", [0.3, 5.0, 19.0, 21.0, 400.0, 1e6])
def test_series_helpers_match_mpmath(a):
    # check value: mpmath at 40 digits; tolerance 1e-13 / 1e-12: the series helpers are meant to be
    # good to a few units in the last digits of a double (trigamma_excess is a difference, one digit less)
    mpmath.mp.dps = 40
    assert float(log_minus_digamma(a)) == pytest.approx(float(mpmath.log(a) - mpmath.digamma(a)), rel=1e-13)
    assert float(trigamma_excess(a)) == pytest.approx(float(a * mpmath.psi(1, a) - 1), rel=1e-12)


def test_running_statistics_equal_prefix_statistics():
    x = np.random.default_rng(3).gamma(1.7, 10.0, size=40)
    running = SufficientStatistics.running(x, 15.0)
    # property: running sums equal sums of each prefix computed afresh (numpy's own sum is the reference);
    # tolerance 1e-14 for a cumulative sum of 40 terms (a few roundings), 1e-9 for log(mean) - mean(log),
    # a difference of two nearly equal logs that keeps about 9 digits
    for n in (2, 9, 40):
        single = SufficientStatistics.of(x[:n], 15.0)
        assert running.sum_x[n - 1] == pytest.approx(float(single.sum_x), rel=1e-14)
        assert running.log_ratio[n - 1] == pytest.approx(float(single.log_ratio), rel=1e-9)
        assert running.exceedances[n - 1] == int(single.exceedances)


def test_nearly_equal_values_still_fit_and_equal_values_are_refused():
    x = 1000.0 + np.random.default_rng(5).normal(size=30) * 1.0
    fit = fit_gamma(x)
    # derivation: for a gamma, var = a s^2 and mean = a s, so a is about mean^2/var ~ 1e6
    assert 3e5 < fit.shape < 3e6
    # check value: the ML shape solving log a - ψ(a) = log x̄ - mean(log x) in mpmath at 40 digits
    # (1,328,689.5988 for this seeded sample); tolerance 1e-8: log x̄ - mean(log x) is 3.8e-7 here, a
    # difference of doubles near 6.9 that keeps about 9 digits
    with mpmath.workdps(40):
        values = [mpmath.mpf(float(v)) for v in x]
        ratio = mpmath.log(mpmath.fsum(values) / len(values)) - mpmath.fsum(mpmath.log(v) for v in values) / len(values)
        reference = mpmath.findroot(lambda a: mpmath.log(a) - mpmath.digamma(a) - ratio, fit.shape)
    assert fit.shape == pytest.approx(float(reference), rel=1e-8)
    with pytest.raises(ValueError, match="equal"):
        fit_gamma([5.0, 5.0, 5.0])


@pytest.mark.parametrize("bad", [[1.0], [1.0, -2.0], [1.0, 0.0], [1.0, np.inf]])
def test_fit_refuses_non_samples(bad):
    with pytest.raises(ValueError):
        fit_gamma(bad)


@pytest.mark.parametrize("shape, size, seed", [(3.0, 40, 9), (0.4, 25, 3), (60.0, 120, 5), (2.0, 300, 8)])
def test_pvalue_is_scipy_goodness_of_fit_and_is_seeded(shape, size, seed):
    # check value: scipy.stats.goodness_of_fit (Anderson-Darling, estimated shape and scale, loc 0), which
    # refits each simulated sample with scipy's own gamma fit; ours refits with the vectorized ML in batches
    x = np.random.default_rng(seed).gamma(shape, 2.0, size=size)
    reference = stats.goodness_of_fit(stats.gamma, x, known_params={"loc": 0.0}, statistic="ad",
                                      n_mc_samples=999, rng=np.random.default_rng(20261201))
    assert gamma_fit_pvalue(x) == reference.pvalue
    assert gamma_fit_pvalue(x) == gamma_fit_pvalue(x)


def test_the_statistic_and_the_batches_do_not_change_the_pvalue(monkeypatch):
    import tailstop.core.models.gamma.fit as fit

    x = np.random.default_rng(2).gamma(1.7, 3.0, size=50)
    # check value: scipy's Anderson-Darling statistic of goodness_of_fit against the gamma fitted by scipy;
    # tolerance 1e-9: the two ML fits (scipy's optimizer and ours) agree to about that many digits
    reference = stats.goodness_of_fit(stats.gamma, x, known_params={"loc": 0.0}, statistic="ad",
                                      n_mc_samples=99, rng=np.random.default_rng(1))
    assert fit._anderson_darling(x) == pytest.approx(reference.statistic, rel=1e-9)
    whole = gamma_fit_pvalue(x)
    monkeypatch.setattr(fit, "GOF_BATCH_VALUES", 7 * x.size)  # batches of 7 samples, the last one short
    assert gamma_fit_pvalue(x) == whole


def test_pvalue_detects_a_clearly_non_gamma_sample():
    # Two well separated clusters are not gamma; gamma data are usually accepted.
    # Levels 0.01 and 0.05: common practice significance levels. Seed-dependent: at these seeds the
    # p-values are 0.001 (the smallest of 999 samples) and 0.341 (a gamma sample's p-value is about uniform,
    # so 0.05 would fail for 1 seed in 20); the p-value itself is checked against scipy above.
    rng = np.random.default_rng(4)
    bimodal = np.concatenate([rng.normal(10, 0.3, 40), rng.normal(100, 3, 40)])
    assert gamma_fit_pvalue(bimodal) < 0.01
    assert gamma_fit_pvalue(rng.gamma(2.0, 5.0, size=80)) > 0.05


def test_long_logs_use_fewer_samples_and_the_longest_are_refused():
    # memory and time of the Monte Carlo check are bounded by GOF_VALUE_BUDGET values
    from tailstop.core.models.gamma.fit import GOF_MIN_SAMPLES, GOF_VALUE_BUDGET, gof_samples

    assert gof_samples(40) == 999
    assert gof_samples(100_000) * 100_000 <= GOF_VALUE_BUDGET
    too_long = GOF_VALUE_BUDGET // GOF_MIN_SAMPLES + 1
    with pytest.raises(ValueError, match="at most"):
        gamma_fit_pvalue(np.random.default_rng(1).gamma(2.0, 1.0, size=too_long))
