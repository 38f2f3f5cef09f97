"""tailstop — exceedance probabilities of gamma lifetimes to a guaranteed relative accuracy.

Layers, each importing only those below it: ``tailstop.core`` (the numeric core: models,
methods, the rule, planning; knows nothing about spreadsheets), ``tailstop.sheet`` (the
spreadsheet formulas over it), ``tailstop.workbooks`` (headless workbook tools) and
``tailstop.commands`` (the ``tailstop`` command line). The names below are the core's API.
"""
import importlib

# name -> module of the core that defines it; imported on first use (PEP 562), so that
# `import tailstop.commands` (the command line's start) does not pay for scipy
_CORE_API = {
    "accuracy_for_units": ".core.accuracy",
    "critical_value": ".core.accuracy",
    "units_for_accuracy": ".core.accuracy",
    "whole_units": ".core.accuracy",
    "METHOD_NAMES": ".core.methods",
    "SufficientStatistics": ".core.methods",
    "TailEstimate": ".core.methods",
    "estimate_tail": ".core.methods",
    "model_sigma2": ".core.methods",
    "MODEL_NAMES": ".core.models",
    "get_model": ".core.models",
    "GammaFit": ".core.models.gamma.fit",
    "fit_gamma": ".core.models.gamma.fit",
    "gamma_fit_pvalue": ".core.models.gamma.fit",
    "tail_probability": ".core.models.gamma.tail",
    "TailProbability": ".core.probability",
}


def __getattr__(name):
    if name not in _CORE_API:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(importlib.import_module(_CORE_API[name], __name__), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(set(globals()) | set(_CORE_API))


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
