"""tailstop — exceedance probabilities of gamma lifetimes to a guaranteed relative accuracy.

The numeric core (``tail``, ``fit``, ``variance``, ``methods``, ``accuracy``)
knows nothing about spreadsheets; ``tailstop.sheet`` holds the spreadsheet
formulas over it.
"""
from .accuracy import accuracy_for_units, critical_value, units_for_accuracy, whole_units
from .fit import GammaFit, fit_gamma, gamma_fit_pvalue
from .methods import METHOD_NAMES, SufficientStatistics, TailEstimate, estimate_tail, model_sigma2
from .tail import TailProbability, tail_probability

__version__ = "0.1.0"

__all__ = [
    "METHOD_NAMES",
    "GammaFit",
    "SufficientStatistics",
    "TailEstimate",
    "TailProbability",
    "accuracy_for_units",
    "critical_value",
    "estimate_tail",
    "fit_gamma",
    "gamma_fit_pvalue",
    "model_sigma2",
    "tail_probability",
    "units_for_accuracy",
    "whole_units",
]
