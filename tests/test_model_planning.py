"""Planning under a Weibull or lognormal guess: exact pass-fail, simulated parametric methods, calibration."""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from tailstop.core.operating import calibrate, operating_characteristics, pass_fail_exact, simulate
from tailstop import sheet

Z95 = 1.959964  # check value: NIST/SEMATECH §1.3.6.7.1


def test_pass_fail_plans_stay_exact_with_p_from_the_model():
    # check value: p = exp(-(c/η)^β) by hand (Weibull) and scipy.stats.lognorm.sf (lognormal), given to the
    # exact pass-fail propagation directly
    weibull = operating_characteristics(800.0, 2.0, 1000.0, 1.5, 0.95, 10, "pass-fail", model="weibull")
    direct = pass_fail_exact(math.exp(-0.64), 1.5, 0.95, 10)
    assert weibull.exact and weibull.probability == pytest.approx(math.exp(-0.64), rel=1e-15)
    assert (weibull.expected_units, weibull.coverage) == (direct.expected_units, direct.coverage)
    lognormal = operating_characteristics(800.0, 0.7, 1000.0, 1.5, 0.95, 10, "pass-fail", model="lognormal")
    assert lognormal.probability == pytest.approx(stats.lognorm.sf(800.0, 0.7, scale=1000.0), rel=1e-13)
    assert lognormal.expected_units == pass_fail_exact(lognormal.probability, 1.5, 0.95, 10).expected_units


@pytest.mark.parametrize("model, shape, scale, threshold", [
    ("weibull", 1.5, 100.0, 40.0), ("lognormal", 0.8, 50.0, 30.0)])
def test_simulated_plans_are_seeded_and_near_the_asymptotics(model, shape, scale, threshold):
    # check value: E[N]/n* -> 1 and coverage -> nominal as d -> 1 (Chow & Robbins 1965); at d = 1.15 and
    # n* of a few hundred, E[N]/n* within 3 % and coverage within 4 Monte Carlo standard errors + 0.01
    result = simulate(threshold, shape, scale, 1.15, 0.95, 20, "known-shape", replications=400, seed=11, model=model)
    again = simulate(threshold, shape, scale, 1.15, 0.95, 20, "known-shape", replications=400, seed=11, model=model)
    assert np.array_equal(result.units, again.units)
    assert result.n_star > 150 and abs(result.expected_units / result.n_star - 1) < 0.03
    assert result.coverage_se == pytest.approx(math.sqrt(result.coverage * (1 - result.coverage) / 400))
    assert abs(result.coverage - 0.95) <= 4 * result.coverage_se + 0.01
    assert result.expected_units_se == pytest.approx(result.units.std(ddof=1) / math.sqrt(400), rel=1e-9)


def test_fitted_shape_weibull_plan_runs_in_a_cell():
    # common practice, no published source: the cell reports its replications and Monte Carlo errors
    table = dict((row[0], row[1]) for row in sheet.PLAN_SUMMARY(40.0, 1.5, 100.0, 2.0, 0.95, 10, "fitted-shape",
                                                                 200, 3, "weibull"))
    assert table["model"] == "weibull" and table["figures"] == "simulated" and table["replications"] == 200
    assert table["coverage: MC std. error"] > 0


def test_calibration_works_under_another_model():
    # common practice, no published source: the calibrated critical value is at least z and reaches nominal
    def evaluate(stop_z):
        return simulate(30.0, 0.8, 50.0, 1.5, 0.95, 10, "known-shape", replications=300, seed=5, stop_z=stop_z,
                        model="lognormal")

    result = calibrate(evaluate, 0.95)
    assert result.z_calibrated >= Z95 - 1e-6
    assert evaluate(result.z_calibrated).coverage >= 0.95 or not result.reached
