"""The stop set of the pass-fail-exact rule on the (k, f) lattice and the paths that first reach it.

A pass-fail test is a walk on the lattice of (k, f): k units beyond the
threshold, f units at or below it, n = k + f. Each unit moves the walk one
step, right (k + 1) with probability p, up (f + 1) with probability 1 - p.
The rule stops at the first check point n (n >= pilot, n - pilot a multiple
of ``check_every``) with k >= 1, f >= 1 and

    k · f >= F · n,

that is n >= F σ̂² with σ̂² = 1/(p̂(1 - p̂)), p̂ = k/n, F the tuned
boundary; equivalently 1/k + 1/f <= 1/F. That grows easier with f for fixed
k (and with k for fixed f), so apart from the check points the stop set is
an upper set of the lattice: what stops at (k, f) stops at every
(k', f') >= (k, f).

P(stop at (k, f)) = w(k, f) p^k (1 - p)^f, with w(k, f) the number of paths
from (0, 0) that reach (k, f) without passing a stop state before. The
counts do not depend on p, so one pass over the lattice serves every p.
They are kept as logarithms (they exceed any float for long tests) and
built level by level in k: along a level, w is a running sum of the paths
arriving from the level below, restarted after each stop state, which is
one cumulative log-sum-exp per run of states between stops.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import special

__all__ = ["stop_condition", "StopStates", "first_passage_counts", "first_stopping_level"]


def stop_condition(n, k, boundary, pilot, check_every):
    """Does the pass-fail-exact rule stop with k of n units beyond the threshold (vectorized)?

    k · f >= F · n; the product is symmetric in k and f, so the rule treats
    p and 1 - p alike bit for bit.
    """
    n = np.asarray(n, dtype=float)
    k = np.asarray(k, dtype=float)
    f = n - k
    with np.errstate(invalid="ignore"):
        enough = k * f >= boundary * n
    consulted = (n >= pilot) & ((n - pilot) % check_every == 0)
    return enough & consulted & (k > 0) & (f > 0)


@dataclass(frozen=True)
class StopStates:
    """Every stop state in a box of the lattice, with the log of its first-passage path count.

    Sorted by the estimate log q̂ = log k - log f it reports.
    """

    k: np.ndarray
    f: np.ndarray
    log_count: np.ndarray
    log_odds: np.ndarray
    f_max: int
    k_max: int

    def log_mass(self, p, part=slice(None)):
        """log P(stop at each state of ``part``) when a unit is beyond the threshold with probability p."""
        return self.log_count[part] + self.k[part] * math.log(p) + self.f[part] * math.log1p(-p)

    def mass(self, p, part=slice(None)):
        return np.exp(self.log_mass(p, part))

    def between(self, low, high):
        """The slice of states whose log q̂ lies in [low, high]."""
        return slice(int(np.searchsorted(self.log_odds, low, side="left")),
                     int(np.searchsorted(self.log_odds, high, side="right")))


def first_passage_counts(boundary, pilot, check_every, f_max, k_max) -> StopStates:
    """Stop states with k <= k_max, f <= f_max and log w(k, f) (see the module notes).

    Every path to a state of the box stays in the box, so each count is exact.
    """
    levels_k, levels_f, levels_w = [], [], []
    first = first_stopping_level(boundary)
    if first == 0:
        inflow = np.full(f_max + 1, -np.inf)
        inflow[0] = 0.0  # the empty path at (0, 0)
    else:
        # below the first level that can stop every path is alive: w(k - 1, f) = C(k - 1 + f, f)
        f = np.arange(f_max + 1, dtype=float)
        inflow = -np.log(f + first) - special.betaln(first, f + 1.0)
    for k in range(first, k_max + 1):
        f = np.arange(inflow.size)
        stop = stop_condition(k + f, k, boundary, pilot, check_every)
        arrivals = _level_arrivals(inflow, np.flatnonzero(stop), check_every)
        stopped = np.flatnonzero(stop & np.isfinite(arrivals))
        levels_k.append(np.full(stopped.size, k))
        levels_f.append(stopped)
        levels_w.append(arrivals[stopped])
        alive = np.where(stop, -np.inf, arrivals)
        reached = np.flatnonzero(np.isfinite(alive))
        if reached.size == 0:
            break
        # paths continue right from the states still running; beyond the last one nothing arrives
        inflow = alive[: min(f_max, int(reached[-1]) + check_every + 1) + 1]
    k = np.concatenate(levels_k).astype(float)
    f = np.concatenate(levels_f).astype(float)
    log_count = np.concatenate(levels_w)
    log_odds = np.log(k) - np.log(f)
    order = np.argsort(log_odds, kind="stable")
    return StopStates(k[order], f[order], log_count[order], log_odds[order], int(f_max), int(k_max))


def first_stopping_level(boundary):
    """The smallest k at which the rule can stop: k > F (for k <= F, k f < F (k + f) for every f).

    k f - F (k + f) = f (k - F) - F k <= -F k when k <= F: the two sides
    differ by F at least, far beyond rounding for any test length.
    """
    return max(1, int(math.floor(boundary)) + 1)


def _level_arrivals(inflow, stops, check_every):
    """log w along one level: running log-sums of ``inflow``, restarted after every stop state."""
    if stops.size == 0:
        return np.logaddexp.accumulate(inflow)
    arrivals = np.empty_like(inflow)
    first = int(stops[0])
    arrivals[: first + 1] = np.logaddexp.accumulate(inflow[: first + 1])
    rest = inflow[first + 1:]
    if rest.size == 0:
        return arrivals
    expected = first + check_every * np.arange(1, (inflow.size - 1 - first) // check_every + 1)
    if stops.size - 1 == expected.size and np.array_equal(stops[1:], expected):
        # the usual case: past the first stop, every check point stops; runs of check_every states
        runs = -(-rest.size // check_every)
        padded = np.full(runs * check_every, -np.inf)
        padded[: rest.size] = rest
        arrivals[first + 1:] = np.logaddexp.accumulate(padded.reshape(runs, check_every), axis=1).ravel()[: rest.size]
        return arrivals
    start = first + 1  # any other pattern of stops: run by run
    for end in list(stops[1:]) + [inflow.size - 1]:
        if end >= start:
            arrivals[start: end + 1] = np.logaddexp.accumulate(inflow[start: end + 1])
        start = end + 1
    return arrivals
