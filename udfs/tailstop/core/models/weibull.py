"""Weibull lifetimes: P(X > c) = exp(-(c/η)^β), shape β > 0, scale η > 0.

Parameterised as ``scipy.stats.weibull_min(c=β, scale=η)``. Everything is
written in the cumulative hazard at the threshold, u = (c/η)^β, computed from
its log w = β log(c/η):

* log p = -u exactly, log(1 - p) = log(1 - e^{-u}) without cancellation
  (``log1mexp``), so both tails keep their digits from p = 1e-300 to
  p = 1 - 1e-15; the log-odds is log p - log(1 - p) = -log(e^u - 1).
* known shape: Y = X^β is exponential with mean θ = η^β, so θ̂ = mean(x^β)
  (η̂ = θ̂^{1/β}) and n·Var(log θ̂) = 1 (Fisher information 1/θ² per unit).
  ∂ log q/∂ log θ = u/(1 - p), hence σ² = u² / (1 - p)².
* fitted shape: log X = log η + W/β with W standard smallest-extreme-value,
  so (μ, b) = (log η, 1/β) is a location-scale pair with per-unit Fisher
  information b⁻² [[1, 1-γ], [1-γ, π²/6 + (1-γ)²]] (γ Euler's constant).
  log q depends on (μ, b) only through w = (log c - μ)/b, with
  ∂w/∂μ = -1/b, ∂w/∂b = -w/b, so the delta method gives
  σ² = u²/(1-p)² · [1, w] M⁻¹ [1, w]ᵀ = u²/(1-p)² · (1 + 6 (w - (1-γ))² / π²).
  (docs/method.md derives both.)

The shape ML solves h(β) = Σ x^β log x / Σ x^β - 1/β - mean(log x) = 0;
h is increasing (h' = the x^β-weighted variance of log x + 1/β²), so a
bracketed Newton iteration converges from the moment estimate
β₀ = π / (√6 · sd(log x)). ``running_shapes`` solves it for every prefix of
a log in O(n): see its docstring.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..probability import TailProbability
from .base import LifetimeModel, ModelFit, check_lifetimes, check_parameters, log_ratio
from .fit_check import SEED, anderson_darling, monte_carlo_pvalue

__all__ = [
    "MODEL", "EULER_GAMMA", "log1mexp", "log_cumulative_hazard", "tail_from_log_hazard",
    "tail_probability", "log_pdf", "log_sf", "sigma2_known_shape", "sigma2_fitted_shape",
    "sigma2_known_shape_w", "sigma2_fitted_shape_w", "fit", "fit_shape_rows", "scale_for_shape",
    "log_scale_for_shape", "ml_scale", "running_fit", "running_shapes", "statistics",
    "WeibullStatistics", "draw", "fit_pvalue",
]

EULER_GAMMA = 0.57721566490153286
_LOG2 = math.log(2.0)
TITLE = "Weibull"


def log1mexp(u):
    """log(1 - e^{-u}) for u >= 0, accurate for every u (Mächler 2012: expm1 below log 2, log1p above)."""
    u = np.asarray(u, dtype=float)
    with np.errstate(divide="ignore", over="ignore"):
        small = np.log(-np.expm1(-np.minimum(u, _LOG2)))
        large = np.log1p(-np.exp(-np.maximum(u, _LOG2)))
    return np.where(u < _LOG2, small, large)


def log_cumulative_hazard(threshold, shape, scale):
    """w = log u = β log(c/η), unchecked (-inf at c = 0)."""
    threshold, shape, scale = np.broadcast_arrays(
        np.asarray(threshold, dtype=float), np.asarray(shape, dtype=float), np.asarray(scale, dtype=float))
    return shape * log_ratio(threshold, scale)


def _log_hazard_standard(shape, t):
    shape, t = np.broadcast_arrays(np.asarray(shape, dtype=float), np.asarray(t, dtype=float))
    with np.errstate(divide="ignore"):
        return shape * np.log(t)


def tail_from_log_hazard(w) -> TailProbability:
    """P(X > c) from w = log (c/η)^β."""
    w = np.asarray(w, dtype=float)
    with np.errstate(over="ignore"):
        u = np.exp(w)
    log_p = -u
    return TailProbability(p=np.exp(log_p), log_p=log_p, log_cdf=log1mexp(u))


def tail_probability_standard(shape, t) -> TailProbability:
    """P(X > t) for a Weibull lifetime of scale 1, t = threshold / scale; unchecked."""
    return tail_from_log_hazard(_log_hazard_standard(shape, t))


def log_density_term(shape, t):
    """log of t·f(t) = β u e^{-u} at scale 1 (u = t^β): the density of log X at log t."""
    w = _log_hazard_standard(shape, t)
    with np.errstate(over="ignore"):
        return np.log(shape) + w - np.exp(w)


def tail_probability(threshold, shape, scale) -> TailProbability:
    """P(X > threshold) for a Weibull lifetime, vectorized; ValueError for parameters out of range."""
    threshold, shape, scale = check_parameters(threshold, shape, scale, TITLE)
    return tail_from_log_hazard(log_cumulative_hazard(threshold, shape, scale))


def log_pdf(x, shape, scale):
    """log f(x) = log(β/η) + (β-1) log(x/η) - (x/η)^β, unchecked."""
    x, shape, scale = np.broadcast_arrays(
        np.asarray(x, dtype=float), np.asarray(shape, dtype=float), np.asarray(scale, dtype=float))
    log_z = log_ratio(x, scale)
    with np.errstate(over="ignore"):
        return np.log(shape) - np.log(scale) + (shape - 1.0) * log_z - np.exp(shape * log_z)


def log_sf(x, shape, scale):
    """log P(X > x) = -(x/η)^β, unchecked."""
    with np.errstate(over="ignore"):
        return -np.exp(log_cumulative_hazard(x, shape, scale))


def _hazard_over_cdf(w):
    """u / (1 - p) = u / (1 - e^{-u}), computed in logs."""
    w = np.asarray(w, dtype=float)
    with np.errstate(over="ignore"):
        return np.exp(w - log1mexp(np.exp(w)))


def sigma2_known_shape_w(w):
    """σ² = u² / (1 - p)² of log q̂ with β known, from w = log u."""
    return _hazard_over_cdf(w) ** 2


def sigma2_fitted_shape_w(w):
    """σ² = u²/(1-p)² · (1 + 6 (w - (1-γ))² / π²) of log q̂ with β and η fitted, from w = log u."""
    w = np.asarray(w, dtype=float)
    return sigma2_known_shape_w(w) * (1.0 + 6.0 * (w - (1.0 - EULER_GAMMA)) ** 2 / math.pi ** 2)


def sigma2_known_shape(shape, t):
    """σ² = n·Var(log q̂) when β is known and η is estimated by ML (complete data); t = c/η."""
    return sigma2_known_shape_w(_log_hazard_standard(shape, t))


def sigma2_fitted_shape(shape, t):
    """σ² = n·Var(log q̂) when β and η are both estimated by ML (complete data); t = c/η."""
    return sigma2_fitted_shape_w(_log_hazard_standard(shape, t))


def score(shape, t):
    """The one number σ² depends on: w = β ln t (t = c/η)."""
    return _log_hazard_standard(shape, t)


SIGMA2_OF_SCORE = {"known-shape": sigma2_known_shape_w, "fitted-shape": sigma2_fitted_shape_w}


def sigma2_floor(method, low, high):
    """A lower bound of σ² over every score w in [low, high].

    u/(1-p) = u/(1 - e^{-u}) increases with w, and the fitted-shape factor
    1 + 6 (w - (1-γ))²/π² is at least its value at the point of [low, high]
    nearest 1 - γ; the product of the two minima bounds the product.
    """
    known = sigma2_known_shape_w(low)
    if method == "known-shape":
        return known
    nearest = np.clip(1.0 - EULER_GAMMA, low, high)
    return known * (1.0 + 6.0 * (nearest - (1.0 - EULER_GAMMA)) ** 2 / math.pi ** 2)


# --------------------------------------------------------------------------- maximum likelihood


def _shape_equation(beta, centred, mean_log, mask):
    """h(β) and h'(β) for rows of log-lifetimes centred at their maximum (so x^β <= 1)."""
    weights = np.exp(beta[:, None] * centred)
    if mask is not None:
        weights = weights * mask
    total = weights.sum(axis=-1)
    first = (weights * centred).sum(axis=-1) / total
    second = (weights * centred * centred).sum(axis=-1) / total
    return first - 1.0 / beta - mean_log, second - first * first + 1.0 / (beta * beta)


def fit_shape_rows(log_x, counts=None, *, tolerance=1e-14, iterations=200):
    """The Weibull ML shape of every row of log-lifetimes (location 0); NaN where a row's values are all equal.

    ``counts`` (optional, one per row) uses only the first ``counts[i]`` values of row i, so the
    prefixes of one log can be fitted at once. Bracketed Newton on h(β) = 0 from the moment
    estimate; each row stops on its own once its relative step is below ``tolerance``.
    """
    log_x = np.atleast_2d(np.asarray(log_x, dtype=float))
    mask = None
    if counts is not None:
        mask = np.arange(log_x.shape[-1]) < np.asarray(counts).reshape(-1, 1)
        log_x = np.where(mask, log_x, -np.inf)
    top = log_x.max(axis=-1, keepdims=True)
    centred = log_x - top
    if mask is not None:
        centred = np.where(mask, centred, 0.0)
        size = mask.sum(axis=-1)
        mean_log = centred.sum(axis=-1) / size
        spread = np.sqrt(np.where(mask, (centred - mean_log[:, None]) ** 2, 0.0).sum(axis=-1) / size)
        magnitude = np.where(mask, np.abs(np.where(mask, log_x, 0.0)), 0.0).max(axis=-1)
    else:
        mean_log = centred.mean(axis=-1)
        spread = centred.std(axis=-1)
        magnitude = np.abs(log_x).max(axis=-1)
    valid = spread > 1e-12 * np.maximum(1.0, magnitude)
    beta = np.where(valid, math.pi / (math.sqrt(6.0) * np.where(valid, spread, 1.0)), np.nan)
    low, high = np.zeros_like(beta), np.full_like(beta, np.inf)
    active = np.flatnonzero(valid)
    for _ in range(iterations):
        if active.size == 0:
            break
        current = beta[active]
        value, slope = _shape_equation(current, centred[active], mean_log[active],
                                       None if mask is None else mask[active])
        low[active] = np.where(value < 0, current, low[active])
        high[active] = np.where(value > 0, current, high[active])
        step = current - value / slope
        lo, hi = low[active], high[active]
        inside = (step > lo) & (step < hi)
        step = np.where(inside, step, np.where(np.isfinite(hi), 0.5 * (lo + hi), 2.0 * current))
        beta[active] = step
        active = active[(np.abs(step - current) > tolerance * current) & (value != 0)]
    return beta


def log_scale_for_shape(log_x, shape):
    """log η̂ = log (mean x^β)^{1/β}, the ML scale at a given shape, for rows of log-lifetimes."""
    log_x = np.atleast_2d(np.asarray(log_x, dtype=float))
    shape = np.asarray(shape, dtype=float).reshape(-1)
    top = log_x.max(axis=-1)
    mean_power = np.mean(np.exp(shape[:, None] * (log_x - top[:, None])), axis=-1)
    return top + np.log(mean_power) / shape


def ml_scale(observations, shape):
    """η̂ = (mean x^β)^{1/β}: the ML scale of positive lifetimes when the shape β is known."""
    x = check_lifetimes(observations, TITLE)
    if not (np.isfinite(shape) and shape > 0):
        raise ValueError("the Weibull shape must be a positive finite number")
    return float(np.exp(log_scale_for_shape(np.log(x), float(shape))[0]))


def fit(observations) -> ModelFit:
    """Weibull ML fit (location 0) of positive lifetimes; ValueError for fewer than 2 or all equal."""
    x = check_lifetimes(observations, TITLE)
    log_x = np.log(x)
    shape = float(fit_shape_rows(log_x)[0])
    if not np.isfinite(shape):
        raise ValueError("all lifetimes are equal (or nearly): the Weibull shape cannot be estimated")
    scale = float(np.exp(log_scale_for_shape(log_x, shape)[0]))
    return ModelFit(MODEL_NAME, shape, scale, x.size, float(np.sum(log_pdf(x, shape, scale))))


# --------------------------------------------------------------------------- every prefix at once

# Taylor terms of exp(δ ℓ) kept, and the largest |δ| · max|ℓ| they are used for: the
# remainder of each term is then below 2^25 / 25! · e² < 2e-17 of the term.
_TERMS = 24
_REACH = 2.0
_EXACT_BELOW = 256
_CHUNK = 1 << 15
# Simulated logs up to this length are fitted row-vectorized (``running_fit_rows``), longer ones row by row.
_ROWS_AT_ONCE_UP_TO = 2048


def _tilted_powers(ell, beta0, shift):
    """Rows k = 0 … _TERMS + 2 of e^{β₀ ℓ - shift} ℓ^k, one column per lifetime."""
    out = np.empty((_TERMS + 3, ell.size))
    out[0] = np.exp(beta0 * ell - shift)
    for k in range(1, _TERMS + 3):
        np.multiply(out[k - 1], ell, out=out[k])
    return out


def _expanded_sums(sums, delta, orders):
    """Σ x^β ℓ^j = Σ_k δ^k/k! S_{j+k} for each order j, every column at once."""
    powers = np.empty((_TERMS + 1, delta.size))
    powers[0] = 1.0
    for k in range(1, _TERMS + 1):
        np.multiply(powers[k - 1], delta * (1.0 / k), out=powers[k])
    return [np.einsum("kr,kr->r", sums[j:j + _TERMS + 1], powers) for j in orders]


def _solve_expanded(sums, beta0, mean_log, delta):
    """Newton for δ = β - β₀ on the expanded sums; returns δ and Σ x^β at it."""
    for _ in range(60):
        total, first, second = _expanded_sums(sums, delta, (0, 1, 2))
        first, second = first / total, second / total
        beta = beta0 + delta
        step = (first - 1.0 / beta - mean_log) / (second - first * first + 1.0 / (beta * beta))
        delta = delta - step
        if not np.any(np.abs(step) > 1e-14 * beta):
            break
    return delta, _expanded_sums(sums, delta, (0,))[0]


def running_fit(lifetimes):
    """The Weibull ML (shape β̂_n, log-scale log η̂_n) of every prefix x[:n] of a log, in O(n).

    NaN while all values so far are equal. Refitting every prefix is
    quadratic: Σ x^β has to be summed again at each prefix's own β. Instead,
    around an expansion point β₀ (with ℓ = log x, δ = β - β₀)

        Σ x^β ℓ^j = Σ_k δ^k / k! · S_{j+k},   S_m = Σ x^β₀ ℓ^m,

    and the S_m of every prefix are running sums. The series is cut after
    _TERMS terms and used only while |δ| · max|ℓ| <= _REACH (ℓ measured from
    the first lifetime), where the cut costs less than 2e-17 of each term;
    when a prefix's shape moves further from β₀, that prefix is fitted
    directly and becomes the new expansion point (its S_m summed afresh).
    The first _EXACT_BELOW prefixes are fitted directly
    (``fit_shape_rows``). Every prefix agrees with its direct fit to about
    1e-13 relative.
    """
    ell = np.log(np.asarray(lifetimes, dtype=float).ravel())
    size = ell.size
    shapes, log_scales = np.full(size, np.nan), np.full(size, np.nan)
    if size == 0:
        return shapes, log_scales
    origin = ell[0]
    ell = ell - origin
    count = np.arange(1, size + 1)
    mean_log = np.cumsum(ell) / count
    reach = np.maximum.accumulate(np.abs(ell))
    top = np.maximum.accumulate(ell)

    def direct(n):
        shapes[n - 1] = fit_shape_rows(ell[:n])[0]
        if np.isfinite(shapes[n - 1]):
            log_scales[n - 1] = origin + log_scale_for_shape(ell[:n], shapes[n - 1])[0]

    start = min(size, _EXACT_BELOW)
    if start >= 2:  # the first prefixes fitted directly, all at once
        counts = np.arange(2, start + 1)
        block = np.broadcast_to(ell[:start], (counts.size, start))
        first = fit_shape_rows(block, counts)
        shapes[1:start] = first
        mask = np.arange(start) < counts[:, None]
        tilted = np.where(mask, first[:, None] * (block - top[counts - 1, None]), -np.inf)
        with np.errstate(invalid="ignore", divide="ignore"):
            log_mean = np.log(np.exp(tilted).sum(axis=-1) / counts)
            log_scales[1:start] = origin + top[counts - 1] + log_mean / first
    row, fresh = start, True
    while row < size:
        if fresh:
            beta0 = shapes[row - 1] if np.isfinite(shapes[row - 1]) else 1.0
            shift = beta0 * top[row - 1]
            carried = _tilted_powers(ell[:row], beta0, shift).sum(axis=1)
            delta0, fresh = 0.0, False
        end = min(size, row + _CHUNK)
        new_shift = beta0 * top[end - 1]
        carried *= math.exp(shift - new_shift)
        shift = new_shift
        sums = np.cumsum(_tilted_powers(ell[row:end], beta0, shift), axis=1)
        sums += carried[:, None]
        with np.errstate(all="ignore"):
            delta, total = _solve_expanded(sums, beta0, mean_log[row:end], np.full(end - row, delta0))
            beta = beta0 + delta
            log_scale = origin + (np.log(total) + shift - np.log(count[row:end])) / beta
        outside = ~(np.abs(delta) * reach[row:end] <= _REACH)
        accepted = int(np.argmax(outside)) if outside.any() else end - row
        shapes[row:row + accepted] = beta[:accepted]
        log_scales[row:row + accepted] = log_scale[:accepted]
        if accepted < end - row:
            row += accepted + 1
            direct(row)
            fresh = True
            continue
        carried = sums[:, -1].copy()
        delta0 = delta[-1]
        row = end
    return shapes, log_scales


def running_fit_rows(lifetimes, *, tolerance=1e-13, iterations=12):
    """``running_fit`` of every row of a 2-D array of lifetimes (simulated logs), vectorized over the rows.

    Prefix n's shape is solved by Newton's method started from prefix n - 1's, all rows at
    once; a row whose step does not settle within ``iterations`` (or that has no shape yet) is
    fitted directly (``fit_shape_rows``, bracketed). Cost O(rows · n²) in numpy, which suits
    the short logs of a planning simulation; ``running_fit`` is the O(n) way for one long log.
    """
    log_x = np.log(np.asarray(lifetimes, dtype=float))
    rows, width = log_x.shape
    shapes, log_scales = np.full((rows, width), np.nan), np.full((rows, width), np.nan)
    beta = np.full(rows, np.nan)
    top = np.maximum.accumulate(log_x, axis=1)
    for n in range(2, width + 1):
        centred = log_x[:, :n] - top[:, n - 1:n]
        mean_log = centred.mean(axis=1)
        current = beta.copy()
        settled = np.zeros(rows, dtype=bool)
        start = np.isfinite(current)
        with np.errstate(all="ignore"):
            for _ in range(iterations if n > 2 else 0):
                value, slope = _shape_equation(np.where(start, current, 1.0), centred, mean_log, None)
                step = value / slope
                current = current - step
                settled = start & np.isfinite(current) & (current > 0) & (np.abs(step) <= tolerance * current)
                if settled[start].all():
                    break
        redo = np.flatnonzero(~settled)
        if redo.size:
            current[redo] = fit_shape_rows(log_x[redo, :n])
        beta = current
        shapes[:, n - 1] = beta
        with np.errstate(all="ignore"):
            log_scales[:, n - 1] = top[:, n - 1] + np.log(np.mean(np.exp(beta[:, None] * centred), axis=1)) / beta
    return shapes, log_scales


def running_shapes(lifetimes):
    """The Weibull ML shape of every prefix of a log (``running_fit``'s first half)."""
    return running_fit(lifetimes)[0]


# --------------------------------------------------------------------------- statistics for the methods


@dataclass(frozen=True)
class WeibullStatistics:
    """What the Weibull estimators need from a sample or from every prefix (arrays alike).

    Attributes
    ----------
    known_log_scale : ndarray or None
        log η̂ at the given shape (known-shape), None when no shape was given.
    fitted_shape, fitted_log_scale : ndarray or None
        The ML (β̂, log η̂) (fitted-shape), None when not asked for; NaN while all values are equal.
    """

    known_log_scale: np.ndarray | None
    fitted_shape: np.ndarray | None
    fitted_log_scale: np.ndarray | None


def statistics(observations, method, shape=None, *, running=False) -> WeibullStatistics:
    """The statistics ``method`` needs, of one sample or (``running``) of every prefix along the last axis."""
    x = np.asarray(observations, dtype=float)
    log_x = np.log(x)
    known = fitted = fitted_scale = None
    if method == "known-shape":
        tilted = float(shape) * log_x
        if running:
            count = np.arange(1, x.shape[-1] + 1)
            known = (_running_log_sum(tilted) - np.log(count)) / float(shape)
        else:
            known = np.asarray(log_scale_for_shape(log_x.reshape(1, -1), float(shape))[0])
    elif method == "fitted-shape":
        if running and x.ndim == 2 and x.shape[-1] <= _ROWS_AT_ONCE_UP_TO:
            fitted, fitted_scale = running_fit_rows(x)
        elif running:
            rows = log_x.reshape(-1, x.shape[-1]) if x.ndim else log_x.reshape(1, 1)
            pairs = [running_fit(np.exp(row)) for row in rows]
            fitted = np.array([p[0] for p in pairs]).reshape(x.shape)
            fitted_scale = np.array([p[1] for p in pairs]).reshape(x.shape)
        else:
            fitted = np.asarray(fit_shape_rows(log_x.reshape(1, -1))[0])
            fitted_scale = np.asarray(log_scale_for_shape(log_x.reshape(1, -1), fitted)[0]
                                      if np.isfinite(fitted) else np.nan)
    return WeibullStatistics(known, fitted, fitted_scale)


def _running_log_sum(values, chunk=1 << 16):
    """log Σ_{i<=n} e^{v_i} for every n along the last axis, in chunks, each scaled by its running maximum."""
    values = np.asarray(values, dtype=float)
    out = np.empty_like(values)
    shift = np.full(values.shape[:-1] + (1,), -np.inf)
    carried = np.zeros(values.shape[:-1] + (1,))
    for start in range(0, values.shape[-1], chunk):
        part = values[..., start:start + chunk]
        new_shift = np.maximum(shift, part.max(axis=-1, keepdims=True))
        with np.errstate(invalid="ignore"):
            carried = carried * np.exp(np.where(np.isfinite(shift), shift - new_shift, 0.0))
        sums = np.cumsum(np.exp(part - new_shift), axis=-1) + carried
        out[..., start:start + chunk] = np.log(sums) + new_shift
        shift, carried = new_shift, sums[..., -1:]
    return out


def _scale_for_shape(sufficient, shape):
    return np.exp(sufficient.model_statistics.known_log_scale)


def _fitted_shape(sufficient):
    return sufficient.model_statistics.fitted_shape


def _fitted_scale(sufficient, shape):
    return np.exp(sufficient.model_statistics.fitted_log_scale)


# --------------------------------------------------------------------------- draws and fit check


def draw(rng, shape, scale, size):
    """Weibull lifetimes from a numpy Generator."""
    return scale * rng.weibull(shape, size)


def _anderson_darling_rows(samples, axis=-1):
    """A² of each sample against the Weibull fitted to it (location 0)."""
    x = np.sort(np.moveaxis(np.asarray(samples, dtype=float), axis, -1), axis=-1)
    log_x = np.log(x.reshape(-1, x.shape[-1]))
    beta = fit_shape_rows(log_x)
    w = beta[:, None] * (log_x - log_scale_for_shape(log_x, beta)[:, None])
    with np.errstate(over="ignore"):
        u = np.exp(w)
    return anderson_darling(log1mexp(u), -u).reshape(x.shape[:-1])


def fit_pvalue(observations, *, samples=999, seed=SEED) -> float:
    """Goodness-of-fit p-value of a Weibull model with estimated shape and scale (location 0).

    Monte Carlo Anderson–Darling test, the test of
    ``scipy.stats.goodness_of_fit(stats.weibull_min, x, known_params={"loc": 0},
    statistic="ad")`` with every simulated sample refitted by the vectorized
    ML of this module; seeded, resolution about 1/(samples + 1).
    """
    fitted = fit(observations)
    x = np.asarray(observations, dtype=float).ravel()
    return monte_carlo_pvalue(
        x, lambda size, rng: draw(rng, fitted.shape, fitted.scale, size), _anderson_darling_rows,
        samples=samples, seed=seed)


MODEL_NAME = "weibull"
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
    shape_text="Weibull shape β > 0 (scipy.stats.weibull_min c)",
    scale_text="Weibull scale η > 0, unit of the lifetimes (63.2 % have failed by η)",
    fitted_scale=_fitted_scale,
    statistics=statistics,
    log_pdf=log_pdf,
    log_sf=log_sf,
    score=score,
    sigma2_of_score=SIGMA2_OF_SCORE,
    sigma2_floor=sigma2_floor,
)
