"""The stopping rule at exactly its boundary: STOP when n = (z / log d)² σ̂²_n, not one unit later.

METHOD.md §5: STOP at the first n >= m with n >= (z / log d)² σ̂²_n. A rule
written with ">" instead of ">=" differs only where n equals the boundary,
which random logs almost never hit, so these tests put n on the boundary
exactly, in double precision: the accuracy d (and, by whole floating-point
steps, the confidence) are searched so that the product the rule compares
equals n bit for bit. One floating-point step of d lower moves the boundary
just above n, and the rule must then go on. Both the vectorized rule
(``rule.stops``) and the sequential core behind the formulas
(``sequential.decision_column``, ``units_needed_now``, ``two_stage_plan``)
are checked, through the core and through the cell formulas.

The pass-fail cases need no search in σ̂²: with S beyond the threshold out of
n = 2S units, the share p̂ = S/n = ½ and σ̂² = 1/(p̂(1 - p̂)) = 4 exactly
(METHOD.md §5 and docs/method.md, hand computation), so the boundary is n = 4·(z / log d)², and
(z / log d)² = n / 4 is a power of two for n = 16.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from tailstop.core.methods import SufficientStatistics
from tailstop.core.rule import boundary_factor, stops
from tailstop.core.sequential import decision_column, two_stage_plan, units_needed_now
from tailstop.sheet import STOP_DECISION, STOP_DECISION_COLUMN, TWO_STAGE_UNITS, UNITS_NEEDED_NOW

THRESHOLD = 1000.0
BELOW, BEYOND = 700.0, 1400.0  # one unit on each side of the threshold


def floats_around(x, count):
    """x and the ``count`` doubles on either side of it, nearest first."""
    up, down, found = x, x, [x]
    for _ in range(count):
        up, down = float(np.nextafter(up, math.inf)), float(np.nextafter(down, 0.0))
        found += [up, down]
    return found


def boundary_plan(sigma2, n, confidence=0.9):
    """(accuracy, confidence) with boundary_factor(d, confidence) · σ² == n exactly, or None.

    Starts from the hand formula d = exp(z √(σ²/n)) (METHOD.md §4 inverted) and
    steps d and the confidence by whole doubles.
    """
    for level in floats_around(confidence, 12):
        z = stats.norm.isf((1.0 - level) / 2.0)
        for accuracy in floats_around(math.exp(z * math.sqrt(sigma2 / n)), 8):
            if boundary_factor(accuracy, level) * sigma2 == n:
                return accuracy, level
    return None


def step_down(accuracy):
    """The next double below d: a slightly tighter accuracy, so a boundary just above n."""
    return float(np.nextafter(accuracy, 0.0))


def alternating(units):
    """BELOW, BEYOND, BELOW, … : after every even count exactly half the units are beyond the threshold."""
    return [BELOW if i % 2 == 0 else BEYOND for i in range(units)]


@pytest.fixture(scope="module")
def exact_pass_fail():
    # hand computation: n = 16, S = 8 gives σ̂² = 4, so the boundary is 16 when (z / log d)² = 4
    plan = boundary_plan(4.0, 16.0)
    assert plan is not None
    accuracy, confidence = plan
    z = stats.norm.isf((1 - confidence) / 2)
    # tolerance 1e-14: scipy's isf and the package's z may differ by a rounding or two
    assert (z / math.log(accuracy)) ** 2 == pytest.approx(4.0, rel=1e-14)  # the plan is what it says
    return accuracy, confidence


def test_pass_fail_rule_stops_exactly_on_the_boundary(exact_pass_fail):
    accuracy, confidence = exact_pass_fail
    log = np.array(alternating(24))
    statistics = SufficientStatistics.running(log, THRESHOLD)
    on = stops(statistics, THRESHOLD, accuracy, confidence, 2, "pass-fail")
    # hand computation: before unit 16, σ̂² >= 4 (p̂(1 - p̂) <= 1/4) puts the boundary at >= 16 > n
    assert np.flatnonzero(on)[0] == 15
    below = stops(statistics, THRESHOLD, step_down(accuracy), confidence, 2, "pass-fail")
    assert not below[15]
    # hand computation: n = 17 with S = 8: p̂ = 8/17, σ̂² = 289/(8·9) = 4.0139, boundary 16.06 < 17
    assert np.flatnonzero(below)[0] == 16


def test_pass_fail_decision_column_stops_exactly_on_the_boundary(exact_pass_fail):
    accuracy, confidence = exact_pass_fail
    log = alternating(24)
    column = decision_column(log, THRESHOLD, accuracy, confidence, 2, "pass-fail")
    assert column.stop_units == 16
    assert list(column.labels[:17]) == ["PILOT"] + ["CONTINUE"] * 14 + ["STOP", "PAST STOP"]
    assert decision_column(log, THRESHOLD, step_down(accuracy), confidence, 2, "pass-fail").stop_units == 17
    # the pilot is a check point too: a pilot of exactly 16 units stops at once
    assert decision_column(log, THRESHOLD, accuracy, confidence, 16, "pass-fail").stop_units == 16
    # with checks every 7th unit after a pilot of 2, unit 16 is a check point (2 + 2·7)
    assert decision_column(log, THRESHOLD, accuracy, confidence, 2, "pass-fail", check_every=7).stop_units == 16


def test_pass_fail_formulas_stop_exactly_on_the_boundary(exact_pass_fail):
    accuracy, confidence = exact_pass_fail
    column = [[value] for value in alternating(20)]
    shown = [row[0] for row in STOP_DECISION_COLUMN(column, THRESHOLD, accuracy, confidence, 2)]
    assert shown[14:17] == ["CONTINUE", "STOP", "PAST STOP"]
    assert STOP_DECISION(column[:16], THRESHOLD, accuracy, confidence, 2) == "STOP"
    assert STOP_DECISION(column[:16], THRESHOLD, step_down(accuracy), confidence, 2) == "CONTINUE"
    # UNITS_NEEDED_NOW rounds the real-valued count 16 up to 16, not 17
    assert UNITS_NEEDED_NOW(column[:16], THRESHOLD, accuracy, confidence) == 16
    assert UNITS_NEEDED_NOW(column[:16], THRESHOLD, step_down(accuracy), confidence) == 17


def test_two_stage_total_on_the_boundary(exact_pass_fail):
    accuracy, confidence = exact_pass_fail
    # hand computation: a pilot of 8 with S = 4 gives p̂ = 4/8 = ½, σ̂² = 4, total (z/log d)² · 4 = 16 exactly
    pilot = alternating(8)
    plan = two_stage_plan(pilot, THRESHOLD, accuracy, confidence, "pass-fail")
    assert (plan.sigma2, plan.total_units, plan.final_batch) == (4.0, 16, 8)
    assert two_stage_plan(pilot, THRESHOLD, step_down(accuracy), confidence, "pass-fail").total_units == 17
    assert TWO_STAGE_UNITS([[v] for v in pilot], THRESHOLD, accuracy, confidence) == 16
    needed = units_needed_now(alternating(16), THRESHOLD, accuracy, confidence, "pass-fail")
    assert (needed.sigma2, needed.needed, needed.whole) == (4.0, 16.0, 16)


def gamma_log():
    """Invented lifetimes for the gamma methods (seeded draws): demo data, never a check value."""
    return np.round(np.random.default_rng(3).gamma(1.0, 100.0, size=40), 1)


@pytest.mark.parametrize("method,shape", [("known-shape", 1.0), ("fitted-shape", None)])
def test_gamma_methods_stop_exactly_on_the_boundary(method, shape):
    # the check point is the pilot, n = 32 (a power of two keeps an exact boundary within reach); the
    # threshold is varied until a (d, confidence) puts the boundary on 32 bit for bit
    log, n = gamma_log()[:32], 32
    for threshold in (100.0, 110.0, 120.0, 130.0, 140.0, 150.0):
        sigma2 = units_needed_now(log, threshold, 2.0, 0.9, method, shape).sigma2
        plan = boundary_plan(sigma2, float(n))
        if plan is not None:
            break
    assert plan is not None
    accuracy, confidence = plan
    assert units_needed_now(log, threshold, accuracy, confidence, method, shape).needed == n
    assert decision_column(log, threshold, accuracy, confidence, n, method, shape).stop_units == n
    assert decision_column(log, threshold, step_down(accuracy), confidence, n, method, shape).stop_units is None
    statistics = SufficientStatistics.running(log, threshold)
    assert stops(statistics, threshold, accuracy, confidence, n, method, shape)[n - 1]
    assert not stops(statistics, threshold, step_down(accuracy), confidence, n, method, shape)[n - 1]
    column = [[float(v)] for v in log]
    assert STOP_DECISION(column, threshold, accuracy, confidence, n, method, shape) == "STOP"
    assert STOP_DECISION(column, threshold, step_down(accuracy), confidence, n, method, shape) == "CONTINUE"
