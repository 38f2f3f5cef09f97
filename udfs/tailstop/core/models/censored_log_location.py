"""Weibull and lognormal maximum likelihood from a log with suspended units (right censoring).

Both models are log-location-scale families: Y = log X = μ + b Z with Z of a
fixed standard law, the smallest extreme value law for the Weibull
(μ = log η, b = 1/β) and the standard normal for the lognormal (μ = log of
the median, b = σ). With z = (y - μ)/b, a failure at y contributes
log g(z) - log b, a unit suspended at y contributes log Ḡ(z) (Ḡ = 1 - G the
survival function of Z); in (μ, α = log b), for a term T(z),

    ∂T/∂μ = -T'/b,  ∂T/∂α = -z T',
    ∂²T/∂μ² = T''/b²,  ∂²T/∂μ∂α = (z T'' + T')/b,  ∂²T/∂α² = z T' + z² T''.

Both standard laws have log-concave g and Ḡ, so the log-likelihood is
concave in μ for a known b: the known-shape estimate solves one monotone
equation, for the Weibull in closed form (``weibull_known_shape_prefixes``:
with β known, X^β is exponential and η̂^β = Σ t^β / r over every unit, failed
or suspended, r the failures, the total time on test in β-th powers over the
number of failures). With
both parameters free, a damped Newton iteration in (μ, α) with step halving
finds the maximum.

Variance: the observed information J = -∂²ℓ at the estimate and the gradient
of the log-odds of p = Ḡ(z_c), z_c = (log c - μ)/b,

    ∂ log q/∂μ = g(z_c) / (b G(z_c) Ḡ(z_c)),   ∂ log q/∂α = z_c b ∂ log q/∂μ,

give σ̂² = n gᵀ J⁻¹ g with n all the units. With β known the Weibull J_μμ is
β² r, so σ̂² = n (∂ log q/∂ log θ)² / r with θ = η^β.

Everything is vectorized over rows (the prefixes of one log): failures and
suspensions are given as matrices of log-times with weights (0 = absent).
"""
from __future__ import annotations

import numpy as np
from scipy import special

from .newton import damped_newton_step
from .weibull import log1mexp

__all__ = ["FAMILIES", "fit_known_shape", "fit_shape_and_scale", "sigma2_known_shape", "sigma2_fitted_shape",
           "log_likelihood"]

_LOG_SQRT_2PI = 0.5 * np.log(2.0 * np.pi)
_TOLERANCE = 1e-11


class _ExtremeValue:
    """Z = log of a standard exponential (the log of a Weibull lifetime, standardized)."""

    @staticmethod
    def density_terms(z):
        """log g, (log g)', (log g)''."""
        with np.errstate(over="ignore"):
            e = np.exp(z)
        return z - e, 1.0 - e, -e

    @staticmethod
    def survival_terms(z):
        """log Ḡ, (log Ḡ)', (log Ḡ)''."""
        with np.errstate(over="ignore"):
            e = np.exp(z)
        return -e, -e, -e

    @staticmethod
    def log_cdf(z):
        with np.errstate(over="ignore"):
            return log1mexp(np.exp(z))

    @staticmethod
    def shape_from_width(width):
        return 1.0 / width

    @staticmethod
    def width_from_shape(shape):
        return 1.0 / np.asarray(shape, dtype=float)


class _Normal:
    """Z standard normal (the log of a lognormal lifetime, standardized)."""

    @staticmethod
    def density_terms(z):
        return -0.5 * z * z - _LOG_SQRT_2PI, -z, -np.ones_like(z)

    @staticmethod
    def survival_terms(z):
        log_survival = special.log_ndtr(-z)
        with np.errstate(over="ignore"):
            h = np.exp(-0.5 * z * z - _LOG_SQRT_2PI - log_survival)
        return log_survival, -h, -h * (h - z)

    @staticmethod
    def log_cdf(z):
        return special.log_ndtr(z)

    @staticmethod
    def shape_from_width(width):
        return width

    @staticmethod
    def width_from_shape(shape):
        return np.asarray(shape, dtype=float)


FAMILIES = {"weibull": _ExtremeValue, "lognormal": _Normal}


def _terms(family, log_times, weights, location, log_width, which):
    """Weighted sums over the units of T, ∂T/∂μ, ∂T/∂α and the three second derivatives."""
    width = np.exp(log_width)[..., None]
    present = weights > 0
    z = np.where(present, (log_times - location[..., None]) / width, 0.0)
    value, first, second = (family.density_terms if which == "failure" else family.survival_terms)(z)
    if which == "failure":
        value = value - log_width[..., None]
    parts = (value, -first / width, -z * first - (1.0 if which == "failure" else 0.0),
             second / width ** 2, (z * second + first) / width, z * first + z * z * second)
    with np.errstate(invalid="ignore"):
        return tuple(np.where(present, weights * part, 0.0).sum(axis=-1) for part in parts)


def _derivatives(family, failures, suspensions, location, log_width):
    """ℓ, (∂ℓ/∂μ, ∂ℓ/∂α), (∂²ℓ/∂μ², ∂²ℓ/∂μ∂α, ∂²ℓ/∂α²) per row."""
    f = _terms(family, *failures, location, log_width, "failure")
    s = _terms(family, *suspensions, location, log_width, "suspension")
    total = [a + b for a, b in zip(f, s)]
    return total[0], (total[1], total[2]), (total[3], total[4], total[5])


def log_likelihood(family, failures, suspensions, location, log_width):
    """ℓ(μ, α) per row (without the constant -Σ log x over the failures)."""
    return _derivatives(family, failures, suspensions, location, log_width)[0]


def _start(failures, suspensions):
    """Mean and sd of every unit's log-time: a first guess of (μ, α)."""
    times = np.concatenate([failures[0], suspensions[0]], axis=-1)
    weights = np.concatenate([failures[1], suspensions[1]], axis=-1)
    count = np.maximum(weights.sum(axis=-1), 1.0)
    mean = np.where(weights > 0, weights * times, 0.0).sum(axis=-1) / count
    spread = np.where(weights > 0, weights * (times - mean[..., None]) ** 2, 0.0).sum(axis=-1) / count
    return mean, 0.5 * np.log(np.maximum(spread, 1e-6))


def fit_known_shape(family, failures, suspensions, shape, iterations=100):
    """μ̂ for a known shape; NaN where there is no failure."""
    r = failures[1].sum(axis=-1)
    log_width = np.log(np.broadcast_to(family.width_from_shape(shape), r.shape)).astype(float)
    location, _ = _start(failures, suspensions)
    active = r > 0
    for _ in range(iterations):
        if not active.any():
            break
        _, (score, _), (curvature, _, _) = _derivatives(family, failures, suspensions, location, log_width)
        step = np.where(active, np.clip(-score / curvature, -np.exp(log_width), np.exp(log_width)), 0.0)
        location = location + step
        active &= np.abs(step) > _TOLERANCE * np.maximum(1.0, np.abs(location))
    return np.where(r > 0, location, np.nan)


def weibull_known_shape_prefixes(times, suspended, prefixes, beta, threshold):
    """(log η̂, σ̂²) of the first n units for each n, from running sums: O(n) for the whole log.

    η̂^β = Σ t^β / r over the first n units (r failures), J_μμ = β² r at the
    estimate, and with w = (c/η̂)^β, ∂ log q/∂μ = β w/(1 - p), so
    σ̂² = n w² / ((1 - p)² r). NaN where there is no failure yet.
    """
    log_t = np.log(np.asarray(times, dtype=float))
    top = float(log_t.max()) if log_t.size else 0.0
    power_sums = np.cumsum(np.exp(beta * (log_t - top)))[prefixes - 1]
    r = np.cumsum(~np.asarray(suspended, dtype=bool))[prefixes - 1].astype(float)
    with np.errstate(divide="ignore", invalid="ignore"):
        location = (np.log(power_sums) + beta * top - np.log(r)) / beta
        log_w = beta * (np.log(threshold) - location)
        w = np.exp(log_w)
        sigma2 = prefixes * w * w / (np.expm1(-w) ** 2 * r)
    return np.where(r > 0, location, np.nan), np.where(r > 0, sigma2, np.nan)


def fit_shape_and_scale(family, failures, suspensions, iterations=200):
    """(μ̂, α̂) by damped Newton; NaN where fewer than 2 failures or no convergence."""
    r = failures[1].sum(axis=-1)
    location, log_width = _start(failures, suspensions)
    active = r >= 2
    converged = np.zeros(r.shape, dtype=bool)
    for _ in range(iterations):
        index = np.flatnonzero(active)
        if index.size == 0:
            break
        sub_f = (failures[0][index], failures[1][index])
        sub_s = (suspensions[0][index], suspensions[1][index])
        mu, alpha = location[index], log_width[index]
        value, gradient, hessian = _derivatives(family, sub_f, sub_s, mu, alpha)
        step_mu, step_alpha = damped_newton_step(gradient, hessian, (np.exp(alpha), 0.5))
        for _halving in range(40):
            trial = log_likelihood(family, sub_f, sub_s, mu + step_mu, alpha + step_alpha)
            worse = ~(trial >= value - 1e-12 * np.abs(value))
            if not worse.any():
                break
            step_mu = np.where(worse, 0.5 * step_mu, step_mu)
            step_alpha = np.where(worse, 0.5 * step_alpha, step_alpha)
        location[index] = mu + step_mu
        log_width[index] = alpha + step_alpha
        done = (np.abs(step_mu) < _TOLERANCE * np.exp(alpha)) & (np.abs(step_alpha) < _TOLERANCE)
        converged[index[done]] = True
        active[index[done]] = False
        active[index[~np.isfinite(location[index] + log_width[index])]] = False
    ok = converged & np.isfinite(location) & (np.abs(log_width) < 30)
    return np.where(ok, location, np.nan), np.where(ok, log_width, np.nan)


def _log_odds_gradient(family, location, log_width, threshold):
    """(∂ log q/∂μ, ∂ log q/∂α) at p = Ḡ((log c - μ)/b)."""
    width = np.exp(log_width)
    z = (np.log(threshold) - location) / width
    log_density, _, _ = family.density_terms(z)
    log_survival, _, _ = family.survival_terms(z)
    with np.errstate(over="ignore"):
        d_mu = np.exp(log_density - log_survival - family.log_cdf(z)) / width
    return d_mu, z * width * d_mu


def sigma2_known_shape(family, failures, suspensions, location, shape, threshold, units):
    """σ̂² = n (∂ log q/∂μ)² / J_μμ for a known shape."""
    log_width = np.log(np.broadcast_to(family.width_from_shape(shape), np.shape(location))).astype(float)
    _, _, (h_mm, _, _) = _derivatives(family, failures, suspensions, location, log_width)
    d_mu, _ = _log_odds_gradient(family, location, log_width, threshold)
    return units * d_mu * d_mu / -h_mm


def sigma2_fitted_shape(family, failures, suspensions, location, log_width, threshold, units):
    """σ̂² = n gᵀ J⁻¹ g over (μ, α) at the joint estimate."""
    _, _, (h_mm, h_ma, h_aa) = _derivatives(family, failures, suspensions, location, log_width)
    g_mu, g_alpha = _log_odds_gradient(family, location, log_width, threshold)
    determinant = h_mm * h_aa - h_ma * h_ma
    return -units * (g_mu * g_mu * h_aa - 2 * g_mu * g_alpha * h_ma + g_alpha * g_alpha * h_mm) / determinant
