"""The sequential rule, units needed now and the two-stage plan under the Weibull and lognormal models.

Simulation sources as in test_sequential_simulation.py: E[N]/n* -> 1 and the
coverage of [q̂/d, q̂·d] from the first N units -> 1 - γ as d ↓ 1 (Chow &
Robbins, Ann. Math. Statist. 36 (1965) 457–462; Banerjee & Mukhopadhyay,
Ann. Inst. Stat. Math. 68 (2016) 541–570). σ² at the true parameters is
written out here from the closed forms derived in docs/method.md (and checked
against mpmath's numerical Fisher information in test_models.py).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import special, stats

from tailstop import sheet
from tailstop.core import rule
from tailstop.core.methods import SufficientStatistics, estimate_tail
from tailstop.core.sequential import decision_column, stopping_units, two_stage_plan, units_needed_now

Z95 = 1.959964  # check value: NIST/SEMATECH e-Handbook §1.3.6.7.1
EULER = 0.5772156649015329  # check value: Euler's constant, Abramowitz & Stegun 6.1.3 (from memory)


def weibull_sigma2(shape, t, fitted):
    u = t ** shape
    known = (u / -math.expm1(-u)) ** 2
    return known * (1 + 6 * (math.log(u) - (1 - EULER)) ** 2 / math.pi ** 2) if fitted else known


def lognormal_sigma2(shape, t, fitted):
    z = math.log(t) / shape
    p = stats.norm.sf(z)
    h = stats.norm.pdf(z) / (p * (1 - p))
    return h * h * (1 + z * z / 2) if fitted else h * h


CASES = {
    # model: (shape, scale, threshold, draw, true p, σ² function)
    "weibull": (1.5, 100.0, 40.0, lambda rng, size: 100.0 * rng.weibull(1.5, size), math.exp(-0.4 ** 1.5), weibull_sigma2),
    "lognormal": (0.8, 50.0, 30.0, lambda rng, size: 50.0 * np.exp(0.8 * rng.standard_normal(size)),
                  stats.norm.sf(math.log(0.6) / 0.8), lognormal_sigma2),
}


def naive_sigma2(x, threshold, model, method, shape):
    """σ̂² refitted from scratch with scipy (floc=0) and the closed forms above: the slow, obvious way."""
    if model == "weibull":
        fitted = stats.weibull_min.fit(x, floc=0)[0] if method == "fitted-shape" else shape
        scale = np.mean(x ** fitted) ** (1 / fitted)
        return weibull_sigma2(fitted, threshold / scale, method == "fitted-shape")
    fitted = stats.lognorm.fit(x, floc=0)[0] if method == "fitted-shape" else shape
    return lognormal_sigma2(fitted, threshold / np.exp(np.mean(np.log(x))), method == "fitted-shape")


@pytest.mark.parametrize("model", list(CASES))
@pytest.mark.parametrize("method", ["known-shape", "fitted-shape"])
def test_decisions_equal_refitting_every_prefix(model, method):
    # check value: scipy.stats fits of every prefix (floc=0) and the closed-form σ², checked at each unit
    shape, scale, threshold, draw, _, _ = CASES[model]
    x = draw(np.random.default_rng(4), 400)
    given = shape if method == "known-shape" else None
    accuracy, pilot, every = 1.6, 5, 3
    factor = (Z95 / math.log(accuracy)) ** 2
    expected = next((n for n in range(pilot, x.size + 1, every)
                     if n >= factor * naive_sigma2(x[:n], threshold, model, method, shape)), None)
    column = decision_column(x, threshold, accuracy, 0.95, pilot, method, given, check_every=every, model=model)
    assert expected is not None and column.stop_units == expected
    # and the vectorized rule on running statistics says the same at every unit
    statistics = SufficientStatistics.running(x, threshold, model=model, method=method, shape=given)
    hits = rule.stops(statistics, threshold, accuracy, 0.95, pilot, method, given, every, model=model)
    assert int(np.argmax(hits)) + 1 == expected
    # units needed now and the two-stage plan use the same σ̂² (scipy refit of all units / of the pilot)
    now = units_needed_now(x[:60], threshold, accuracy, 0.95, method, given, model=model)
    # tolerance 1e-4: scipy's general optimiser behind the refit (common practice)
    assert now.sigma2 == pytest.approx(naive_sigma2(x[:60], threshold, model, method, shape), rel=1e-4)
    plan = two_stage_plan(x[:20], threshold, accuracy, 0.95, method, given, model=model)
    assert plan.total_units == max(20, math.ceil(factor * naive_sigma2(x[:20], threshold, model, method, shape)))


def test_the_formulas_pass_the_model_and_skip_blank_rows():
    # common practice, no published source: a blank row is no unit, and the model reaches the core
    x = CASES["weibull"][3](np.random.default_rng(5), 40)
    cells = [[float(v)] for v in x[:20]] + [[None]] + [[float(v)] for v in x[20:]]
    column = sheet.STOP_DECISION_COLUMN(cells, 40.0, 2.5, 0.95, 5, "fitted-shape", None, 2, "weibull")
    expected = decision_column(x, 40.0, 2.5, 0.95, 5, "fitted-shape", check_every=2, model="weibull").labels
    assert [row[0] for row in column[:20] + column[21:]] == list(expected) and column[20] == [""]
    assert sheet.UNITS_NEEDED_NOW([[float(v)] for v in x], 40.0, 1.5, 0.95, "known-shape", 1.5, "Weibull") == \
        units_needed_now(x, 40.0, 1.5, 0.95, "known-shape", 1.5, model="weibull").whole
    assert sheet.TWO_STAGE_UNITS([[float(v)] for v in x[:10]], 40.0, 1.5, 0.95, "fitted-shape", None, "lognormal") == \
        two_stage_plan(x[:10], 40.0, 1.5, 0.95, "fitted-shape", model="lognormal").total_units
    assert sheet.STOP_DECISION(cells, 40.0, 2.5, 0.95, 5, None, None, None, "gumbel").startswith(
        "#TAILSTOP! model must be one of gamma, weibull, lognormal")


def test_equal_lifetimes_never_stop_the_fitted_rule():
    # common practice, no published source: no ML shape while all lifetimes are equal, so no stop
    x = np.array([50.0] * 30 + [20.0, 80.0] * 40)
    for model in CASES:
        column = decision_column(x, 60.0, 3.0, 0.95, 2, "fitted-shape", model=model)
        assert column.stop_units is None or column.stop_units > 30
        with pytest.raises(ValueError, match="equal"):
            units_needed_now(x[:30], 60.0, 3.0, 0.95, "fitted-shape", model=model)


@pytest.mark.parametrize("model, method, replications, seed", [
    ("weibull", "known-shape", 600, 1),
    ("weibull", "fitted-shape", 250, 2),
    ("lognormal", "known-shape", 600, 3),
    ("lognormal", "fitted-shape", 400, 4),
])
def test_average_stopping_size_and_coverage_for_d_close_to_one(model, method, replications, seed):
    # check value: the asymptotic properties above; tolerances as in test_sequential_simulation.py
    # (E[N]/n* within 2 %, coverage within 4 Monte Carlo standard errors plus 0.005)
    shape, scale, threshold, draw, p, sigma2 = CASES[model]
    accuracy, pilot = 1.1, 20
    n_star = (Z95 / math.log(accuracy)) ** 2 * sigma2(shape, threshold / scale, method == "fitted-shape")
    given = shape if method == "known-shape" else None
    rng = np.random.default_rng(seed)
    log_q = math.log(p / (1 - p))
    units, covered = [], 0
    for _ in range(replications):
        x = draw(rng, int(2.5 * n_star))
        n = stopping_units(x, threshold, accuracy, 0.95, pilot, method, given, model=model)
        assert n is not None
        covered += abs(estimate_tail(x[:n], threshold, method, given, model=model).log_odds - log_q) <= math.log(accuracy)
        units.append(n)
    units = np.asarray(units, dtype=float)
    assert n_star > 400
    ratio, ratio_se = units.mean() / n_star, units.std(ddof=1) / math.sqrt(replications) / n_star
    # check value: E[N]/n* -> 1 and coverage -> 0.95 (Chow & Robbins 1965) against n* from the closed-form σ²;
    # tolerances as stated above (2 %, 4 Monte Carlo standard errors plus 0.005)
    assert ratio_se < 0.005 and abs(ratio - 1.0) <= 0.02, (ratio, ratio_se)
    coverage, coverage_se = covered / replications, math.sqrt(0.95 * 0.05 / replications)
    assert abs(coverage - 0.95) <= 4 * coverage_se + 0.005, (coverage, coverage_se)
