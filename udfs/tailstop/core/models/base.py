"""What a lifetime model provides to the methods, the rule and the simulations.

A model is a scale family with one shape parameter: every quantity depends on the data only
through the shape and t = threshold / scale, so the same estimators, stopping rule and planning
code serve every model. Parameterised as scipy.stats has it.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

__all__ = ["LifetimeModel", "ModelFit", "check_parameters", "check_lifetimes", "log_ratio"]


@dataclass(frozen=True)
class LifetimeModel:
    """One lifetime model (an entry of ``core.models.MODELS``).

    Attributes
    ----------
    name : str
        The name users type (``gamma``).
    tail_probability : callable
        ``(threshold, shape, scale) -> TailProbability``, validated, vectorized.
    tail_standard : callable
        ``(shape, t) -> TailProbability`` with t = threshold / scale, unchecked.
    log_density_term : callable
        ``(shape, t) -> log`` of the model's density term that the variances use.
    scale_for_shape : callable
        ``(statistics, shape) -> scale``: the ML scale with the shape given (known-shape).
    fitted_shape : callable
        ``(statistics) -> shape``: the ML shape (fitted-shape); NaN where it does not exist.
    sigma2_known_shape, sigma2_fitted_shape : callable
        ``(shape, t) -> σ²`` = n·Var(log q̂) of the two parametric estimators (METHOD.md §3).
    fit : callable
        ``(observations) -> fit`` with ``shape``, ``scale`` and ``n``; ValueError if none exists.
    fit_pvalue : callable
        ``(observations, *, samples, seed) -> p-value`` of the goodness-of-fit test.
    draw : callable
        ``(rng, shape, scale, size) -> lifetimes``: simulation with a numpy Generator.
    title : str
        The name in running text (``Weibull``).
    shape_text, scale_text : str
        What the shape and the scale are, for help texts and messages.
    fitted_scale : callable
        ``(statistics, fitted shape) -> scale``: the ML scale beside the ML shape (fitted-shape).
    statistics : callable or None
        ``(observations, method, shape, *, running) -> object`` kept in
        ``SufficientStatistics.model_statistics``: what the estimators of a model need beyond
        Σx, Σlog x and the exceedances (None: nothing more).
    log_pdf, log_sf : callable
        ``(x, shape, scale) -> log f(x), log P(X > x)``, unchecked, vectorized.
    score, sigma2_of_score, sigma2_floor : callable, dict, callable or None
        Where σ² of both parametric methods depends on (shape, t) only through one number
        ``score(shape, t)`` (Weibull w = β ln t, lognormal z = ln t / σ): σ² =
        ``sigma2_of_score[method](score)``, and ``sigma2_floor(method, low, high)`` is a lower
        bound of σ² over a range of scores (the decision column's screen).
    """

    name: str
    tail_probability: Callable
    tail_standard: Callable
    log_density_term: Callable
    scale_for_shape: Callable
    fitted_shape: Callable
    sigma2_known_shape: Callable
    sigma2_fitted_shape: Callable
    fit: Callable
    fit_pvalue: Callable
    draw: Callable
    title: str = ""
    shape_text: str = ""
    scale_text: str = ""
    fitted_scale: Callable | None = None
    statistics: Callable | None = None
    log_pdf: Callable | None = None
    log_sf: Callable | None = None
    score: Callable | None = None
    sigma2_of_score: dict | None = None
    sigma2_floor: Callable | None = None


@dataclass(frozen=True)
class ModelFit:
    """Maximum likelihood fit of a lifetime model (location 0).

    Attributes
    ----------
    model : str
    shape, scale : float
        The ML estimates, in the model's own parameterisation (as scipy.stats).
    n : int
        Number of lifetimes.
    log_likelihood : float
        Σ log f(x_i) at the estimates.
    """

    model: str
    shape: float
    scale: float
    n: int
    log_likelihood: float

    @property
    def aic(self) -> float:
        """Akaike's information criterion, 2·2 - 2 log L (two parameters)."""
        return 4.0 - 2.0 * self.log_likelihood


def check_parameters(threshold, shape, scale, title):
    """Broadcast and check (threshold >= 0, shape > 0, scale > 0); ValueError naming the parameter."""
    threshold, shape, scale = np.broadcast_arrays(
        np.asarray(threshold, dtype=float), np.asarray(shape, dtype=float), np.asarray(scale, dtype=float))
    for values, name in ((shape, "shape"), (scale, "scale")):
        if not np.all(np.isfinite(values) & (values > 0)):
            raise ValueError(f"the {title} {name} must be a positive finite number")
    if not np.all(np.isfinite(threshold) & (threshold >= 0)):
        raise ValueError("threshold must be a finite number >= 0")
    return threshold, shape, scale


def log_ratio(threshold, scale):
    """log(threshold / scale), also when the quotient overflows or underflows (-inf at 0)."""
    with np.errstate(divide="ignore", over="ignore", under="ignore"):
        ratio = threshold / scale
        direct = np.log(ratio)
        safe = (ratio > 1e-300) & np.isfinite(ratio)
        return np.where(safe | (threshold == 0), direct, np.log(threshold) - np.log(scale))


def check_lifetimes(observations, title):
    """Positive finite lifetimes, at least 2, as a flat float array; ValueError otherwise."""
    x = np.asarray(observations, dtype=float).ravel()
    if x.size < 2:
        raise ValueError(f"the {title} fit needs at least 2 observations")
    if not np.all(np.isfinite(x) & (x > 0)):
        raise ValueError(f"the {title} fit needs positive finite lifetimes")
    return x
