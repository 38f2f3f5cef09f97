"""The product-limit estimate of P(X > c) with Greenwood's variance (pass-fail with suspended units)."""
import numpy as np
import pytest

from tailstop.core.methods import estimate_tail
from tailstop.core.product_limit import product_limit, regularized_sigma2
from tailstop.core.rule import pass_fail_rule_sigma2

# Remission times (weeks) of the 6-MP group of Freireich et al. (1963), as Gehan (1965) lists them;
# True marks a patient still in remission at that time (right-censored).
REMISSION_WEEKS = np.array([6, 6, 6, 6, 7, 9, 10, 10, 11, 13, 16, 17, 19, 20, 22, 23, 25, 32, 32, 34, 35], float)
STILL_IN_REMISSION = np.array([0, 0, 0, 1, 0, 1, 0, 1, 1, 0, 0, 1, 1, 1, 0, 0, 1, 1, 1, 1, 1], bool)

# check value: product-limit estimate and Greenwood standard error of the 6-MP group at each
# failure time, as printed in Klein & Moeschberger, Survival Analysis (2nd ed., 2003), Table 4.1A
# (the same figures appear in Kleinbaum & Klein's Survival Analysis text); values from memory.
PUBLISHED = [  # (week, Ŝ, standard error)
    (6, 0.857, 0.0764), (7, 0.807, 0.0869), (10, 0.753, 0.0963), (13, 0.690, 0.1068),
    (16, 0.627, 0.1141), (22, 0.538, 0.1282), (23, 0.448, 0.1346),
]


@pytest.mark.parametrize("week, survival, standard_error", PUBLISHED)
def test_published_product_limit_and_greenwood(week, survival, standard_error):
    estimate = product_limit(REMISSION_WEEKS, STILL_IN_REMISSION, week)
    # check value: PUBLISHED (Klein & Moeschberger Table 4.1A, from memory); tolerance: half a unit in the
    # last printed decimal (3 for Ŝ, 4 for the standard error)
    assert float(estimate.survival) == pytest.approx(survival, abs=5e-4)
    assert float(estimate.standard_error) == pytest.approx(standard_error, abs=5e-5)


def test_the_estimate_is_flat_between_failure_times():
    # check value: the product-limit estimate only steps at failure times (Kaplan & Meier 1958)
    at_failure = product_limit(REMISSION_WEEKS, STILL_IN_REMISSION, 16)
    just_before_next = product_limit(REMISSION_WEEKS, STILL_IN_REMISSION, 21.99)
    assert float(just_before_next.survival) == float(at_failure.survival)
    assert float(just_before_next.greenwood) == float(at_failure.greenwood)


def _brute_force(times, suspended, c):
    """Kaplan-Meier and Greenwood term by term over the distinct failure times (written for the test)."""
    survival, greenwood = 1.0, 0.0
    for t in np.unique(times[~suspended & (times <= c)]):
        at_risk = np.sum(times >= t)
        deaths = np.sum((times == t) & ~suspended)
        survival *= 1 - deaths / at_risk
        greenwood += deaths / (at_risk * (at_risk - deaths))
    return survival, greenwood


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_segments_agree_with_the_term_by_term_product(seed):
    # check value: Kaplan-Meier product and Greenwood sum evaluated term by term in the test
    rng = np.random.default_rng(seed)
    times = np.round(rng.gamma(2.0, 50.0, 300))          # rounded: ties between failures and suspensions
    suspended = rng.random(300) < 0.3
    for c in (40.0, 100.0, 180.0):
        survival, greenwood = _brute_force(times, suspended, c)
        estimate = product_limit(times, suspended, c)
        # check value: _brute_force; tolerance 1e-12: a product and a sum of up to 300 terms in another order
        assert float(estimate.survival) == pytest.approx(survival, rel=1e-12)
        assert float(estimate.greenwood) == pytest.approx(greenwood, rel=1e-12)


def test_every_prefix_at_once_equals_each_prefix_alone():
    # property: the running estimate of the first n units is the estimate of those n units
    rng = np.random.default_rng(7)
    times = np.round(rng.gamma(1.5, 40.0, 200))
    suspended = rng.random(200) < 0.25
    prefixes = np.arange(1, 201)
    running = product_limit(times, suspended, 60.0, prefixes=prefixes)
    for n in (1, 2, 17, 64, 133, 200):
        alone = product_limit(times[:n], suspended[:n], 60.0)
        # property: the same terms, summed per stretch (tolerance 1e-13, abs 1e-15 where log Ŝ is 0)
        assert running.log_survival[n - 1] == pytest.approx(float(alone.log_survival), rel=1e-13, abs=1e-15)
        assert running.greenwood[n - 1] == pytest.approx(float(alone.greenwood), rel=1e-13, abs=1e-15)
        assert running.beyond[n - 1] == alone.beyond


def test_without_suspension_below_the_threshold_it_is_the_share_beyond_exactly():
    # check value: with no censoring before c the product telescopes to k/n and Greenwood's
    # variance to the binomial p(1-p)/n (Kaplan & Meier 1958; common textbook fact)
    rng = np.random.default_rng(11)
    times = rng.gamma(2.0, 100.0, 250)
    suspended = (rng.random(250) < 0.3) & (times > 150.0)     # suspensions only at or past c
    times[suspended] = np.maximum(times[suspended], 150.0)
    estimate = product_limit(times, suspended, 150.0)
    k = int(np.sum((times > 150.0) | suspended))
    n = times.size
    assert float(estimate.survival) == k / n
    # check value: binomial variance n²/(k(n-k)) of the log-odds written out; tolerance 1e-13: rounding
    assert float(estimate.sigma2) == pytest.approx(n * n / (k * (n - k)), rel=1e-13)
    assert float(estimate.effective_units) == pytest.approx(n, rel=1e-13)
    assert float(regularized_sigma2(estimate)) == pytest.approx(float(pass_fail_rule_sigma2(n, k)),
                                                                 rel=1e-13)


def test_pass_fail_estimate_is_unchanged_without_suspension_below_the_threshold():
    # the same numbers, bit for bit, as a log whose survivors are all past the threshold
    rng = np.random.default_rng(12)
    times = rng.gamma(2.0, 100.0, 120)
    survivors = (times > 200.0) & (rng.random(120) < 0.5)
    plain = estimate_tail(times, 150.0, "pass-fail", survivors=survivors)
    k = int(np.sum(times > 150.0))
    assert plain.p == k / 120
    assert plain.sigma2 == 120 * 120 / (k * (120 - k))
    # one unit suspended below the threshold switches to the product-limit estimate
    survivors[0], times[0] = True, 50.0
    censored = estimate_tail(times, 150.0, "pass-fail", survivors=survivors)
    expected, greenwood = _brute_force(times, survivors, 150.0)
    # check value: term-by-term Kaplan-Meier written above; tolerance 1e-13 / 1e-12 for rounding
    assert censored.p == pytest.approx(expected, rel=1e-13)
    assert censored.sigma2 == pytest.approx(120 * greenwood / (1 - expected) ** 2, rel=1e-12)


def test_no_unit_seen_past_the_threshold_is_refused():
    times = np.array([5.0, 7.0, 8.0, 9.0])
    suspended = np.array([False, False, True, True])
    with pytest.raises(ValueError, match="no unit has been seen past the threshold"):
        estimate_tail(times, 10.0, "pass-fail", survivors=suspended)
