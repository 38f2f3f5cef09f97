"""Fixed-accuracy intervals and sample sizes (METHOD.md §2 and §4).

For an accuracy factor d > 1 the interval for the odds is [q̂/d, q̂·d]
(log q̂ ± log d); on the probability scale it is
[q̂/(d + q̂), d·q̂/(1 + d·q̂)], always inside (0, 1). The fixed-size plan
is n* = (z / log d)² σ², with z the two-sided normal critical value.

Reference: Banerjee, S. & Mukhopadhyay, N. (2016). A general sequential
fixed-accuracy confidence interval estimation methodology for a positive
parameter. Ann. Inst. Stat. Math. 68, 541–570.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

__all__ = [
    "critical_value",
    "units_for_accuracy",
    "whole_units",
    "accuracy_for_units",
    "Interval",
    "odds_interval",
    "probability_interval",
]

# n* that is an integer up to rounding error is not pushed to the next unit. The slack is a
# number of units, not a fraction of n*: a fraction would grow with n* past the fractional
# part itself (n* = 4,548,484,529.96 would round down). Where n* is so large that its own
# rounding error exceeds the slack, an n* that is an integer in exact arithmetic may come out
# one unit high; that errs on the side of more units, never fewer.
_CEIL_SLACK = 1e-9


def critical_value(confidence):
    """z = Φ⁻¹(1 - γ/2) for two-sided confidence 1 - γ."""
    confidence = np.asarray(confidence, dtype=float)
    # scipy.stats.norm.isf(q) is -ndtri(q) (the same bits) behind argument handling that costs
    # about 40 times the computation; every formula call over a log computes z
    return -special.ndtri((1.0 - confidence) / 2.0)


def units_for_accuracy(sigma2, accuracy, confidence):
    """n* = (z / log d)² σ² — real-valued; see ``whole_units`` for the count."""
    z = critical_value(confidence)
    with np.errstate(over="ignore", invalid="ignore"):
        return (z / np.log(np.asarray(accuracy, dtype=float))) ** 2 * np.asarray(sigma2, dtype=float)


def whole_units(n_star):
    """ceil(n*), ignoring an excess of 1e-9 units over a whole number that is only rounding error.

    Never below n*: ceil(n* - 1e-9) >= n* whenever the fractional part of n* exceeds 1e-9, and at
    least 1 unit for any n* > 0.
    """
    n_star = np.asarray(n_star, dtype=float)
    with np.errstate(invalid="ignore"):
        return np.where(n_star > 0, np.maximum(np.ceil(n_star - _CEIL_SLACK), 1.0), np.ceil(n_star))


def accuracy_for_units(sigma2, units, confidence):
    """d = exp(z σ / √n): the accuracy factor n units reach."""
    z = critical_value(confidence)
    return np.exp(z * np.sqrt(np.asarray(sigma2, dtype=float) / np.asarray(units, dtype=float)))


@dataclass(frozen=True)
class Interval:
    """A two-sided interval [low, high]."""

    low: np.ndarray
    high: np.ndarray


def odds_interval(log_odds, accuracy) -> Interval:
    """[q̂/d, q̂·d] from log q̂."""
    log_d = np.log(np.asarray(accuracy, dtype=float))
    log_odds = np.asarray(log_odds, dtype=float)
    with np.errstate(over="ignore"):  # odds beyond 1e308 are inf
        return Interval(low=np.exp(log_odds - log_d), high=np.exp(log_odds + log_d))


def probability_interval(log_odds, accuracy) -> Interval:
    """[q̂/(d + q̂), d·q̂/(1 + d·q̂)] from log q̂, computed with the logistic function."""
    log_d = np.log(np.asarray(accuracy, dtype=float))
    log_odds = np.asarray(log_odds, dtype=float)
    return Interval(low=special.expit(log_odds - log_d), high=special.expit(log_odds + log_d))
