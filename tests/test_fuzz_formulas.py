"""Every formula survives spreadsheet-like junk: a number, a documented array or a #TAILSTOP! text.

Property-based (hypothesis). The argument strategies mix values a formula
accepts with everything a spreadsheet can pass: blanks, NaN, ±inf, 0,
negatives, 1e308, 1e-308, numeric and other text, booleans, error cells
(the integers Windows Excel passes, and error texts), ragged rows, empty
ranges. A call must come back within a generous bound: a hang is a failure.
"""
from __future__ import annotations

import inspect
import math
import re
import signal

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import tailstop.sheet as sheet

DECISION_STATES = {"PILOT", "CONTINUE", "STOP", "PAST STOP", ""}
DECISION_COLUMNS = {"STOP_DECISION_COLUMN"}
HANG_SECONDS = 60  # a bound for a hang, far above any legitimate call; speed lives in benchmarks/

junk = st.one_of(
    st.none(),
    st.sampled_from([0, 0.0, -1.0, -0.0, 1e308, -1e308, 1e-308, 5e-324, float("nan"), float("inf"), float("-inf"),
                     True, False, "", " ", "n/a", "1e5", "-3", "12,5", "inf", "nan", "#N/A", "#VALUE!", "#DIV/0!",
                     "#TAILSTOP! x", -2146826246, -2146826281, -2146826259, 2**70, "pass-fail", "known-shape"]),
    st.floats(allow_nan=True, allow_infinity=True),
    st.integers(min_value=-2**64, max_value=2**64),
    st.text(max_size=10),
)

PLAUSIBLE = {
    "threshold": st.floats(1.0, 5000.0),
    "shape": st.floats(0.2, 20.0),
    "scale": st.floats(1.0, 3000.0),
    "accuracy": st.floats(1.05, 5.0),
    "confidence": st.floats(0.5, 0.999),
    "pilot": st.integers(2, 40),
    "units": st.integers(1, 10_000),
    "p_guess": st.floats(0.001, 0.999),
    "check_every": st.integers(1, 10),
    "replications": st.integers(1, 400),
    "seed": st.integers(0, 2**32),
    "method": st.sampled_from(["pass-fail", "known-shape", "fitted-shape", "Pass Fail", None]),
}

lifetimes = st.one_of(st.floats(0.1, 1e4), st.integers(1, 10_000))
good_column = st.lists(st.lists(lifetimes, min_size=1, max_size=1), min_size=0, max_size=60)
junk_range = st.one_of(
    junk,
    st.lists(st.lists(st.one_of(junk, lifetimes), max_size=3), max_size=12),  # ragged rows
    st.lists(st.one_of(junk, lifetimes), max_size=12),  # a flat list
    st.just([]),
    st.just([[]]),
)


def argument_strategy(name):
    if name in {"observations", "pilot_observations", "survivors"}:
        return st.one_of(good_column, junk_range)
    plausible = PLAUSIBLE.get(name, st.floats(0.01, 1e4))
    return st.one_of(plausible, plausible, junk)


# text inside a table or a list of notes must not be a leaked Python failure
LEAKED = re.compile(r"Traceback|internal error|\b[A-Z][A-Za-z]*(Error|Exception)\b|\bnan\b|\binf\b")


def acceptable(result, strict_text=False):
    """A number, a #TAILSTOP! text, a decision, or an array of those (tables and notes may hold other text).

    ``strict_text``: the text cells of an array must be decisions or #TAILSTOP! texts (decision columns).
    """
    if isinstance(result, str):
        return result.startswith("#TAILSTOP! ") or result in DECISION_STATES
    if isinstance(result, bool):
        return False
    if isinstance(result, int):
        return True
    if isinstance(result, float):
        return math.isfinite(result)
    if isinstance(result, list):
        return all(isinstance(row, list) and all(cell is None or acceptable(cell) or (
            not strict_text and isinstance(cell, str) and not LEAKED.search(cell)) for cell in row) for row in result)
    return False


class Hang(Exception):
    pass


def call_bounded(function, args):
    def alarm(signum, frame):
        raise Hang(f"{function.__name__} took over {HANG_SECONDS} s")

    previous = signal.signal(signal.SIGALRM, alarm)
    signal.alarm(HANG_SECONDS)
    try:
        return function(*args)
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, previous)


@pytest.mark.parametrize("name", sorted(sheet.FORMULAS))
def test_formula_survives_junk(name):
    function = sheet.FORMULAS[name]
    parameters = list(inspect.signature(function.tailstop_body).parameters)
    strategy = st.tuples(*(argument_strategy(p) for p in parameters))
    examples = 40 if name.startswith("PLAN") else 120

    @settings(max_examples=examples, deadline=None, suppress_health_check=list(HealthCheck), database=None)
    @given(strategy)
    def check(args):
        result = call_bounded(function, list(args))
        assert acceptable(result, strict_text=name in DECISION_COLUMNS), (name, args, result)

    check()


@pytest.mark.parametrize("name", sorted(sheet.FORMULAS))
def test_formula_with_missing_optionals_and_blanks(name):
    function = sheet.FORMULAS[name]
    parameters = inspect.signature(function.tailstop_body).parameters
    required = [p for p, q in parameters.items() if q.default is inspect.Parameter.empty]
    # every argument blank
    assert acceptable(call_bounded(function, [None] * len(required)))
    # an empty range and a range of blanks
    for empty in ([], [[None]] * 5):
        args = [empty if p in {"observations", "pilot_observations"} else 1.5 for p in required]
        result = call_bounded(function, args)
        assert acceptable(result), (name, result)
