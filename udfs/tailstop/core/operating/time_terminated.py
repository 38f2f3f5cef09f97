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

import numpy as np

from .. import accuracy as _accuracy
from ..methods import estimate_tail, get_method
from ..models import DEFAULT_MODEL, get_model
from ..sequential import stopping_units
from ..time_terminated import check_test_time, time_terminated_sigma2
from .monte_carlo import _Plan, _simulated_result
from .results import DEFAULT_SEED, OperatingCharacteristics, _check_plan, _stop_z, default_n_max

__all__ = ["simulate_with_test_time"]


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
    _check_plan(accuracy, confidence, pilot, check_every)
    estimator, lifetime = get_method(method), get_model(model)
    if estimator.name == "pass-fail":
        raise ValueError("pass-fail with a test time at or beyond the threshold has the exact figures of a "
                         "test without one")
    check_test_time(test_time, threshold, estimator.name)
    p = float(lifetime.tail_probability(threshold, shape, scale).p)
    sigma2 = time_terminated_sigma2(estimator.name, threshold, shape, scale, test_time, lifetime.name)
    if not (0 < p < 1 and 0 < sigma2 < math.inf):
        raise ValueError("the guess puts (almost) every unit on one side of the threshold; no finite plan exists")
    n_star = float(_accuracy.units_for_accuracy(sigma2, accuracy, confidence))
    n_max = default_n_max(n_star, pilot) if n_max is None else int(n_max)
    if n_max < pilot:
        raise ValueError(f"n_max must be at least the pilot ({pilot}, got {n_max})")
    plan = _Plan(float(threshold), float(shape), float(scale), estimator.name, float(accuracy), float(confidence),
                 int(pilot), n_max, int(check_every), p)
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
