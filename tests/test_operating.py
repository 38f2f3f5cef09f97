"""Operating characteristics of the stopping rule: exact pass-fail and the Monte Carlo.

Checks against things outside the code under test: a case worked on paper
(binomial probabilities written out), the straightforward per-replication
simulation and a straightforward full-grid propagation of the same rule,
identities of probability, and the asymptotic properties of the purely
sequential rule (Chow & Robbins 1965; Banerjee & Mukhopadhyay 2016).

Monte Carlo agreement is asserted within 4 standard errors: for a correct
implementation a seeded comparison then fails with probability about 6e-5
per figure, while the mistakes these tests guard against (an off-by-one in
the stopping time, a wrong regularization, a lost state) move E[N] by a whole
unit or more, which is 10 or more standard errors at these sizes.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from tailstop.core import operating as op
from tailstop.core.operating import monte_carlo
from tailstop.core import rule
from tailstop.core.methods import SufficientStatistics, model_sigma2
from tailstop.core.models.gamma.tail import tail_probability

Z95 = 1.959964   # check value: NIST/SEMATECH §1.3.6.7.1, two-sided 95 %
Z90 = 1.644854   # check value: NIST/SEMATECH §1.3.6.7.1, two-sided 90 %
AGREE = 4.0      # standard errors; see the module docstring


def test_tiny_case_worked_on_paper():
    # Worked by hand (common practice, no published source): pilot 2, accuracy d = 5.75,
    # confidence 0.90, so z = 1.644854 and the boundary factor is
    #   B = (z / ln 5.75)^2 = (1.644854 / 1.749200)^2 = 0.8843.
    # The rule stops at (n, S) when 0 < S < n and n >= B / (p^ (1 - p^)), p^ = S / n,
    # that is when S (n - S) / n >= B:
    #   n = 2, S = 1:      1 * 1 / 2 = 0.500 < B -> continue
    #   n = 3, S = 1 or 2: 1 * 2 / 3 = 0.667 < B -> continue
    #   n = 4, S = 2:      2 * 2 / 4 = 1.000 >= B -> STOP
    #   n = 4, S = 1 or 3: 1 * 3 / 4 = 0.750 < B -> continue
    #   n = 5, S = 1 or 4: 1 * 4 / 5 = 0.800 < B -> continue
    #   n = 5, S = 2 or 3: 2 * 3 / 5 = 1.200 >= B -> STOP
    # (S = 0 or S = n never stops.) With p = 0.3, q = 0.7:
    #   P(N = 4) = P(S4 = 2) = 6 p^2 q^2 = 6 * 0.09 * 0.49 = 0.2646
    #   P(N = 5) = P(S4 = 1) p + P(S4 = 3) q = 4 p^2 q^3 + 4 p^3 q^2 = 4 p^2 q^2 = 0.1764
    #   P(N > 5) = q^5 + 5 p q^4 + 5 p^4 q + p^5 = 0.16807 + 0.36015 + 0.02835 + 0.00243 = 0.5590
    #                                                                       (total 1.0000)
    # Coverage: the true odds are 0.3/0.7 = 0.428571; the interval is [q^/d, q^ d]:
    #   (4,2) q^ = 1    -> [0.1739, 5.75]  covers
    #   (5,2) q^ = 2/3  -> [0.1159, 3.833] covers
    #   (5,3) q^ = 3/2  -> [0.2609, 8.625] covers
    #   coverage = P(N = 4) + P(N = 5) = 0.4410
    result = op.pass_fail_exact(0.3, 5.75, 0.90, 2, n_max=5)
    # check value: the hand computation above; tolerance 1e-12 absolute: exact sums of a few
    # products of doubles (1e-6 on z: NIST's 7 printed digits)
    assert result.stop_z == pytest.approx(Z90, abs=1e-6)
    assert result.distribution[:4] == pytest.approx([0, 0, 0, 0], abs=1e-15)
    assert result.distribution[4] == pytest.approx(0.2646, abs=1e-12)
    assert result.distribution[5] == pytest.approx(0.1764, abs=1e-12)
    assert result.beyond == pytest.approx(0.5590, abs=1e-12)
    assert result.coverage == pytest.approx(0.4410, abs=1e-12)
    assert result.expected_units == pytest.approx((4 * 0.2646 + 5 * 0.1764) / 0.4410, abs=1e-12)
    # quantiles of N: P(N <= 4) = 0.2646 >= 0.05; P(N <= 5) = 0.4410 < 0.5
    # property: quantile = the smallest n with P(N <= n) >= level, inf when never reached (hand computation above)
    assert result.quantiles == {0.05: 4.0, 0.5: math.inf, 0.95: math.inf}


def test_the_rule_uses_the_plain_share_not_the_regularized_one():
    # Worked by hand (common practice, no published source): d = 5 at 90 %, B = (1.644854 / ln 5)^2
    # = (1.644854 / 1.609438)^2 = 1.0445. After 100 units with one beyond the threshold the plain
    # share gives S (n - S) / n = 0.99 < B: continue. The regularized p~ = 1.5 / 101 would give
    # n p~ (1 - p~) = 1.463 >= B and stop at the first exceedance.
    statistics = SufficientStatistics(n=np.array([100, 100, 4]), sum_x=np.zeros(3), log_ratio=np.zeros(3),
                                      exceedances=np.array([1, 2, 2]))
    # S = 2 of 100: 2 * 98 / 100 = 1.96 >= B -> STOP; S = 2 of 4: 2 * 2 / 4 = 1 < B -> continue
    assert rule.stops(statistics, 1.0, 5.0, 0.90, 2, "pass-fail").tolist() == [False, True, False]
    assert rule.rule_sigma2(statistics, 1.0, "pass-fail") == pytest.approx([100 ** 2 / 99, 100 ** 2 / 196, 4.0])
    # while every unit is on one side σ̂² stays finite (p~) and the rule goes on
    one_side = SufficientStatistics(n=np.array([50, 50]), sum_x=np.zeros(2), log_ratio=np.zeros(2),
                                    exceedances=np.array([0, 50]))
    p_tilde = 0.5 / 51
    assert rule.rule_sigma2(one_side, 1.0, "pass-fail") == pytest.approx([1 / (p_tilde * (1 - p_tilde))] * 2)
    # property: one-sided logs never stop, even at the loosest d (METHOD.md §5)
    assert not rule.stops(one_side, 1.0, 1.0001, 0.5, 2, "pass-fail").any()


def straightforward_propagation(p, accuracy, confidence, pilot, n_max, check_every=1):
    """P(N = n) and coverage on the full (n, S) grid, one rule.stops call per n, no windows.

    It asks ``rule.stops`` itself, so it checks the propagation's shortcuts, not the rule; the rule
    coded from METHOD.md in the test: tests/test_planning_independent.py.
    """
    running = stats.binom.pmf(np.arange(pilot + 1), pilot, p)
    distribution = np.zeros(n_max + 1)
    coverage = 0.0
    for n in range(pilot, n_max + 1):
        k = np.arange(n + 1)
        statistics = SufficientStatistics(n=np.full(n + 1, n), sum_x=np.zeros(n + 1),
                                          log_ratio=np.zeros(n + 1), exceedances=k)
        stop = rule.stops(statistics, 1.0, accuracy, confidence, pilot, "pass-fail", check_every=check_every)
        distribution[n] = running[stop].sum()
        with np.errstate(divide="ignore"):
            log_odds = np.log(k[stop]) - np.log(n - k[stop])
        inside = np.abs(log_odds - math.log(p / (1 - p))) <= math.log(accuracy)
        coverage += running[stop][inside].sum()
        running = np.where(stop, 0.0, running)
        running = np.concatenate([running * (1 - p), [0.0]]) + np.concatenate([[0.0], running * p])
    return distribution, coverage, running.sum()


def test_ties_on_the_lattice_are_decided_by_the_closed_interval():
    # At p = 1/100 and d = 2 the interval end q^/d or q^ d equals q = 1/99 exactly at states such
    # as (n, S) = (101, 2) (q^ = 2/99) and (199, 1) (q^ = 1/198); the closed interval covers them.
    # Check value: the plain full-grid propagation with every covered/not-covered decision made
    # in exact rational arithmetic (fractions), 1/100 <= ... by the interval's definition.
    from fractions import Fraction

    p, d = Fraction(1, 100), Fraction(2)
    q = p / (1 - p)
    pilot, n_max = 2, 4200
    running = stats.binom.pmf(np.arange(pilot + 1), pilot, 0.01)
    coverage = 0.0
    ties = 0
    for n in range(pilot, n_max + 1):
        k = np.flatnonzero(running > 0)   # states of probability 0 add nothing
        statistics = SufficientStatistics(n=np.full(k.size, n), sum_x=np.zeros(k.size),
                                          log_ratio=np.zeros(k.size), exceedances=k)
        stop = np.zeros(n + 1, bool)
        stop[k] = rule.stops(statistics, 1.0, 2.0, 0.90, pilot, "pass-fail")
        for s in np.flatnonzero(stop):
            odds = Fraction(int(s), int(n - s))
            ties += odds / d == q or odds * d == q
            if odds / d <= q <= odds * d:
                coverage += running[s]
        running = np.where(stop, 0.0, running)
        running = np.concatenate([running * 0.99, [0.0]]) + np.concatenate([[0.0], running * 0.01])
    assert ties > 0
    result = op.pass_fail_exact(0.01, 2.0, 0.90, pilot)
    # check value: the rational-arithmetic propagation above; tolerance 1e-10: its masses are doubles summed
    # over about 4,000 steps. 0.894407: regression guard, that propagation's coverage printed to 6 decimals
    # when this test was written (tolerance half a unit in the 6th decimal)
    assert result.coverage == pytest.approx(coverage, abs=1e-10)
    assert result.coverage == pytest.approx(0.894407, abs=5e-7)


@pytest.mark.parametrize("p, accuracy, pilot, n_max, check_every", [
    (0.02, 1.6, 10, 1500, 1),   # small p: the windows of non-zero probability are trimmed
    (0.5, 1.4, 2, 400, 1),
    (0.3, 1.5, 7, 300, 3),      # the rule consulted every third unit
])
def test_exact_matches_the_straightforward_full_grid(p, accuracy, pilot, n_max, check_every):
    # common practice, no published source: the shortcut against the plain computation
    expected, coverage, beyond = straightforward_propagation(p, accuracy, 0.95, pilot, n_max, check_every)
    result = op.pass_fail_exact(p, accuracy, 0.95, pilot, n_max=n_max, check_every=check_every)
    assert result.distribution == pytest.approx(expected, abs=1e-14)
    # (the plain propagation decides ties on the lattice by rounding, the package exactly: 3e-10 here)
    assert result.coverage == pytest.approx(coverage, abs=1e-9)
    assert result.beyond == pytest.approx(beyond, abs=1e-12)


@pytest.mark.parametrize("threshold, shape, scale, accuracy, pilot, check_every", [
    (1000.0, 2.0, 600.0, 1.5, 10, 1),
    (300.0, 0.8, 900.0, 2.0, 3, 1),
    (1000.0, 2.0, 600.0, 1.7, 5, 4),
])
def test_exact_agrees_with_monte_carlo_of_the_same_rule(threshold, shape, scale, accuracy, pilot, check_every):
    p = float(tail_probability(threshold, shape, scale).p)
    exact = op.pass_fail_exact(p, accuracy, 0.95, pilot, check_every=check_every)
    simulated = op.simulate(threshold, shape, scale, accuracy, 0.95, pilot, "pass-fail", replications=20_000,
                            seed=11, check_every=check_every)
    assert abs(simulated.expected_units - exact.expected_units) <= AGREE * simulated.expected_units_se
    assert abs(simulated.coverage - exact.coverage) <= AGREE * math.sqrt(exact.coverage * (1 - exact.coverage) / 20_000)
    assert abs(simulated.sd_units - exact.sd_units) <= AGREE * simulated.sd_units_se
    # the whole distribution: P(N <= n) at the exact 10 %, 50 % and 90 % points
    cdf = np.cumsum(exact.distribution)
    for level in (0.1, 0.5, 0.9):
        n = int(np.searchsorted(cdf, level))
        share = np.mean(simulated.units <= n)
        assert abs(share - cdf[n]) <= AGREE * math.sqrt(cdf[n] * (1 - cdf[n]) / 20_000)


def test_exact_agrees_with_the_per_replication_loop():
    # the reference simulation is the plain one: a whole log per replication, SufficientStatistics.running
    p = float(tail_probability(1000.0, 2.0, 600.0).p)
    exact = op.pass_fail_exact(p, 1.8, 0.95, 5)
    units, covered = op.reference_simulation(1000.0, 2.0, 600.0, 1.8, 0.95, 5, "pass-fail", replications=1500, seed=3)
    se = exact.sd_units / math.sqrt(units.size)
    assert abs(units.mean() - exact.expected_units) <= AGREE * se
    assert abs(covered.mean() - exact.coverage) <= AGREE * math.sqrt(exact.coverage * (1 - exact.coverage) / units.size)


@pytest.mark.parametrize("p, accuracy, pilot", [(0.3, 1.5, 10), (0.05, 3.0, 2), (0.9, 2.0, 20), (0.5, 1.2, 4)])
def test_exact_properties(p, accuracy, pilot):
    result = op.pass_fail_exact(p, accuracy, 0.95, pilot)
    # property: a probability distribution (tolerance 1e-12: rounding of thousands of masses); the default
    # n_max leaves at most 1e-12 of mass running (operating/exact.py)
    # probabilities add up to one with P(N > n_max)
    assert result.distribution.sum() + result.beyond == pytest.approx(1.0, abs=1e-12)
    assert np.all(result.distribution >= 0)
    assert result.distribution[:pilot].sum() == 0.0
    assert result.beyond <= 1e-12            # the default n_max runs until nothing is left
    assert result.expected_units >= pilot
    assert 0.0 <= result.coverage <= 1.0
    # property: quantiles are ordered
    assert result.quantiles[0.05] <= result.quantiles[0.5] <= result.quantiles[0.95]
    # property: a stricter boundary stops later pathwise, so its CDF of N is below (1e-12: rounding)
    # a stricter boundary (larger z) can only make the rule stop later: N grows pathwise
    later = op.pass_fail_exact(p, accuracy, 0.95, pilot, stop_z=1.3 * Z95)
    assert later.expected_units >= result.expected_units
    common = min(later.distribution.size, result.distribution.size)
    assert np.all(np.cumsum(later.distribution)[:common] <= np.cumsum(result.distribution)[:common] + 1e-12)


def test_exact_never_stops_on_one_side_only():
    # with n_max = pilot every state S = 0 or S = n is still running: P(N > n_max) = p^m + q^m
    result = op.pass_fail_exact(0.2, 50.0, 0.5, 6, n_max=6)
    # check value: written out, P(S = 0 or S = m) = p^m + q^m; tolerance 1e-12: rounding
    assert result.beyond == pytest.approx(0.2 ** 6 + 0.8 ** 6, rel=1e-12)


def test_n_star_is_the_fixed_size_plan():
    # check value: METHOD.md §4 with pass-fail σ² = 1/(p(1-p)) = 4 at p = 0.5 and z from NIST
    result = op.pass_fail_exact(0.5, 1.5, 0.95, 10)
    # tolerance 1e-6: Z95 is quoted to 7 digits, which moves n* by about 5e-8 relative
    assert result.n_star == pytest.approx((Z95 / math.log(1.5)) ** 2 * 4.0, rel=1e-6)
    assert result.fixed_units == math.ceil(result.n_star)


def test_bad_plans_are_refused():
    with pytest.raises(ValueError, match="pilot"):
        op.pass_fail_exact(0.3, 1.5, 0.95, 1)
    with pytest.raises(ValueError, match="accuracy"):
        op.pass_fail_exact(0.3, 1.0, 0.95, 5)
    with pytest.raises(ValueError, match="probability"):
        op.pass_fail_exact(0.0, 1.5, 0.95, 5)
    with pytest.raises(ValueError, match="replications"):
        op.simulate(1000, 2, 600, 1.5, 0.95, 5, replications=0)
    with pytest.raises(ValueError, match="one side"):
        op.simulate(1e6, 2, 1, 1.5, 0.95, 5)
    with pytest.raises(ValueError, match="check_every"):
        op.pass_fail_exact(0.3, 1.5, 0.95, 5, check_every=0)
    with pytest.raises(ValueError, match="check_every"):
        op.simulate(1000, 2, 600, 1.5, 0.95, 5, check_every=2.5)


# ---------------------------------------------------------------- calibration


def test_pass_fail_calibration_is_the_smallest_inflation():
    # p = 0.05, d = 2, pilot 5: the exact coverage at z is below 95 % (0.946)
    evaluate = lambda z: op.pass_fail_exact(0.05, 2.0, 0.95, 5, stop_z=z)  # noqa: E731
    calibration = op.calibrate(evaluate, 0.95)
    # property: the calibrated z is the smallest z (to its step, at most 1e-3 of z) whose exact coverage
    # reaches the 95 % asked; the nominal z is NIST's 1.959964 (to 1e-6, 7 printed digits)
    assert calibration.reached
    assert calibration.at_z.coverage < 0.95
    assert calibration.z == pytest.approx(Z95, abs=1e-6)
    assert calibration.z_calibrated >= calibration.z
    assert evaluate(calibration.z_calibrated).coverage >= 0.95
    assert evaluate(calibration.z_calibrated - calibration.step).coverage < 0.95
    assert 0 < calibration.step <= 1e-3 * calibration.z + 1e-12
    # every point of the scan grid below the calibrated value falls short as well
    grid = calibration.z * (1 + 0.02 * np.arange(50))
    # property: the calibration is the smallest z on its grid that reaches the 95 % asked
    assert all(evaluate(z).coverage < 0.95 for z in grid[grid < calibration.z_calibrated - calibration.step])
    assert calibration.extra_units == pytest.approx(
        calibration.calibrated.expected_units - calibration.at_z.expected_units)
    assert calibration.extra_units > 0
    assert calibration.confidence_calibrated == pytest.approx(2 * stats.norm.cdf(calibration.z_calibrated) - 1)


def test_calibration_when_nominal_is_already_reached():
    calibration = op.calibrate(lambda z: op.pass_fail_exact(0.1, 2.0, 0.95, 5, stop_z=z), 0.95)
    # property: nominal coverage already reached at p = 0.1, so no inflation
    assert calibration.at_z.coverage >= 0.95
    assert calibration.z_calibrated == pytest.approx(calibration.z)
    assert calibration.extra_units == 0


def test_simulated_calibration_reports_its_uncertainty():
    evaluate = lambda z: op.simulate(1000, 0.7, 400, 2.0, 0.95, 10, "known-shape", replications=4000,  # noqa: E731
                                     stop_z=z, common_numbers=True)
    calibration = op.calibrate(evaluate, 0.95)
    assert calibration.reached
    # property: the calibration meets the 95 % asked, also 2 Monte Carlo standard errors below
    assert calibration.calibrated.coverage >= 0.95
    optimistic, pessimistic = calibration.z_range
    assert optimistic <= calibration.z_calibrated <= pessimistic
    assert evaluate(pessimistic).coverage - 2 * evaluate(pessimistic).coverage_se >= 0.95


# ---------------------------------------------------------------- Monte Carlo


def known_shape_plan(n_target=200, shape=2.0, scale=600.0, threshold=1000.0):
    sigma2 = float(model_sigma2("known-shape", threshold, shape, scale))
    return threshold, shape, scale, math.exp(Z95 * math.sqrt(sigma2 / n_target))


@pytest.mark.parametrize("shape, check_every, pilot", [(2.0, 1, 10), (0.5, 1, 2), (8.0, 3, 5), (1.0, 1, 30)])
def test_screen_gives_exactly_the_runs_of_rule_stops_everywhere(shape, check_every, pilot):
    # the shortcut against the straightforward computation, on the same random numbers
    threshold, shape, scale, accuracy = known_shape_plan(150, shape=shape)
    common = dict(replications=3000, seed=5, check_every=check_every)
    fast = op.simulate(threshold, shape, scale, accuracy, 0.95, pilot, "known-shape", screen=True, **common)
    plain = op.simulate(threshold, shape, scale, accuracy, 0.95, pilot, "known-shape", screen=False, **common)
    assert np.array_equal(fast.units, plain.units)
    assert np.array_equal(fast.covered, plain.covered)


@pytest.mark.parametrize("shape, check_every, pilot, n_target", [(2.0, 1, 10, 120), (0.5, 1, 3, 100), (8.0, 3, 20, 100),
                                                              (1.0, 1, 2, 60)])
def test_fitted_shape_screen_gives_exactly_the_runs_of_rule_stops_everywhere(shape, check_every, pilot, n_target):
    # the two-dimensional screen against the straightforward computation, on the same random numbers
    sigma2 = float(model_sigma2("fitted-shape", 1000.0, shape, 600.0))
    accuracy = math.exp(Z95 * math.sqrt(sigma2 / n_target))
    common = dict(replications=600, seed=12, check_every=check_every)
    fast = op.simulate(1000.0, shape, 600.0, accuracy, 0.95, pilot, "fitted-shape", screen=True, **common)
    plain = op.simulate(1000.0, shape, 600.0, accuracy, 0.95, pilot, "fitted-shape", screen=False, **common)
    assert np.array_equal(fast.units, plain.units)
    assert np.array_equal(fast.covered, plain.covered)


def test_fitted_shape_screen_checks_its_table_against_the_rule(monkeypatch):
    plan = monte_carlo._Plan(1000.0, 2.0, 600.0, "fitted-shape", 1.3, 0.95, 5, 1000, 1, 0.5)
    assert monte_carlo._FittedShapeScreen(plan).valid
    real = rule.rule_sigma2
    monkeypatch.setattr(rule, "rule_sigma2", lambda s, *a, **k: real(s, *a, **k) * 1.01)
    assert not monte_carlo._FittedShapeScreen(plan).valid


def test_screen_switches_itself_off_if_the_rule_changes(monkeypatch):
    # if σ̂² ever depends on more than t̂ = c/ŝ, the table is not a bound: every prefix must be checked
    threshold, shape, scale, accuracy = known_shape_plan(100)
    real = rule.rule_sigma2
    monkeypatch.setattr(rule, "rule_sigma2", lambda s, *a, **k: real(s, *a, **k) * (1 + 10 / np.asarray(s.n)))
    plan = monte_carlo._Plan(threshold, shape, scale, "known-shape", accuracy, 0.95, 5, 1000, 1, 0.5)
    assert not monte_carlo._KnownShapeScreen(plan).valid
    monkeypatch.setattr(rule, "rule_sigma2", real)
    assert monte_carlo._KnownShapeScreen(plan).valid


def test_simulation_is_reproducible_for_a_seed():
    threshold, shape, scale, accuracy = known_shape_plan(100)
    first = op.simulate(threshold, shape, scale, accuracy, 0.95, 5, replications=2000, seed=42)
    again = op.simulate(threshold, shape, scale, accuracy, 0.95, 5, replications=2000, seed=42)
    other = op.simulate(threshold, shape, scale, accuracy, 0.95, 5, replications=2000, seed=43)
    assert np.array_equal(first.units, again.units) and first.coverage == again.coverage
    assert not np.array_equal(first.units, other.units)


@pytest.mark.parametrize("method", ["known-shape", "fitted-shape"])
def test_simulation_agrees_with_the_per_replication_loop(method):
    threshold, shape, scale, accuracy = known_shape_plan(60)
    count = 300 if method == "fitted-shape" else 1500
    fast = op.simulate(threshold, shape, scale, accuracy, 0.95, 10, method, replications=4 * count, seed=8)
    units, covered = op.reference_simulation(threshold, shape, scale, accuracy, 0.95, 10, method,
                                             replications=count, seed=9)
    se = math.hypot(fast.expected_units_se, units.std(ddof=1) / math.sqrt(count))
    assert abs(fast.expected_units - units.mean()) <= AGREE * se
    coverage_se = math.hypot(fast.coverage_se, math.sqrt(fast.coverage * (1 - fast.coverage) / count))
    assert abs(fast.coverage - covered.mean()) <= AGREE * coverage_se


def test_chunks_and_blocks_keep_the_figures(monkeypatch):
    # many small chunks and short blocks: the pass-fail simulation must still match the exact figures
    monkeypatch.setattr(monte_carlo, "_CHUNK_REPLICATIONS", 700)
    monkeypatch.setattr(monte_carlo, "_LONGEST_BLOCK", 5)
    p = float(tail_probability(1000.0, 2.0, 600.0).p)
    exact = op.pass_fail_exact(p, 1.6, 0.95, 4)
    simulated = op.simulate(1000.0, 2.0, 600.0, 1.6, 0.95, 4, "pass-fail", replications=5000, seed=2)
    assert simulated.units.size == 5000
    assert abs(simulated.expected_units - exact.expected_units) <= AGREE * simulated.expected_units_se
    assert abs(simulated.coverage - exact.coverage) <= AGREE * math.sqrt(exact.coverage * (1 - exact.coverage) / 5000)


def test_known_shape_asymptotics():
    # Chow & Robbins (1965): E[N]/n* -> 1 and coverage -> 1 - γ as d -> 1 (here n* = 1500)
    threshold, shape, scale, accuracy = known_shape_plan(1500)
    result = op.simulate(threshold, shape, scale, accuracy, 0.95, 10, replications=6000, seed=1)
    # check value: E[N]/n* -> 1 and coverage -> 0.95 (Chow & Robbins 1965); tolerance 0.01 on the ratio:
    # about 4 Monte Carlo standard errors of 6,000 runs at n* = 1500 plus the O(1/√n*) overshoot; coverage
    # within AGREE standard errors or 0.01, whichever is larger
    assert result.expected_units / result.n_star == pytest.approx(1.0, abs=0.01)
    assert abs(result.coverage - 0.95) <= max(0.01, AGREE * result.coverage_se)
    assert result.beyond == 0.0


def test_standard_errors_match_the_spread_between_seeds():
    # the reported E[N] standard error is the spread of E[N] over independent seeds (within sampling error)
    threshold, shape, scale, accuracy = known_shape_plan(40)
    runs = [op.simulate(threshold, shape, scale, accuracy, 0.95, 5, replications=400, seed=seed) for seed in range(40)]
    spread = np.std([r.expected_units for r in runs], ddof=1)
    reported = np.mean([r.expected_units_se for r in runs])
    # derivation: the relative standard error of a sample sd of 40 draws is 1/√78 = 0.11, so ±30 % is about
    # 2.6 of them (probability > 0.99 for normal draws)
    assert 0.7 < spread / reported < 1.4   # sd of 40 draws is within ±30 % with probability > 0.99
    coverage_spread = np.std([r.coverage for r in runs], ddof=1)
    assert 0.7 < coverage_spread / np.mean([r.coverage_se for r in runs]) < 1.4


def test_simulated_properties():
    threshold, shape, scale, accuracy = known_shape_plan(80)
    result = op.simulate(threshold, shape, scale, accuracy, 0.95, 12, "fitted-shape", replications=300, seed=4)
    assert result.units.min() >= 12
    assert result.expected_units >= 12
    assert 0 <= result.coverage <= 1 and 0 <= result.beyond <= 1
    # property: quantiles are ordered
    assert result.quantiles[0.05] <= result.quantiles[0.5] <= result.quantiles[0.95]
    assert all(result.quantiles_se[level] >= 0 for level in op.QUANTILE_LEVELS)
    assert not result.exact and "300 replications" in result.kind


def test_runs_not_stopped_by_n_max_count_as_beyond_and_not_covered():
    threshold, shape, scale, accuracy = known_shape_plan(300)
    result = op.simulate(threshold, shape, scale, accuracy, 0.95, 5, replications=1000, seed=6, n_max=250)
    assert result.beyond == 1.0 and result.coverage == 0.0
    assert math.isnan(result.expected_units)
    # property: runs not stopped by n_max never stop: every quantile beyond is inf
    assert result.quantiles[0.5] == math.inf


def test_comparison_shows_what_the_shape_saves():
    # σ² known-shape <= fitted-shape <= pass-fail (information inequality; METHOD.md §3)
    comparison = op.compare_methods(1000.0, 2.0, 600.0, 1.6, 0.95, 10, replications=2000, fitted_replications=300)
    results = comparison.results
    assert list(results) == ["pass-fail", "pass-fail-exact", "known-shape", "fitted-shape"]
    assert results["pass-fail"].exact and results["pass-fail-exact"].exact and not results["known-shape"].exact
    assert results["pass-fail-exact"].coverage >= 0.95  # its guarantee (core.guaranteed)
    assert results["known-shape"].n_star < results["fitted-shape"].n_star < results["pass-fail"].n_star
    assert results["known-shape"].expected_units < results["fitted-shape"].expected_units < results["pass-fail"].expected_units
    table = comparison.table()
    assert table[0] == ["", "pass-fail", "pass-fail-exact", "known-shape", "fitted-shape"]
    assert all(len(row) == 5 for row in table)
    assert any(row[0] == "coverage" and "±" in row[3] and "±" not in row[1] for row in table)


def straightforward_propagation_unholed(real):
    import unittest.mock

    with unittest.mock.patch.object(rule, "stops", real):
        return straightforward_propagation(0.3, 2.0, 0.95, 4, 300)[0]


def test_exact_stop_set_falls_back_to_the_full_grid_when_the_rule_is_no_interval(monkeypatch):
    # common practice, no published source: a rule whose stop set in S has holes (S = 7, 14, ...
    # never stop) is not an interval; the shortcut must notice on its check and use rule.stops everywhere
    real = rule.stops

    def holed(statistics, *args, **kwargs):
        return real(statistics, *args, **kwargs) & (np.asarray(statistics.exceedances) % 7 != 0)

    monkeypatch.setattr(rule, "stops", holed)
    expected, coverage, beyond = straightforward_propagation(0.3, 2.0, 0.95, 4, 300)
    result = op.pass_fail_exact(0.3, 2.0, 0.95, 4, n_max=300)
    # check value: the plain full-grid propagation above; tolerance 1e-14 on each mass (rounding), 1e-9 on the
    # coverage (ties on the lattice, 3e-10 here, see below); the holes move masses by more than 1e-3
    assert abs(expected - straightforward_propagation_unholed(real)).max() > 1e-3  # the holes matter
    assert result.distribution == pytest.approx(expected, abs=1e-14)
    # (the plain propagation decides ties on the lattice by rounding, the package exactly: 3e-10 here)
    assert result.coverage == pytest.approx(coverage, abs=1e-9)
