"""Gamma maximum likelihood from a log with suspended units (right censoring).

A failure at x contributes the density, a unit suspended at t (not failed at
t) the survival function, so with r failures (Σx = X, Σlog x = L) and
suspension times t_j, in the shape a and the log-scale u = log s,

    ℓ(a, u) = (a - 1) L - X e^{-u} - r a u - r log Γ(a) + Σ_j log Q(a, t_j e^{-u}).

Scale. With z_j = t_j e^{-u} and h_j = z_j^a e^{-z_j} / (Γ(a) Q(a, z_j)) (the
hazard of log X at log t_j),

    ∂ℓ/∂u = X e^{-u} - r a + Σ_j h_j,
    -∂²ℓ/∂u² = X e^{-u} + Σ_j h_j (a - z_j + h_j)   (> 0).

log X has a log-concave density, so h_j increases with z_j and the score
decreases in u: for a known shape the scale solves one monotone equation,
with a root whenever r >= 1 (Newton, steps kept to 1 in u). Without
suspensions the root is ŝ = X/(r a), the complete-data estimate.

Shape. With the shape free, a damped Newton iteration in (α = log a, u)
with step halving finds the maximum, from the complete-data shape of the
failures; the shape derivatives of log Q(a, z) and of h come from central
differences at a(1 ± δ), everything else is analytic.

Variance. The observed information J of (α, u) at the estimate (the same
derivatives) and the gradient g of
the log-odds of p = Q(a, c/s) give Var(log q̂) = gᵀ J⁻¹ g, and σ̂² = n gᵀ J⁻¹ g
with n all the units, failed and suspended. Without suspensions J is n times
the expected information at the estimate (gamma is an exponential family),
so σ̂² is the complete-data σ² of the known-shape and fitted-shape methods.

Everything is vectorized over many logs at once (the prefixes of one log);
a row whose estimate does not exist comes back NaN.
"""
from __future__ import annotations

import numpy as np
from scipy import special

from ..newton import damped_newton_step
from .tail import log_density_term, tail_probability_standard
from .variance import density_over_variance, log_odds_shape_derivative

__all__ = ["fit_known_shape", "fit_shape_and_scale", "sigma2_known_shape", "sigma2_fitted_shape",
           "log_likelihood"]

_SHAPE_RANGE = (1e-3, 1e4)
_SCALE_TOLERANCE = 1e-13
_SHAPE_TOLERANCE = 1e-10


def _suspension_terms(shape, log_scale, times, weights):
    """(log Q, h, h (a - z + h)) per suspension time, times its weight (its count of units)."""
    mask = weights > 0
    a = np.asarray(shape, dtype=float)[..., None]
    z = np.where(mask, times, 1.0) * np.exp(-np.asarray(log_scale, dtype=float))[..., None]
    log_q = tail_probability_standard(a, z).log_p
    with np.errstate(over="ignore", invalid="ignore"):
        h = np.exp(log_density_term(a, z) - log_q)
        curvature = h * (a - z + h)
    return tuple(np.where(mask, weights * term, 0.0) for term in (log_q, h, curvature))


def log_likelihood(failures, suspensions, shape, log_scale):
    """ℓ(a, u) for each row. ``failures`` = (r, X, L); ``suspensions`` = (times, weights)."""
    r, total, log_total = failures
    times, weights = suspensions
    a = np.asarray(shape, dtype=float)
    log_q, _, _ = _suspension_terms(a, log_scale, times, weights)
    return ((a - 1.0) * log_total - total * np.exp(-log_scale) - r * a * log_scale
            - r * special.gammaln(a) + log_q.sum(axis=-1))


def _scale_score(failures, suspensions, shape, log_scale):
    r, total, _ = failures
    times, weights = suspensions
    _, h, curvature = _suspension_terms(shape, log_scale, times, weights)
    ratio = total * np.exp(-log_scale)
    return ratio - r * shape + h.sum(axis=-1), ratio + curvature.sum(axis=-1)


def fit_known_shape(failures, suspensions, shape, start=None, iterations=60):
    """û = log ŝ for a known shape (NaN where there is no failure); ``start`` a first guess of û."""
    r, total, _ = failures
    times, weights = suspensions
    shape = np.broadcast_to(np.asarray(shape, dtype=float), np.shape(r)).copy()
    with np.errstate(divide="ignore", invalid="ignore"):
        if start is None:
            exposure = total + np.where(weights > 0, weights * times, 0.0).sum(axis=-1)
            u = np.log(exposure / (r * shape))
        else:
            u = np.array(np.broadcast_to(start, np.shape(r)), dtype=float)
    active = np.isfinite(u) & (r > 0)
    u = np.where(active, u, np.nan)
    for _ in range(iterations):
        if not active.any():
            break
        index = np.flatnonzero(active)
        sub_failures = tuple(np.asarray(f)[index] for f in failures)
        sub_suspensions = (times[index], weights[index])
        score, information = _scale_score(sub_failures, sub_suspensions, shape[index], u[index])
        step = np.clip(score / information, -1.0, 1.0)
        u[index] += step
        active[index] = np.abs(step) > _SCALE_TOLERANCE * np.maximum(1.0, np.abs(u[index]))
    return u


def _derivatives(failures, suspensions, log_shape, log_scale, relative_step=1e-4):
    """ℓ, its gradient and Hessian in (α, u) = (log a, log s), per row.

    The shape derivatives of log Q(a, z) and of h come from central
    differences at a(1 ± δ); everything else is analytic.
    """
    r, total, log_total = failures
    times, weights = suspensions
    a = np.exp(log_shape)
    step = relative_step * a
    log_q, h, curvature = _suspension_terms(a, log_scale, times, weights)
    log_q_up, h_up, _ = _suspension_terms(a + step, log_scale, times, weights)
    log_q_down, h_down, _ = _suspension_terms(a - step, log_scale, times, weights)
    ratio = total * np.exp(-log_scale)
    width = step[..., None]
    d_a = ((log_q_up - log_q_down) / (2 * width)).sum(axis=-1)
    d_aa = ((log_q_up - 2 * log_q + log_q_down) / (width * width)).sum(axis=-1)
    d_au = ((h_up - h_down) / (2 * width)).sum(axis=-1)
    value = ((a - 1.0) * log_total - ratio - r * a * log_scale - r * special.gammaln(a) + log_q.sum(axis=-1))
    score_a = log_total - r * log_scale - r * special.digamma(a) + d_a
    gradient = (a * score_a, ratio - r * a + h.sum(axis=-1))
    hessian = (a * a * (d_aa - r * special.polygamma(1, a)) + a * score_a,
               a * (d_au - r),
               -ratio - curvature.sum(axis=-1))
    return value, gradient, hessian


def fit_shape_and_scale(failures, suspensions, start_shape, iterations=100):
    """(â, û) by ML from a first guess of the shape (1 where NaN), by damped Newton in (log a, log s).

    NaN where the estimate does not exist: fewer than 2 failures, no
    convergence, or a shape running out of the range (1e-3, 1e4).
    """
    r = np.asarray(failures[0], dtype=float)
    start = np.where(np.isfinite(start_shape), np.clip(start_shape, *_SHAPE_RANGE), 1.0)
    alpha = np.log(np.broadcast_to(start, r.shape)).astype(float)
    u = fit_known_shape(failures, suspensions, np.exp(alpha))
    active = (r >= 2) & np.isfinite(u)
    converged = np.zeros(r.shape, dtype=bool)
    edges = np.log(_SHAPE_RANGE)
    for _ in range(iterations):
        index = np.flatnonzero(active)
        if index.size == 0:
            break
        sub_f = tuple(np.asarray(f)[index] for f in failures)
        sub_s = (suspensions[0][index], suspensions[1][index])
        value, gradient, hessian = _derivatives(sub_f, sub_s, alpha[index], u[index])
        step_a, step_u = damped_newton_step(gradient, hessian, (0.5, 1.0))
        for _halving in range(30):
            trial_a = np.clip(alpha[index] + step_a, *edges)
            trial = log_likelihood(sub_f, sub_s, np.exp(trial_a), u[index] + step_u)
            worse = ~(trial >= value - 1e-12 * np.abs(value))
            if not worse.any():
                break
            step_a, step_u = np.where(worse, 0.5 * step_a, step_a), np.where(worse, 0.5 * step_u, step_u)
        alpha[index] = np.clip(alpha[index] + step_a, *edges)
        u[index] = u[index] + step_u
        done = (np.abs(step_a) < _SHAPE_TOLERANCE) & (np.abs(step_u) < _SHAPE_TOLERANCE * np.maximum(1, np.abs(u[index])))
        converged[index[done]] = True
        active[index[done]] = False
    exists = converged & (alpha > edges[0] + 1e-6) & (alpha < edges[1] - 1e-6)
    return np.where(exists, np.exp(alpha), np.nan), np.where(exists, u, np.nan)


def sigma2_known_shape(failures, suspensions, shape, log_scale, threshold, units):
    """σ̂² = n v² / J_uu for a known shape (v the scale sensitivity of the log-odds)."""
    _, information = _scale_score(failures, suspensions, shape, log_scale)
    v = density_over_variance(shape, threshold * np.exp(-log_scale))
    return units * v * v / information


def sigma2_fitted_shape(failures, suspensions, shape, log_scale, threshold, units):
    """σ̂² = n gᵀ J⁻¹ g over (α, u) = (log a, log s) at the joint estimate."""
    _, _, (h_aa, h_au, h_uu) = _derivatives(failures, suspensions, np.log(shape), log_scale)
    t = threshold * np.exp(-log_scale)
    g_u = density_over_variance(shape, t)  # ∂ log q/∂u: a larger scale gives a larger p
    g_a = shape * log_odds_shape_derivative(shape, t)
    determinant = h_aa * h_uu - h_au * h_au
    quadratic = -(g_a * g_a * h_uu - 2 * g_a * g_u * h_au + g_u * g_u * h_aa) / determinant
    return units * quadratic


# --------------------------------------------------------------------------- planning: every unit stopped at T


def expected_information(shape, tau, relative_step=1e-4):
    """Per-unit expected information of (a, u) when each unit is stopped at T (τ = T/s); (I_aa, I_au, I_uu).

    A unit fails before T with probability P(a, τ) and adds the complete-data
    information of its failure; otherwise it adds minus the second derivatives
    of log Q(a, τ e^{-u}). With φ = τ^a e^{-τ}/Γ(a) and E[Z; Z <= τ] = a P(a+1, τ):

        I_uu = a P(a+1, τ) + φ (a - τ) + φ² / Q(a, τ)
        I_au = P(a, τ) - Q(a, τ) ∂h/∂a
        I_aa = P(a, τ) ψ'(a) - Q(a, τ) ∂² log Q/∂a²

    (shape derivatives by central differences). τ = ∞ gives the complete-data
    information [[ψ'(a), 1], [1, a]].
    """
    a, tau = np.broadcast_arrays(np.asarray(shape, dtype=float), np.asarray(tau, dtype=float))
    lower = special.gammainc(a, tau)
    tail = tail_probability_standard(a, tau)
    upper = tail.p
    finite = np.isfinite(tau) & (upper > 0)
    safe_tau = np.where(finite, tau, 1.0)
    step = relative_step * a
    log_q = tail_probability_standard(a, safe_tau).log_p
    log_q_up = tail_probability_standard(a + step, safe_tau).log_p
    log_q_down = tail_probability_standard(a - step, safe_tau).log_p
    with np.errstate(over="ignore", invalid="ignore"):
        phi = np.exp(log_density_term(a, safe_tau))
        hazard_up = np.exp(log_density_term(a + step, safe_tau) - log_q_up)
        hazard_down = np.exp(log_density_term(a - step, safe_tau) - log_q_down)
        censored_uu = phi * (a - safe_tau) + phi * np.exp(log_density_term(a, safe_tau) - log_q)
        censored_au = -upper * (hazard_up - hazard_down) / (2 * step)
        censored_aa = -upper * (log_q_up - 2 * log_q + log_q_down) / (step * step)
    i_uu = a * special.gammainc(a + 1.0, tau) + np.where(finite, censored_uu, 0.0)
    i_au = lower + np.where(finite, censored_au, 0.0)
    i_aa = lower * special.polygamma(1, a) + np.where(finite, censored_aa, 0.0)
    return i_aa, i_au, i_uu


def planning_sigma2_known_shape(shape, t, tau):
    """σ² of the known-shape log-odds when every unit is stopped at τ = T/s (t = c/s)."""
    _, _, i_uu = expected_information(shape, tau)
    return density_over_variance(shape, t) ** 2 / i_uu


def planning_sigma2_fitted_shape(shape, t, tau):
    """σ² of the fitted-shape log-odds when every unit is stopped at τ = T/s (t = c/s)."""
    i_aa, i_au, i_uu = expected_information(shape, tau)
    g_a = log_odds_shape_derivative(shape, t)
    g_u = density_over_variance(shape, t)
    return (g_a * g_a * i_uu - 2 * g_a * g_u * i_au + g_u * g_u * i_aa) / (i_aa * i_uu - i_au * i_au)
