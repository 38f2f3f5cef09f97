"""Headless recalculation and the cached-value writer."""
from __future__ import annotations

import types
import zipfile

import numpy as np
import openpyxl
import pytest
from openpyxl.worksheet.formula import ArrayFormula
from scipy import special, stats

import tailstop.sheet
from tailstop.workbooks.cached_values import CellError, save_with_cached_values, set_formula
from tailstop.workbooks.recalc import recalc
from tailstop.workbooks.safe_io import WorkbookRefused

THRESHOLD, SHAPE, SCALE, ACCURACY = 250.0, 2.0, 100.0, 2.0


def lifetimes():
    """Invented bench lifetimes (seeded gamma draws), with one blank."""
    values = [float(v) for v in np.round(np.random.default_rng(3).gamma(SHAPE, SCALE, size=40), 1)]
    values[12] = None
    return values


def recalc_book(path):
    """Sheet 'Life log': lifetimes in A2:A41, parameters in B1:B4, formulas in C and D:E."""
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "Life log"
    sheet["A1"] = "Hours"
    for row, value in enumerate(lifetimes(), start=2):
        sheet.cell(row, 1, value)
    for cell, value in zip(("B1", "B2", "B3", "B4"), (THRESHOLD, SHAPE, SCALE, ACCURACY)):
        sheet[cell] = value
    sheet["C1"] = "=TAIL_PROB(B1,B2,B3)"
    sheet["C2"] = '=TAIL_PROB_EST(A2:A41,B1,"pass-fail")'
    sheet["C3"] = "=1-_xlfn.GAMMA.DIST(B1,B2,B3,TRUE)"
    sheet["C4"] = "=C1-C3+SUM(A2:A41)"
    sheet["C5"] = "=TAIL_PROB(-1,B2,B3)"
    sheet["C6"] = '=IF(ISNUMBER(C5),"number","message")'
    sheet["C7"] = "=1/0"
    sheet["C8"] = "=_xludf.TAIL_PROB(3.841,0.5,2)"
    sheet["C9"] = "=NOT_A_FUNCTION(1)"
    sheet["D1"] = ArrayFormula("D1:E1", '=TAIL_PROB_BOUNDS(A2:A41,B1,B4,"pass-fail")')
    sheet["C10"] = "=E1-D1"
    book.save(path)
    return path


@pytest.fixture
def recalculated(tmp_path):
    source = recalc_book(tmp_path / "log.xlsx")
    result = recalc(source, tmp_path / "log-values.xlsx")
    values = openpyxl.load_workbook(result.path, data_only=True)["Life log"]
    return source, result, values


def test_tailstop_formula_matches_scipy(recalculated):
    _, _, values = recalculated
    # check value: scipy.special.gammaincc as the reference library
    # tolerance 1e-12: gammaincc in the body, through the formula engine and a cell
    assert values["C1"].value == pytest.approx(special.gammaincc(SHAPE, THRESHOLD / SCALE), rel=1e-12)


def test_built_in_gamma_distribution_matches_scipy(recalculated):
    _, _, values = recalculated
    # check value: scipy.stats.gamma.sf as the reference library
    # tolerance 1e-10: the engine's built-in GAMMA.DIST, another implementation, not held to our 1e-12
    assert values["C3"].value == pytest.approx(stats.gamma.sf(THRESHOLD, SHAPE, scale=SCALE), rel=1e-10)


def test_chi_square_critical_value_through_udf_prefix(recalculated):
    _, _, values = recalculated
    # check value: NIST/SEMATECH §1.3.6.7.4, chi-square 1 df upper 0.05 point 3.841 (gamma shape 1/2, scale 2)
    # tolerance 2e-4: the table gives 3 decimals, which moves p by at most about 1e-4
    assert values["C8"].value == pytest.approx(0.05, abs=2e-4)


def test_range_with_blanks_reaches_the_formula(recalculated):
    _, _, values = recalculated
    observed = [value for value in lifetimes() if value is not None]
    # common practice, no published source: the pass-fail estimate is the share above the threshold
    assert values["C2"].value == pytest.approx(sum(value > THRESHOLD for value in observed) / len(observed))


def test_array_result_fills_its_block(recalculated):
    _, _, values = recalculated
    observed = [value for value in lifetimes() if value is not None]
    share = sum(value > THRESHOLD for value in observed) / len(observed)
    odds = share / (1 - share)
    # check value: METHOD.md §2, p_low = q/(d+q), p_high = d q/(1 + d q)
    # tolerance 1e-12: the closed forms in doubles, through the engine
    assert values["D1"].value == pytest.approx(odds / (ACCURACY + odds), rel=1e-12)
    assert values["E1"].value == pytest.approx(ACCURACY * odds / (1 + ACCURACY * odds), rel=1e-12)
    assert values["C10"].value == pytest.approx(values["E1"].value - values["D1"].value, rel=1e-12)


def test_ordinary_formulas_and_errors(recalculated):
    _, result, values = recalculated
    observed = [value for value in lifetimes() if value is not None]
    # check value: the plain sum of the observed values (Python's sum); tolerance 1e-12 for the engine's order
    assert values["C4"].value == pytest.approx(sum(observed), rel=1e-12)
    assert values["C5"].value.startswith("#TAILSTOP!")
    assert values["C6"].value == "message"
    assert values["C7"].value == "#DIV/0!" and values["C7"].data_type == "e"
    assert values["C9"].value == "#NAME?"
    assert {cell for _, cell, _ in result.errors} == {"C5", "C7", "C9"}


def test_formulas_are_kept_and_calculation_on_load_is_off(recalculated):
    _, result, _ = recalculated
    sheet = openpyxl.load_workbook(result.path)["Life log"]
    assert sheet["C1"].value == "=TAIL_PROB(B1,B2,B3)"
    assert isinstance(sheet["D1"].value, ArrayFormula) and sheet["D1"].value.ref == "D1:E1"
    with zipfile.ZipFile(result.path) as archive:
        assert b'fullCalcOnLoad="0"' in archive.read("xl/workbook.xml")


def test_source_is_untouched_and_output_never_overwritten(recalculated, tmp_path):
    source, result, _ = recalculated
    before = source.read_bytes()
    with pytest.raises(FileExistsError):
        recalc(source, result.path)
    assert source.read_bytes() == before
    again = recalc(source, source, in_place=True)
    assert again.backup.read_bytes() == before


def test_recalculating_a_recalculated_book_is_stable(recalculated, tmp_path):
    _, result, _ = recalculated
    second = recalc(result.path, tmp_path / "again.xlsx")
    for key, value in result.values.items():
        if isinstance(value, float):
            # property: recalculating again gives the same figures (1e-12: the engine's rounding)
            assert second.values[key] == pytest.approx(value, rel=1e-12)
        else:
            assert second.values[key] == value


def test_formulas_are_looked_up_at_call_time(tmp_path, monkeypatch):
    seen = []

    def range_shape(values):
        seen.append(values)
        return len(values) * 100 + len(values[0])

    monkeypatch.setitem(tailstop.sheet.FORMULAS, "RANGE_SHAPE", range_shape)
    book = openpyxl.Workbook()
    sheet = book.active
    sheet["A1"], sheet["B1"], sheet["C2"] = 1, "x", True
    sheet["E1"] = "=RANGE_SHAPE(A1:C2)"
    book.save(tmp_path / "shape.xlsx")
    result = recalc(tmp_path / "shape.xlsx", tmp_path / "shape-values.xlsx")
    assert result.values[("Sheet", "E1")] == 203
    assert seen == [[[1, "x", None], [None, None, True]]]


# ---------------------------------------------------------------------------
# the cached-value writer on its own (what a demo builder uses)
# ---------------------------------------------------------------------------
def test_set_formula_writes_values_a_reader_sees(tmp_path):
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "Plan"
    cached = {}
    assert set_formula(sheet, "B2", "=TAIL_PROB(1,1,1)", float(np.exp(-1.0)), cached) == "B2"
    assert set_formula(sheet, "B3", "=TAIL_PROB_BOUNDS(A1:A9,1,2)", [[0.25, 0.5], [True, "a<b&c"]], cached) == "B3:C4"
    set_formula(sheet, "B6", '=UNITS_REQUIRED(1,1,1,0,0.95)', "#TAILSTOP! accuracy must be > 1 (got 0)", cached)
    set_formula(sheet, "B7", "=1/0", CellError("#DIV/0!"), cached)
    set_formula(sheet, "B8", "=7*6", 42, cached)
    target = tmp_path / "plan.xlsx"
    save_with_cached_values(book, target, cached)
    values = openpyxl.load_workbook(target, data_only=True)["Plan"]
    # property: a cached float round-trips its repr exactly (rel 1e-15: one rounding at most)
    assert values["B2"].value == pytest.approx(np.exp(-1.0), rel=1e-15)  # repr round-trips a float exactly
    assert [[cell.value for cell in row] for row in values["B3:C4"]] == [[0.25, 0.5], [True, "a<b&c"]]
    assert values["B6"].value.startswith("#TAILSTOP! accuracy")
    assert values["B7"].value == "#DIV/0!" and values["B7"].data_type == "e"
    assert values["B8"].value == 42
    formulas = openpyxl.load_workbook(target)["Plan"]
    assert formulas["B2"].value == "=TAIL_PROB(1,1,1)" and formulas["B3"].value.ref == "B3:C4"


def test_cell_error_accepts_only_spreadsheet_codes():
    with pytest.raises(ValueError):
        CellError("#TAILSTOP! not an error code")


def test_set_formula_rejects_ragged_results():
    sheet = openpyxl.Workbook().active
    with pytest.raises(ValueError, match="rectangular"):
        set_formula(sheet, "A1", "=X()", [[1, 2], [3]], {})
    with pytest.raises(ValueError, match="starts with"):
        set_formula(sheet, "A1", "X()", 1, {})


def test_declared_ranges_stay_2d_and_error_cells_arrive_as_text(tmp_path, monkeypatch):
    seen = []

    def first_cell(values, scalar):
        seen.append((values, scalar))
        return 1.0

    first_cell.tailstop_spec = types.SimpleNamespace(ranges=("values",), argument_help={"values": "", "scalar": ""})
    monkeypatch.setitem(tailstop.sheet.FORMULAS, "FIRST_CELL", first_cell)
    book = openpyxl.Workbook()
    sheet = book.active
    sheet["A1"], sheet["A2"] = 4.5, "=1/0"
    sheet["C1"] = "=FIRST_CELL(A1,A1)"
    sheet["C2"] = "=FIRST_CELL(A2:A2,A2)"
    book.save(tmp_path / "cells.xlsx")
    recalc(tmp_path / "cells.xlsx", tmp_path / "cells-values.xlsx")
    assert sorted(seen, key=repr) == sorted([([[4.5]], 4.5), ([["#DIV/0!"]], "#DIV/0!")], key=repr)


def test_sparse_sheet_over_the_engine_area_is_refused(tmp_path):
    # the engine visits every position of the used rectangle; a stray far cell must not hang the tool
    book = openpyxl.Workbook()
    book.active["A1"] = "=TAIL_PROB(1,1,1)"
    book.active["XFD1000"] = 5  # 16,384 columns × 1,000 rows
    book.save(tmp_path / "sparse.xlsx")
    with pytest.raises(WorkbookRefused, match="16,384,000 cells"):
        recalc(tmp_path / "sparse.xlsx", tmp_path / "sparse-values.xlsx")
    assert not (tmp_path / "sparse-values.xlsx").exists()


def test_an_array_formula_nothing_else_reads_gets_its_values(tmp_path):
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "Log"
    for row, value in enumerate([120.0, 340.0, 900.0, 800.0], start=1):
        sheet.cell(row, 1, value)
    sheet["D1"] = ArrayFormula("D1:E1", '=TAIL_PROB_BOUNDS(A1:A4,300,2,"pass-fail")')
    book.save(tmp_path / "lone.xlsx")
    result = recalc(tmp_path / "lone.xlsx", tmp_path / "lone-values.xlsx")
    # check value: METHOD.md §2 with 3 of 4 units beyond 300, q = 3, d = 2:
    # p_low = q / (d + q) = 3/5, p_high = d q / (1 + d q) = 6/7
    # tolerance 1e-12: two fractions in doubles through the engine
    assert result.values[("Log", "D1")] == pytest.approx(3 / 5, rel=1e-12)
    assert result.values[("Log", "E1")] == pytest.approx(6 / 7, rel=1e-12)
