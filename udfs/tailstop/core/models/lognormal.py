"""Lognormal lifetimes: log X ~ Normal(μ, σ²), shape σ > 0, scale = the median e^μ > 0.

Parameterised as ``scipy.stats.lognorm(s=σ, scale=e^μ)``. With the standard
score z = log(c / e^μ) / σ of the threshold:

* p = Φ(-z), log p = log Φ(-z) and log(1 - p) = log Φ(z) by
  ``scipy.special.log_ndtr``, accurate in both tails;
* writing h = φ(z) / (p (1 - p)) (∂ log q/∂z = -h):
  known shape (σ given): μ̂ = mean(log x), n·Var(μ̂) = σ², ∂z/∂μ = -1/σ,
  so σ² of log q̂ is h²;
  fitted shape: (μ̂, σ̂) the ML (σ̂² with divisor n), Fisher information
  diag(1/σ², 2/σ²) per unit, ∂z/∂σ = -z/σ, so σ² = h² (1 + z²/2).
  (docs/method.md derives both.)
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import special

from ..probability import TailProbability
from .base import LifetimeModel, ModelFit, check_lifetimes, check_parameters, log_ratio
from .fit_check import SEED, anderson_darling, monte_carlo_pvalue

__all__ = [
    "MODEL", "standard_score", "tail_from_score", "tail_probability", "log_pdf", "log_sf",
    "sigma2_known_shape", "sigma2_fitted_shape", "sigma2_known_shape_z", "sigma2_fitted_shape_z",
    "fit", "ml_scale", "statistics", "LognormalStatistics", "draw", "fit_pvalue",
]

TITLE = "lognormal"
_LOG_SQRT_2PI = 0.5 * math.log(2.0 * math.pi)


def standard_score(threshold, shape, scale):
    """z = log(c / median) / σ, unchecked (-inf at c = 0)."""
    threshold, shape, scale = np.broadcast_arrays(
        np.asarray(threshold, dtype=float), np.asarray(shape, dtype=float), np.asarray(scale, dtype=float))
    return log_ratio(threshold, scale) / shape


def tail_from_score(z) -> TailProbability:
    """p = Φ(-z) with log p = log Φ(-z), log(1 - p) = log Φ(z)."""
    z = np.asarray(z, dtype=float)
    log_p = special.log_ndtr(-z)
    return TailProbability(p=np.exp(log_p), log_p=log_p, log_cdf=special.log_ndtr(z))


def _score_standard(shape, t):
    shape, t = np.broadcast_arrays(np.asarray(shape, dtype=float), np.asarray(t, dtype=float))
    with np.errstate(divide="ignore"):
        return np.log(t) / shape


def tail_probability_standard(shape, t) -> TailProbability:
    """P(X > t) for a lognormal lifetime of median 1, t = threshold / median; unchecked."""
    return tail_from_score(_score_standard(shape, t))


def log_density_term(shape, t):
    """log of t·f(t) = φ(z)/σ at median 1 (z = log t / σ): the density of log X at log t."""
    z = _score_standard(shape, t)
    return -0.5 * z * z - _LOG_SQRT_2PI - np.log(shape)


def tail_probability(threshold, shape, scale) -> TailProbability:
    """P(X > threshold) for a lognormal lifetime, vectorized; ValueError for parameters out of range."""
    threshold, shape, scale = check_parameters(threshold, shape, scale, TITLE)
    return tail_from_score(standard_score(threshold, shape, scale))


def log_pdf(x, shape, scale):
    """log f(x) = -z²/2 - log(σ x √(2π)), z = log(x / median)/σ, unchecked."""
    z = standard_score(x, shape, scale)
    return -0.5 * z * z - _LOG_SQRT_2PI - np.log(shape) - np.log(x)


def log_sf(x, shape, scale):
    """log P(X > x) = log Φ(-z), unchecked."""
    return special.log_ndtr(-standard_score(x, shape, scale))


def _sensitivity(z):
    """h = φ(z) / (p (1 - p)), computed in logs."""
    z = np.asarray(z, dtype=float)
    tail = tail_from_score(z)
    with np.errstate(over="ignore"):
        return np.exp(-0.5 * z * z - _LOG_SQRT_2PI - tail.log_p - tail.log_cdf)


def sigma2_known_shape_z(z):
    """σ² = h² of log q̂ with σ known, from the standard score z."""
    return _sensitivity(z) ** 2


def sigma2_fitted_shape_z(z):
    """σ² = h² (1 + z²/2) of log q̂ with μ and σ fitted, from the standard score z."""
    z = np.asarray(z, dtype=float)
    return sigma2_known_shape_z(z) * (1.0 + 0.5 * z * z)


def sigma2_known_shape(shape, t):
    """σ² = n·Var(log q̂) when σ is known and the median is estimated by ML (complete data); t = c/median."""
    return sigma2_known_shape_z(_score_standard(shape, t))


def sigma2_fitted_shape(shape, t):
    """σ² = n·Var(log q̂) when σ and the median are both estimated by ML (complete data); t = c/median."""
    return sigma2_fitted_shape_z(_score_standard(shape, t))


def score(shape, t):
    """The one number σ² depends on: z = ln t / σ (t = c / median)."""
    return _score_standard(shape, t)


SIGMA2_OF_SCORE = {"known-shape": sigma2_known_shape_z, "fitted-shape": sigma2_fitted_shape_z}


def sigma2_floor(method, low, high):
    """A lower bound of σ² over every score z in [low, high]: both h² and 1 + z²/2 grow with |z|."""
    nearest = np.clip(0.0, low, high)
    return SIGMA2_OF_SCORE[method](nearest)


def ml_scale(observations, shape=None):
    """The ML median e^{mean(log x)} (it does not depend on σ)."""
    x = check_lifetimes(observations, TITLE)
    return float(np.exp(np.mean(np.log(x))))


def fit(observations) -> ModelFit:
    """Lognormal ML fit (location 0): μ̂ = mean(log x), σ̂ = the root mean square of log x - μ̂."""
    x = check_lifetimes(observations, TITLE)
    log_x = np.log(x)
    mu = float(log_x.mean())
    sigma = float(np.sqrt(np.mean((log_x - mu) ** 2)))
    if not sigma > 1e-12 * max(1.0, abs(mu)):
        raise ValueError("all lifetimes are equal (or nearly): the lognormal shape cannot be estimated")
    scale = math.exp(mu)
    return ModelFit(MODEL_NAME, sigma, scale, x.size, float(np.sum(log_pdf(x, sigma, scale))))


@dataclass(frozen=True)
class LognormalStatistics:
    """mean(log x) and the ML standard deviation of log x (divisor n), of a sample or of every prefix.

    ``sd_log`` is None for the running statistics of known-shape (which needs the median only).
    """

    mean_log: np.ndarray
    sd_log: np.ndarray | None


def statistics(observations, method=None, shape=None, *, running=False) -> LognormalStatistics:
    """The lognormal statistics of one sample or (``running``) of every prefix along the last axis.

    Running sums are taken of log x minus the first value, so the variance
    keeps its digits; NaN standard deviation while all values are equal.
    """
    log_x = np.log(np.asarray(observations, dtype=float))
    if not running:
        mean = log_x.mean(axis=-1)
        sd = np.sqrt(np.mean((log_x - mean[..., None]) ** 2, axis=-1))
    else:
        origin = log_x[..., :1]
        centred = log_x - origin
        count = np.arange(1, log_x.shape[-1] + 1)
        mean_centred = np.cumsum(centred, axis=-1) / count
        mean = mean_centred + origin
        if method == "known-shape":  # the median is all known-shape needs
            return LognormalStatistics(mean, None)
        variance = np.maximum(np.cumsum(centred * centred, axis=-1) / count - mean_centred ** 2, 0.0)
        sd = np.sqrt(variance)
    equal = ~(sd > 1e-12 * np.maximum(1.0, np.abs(mean)))
    return LognormalStatistics(mean, np.where(equal, np.nan, sd))


def _scale_for_shape(sufficient, shape):
    return np.exp(sufficient.model_statistics.mean_log)


def _fitted_shape(sufficient):
    return sufficient.model_statistics.sd_log


def draw(rng, shape, scale, size):
    """Lognormal lifetimes from a numpy Generator."""
    return scale * np.exp(shape * rng.standard_normal(size))


def _anderson_darling_rows(samples, axis=-1):
    """A² of each sample against the lognormal fitted to it (location 0)."""
    x = np.sort(np.moveaxis(np.asarray(samples, dtype=float), axis, -1), axis=-1)
    log_x = np.log(x.reshape(-1, x.shape[-1]))
    z = (log_x - log_x.mean(axis=-1, keepdims=True)) / log_x.std(axis=-1, keepdims=True)
    return anderson_darling(special.log_ndtr(z), special.log_ndtr(-z)).reshape(x.shape[:-1])


def fit_pvalue(observations, *, samples=999, seed=SEED) -> float:
    """Goodness-of-fit p-value of a lognormal model with estimated shape and scale (location 0).

    Monte Carlo Anderson–Darling test, the test of
    ``scipy.stats.goodness_of_fit(stats.lognorm, x, known_params={"loc": 0},
    statistic="ad")``; seeded, resolution about 1/(samples + 1).
    """
    fitted = fit(observations)
    x = np.asarray(observations, dtype=float).ravel()
    return monte_carlo_pvalue(
        x, lambda size, rng: draw(rng, fitted.shape, fitted.scale, size), _anderson_darling_rows,
        samples=samples, seed=seed)


MODEL_NAME = "lognormal"
MODEL = LifetimeModel(
    name=MODEL_NAME,
    tail_probability=tail_probability,
    tail_standard=tail_probability_standard,
    log_density_term=log_density_term,
    scale_for_shape=_scale_for_shape,
    fitted_shape=_fitted_shape,
    sigma2_known_shape=sigma2_known_shape,
    sigma2_fitted_shape=sigma2_fitted_shape,
    fit=fit,
    fit_pvalue=fit_pvalue,
    draw=draw,
    title=TITLE,
    shape_text="lognormal shape σ > 0, the standard deviation of log X (scipy.stats.lognorm s)",
    scale_text="lognormal scale > 0, the median e^μ, unit of the lifetimes",
    fitted_scale=_scale_for_shape,
    statistics=statistics,
    log_pdf=log_pdf,
    log_sf=log_sf,
    score=score,
    sigma2_of_score=SIGMA2_OF_SCORE,
    sigma2_floor=sigma2_floor,
)
