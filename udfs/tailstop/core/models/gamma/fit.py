"""Gamma maximum likelihood from the sufficient statistics, and the fit check.

The gamma ML needs only Σx and Σlog x: with ``s = log(mean x) - mean(log x)``
the shape solves ``log a - ψ(a) = s`` (monotone in a), and the scale is
``mean x / a``. The solver is vectorized so that a whole column of running
sums (every prefix of a test log) is solved at once.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special, stats

__all__ = [
    "GammaFit",
    "fit_gamma",
    "shape_from_log_ratio",
    "log_minus_digamma",
    "trigamma_excess",
    "gamma_fit_pvalue",
]

# Asymptotic series are used above this shape: log a - ψ(a) and a ψ'(a) - 1
# both lose digits to cancellation when a is large.
_SERIES_FROM = 20.0


def _by_branch(shape, direct, series):
    """Evaluate ``direct`` below _SERIES_FROM and ``series`` above, each only where it applies."""
    a = np.asarray(shape, dtype=float)
    flat = a.reshape(-1)
    out = np.empty_like(flat)
    big = flat >= _SERIES_FROM
    out[~big] = direct(flat[~big])
    out[big] = series(flat[big])
    return out.reshape(a.shape)


def _log_minus_digamma_series(a):
    inv = 1.0 / a
    inv2 = inv * inv
    return inv * (0.5 + inv * (1 / 12 + inv2 * (-1 / 120 + inv2 * (1 / 252 + inv2 * (-1 / 240 + inv2 / 132)))))


def _trigamma_excess_series(a):
    inv = 1.0 / a
    inv2 = inv * inv
    return inv * (0.5 + inv * (1 / 6 + inv2 * (-1 / 30 + inv2 * (1 / 42 + inv2 * (-1 / 30 + inv2 * 5 / 66)))))


def log_minus_digamma(shape):
    """log(a) - ψ(a), accurate also for large a (where it is about 1/(2a)).

    Above a = 20 the asymptotic series (Abramowitz & Stegun 6.3.18) replaces
    the difference, which would lose digits to cancellation.
    """
    return _by_branch(shape, lambda a: np.log(a) - special.digamma(a), _log_minus_digamma_series)


def trigamma_excess(shape):
    """a ψ'(a) - 1 > 0, accurate also for large a (where it is about 1/(2a)); A&S 6.4.12 above 20."""
    return _by_branch(shape, lambda a: a * special.polygamma(1, a) - 1.0, _trigamma_excess_series)


def shape_from_log_ratio(log_ratio, *, tolerance=1e-13, iterations=60):
    """Solve log a - ψ(a) = log_ratio for a, elementwise.

    Parameters
    ----------
    log_ratio : array_like
        ``log(mean x) - mean(log x)``, which is > 0 unless all values are equal.

    Returns
    -------
    ndarray
        The ML shape; NaN where ``log_ratio`` is not positive and finite.

    Notes
    -----
    Starting value of Minka (2002), "Estimating a gamma distribution"
    (also Choi & Wette 1969); then Newton's method in the variable 1/a,
    which converges in a handful of steps for every positive ``log_ratio``.
    Each element stops as soon as its own relative step is below
    ``tolerance``, so an element's result does not depend on the others it
    is solved with (a prefix of a log gets the same shape whether it is
    solved alone or with a million others) and converged elements cost
    nothing more.
    """
    s = np.asarray(log_ratio, dtype=float)
    flat = s.reshape(-1)
    shapes = np.full(flat.size, np.nan)
    valid = np.flatnonzero(np.isfinite(flat) & (flat > 0))
    target = flat[valid]
    a = (3.0 - target + np.sqrt((target - 3.0) ** 2 + 24.0 * target)) / (12.0 * target)
    active = np.arange(a.size)
    for _ in range(iterations):
        if active.size == 0:
            break
        current, goal = a[active], target[active]
        residual = log_minus_digamma(current) - goal
        # d/da [log a - ψ(a)] = -(a ψ'(a) - 1) / a; Newton's step in 1/a
        inverse = 1.0 / current - residual / (current * trigamma_excess(current))
        updated = np.where(inverse > 0, 1.0 / np.where(inverse > 0, inverse, 1.0), current / 2.0)
        a[active] = updated
        active = active[np.abs(updated - current) > tolerance * current]
    shapes[valid] = a
    return shapes.reshape(s.shape)


@dataclass(frozen=True)
class GammaFit:
    """Gamma ML fit (location fixed at 0).

    Attributes
    ----------
    shape, scale : float or ndarray
        ML estimates â and ŝ = mean / â.
    n : int or ndarray
        Number of observations.
    """

    shape: np.ndarray
    scale: np.ndarray
    n: np.ndarray

    @property
    def mean(self):
        """Fitted mean â·ŝ (equals the sample mean)."""
        return self.shape * self.scale


def fit_gamma(observations) -> GammaFit:
    """Gamma ML fit of positive lifetimes (location 0).

    Raises
    ------
    ValueError
        Fewer than 2 values, a value that is not positive and finite, or all
        values equal (the ML does not exist then).
    """
    x = np.asarray(observations, dtype=float).ravel()
    if x.size < 2:
        raise ValueError("the gamma fit needs at least 2 observations")
    if not np.all(np.isfinite(x) & (x > 0)):
        raise ValueError("the gamma fit needs positive finite lifetimes")
    mean = x.mean()
    log_ratio = np.log(mean) - np.mean(np.log(x))
    if log_ratio < 1e-3:
        # values close together: -mean(log1p((x - mean)/mean)) avoids the
        # cancellation of the two logs above
        log_ratio = -np.mean(np.log1p((x - mean) / mean))
    if not log_ratio > 1e-13:
        raise ValueError("all lifetimes are equal (or nearly): the gamma shape cannot be estimated")
    shape = float(shape_from_log_ratio(log_ratio))
    return GammaFit(shape=shape, scale=mean / shape, n=x.size)


# The Monte Carlo fit check simulates samples × n values; this bounds its time
# (each value is drawn, sorted and put through the gamma CDF once).
GOF_VALUE_BUDGET = 20_000_000
GOF_MIN_SAMPLES = 99
# Values simulated and tested at a time: bounds the check's memory (about
# 100 bytes a value while the statistic is computed) whatever the log's length.
GOF_BATCH_VALUES = 1_000_000


def gof_samples(n, samples=999):
    """Monte Carlo samples the fit check uses for n units (fewer for long logs, within the budget)."""
    return int(min(samples, GOF_VALUE_BUDGET // max(int(n), 1)))


def _fitted_rows(samples):
    """Gamma ML (location 0) of every row of a 2-D array: (shape, scale) columns, as ``fit_gamma`` fits one."""
    mean = samples.mean(axis=-1)
    log_ratio = np.log(mean) - np.mean(np.log(samples), axis=-1)
    close = log_ratio < 1e-3
    if np.any(close):  # values close together: the same cancellation-free form as fit_gamma
        rows = samples[close]
        log_ratio[close] = -np.mean(np.log1p((rows - mean[close, None]) / mean[close, None]), axis=-1)
    shape = shape_from_log_ratio(log_ratio)
    return shape[:, None], (mean / shape)[:, None]


def _anderson_darling(samples, axis=-1):
    """Anderson-Darling statistic of each sample against the gamma fitted to it (location 0).

    The statistic of ``scipy.stats.goodness_of_fit(..., statistic="ad")``:
    A² = -n - Σ (2i-1)/n [log F(x_(i)) + log(1 - F(x_(n+1-i)))].
    """
    x = np.sort(np.moveaxis(np.asarray(samples, dtype=float), axis, -1), axis=-1)
    flat = x.reshape(-1, x.shape[-1])
    shape, scale = _fitted_rows(flat)
    n = flat.shape[-1]
    weights = (2.0 * np.arange(1, n + 1) - 1.0) / n
    # log F and log(1 - F) as scipy.stats.gamma.logcdf / logsf compute them (the tail below or above the
    # median from its own incomplete gamma function, the other from the complement), without their
    # per-call overhead
    z = flat / scale
    median = special.gammaincinv(shape, 0.5)
    lower, upper = special.gammainc(shape, z), special.gammaincc(shape, z)
    with np.errstate(divide="ignore"):
        log_cdf = np.where(z < median, np.log(lower), np.log1p(-upper))
        log_sf = np.where(z > median, np.log(upper), np.log1p(-lower))
    terms = log_cdf + log_sf[:, ::-1]
    statistic = -n - (terms * weights).sum(axis=-1)
    return statistic.reshape(x.shape[:-1])


def gamma_fit_pvalue(observations, *, samples=999, seed=20261201) -> float:
    """Goodness-of-fit p-value of a gamma model with estimated shape and scale.

    Monte Carlo Anderson–Darling test with the parameters re-estimated on
    every simulated sample, location 0: the test of
    ``scipy.stats.goodness_of_fit(stats.gamma, x, known_params={"loc": 0},
    statistic="ad")``, run through ``scipy.stats.monte_carlo_test`` in
    batches of ``GOF_BATCH_VALUES`` simulated values (so memory stays bounded)
    with every sample refitted by the vectorized ML of this module (so time
    stays bounded); the simulated values are the same draws. Seeded, so the
    same data always give the same p-value; its Monte Carlo resolution is
    about 1/(samples + 1). Logs of more than GOF_VALUE_BUDGET / samples units
    use fewer samples (at least 99); longer logs than that are refused.

    Raises
    ------
    ValueError
        Not a gamma sample (see ``fit_gamma``), or more units than the check handles.
    """
    x = np.asarray(observations, dtype=float).ravel()
    fitted = fit_gamma(x)  # same validation and the same error texts as the fit
    samples = gof_samples(x.size, samples)
    if samples < GOF_MIN_SAMPLES:
        raise ValueError(f"the fit check handles at most {GOF_VALUE_BUDGET // GOF_MIN_SAMPLES:,} units "
                         f"(got {x.size:,}); check a part of the log, e.g. the first units")
    null = stats.gamma(float(fitted.shape), scale=float(fitted.scale))
    rng = np.random.default_rng(seed)
    result = stats.monte_carlo_test(
        x,
        lambda size: null.rvs(size=size, random_state=rng),
        _anderson_darling,
        vectorized=True,
        n_resamples=int(samples),
        batch=max(1, GOF_BATCH_VALUES // x.size),
        alternative="greater",
    )
    return float(result.pvalue)
