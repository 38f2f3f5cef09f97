"""Monte Carlo operating characteristics under a Weibull or lognormal guess (seeded, chunked).

The runs are simulated the straightforward way: each run's lifetimes are
drawn from the guessed model (``LifetimeModel.draw``), the model's running
statistics of every prefix are taken (``SufficientStatistics.running``, for
the Weibull fitted shape ``weibull.running_fit``), and the first STOP of
``rule.stops`` is N. The final estimate at N (``methods.estimate_tail``)
gives the coverage. To keep memory and time bounded, a chunk of runs first
draws a window of about twice n* units; the few runs not stopped in it are
drawn on to n_max.
"""
from __future__ import annotations

import math

import numpy as np

from .. import accuracy as _accuracy
from .. import rule
from ..methods import SufficientStatistics, estimate_tail
from ..models import get_model

__all__ = ["simulate_model_runs"]

# Simulated lifetimes held at once (rows × window).
_VALUES_PER_CHUNK = 2_000_000


def _first_stops(plan, model, x):
    """N (1-based) of each row of ``x``, or 0 where the rule does not stop within the row."""
    statistics = SufficientStatistics.running(x, plan.threshold, model=model, method=plan.method,
                                              shape=plan.known_shape)
    with np.errstate(all="ignore"):
        hits = rule.stops(statistics, plan.threshold, plan.accuracy, plan.stop_confidence, plan.pilot,
                          plan.method, plan.known_shape, plan.check_every, model=model)
    return np.where(hits.any(axis=-1), np.argmax(hits, axis=-1) + 1, 0)


def _covers(plan, model, log):
    log_odds = estimate_tail(log, plan.threshold, plan.method, plan.known_shape, model=model).log_odds
    interval = _accuracy.probability_interval(log_odds, plan.accuracy)
    return bool(interval.low <= plan.probability <= interval.high)


def simulate_model_runs(plan, model, rng, replications, n_star, progress=None):
    """(units, covered) of ``replications`` runs; N = n_max + 1 where a run did not stop by n_max."""
    lifetime = get_model(model)
    window = int(min(plan.n_max, max(plan.pilot, 2 * math.ceil(n_star)) + 50))
    chunk = max(1, _VALUES_PER_CHUNK // window)
    units = np.full(replications, plan.n_max + 1, dtype=np.int64)
    covered = np.zeros(replications, bool)
    for start in range(0, replications, chunk):
        count = min(chunk, replications - start)
        x = lifetime.draw(rng, plan.shape, plan.scale, (count, window))
        stops = _first_stops(plan, lifetime.name, x)
        for row in range(count):
            log, n = x[row], int(stops[row])
            if n == 0 and window < plan.n_max:
                log = np.concatenate([log, lifetime.draw(rng, plan.shape, plan.scale, plan.n_max - window)])
                n = int(_first_stops(plan, lifetime.name, log[None, :])[0])
            if n:
                units[start + row] = n
                covered[start + row] = _covers(plan, lifetime.name, log[:n])
        if progress is not None:
            progress((start + count) / replications)
    return units, covered
