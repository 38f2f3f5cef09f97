"""Formulas: fit a lifetime model (gamma, Weibull, lognormal) to a log, check it, compare the three.

A log may mark suspended units (``1500+``): the shape and scale are then the
censored maximum likelihood the estimates use (``core.censored.censored_fit``)
and FIT_COMPARE ranks the censored likelihoods; the fit p-value needs every
unit's failure time and says so.
"""
from __future__ import annotations

from ..core.censored import compare_censored_models
from ..core.models import get_model
from ..core.models.compare import compare_models, fit_model
from . import cells
from .estimate import HELP, clean_model, failure_times_for_check, fit_log
from .formula import formula

COMPARE_HEADER = ["model", "shape", "scale", "log-likelihood", "AIC", "fit p-value"]


@formula(ranges=("observations",), observations=HELP["observations"], model=HELP["model"])
def FIT_SHAPE(observations, model=None):
    """Shape of the lifetime model fitted by maximum likelihood (location 0; units marked + as suspended): gamma a, Weibull beta, lognormal sigma."""
    return fit_log(observations, clean_model(model)).shape


@formula(ranges=("observations",), observations=HELP["observations"], model=HELP["model"])
def FIT_SCALE(observations, model=None):
    """Scale of the lifetime model fitted by maximum likelihood (units marked + as suspended), in the lifetimes' unit: gamma s, Weibull eta, lognormal median."""
    return fit_log(observations, clean_model(model)).scale


@formula(ranges=("observations",), observations=HELP["failure_times"], model=HELP["model"])
def FIT_PVALUE(observations, model=None):
    """Goodness-of-fit p-value of the lifetime model (Anderson-Darling, estimated parameters, seeded); small means a poor fit."""
    name = clean_model(model)
    values = failure_times_for_check(observations)
    try:
        fit_model(values, name)
        return get_model(name).fit_pvalue(values)
    except ValueError as problem:
        raise cells.InputError(str(problem)) from None


@formula(ranges=("observations",), returns="table", observations=HELP["observations"])
def FIT_COMPARE(observations):
    """The three lifetime models fitted to the log, best AIC first: model, shape, scale, log-likelihood, AIC, fit p-value."""
    times, suspended = cells.clean_log_units(observations)
    try:
        rows = compare_models(times) if suspended is None else compare_censored_models(times, suspended)
    except ValueError as problem:
        raise cells.InputError(str(problem)) from None
    table = [COMPARE_HEADER]
    for row in rows:
        if row.pvalue is not None:
            pvalue = row.pvalue
        else:
            pvalue = "not run: units marked +" if suspended is not None else "not run: log too long"
        table.append([row.model, row.fit.shape, row.fit.scale, row.fit.log_likelihood, row.aic, pvalue])
    return table
