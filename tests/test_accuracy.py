"""Fixed-accuracy intervals and sample sizes."""
from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from tailstop.core.accuracy import accuracy_for_units, critical_value, odds_interval, probability_interval, units_for_accuracy, whole_units


def test_critical_value():
    # check value: NIST/SEMATECH §1.3.6.7.1 — z = 1.959964 for 95 % two-sided
    # tolerance: half a unit in the 7th printed decimal of the table
    assert float(critical_value(0.95)) == pytest.approx(1.959964, abs=5e-7)
    # check value: 2.575829 for 99 % two-sided (same table)
    assert float(critical_value(0.99)) == pytest.approx(2.575829, abs=5e-7)


def test_units_formula_by_hand():
    # METHOD.md §4 by hand: pass-fail at p = 0.5 (σ² = 4), d = 1.5, 95 %:
    # (1.959964 / ln 1.5)² · 4 = (1.959964 / 0.4054651)² · 4 = 4.833866² · 4 = 23.36626 · 4 = 93.4650 → 94 units
    # (z to 7 digits from NIST/SEMATECH §1.3.6.7.1 moves n* by at most 5e-5)
    n_star = float(units_for_accuracy(4.0, 1.5, 0.95))
    assert n_star == pytest.approx(93.4650, abs=2e-4)
    assert whole_units(n_star) == 94


def test_whole_units_does_not_round_up_rounding_error():
    # property: a relative excess of 1e-13 (about 450 doubles at 100) is rounding, not a unit short;
    # 100.001 is a thousandth of a unit short and must round up (ceil, METHOD.md §4)
    assert whole_units(100.0 * (1 + 1e-13)) == 100
    assert whole_units(100.001) == 101


def _mp_n_star(p, accuracy, confidence):
    """n* = (z / ln d)² / (p (1 - p)) at 40 digits (pass-fail σ², METHOD.md §3-§4)."""
    import mpmath

    with mpmath.workdps(40):
        z = mpmath.sqrt(2) * mpmath.erfinv(mpmath.mpf(confidence))
        p = mpmath.mpf(p)
        return (z / mpmath.log(mpmath.mpf(accuracy))) ** 2 / (p * (1 - p))


def test_whole_units_never_rounds_a_large_n_star_down():
    # check value: mpmath at 40 digits, n* = 4,548,484,529.96 for p = 1e-6, d = 1.05, 99.9 %;
    # a slack proportional to n* (4.5 units here) used to give 4,548,484,526
    reference = _mp_n_star(1e-6, 1.05, 0.999)
    assert 4548484529.9 < reference < 4548484530
    n_star = float(units_for_accuracy(1.0 / (1e-6 * (1 - 1e-6)), 1.05, 0.999))
    assert whole_units(n_star) == 4548484530
    assert whole_units(4548484529.96) == 4548484530
    # property (METHOD.md §4, ceil): every fractional part above the slack rounds up, at any size
    for whole in (3.0, 1e6, 4.5e9, 2.0**52 / 4):
        assert whole_units(whole + 0.25) == whole + 1


def test_units_required_rounds_up_a_gamma_plan():
    import mpmath

    from tailstop.sheet import UNITS_REQUIRED

    # check value: mpmath at 40 digits — p = Q(0.3, 6590.9013792814685 / 600) and the pass-fail
    # n* = 422,880,869.378…, so the plan needs 422,880,870 units
    with mpmath.workdps(40):
        p = mpmath.gammainc(mpmath.mpf(0.3), mpmath.mpf(6590.9013792814685) / 600, mpmath.inf, regularized=True)
    reference = _mp_n_star(p, 1.1, 0.95)
    assert 422880869.3 < reference < 422880869.4
    assert UNITS_REQUIRED(6590.9013792814685, 0.3, 600, 1.1, 0.95) == 422880870


def test_whole_units_of_a_tiny_plan_is_one_unit():
    # property: ceil of any n* in (0, 1] is one unit (METHOD.md §4)
    assert whole_units(1e-12) == 1
    assert whole_units(0.5) == 1


@given(st.floats(0.01, 1e4), st.floats(1.001, 20.0), st.floats(0.5, 0.999))
def test_accuracy_for_units_inverts_units_for_accuracy(sigma2, d, confidence):
    n = float(units_for_accuracy(sigma2, d, confidence))
    # property: METHOD.md §4, d = exp(z σ / √n) inverts n* = (z / log d)² σ²; tolerance 1e-9 relative
    # leaves room for the square root and exp/log round trip near d = 1.001 (log d ~ 1e-3 loses ~3 digits)
    assert float(accuracy_for_units(sigma2, n, confidence)) == pytest.approx(d, rel=1e-9)


@given(st.floats(-700, 700), st.floats(1.0001, 1e6))
def test_intervals_are_ordered_and_inside_the_unit_interval(log_odds, d):
    odds = odds_interval(log_odds, d)
    prob = probability_interval(log_odds, d)
    assert odds.low <= math.exp(log_odds) <= odds.high or math.isinf(odds.high)
    assert 0 <= prob.low <= prob.high <= 1
    # property (METHOD.md §2): the probability bounds are the odds bounds mapped by q/(1+q);
    # tolerance 1e-12: a few double roundings in q/(1+q) versus the code's own route
    if 1e-300 < odds.low < 1e300 and odds.high < 1e300:
        assert prob.low == pytest.approx(odds.low / (1 + odds.low), rel=1e-12)
        assert prob.high == pytest.approx(odds.high / (1 + odds.high), rel=1e-12)


def test_interval_formulas_of_method_section_2():
    # check value: METHOD.md §2 closed form, p_low = q/(d+q), p_high = d q/(1 + d q)
    # tolerance 1e-15: q = 1/4 and d = 2 are exact in binary, so only a last-bit rounding may differ
    q, d = 0.25, 2.0
    assert float(probability_interval(np.log(q), d).low) == pytest.approx(q / (d + q), rel=1e-15)
    assert float(probability_interval(np.log(q), d).high) == pytest.approx(d * q / (1 + d * q), rel=1e-15)
    assert float(odds_interval(np.log(q), d).low) == pytest.approx(q / d, rel=1e-15)
