"""The three lifetime models fitted to one log side by side: log-likelihood, AIC, fit check.

All three models have two parameters, so AIC = 4 - 2 log L ranks them by
their maximised likelihood. A difference in AIC of 4 or more is read as
"clearly better" (Burnham & Anderson, Model Selection and Multimodel
Inference, 2nd ed. 2002, §2.6: models within 2 of the best have substantial
support, 4 to 7 behind considerably less; from memory). With a few units AIC
tells the models apart poorly: the fit check p-value of each model is shown
beside it.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import MODEL_NAMES, get_model
from .base import ModelFit, check_lifetimes

__all__ = ["ModelComparison", "CLEARLY_BETTER", "fit_model", "compare_models", "better_model"]

CLEARLY_BETTER = 4.0  # AIC difference read as "clearly better"


@dataclass(frozen=True)
class ModelComparison:
    """One row of the comparison.

    Attributes
    ----------
    fit : ModelFit
    pvalue : float or None
        The model's fit check p-value (None when not asked for).
    pvalue_problem : str or None
        Why the fit check was not run (a log longer than it handles), else None.
    """

    fit: ModelFit
    pvalue: float | None = None
    pvalue_problem: str | None = None

    @property
    def model(self) -> str:
        return self.fit.model

    @property
    def aic(self) -> float:
        return self.fit.aic


def fit_model(observations, model) -> ModelFit:
    """The ML fit of ``model`` (location 0) with its log-likelihood; ValueError where no fit exists."""
    lifetime = get_model(model)
    x = check_lifetimes(observations, lifetime.title)
    fitted = lifetime.fit(x)
    shape, scale = float(fitted.shape), float(fitted.scale)
    log_likelihood = float(np.sum(lifetime.log_pdf(x, shape, scale)))
    return ModelFit(lifetime.name, shape, scale, int(x.size), log_likelihood)


def compare_models(observations, *, pvalues=True, **check_options) -> tuple:
    """Every model fitted to the lifetimes, best (lowest AIC) first; ties keep the table's order.

    ``check_options`` (``samples``, ``seed``) go to each model's fit check.
    """
    rows = []
    for name in MODEL_NAMES:
        fitted = fit_model(observations, name)
        pvalue = problem = None
        if pvalues:
            try:
                pvalue = float(get_model(name).fit_pvalue(observations, **check_options))
            except ValueError as reason:
                problem = str(reason)
        rows.append(ModelComparison(fitted, pvalue, problem))
    return tuple(sorted(rows, key=lambda row: row.aic))


def better_model(observations, model) -> ModelComparison | None:
    """The best-AIC model when it beats ``model`` by CLEARLY_BETTER or more, else None (no fit checks run)."""
    rows = compare_models(observations, pvalues=False)
    best = rows[0]
    mine = next(row for row in rows if row.model == get_model(model).name)
    return best if best.model != mine.model and mine.aic - best.aic >= CLEARLY_BETTER else None
