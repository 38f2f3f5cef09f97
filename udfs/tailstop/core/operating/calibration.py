"""Calibration: the smallest critical value of the stopping boundary whose coverage reaches nominal."""
from __future__ import annotations

import math

from .. import accuracy as _accuracy
from .results import Calibration, confidence_for_z


def calibrate(evaluate, confidence, *, step=0.02, largest_inflation=3.0, resolution=1e-3,
              progress=None) -> Calibration:
    """Smallest critical value z' >= z whose coverage reaches the nominal confidence.

    Parameters
    ----------
    evaluate : callable
        ``evaluate(stop_z) -> OperatingCharacteristics`` for the plan with the
        stopping boundary (z'/log d)² σ̂²; e.g.
        ``lambda z: pass_fail_exact(p, d, conf, m, stop_z=z)``. For simulated
        methods keep the seed fixed, so that every z' sees the same random
        numbers (common random numbers make coverage(z') nearly monotone).
    confidence : float
        Nominal confidence; z = Φ⁻¹((1 + confidence)/2).
    step : float
        Scan z' = z (1 + step·j), j = 0, 1, ...; the first point that reaches the
        nominal coverage is then refined by bisection to ``resolution``·z.
    largest_inflation : float
        Give up (``reached = False``) beyond z' = largest_inflation · z.

    Notes
    -----
    Exact pass-fail coverage is a step function of z' and need not be
    monotone; the result is the smallest z' on the scan grid, refined
    between it and the previous grid point, so z_calibrated - step falls short
    of nominal while z_calibrated reaches it. For simulated methods
    ``z_range`` brackets z_calibrated by the z' where coverage ± 2 standard
    errors reaches nominal.
    """
    z = float(_accuracy.critical_value(confidence))
    seen = {}

    def at(value):
        key = round(value, 12)
        if key not in seen:
            seen[key] = evaluate(value)
        return seen[key]

    def reaches(value, slack=0.0):
        result = at(value)
        return result.coverage + slack * result.coverage_se >= confidence

    at_z = at(z)
    steps = int(math.ceil((largest_inflation - 1.0) / step))
    found = None
    for j in range(steps + 1):
        value = z * (1.0 + step * j)
        if progress is not None:
            progress(min(0.8, 0.8 * j / max(1, steps)))
        if reaches(value):
            found = j
            break
    if found is None:
        return Calibration(z, math.nan, math.nan, at_z, at_z, step * z, None, False)
    high = z * (1.0 + step * found)
    low = z * (1.0 + step * (found - 1)) if found > 0 else None
    if low is not None:
        while high - low > resolution * z:
            middle = 0.5 * (low + high)
            if reaches(middle):
                high = middle
            else:
                low = middle
    if not at_z.exact:
        # scan on until coverage - 2 se reaches nominal too, for the uncertainty of z'
        for j in range(found, steps + 1):
            if reaches(z * (1.0 + step * j), slack=-2.0):
                break
    if progress is not None:
        progress(1.0)
    calibrated = at(high)
    z_range = None if at_z.exact else _z_range(seen, confidence)
    return Calibration(z, high, confidence_for_z(high), at_z, calibrated, (high - low) if low else 0.0, z_range, True)


def _z_range(seen, confidence):
    """Smallest evaluated z' with coverage + 2 se >= nominal, and with coverage - 2 se >= nominal."""
    values = sorted(seen)
    optimistic = next((z for z in values if seen[z].coverage + 2 * seen[z].coverage_se >= confidence), math.nan)
    pessimistic = next((z for z in values if seen[z].coverage - 2 * seen[z].coverage_se >= confidence), math.nan)
    return optimistic, pessimistic
