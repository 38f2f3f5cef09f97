"""Formulas: fit a lifetime model (gamma, Weibull, lognormal) to a log, check it, compare the three."""
from __future__ import annotations

from ..core.models import get_model
from ..core.models.compare import compare_models, fit_model
from . import cells
from .estimate import HELP, clean_model
from .formula import formula

COMPARE_HEADER = ["model", "shape", "scale", "log-likelihood", "AIC", "fit p-value"]


def _lifetimes(observations):
    return cells.clean_lifetimes(observations, minimum=2).values


def _fitted(observations, model):
    name = clean_model(model)
    values = _lifetimes(observations)
    try:
        return values, name, fit_model(values, name)
    except ValueError as problem:
        raise cells.InputError(str(problem)) from None


@formula(ranges=("observations",), observations=HELP["failure_times"], model=HELP["model"])
def FIT_SHAPE(observations, model=None):
    """Shape of the lifetime model fitted by maximum likelihood (location 0): gamma a, Weibull beta, lognormal sigma."""
    return _fitted(observations, model)[2].shape


@formula(ranges=("observations",), observations=HELP["failure_times"], model=HELP["model"])
def FIT_SCALE(observations, model=None):
    """Scale of the lifetime model fitted by maximum likelihood, in the lifetimes' unit: gamma s, Weibull eta, lognormal median."""
    return _fitted(observations, model)[2].scale


@formula(ranges=("observations",), observations=HELP["failure_times"], model=HELP["model"])
def FIT_PVALUE(observations, model=None):
    """Goodness-of-fit p-value of the lifetime model (Anderson-Darling, estimated parameters, seeded); small means a poor fit."""
    values, name, _ = _fitted(observations, model)
    try:
        return get_model(name).fit_pvalue(values)
    except ValueError as problem:
        raise cells.InputError(str(problem)) from None


@formula(ranges=("observations",), returns="table", observations=HELP["failure_times"])
def FIT_COMPARE(observations):
    """The three lifetime models fitted to the log, best AIC first: model, shape, scale, log-likelihood, AIC, fit p-value."""
    values = _lifetimes(observations)
    try:
        rows = compare_models(values)
    except ValueError as problem:
        raise cells.InputError(str(problem)) from None
    table = [COMPARE_HEADER]
    for row in rows:
        pvalue = row.pvalue if row.pvalue is not None else "not run: log too long"
        table.append([row.model, row.fit.shape, row.fit.scale, row.fit.log_likelihood, row.aic, pvalue])
    return table
