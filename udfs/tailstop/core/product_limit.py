"""The product-limit estimate of P(X > threshold) from a log with suspended units.

A unit is either a failure at time t or a suspension: it had not failed at
time t (still running, or taken off test). The product-limit estimate
(Kaplan & Meier, JASA 53 (1958) 457–481) of S(c) = P(X > c) is

    Ŝ(c) = Π over failure times t_i <= c of (1 - d_i / r_i)

with d_i failures at t_i and r_i units still on test just before t_i (a
suspension tied with a failure is still at risk at that failure: the usual
convention). Greenwood's formula (Greenwood 1926) estimates its variance:

    Var(Ŝ) = Ŝ² · G,   G = Σ over t_i <= c of d_i / (r_i (r_i - d_i)),

so the delta method gives Var(log Ŝ/(1 - Ŝ)) = G / (1 - Ŝ)², and the σ² of
the log-odds that the stopping rule uses is σ̂² = n · G / (1 - Ŝ)² with n all
the units, failed and suspended.

Segments. Between two suspension times the risk set only loses failures, so
the factors of the product telescope: over a stretch of the time axis that
starts with R units at risk and sees F failures and no suspension,
Π (1 - d_i/r_i) = (R - F)/R and Σ d_i/(r_i(r_i - d_i)) = F/(R(R - F)), exactly.
Cut at the distinct suspension times below c, the estimate needs one factor
per stretch, so all prefixes of a log cost O(n·J) for J distinct suspension
times below the threshold. With no suspension below c there is one stretch,
Ŝ = (units beyond c)/n: the share of units beyond the threshold, and G/(1-Ŝ)²
= n/(k(n-k)) is its binomial variance. ``pass_fail_from_counts`` keeps that
case on the plain share, so its numbers are the very same.

A suspension at or after c counts as beyond the threshold (the unit outlasted
c); a failure at c does not (it did not outlast c).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .probability import TailProbability

__all__ = ["ProductLimit", "product_limit", "regularized_sigma2", "prefix_counts"]

# Cells of the running count matrix built at a time (bounds the memory of long logs).
_BLOCK_CELLS = 1 << 21


@dataclass(frozen=True)
class ProductLimit:
    """The product-limit estimate of S(c) = P(X > c), for one log or for many prefixes of it.

    Attributes
    ----------
    units : ndarray of int
        n, all units (failed and suspended).
    failures_below : ndarray of int
        Failures at or below the threshold.
    suspended_below : ndarray of int
        Units suspended below the threshold.
    beyond : ndarray of int
        Units seen to outlast the threshold: failed after it, or suspended at
        or after it.
    log_survival : ndarray
        log Ŝ(c) (-inf when Ŝ is 0).
    greenwood : ndarray
        G = Σ d/(r(r - d)) over failure times up to c; Var(Ŝ) = Ŝ² G.
    """

    units: np.ndarray
    failures_below: np.ndarray
    suspended_below: np.ndarray
    beyond: np.ndarray
    log_survival: np.ndarray
    greenwood: np.ndarray

    @property
    def survival(self):
        """Ŝ(c)."""
        return np.exp(self.log_survival)

    @property
    def defined(self):
        """True where Ŝ(c) is strictly between 0 and 1: a failure at or below c and a unit beyond it."""
        return (self.failures_below > 0) & (self.beyond > 0)

    @property
    def tail(self) -> TailProbability:
        """Ŝ(c) as p, with log p and log(1 - p)."""
        with np.errstate(divide="ignore", invalid="ignore"):
            log_cdf = np.log(-np.expm1(self.log_survival))
        return TailProbability(self.survival, self.log_survival, log_cdf)

    @property
    def standard_error(self):
        """Greenwood's standard error of Ŝ(c): Ŝ √G."""
        return self.survival * np.sqrt(self.greenwood)

    @property
    def sigma2(self):
        """σ̂² = n · G / (1 - Ŝ)²: n times the delta-method variance of the log-odds."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return self.units * self.greenwood / np.expm1(self.log_survival) ** 2

    @property
    def effective_units(self):
        """n_e = Ŝ(1 - Ŝ) / Var(Ŝ) = (1 - Ŝ)/(Ŝ G): the units of a complete log as informative.

        Equal to n when no unit is suspended below the threshold.
        """
        with np.errstate(divide="ignore", invalid="ignore"):
            return -np.expm1(self.log_survival) / (self.survival * self.greenwood)


def regularized_sigma2(estimate: ProductLimit):
    """σ̂² for the stopping rule on a censored log: the pass-fail rule's σ̂² carried over.

    A complete log of n_e units with n_e Ŝ of them beyond c has the same Ŝ
    and the same Greenwood variance; its plain share Ŝ gives
    σ̂² = (n / n_e) / (Ŝ (1 - Ŝ)) = n G / (1 - Ŝ)², the delta-method σ̂² of the
    estimate itself (the pass-fail rule uses the plain share S / n too, once
    there are units on both sides: docs/method.md). With no suspension below
    c, n_e = n and this is the pass-fail σ̂² (the rule uses that formula there,
    so the decisions are the same bits). NaN where Ŝ is 0 or 1 (the rule
    never stops there).
    """
    n_e = estimate.effective_units
    with np.errstate(divide="ignore", invalid="ignore"):
        share = estimate.survival
        sigma2 = estimate.units / n_e / (share * (1.0 - share))
    return np.where(estimate.defined, sigma2, np.nan)


def product_limit(times, suspended, threshold, prefixes=None) -> ProductLimit:
    """Ŝ(threshold) and Greenwood's G for a log, or for each of its first-n-units prefixes.

    Parameters
    ----------
    times : array_like
        Positive times in test order: the failure time, or for a suspended
        unit the time it was last seen running.
    suspended : array_like of bool
        True for a suspended unit.
    threshold : float
        c > 0.
    prefixes : array_like of int, optional
        Increasing prefix sizes n (1 <= n <= len(times)); the whole log if
        left out (then every field is 0-dimensional).

    Returns
    -------
    ProductLimit
    """
    x = np.asarray(times, dtype=float).ravel()
    flags = np.asarray(suspended, dtype=bool).ravel()
    whole = prefixes is None
    n = np.array([x.size]) if whole else np.asarray(prefixes, dtype=np.int64).ravel()
    failed_below = ~flags & (x <= threshold)
    suspended_below = flags & (x < threshold)
    cuts = np.unique(x[suspended_below])
    stretches = cuts.size + 1
    # column of a unit in the count matrix: its stretch for a failure at or below c,
    # stretches + the index of its suspension time for a suspension below c, none otherwise
    column = np.full(x.size, -1, dtype=np.int64)
    column[failed_below] = np.searchsorted(cuts, x[failed_below], side="left")
    column[suspended_below] = stretches + np.searchsorted(cuts, x[suspended_below], side="left")
    counts = prefix_counts(column, 2 * stretches - 1, n)
    failures, suspensions = counts[:, :stretches], counts[:, stretches:]
    removed_before = np.cumsum(failures, axis=1) - failures
    removed_before[:, 1:] += np.cumsum(suspensions, axis=1)
    at_risk = n[:, None] - removed_before
    with np.errstate(divide="ignore", invalid="ignore"):
        factor = np.where(failures > 0, np.log1p(-failures / np.maximum(at_risk, 1)), 0.0)
        term = np.where(failures > 0, failures / (at_risk * (at_risk - failures).astype(float)), 0.0)
    result = ProductLimit(
        units=n, failures_below=failures.sum(axis=1), suspended_below=suspensions.sum(axis=1),
        beyond=n - failures.sum(axis=1) - suspensions.sum(axis=1),
        log_survival=factor.sum(axis=1), greenwood=term.sum(axis=1),
    )
    if whole:
        result = ProductLimit(*(np.asarray(getattr(result, f)[0]) for f in result.__dataclass_fields__))
    return result


def prefix_counts(column, width, prefixes):
    """Per prefix n, how many of the first n units fall in each of ``width`` columns.

    ``column`` gives each unit's column (-1: none); ``prefixes`` increase.
    Built a block of rows at a time, so memory stays bounded.
    """
    out = np.zeros((prefixes.size, width), dtype=np.int64)
    base = np.zeros(width, dtype=np.int64)
    rows = max(1, _BLOCK_CELLS // max(width, 1))
    total = column.size
    for start in range(0, total, rows):
        end = min(total, start + rows)
        block = column[start:end]
        wanted = np.flatnonzero((prefixes > start) & (prefixes <= end))
        counted = block >= 0
        if wanted.size:
            one_hot = np.zeros((end - start, width), dtype=np.int64)
            one_hot[np.flatnonzero(counted), block[counted]] = 1
            running = np.cumsum(one_hot, axis=0)
            out[wanted] = base + running[prefixes[wanted] - 1 - start]
        base += np.bincount(block[counted], minlength=width)
    return out
