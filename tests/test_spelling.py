"""Both spellings of a tailstop formula in a saved book: TAIL_PROB (Excel) and TAILSTOP.TAIL_PROB (LibreOffice)."""
from __future__ import annotations

import math

import openpyxl
import pytest
from openpyxl.worksheet.formula import ArrayFormula

from tailstop.commands import main
from tailstop.workbooks.spelling import respell

# check value: Erlang identity Q(2, t) = e^{-t} (1 + t) (Johnson, Kotz & Balakrishnan, vol. 1), t = 2.5
ERLANG = math.exp(-2.5) * 3.5


@pytest.mark.parametrize("formula, libreoffice, excel", [
    ("=TAIL_PROB(A1,2,3)+tail_prob_est(A1:A9, 3)",
     "=TAILSTOP.TAIL_PROB(A1,2,3)+TAILSTOP.TAIL_PROB_EST(A1:A9, 3)", "=TAIL_PROB(A1,2,3)+TAIL_PROB_EST(A1:A9, 3)"),
    ('=TAILSTOP.TAIL_PROB(1,2,3)&"TAIL_PROB(x)"', '=TAILSTOP.TAIL_PROB(1,2,3)&"TAIL_PROB(x)"',
     '=TAIL_PROB(1,2,3)&"TAIL_PROB(x)"'),
    ("=_xludf.STOP_DECISION(A:A,1)", "=TAILSTOP.STOP_DECISION(A:A,1)", "=STOP_DECISION(A:A,1)"),
    ("=MY_TAIL_PROB(1)+X.TAIL_PROB(2)+TAIL_PROB_X(3)", "=MY_TAIL_PROB(1)+X.TAIL_PROB(2)+TAIL_PROB_X(3)",
     "=MY_TAIL_PROB(1)+X.TAIL_PROB(2)+TAIL_PROB_X(3)"),
])
def test_respell_changes_only_tailstop_calls(formula, libreoffice, excel):
    assert respell(formula, "libreoffice") == libreoffice
    assert respell(formula, "excel") == excel
    assert respell(respell(formula, "libreoffice"), "excel") == excel


def test_respell_refuses_an_unknown_target():
    with pytest.raises(ValueError, match="excel, libreoffice"):
        respell("=TAIL_PROB(1,2,3)", "numbers")


def libreoffice_book(path):
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "Log"
    for row, value in enumerate([120.0, 340.0, "1500+", 800.0], start=1):
        sheet.cell(row, 1, value)
    sheet["C1"] = "=TAILSTOP.TAIL_PROB(1000,2,400)"
    sheet["C2"] = "=TAIL_PROB(1000,2,400)"
    sheet["D1"] = ArrayFormula("D1:E1", "=TAILSTOP.TAIL_PROB_BOUNDS(A1:A4,300,2)")
    sheet["F1"] = "=E1-D1"
    book.save(path)
    return path


def test_recalc_reads_the_libreoffice_spelling(tmp_path):
    source = libreoffice_book(tmp_path / "lo.xlsx")
    assert main(["recalc", str(source), "--out", str(tmp_path / "out.xlsx")]) == 0
    values = openpyxl.load_workbook(tmp_path / "out.xlsx", data_only=True)["Log"]
    # check value: ERLANG (Erlang identity, above); tolerance 1e-12, the route through recalc's engine
    assert math.isclose(values["C1"].value, ERLANG, rel_tol=1e-12)
    assert values["C2"].value == values["C1"].value
    low, high = values["D1"].value, values["E1"].value
    assert 0 < low < high < 1 and math.isclose(values["F1"].value, high - low)
    # by default the book keeps its own (mixed) spelling
    formulas = openpyxl.load_workbook(tmp_path / "out.xlsx")["Log"]
    assert formulas["C1"].value == "=TAILSTOP.TAIL_PROB(1000,2,400)" and formulas["C2"].value == "=TAIL_PROB(1000,2,400)"


@pytest.mark.parametrize("target, prefix", [("excel", ""), ("libreoffice", "TAILSTOP.")])
def test_recalc_for_a_program_writes_its_spelling(tmp_path, target, prefix):
    source = libreoffice_book(tmp_path / "lo.xlsx")
    out = tmp_path / f"for-{target}.xlsx"
    assert main(["recalc", str(source), "--for", target, "--out", str(out)]) == 0
    sheet = openpyxl.load_workbook(out)["Log"]
    assert sheet["C1"].value == sheet["C2"].value == f"={prefix}TAIL_PROB(1000,2,400)"
    assert sheet["D1"].value.text == f"={prefix}TAIL_PROB_BOUNDS(A1:A4,300,2)"
    values = openpyxl.load_workbook(out, data_only=True)["Log"]
    # check value: ERLANG (Erlang identity, above); tolerance 1e-12, the route through recalc's engine
    assert math.isclose(values["C1"].value, ERLANG, rel_tol=1e-12)


def added_formulas(sheet):
    """coordinate -> formula text of every formula cell outside the log's own columns A to C."""
    return {cell.coordinate: cell.value for row in sheet.iter_rows() for cell in row
            if cell.column > 3 and isinstance(cell.value, str) and cell.value.startswith("=")}


def test_annotate_keeps_a_libreoffice_book_and_recalc_spells_its_live_column_for_libreoffice(tmp_path):
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "Log"
    sheet.append(["Unit", "Hours", "P so far"])
    for unit, hours in enumerate([310.0, 720.0, "1500+", 150.0, 980.0, 420.0, 1330.0, 260.0], start=1):
        sheet.append([unit, hours, f"=TAILSTOP.TAIL_PROB_EST($B$2:B{unit + 1},500)"])
    book.save(tmp_path / "log.xlsx")
    annotated = tmp_path / "log-live.xlsx"
    assert main(["annotate", str(tmp_path / "log.xlsx"), "--column", "B", "--threshold", "500", "--accuracy", "2",
                 "--pilot", "4", "--live", "--out", str(annotated)]) == 0
    kept = openpyxl.load_workbook(annotated)["Log"]
    assert kept["C9"].value == "=TAILSTOP.TAIL_PROB_EST($B$2:B9,500)"
    live = added_formulas(kept)
    assert live and not any("TAILSTOP." in text for text in live.values())  # annotate writes Excel's spelling

    assert main(["recalc", str(annotated), "--for", "libreoffice", "--out", str(tmp_path / "calc.xlsx")]) == 0
    respelled = added_formulas(openpyxl.load_workbook(tmp_path / "calc.xlsx")["Log"])
    assert respelled == {cell: respell(text, "libreoffice") for cell, text in live.items()}
    assert any(text.startswith("=TAILSTOP.STOP_DECISION(") for text in respelled.values())
    values = openpyxl.load_workbook(tmp_path / "calc.xlsx", data_only=True)["Log"]
    # check value: the pass-fail estimate is the plain share beyond 500 (common practice): 4 of 8
    assert values["C9"].value == 0.5
