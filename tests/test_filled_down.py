"""Formulas filled down a log over growing ranges: the one-pass evaluation against cell-by-cell evaluation.

Three levels, each compared with the straightforward way, value for value
and type for type:

* ``cells.ColumnPrefixes``: every prefix cut from one reading of the column
  against ``read_log_cells`` on that prefix;
* ``sheet.filled_down.filled_down``: every cell against the formula called on
  its own range (``FORMULAS[name](rows[:end], ...)``), for every formula the
  recalculation takes out of the engine, with the arguments it takes;
* ``recalc`` of whole books: the values with the filled-down columns taken out
  of the engine against the engine computing every cell itself.
"""
from __future__ import annotations

import numpy as np
import openpyxl
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import special, stats

import tailstop.sheet  # noqa: F401 - registers every formula
from test_formula_boundary import same_log
from tailstop.core.accuracy import critical_value
from tailstop.sheet.cells import ColumnPrefixes, read_log_cells
from tailstop.sheet.filled_down import filled_down, takes_a_log_first
from tailstop.sheet.formula import FORMULAS
from tailstop.workbooks import filled_down as engine_side
from tailstop.workbooks import recalc as recalc_module
from tailstop.workbooks.recalc import evaluate_workbook

FILLED_DOWN = [name for name in FORMULAS if takes_a_log_first(name)]


def typed(values):
    return [(type(value), value) for value in values]


log_cells = st.one_of(
    st.floats(1.0, 5000.0).map(lambda v: round(v, 1)), st.floats(1.0, 5000.0).map(lambda v: round(v, 1)),
    st.none(), st.just(""), st.just("  "), st.sampled_from(["2100+", "900+", "n/a", "#N/A", "0", "1e400"]),
    st.integers(-2, 4000), st.just(float("nan")))


@settings(max_examples=200, deadline=None)
@given(st.lists(log_cells, min_size=1, max_size=40))
def test_every_prefix_is_what_reading_it_alone_gives(values):
    rows = [[value] for value in values]
    prefixes = ColumnPrefixes(rows)
    for end in range(1, len(rows) + 1):
        same_log(prefixes.log_of(end), read_log_cells(rows[:end]))
    seen = [(index, list(prefix), prefix.log.n_rows) for index, prefix in prefixes.prefixes([end for end in (3, 1, 2, 3) if end <= len(rows)])]
    assert all(rows_seen == rows[:n] for _, rows_seen, n in seen)


def test_the_formulas_taken_out_of_the_engine():
    # every formula whose first argument is a log and whose result is one cell; not the column or table ones
    assert {"STOP_DECISION", "TAIL_PROB_EST", "UNITS_NEEDED_NOW", "TWO_STAGE_UNITS"} <= set(FILLED_DOWN)
    assert not {"STOP_DECISION_COLUMN", "TAIL_PROB_BOUNDS", "TAIL_METHOD_NOTES", "TAIL_PROB"} & set(FILLED_DOWN)


ARGUMENTS = {
    "STOP_DECISION": [(1500.0, 1.4, 0.9, 4), (1500.0, 1.5, 0.9, 3, "known-shape", 2.4),
                      (1500.0, 2.0, 0.9, 3, "fitted-shape"), (1500.0, 1.5, 0.9, 3, None, None, 3),
                      (1500.0, 1.6, 0.9, 3, "known-shape", 1.8, None, "weibull"), (1500.0, 0.5, 0.9, 3)],
    "TAIL_PROB_EST": [(1500.0,), (1500.0, "known-shape", 2.4), (1500.0, "fitted-shape"),
                      (1500.0, "known-shape", 0.9, "lognormal"), ("x",)],
    "UNITS_NEEDED_NOW": [(1500.0, 1.3, 0.95), (1500.0, 1.5, 0.9, "known-shape", 2.4),
                         (1500.0, 2.0, 0.9, "fitted-shape")],
    "TWO_STAGE_UNITS": [(1500.0, 1.3, 0.95), (1500.0, 1.5, 0.9, "fitted-shape")],
}


def invented_log(seed, size, kinds=True):
    """Invented gamma lifetimes with, when asked, blank rows, survivors, a stray text and a zero."""
    rng = np.random.default_rng(seed)
    rows = []
    for value in np.round(rng.gamma(2.4, 520.0, size=size), 1):
        draw = rng.random()
        if kinds and draw < 0.08:
            rows.append([None])
        elif kinds and draw < 0.1:
            rows.append(["2100+" if value > 1500 else "700+"])
        elif kinds and draw < 0.11:
            rows.append([""])
        else:
            rows.append([float(value)])
    return rows


@pytest.mark.parametrize("name", FILLED_DOWN)
@pytest.mark.parametrize("kinds", [False, True], ids=["lifetimes only", "blanks and survivors"])
def test_filled_down_is_the_formula_on_each_range(name, kinds):
    rows = invented_log(4, 90, kinds)
    if kinds:
        rows[70] = ["n/a"]  # a cell that cannot be read: every range reaching it says so
    rows += [[None]] * 5  # ranges running past the log
    ends = list(range(1, len(rows) + 1))
    for arguments in ARGUMENTS.get(name, [()]):
        fast = filled_down(name, rows, ends, arguments)
        one_by_one = [FORMULAS[name](rows[:end], *arguments) for end in ends]
        assert typed(fast) == typed(one_by_one), (name, arguments)


def test_filled_down_takes_the_ends_in_any_order():
    rows = invented_log(6, 60)
    ends = [60, 3, 17, 17, 44, 1]
    for name in ("STOP_DECISION", "UNITS_NEEDED_NOW"):
        arguments = ARGUMENTS[name][0]
        assert typed(filled_down(name, rows, ends, arguments)) == \
            typed([FORMULAS[name](rows[:end], *arguments) for end in ends])


def test_the_decisions_below_a_bad_cell_and_past_the_log():
    rows = invented_log(9, 40, kinds=False) + [["n/a"]] + [[None]] * 10
    decisions = filled_down("STOP_DECISION", rows, list(range(1, 52)), (1500.0, 1.4, 0.9, 4))
    message = "#TAILSTOP! observations: row 41 holds text 'n/a'"
    assert decisions[40:] == [message] * 11
    assert decisions[:4] == ["PILOT", "PILOT", "PILOT", decisions[3]] and decisions[3] != message


def test_the_critical_value_is_scipys_normal_quantile_bit_for_bit():
    # check value: scipy.stats.norm.isf, the general-purpose reference
    levels = np.concatenate([np.linspace(1e-9, 1 - 1e-12, 20001), [0.5, 0.9, 0.95, 0.99, 0.999999]])
    assert np.array_equal(critical_value(levels), stats.norm.isf((1 - levels) / 2))
    assert float(critical_value(0.95)) == float(stats.norm.isf((1 - 0.95) / 2))
    assert abs(float(critical_value(0.95)) - 1.959964) < 1e-6  # check value: NIST/SEMATECH §1.3.6.7.1
    assert -special.ndtri(0.025) == stats.norm.isf(0.025)


# ----------------------------------------------------------------- whole books through the engine


def cell_by_cell(path, monkeypatch):
    """The book computed with no column taken out: the engine evaluates every cell itself."""
    with monkeypatch.context() as patch:
        patch.setattr(recalc_module, "_calculate_with_filled_down_columns", lambda path: None)
        return evaluate_workbook(path)


def same_values(first, second):
    """Equal cell for cell; a blank cell the engine was never asked about is None either way."""
    differing = [key for key in set(first) | set(second)
                 if (type(first.get(key)), repr(first.get(key))) != (type(second.get(key)), repr(second.get(key)))]
    assert not differing, [(key, first.get(key), second.get(key)) for key in differing[:5]]
    assert first


def taken_out(path, monkeypatch):
    """The columns the recalculation takes out of the engine for this book."""
    found = []
    original = engine_side.take_out

    def recording(*arguments):
        columns = original(*arguments)
        found.extend(columns)
        return columns

    with monkeypatch.context() as patch:
        patch.setattr(engine_side, "take_out", recording)
        values = evaluate_workbook(path)
    return found, values


def live_log(path, rows=50, seed=3, settings_formula=None, readers=True):
    """An invented live log: lifetimes (some blank, survivors, a formula, a bad cell), tailstop columns filled down."""
    rng = np.random.default_rng(seed)
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "Bench log"
    sheet.append(["unit", "hours", "decision", "estimate", "needed", "fitted", "every other", "setting", "value"])
    for row, (label, value) in enumerate([("threshold", 1500.0), ("accuracy", 1.6), ("confidence", 0.9),
                                          ("pilot", 5), ("method", "pass-fail"), ("shape", None),
                                          ("check every", None)], start=2):
        sheet.cell(row, 8, label)
        sheet.cell(row, 9, value)
    if settings_formula:
        sheet["I5"] = settings_formula
    for index in range(rows):
        row = index + 2
        value = float(round(rng.gamma(2.4, 520.0), 1))
        draw = rng.random()
        if draw < 0.08:
            value = None
        elif draw < 0.1:
            value = ""
        elif draw < 0.12:
            value = "2100+"
        elif draw < 0.13 and row > 2:
            value = f"=B{row - 1}*1.1"
        elif draw < 0.14:
            value = int(value)
        if index == rows - 8:
            value = "n/a"
        sheet.cell(row, 1, index + 1)
        sheet.cell(row, 2, value)
        sheet.cell(row, 3, f"=STOP_DECISION($B$2:B{row},$I$2,$I$3,$I$4,$I$5,$I$6,$I$7,$I$8)")
        sheet.cell(row, 4, f"=TAIL_PROB_EST($B$2:B{row},$I$2,$I$6,$I$7)")
        sheet.cell(row, 5, f"=_xludf.UNITS_NEEDED_NOW($B$2:B{row},$I$2,$I$3,$I$4)")
        sheet.cell(row, 6, f'=tailstop.stop_decision($B$2:B{row},1500,1.4,0.9,4,"fitted-shape")')
        if row % 2 == 0:
            sheet.cell(row, 7, f'=TAIL_PROB_EST($B$2:B{row},1500,"known-shape",2.4)')
    if readers:
        sheet["J2"] = '=COUNTIF(C2:C200,"CONTINUE")'
        sheet["J3"] = "=D10*2"
        sheet["J4"] = "=E20+1"
    book.save(path)
    return path


@pytest.mark.parametrize("readers", [True, False], ids=["cells read by other formulas", "read by none"])
def test_a_live_log_recalculates_to_the_same_values(tmp_path, monkeypatch, readers):
    path = live_log(tmp_path / "log.xlsx", readers=readers)
    columns, values = taken_out(path, monkeypatch)
    assert sorted((column.name, column.sheet, len(column.cells)) for column in columns) == sorted([
        ("STOP_DECISION", "Bench log", 50), ("TAIL_PROB_EST", "Bench log", 50),
        ("UNITS_NEEDED_NOW", "Bench log", 50), ("STOP_DECISION", "Bench log", 50),
        ("TAIL_PROB_EST", "Bench log", 25)])
    same_values(values, cell_by_cell(path, monkeypatch))
    assert values[("BENCH LOG", "C40")] in {"CONTINUE", "STOP", "PAST STOP"}  # the cells were computed
    if readers:
        assert values[("BENCH LOG", "J3")] == 2 * values[("BENCH LOG", "D10")]  # readers see the values


def test_a_column_whose_settings_read_the_column_is_computed_cell_by_cell(tmp_path, monkeypatch):
    # the pilot setting reads a decision: the first pass cannot know it, so the book is computed cell by cell
    path = live_log(tmp_path / "log.xlsx", rows=30, settings_formula='=IF(C3="PILOT",5,6)')
    fallbacks = []
    original = engine_side.put_back

    def recording(*arguments):
        result = original(*arguments)
        fallbacks.append(result is None)
        return result

    monkeypatch.setattr(engine_side, "put_back", recording)
    values = evaluate_workbook(path)
    assert fallbacks == [True]
    monkeypatch.undo()
    same_values(values, cell_by_cell(path, monkeypatch))


def test_a_column_reading_its_own_cells_stays_with_the_engine(tmp_path, monkeypatch):
    book = openpyxl.Workbook()
    sheet = book.active
    for row in range(2, 12):
        sheet.cell(row, 2, 100.0 * row)
        # the decisions read the column they stand in: not a prefix of other cells, so the engine keeps them
        sheet.cell(row, 3, f"=TAIL_PROB_EST($C$2:C{row},500)")
        sheet.cell(row, 4, f"=TAIL_PROB_EST($B$2:B{row},D2)")
    book.save(tmp_path / "self.xlsx")
    columns, values = taken_out(tmp_path / "self.xlsx", monkeypatch)
    assert columns == []  # column C reads itself; column D's setting D2 is one of its own cells
    same_values(values, cell_by_cell(tmp_path / "self.xlsx", monkeypatch))


@pytest.mark.parametrize("formula_text", [
    "=STOP_DECISION($B$2:B{row},1500,1.4,0.9,4,,,)",  # omitted arguments stay with the engine
    "=STOP_DECISION($B$2:B{row},1000+500,1.4,0.9,4)",  # an expression without references is a constant
    "=STOP_DECISION(B$2:B{row},$I$2,1.4,0.9,4)",
    "=STOP_DECISION($B$2:$B${row},$I$2,1.4,0.9,4)",
    "=STOP_DECISION($B$2:B30,$I$2,1.4,0.9,4)",  # one range for every cell
    "=STOP_DECISION('Bench log'!$B$2:B{row},$I$2,1.4,0.9,4)",  # a sheet name: stays with the engine
    "=IF(STOP_DECISION($B$2:B{row},$I$2,1.4,0.9,4)=\"STOP\",1,0)",  # inside an expression: the engine
])
def test_other_ways_of_writing_the_column_give_the_engines_values(tmp_path, monkeypatch, formula_text):
    path = live_log(tmp_path / "log.xlsx", rows=30, readers=False)
    book = openpyxl.load_workbook(path)
    sheet = book["Bench log"]
    for row in range(2, 32):
        sheet.cell(row, 3, formula_text.format(row=row))
    book.save(path)
    _, values = taken_out(path, monkeypatch)
    same_values(values, cell_by_cell(path, monkeypatch))


def test_split_arguments_respects_quotes_and_parentheses():
    assert engine_side.split_arguments('$B$2:B5, "a,b" ,MAX(1,2),,TRUE') == ["$B$2:B5", '"a,b"', "MAX(1,2)", "",
                                                                            "TRUE"]


@pytest.mark.parametrize("guard", ["IFERROR(LEN(TRIM(B{row})),1)=0", "ISBLANK(B{row})"], ids=["trim", "isblank"])
@pytest.mark.parametrize("call", ["STOP_DECISION($B$2:B{row},$I$2,$I$3,$I$4,$I$5)", "TAIL_PROB_EST($B$2:B{row},$I$2)",
                                  "UNITS_NEEDED_NOW($B$2:B{row},$I$2,$I$3,$I$4)"])
def test_a_column_guarded_against_blank_rows_gives_the_engines_values(tmp_path, monkeypatch, call, guard):
    # as annotate --live writes a decision: =IF(IFERROR(LEN(TRIM(B9)),1)=0,"",STOP_DECISION($B$2:B9,…)), and as
    # it wrote one before, =IF(ISBLANK(B9),"",…); blank rows (spaces and tabs too) below a bad cell show "" through
    # the guard where the call alone would show the bad cell's message; the bad cell itself shows the message
    path = live_log(tmp_path / "log.xlsx", rows=40, readers=False)
    book = openpyxl.load_workbook(path)
    sheet = book["Bench log"]
    sheet["B20"], sheet["B21"], sheet["B22"], sheet["B23"] = "n/a", None, "", '=""'
    sheet["B24"], sheet["B25"] = "   ", "\t"
    for row in range(2, 42):
        sheet.cell(row, 3, f'=IF({guard.format(row=row)},"",{call.format(row=row)})')
    book.save(path)
    columns, values = taken_out(path, monkeypatch)
    assert any(column.guarded for column in columns)
    same_values(values, cell_by_cell(path, monkeypatch))
