"""tailstop — exceedance probabilities of gamma lifetimes to a guaranteed relative accuracy.

Layers, each importing only those below it: ``tailstop.core`` (the numeric core: models,
methods, the rule, planning; knows nothing about spreadsheets), ``tailstop.sheet`` (the
spreadsheet formulas over it), ``tailstop.workbooks`` (headless workbook tools) and
``tailstop.commands`` (the ``tailstop`` command line). The names below are the core's API.
"""
from .core.accuracy import (
    accuracy_for_units,
    critical_value,
    units_for_accuracy,
    whole_units,
)
from .core.methods import (
    METHOD_NAMES,
    SufficientStatistics,
    TailEstimate,
    estimate_tail,
    model_sigma2,
)
from .core.models import MODEL_NAMES, get_model
from .core.models.gamma.fit import GammaFit, fit_gamma, gamma_fit_pvalue
from .core.models.gamma.tail import tail_probability
from .core.probability import TailProbability

__version__ = "0.1.0"

__all__ = [
    "METHOD_NAMES",
    "MODEL_NAMES",
    "GammaFit",
    "SufficientStatistics",
    "TailEstimate",
    "TailProbability",
    "accuracy_for_units",
    "critical_value",
    "estimate_tail",
    "fit_gamma",
    "gamma_fit_pvalue",
    "get_model",
    "model_sigma2",
    "tail_probability",
    "units_for_accuracy",
    "whole_units",
]
