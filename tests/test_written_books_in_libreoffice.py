"""Every workbook the tools write, opened by a real spreadsheet program: headless LibreOffice Calc.

Each book is converted with ``soffice --headless --convert-to xlsx`` (LibreOffice's default setting
for Excel files: show the stored values) and read back: no error cell anywhere, the values tailstop
stored survive, and the spreadsheet's own GAMMA.DIST — computed by LibreOffice, since the demo book
stores no value for it — agrees with TAIL_PROB.
"""
from __future__ import annotations

import datetime as dt
import math

import openpyxl
import pytest
from openpyxl.utils.cell import get_column_letter

from libreoffice import convert_with_libreoffice
from tailstop.workbooks.annotate import annotate
from tailstop.workbooks.cached_values import EXCEL_ERRORS
from tailstop.workbooks.demo_books import LOG_BOOK, PLAN_BOOK, build_demo
from test_annotate import LOG_SHEET, bench_lifetimes, plan, rich_log
from test_annotate_stream import excel_like_book


def shown_by_libreoffice(path, folder):
    return openpyxl.load_workbook(convert_with_libreoffice(path, folder), data_only=True)


def error_cells(book):
    return [(sheet.title, cell.coordinate, cell.value) for sheet in book.worksheets for row in sheet.iter_rows()
            for cell in row if cell.data_type == "e" or cell.value in EXCEL_ERRORS]


def same(shown, stored):
    if isinstance(stored, bool) or not isinstance(stored, (int, float)):
        if isinstance(stored, dt.datetime) and isinstance(shown, dt.datetime):
            return abs((shown - stored).total_seconds()) < 1e-3
        return shown == stored
    # LibreOffice keeps 15 significant digits when it saves
    # tolerance 1e-14: LibreOffice keeps 15 significant digits when it saves
    return isinstance(shown, (int, float)) and math.isclose(shown, stored, rel_tol=1e-14, abs_tol=1e-300)


def assert_values_survive(written, shown, sheets=None, columns=None):
    checked = 0
    for sheet in written.worksheets:
        if sheets is not None and sheet.title not in sheets:
            continue
        for row in sheet.iter_rows():
            for cell in row:
                if cell.value is None or (columns is not None and cell.column not in columns):
                    continue
                after = shown[sheet.title][cell.coordinate].value
                assert same(after, cell.value), f"{sheet.title}!{cell.coordinate}: {cell.value!r} became {after!r}"
                checked += 1
    return checked


@pytest.fixture(scope="module")
def demo_folder(tmp_path_factory):
    folder = tmp_path_factory.mktemp("demo-books")
    build_demo(folder)
    return folder


@pytest.mark.parametrize("name", [LOG_BOOK, PLAN_BOOK])
def test_demo_books_open_cleanly_and_keep_their_values(soffice, demo_folder, tmp_path, name):
    shown = shown_by_libreoffice(demo_folder / name, tmp_path / "lo")
    assert error_cells(shown) == []
    written = openpyxl.load_workbook(demo_folder / name, data_only=True)
    assert shown.sheetnames == written.sheetnames
    assert assert_values_survive(written, shown) > 50


def test_gamma_dist_in_libreoffice_agrees_with_tail_prob(soffice, demo_folder, tmp_path):
    formulas = openpyxl.load_workbook(demo_folder / PLAN_BOOK)["Plan"]
    tail_cell = next(c.coordinate for row in formulas.iter_rows(max_col=2) for c in row
                     if isinstance(c.value, str) and c.value.startswith("=TAIL_PROB("))
    gamma_cell = next(c.coordinate for row in formulas.iter_rows(max_col=2) for c in row
                      if isinstance(c.value, str) and c.value.startswith("=") and "GAMMA.DIST" in c.value)
    shown = shown_by_libreoffice(demo_folder / PLAN_BOOK, tmp_path / "lo")["Plan"]
    tail_prob, gamma_dist = shown[tail_cell].value, shown[gamma_cell].value
    assert isinstance(gamma_dist, float)  # computed by LibreOffice: the book stores no value for it
    # check value: LibreOffice Calc's built-in GAMMA.DIST, an implementation independent of tailstop
    assert abs(tail_prob - gamma_dist) <= 1e-9
    difference_cell = f"B{int(gamma_cell[1:]) + 1}"
    assert shown[difference_cell].value <= 1e-9


def test_the_demo_charts_survive(soffice, demo_folder, tmp_path):
    book = openpyxl.load_workbook(convert_with_libreoffice(demo_folder / LOG_BOOK, tmp_path / "lo"))
    charts = book["Charts"]._charts
    assert len(charts) == 2
    assert [len(chart.series) for chart in charts] == [5, 3]


@pytest.mark.parametrize("streaming", [False, True], ids=["openpyxl", "streamed"])
@pytest.mark.parametrize("live", [False, True], ids=["values", "live"])
def test_annotated_logs_open_cleanly_and_keep_their_values(soffice, tmp_path, live, streaming):
    source = rich_log(tmp_path / "bench.xlsx")
    result = annotate(source, column="D", plan=plan(), live=live, out=tmp_path / "annotated.xlsx",
                      streaming=streaming)
    shown = shown_by_libreoffice(result.path, tmp_path / "lo")
    # the log's own error cell (Notes!A6 holds #N/A) stays; nothing else is an error
    assert error_cells(shown) == error_cells(openpyxl.load_workbook(source)) == [("Notes", "A6", "#N/A")]
    written = openpyxl.load_workbook(result.path, data_only=True)
    # tailstop's cells: the decision column and the estimate block, as values or as cached values
    block = openpyxl.utils.cell.range_boundaries(result.block)
    added = {result.decision_column, block[0], block[2]}
    assert assert_values_survive(written, shown, sheets={LOG_SHEET}, columns=set(added)) > 200
    # the log and the other plain values of the book
    assert assert_values_survive(written, shown, sheets={LOG_SHEET}, columns={1, 2, 4}) > 600
    original = openpyxl.load_workbook(source)[LOG_SHEET]
    for row in (2, 50, 100):  # the user's own formulas, computed by LibreOffice
        assert original[f"E{row}"].value == f"=D{row}*2"
        assert shown[LOG_SHEET][f"E{row}"].value == pytest.approx(2 * original[f"D{row}"].value)


def test_a_streamed_book_in_excel_markup_opens_cleanly(soffice, tmp_path):
    # the byte editor on markup laid out as Excel writes it (shared strings and formulas, x14ac row attributes)
    lifetimes = bench_lifetimes(60, seed=7)
    source = excel_like_book(tmp_path / "excel.xlsx", lifetimes)
    result = annotate(source, column="B", plan=plan(threshold=1200), out=tmp_path / "annotated.xlsx", streaming=True)
    shown = shown_by_libreoffice(result.path, tmp_path / "lo")
    assert error_cells(shown) == []
    written = openpyxl.load_workbook(result.path, data_only=True)
    assert assert_values_survive(written, shown) > 200
    sheet = openpyxl.load_workbook(convert_with_libreoffice(result.path, tmp_path / "lo2"))["Hours"]
    assert [str(cf.sqref) for cf in sheet.conditional_formatting] == [f"{get_column_letter(result.decision_column)}2:"
                                                                      f"{get_column_letter(result.decision_column)}61"]
