"""A rigorous lower bound on the exact coverage of [q̂/d, q̂·d] over whole intervals of p.

The coverage at p is C(p) = Σ_s w_s p^k (1 - p)^f · 1{|log q̂_s - log q| <= log d}
over the stop states s (``lattice.StopStates``), q = p/(1 - p). On an
interval [a, b] of p:

* a state whose q̂ lies in [q(b)/d, q(a)·d] is covered at every p of the
  interval; the others are dropped (they add >= 0);
* each term w p^k (1 - p)^f is unimodal in p (its maximum is at p = k/n),
  so on [a, b] it is at least min(term at a, term at b).

Hence C(p) >= Σ over the always-covered states of min(term(a), term(b)) for
every p in [a, b] — the coverage bounded from its monotone parts (Chen &
Chen 2013). The bound tends to the coverage as the interval shrinks, except
across a jump (p where some q̂·d^±1 = q), where it tends to the lower side:
exactly the infimum. Intervals whose bound falls short of the confidence are
halved (in log-odds) until the bound settles above it, or a point below it is
found, or the halves get too narrow (a jump whose lower side is short).

The rule is symmetric in k and f and the interval in log q̂ ± log d, so
C(p) = C(1 - p): intervals of [p_low, ½] certify [p_low, 1 - p_low].

Reference: Chen & Chen (2013), J. Probab. Stat., Article 603297; the argument in full: docs/method.md.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .lattice import StopStates

__all__ = ["Certificate", "coverage_at", "certify"]

# log q̂ within this of a limit is treated as on it (never counted as covered for a whole interval)
_TIE = 1e-11
# relative allowance for rounding in the summed masses of a bound
_ROUNDING = 1e-8
_FIRST_INTERVALS = 128
_NARROWEST = 1e-9        # in log-odds: an interval this narrow that still falls short fails
_MOST_INTERVALS = 60_000


@dataclass(frozen=True)
class Certificate:
    """Outcome of a coverage check over [p_low, 1 - p_low].

    Attributes
    ----------
    holds : bool
        True when every interval's bound reached the confidence.
    lowest : float
        holds: the lowest interval bound (a guaranteed lower bound on the
        coverage over the whole range); otherwise the coverage (or bound)
        found short.
    where : tuple
        The interval (a, b) of ``lowest`` (a == b for a point).
    intervals : int
        Intervals examined.
    reason : str
        'certified', 'point below' or 'did not settle'.
    """

    holds: bool
    lowest: float
    where: tuple
    intervals: int
    reason: str


def _log_odds(p):
    return math.log(p) - math.log1p(-p)


def _probability(x):
    return 1.0 / (1.0 + math.exp(-x))


def coverage_at(states: StopStates, p, accuracy):
    """Exact coverage at p of the closed interval [q̂/d, q̂·d] (ties within 1e-11 in log q̂ count as covered)."""
    x, log_d = _log_odds(p), math.log(accuracy)
    part = states.between(x - log_d - _TIE, x + log_d + _TIE)
    return float(states.mass(p, part).sum())


def interval_bound(states: StopStates, a, b, accuracy):
    """Lower bound on the coverage at every p in [a, b] (see the module notes)."""
    log_d = math.log(accuracy)
    part = states.between(_log_odds(b) - log_d + _TIE, _log_odds(a) + log_d - _TIE)
    if part.stop <= part.start:
        return 0.0
    low = np.minimum(states.log_mass(a, part), states.log_mass(b, part))
    return float(np.exp(low).sum()) * (1.0 - _ROUNDING)


def certify(states: StopStates, accuracy, confidence, p_low) -> Certificate:
    """Is the exact coverage >= confidence for every p in [p_low, 1 - p_low]? (see the module notes)"""
    edges = np.linspace(_log_odds(p_low), 0.0, _FIRST_INTERVALS + 1)
    for x in edges:
        value = coverage_at(states, _probability(x), accuracy)
        if value < confidence:
            return Certificate(False, value, (_probability(x),) * 2, 0, "point below")
    stack = [(edges[i], edges[i + 1]) for i in range(_FIRST_INTERVALS)][::-1]
    lowest, where, count = math.inf, None, 0
    while stack:
        x0, x1 = stack.pop()
        count += 1
        a, b = _probability(x0), _probability(x1)
        bound = interval_bound(states, a, b, accuracy)
        if bound >= confidence:
            if bound < lowest:
                lowest, where = bound, (a, b)
            continue
        middle = 0.5 * (x0 + x1)
        value = coverage_at(states, _probability(middle), accuracy)
        if value < confidence:
            return Certificate(False, value, (_probability(middle),) * 2, count, "point below")
        if x1 - x0 < _NARROWEST * max(1.0, abs(x0)) or count > _MOST_INTERVALS:
            return Certificate(False, bound, (a, b), count, "did not settle")
        stack.append((middle, x1))
        stack.append((x0, middle))
    return Certificate(True, lowest, where, count, "certified")
