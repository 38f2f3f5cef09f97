"""The stopping rule, the units needed now and the two-stage plan on logs with suspended units."""
import numpy as np
import pytest

from tailstop.core.methods import estimate_tail
from tailstop.core.product_limit import product_limit, regularized_sigma2
from tailstop.core.rule import boundary_factor
from tailstop.core.sequential import decision_column, two_stage_plan, units_needed_now

THRESHOLD = 150.0
METHODS = [("pass-fail", None), ("known-shape", 2.0), ("fitted-shape", None)]


def _log(seed, n=400, share=0.2):
    """Gamma(2, 100) lifetimes; a share of the units pulled at a uniform time in (0, 600) (a rig fault)."""
    rng = np.random.default_rng(seed)
    lifetimes = rng.gamma(2.0, 100.0, n)
    pulled = rng.uniform(0.0, 600.0, n)
    suspended = (rng.random(n) < share) & (pulled < lifetimes)
    return np.where(suspended, pulled, lifetimes), suspended


def _rule_sigma2(times, suspended, method, shape, model="gamma"):
    """σ̂² of the first n units as the rule should use it, one prefix at a time (written for the test)."""
    if method == "pass-fail":
        return float(regularized_sigma2(product_limit(times, suspended, THRESHOLD)))
    try:
        return estimate_tail(times, THRESHOLD, method, shape, survivors=suspended, model=model).sigma2
    except ValueError:
        return np.nan


MODEL_METHODS = METHODS + [("known-shape", 1.5, "weibull"), ("fitted-shape", None, "weibull"),
                           ("known-shape", 0.7, "lognormal"), ("fitted-shape", None, "lognormal")]


@pytest.mark.parametrize("method, shape, model", [m if len(m) == 3 else m + ("gamma",) for m in MODEL_METHODS])
@pytest.mark.parametrize("seed", [1, 2])
def test_the_column_stops_where_each_prefix_alone_says_stop(method, shape, model, seed):
    # property: the vectorized column equals the rule applied to each prefix on its own
    times, suspended = _log(seed)
    factor = boundary_factor(1.4, 0.9)
    column = decision_column(times, THRESHOLD, 1.4, 0.9, 10, method, shape, survivors=suspended, model=model)
    first = None
    for n in range(10, times.size + 1):
        if not suspended[:n].any() or (method == "pass-fail" and not (suspended[:n] & (times[:n] < THRESHOLD)).any()):
            continue  # before the first censored unit the complete-log rule applies (tested elsewhere)
        sigma2 = _rule_sigma2(times[:n], suspended[:n], method, shape, model)
        if np.isfinite(sigma2) and n >= factor * sigma2:
            first = n
            break
    assert column.stop_units is not None and first is not None
    assert column.stop_units == first


@pytest.mark.parametrize("method, shape, model", [m if len(m) == 3 else m + ("gamma",) for m in MODEL_METHODS])
def test_prefixes_before_the_first_suspension_decide_as_a_complete_log(method, shape, model):
    times, suspended = _log(3)
    first = int(np.argmax(suspended))
    with_suspensions = decision_column(times, THRESHOLD, 1.3, 0.9, 5, method, shape, survivors=suspended,
                                       model=model)
    complete = decision_column(times[:first], THRESHOLD, 1.3, 0.9, 5, method, shape, model=model)
    assert np.array_equal(with_suspensions.states[:first], complete.states)


@pytest.mark.parametrize("method, shape", METHODS)
def test_units_needed_now_is_the_factor_times_the_censored_sigma2(method, shape):
    times, suspended = _log(4, n=120, share=0.3)
    needed = units_needed_now(times, THRESHOLD, 1.5, 0.95, method, shape, survivors=suspended)
    assert needed.units == times.size                     # every unit counts, failed or suspended
    sigma2 = _rule_sigma2(times, suspended, method, shape)
    # property: the rule uses the σ̂² the estimate reports (_rule_sigma2 calls estimate_tail / product_limit,
    # whose numbers are checked against scipy in tests/test_censored_fits.py and by hand in
    # tests/test_product_limit.py); tolerance 1e-12: the same formulas in another order of operations
    assert needed.sigma2 == pytest.approx(sigma2, rel=1e-12)
    assert needed.needed == pytest.approx(boundary_factor(1.5, 0.95) * sigma2, rel=1e-12)
    plan = two_stage_plan(times[:40], THRESHOLD, 1.5, 0.95, method, shape, survivors=suspended[:40])
    assert plan.sigma2 == pytest.approx(_rule_sigma2(times[:40], suspended[:40], method, shape), rel=1e-12)
    if method == "pass-fail":
        # check value: Kaplan-Meier and Greenwood term by term over the distinct failure times (written here),
        # σ̂² = n G / (1 - Ŝ)² (core/product_limit.py notes); tolerance 1e-12 for sums in another order
        survival, greenwood = 1.0, 0.0
        for t in np.unique(times[~suspended & (times <= THRESHOLD)]):
            at_risk, failed = np.sum(times >= t), np.sum((times == t) & ~suspended)
            survival *= 1 - failed / at_risk
            greenwood += failed / (at_risk * (at_risk - failed))
        assert needed.sigma2 == pytest.approx(times.size * greenwood / (1 - survival) ** 2, rel=1e-12)


def test_more_suspension_means_more_units_needed():
    # property: suspending units loses information, so the rate-of-suspension unit count grows
    rng = np.random.default_rng(5)
    lifetimes = rng.gamma(2.0, 100.0, 3000)
    pulled = rng.uniform(0.0, 400.0, 3000)
    counts = []
    for share in (0.0, 0.3, 0.6):
        suspended = (rng.random(3000) < share) & (pulled < lifetimes)
        times = np.where(suspended, pulled, lifetimes)
        counts.append(units_needed_now(times, THRESHOLD, 1.2, 0.95, "known-shape", 2.0, survivors=suspended).needed)
    assert counts[0] < counts[1] < counts[2]


@pytest.mark.parametrize("method, shape, needed", [("known-shape", 2.0, 1), ("fitted-shape", None, 2),
                                                   ("pass-fail", None, 1)])
def test_too_few_failures_continue_and_the_units_needed_say_how_many(method, shape, needed):
    times = np.array([100.0, 120.0, 80.0, 130.0, 95.0, 60.0])
    suspended = np.array([True, True, True, True, True, True])
    suspended[: needed - 1] = False
    column = decision_column(times, 1000.0 if method == "pass-fail" else THRESHOLD, 1.01 + 10, 0.5, 2, method,
                             shape, survivors=suspended)
    assert column.stop_units is None
    with pytest.raises(ValueError, match=f"needs at least {needed} failure"):
        units_needed_now(times, THRESHOLD, 1.5, 0.95, method, shape, survivors=suspended)
