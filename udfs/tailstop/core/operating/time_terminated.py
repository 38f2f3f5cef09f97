"""What the sequential rule does when every unit is stopped at a test time (seeded Monte Carlo).

Each simulated run draws lifetimes from the guess, stops every unit still
running at the test time T (it becomes a suspension at T), runs the stopping
rule on that censored log exactly as the decision column would
(``sequential.stopping_units`` with the suspensions), and checks whether the
final interval covers the true p. n* is the fixed-size count from the
expected information under the censoring (``time_terminated``).

pass-fail: a test time at or beyond the threshold changes nothing (a unit
stopped there has outlasted it), so ``operating_characteristics`` keeps its
exact figures; below the threshold it is refused.
"""
from __future__ import annotations

import math
import time

import numpy as np

from ..censored import censored_paths
from ..methods import estimate_tail, get_method
from ..models import DEFAULT_MODEL, get_model
from ..sequential import stopping_units
from ..time_terminated import check_test_time, time_terminated_sigma2
from .monte_carlo import _Plan, _simulated_result
from .results import DEFAULT_SEED, OperatingCharacteristics, _check_plan, _stop_z, planned_units

__all__ = ["simulate_with_test_time", "TimeTerminatedRuns"]


def simulate_with_test_time(threshold, shape, scale, accuracy, confidence, pilot, method, test_time, *,
                            replications=2_000, seed=DEFAULT_SEED, n_max=None, check_every=1,
                            model=DEFAULT_MODEL, progress=None) -> OperatingCharacteristics:
    """Monte Carlo operating characteristics of the rule on a test stopped at ``test_time``.

    Parameters are those of ``monte_carlo.simulate``; ``test_time`` T > 0 is
    the time at which every unit still running is stopped. Figures come with
    their Monte Carlo standard errors as there.

    Raises
    ------
    ValueError
        Bad parameters, pass-fail (use the exact figures), or no finite plan.
    """
    plan, n_star, estimator, lifetime = _setup(threshold, shape, scale, accuracy, confidence, pilot, method,
                                               test_time, n_max, check_every, model)
    n_max, p = plan.n_max, plan.probability
    known = float(shape) if estimator.name == "known-shape" else None
    log_q = math.log(p) - math.log1p(-p)
    rng = np.random.default_rng(seed)
    units = np.full(int(replications), n_max + 1, dtype=np.int64)
    covered = np.zeros(int(replications), dtype=bool)
    for run in range(int(replications)):
        lifetimes = np.asarray(lifetime.draw(rng, shape, scale, n_max), dtype=float)
        suspended = lifetimes > test_time
        times = np.where(suspended, test_time, lifetimes)
        with np.errstate(all="ignore"):
            n = stopping_units(times, threshold, accuracy, confidence, pilot, estimator.name, known,
                               survivors=suspended, check_every=check_every, model=lifetime.name)
        if n is not None:
            units[run] = n
            final = estimate_tail(times[:n], threshold, estimator.name, known, survivors=suspended[:n],
                                  model=lifetime.name)
            covered[run] = abs(final.log_odds - log_q) <= math.log(accuracy)
        if progress is not None and (run + 1) % 100 == 0:
            progress((run + 1) / replications)
    return _simulated_result(plan, n_star, confidence, _stop_z(confidence, None), seed, units, covered)


def _setup(threshold, shape, scale, accuracy, confidence, pilot, method, test_time, n_max, check_every, model):
    """(plan, n*, estimator, lifetime model) after checking a time-terminated plan."""
    _check_plan(accuracy, confidence, pilot, check_every)
    estimator, lifetime = get_method(method), get_model(model)
    if estimator.name == "pass-fail":
        raise ValueError("pass-fail with a test time at or beyond the threshold has the exact figures of a "
                         "test without one")
    check_test_time(test_time, threshold, estimator.name)
    p = float(lifetime.tail_probability(threshold, shape, scale).p)
    sigma2 = time_terminated_sigma2(estimator.name, threshold, shape, scale, test_time, lifetime.name)
    n_star, n_max = planned_units(p, sigma2, accuracy, confidence, pilot, n_max)
    plan = _Plan(float(threshold), float(shape), float(scale), estimator.name, float(accuracy), float(confidence),
                 int(pilot), n_max, int(check_every), p)
    return plan, n_star, estimator, lifetime


class TimeTerminatedRuns:
    """Seeded runs of a time-terminated test, each kept as its whole path, so the rule can be asked at any z'.

    The runs are those of ``simulate_with_test_time`` with the same seed (the
    same lifetimes, drawn in the same order). For each run σ̂²_n and log q̂_n
    of every prefix come from the censored fit of that prefix
    (``censored.censored_paths``, the rule's own fits); at a critical value z'
    the rule stops at the first check point with n >= (z'/log d)² σ̂²_n, so
    only the check points where n/σ̂²_n reaches a new high can be a stop, and
    those are kept with whether the interval there covers p. ``at(z')`` is
    then a search per run: every z' sees the same lifetimes (common random
    numbers, as calibration wants them).

    ``seconds`` bounds the simulation: runs are added until ``replications``
    or until the time is spent (but at least ``least``); ``replications``
    then says how many were made.
    """

    def __init__(self, threshold, shape, scale, accuracy, confidence, pilot, method, test_time, *,
                 replications=2_000, seed=DEFAULT_SEED, n_max=None, check_every=1, model=DEFAULT_MODEL,
                 seconds=None, least=200, progress=None):
        self.plan, self.n_star, estimator, lifetime = _setup(threshold, shape, scale, accuracy, confidence, pilot,
                                                             method, test_time, n_max, check_every, model)
        self.seed, self.log_accuracy, self.confidence = seed, math.log(accuracy), float(confidence)
        p = self.plan.probability
        log_q = math.log(p) - math.log1p(-p)
        known = float(shape) if estimator.name == "known-shape" else None
        check_points = np.arange(int(pilot), self.plan.n_max + 1, int(check_every))
        rng = np.random.default_rng(seed)
        start, wanted = time.monotonic(), int(replications)
        ratios, units, covered, lengths = [], [], [], []
        for run in range(wanted):
            lifetimes = np.asarray(lifetime.draw(rng, shape, scale, self.plan.n_max), dtype=float)
            suspended = lifetimes > test_time
            times = np.where(suspended, test_time, lifetimes)
            with np.errstate(all="ignore"):
                sigma2, log_odds = censored_paths(times, suspended, threshold, estimator.name, known, lifetime.name)
                ratio = check_points / sigma2[check_points - 1]
            ratio = np.where(np.isfinite(ratio) & (ratio > 0), ratio, -np.inf)
            highs = np.flatnonzero(ratio > np.maximum.accumulate(np.concatenate([[-np.inf], ratio[:-1]])))
            n = check_points[highs]
            ratios.append(ratio[highs])
            units.append(n)
            covered.append(np.abs(log_odds[n - 1] - log_q) <= self.log_accuracy)
            lengths.append(highs.size)
            if progress is not None and (run + 1) % 50 == 0:
                progress((run + 1) / wanted)
            if seconds is not None and run + 1 >= least and time.monotonic() - start > seconds:
                break
        self.replications = len(lengths)
        self._ratios = np.concatenate(ratios) if ratios else np.empty(0)
        self._units = np.concatenate(units) if units else np.empty(0, dtype=np.int64)
        self._covered = np.concatenate(covered) if covered else np.empty(0, dtype=bool)
        self._lengths = np.asarray(lengths, dtype=np.int64)
        self._starts = np.concatenate([[0], np.cumsum(self._lengths)[:-1]]).astype(np.int64)

    def at(self, stop_z=None) -> OperatingCharacteristics:
        """The figures of the rule with the critical value ``stop_z`` (default z of the confidence)."""
        z = _stop_z(self.confidence, stop_z)
        factor = (z / self.log_accuracy) ** 2
        below = np.zeros(self.replications, dtype=np.int64)
        if self._ratios.size:
            # the highs of a run increase, so those below the boundary come first: count them per run
            counts = np.add.reduceat((self._ratios < factor).astype(np.int64), self._starts)
            below = np.where(self._lengths > 0, counts, 0)
        stopped = below < self._lengths
        index = np.minimum(self._starts + below, max(self._units.size - 1, 0))
        units = np.where(stopped, self._units[index] if self._units.size else 0, self.plan.n_max + 1)
        covered = stopped & (self._covered[index] if self._covered.size else False)
        return _simulated_result(self.plan, self.n_star, self.confidence, z, self.seed, units.astype(np.int64),
                                 covered)
