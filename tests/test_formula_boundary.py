"""The formula boundary: results made in one numpy pass are the cells the cell-by-cell conversion makes.

``cell_column`` builds a column result without walking it cell by cell;
``to_cells`` hands such a column over unchanged and checks float arrays as a
whole. Each is compared here with the straightforward conversion (a list of
one-element lists walked by ``_cell_value``), cell for cell and type for
type, and the decision column with the core's own decisions.
"""
from __future__ import annotations

import gc

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tailstop.core.sequential import decision_column
from tailstop.sheet import cells as cells_module
from tailstop.sheet import formula as formula_module
from tailstop.sheet.cells import InputError, read_log_cells
from tailstop.sheet.decisions import STOP_DECISION, STOP_DECISION_COLUMN
from tailstop.sheet.formula import cell_column, to_cells


def straightforward(values):
    """The conversion a column result had before: one list per row, each cell by ``_cell_value``."""
    return [[formula_module._cell_value(value)] for value in np.asarray(values).tolist()]


def typed(rows):
    """Rows with the type of every container and cell, so that 1 and 1.0 and True differ."""
    return type(rows), [(type(row), [(type(cell), cell) for cell in row]) for row in rows]


COLUMNS = {
    "labels": np.array(["PILOT", "CONTINUE", "", "STOP", "PAST STOP", "#TAILSTOP! observations: row 6"],
                       dtype=object),
    "floats": np.array([0.25, 1e-300, -3.5, 5e-324, 1e308]),
    "integers": np.array([0, 7, -2, 2**62], dtype=np.int64),
    "booleans": np.array([True, False, True]),
    "numpy text": np.array(["a", "bc"]),
    "empty": np.array([], dtype=object),
}


@pytest.mark.parametrize("name", sorted(COLUMNS))
def test_a_built_column_is_the_straightforward_conversion(name):
    values = COLUMNS[name]
    built = to_cells(cell_column(values))
    assert typed(built) == typed(straightforward(values))  # type(built) is list: a plain list, not the marker


def test_a_column_holding_a_number_that_is_not_finite_is_refused_as_before():
    values = np.array([1.0, np.nan])
    with pytest.raises(ValueError) as built:
        cell_column(values)
    with pytest.raises(ValueError) as before:
        straightforward(values)
    assert str(built.value) == str(before.value)


@pytest.mark.parametrize("values", [np.array(["a", 1.0], dtype=object), np.array([None], dtype=object),
                                    np.array([1 + 2j]), np.array([["a"], ["b"]], dtype=object)],
                         ids=["mixed objects", "None", "complex", "two-dimensional"])
def test_a_column_of_anything_else_is_refused(values):
    with pytest.raises(TypeError):
        cell_column(values)


@pytest.mark.parametrize("enabled", [True, False])
def test_the_collector_is_left_as_it_was(enabled):
    was = gc.isenabled()
    try:
        (gc.enable if enabled else gc.disable)()
        cell_column(np.array(["x"] * 1000, dtype=object))
        assert gc.isenabled() is enabled
    finally:
        (gc.enable if was else gc.disable)()


@pytest.mark.parametrize("result", [np.array([[1.5], [2.0]]), np.array([1, 2]), np.array([[True, False]]),
                                    np.float64(0.5), np.array(3.0), [[np.float64(1.0), "x", None]],
                                    (np.int64(4), [np.array([0.5, 1.5])])],
                         ids=["float column", "integers", "booleans", "numpy scalar", "0-d array", "mixed row",
                              "nested"])
def test_generic_results_convert_as_before(result):
    # the reference is to_cells as it was: tolist() first, then every item by _cell_value
    def before(item):
        if isinstance(item, np.ndarray):
            item = item.tolist()
        if isinstance(item, (list, tuple)):
            return [before(part) if isinstance(part, (list, tuple, np.ndarray)) else formula_module._cell_value(part)
                    for part in item]
        return formula_module._cell_value(item)

    def deep_typed(value):
        if isinstance(value, list):
            return [deep_typed(part) for part in value]
        return type(value), value

    assert deep_typed(to_cells(result)) == deep_typed(before(result))


def test_a_float_array_that_is_not_finite_is_refused_with_the_cell_message():
    with pytest.raises(ValueError, match="not a finite number"):
        to_cells(np.array([[1.0], [np.inf]]))


@pytest.mark.parametrize("method, shape", [("pass-fail", None), ("known-shape", 2.4), ("fitted-shape", None)])
def test_the_decision_column_is_the_core_and_the_formula_filled_down(method, shape):
    rng = np.random.default_rng(8)
    lifetimes = np.round(rng.gamma(2.4, 520.0, size=300), 1)
    rows = [[float(v)] for v in lifetimes]
    rows[40] = [None]  # a blank row is not a unit
    rows += [[None]] * 20
    args = (1500.0, 1.5, 0.95, 10, method, shape)
    spilled = STOP_DECISION_COLUMN(rows, *args)
    assert type(spilled) is list and all(type(row) is list and len(row) == 1 for row in spilled)
    units = np.delete(lifetimes, 40)
    core = list(decision_column(units, 1500.0, 1.5, 0.95, 10, method, shape).labels)
    labels = [cell for (cell,) in spilled]
    assert labels[:40] + labels[41:] == core and labels[40] == ""
    assert "STOP" in core  # the rule stops inside this log, so every state is compared
    # and cell for cell the formula filled down over the growing ranges, type included
    filled_down = [STOP_DECISION(rows[: row + 1], *args) for row in range(len(spilled))]
    assert [(type(cell), cell) for cell in labels] == [(type(cell), cell) for cell in filled_down]


# ----------------------------------------------------------------- reading a whole-column reference

def same_log(first, second):
    """Every field of two LogCells, arrays by value and dtype."""
    for field in first.__dataclass_fields__:
        a, b = getattr(first, field), getattr(second, field)
        if isinstance(a, np.ndarray):
            assert a.dtype == b.dtype and np.array_equal(a, b), field
        else:
            assert (type(a), a) == (type(b), b), field


cell_values = st.one_of(st.none(), st.just(""), st.just("  "), st.floats(allow_nan=False, width=64),
                        st.integers(-3, 5000), st.sampled_from(["1500+", "n/a", "#N/A", "12.5"]))


@settings(max_examples=300, deadline=None)
@given(head=st.lists(st.lists(cell_values, min_size=1, max_size=2), max_size=12),
       tail=st.lists(st.sampled_from([[None], [""], ["  "], [None, None], None]), max_size=200))
def test_rows_left_out_below_the_log_change_nothing(head, tail):
    rows = head + tail
    # a tuple of rows is read without leaving anything out first: the reference reading
    try:
        reference = read_log_cells(tuple(rows), "observations")
    except InputError as problem:
        with pytest.raises(InputError, match=str(problem)):
            read_log_cells(rows, "observations")
        return
    same_log(read_log_cells(rows, "observations"), reference)
    for single_column in (True, False):
        try:
            expected = read_log_cells(tuple(rows), "observations", single_column=single_column)
        except InputError:
            with pytest.raises(InputError):
                read_log_cells(rows, "observations", single_column=single_column)
            continue
        same_log(read_log_cells(rows, "observations", single_column=single_column), expected)


def test_a_whole_column_reference_reads_as_its_log():
    log = [[float(v)] for v in np.random.default_rng(2).gamma(2.0, 300.0, size=500)]
    whole = log + [[None]] * (1_048_576 - 500)
    read, alone = read_log_cells(whole, "observations"), read_log_cells(log, "observations")
    assert read.n_rows == 1_048_576 and alone.n_rows == 500
    for field in ("values", "rows", "survivors"):
        assert np.array_equal(getattr(read, field), getattr(alone, field))
    assert read.filled_rows == alone.filled_rows == 500


@settings(max_examples=300, deadline=None)
@given(st.lists(st.sampled_from([[None], [""], [None], [None], [1.0], ["  "], (None,), [None, None]]),
                max_size=300))
def test_the_blank_rows_at_the_end_are_counted_exactly(rows):
    # check value: counted one row at a time from the bottom
    expected = 0
    for row in reversed(rows):
        if row not in ([None], [""]):
            break
        expected += 1
    assert cells_module._blank_rows_at_end(rows) == expected
    assert cells_module._blank_rows_at_end_by_stretches(rows) == expected


def test_a_filled_row_far_below_the_log_is_found():
    rows = [[1.0]] * 10 + [[None]] * 5000
    rows[4000] = [2.0]
    assert cells_module._blank_rows_at_end(rows) == 5010 - 4001


def test_a_column_of_choices_is_the_column_of_their_values():
    choices = ("", "PILOT", "CONTINUE", "#TAILSTOP! observations: row 3 holds text 'x'")
    codes = np.array([1, 1, 2, 0, 3, 3], dtype=np.int8)
    expected = np.array([choices[code] for code in codes], dtype=object)
    assert typed(to_cells(cell_column(codes, choices=choices))) == typed(straightforward(expected))
    with pytest.raises(TypeError):
        cell_column(codes, choices=("a", None))
    with pytest.raises(TypeError):
        cell_column(np.array([0.0]), choices=("a",))


def test_a_column_leaves_objects_the_host_froze_frozen():
    # the column builder ages its new lists with gc.freeze()/unfreeze(); a host process that froze
    # objects itself (common practice before os.fork) must find them still frozen afterwards
    import gc

    from tailstop.sheet.formula import cell_column

    kept = [[i] for i in range(1000)]
    gc.freeze()
    try:
        frozen = gc.get_freeze_count()
        assert frozen > 0
        cell_column(np.arange(5.0))
        assert gc.get_freeze_count() == frozen
    finally:
        gc.unfreeze()
    del kept
