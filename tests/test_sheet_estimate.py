"""The issue-one formulas called as a spreadsheet calls them, on openpyxl fixture workbooks."""
from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import special, stats

from conftest import range_values, write_log
from tailstop.sheet import (
    ACCURACY_FOR_UNITS,
    FORMULAS,
    GAMMA_FIT_PVALUE,
    GAMMA_FIT_SCALE,
    GAMMA_FIT_SHAPE,
    TAIL_ODDS_BOUNDS,
    TAIL_PROB,
    TAIL_PROB_BOUNDS,
    TAIL_PROB_EST,
    UNITS_REQUIRED,
    UNITS_REQUIRED_FROM_P,
)


def is_message(value):
    return isinstance(value, str) and value.startswith("#TAILSTOP! ")


def test_tail_prob_matches_scipy_gamma_survival():
    # check value: scipy.stats.gamma.sf, a general-purpose reference, in the body of the distribution
    # tolerance 1e-13: scipy's gammaincc and ours, a few roundings apart in the body
    assert TAIL_PROB(1500.0, 2.4, 520.0) == pytest.approx(stats.gamma.sf(1500.0, 2.4, scale=520.0), rel=1e-13)


def test_estimates_from_a_fixture_workbook(fixture_log):
    path, values = fixture_log
    column = range_values(path, "Log", "B2:B61")
    lifetimes = np.array([v for v in values if v is not None])
    c = 1200.0
    # pass-fail: the share beyond the threshold, counted independently here
    assert TAIL_PROB_EST(column, c) == np.mean(lifetimes > c)
    # fitted-shape: scipy.stats.gamma.fit (floc=0) then the survival function — a general-purpose reference
    a, _, s = stats.gamma.fit(lifetimes, floc=0)
    # tolerance 1e-6 against scipy's gamma fit (its optimiser agrees with the ML to about 7 digits), 1e-13 for
    # the known-shape closed form, 1e-7 on the fitted shape and scale
    assert TAIL_PROB_EST(column, c, "fitted-shape") == pytest.approx(stats.gamma.sf(c, a, scale=s), rel=1e-6)
    # known-shape: ML scale is mean/shape (closed form), then gammaincc
    assert TAIL_PROB_EST(column, c, "known-shape", 2.0) == pytest.approx(
        special.gammaincc(2.0, c / (lifetimes.mean() / 2.0)), rel=1e-13)
    assert GAMMA_FIT_SHAPE(column) == pytest.approx(a, rel=1e-7)
    assert GAMMA_FIT_SCALE(column) == pytest.approx(s, rel=1e-7)
    assert 0 < GAMMA_FIT_PVALUE(column) <= 1


def test_bounds_follow_method_section_2(fixture_log):
    path, values = fixture_log
    column = range_values(path, "Log", "B2:B61")
    for method in ("pass-fail", "fitted-shape"):
        p = TAIL_PROB_EST(column, 1200.0, method)
        q = p / (1 - p)
        [[odds_low, odds_high]] = TAIL_ODDS_BOUNDS(column, 1200.0, 1.5, method)
        [[low, high]] = TAIL_PROB_BOUNDS(column, 1200.0, 1.5, method)
        # check value: METHOD.md §2 closed forms; tolerance 1e-12: a few roundings of q
        assert odds_low == pytest.approx(q / 1.5, rel=1e-12) and odds_high == pytest.approx(q * 1.5, rel=1e-12)
        assert low == pytest.approx(q / (1.5 + q), rel=1e-12) and high == pytest.approx(1.5 * q / (1 + 1.5 * q), rel=1e-12)
        assert low < p < high


def test_planning_sizes_by_hand():
    # METHOD.md §4 by hand, pass-fail at p = 0.5: (1.959964/ln 1.5)² · 4 = 93.465 → 94 units
    assert UNITS_REQUIRED_FROM_P(0.5, 1.5, 0.95) == 94
    # exponential (shape 1) known-shape with t = c/s = ln 2 (p = 0.5): σ² = t²/(1-p)² = 4 ln²2 = 1.921812
    # n* = 23.36626 · 1.921812 = 44.905 → 45 units
    assert UNITS_REQUIRED(math.log(2) * 100, 1, 100, 1.5, 0.95, "known-shape") == 45
    # and the inverse: 45 units give an accuracy slightly better than 1.5
    d = ACCURACY_FOR_UNITS(45, math.log(2) * 100, 1, 100, 0.95, "known-shape")
    assert 1.49 < d < 1.5


def test_units_required_orders_the_methods():
    # knowing the shape never needs more units than fitting it, and the model-free count needs the most here
    args = (1500.0, 2.0, 600.0, 1.5, 0.95)
    known, fitted, passfail = (UNITS_REQUIRED(*args, m) for m in ("known-shape", "fitted-shape", "pass-fail"))
    assert known <= fitted <= passfail


def test_whole_column_reference_is_cheap_and_correct():
    # A reference like B:B passes a million rows, nearly all blank.
    column = [[float(v)] for v in (100.0, 900.0, 2500.0, 40.0, 3100.0)] + [[None]] * (1_048_576 - 5)
    # check value: 2 of the 5 values (2500, 3100) exceed 1000, counted by hand: 0.4
    assert TAIL_PROB_EST(column, 1000.0) == 0.4


@pytest.mark.parametrize("cell,expected", [
    ("n/a", "row 3 holds text 'n/a'"),
    (-2146826246, "row 3 holds a spreadsheet error"),
    ("#DIV/0!", "row 3 holds a spreadsheet error"),
    (True, "row 3 holds TRUE, not a number"),
    (0.0, "row 3 holds 0; lifetimes must be > 0"),
    (-5.0, "row 3 holds -5; lifetimes must be > 0"),
])
def test_bad_cells_are_named_by_position(cell, expected):
    column = [[10.0], [20.0], [cell], [30.0]]
    assert TAIL_PROB_EST(column, 15.0) == f"#TAILSTOP! observations: {expected}"


def test_position_in_a_two_column_range():
    assert TAIL_PROB_EST([[1.0, 2.0], [3.0, "x"]], 2.0) == "#TAILSTOP! observations: row 2, column 2 holds text 'x'"


def test_numeric_text_is_read_as_a_number(tmp_path):
    path = write_log(tmp_path / "text.xlsx", ["120", "1300.5", 800.0, "2000"])
    # check value: counted by hand (1300.5 and 2000 of the 4 values)
    assert TAIL_PROB_EST(range_values(path, "Log", "B2:B5"), 1000.0) == 0.5  # 1300.5 and 2000 of 4


@pytest.mark.parametrize("call,fragment", [
    (lambda: TAIL_PROB("abc", 1, 1), "threshold holds text 'abc'"),
    (lambda: TAIL_PROB(None, 1, 1), "threshold is blank"),
    (lambda: TAIL_PROB(1, 0, 1), "shape must be > 0"),
    (lambda: TAIL_PROB(1, 1, -3), "scale must be > 0"),
    (lambda: TAIL_PROB_EST([[1.0]], 1), "at least 2 lifetimes"),
    (lambda: TAIL_PROB_EST([[1.0], [2.0]], 1, "weibull"), "method must be one of"),
    (lambda: TAIL_PROB_EST([[1.0], [2.0]], 1, "known-shape"), "needs the gamma shape"),
    (lambda: TAIL_PROB_BOUNDS([[1.0], [2.0]], 1, 1.0), "accuracy must be > 1"),
    (lambda: TAIL_PROB_BOUNDS([[1.0], [2.0]], 5, 1.5), "no unit exceeded the threshold"),
    (lambda: TAIL_ODDS_BOUNDS([[10.0], [20.0]], 5, 1.5), "no unit stayed below the threshold"),
    (lambda: UNITS_REQUIRED(100, 2, 50, 1.5, 1.2), "confidence must be between 0 and 1"),
    (lambda: UNITS_REQUIRED(100, 2, 50, 1.5, 0), "confidence must be between 0 and 1"),
    (lambda: UNITS_REQUIRED(100, 2, 50, 1.5, 95), "for 95 % enter 0.95"),
    (lambda: UNITS_REQUIRED_FROM_P(1.0, 1.5, 0.9), "p_guess must be strictly between 0 and 1"),
    (lambda: ACCURACY_FOR_UNITS(10.5, 100, 2, 50, 0.9), "units must be a whole number"),
    (lambda: GAMMA_FIT_SHAPE([[5.0], [5.0], [5.0]]), "all lifetimes are equal"),
    (lambda: UNITS_REQUIRED(1e6, 2, 1, 1.5, 0.95), "one side of the threshold"),
    (lambda: UNITS_REQUIRED(100000, 2, 600, 1.5, 0.95), "more than any test can run"),
    (lambda: ACCURACY_FOR_UNITS(1, 100000, 2, 600, 0.95), "beyond any number"),
])
def test_bad_arguments_say_what_to_fix(call, fragment):
    result = call()
    assert is_message(result) and fragment in result, result


def test_pass_fail_survivors_count_as_beyond_the_threshold():
    # 5 units: two failures beyond 1000, one survivor taken off at 1000 (counts), two failures below
    column = [[1200.0], ["1000+"], [300.0], [1500.0], [700.0]]
    # check value: by hand, 3 of 5 beyond 1000 (1200, 1000+, 1500); q = 1.5, p_low = q/(d+q) (METHOD.md §2),
    # tolerance 1e-12 for rounding
    assert TAIL_PROB_EST(column, 1000.0) == 0.6
    [[low, high]] = TAIL_PROB_BOUNDS(column, 1000.0, 2.0)
    assert low == pytest.approx(1.5 / (2 + 1.5), rel=1e-12)  # q = 0.6/0.4 = 1.5, METHOD.md §2
    # check value: by hand, product limit at 1100 with the unit at 1000 suspended below it:
    # 300 fails among 5 at risk, 700 among 4: Ŝ = (4/5)(3/4) = 0.6
    # tolerance 1e-15: a product of two exact fractions
    assert TAIL_PROB_EST(column, 1100.0) == pytest.approx(0.6, rel=1e-15)
    assert not is_message(TAIL_PROB_EST(column, 1000.0, "fitted-shape"))
    assert not is_message(GAMMA_FIT_SHAPE(column))        # the fit reads 1000+ as suspended
    refused = GAMMA_FIT_PVALUE(column)
    assert is_message(refused) and "units marked +" in refused and "FIT_COMPARE" in refused, refused


def test_method_names_are_forgiving():
    column = [[1.0], [5.0], [9.0]]
    assert TAIL_PROB_EST(column, 4.0, "Fitted Shape") == TAIL_PROB_EST(column, 4.0, "fitted-shape")
    assert TAIL_PROB_EST(column, 4.0, "") == TAIL_PROB_EST(column, 4.0)


cell_values = st.one_of(
    st.none(), st.floats(allow_nan=True, allow_infinity=True), st.integers(-2**63, 2**63),
    st.sampled_from([-2146826246, -2146826281, "#N/A", "#VALUE!", "", " ", "1e5", "-3", "n/a", True, False]),
    st.text(max_size=12),
)
ranges = st.one_of(cell_values, st.lists(st.lists(cell_values, max_size=4), max_size=8))


@settings(max_examples=150, deadline=None)
@given(ranges, cell_values, cell_values, cell_values, cell_values)
def test_junk_never_raises(observations, a, b, c, d):
    for name, function in FORMULAS.items():
        if not name.startswith(("TAIL", "UNITS", "ACCURACY", "GAMMA_FIT_SHAPE", "GAMMA_FIT_SCALE")):
            continue
        arity = function.tailstop_body.__code__.co_argcount
        args = [observations, a, b, c, d, a][:arity]
        result = function(*args)
        assert isinstance(result, (int, float, list)) or is_message(result), (name, args, result)
        if isinstance(result, float):
            assert math.isfinite(result)


def test_python_callers_may_name_the_arguments(fixture_log):
    path, values = fixture_log
    column = range_values(path, "Log", "B2:B61")
    lifetimes = np.array([v for v in values if v is not None])
    c = 1200.0
    # check value: scipy.stats.gamma.fit (floc=0) then the survival function — a general-purpose reference
    a, _, s = stats.gamma.fit(lifetimes, floc=0)
    named = TAIL_PROB_EST(column, c, method="fitted-shape")
    # tolerance 1e-6: scipy's optimiser agrees with the ML to about 7 digits
    assert named == pytest.approx(stats.gamma.sf(c, a, scale=s), rel=1e-6)
    assert TAIL_PROB_EST(observations=column, threshold=c, method="fitted-shape") == named
    # the same values by name and by position, for a formula with a shape and one with a range result
    assert TAIL_PROB_EST(column, c, shape=2.0, method="known-shape") == TAIL_PROB_EST(column, c, "known-shape", 2.0)
    assert TAIL_PROB_BOUNDS(column, c, accuracy=1.5, method="fitted-shape") == TAIL_PROB_BOUNDS(
        column, c, 1.5, "fitted-shape")
    # bad input given by name is still answered in the cell's way
    assert TAIL_PROB_EST(column, c, method="no such method").startswith("#TAILSTOP!")


def test_a_wrong_argument_name_is_a_python_error():
    with pytest.raises(TypeError, match="methd"):
        TAIL_PROB_EST([[1.0], [2.0]], 1.5, methd="pass-fail")
    with pytest.raises(TypeError):
        TAIL_PROB_EST([[1.0], [2.0]], 1.5, "pass-fail", method="pass-fail")
