"""Tuning of the pass-fail-exact boundary: the smallest factor whose coverage is certified.

The pass-fail rule stops when n >= B σ̂², B = (z / log d)². pass-fail-exact
stops when n >= c·B·σ̂² (``lattice.stop_condition``) with the tuning factor
c >= 1 chosen by bisection: the smallest c (to 2 %) for which
``certify.certify`` proves that the exact coverage of [q̂/d, q̂·d] at the
stop is at least the confidence for every p in [p_low, 1 - p_low].

p_low is set by the work the exact computation may take: the test runs to
about F/p units at small p (F = c·B), so the lattice box grows as 1/p_low.
``p_low_for`` keeps F/p_low near ``UNIT_BUDGET`` units (and never below
``P_FLOOR``); below p_low nothing is claimed.
"""
from __future__ import annotations

import math
import time
from dataclasses import asdict, dataclass

from ..accuracy import critical_value
from .certify import certify
from .lattice import first_passage_counts

__all__ = ["Tuning", "tune", "p_low_for", "box_for", "UNIT_BUDGET", "P_FLOOR", "ALGORITHM"]

# Changing anything that moves a tuning result must change this (it keys the disk cache).
ALGORITHM = "pass-fail-exact/4"
UNIT_BUDGET = 40_000
P_FLOOR = 1e-6
_RESOLUTION = 0.02   # relative width of the final bisection bracket of c
_GROWTH = 1.25       # steps of c while looking for a factor that holds
_LARGEST = 50.0


@dataclass(frozen=True)
class Tuning:
    """The tuned pass-fail-exact rule for one (accuracy, confidence, pilot, check_every).

    Attributes
    ----------
    factor : float
        c, the tuning factor on the pass-fail boundary (c = 1: pass-fail's own).
    boundary : float
        F = c (z / log d)²: stop at a check point once n >= F σ̂².
    p_low : float
        The coverage is guaranteed for p in [p_low, 1 - p_low].
    coverage_bound : float
        A certified lower bound on the exact coverage over that whole range (>= confidence).
    intervals : int
        Intervals of p examined by the final check.
    seconds : float
        Time the tuning took (0 when read from a cache: ``cached``).
    """

    accuracy: float
    confidence: float
    pilot: int
    check_every: int
    factor: float
    boundary: float
    p_low: float
    coverage_bound: float
    intervals: int
    seconds: float
    algorithm: str = ALGORITHM

    def as_record(self):
        return asdict(self)


def base_boundary(accuracy, confidence):
    """B = (z / log d)², the pass-fail boundary."""
    return float((critical_value(confidence) / math.log(accuracy)) ** 2)


def p_low_for(accuracy, confidence):
    """Lower end of the guaranteed range: about (B + 10√B + 20)/UNIT_BUDGET, at least P_FLOOR."""
    b = base_boundary(accuracy, confidence)
    return float(min(0.05, max(P_FLOOR, (b + 10.0 * math.sqrt(b) + 20.0) / UNIT_BUDGET)))


def box_for(boundary, p_low):
    """(f_max, k_max) of the lattice box that holds the stops of every p in [p_low, ½] but ~1e-15."""
    f_max = int(math.ceil((boundary + 12.0 * math.sqrt(boundary) + 30.0) / p_low))
    k_max = int(math.ceil(2.0 * boundary + 15.0 * math.sqrt(2.0 * boundary) + 40.0))
    return f_max, k_max


def check(factor, accuracy, confidence, pilot, check_every, p_low):
    """The coverage certificate of the rule with tuning factor ``factor``."""
    boundary = factor * base_boundary(accuracy, confidence)
    states = first_passage_counts(boundary, pilot, check_every, *box_for(boundary, p_low))
    return certify(states, accuracy, confidence, p_low)


def tune(accuracy, confidence, pilot, check_every=1) -> Tuning:
    """Find the tuning factor by bisection (no cache; see ``guaranteed.tuning`` for the cached one)."""
    started = time.perf_counter()
    p_low = p_low_for(accuracy, confidence)
    results = {}

    def holds(factor):
        results[factor] = check(factor, accuracy, confidence, pilot, check_every, p_low)
        return results[factor].holds

    low = high = 1.0
    if not holds(1.0):
        high = _GROWTH
        while not holds(high):
            if high > _LARGEST:
                raise ValueError(f"no tuning factor up to {_LARGEST:g} guarantees the coverage for these settings")
            low, high = high, high * _GROWTH
        while high / low > 1.0 + _RESOLUTION:
            middle = math.sqrt(low * high)
            if holds(middle):
                high = middle
            else:
                low = middle
    final = results[high]
    return Tuning(float(accuracy), float(confidence), int(pilot), int(check_every), float(high),
                  float(high * base_boundary(accuracy, confidence)), p_low, float(final.lowest),
                  int(final.intervals), time.perf_counter() - started)
