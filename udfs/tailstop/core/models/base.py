"""What a lifetime model provides to the methods, the rule and the simulations.

A model is a scale family with one shape parameter: every quantity depends on the data only
through the shape and t = threshold / scale, so the same estimators, stopping rule and planning
code serve every model. Parameterised as scipy.stats has it.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

__all__ = ["LifetimeModel"]


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
