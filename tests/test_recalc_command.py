"""`tailstop recalc` from the command line."""
from __future__ import annotations

import openpyxl
import pytest
from scipy import stats

from tailstop.commands import main


def make_book(path):
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "Check"
    sheet["A1"], sheet["B1"] = "threshold", 3.841
    sheet["A2"], sheet["B2"] = "shape", 0.5
    sheet["A3"], sheet["B3"] = "scale", 2.0
    sheet["A4"], sheet["B4"] = "P(X > threshold)", "=TAIL_PROB(B1,B2,B3)"
    for row, value in enumerate([120.0, 800.0, None, 2300.0, 40.0], start=6):
        sheet.cell(row=row, column=1, value=value)
    sheet["B6"] = "=TAIL_PROB_EST(A6:A10,500)"
    book.save(path)
    return path


def test_recalc_writes_a_new_book_with_the_values(tmp_path, capsys):
    book = make_book(tmp_path / "check.xlsx")
    assert main(["recalc", str(book)]) == 0
    out = tmp_path / "check-recalc.xlsx"
    values = openpyxl.load_workbook(out, data_only=True)["Check"]
    # check value: NIST/SEMATECH §1.3.6.7.4 — chi-square 1 df (gamma 0.5, 2) upper 0.05 point is 3.841
    # tolerance 1e-12 against scipy's chi2.sf at the printed 3.841; 2e-4 against 0.05, the table's 3-decimal
    # rounding moves p by at most about 1e-4
    assert values["B4"].value == pytest.approx(stats.chi2.sf(3.841, 1), rel=1e-12)
    assert values["B4"].value == pytest.approx(0.05, abs=2e-4)
    assert values["B6"].value == 0.5  # 800 and 2300 of 4 units are beyond 500; the blank is skipped
    formulas = openpyxl.load_workbook(out)["Check"]
    assert formulas["B4"].value == "=TAIL_PROB(B1,B2,B3)"
    assert "wrote" in capsys.readouterr().out
    # the source is untouched and a second run refuses to overwrite the first result
    assert openpyxl.load_workbook(book)["Check"]["B4"].value == "=TAIL_PROB(B1,B2,B3)"
    assert main(["recalc", str(book)]) == 1


def test_recalc_refuses_a_file_that_is_not_a_workbook(tmp_path, capsys):
    fake = tmp_path / "notes.xlsx"
    fake.write_text("unit,hours\n1,200\n")
    assert main(["recalc", str(fake)]) == 1
    message = capsys.readouterr().err
    assert message.startswith("tailstop recalc:") and "Traceback" not in message


def test_in_place_and_out_together_are_refused(tmp_path, capsys):
    book = make_book(tmp_path / "check.xlsx")
    before = book.read_bytes()
    other = tmp_path / "other.xlsx"
    assert main(["recalc", str(book), "--in-place", "--out", str(other)]) == 1
    assert "either --out or --in-place" in capsys.readouterr().err
    # nothing written anywhere: the book is byte for byte what it was, no other file, no backup
    assert book.read_bytes() == before
    assert sorted(path.name for path in tmp_path.iterdir()) == ["check.xlsx"]


def test_a_range_formula_typed_into_one_cell_is_named(tmp_path, capsys):
    from openpyxl.worksheet.formula import ArrayFormula

    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "Check"
    for row, value in enumerate([900.0, 1700.0, 2100.0, 400.0, 1600.0, 1800.0], start=1):
        sheet.cell(row, 1, value)
    sheet["C1"] = "=STOP_DECISION_COLUMN(A1:A6,1500,2,0.95,2)"  # plain: one cell
    sheet["D1"] = ArrayFormula("D1:D6", "=STOP_DECISION_COLUMN(A1:A6,1500,2,0.95,2)")  # over the column
    sheet["E1"] = '=INDEX(TAIL_PROB_BOUNDS(A1:A6,1500,2),1,2)'  # one element on purpose
    book.save(tmp_path / "check.xlsx")
    assert main(["recalc", str(tmp_path / "check.xlsx")]) == 0
    out = capsys.readouterr().out
    # with a pilot of 2 the first row's decision is PILOT (METHOD.md §5: no decision before the pilot)
    stored = openpyxl.load_workbook(tmp_path / "check-recalc.xlsx", data_only=True)["Check"]
    assert stored["C1"].value == "PILOT"
    assert ("Check!C1: STOP_DECISION_COLUMN gives a column; typed into one cell it stores only its first value. "
            "Enter it over a column as an array formula") in out
    assert "Check!D1" not in out and "Check!E1" not in out
