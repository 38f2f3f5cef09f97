"""Formulas: what the sequential stopping rule will do, planned from guessed parameters.

Every call is bounded in time: the exact pass-fail figures are computed for
plans up to ``EXACT_UNITS_LIMIT`` units, the simulated ones for at most
``REPLICATIONS_LIMIT`` replications and at most ``WORK_LIMIT[method]``
replications × units per run. Beyond that the formula answers with a ``#TAILSTOP!``
text saying what to change; it suggests ``tailstop plan`` only where the
command answers the same question within its own bound
(``core.operating.work.COMMAND_SECONDS``), and otherwise says what is known
without computing (n*, the fixed-size plan, E[N] by the asymptotics).
"""
from __future__ import annotations

import math
import time

from ..core import accuracy as _accuracy
from ..core import guaranteed
from ..core.methods import METHOD_NAMES, PASS_FAIL_METHODS, pass_fail_sigma2_from_p
from ..core.models import get_model
from ..core.operating import (
    COMMAND_SECONDS,
    DEFAULT_SEED,
    PlanTooLarge,
    check_work,
    exact_work,
    operating_characteristics,
    pass_fail_exact,
    simulation_work,
)
from ..core.operating import CELL_SECONDS, calibrate
from ..core.operating.results import falls_short
from ..core.operating.time_terminated import simulate_with_test_time
from . import cells
from .estimate import HELP, clean_model, clean_shape_and_scale, clean_test_time, planning_sigma2
from .formula import formula

EXACT_UNITS_LIMIT = 10_000
REPLICATIONS_LIMIT = 100_000
DEFAULT_REPLICATIONS = {"known-shape": 10_000, "fitted-shape": 10_000}
# replications × units per run a cell may simulate (about a second or two on one core); a run
# also costs a fixed amount, counted as this many units (fitted-shape solves for the shape)
WORK_LIMIT = {"known-shape": 20_000_000, "fitted-shape": 4_000_000}
RUN_OVERHEAD = {"known-shape": 20, "fitted-shape": 400}
SEED_LIMIT = 2**63 - 1
# The Weibull and lognormal simulations refit every prefix of every run (no screen, and the
# Weibull fitted shape has no running sums): smaller budgets, in the same units.
MODEL_DEFAULT_REPLICATIONS = 2_000
MODEL_WORK_LIMIT = {"known-shape": 2_000_000, "fitted-shape": 2_000_000}
MODEL_RUN_OVERHEAD = {"known-shape": 100, "fitted-shape": 100}
WEIBULL_FITTED_WORK_LIMIT, WEIBULL_FITTED_RUN_OVERHEAD = 600_000, 1_000
# a test stopped at a test time: one run at a time, each check point a censored fit
TEST_TIME_DEFAULT_REPLICATIONS, TEST_TIME_WORK_LIMIT, TEST_TIME_RUN_OVERHEAD = 400, 40_000, 20

PLAN_HELP = {
    "threshold": HELP["threshold"],
    "shape": "Guessed shape > 0 of the model (gamma a, Weibull beta, lognormal sigma)",
    "scale": "Guessed scale > 0 of the model, unit of the lifetimes (gamma s, Weibull eta, lognormal median)",
    "accuracy": HELP["accuracy"],
    "confidence": HELP["confidence"],
    "pilot": "Pilot sample: units tested before the rule is first consulted (a whole number >= 2)",
    "method": HELP["method"],
    "replications": "Optional: simulated test runs for known-shape and fitted-shape (default 10,000)",
    "seed": "Optional: seed of the simulation; the same seed gives the same figures",
    "model": HELP["model"],
    "test_time": HELP["test_time"],
}


def _pilot(value):
    return cells.pilot(value, maximum=EXACT_UNITS_LIMIT)


def _command_can(estimate):
    """The advice to run `tailstop plan`, only where the command answers the same question within its bound."""
    return ", or run `tailstop plan`" if estimate.seconds <= COMMAND_SECONDS else ""


def _exact_limit(n_star, pilot, p, accuracy, confidence):
    if max(n_star, pilot) > EXACT_UNITS_LIMIT:
        estimate = exact_work(p, accuracy, confidence, pilot, n_star)
        if estimate.seconds > COMMAND_SECONDS:
            # not even the command can: say what is known without computing, and what to change
            try:
                pass_fail_exact(p, accuracy, confidence, pilot)
            except PlanTooLarge as refused:
                raise cells.InputError(str(refused)) from None
        raise cells.InputError(
            f"this plan needs {cells.units_text(max(n_star, pilot))}; a cell computes plans up to "
            f"{EXACT_UNITS_LIMIT:,} units: ask for less accuracy{_command_can(estimate)}")


def _budget(method, model, test_time=None):
    """(default replications, work limit, run overhead) of a cell's simulation."""
    if test_time is not None:  # each run refits its censored prefixes (operating/time_terminated.py)
        return TEST_TIME_DEFAULT_REPLICATIONS, TEST_TIME_WORK_LIMIT, TEST_TIME_RUN_OVERHEAD
    if model == "gamma":
        return DEFAULT_REPLICATIONS[method], WORK_LIMIT[method], RUN_OVERHEAD[method]
    if model == "weibull" and method == "fitted-shape":
        return MODEL_DEFAULT_REPLICATIONS, WEIBULL_FITTED_WORK_LIMIT, WEIBULL_FITTED_RUN_OVERHEAD
    return MODEL_DEFAULT_REPLICATIONS, MODEL_WORK_LIMIT[method], MODEL_RUN_OVERHEAD[method]


def _replications(value, method, n_star, pilot, model="gamma", test_time=None, sigma2=None, confidence=None):
    units = max(n_star, pilot)
    default, limit, overhead = _budget(method, model, test_time)
    affordable = int(limit // (units + overhead))
    label = method if model == "gamma" else f"{model} {method}"
    if test_time is not None:
        label += " with a test time"
    if cells.is_missing(value):
        replications = min(default, affordable)
        if replications < 100:
            estimate = simulation_work(method, n_star, pilot, default, model)
            if estimate.seconds > COMMAND_SECONDS and sigma2 is not None:
                try:
                    check_work(estimate, COMMAND_SECONDS, sigma2=sigma2, confidence=confidence)
                except PlanTooLarge as refused:
                    raise cells.InputError(str(refused)) from None
            command = _command_can(estimate)
            raise cells.InputError(
                f"this plan needs {cells.units_text(units)} per run; a cell simulates at most "
                f"{limit:,} replications × units for {label}: ask for less accuracy{command}")
        return replications
    replications = cells.whole_number(value, "replications", minimum=1, maximum=REPLICATIONS_LIMIT)
    if replications > affordable:
        raise cells.InputError(
            f"replications × units per run is capped at {limit:,} for {label} so that the cell stays quick; "
            f"this plan needs {cells.units_text(units)} per run: use at most {max(affordable, 1):,} replications")
    return replications


def _seed(value):
    if cells.is_missing(value):
        return DEFAULT_SEED
    return cells.whole_number(value, "seed", minimum=0, maximum=SEED_LIMIT)


def plan_from_cells(threshold, shape, scale, accuracy, confidence, pilot, method, replications, seed, model=None,
                    test_time=None):
    """Operating characteristics for formula arguments as a spreadsheet passes them.

    With a test time the parametric methods are simulated on the censored test
    (``operating.time_terminated``); pass-fail keeps its exact figures (a test
    time below the threshold is refused).
    """
    name = cells.method_name(method, METHOD_NAMES)
    d, level = cells.accuracy(accuracy), cells.confidence(confidence)
    sigma2 = planning_sigma2(threshold, shape, scale, name, model, test_time)
    n_star = float(_accuracy.units_for_accuracy(sigma2, d, level))
    m = _pilot(pilot)
    c = cells.positive(threshold, "threshold")
    a, s, model_name = clean_shape_and_scale(shape, scale, model)
    stop = clean_test_time(test_time, c, name)
    if name in PASS_FAIL_METHODS:
        p = float(get_model(model_name).tail_probability(c, a, s).p)
        _exact_limit(n_star, m, p, d, level)
        return operating_characteristics(c, a, s, d, level, m, name, model=model_name)
    count = _replications(replications, name, n_star, m, model_name, stop, sigma2, level)
    if stop is not None:
        return simulate_with_test_time(c, a, s, d, level, m, name, stop, replications=count, seed=_seed(seed),
                                       model=model_name)
    return operating_characteristics(c, a, s, d, level, m, name, replications=count, seed=_seed(seed),
                                     model=model_name)


def _number_or_text(value):
    return value if math.isfinite(value) else "beyond n_max"


def _beside(result, accuracy):
    """Rows that put pass-fail and pass-fail-exact side by side (what the exact guarantee costs in units)."""
    if result.method not in PASS_FAIL_METHODS or accuracy is None:
        return []
    if not guaranteed.tunable(accuracy, result.confidence):
        return [["pass-fail-exact", "not tuned this close to d = 1; pass-fail's coverage is near nominal here"]]
    tuned = guaranteed.tuning(accuracy, result.confidence, result.pilot)
    rows = [
        ["pass-fail-exact tuning factor", tuned.factor],
        ["pass-fail-exact guaranteed from p", tuned.p_low],
        ["pass-fail-exact guaranteed to p", 1.0 - tuned.p_low],
        ["pass-fail-exact certified coverage >=", tuned.coverage_bound],
        ["pass-fail-exact guarantee covers this p",
         "yes" if tuned.p_low <= result.probability <= 1.0 - tuned.p_low else "no: p is outside the guaranteed range"],
    ]
    other = "pass-fail" if result.method == guaranteed.METHOD else guaranteed.METHOD
    companion = pass_fail_exact(result.probability, accuracy, result.confidence, result.pilot, method=other)
    for label, value, _ in companion.figures():
        if label.startswith(("expected units", "sd of N", "N ")) or label == "coverage":
            rows.append([f"{other}: {label}", _number_or_text(value)])
    return rows


def summary_table(result, model="gamma", test_time=None, accuracy=None):
    """The 2-column labelled table of PLAN_SUMMARY (a ``model`` row under a Weibull or lognormal guess,
    a ``test time`` row when every unit is stopped at one); pass-fail and pass-fail-exact each show the
    other beside them when ``accuracy`` is given."""
    rows = [["method", result.method]]
    if model != "gamma":
        rows.append(["model", model])
    if test_time is not None:
        rows.append(["test time (each unit stopped)", test_time])
    rows.append(["figures", "exact" if result.exact else "simulated"])
    if not result.exact:
        rows += [["replications", result.replications], ["seed", result.seed]]
    rows.append(["true probability p", result.probability])
    for label, value, error in result.figures():
        rows.append([label, _number_or_text(value)])
        if error is not None:
            rows.append([f"{label}: MC std. error", _number_or_text(error)])
    rows.append(["nominal confidence", result.confidence])
    return rows + _shortfall(result, accuracy) + _beside(result, accuracy)


def _shortfall(result, accuracy):
    """Rows saying, in numbers, that the coverage falls short, and (exact pass-fail) the calibrated z' that restores it.

    Short means below nominal by more than 0.005 (exact) or two Monte Carlo
    standard errors. The calibration is searched within the cell's time
    bound; beyond it the row points to `tailstop plan --calibrate`.
    """
    if not falls_short(result):
        return []
    rows = [["coverage short of nominal by", result.confidence - result.coverage]]
    if not (result.exact and result.method == "pass-fail" and accuracy is not None):
        return rows + [["calibrated critical value", "run `tailstop plan --calibrate`"]]
    start = time.monotonic()

    def evaluate(z):
        if time.monotonic() - start > CELL_SECONDS:
            raise TimeoutError
        return pass_fail_exact(result.probability, accuracy, result.confidence, result.pilot, stop_z=z,
                               n_max=None)

    try:
        calibration = calibrate(evaluate, result.confidence)
    except (TimeoutError, PlanTooLarge):
        return rows + [["calibrated critical value", "run `tailstop plan --calibrate`"]]
    if not calibration.reached:
        return rows + [["calibrated critical value", "not reached up to 3 z"]]
    return rows + [["calibrated critical value z'", calibration.z_calibrated],
                   ["confidence to give the decision formulas", calibration.confidence_calibrated],
                   ["coverage at z'", calibration.calibrated.coverage],
                   ["expected units E[N] at z'", calibration.calibrated.expected_units]]


PLAN_ARGUMENTS = dict(
    threshold=PLAN_HELP["threshold"], shape=PLAN_HELP["shape"], scale=PLAN_HELP["scale"],
    accuracy=PLAN_HELP["accuracy"], confidence=PLAN_HELP["confidence"], pilot=PLAN_HELP["pilot"],
    method=PLAN_HELP["method"], replications=PLAN_HELP["replications"], seed=PLAN_HELP["seed"],
    model=PLAN_HELP["model"], test_time=PLAN_HELP["test_time"],
)


def _finite(value, what):
    if not math.isfinite(value):
        raise cells.InputError(f"no run stopped within the units examined, so {what} is not defined; "
                               "check the guess or ask for less accuracy")
    return value


@formula(**PLAN_ARGUMENTS)
def PLAN_EXPECTED_UNITS(threshold, shape, scale, accuracy, confidence, pilot, method=None, replications=None, seed=None,
                        model=None, test_time=None):
    """Expected number of units E[N] the sequential rule will test under the guessed model parameters."""
    result = plan_from_cells(threshold, shape, scale, accuracy, confidence, pilot, method, replications, seed, model,
                             test_time)
    return _finite(result.expected_units, "E[N]")


@formula(**PLAN_ARGUMENTS)
def PLAN_COVERAGE(threshold, shape, scale, accuracy, confidence, pilot, method=None, replications=None, seed=None,
                  model=None, test_time=None):
    """Real coverage of the final interval of the sequential rule under the guessed model parameters."""
    return plan_from_cells(threshold, shape, scale, accuracy, confidence, pilot, method, replications, seed,
                           model, test_time).coverage


@formula(returns="table", **PLAN_ARGUMENTS)
def PLAN_SUMMARY(threshold, shape, scale, accuracy, confidence, pilot, method=None, replications=None, seed=None,
                 model=None, test_time=None):
    """Table (2 columns) of what the sequential rule will do: n*, E[N], sd and quantiles of N, coverage."""
    result = plan_from_cells(threshold, shape, scale, accuracy, confidence, pilot, method, replications, seed, model,
                             test_time)
    return summary_table(result, clean_model(model), None if cells.is_missing(test_time) else
                         cells.positive(test_time, "test_time"), cells.accuracy(accuracy))


@formula(returns="table", p_guess=HELP["p_guess"], accuracy=HELP["accuracy"], confidence=HELP["confidence"],
         pilot=PLAN_HELP["pilot"])
def PLAN_SUMMARY_FROM_P(p_guess, accuracy, confidence, pilot):
    """Table (2 columns) of what the pass-fail sequential rule will do, from a guessed probability (exact)."""
    p = cells.probability(p_guess, "p_guess")
    d, level = cells.accuracy(accuracy), cells.confidence(confidence)
    n_star = float(_accuracy.units_for_accuracy(pass_fail_sigma2_from_p(p), d, level))
    m = _pilot(pilot)
    _exact_limit(n_star, m, p, d, level)
    return summary_table(pass_fail_exact(p, d, level, m), accuracy=d)
