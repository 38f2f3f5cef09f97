"""Planning figures against computations written out in the test, not against the package.

* pass-fail: an exact propagation over the states (n, S), with the rule of
  METHOD.md §5 coded here from the formulas (the plain share S/n in σ̂², no
  stop while S is 0 or n; docs/method.md) and the coverage of the §2
  interval, closed, compared with
  ``pass_fail_exact`` and the planning formulas;
* known-shape: a Monte Carlo simulation of the rule coded here with scipy's
  incomplete gamma, compared with ``simulate`` within their Monte Carlo
  standard errors;
* the Monte Carlo stream: one random stream for the whole simulation, never
  restarted (a restart repeats the same test runs).
"""
from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from numpy.lib.stride_tricks import sliding_window_view
from scipy import special, stats

from tailstop.core import operating
from tailstop.sheet import PLAN_COVERAGE, PLAN_EXPECTED_UNITS, PLAN_SUMMARY_FROM_P


def boundary(accuracy, confidence):
    # (z / log d)², z from scipy.stats.norm (1.959964 at 95 %: NIST/SEMATECH §1.3.6.7.1)
    return (stats.norm.isf((1 - confidence) / 2) / math.log(accuracy)) ** 2


def pass_fail_plan_by_hand(p, accuracy, confidence, pilot, n_max, check_every=1):
    """P(N = n) for n <= n_max, P(N > n_max) and the coverage, by propagating P(n, S) unit by unit."""
    factor = boundary(accuracy, confidence)
    # p = a/b and d = e/f as the decimals written, so that the interval's ends are compared exactly
    a, b = Fraction(repr(p)).as_integer_ratio()
    e, f = Fraction(repr(accuracy)).as_integer_ratio()
    running = np.array([1.0])  # P(S = k, still on test) after n units, k = 0..n
    distribution = np.zeros(n_max + 1)
    coverage = 0.0
    for n in range(1, n_max + 1):
        running = np.concatenate([running * (1 - p), [0.0]]) + np.concatenate([[0.0], running * p])
        if n < pilot or (n - pilot) % check_every:
            continue
        k = np.arange(n + 1)
        # σ̂² = 1 / (p̂ (1 - p̂)), p̂ = k / n: stop when n >= factor σ̂², i.e. k (n - k) >= factor n
        stop = (k * (n - k) >= factor * n) & (k > 0) & (k < n)
        distribution[n] = running[stop].sum()
        # q/d <= q^ <= q d with q = a/(b - a), q^ = k/(n - k), d = e/f, in whole numbers
        inside = (a * (n - k) * f <= k * (b - a) * e) & (k * (b - a) * f <= e * a * (n - k))
        covered = stop & inside
        coverage += running[covered].sum()
        running = np.where(stop, 0.0, running)
    return distribution, running.sum(), coverage


@pytest.mark.parametrize("p, accuracy, confidence, pilot, check_every", [
    (0.3, 1.6, 0.95, 10, 1), (0.08, 2.0, 0.9, 5, 1), (0.5, 3.0, 0.9, 2, 1),
    (0.3, 1.5, 0.95, 7, 3),  # a rig that tests three units at a time
])
def test_exact_pass_fail_plan_against_the_propagation_written_here(p, accuracy, confidence, pilot, check_every):
    n_max = 600  # several times n* for every plan here; what is left beyond it is compared too
    distribution, beyond, coverage = pass_fail_plan_by_hand(p, accuracy, confidence, pilot, n_max, check_every)
    result = operating.pass_fail_exact(p, accuracy, confidence, pilot, n_max=n_max, check_every=check_every)
    # check value: the propagation above (METHOD.md §5–6 coded independently of the package)
    # tolerance 1e-13 per mass, 1e-12 on the sums: both propagate the same doubles, a few roundings apart
    assert result.distribution[: n_max + 1] == pytest.approx(distribution, abs=1e-13)
    assert result.beyond == pytest.approx(beyond, abs=1e-12)
    assert result.coverage == pytest.approx(coverage, abs=1e-12)
    n = np.arange(n_max + 1)
    mean = float(np.dot(n, distribution) / distribution.sum())
    assert result.expected_units == pytest.approx(mean, rel=1e-10)
    if check_every > 1:
        return
    table = dict(PLAN_SUMMARY_FROM_P(p, accuracy, confidence, pilot))
    # check value: the propagation above through the sheet formulas; tolerance 1e-9: they stop the propagation
    # where the running mass is negligible, which moves the sums below 1e-9
    assert table["expected units E[N]"] == pytest.approx(mean, rel=1e-9)
    assert table["coverage"] == pytest.approx(coverage, abs=1e-9)
    # METHOD.md §4: n* = (z / log d)² / (p(1-p))
    assert table["fixed-size units n*"] == math.ceil(boundary(accuracy, confidence) / (p * (1 - p)))


def test_planning_formulas_from_gamma_guesses_against_the_propagation_written_here():
    threshold, shape, scale, accuracy, confidence, pilot = 1000.0, 2.0, 600.0, 1.6, 0.95, 10
    # check value: the Erlang closed form Q(2, t) = e^{-t}(1 + t) (JKB vol. 1) at t = 5/3
    t = threshold / scale
    p = math.exp(-t) * (1 + t)
    distribution, _, coverage = pass_fail_plan_by_hand(p, accuracy, confidence, pilot, 2000)
    mean = float(np.dot(np.arange(distribution.size), distribution) / distribution.sum())
    # check value: the propagation above; tolerance 1e-9 (see the test above)
    assert PLAN_EXPECTED_UNITS(threshold, shape, scale, accuracy, confidence, pilot) == pytest.approx(mean, rel=1e-9)
    assert PLAN_COVERAGE(threshold, shape, scale, accuracy, confidence, pilot) == pytest.approx(coverage, abs=1e-9)


def known_shape_simulation_by_hand(threshold, shape, scale, accuracy, confidence, pilot, replications, seed):
    """N and coverage of the known-shape rule, simulated here from the METHOD.md formulas (scipy tails)."""
    rng = np.random.default_rng(seed)
    t_true = threshold / scale
    target = math.log(special.gammaincc(shape, t_true) / special.gammainc(shape, t_true))
    factor = boundary(accuracy, confidence)
    n_max = 4 * int(factor * sigma2_known(shape, t_true)) + pilot
    x = rng.gamma(shape, scale, size=(replications, n_max))
    n = np.arange(1, n_max + 1)
    t_hat = threshold * shape * n / np.cumsum(x, axis=1)  # t̂ = c / ŝ with ŝ = x̄ / a
    stop = (n >= pilot) & (n >= factor * sigma2_known(shape, t_hat))
    assert stop.any(axis=1).all(), "n_max too small for the hand simulation"
    first = np.argmax(stop, axis=1)
    t_stop = t_hat[np.arange(replications), first]
    log_odds = np.log(special.gammaincc(shape, t_stop)) - np.log(special.gammainc(shape, t_stop))
    return first + 1, np.abs(log_odds - target) <= math.log(accuracy)


def sigma2_known(shape, t):
    """f² / (a p² (1-p)²), f = t^a e^{-t} / Γ(a) (METHOD.md §3), with scipy's regularized gamma."""
    with np.errstate(all="ignore"):  # a prefix whose t̂ puts p at 0 or 1 has no finite σ̂²: it never stops
        f = np.exp(shape * np.log(t) - t - special.gammaln(shape))
        p, q = special.gammaincc(shape, t), special.gammainc(shape, t)
        return f * f / (shape * p * p * q * q)


@pytest.mark.parametrize("threshold, shape, scale, accuracy, confidence, pilot", [
    (1000.0, 2.0, 600.0, 1.5, 0.95, 10),
    (300.0, 0.8, 900.0, 2.0, 0.9, 3),
])
def test_known_shape_simulation_against_a_simulation_written_here(threshold, shape, scale, accuracy, confidence,
                                                                    pilot):
    replications = 4000  # coverage standard error about √(0.95·0.05/4000) = 0.0034 per simulation
    units, covered = known_shape_simulation_by_hand(threshold, shape, scale, accuracy, confidence, pilot,
                                                    replications, seed=11)
    result = operating.simulate(threshold, shape, scale, accuracy, confidence, pilot, "known-shape",
                                replications=replications, seed=12)
    # two independent simulations agree within 4 combined standard errors (common practice)
    mean_se = math.hypot(units.std(ddof=1) / math.sqrt(replications), result.expected_units_se)
    assert result.expected_units == pytest.approx(units.mean(), abs=4 * mean_se)
    coverage_se = math.hypot(math.sqrt(covered.mean() * (1 - covered.mean()) / replications), result.coverage_se)
    assert result.coverage == pytest.approx(covered.mean(), abs=4 * coverage_se)
    assert result.beyond == 0.0


@pytest.mark.parametrize("method, replications", [("known-shape", 20_000), ("fitted-shape", 17_000)])
def test_the_random_stream_is_never_restarted(method, replications):
    # 17,000 and 20,000 runs are more than two of any chunk size up to 8,500: a stream seeded again for
    # each chunk would repeat its first runs later on, unit count for unit count
    result = operating.simulate(1000.0, 2.0, 600.0, 2.0, 0.9, 5, method, replications=replications, seed=5)
    units = np.asarray(result.units)
    window = 64  # 64 unit counts spread over ~10 values repeat by chance with probability far below 1e-30
    matches = np.flatnonzero((sliding_window_view(units[1:], window) == units[:window]).all(axis=1))
    assert matches.size == 0, f"the runs from {matches[0] + 1} on repeat the first runs"
    # and the runs are not all alike
    assert np.unique(units).size > 5


def test_the_printed_plan_table_against_hand_computations(capsys):
    import mpmath

    from tailstop.commands import main
    from test_plugin_variance import mp_fitted_sigma2

    threshold, shape, scale, accuracy, confidence, pilot = 1000.0, 2.0, 600.0, 1.6, 0.95, 8
    assert main(["plan", "--threshold", "1000", "--shape", "2", "--scale", "600", "--accuracy", "1.6",
                 "--confidence", "0.95", "--pilot", "8", "--replications", "100", "--fitted-replications", "20"]) == 0
    lines = capsys.readouterr().out.splitlines()
    methods = next(line.split() for line in lines if "known-shape" in line and "fitted-shape" in line)
    rows = {line[:24].strip(): dict(zip(methods, line[24:].split())) for line in lines
            if line.strip() and not line.startswith(("figures", " "))}
    # check value: the Erlang closed form Q(2, t) = e^{-t}(1 + t) (JKB vol. 1), and METHOD.md §3–4 by hand
    t = threshold / scale
    p = math.exp(-t) * (1 + t)
    f = t * t * math.exp(-t)
    sigma2 = {"pass-fail": 1 / (p * (1 - p)), "known-shape": f * f / (shape * p * p * (1 - p) ** 2),
              "fitted-shape": float(mp_fitted_sigma2(mpmath.mpf(shape), mpmath.mpf(t)))}
    for method, value in sigma2.items():
        assert rows["fixed-size units n*"][method] == f"{math.ceil(boundary(accuracy, confidence) * value):,}", method
    distribution, _, coverage = pass_fail_plan_by_hand(p, accuracy, confidence, pilot, 2000)
    mean = float(np.dot(np.arange(distribution.size), distribution) / distribution.sum())
    assert rows["expected units E[N]"]["pass-fail"] == f"{mean:.4g}"
    assert rows["coverage"]["pass-fail"] == f"{coverage:.4g}"


def test_the_simulated_planning_table_against_a_simulation_written_here():
    from tailstop.sheet import PLAN_SUMMARY

    threshold, shape, scale, accuracy, confidence, pilot, replications = 1000.0, 2.0, 600.0, 1.5, 0.95, 10, 4000
    table = dict((label, value) for label, value in PLAN_SUMMARY(threshold, shape, scale, accuracy, confidence, pilot,
                                                                 "known-shape", replications, 12))
    units, covered = known_shape_simulation_by_hand(threshold, shape, scale, accuracy, confidence, pilot,
                                                    replications, seed=31)
    # check value: the hand simulation; two independent simulations within 4 combined standard errors
    mean_se = math.hypot(units.std(ddof=1) / math.sqrt(replications), table["expected units E[N]: MC std. error"])
    assert table["expected units E[N]"] == pytest.approx(units.mean(), abs=4 * mean_se)
    coverage_se = math.hypot(math.sqrt(covered.mean() * (1 - covered.mean()) / replications),
                             table["coverage: MC std. error"])
    assert table["coverage"] == pytest.approx(covered.mean(), abs=4 * coverage_se)
    # METHOD.md §3–4 by hand at shape 2 (Erlang): n* = (z / log d)² f² / (a p² (1 - p)²)
    t = threshold / scale
    p, f = math.exp(-t) * (1 + t), t * t * math.exp(-t)
    n_star = boundary(accuracy, confidence) * f * f / (2 * p * p * (1 - p) ** 2)
    assert table["fixed-size units n*"] == math.ceil(n_star)
    # the reported standard error is what 4000 runs give: sd / √R (within 10 %, the sd's own sampling error)
    assert table["expected units E[N]: MC std. error"] == pytest.approx(units.std() / math.sqrt(replications), rel=0.1)
