"""The demo scenario: an invented bench test of solenoid valves.

Everything here is made up for the demonstration — no real product or data.
A maker of irrigation solenoid valves runs valves on a cycling bench until
the seat leaks; the warranty covers 1,500 thousand cycles (kcycles). The
question: what share of valves outlast 1,500 kcycles, with the odds known
within a factor 1.5 at 95 % confidence?
"""
from __future__ import annotations

import numpy as np

THRESHOLD = 1500.0        # kcycles, the warranty limit
ACCURACY = 1.5            # odds within a factor 1.5
CONFIDENCE = 0.95
PILOT = 10
UNIT = "kcycles"
# The invented "true" behaviour of the bench valves (never shown to the rule).
TRUE_SHAPE = 2.4
TRUE_SCALE = 520.0
# The planning guess the team brings to the meeting.
GUESS_SHAPE = 2.0
GUESS_SCALE = 600.0
SEED = 20261201
LOG_LENGTH = 400          # rows of bench results available in the demo log


def bench_log(length=LOG_LENGTH, seed=SEED):
    """Invented cycles-to-leak of successive valves, rounded to 0.1 kcycles."""
    rng = np.random.default_rng(seed)
    return np.round(rng.gamma(TRUE_SHAPE, TRUE_SCALE, size=length), 1)
