"""The gamma lifetime model, shape a and scale s (mean a·s), as one unit of the core.

``MODEL`` is what the methods, the rule and the simulations use; they look it up in
``core.models.MODELS`` by name. The pieces live beside it: ``tail`` (P(X > c) in logs,
far-tail accurate), ``fit`` (ML from Σx and Σlog x, the fit p-value), ``variance`` (σ² of the
log-odds for the known-shape and fitted-shape estimators, METHOD.md §3).
"""
from __future__ import annotations

import numpy as np

from ..base import LifetimeModel
from .fit import fit_gamma, gamma_fit_pvalue, shape_from_log_ratio
from .tail import log_density_term, tail_probability, tail_probability_standard
from .variance import sigma2_fitted_shape, sigma2_known_shape

__all__ = ["MODEL"]


def _scale_for_shape(statistics, shape):
    """ML scale with the shape fixed: ŝ = x̄ / a."""
    return statistics.sum_x / (statistics.n * shape)


def _fitted_shape(statistics):
    """ML shape from log(x̄) - mean(log x); NaN where it does not exist (all values equal)."""
    return shape_from_log_ratio(statistics.log_ratio)


def _draw(rng, shape, scale, size):
    return rng.gamma(shape, scale, size=size)


def _log_pdf(x, shape, scale):
    """log f(x) = (a-1) log x - x/s - a log s - log Γ(a), unchecked."""
    x = np.asarray(x, dtype=float)
    return log_density_term(shape, x / np.asarray(scale, dtype=float)) - np.log(x)


def _log_sf(x, shape, scale):
    """log P(X > x), far-tail accurate, unchecked."""
    return tail_probability_standard(shape, np.asarray(x, dtype=float) / np.asarray(scale, dtype=float)).log_p


MODEL = LifetimeModel(
    name="gamma",
    tail_probability=tail_probability,
    tail_standard=tail_probability_standard,
    log_density_term=log_density_term,
    scale_for_shape=_scale_for_shape,
    fitted_shape=_fitted_shape,
    sigma2_known_shape=sigma2_known_shape,
    sigma2_fitted_shape=sigma2_fitted_shape,
    fit=fit_gamma,
    fit_pvalue=gamma_fit_pvalue,
    draw=_draw,
    title="gamma",
    shape_text="gamma shape a > 0 (scipy.stats.gamma a)",
    scale_text="gamma scale s > 0, unit of the lifetimes (mean = shape × scale)",
    fitted_scale=_scale_for_shape,
    log_pdf=_log_pdf,
    log_sf=_log_sf,
)

