"""Whatever goes wrong inside a formula reaches the cell as one short line starting ``#TAILSTOP! ``.

The fuzz tests (tests/test_fuzz_formulas.py) seldom reach an internal error,
so here every kind of failure is raised on purpose inside a formula built
with the same ``@formula`` decorator as the real ones, and inside real
formulas by making the core fail.
"""
from __future__ import annotations

import numpy as np
import pytest

import tailstop.sheet as sheet
from tailstop.sheet.cells import InputError
from tailstop.sheet.formula import FORMULAS, formula

PREFIX = "#TAILSTOP! "  # STYLE.md and RULES.md: every cell-visible error starts with this text


def assert_cell_text(result):
    assert isinstance(result, str), result
    assert result.startswith(PREFIX), result
    # one line, no traceback, short enough to read in a cell (300 characters: common practice, no source)
    assert "\n" not in result and "Traceback" not in result and len(result) < 300, result


FAILURES = {
    "input": InputError("shape must be a positive number (got -1)"),
    "value": ValueError("threshold must be a positive number"),
    "arithmetic": ZeroDivisionError("float division by zero"),
    "overflow": OverflowError("math range error"),
    "key": KeyError("gamma"),
    "index": IndexError("index 3 is out of bounds"),
    "type": TypeError("unsupported operand"),
    "runtime": RuntimeError("solver did not converge"),
    "recursion": RecursionError("maximum recursion depth exceeded"),
    "memory": MemoryError(),
    "assertion": AssertionError("internal check"),
}


@pytest.fixture
def failing_formula():
    """A throwaway formula raising the exception it is given (removed from the registry afterwards)."""
    before = dict(FORMULAS)

    @formula(failure="what to raise")
    def TEST_ONLY_FAILING(failure):
        """Raises its argument (test only)."""
        raise failure

    yield TEST_ONLY_FAILING
    FORMULAS.clear()
    FORMULAS.update(before)


@pytest.mark.parametrize("kind", sorted(FAILURES))
def test_every_kind_of_failure_becomes_cell_text(failing_formula, kind):
    result = failing_formula(FAILURES[kind])
    assert_cell_text(result)
    if kind in {"input", "value"}:
        assert str(FAILURES[kind]).strip("'") in result  # a message saying what to fix is shown as it is
    if kind == "memory":
        assert "memory" in result  # says what to change: a smaller range or fewer replications


@pytest.fixture
def returning_formula():
    before = dict(FORMULAS)

    @formula(result="what to return")
    def TEST_ONLY_RETURNING(result):
        """Returns its argument (test only)."""
        return result

    yield TEST_ONLY_RETURNING
    FORMULAS.clear()
    FORMULAS.update(before)


@pytest.mark.parametrize("result", [float("nan"), float("inf"), np.float64("-inf"), np.array([1.0, np.nan]),
                                    [[1.0], [float("inf")]]], ids=["nan", "inf", "numpy -inf", "array", "column"])
def test_a_result_that_is_not_a_finite_number_becomes_cell_text(returning_formula, result):
    assert_cell_text(returning_formula(result))


def test_numpy_results_become_plain_cell_values(returning_formula):
    # property: numpy scalars and arrays reach the cell as the same plain Python values
    assert returning_formula(np.float64(0.25)) == 0.25 and type(returning_formula(np.float64(0.25))) is float
    assert returning_formula(np.int64(7)) == 7 and type(returning_formula(np.int64(7))) is int
    assert returning_formula(np.array([[1.5], [2.0]])) == [[1.5], [2.0]]


def core_failure(*args, **kwargs):
    raise RuntimeError("core failure made by the test")


@pytest.mark.parametrize("name, args, target", [
    ("TAIL_PROB", (1000.0, 2.0, 600.0), "tailstop.sheet.estimate.get_model"),
    ("TAIL_PROB_EST", ([[500.0], [1500.0], [900.0]], 1000.0), "tailstop.sheet.estimate.estimate_tail"),
    ("STOP_DECISION", ([[500.0], [1500.0], [900.0]], 1000.0, 1.5, 0.95, 2),
     "tailstop.sheet.decisions.decision_column"),
])
def test_a_failing_core_reaches_the_cell_as_text(monkeypatch, name, args, target):
    monkeypatch.setattr(target, core_failure)
    result = sheet.FORMULAS[name](*args)
    assert_cell_text(result)
    assert "internal error" in result  # says it is not the user's input
