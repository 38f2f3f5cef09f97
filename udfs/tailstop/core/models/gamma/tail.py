"""Gamma exceedance probability p = P(X > threshold), kept accurate in logs.

The usual spreadsheet route, ``1 - GAMMA.DIST(..., TRUE)``, subtracts two
numbers close to 1 and loses every digit once p is below about 1e-16. Here
the smaller of the two tails is always computed directly (scipy's
``gammaincc`` for the upper tail, ``gammainc`` for the lower one) and the
other one is derived from it with ``log1p``, so ``log p``, ``log(1 - p)`` and
the log-odds keep full relative precision from p = 1e-300 up to p = 1 - 1e-15.
Where a tail underflows double precision the log is computed from a
continued fraction (upper tail) or a power series (lower tail).
"""
from __future__ import annotations

import numpy as np
from scipy import special

from ...probability import TailProbability

__all__ = ["TailProbability", "tail_probability", "log_density_term", "LARGEST_SHAPE"]

# Below this the tail is evaluated in logs so that subnormal numbers never
# cost digits.
_UNDERFLOW = 1e-290


# Given (guessed) shapes are accepted up to this: against mpmath the tail keeps a relative 1e-12
# and the fitted-shape σ² 2e-12 up to here (tests/test_tail_far.py, tests/test_variance.py).
LARGEST_SHAPE = 1e5

# From this shape on log f is computed in the Stirling form, free of the cancellation of the
# three large terms a log t, t and log Γ(a) (each about a log a, against a result of order 1).
_STIRLING_FROM = 10.0


def log_density_term(shape, t):
    """log f(a, t) with f(a, t) = t**a * exp(-t) / Gamma(a) (METHOD.md §3).

    Below a = 10 directly; from a = 10 on as
    -a (y - log(1 + y)) + ½ log a - ½ log 2π - μ(a), y = (t - a)/a, with the
    Stirling remainder μ(a) = log Γ(a) - (a - ½) log a + a - ½ log 2π by its
    asymptotic series, so that log f keeps its absolute accuracy (about
    1e-13) at shapes of 1e5 and beyond.
    """
    shape, t = np.broadcast_arrays(np.asarray(shape, dtype=float), np.asarray(t, dtype=float))
    with np.errstate(divide="ignore", invalid="ignore"):
        direct = special.xlogy(shape, t) - t - special.gammaln(shape)
        large = shape >= _STIRLING_FROM
        if not np.any(large):
            return direct
        a = np.where(large, shape, _STIRLING_FROM)
        y = (t - a) / a
        stirling = -a * _y_minus_log1p(y) + 0.5 * np.log(a) - 0.5 * np.log(2.0 * np.pi) - _stirling_remainder(a)
        return np.where(large, stirling, direct)


def _y_minus_log1p(y):
    """y - log(1 + y) >= 0 without cancellation near y = 0.

    With u = y / (2 + y), log(1 + y) = 2 atanh u, so y - log(1 + y) =
    u y - 2 (u³/3 + u⁵/5 + ...); the series is used for |y| < ½ (|u| < 1/3),
    the plain difference (no cancellation to speak of) elsewhere.
    """
    y = np.asarray(y, dtype=float)
    small = np.abs(y) < 0.5
    ys = np.where(small, y, 0.0)
    u = ys / (2.0 + ys)
    u2 = u * u
    term = u * u2
    total = np.zeros_like(u)
    for k in range(3, 80, 2):
        total = total + term / k
        term = term * u2
    series = u * ys - 2.0 * total
    with np.errstate(divide="ignore", invalid="ignore"):
        plain = y - np.log1p(y)
    return np.where(small, series, plain)


def _stirling_remainder(a):
    """μ(a) = log Γ(a) - (a - ½) log a + a - ½ log 2π for a >= 10 (A&S 6.1.41)."""
    inv = 1.0 / a
    inv2 = inv * inv
    return inv * (1 / 12 + inv2 * (-1 / 360 + inv2 * (1 / 1260 + inv2 * (-1 / 1680 + inv2 * (1 / 1188)))))


def _log_upper_continued_fraction(a, x, iterations=400):
    """log Q(a, x) by the Legendre continued fraction (modified Lentz), x > a + 1."""
    tiny = 1e-300
    b = x + 1.0 - a
    c = np.full_like(x, 1.0 / tiny)
    d = 1.0 / b
    h = d.copy()
    for i in range(1, iterations):
        an = -i * (i - a)
        b = b + 2.0
        d = an * d + b
        d = np.where(np.abs(d) < tiny, tiny, d)
        c = b + an / c
        c = np.where(np.abs(c) < tiny, tiny, c)
        d = 1.0 / d
        delta = d * c
        h = h * delta
        if np.all(np.abs(delta - 1.0) < 1e-16):
            break
    return log_density_term(a, x) + np.log(h)


def _log_lower_series(a, x, iterations=2000):
    """log P(a, x) by the power series, for x well below a."""
    term = np.ones_like(x)
    total = np.ones_like(x)
    for i in range(1, iterations):
        term = term * x / (a + i)
        total = total + term
        if np.all(term < total * 1e-17):
            break
    return log_density_term(a, x) - np.log(a) + np.log(total)


def tail_probability(threshold, shape, scale) -> TailProbability:
    """P(X > threshold) for X ~ Gamma(shape, scale), vectorized.

    Parameters
    ----------
    threshold, shape, scale : array_like
        Threshold c >= 0 in the unit of the lifetimes, shape a > 0 and scale
        s > 0 (mean a*s). They broadcast against each other.

    Returns
    -------
    TailProbability
        ``p = Q(a, c/s)`` with ``log_p``, ``log_cdf`` and ``log_odds``.

    Raises
    ------
    ValueError
        If shape or scale is not positive and finite, or threshold is negative.

    Notes
    -----
    Q is the regularized upper incomplete gamma function (METHOD.md §1).
    """
    threshold, shape, scale = np.broadcast_arrays(
        np.asarray(threshold, dtype=float),
        np.asarray(shape, dtype=float),
        np.asarray(scale, dtype=float),
    )
    _require(shape, "shape", "a positive finite number")
    if np.any(shape > LARGEST_SHAPE):
        raise ValueError(f"a gamma shape above {LARGEST_SHAPE:,.0f} is beyond the range where tailstop guarantees "
                         f"12 digits (got {float(np.max(shape)):.6g}); such a gamma is practically normal "
                         "(skewness 2/√shape below 0.007): plan with a smaller shape")
    _require(scale, "scale", "a positive finite number")
    if not np.all(np.isfinite(threshold) & (threshold >= 0)):
        raise ValueError("threshold must be a finite number >= 0")
    with np.errstate(over="ignore"):
        t = threshold / scale  # inf when the threshold is beyond every double: p = 0
    return tail_probability_standard(shape, t)


def tail_probability_standard(shape, t) -> TailProbability:
    """P(X > t) for X ~ Gamma(shape, 1); shape > 0 and t >= 0 are not checked."""
    shape, t = np.broadcast_arrays(np.asarray(shape, dtype=float), np.asarray(t, dtype=float))
    upper = special.gammaincc(shape, t)
    lower = special.gammainc(shape, t)
    upper_small = upper <= 0.5
    with np.errstate(divide="ignore", invalid="ignore"):
        log_p = np.where(upper_small, np.log(upper), np.log1p(-lower))
        log_cdf = np.where(upper_small, np.log1p(-upper), np.log(lower))
    inside = (t > 0) & np.isfinite(t)
    log_p = _patch_underflow(log_p, upper < _UNDERFLOW, shape, t, _log_upper_continued_fraction, inside)
    log_cdf = _patch_underflow(log_cdf, lower < _UNDERFLOW, shape, t, _log_lower_series, inside)
    p = np.where(upper_small, upper, 1.0 - lower)
    p = np.where(upper < _UNDERFLOW, np.exp(log_p), p)
    return TailProbability(p=p, log_p=log_p, log_cdf=log_cdf)


def _patch_underflow(values, mask, shape, t, evaluate, valid):
    mask = mask & valid
    if not np.any(mask):
        return values
    values = np.array(values, dtype=float, copy=True)
    values[mask] = evaluate(shape[mask], t[mask])
    return values


def _require(values, name, what):
    if not np.all(np.isfinite(values) & (values > 0)):
        raise ValueError(f"{name} must be {what}")
