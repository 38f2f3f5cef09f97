"""A range that takes the log's header along (a whole-column reference, B:B): the caption is skipped.

Text above the first lifetime of a range is its header; text below it is still a bad cell named by its
row, and a formula read from the log (a summary row such as =AVERAGE(...)) is named as a formula.
"""
from __future__ import annotations

import inspect

import numpy as np
import pytest

from conftest import range_values
from tailstop.sheet.cells import read_log_cells
from tailstop.sheet import FORMULAS, STOP_DECISION_COLUMN, TAIL_PROB_EST

ARGUMENTS = {"threshold": 1200.0, "accuracy": 1.5, "confidence": 0.95, "pilot": 5, "method": None,
             "shape": None, "check_every": None, "model": None}


def call(name, column):
    function = FORMULAS[name]
    parameters = list(inspect.signature(function).parameters)
    return function(column, *(ARGUMENTS[parameter] for parameter in parameters[1:]))


RANGE_FORMULAS = sorted(name for name, function in FORMULAS.items() if function.tailstop_spec.ranges)


@pytest.mark.parametrize("name", RANGE_FORMULAS)
def test_every_formula_skips_the_header_of_a_whole_column(fixture_log, name):
    path, _ = fixture_log
    column = range_values(path, "Log", "B2:B61")
    with_header = range_values(path, "Log", "B1:B61")
    assert with_header[0] == ["Hours to failure"]
    plain, headed = call(name, column), call(name, with_header)
    assert not (isinstance(headed, str) and headed.startswith("#TAILSTOP!")), headed
    if name == "STOP_DECISION_COLUMN":
        assert headed == [[""]] + plain  # the header row gets no decision; every row keeps its own
    else:
        assert headed == plain


def test_a_whole_column_reference_with_title_rows_and_blanks(fixture_log):
    path, values = fixture_log
    # column B of a sheet as a whole-column reference passes it: a title, a blank, the header, the log, blanks
    column = [["Bearing life test"], [None], ["Hours to failure"]] + range_values(path, "Log", "B2:B61")
    column += [[None]] * (1_048_576 - len(column))
    lifetimes = np.array([value for value in values if value is not None])
    # pass-fail: the share of units beyond the threshold, counted here independently
    assert TAIL_PROB_EST(column, 1200.0) == np.mean(lifetimes > 1200.0)
    decisions = STOP_DECISION_COLUMN(column, 1200.0, 1.5, 0.95, 5)
    assert decisions[:3] == [[""], [""], [""]] and decisions[3] == ["PILOT"]


def test_text_below_the_first_lifetime_is_still_named_by_its_row():
    column = [["Hours"], [800.0], [1900.0], ["n/a"], [2500.0]]
    assert TAIL_PROB_EST(column, 1500.0) == "#TAILSTOP! observations: row 4 holds text 'n/a'"


@pytest.mark.parametrize("cell", ["1500+", "#N/A", "=AVERAGE(B2:B9)", "12.5"])
def test_what_is_never_a_header(cell):
    reading = read_log_cells([[cell], [800.0], [1900.0]])
    if cell in ("1500+", "12.5"):
        assert reading.values.size == 3 and reading.problem is None  # a survivor and numeric text are units
    else:
        assert reading.problem_row == 0


def test_a_summary_row_in_the_log_is_named_as_a_formula():
    column = [["Hours"], [800.0], [1900.0], ["=AVERAGE(B2:B3)"]]
    assert TAIL_PROB_EST(column, 1500.0) == (
        "#TAILSTOP! observations: row 4 holds a formula (=AVERAGE(B2:B3)); a summary row inside the log would be "
        "counted as a unit: move it below the range or out of the column")
