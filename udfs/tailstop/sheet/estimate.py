"""Formulas: exceedance probability, estimates, fixed-accuracy bounds, planning sizes, gamma fit.

Every formula that takes a method, a shape or a scale takes the lifetime model as its last
optional argument: gamma (the default), weibull or lognormal.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..core import accuracy as _accuracy
from ..core import guaranteed
from ..core.methods import (
    METHOD_NAMES,
    PASS_FAIL_METHODS,
    estimate_tail,
    model_sigma2,
    pass_fail_sigma2_from_p,
)
from ..core.censored import FIT_CHECK_NEEDS_FAILURES, censored_fit
from ..core.models import DEFAULT_MODEL, MODEL_NAMES, get_model
from ..core.models.compare import fit_model
from ..core.time_terminated import check_test_time, time_terminated_sigma2
from ..core.models.gamma.fit import fit_gamma, gamma_fit_pvalue
from . import cells
from .formula import formula

# Help texts shared by several formulas (the spreadsheet shows them per argument).
HELP = {
    "observations": "Range of lifetimes, one unit per cell (hours, cycles, ...); blanks skipped; 1500+ marks a unit not failed when last seen at 1500",
    "failure_times": "Range of failure times, one unit per cell (hours, cycles, ...); blank cells are skipped",
    "threshold": "The threshold c > 0 (mission time, warranty limit), same unit as the lifetimes",
    "shape": "Shape > 0 of the model: gamma a, Weibull beta (scipy weibull_min c), lognormal sigma (sd of ln X)",
    "scale": "Scale > 0, unit of the lifetimes: gamma s (mean = shape * scale), Weibull eta, lognormal median e^mu",
    "accuracy": "Accuracy factor d > 1: the odds are to be known within a factor d (e.g. 1.5)",
    "confidence": "Confidence level between 0 and 1, e.g. 0.95",
    "method": "Optional: pass-fail (default), known-shape, fitted-shape or pass-fail-exact",
    "known_shape": "Optional: the model's shape, required when method is known-shape",
    "model": "Optional lifetime model: gamma (default), weibull or lognormal (as scipy.stats parameterises them)",
    "test_time": "Optional: every unit still running at this time is stopped there (a time-terminated test), "
                 "same unit as the lifetimes; blank: every unit runs to failure",
    "units": "Number of units tested (a whole number >= 1)",
    "p_guess": "Guessed probability of exceeding the threshold, between 0 and 1",
}


def clean_model(model) -> str:
    """The lifetime model name (gamma when blank), case-insensitive; the allowed names otherwise."""
    if cells.is_missing(model):
        return DEFAULT_MODEL
    if isinstance(model, (list, tuple)):
        flat = [v for row in model for v in (row if isinstance(row, (list, tuple)) else [row])]
        model = flat[0] if len(flat) == 1 else model
    text = model.strip().lower() if isinstance(model, str) else None
    if text not in MODEL_NAMES:
        shown = model if isinstance(model, str) and len(model) <= 20 else None
        got = f" (got {shown!r})" if shown is not None else ""
        raise cells.InputError(f"model must be one of {', '.join(MODEL_NAMES)}{got}")
    return text


def _for_model(model_given, name):
    """Runs a parameter check; its message names the model and the allowed models when a model was given."""
    def check(clean, *args):
        try:
            return clean(*args)
        except cells.InputError as problem:
            if not model_given:
                raise
            raise cells.InputError(f"{problem} for the {get_model(name).title} model "
                                   f"(models: {', '.join(MODEL_NAMES)})") from None
    return check


def clean_shape_and_scale(shape, scale, model):
    """(shape, scale, model name) for a formula that takes guessed model parameters."""
    name = clean_model(model)
    check = _for_model(not cells.is_missing(model), name)
    return check(cells.positive, shape, "shape"), check(cells.positive, scale, "scale"), name


def clean_method_and_shape(method, shape, model=None):
    """The method name, for known-shape its shape, and the model name; checked together."""
    name = cells.method_name(method, METHOD_NAMES)
    model_name = clean_model(model)
    if name == "known-shape":
        title = get_model(model_name).title
        if cells.is_missing(shape):
            raise cells.InputError(f"known-shape needs the {title} shape (the shape argument)")
        return name, _for_model(not cells.is_missing(model), model_name)(cells.positive, shape, "shape"), model_name
    return name, None, model_name


@dataclass(frozen=True)
class LogArguments:
    """The arguments of a formula over a log, cleaned: method, shape, threshold, units, survivors, model."""

    method: str
    shape: float | None
    threshold: float
    values: np.ndarray
    survivors: np.ndarray | None
    model: str = DEFAULT_MODEL


def clean_log_arguments(observations, threshold, method, shape, model=None) -> LogArguments:
    """Clean (observations, threshold, method, shape) as a spreadsheet passes them.

    A log may mark suspended units (``1500+``: not failed when last seen at
    1500, still running or taken off test); every method reads them as
    right-censored (``core/censored.py``).
    """
    name, shape_value, model_name = clean_method_and_shape(method, shape, model)
    c = cells.positive(threshold, "threshold")
    log = cells.read_log_cells(observations)
    if log.problem:
        raise cells.InputError(log.problem)
    if log.values.size < 2:
        raise cells.InputError(f"observations: needs at least 2 lifetimes (found {log.values.size})")
    survivors = log.survivors if log.survivors.any() else None
    return LogArguments(name, shape_value, c, log.values, survivors, model_name)


def estimate_from_cells(observations, threshold, method, shape, model=None):
    """The core estimate for formula arguments as a spreadsheet passes them."""
    log = clean_log_arguments(observations, threshold, method, shape, model)
    return estimate_tail(log.values, log.threshold, log.method, log.shape, survivors=log.survivors,
                         model=log.model)


def _needs_both_sides(estimate):
    if estimate.method in PASS_FAIL_METHODS and not 0 < estimate.p < 1:
        side = "exceeded" if estimate.p == 0 else "stayed below"
        raise cells.InputError(f"no unit {side} the threshold yet; bounds need units on both sides")


@formula(threshold=HELP["threshold"], shape=HELP["shape"], scale=HELP["scale"], model=HELP["model"])
def TAIL_PROB(threshold, shape, scale, model=None):
    """Probability that a lifetime exceeds the threshold, P(X > threshold), accurate in the far tail."""
    c = cells.number(threshold, "threshold")
    if c < 0:
        raise cells.InputError(f"threshold must be >= 0 (got {c:g})")
    a, s, name = clean_shape_and_scale(shape, scale, model)
    return get_model(name).tail_probability(c, a, s).p


@formula(
    ranges=("observations",), observations=HELP["observations"], threshold=HELP["threshold"],
    method=HELP["method"], shape=HELP["known_shape"], model=HELP["model"],
)
def TAIL_PROB_EST(observations, threshold, method=None, shape=None, model=None):
    """Estimated probability that a unit outlasts the threshold, from the test log."""
    return estimate_from_cells(observations, threshold, method, shape, model).p


@formula(
    ranges=("observations",), returns="row", observations=HELP["observations"], threshold=HELP["threshold"],
    accuracy=HELP["accuracy"], method=HELP["method"], shape=HELP["known_shape"], model=HELP["model"],
)
def TAIL_PROB_BOUNDS(observations, threshold, accuracy, method=None, shape=None, model=None):
    """Fixed-accuracy bounds (low, high) for the probability of outlasting the threshold; a 1x2 row."""
    d = cells.accuracy(accuracy)
    estimate = estimate_from_cells(observations, threshold, method, shape, model)
    _needs_both_sides(estimate)
    interval = estimate.probability_interval(d)
    return [[interval.low, interval.high]]


@formula(
    ranges=("observations",), returns="row", observations=HELP["observations"], threshold=HELP["threshold"],
    accuracy=HELP["accuracy"], method=HELP["method"], shape=HELP["known_shape"], model=HELP["model"],
)
def TAIL_ODDS_BOUNDS(observations, threshold, accuracy, method=None, shape=None, model=None):
    """Fixed-accuracy bounds (odds/d, odds*d) for the odds of outlasting the threshold; a 1x2 row."""
    d = cells.accuracy(accuracy)
    estimate = estimate_from_cells(observations, threshold, method, shape, model)
    _needs_both_sides(estimate)
    interval = estimate.odds_interval(d)
    return [[interval.low, interval.high]]


def clean_test_time(test_time, threshold, method):
    """The test time at which every unit still running is stopped; None when left out (run to failure)."""
    if cells.is_missing(test_time):
        return None
    value = cells.positive(test_time, "test_time")
    try:
        check_test_time(value, threshold, method)
    except ValueError as problem:
        raise cells.InputError(str(problem)) from None
    return value


def planning_sigma2(threshold, shape, scale, method, model=None, test_time=None):
    """σ² under guessed model parameters, from formula arguments; every unit stopped at ``test_time``."""
    name = cells.method_name(method, METHOD_NAMES)
    c = cells.positive(threshold, "threshold")
    a, s, model_name = clean_shape_and_scale(shape, scale, model)
    stop = clean_test_time(test_time, c, name)
    sigma2 = float(time_terminated_sigma2(name, c, a, s, stop, model_name))
    if not 0 < sigma2 < float("inf"):
        raise cells.InputError("the guessed model puts (almost) every unit on one side of the threshold; "
                               "no finite number of units reaches this accuracy")
    return sigma2


# A unit count above this is no test plan; a cell says so instead of showing a huge number.
LARGEST_UNIT_COUNT = cells.LARGE_COUNT


def unit_count(n_star) -> int:
    """ceil(n*) as a whole number of units, refused when it is beyond any test."""
    units = float(_accuracy.whole_units(n_star))
    if not units <= LARGEST_UNIT_COUNT:
        amount = f"about {units:.3g} units" if np.isfinite(units) else "more units than a number can hold"
        raise cells.InputError(f"this needs {amount}, more than any test can run; "
                               "ask for a larger accuracy factor or choose a threshold nearer the typical life")
    return int(units)


@formula(
    threshold=HELP["threshold"], shape="Guessed shape > 0 of the model", scale=f"Guessed {HELP['scale'][0].lower()}{HELP['scale'][1:]}",
    accuracy=HELP["accuracy"], confidence=HELP["confidence"], method=HELP["method"], model=HELP["model"],
    test_time=HELP["test_time"],
)
def UNITS_REQUIRED(threshold, shape, scale, accuracy, confidence, method=None, model=None, test_time=None):
    """Units a fixed-size test needs for the accuracy at the confidence, from guessed model parameters.

    pass-fail-exact: the tuned boundary c·n* (pilot 2, every unit checked), the count its rule aims at.
    """
    d, level = cells.accuracy(accuracy), cells.confidence(confidence)
    sigma2 = planning_sigma2(threshold, shape, scale, method, model, test_time)
    n_star = _accuracy.units_for_accuracy(sigma2, d, level)
    if cells.method_name(method, METHOD_NAMES) == guaranteed.METHOD:
        n_star = n_star * guaranteed.tuning(d, level, 2, 1).factor
    return unit_count(n_star)


@formula(p_guess=HELP["p_guess"], accuracy=HELP["accuracy"], confidence=HELP["confidence"])
def UNITS_REQUIRED_FROM_P(p_guess, accuracy, confidence):
    """Units a fixed-size pass-fail test needs for the accuracy at the confidence, from a guessed probability."""
    p = cells.probability(p_guess, "p_guess")
    d, level = cells.accuracy(accuracy), cells.confidence(confidence)
    return unit_count(_accuracy.units_for_accuracy(pass_fail_sigma2_from_p(p), d, level))


@formula(
    units=HELP["units"], threshold=HELP["threshold"], shape="Guessed shape > 0 of the model",
    scale=f"Guessed {HELP['scale'][0].lower()}{HELP['scale'][1:]}", confidence=HELP["confidence"],
    method=HELP["method"], model=HELP["model"], test_time=HELP["test_time"],
)
def ACCURACY_FOR_UNITS(units, threshold, shape, scale, confidence, method=None, model=None, test_time=None):
    """Accuracy factor d that a fixed-size test of this many units reaches at the confidence."""
    n = cells.whole_number(units, "units", minimum=1)
    level = cells.confidence(confidence)
    if cells.method_name(method, METHOD_NAMES) == guaranteed.METHOD:
        raise cells.InputError("pass-fail-exact is tuned for one accuracy at a time, so it has no accuracy for a "
                               "unit count: use UNITS_REQUIRED with pass-fail-exact, or pass-fail here")
    sigma2 = planning_sigma2(threshold, shape, scale, method, model, test_time)
    with np.errstate(over="ignore"):
        d = float(_accuracy.accuracy_for_units(sigma2, n, level))
    if not np.isfinite(d):
        raise cells.InputError("with so few units the accuracy factor is beyond any number; add units")
    return d


# What instead of a fit p-value when the log holds suspended units.
INSTEAD_OF_PVALUE = ("compare the models' censored fits with FIT_COMPARE, or use pass-fail, which needs no model")


def fit_log(observations, model):
    """The ML fit of a model to the cells: censored when a unit is marked +; InputError where none exists."""
    times, suspended = cells.clean_log_units(observations)
    try:
        if suspended is None:
            return fit_model(times, model)
        return censored_fit(times, suspended, model)
    except ValueError as problem:
        raise cells.InputError(str(problem)) from None


def failure_times_for_check(observations):
    """The failure times of a complete log for a fit check; a log with + units is told what to use instead."""
    times, suspended = cells.clean_log_units(observations)
    if suspended is not None:
        raise cells.InputError(f"{FIT_CHECK_NEEDS_FAILURES} ({int(suspended.sum())} here); {INSTEAD_OF_PVALUE}")
    return times


@formula(ranges=("observations",), observations=HELP["observations"])
def GAMMA_FIT_SHAPE(observations):
    """Gamma shape fitted by maximum likelihood to the lifetimes (location 0; units marked + as suspended)."""
    return fit_log(observations, DEFAULT_MODEL).shape


@formula(ranges=("observations",), observations=HELP["observations"])
def GAMMA_FIT_SCALE(observations):
    """Gamma scale fitted by maximum likelihood to the lifetimes, in their unit (location 0; units marked + as suspended)."""
    return fit_log(observations, DEFAULT_MODEL).scale


@formula(ranges=("observations",), observations=HELP["failure_times"])
def GAMMA_FIT_PVALUE(observations):
    """Goodness-of-fit p-value of the gamma model (Anderson-Darling, estimated parameters); small means a poor fit."""
    values = failure_times_for_check(observations)
    try:
        fit_gamma(values)
    except ValueError as problem:
        raise cells.InputError(str(problem)) from None
    return gamma_fit_pvalue(values)
