"""Planning with a test time: every unit still running at T is stopped there (type I censoring)."""
import math

import numpy as np
import pytest
from scipy import integrate, stats

from tailstop.core.methods import estimate_tail, model_sigma2
from tailstop.core.operating.time_terminated import simulate_with_test_time
from tailstop.core.rule import boundary_factor
from tailstop.core.time_terminated import time_terminated_sigma2
from tailstop.sheet import ACCURACY_FOR_UNITS, PLAN_COVERAGE, PLAN_EXPECTED_UNITS, PLAN_SUMMARY, UNITS_REQUIRED

LAWS = {"gamma": stats.gamma, "weibull": stats.weibull_min, "lognormal": stats.lognorm}


def _scores(function, x, point, step=1e-5):
    return np.array([(function(x, point + e) - function(x, point - e)) / (2 * step) for e in np.eye(2) * step])


def reference_sigma2(model, threshold, shape, scale, test_time):
    """σ² per unit under type I censoring at T, written for the test: the expected information
    E[score scoreᵀ] = ∫₀ᵀ f ∇log f ∇log fᵀ dx + S(T) ∇log S(T) ∇log S(T)ᵀ in (log shape, log scale),
    by scipy.integrate.quad with scores from central differences of scipy.stats; σ² = gᵀ I⁻¹ g."""
    law = LAWS[model]

    def log_density(x, v):
        return law.logpdf(x, np.exp(v[0]), scale=np.exp(v[1]))

    def log_survival(x, v):
        return law.logsf(x, np.exp(v[0]), scale=np.exp(v[1]))

    point = np.log([shape, scale])
    information = np.empty((2, 2))
    for i, j in ((0, 0), (0, 1), (1, 1)):
        failed, _ = integrate.quad(lambda x: law.pdf(x, shape, scale=scale)
                                   * np.prod(_scores(log_density, x, point)[[i, j]]),
                                   0, test_time, limit=200, points=[threshold] if threshold < test_time else None)
        information[i, j] = information[j, i] = failed + law.sf(test_time, shape, scale=scale) * np.prod(
            _scores(log_survival, test_time, point)[[i, j]])
    gradient = _scores(lambda _x, v: law.logsf(threshold, np.exp(v[0]), scale=np.exp(v[1]))
                       - law.logcdf(threshold, np.exp(v[0]), scale=np.exp(v[1])), None, point)
    return {"known-shape": gradient[1] ** 2 / information[1, 1],
            "fitted-shape": float(gradient @ np.linalg.solve(information, gradient))}


CASES = [("gamma", 2.0, 600.0), ("gamma", 0.8, 1500.0), ("weibull", 1.5, 700.0), ("weibull", 3.0, 900.0),
         ("lognormal", 0.6, 600.0), ("lognormal", 1.1, 800.0)]


@pytest.mark.parametrize("model, shape, scale", CASES)
@pytest.mark.parametrize("test_time", [700.0, 2500.0])
def test_sigma2_under_type_one_censoring_against_quadrature(model, shape, scale, test_time):
    # check value: the expected information by quadrature of the squared scores (written above)
    expected = reference_sigma2(model, 1000.0, shape, scale, test_time)
    for method in ("known-shape", "fitted-shape"):
        # tolerance 2e-5: the reference's scores come from central differences of scipy's logpdf/logsf (about
        # 1e-7 each) and squared; the package integrates by scipy.integrate.quad
        assert time_terminated_sigma2(method, 1000.0, shape, scale, test_time, model) == pytest.approx(
            expected[method], rel=2e-5)


def test_weibull_known_shape_by_hand():
    # check value: by hand. β known: X^β is exponential with mean θ = η^β and the information on θ per unit
    # stopped at T is P(X <= T)/θ²; with w = (c/η)^β and d log q/d log θ = w/(1 - p): σ² = w²/((1-p)² F(T))
    beta, eta, c, test_time = 2.0, 1000.0, 1000.0, 1000.0
    w, p, failed = 1.0, math.exp(-1.0), 1.0 - math.exp(-1.0)
    sigma2 = w ** 2 / ((1 - p) ** 2 * failed)
    # tolerance 1e-12: the package integrates the information by scipy.integrate.quad, to about 1e-13
    assert time_terminated_sigma2("known-shape", c, beta, eta, test_time, "weibull") == pytest.approx(sigma2,
                                                                                                     rel=1e-12)
    factor = (1.959963984540054 / math.log(1.5)) ** 2  # z: NIST/SEMATECH §1.3.6.7.1
    assert UNITS_REQUIRED(c, beta, eta, 1.5, 0.95, "known-shape", "weibull", test_time) == math.ceil(factor * sigma2)


@pytest.mark.parametrize("model, shape, scale", CASES)
@pytest.mark.parametrize("method", ["known-shape", "fitted-shape"])
def test_a_longer_test_never_needs_more_units_and_no_stop_is_the_complete_test(model, shape, scale, method):
    # property: stopping units later only adds information; T = ∞ is the complete-data σ² (METHOD.md §3)
    values = [time_terminated_sigma2(method, 1000.0, shape, scale, t, model) for t in (500.0, 1000.0, 2000.0, 8000.0)]
    assert all(a >= b for a, b in zip(values, values[1:]))
    complete = float(model_sigma2(method, 1000.0, shape, scale, model))
    assert time_terminated_sigma2(method, 1000.0, shape, scale, math.inf, model) == complete
    assert values[-1] >= complete * (1 - 1e-9)


def test_pass_fail_needs_the_test_to_reach_the_threshold():
    assert UNITS_REQUIRED(1000, 2, 600, 1.5, 0.95, "pass-fail", None, 1000) == UNITS_REQUIRED(1000, 2, 600, 1.5, 0.95)
    assert UNITS_REQUIRED(1000, 2, 600, 1.5, 0.95, "pass-fail", None, 5000) == UNITS_REQUIRED(1000, 2, 600, 1.5, 0.95)
    refused = UNITS_REQUIRED(1000, 2, 600, 1.5, 0.95, "pass-fail", None, 800)
    assert refused.startswith("#TAILSTOP! pass-fail cannot see past the test time")
    assert ACCURACY_FOR_UNITS(100, 1000, 2, 600, 0.95, None, None, 999).startswith("#TAILSTOP! pass-fail cannot")
    assert UNITS_REQUIRED(1000, 2, 600, 1.5, 0.95, "known-shape", None, 0) == "#TAILSTOP! test_time must be > 0 (got 0)"


def test_accuracy_for_units_is_the_inverse_of_units_required_with_a_test_time():
    # METHOD.md §4: d = exp(z σ / √n)
    sigma2 = time_terminated_sigma2("fitted-shape", 1000.0, 2.0, 600.0, 1200.0)
    z = 1.959963984540054  # NIST/SEMATECH §1.3.6.7.1
    # tolerance 1e-12: z to full double precision here, so only roundings of exp and sqrt remain
    assert ACCURACY_FOR_UNITS(100, 1000, 2, 600, 0.95, "fitted-shape", None, 1200) == pytest.approx(
        math.exp(z * math.sqrt(sigma2 / 100)), rel=1e-12)


# --------------------------------------------------------------------------- what the rule does on a stopped test

def test_simulation_against_the_rule_written_out_run_by_run():
    # check value: each run redone here with the same random numbers: lifetimes gamma(2, 600) stopped at
    # T = 1200, the known-shape rule applied prefix by prefix through estimate_tail (METHOD.md §5)
    result = simulate_with_test_time(1000.0, 2.0, 600.0, 1.5, 0.95, 10, "known-shape", 1200.0, replications=15,
                                     seed=7)
    rng = np.random.default_rng(7)
    factor = boundary_factor(1.5, 0.95)
    p = stats.gamma.sf(1000.0, 2.0, scale=600.0)
    for run in range(15):
        lifetimes = rng.gamma(2.0, 600.0, result.n_max)
        suspended = lifetimes > 1200.0
        times = np.where(suspended, 1200.0, lifetimes)
        stop = None
        for n in range(10, result.n_max + 1):
            estimate = estimate_tail(times[:n], 1000.0, "known-shape", 2.0, survivors=suspended[:n])
            if n >= factor * estimate.sigma2:
                stop = n
                break
        assert result.units[run] == stop
        covered = abs(estimate.log_odds - math.log(p / (1 - p))) <= math.log(1.5)
        assert result.covered[run] == covered


def test_plan_formulas_take_the_test_time():
    summary = dict(map(tuple, PLAN_SUMMARY(1000, 2, 600, 1.5, 0.95, 10, "fitted-shape", 100, 3, None, 1200)))
    assert summary["test time (each unit stopped)"] == 1200
    # n* from the expected information under the censoring (tested against quadrature above)
    n_star = math.ceil(boundary_factor(1.5, 0.95) * time_terminated_sigma2("fitted-shape", 1000, 2, 600, 1200))
    assert summary["fixed-size units n*"] == n_star
    assert PLAN_EXPECTED_UNITS(1000, 2, 600, 1.5, 0.95, 10, "fitted-shape", 100, 3, None, 1200) == \
        summary["expected units E[N]"]
    # pass-fail: exact figures, unchanged by a test time at or past the threshold, refused below it
    assert PLAN_COVERAGE(1000, 2, 600, 1.5, 0.95, 10, None, None, None, None, 1000) == \
        PLAN_COVERAGE(1000, 2, 600, 1.5, 0.95, 10)
    assert PLAN_COVERAGE(1000, 2, 600, 1.5, 0.95, 10, None, None, None, None, 900).startswith(
        "#TAILSTOP! pass-fail cannot see past the test time")
    refused = PLAN_COVERAGE(1000, 2, 600, 1.1, 0.95, 10, "known-shape", None, None, None, 1200)
    assert refused.startswith("#TAILSTOP!") and "with a test time" in refused and "tailstop plan" in refused


def test_plan_command_takes_a_test_time(capsys):
    from tailstop.commands import main

    code = main(["plan", "--threshold", "1000", "--shape", "2", "--scale", "600", "--accuracy", "1.5",
                 "--test-time", "700", "--replications", "50", "--fitted-replications", "30"])
    out = capsys.readouterr().out
    assert code == 0
    assert "Every unit still running at 700 is stopped there" in out and "pass-fail is left out" in out
    assert "known-shape" in out and "fitted-shape" in out
