"""Exact operating characteristics of the pass-fail rule: forward propagation of the (n, S) states."""
from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
from scipy import stats

from .. import accuracy as _accuracy
from .. import rule
from ..methods import PASS_FAIL_METHODS, SufficientStatistics, estimate_from_statistics
from .work import COMMAND_SECONDS, check_work, exact_work
from .results import (
    QUANTILE_LEVELS,
    OperatingCharacteristics,
    _check_plan,
    _stop_confidence,
    _stop_z,
    default_n_max,
)

# Rows of the (n, S) grid evaluated by one call of rule.stops (pass-fail exact).
_EXACT_BLOCK_ROWS = 64
# Running probability below this ends an exact run that has no explicit n_max.
_EXACT_TOLERANCE = 1e-12


# --------------------------------------------------------------------------- exact pass-fail


def pass_fail_exact(p, accuracy, confidence, pilot, *, n_max=None, check_every=1, stop_z=None,
                    progress=None, method="pass-fail", work_bound=COMMAND_SECONDS) -> OperatingCharacteristics:
    """Exact operating characteristics of the pass-fail rule by forward propagation of (n, S).

    Parameters
    ----------
    p : float
        True probability that a unit is beyond the threshold, 0 < p < 1.
    accuracy, confidence, pilot : float, float, int
        The plan: odds within a factor ``accuracy`` at ``confidence``, pilot >= 2.
    n_max : int, optional
        Propagate exactly up to n_max. By default the propagation runs until
        the still-running probability is below 1e-12, up to 20 n* + 1000 units
        (runs with fewer than about B = (z/log d)² units beyond the threshold
        cannot stop, so the tail of N can be long when B is large and p small).
    check_every : int
        The rule is consulted at n = pilot, pilot + k, ... (``rule.is_check_point``).
    stop_z : float, optional
        Critical value for the stopping boundary instead of z(confidence).
    progress : callable, optional
        Called with the fraction done (0..1).
    method : {'pass-fail', 'pass-fail-exact'}
        Whose stopping rule: pass-fail-exact has its own tuned boundary (and no ``stop_z``).
    work_bound : float
        Seconds the computation may take by its estimate (``work.exact_work``,
        made before it starts); beyond it ``work.PlanTooLarge`` is raised with
        what is known without computing. ``math.inf`` for no bound.

    Notes
    -----
    With q = 1 - p, after the pilot S ~ Binomial(pilot, p). At each n the mass
    of the states (n, k) where ``rule.stops`` says STOP is P(N = n, S = k);
    it is removed, the rest moves on as P(n+1, k) = P(n, k) q + P(n, k-1) p.
    The stop set is evaluated by ``rule.stops`` on blocks of the (n, S) grid,
    only over the S where the running probability is not exactly zero.
    """
    _check_plan(accuracy, confidence, pilot, check_every)
    if method not in PASS_FAIL_METHODS:
        raise ValueError(f"the exact propagation is for {' and '.join(PASS_FAIL_METHODS)} (got {method!r})")
    if method != "pass-fail" and stop_z is not None:
        raise ValueError(f"{method} has its own tuned boundary; a critical value for it cannot be given")
    if not 0 < p < 1:
        raise ValueError(f"the probability must be strictly between 0 and 1 (got {p!r})")
    pilot = int(pilot)
    n_star = float(_accuracy.units_for_accuracy(1.0 / (p * (1.0 - p)), accuracy, confidence))
    stop_confidence = _stop_confidence(confidence, stop_z)
    check_work(exact_work(p, accuracy, stop_confidence, pilot, n_star, n_max), work_bound,
               sigma2=1.0 / (p * (1.0 - p)), confidence=confidence, p=p, accuracy=accuracy, pilot=pilot)
    adaptive = n_max is None
    cap = max(default_n_max(n_star, pilot), 20 * math.ceil(n_star) + 1000) if adaptive else int(n_max)
    if cap < pilot:
        raise ValueError(f"n_max must be at least the pilot ({pilot}, got {cap})")
    stop_confidence = _stop_confidence(confidence, stop_z)
    propagation = _Propagation(p, pilot, cap)
    stop_set = _PassFailStopSet(accuracy, stop_confidence, pilot, check_every, method)
    n = pilot
    while True:
        if (n - pilot) % _EXACT_BLOCK_ROWS == 0:
            low, high = propagation.window()
            stop_set.evaluate(n, min(n + _EXACT_BLOCK_ROWS, cap + 1), low, high)
            if progress is not None:
                progress(min(1.0, (n - pilot) / max(1, cap - pilot)))
        propagation.stop(n, stop_set.row(n, *propagation.window()))
        if n == cap or (adaptive and propagation.running_mass() <= _EXACT_TOLERANCE) or propagation.running_mass() == 0:
            break
        propagation.advance()
        n += 1
    if progress is not None:
        progress(1.0)
    stopped_n, stopped_k, stopped_mass = propagation.stopped_states()
    covered = _pass_fail_covers(stopped_n, stopped_k, p, accuracy)
    return _exact_result(
        method=method, probability=p, n_star=n_star, pilot=pilot, n_max=n, confidence=confidence,
        stop_z=_stop_z(confidence, stop_z), distribution=propagation.distribution[: n + 1],
        beyond=propagation.running_mass(), coverage=float(np.sum(stopped_mass[covered])),
    )


class _Propagation:
    """P(n, k) of the still-running states, kept on the window of k where it is not 0."""

    def __init__(self, p, pilot, cap):
        self.p, self.q = p, 1.0 - p
        self.n = pilot
        self.mass = np.zeros(cap + 2)
        self.mass[: pilot + 1] = stats.binom.pmf(np.arange(pilot + 1), pilot, p)
        self.low, self.high = 0, pilot
        self.distribution = np.zeros(cap + 1)
        self._stopped = []

    def window(self):
        """[low, high] of k with non-zero running probability (trimmed lazily)."""
        nonzero = np.flatnonzero(self.mass[self.low: self.high + 1])
        if nonzero.size:
            self.low, self.high = self.low + int(nonzero[0]), self.low + int(nonzero[-1])
        return self.low, self.high

    def stop(self, n, stops_row):
        """Remove the states (n, k) where the rule stops; ``stops_row`` covers k = low..high."""
        current = self.mass[self.low: self.high + 1]
        stopping = stops_row & (current > 0)
        if stopping.any():
            k = self.low + np.flatnonzero(stopping)
            taken = current[stopping]
            self.distribution[n] = taken.sum()
            self._stopped.append((np.full(k.size, n), k, taken.copy()))
            current[stopping] = 0.0

    def advance(self):
        """One more unit: P(n+1, k) = P(n, k) q + P(n, k-1) p."""
        current = self.mass[self.low: self.high + 1]
        moved = current * self.p
        current *= self.q
        self.mass[self.high + 1] = 0.0
        self.mass[self.low + 1: self.high + 2] += moved
        self.high += 1
        self.n += 1

    def running_mass(self):
        return float(self.mass[self.low: self.high + 1].sum())

    def stopped_states(self):
        if not self._stopped:
            return np.zeros(0, int), np.zeros(0, int), np.zeros(0)
        return tuple(np.concatenate(parts) for parts in zip(*self._stopped))


class _PassFailStopSet:
    """``rule.stops`` on a block of the (n, S) grid, served row by row, as one interval of S per n.

    The pass-fail rule stops where S (n - S) >= B n, 0 < S < n: its σ̂² is a
    monotone function of the whole number S (n - S), so for each n the stop set
    is an interval of S. Its ends are found from the quadratic and then settled
    by asking ``rule.stops`` itself about the S around each end; the first
    block is also evaluated on the full grid, and if the two ever disagree
    (the rule is no longer an interval) every block is evaluated in full.
    """

    _AROUND = 3  # S asked about on either side of each end of the interval

    def __init__(self, accuracy, stop_confidence, pilot, check_every, method="pass-fail"):
        self.arguments = (1.0, accuracy, stop_confidence, pilot, method)
        self.check_every = check_every
        self.factor = rule.boundary_factor(accuracy, stop_confidence)
        self.first_n = self.first_k = 0
        self.grid = None
        self.ends = None
        self.full = False
        self.checked = False

    def _stops(self, n_grid, k_grid):
        statistics = SufficientStatistics(n=n_grid, sum_x=np.zeros(n_grid.shape), log_ratio=np.zeros(n_grid.shape),
                                          exceedances=k_grid)
        return rule.stops(statistics, *self.arguments, check_every=self.check_every) & (k_grid <= n_grid)

    def _full(self, first_n, end_n, low, high):
        n = np.arange(first_n, end_n)[:, None]
        k = np.arange(low, high + (end_n - first_n) + 1)[None, :]
        return self._stops(*np.broadcast_arrays(n, k))

    def _interval_ends(self, first_n, end_n):
        """(lowest, highest) stopping S per n of the block; lowest > highest where none stops."""
        n = np.arange(first_n, end_n, dtype=float)
        with np.errstate(invalid="ignore"):
            half_width = np.sqrt(np.maximum(n * n / 4.0 - self.factor * n, 0.0))
        guess_low = np.clip(np.ceil(n / 2.0 - half_width), 1, None).astype(np.int64)
        offsets = np.arange(-self._AROUND, self._AROUND + 1)
        n_int = n.astype(np.int64)[:, None]
        around = guess_low[:, None] + offsets[None, :]
        valid = (around >= 1) & (around <= n_int - 1)
        says = self._stops(np.broadcast_to(n_int, around.shape), np.clip(around, 0, None)) & valid
        found = says.any(axis=1)
        first = np.argmax(says, axis=1)
        # the end is settled only if the S just below it is asked about and does not stop
        settled = ~found | (first > 0) | (around[:, 0] <= 1)
        lowest = np.where(found, around[np.arange(n.size), first], n_int[:, 0])
        highest = n_int[:, 0] - lowest  # S (n - S) is symmetric about n / 2
        # no stop anywhere in the row: check the middle, where S (n - S) is largest
        middle = np.maximum(n_int[:, 0] // 2, 1)
        middle_says = self._stops(n_int[:, 0], middle)
        if np.any(~found & middle_says) or not np.all(settled):
            return None
        return lowest, highest

    def evaluate(self, first_n, end_n, low, high):
        """Stop set for n in [first_n, end_n) and k in [low, high + rows]."""
        self.first_n, self.first_k = first_n, low
        ends = None if self.full else self._interval_ends(first_n, end_n)
        if ends is not None and not self.checked:
            grid = self._full(first_n, end_n, low, high)
            k = np.arange(low, high + (end_n - first_n) + 1)[None, :]
            if not np.array_equal(grid, (k >= ends[0][:, None]) & (k <= ends[1][:, None])):
                ends = None
            self.checked = True
        if ends is None:
            self.full = True
            self.grid, self.ends = self._full(first_n, end_n, low, high), None
        else:
            self.grid, self.ends = None, ends

    def row(self, n, low, high):
        if self.ends is None:
            return self.grid[n - self.first_n, low - self.first_k: high - self.first_k + 1]
        k = np.arange(low, high + 1)
        i = n - self.first_n
        return (k >= self.ends[0][i]) & (k <= self.ends[1][i])


def _pass_fail_covers(n, k, p, accuracy):
    """Does the final pass-fail interval at (n, k) contain p? Ties decided exactly.

    The interval [q̂/d, q̂·d] (q̂ = k/(n-k)) is closed: p is covered when
    q/d <= q̂ <= q·d, q = p/(1-p). States where q̂ lies within a relative 1e-9
    of an end are decided in exact rational arithmetic, with p and d read as
    the decimals they are written as (the shortest decimal that reads back as
    the same number, so 0.01 is one hundredth), instead of by the rounding of
    the logs.
    """
    if n.size == 0:
        return np.zeros(0, bool)
    n = np.asarray(n, dtype=np.int64)
    k = np.asarray(k, dtype=np.int64)
    statistics = SufficientStatistics(n=n, sum_x=np.zeros(n.shape), log_ratio=np.zeros(n.shape), exceedances=k)
    with np.errstate(divide="ignore", invalid="ignore"):
        log_odds = estimate_from_statistics(statistics, 1.0, "pass-fail").log_odds
        interval = _accuracy.probability_interval(log_odds, accuracy)
        covered = (interval.low <= p) & (p <= interval.high)
        log_d = math.log(accuracy)
        true_log_odds = math.log(p) - math.log1p(-p)
        distance = np.minimum(np.abs(log_odds - log_d - true_log_odds), np.abs(log_odds + log_d - true_log_odds))
    near = np.flatnonzero((distance < 1e-9) & (k > 0) & (k < n))
    if near.size:
        covered = covered.copy()
        exact_p, exact_d = Fraction(repr(float(p))), Fraction(repr(float(accuracy)))
        for i in near:
            units, beyond = int(n[i]), int(k[i])
            below = beyond * (1 - exact_p)       # q̂ ∝ k (1-p) against q ∝ p (n-k)
            above = exact_p * (units - beyond)
            covered[i] = above <= exact_d * below and below <= exact_d * above
    return covered


def _distribution_figures(distribution):
    """Mean, sd (of N given N <= n_max) and quantiles from P(N = n)."""
    n = np.arange(distribution.size)
    stopped = distribution.sum()
    if stopped <= 0:
        return math.nan, math.nan, {level: math.inf for level in QUANTILE_LEVELS}
    mean = float(np.dot(n, distribution) / stopped)
    variance = float(np.dot((n - mean) ** 2, distribution) / stopped)
    cdf = np.cumsum(distribution)
    quantiles = {}
    for level in QUANTILE_LEVELS:
        # a relative slack of 1e-12 keeps rounding in the cumulative sum from moving a quantile
        index = int(np.searchsorted(cdf, level * (1.0 - 1e-12)))
        quantiles[level] = float(index) if index < distribution.size else math.inf
    return mean, math.sqrt(max(variance, 0.0)), quantiles


def _exact_result(*, method="pass-fail", probability, n_star, pilot, n_max, confidence, stop_z, distribution, beyond, coverage):
    mean, sd, quantiles = _distribution_figures(distribution)
    return OperatingCharacteristics(
        method=method, exact=True, probability=float(probability), n_star=n_star, pilot=pilot, n_max=int(n_max),
        confidence=float(confidence), stop_z=stop_z, expected_units=mean, sd_units=sd, quantiles=quantiles,
        beyond=float(beyond), coverage=float(coverage), quantiles_se={level: 0.0 for level in QUANTILE_LEVELS},
        distribution=distribution,
    )
