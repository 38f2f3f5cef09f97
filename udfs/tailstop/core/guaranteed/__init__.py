"""pass-fail-exact: the pass-fail rule with a tuned boundary whose coverage is guaranteed, not asymptotic.

Same estimate and interval as pass-fail (p̂ = S/n, odds within [q̂/d, q̂·d]);
the stopping boundary n >= c (z / log d)² σ̂² carries a tuning factor c
found by exact computation (``bisection.tune``) so that the exact coverage at
the stop is at least the confidence for every p in [p_low, 1 - p_low],
checked over whole intervals of p (``certify``), for the pilot and
check_every as given. ``tuning`` here is the cached entry point.

Reference: Chen & Chen (2013), exact group sequential methods for
estimating a binomial proportion, J. Probab. Stat., Article 603297 (coverage
tuning of the boundary, coverage bounded over intervals of p).
"""
from __future__ import annotations

import math
import threading

from . import cache
from .lattice import stop_condition
from .bisection import ALGORITHM, Tuning, base_boundary, tune

__all__ = ["METHOD", "LARGEST_BOUNDARY", "Tuning", "tuning", "tunable", "stop_condition", "clear_memory_cache"]

METHOD = "pass-fail-exact"
# (z / log d)² beyond which tuning is refused: the lattice and the check grow about as its square
LARGEST_BOUNDARY = 450.0
_MEMORY = {}
_LOCK = threading.Lock()


def _key(accuracy, confidence, pilot, check_every):
    return f"{ALGORITHM}|{float(accuracy)!r}|{float(confidence)!r}|{int(pilot)}|{int(check_every)}"


def _check(accuracy, confidence, pilot, check_every):
    if not (math.isfinite(accuracy) and accuracy > 1):
        raise ValueError(f"accuracy must be > 1 (got {accuracy!r})")
    if not (math.isfinite(confidence) and 0 < confidence < 1):
        raise ValueError(f"confidence must be strictly between 0 and 1 (got {confidence!r})")
    if not (float(pilot).is_integer() and pilot >= 2):
        raise ValueError(f"pilot must be a whole number >= 2 (got {pilot!r})")
    if not (float(check_every).is_integer() and check_every >= 1):
        raise ValueError(f"check_every must be a whole number >= 1 (got {check_every!r})")
    if base_boundary(accuracy, confidence) > LARGEST_BOUNDARY:
        raise ValueError(
            f"pass-fail-exact is tuned where (z / log d)² is at most {LARGEST_BOUNDARY:g} (about d >= 1.1 at 95 % "
            f"confidence; here {base_boundary(accuracy, confidence):,.0f}): its exact check would take too long. "
            "Use pass-fail, whose coverage this close to d = 1 is near the nominal level, or a larger accuracy factor")


def _from_record(record, key_fields):
    try:
        result = Tuning(**record)
    except TypeError:
        return None
    fields = (result.accuracy, result.confidence, result.pilot, result.check_every, result.algorithm)
    sane = (math.isfinite(result.factor) and result.factor >= 1.0 and 0 < result.p_low < 0.5
            and math.isclose(result.boundary, result.factor * base_boundary(result.accuracy, result.confidence),
                             rel_tol=1e-12))
    return result if fields == key_fields and sane else None


def tuning(accuracy, confidence, pilot, check_every=1) -> Tuning:
    """The tuned rule for these settings: from memory, else the disk cache, else ``tune`` (then stored)."""
    _check(accuracy, confidence, pilot, check_every)
    key = _key(accuracy, confidence, pilot, check_every)
    with _LOCK:
        if key in _MEMORY:
            return _MEMORY[key]
        key_fields = (float(accuracy), float(confidence), int(pilot), int(check_every), ALGORITHM)
        record = cache.read_record(key)
        result = _from_record(record, key_fields) if record is not None else None
        if result is None:
            result = tune(float(accuracy), float(confidence), int(pilot), int(check_every))
            cache.write_record(key, result.as_record())
        _MEMORY[key] = result
        return result


def tunable(accuracy, confidence):
    """False where tuning is refused because the accuracy is too tight (see ``LARGEST_BOUNDARY``)."""
    return base_boundary(accuracy, confidence) <= LARGEST_BOUNDARY


def clear_memory_cache():
    """Forget the tunings held in this process (the disk cache stays)."""
    with _LOCK:
        _MEMORY.clear()
