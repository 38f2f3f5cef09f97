"""annotate on a log as an engineer keeps one: title rows, a merged title, the header in row 3, serial numbers,
dates, remarks, a summary block to the right, an AVERAGE row, blank rows and a second sheet.

Every check runs through both annotate paths (openpyxl, and the byte editor forced by a size threshold of one
byte), and the written books are opened in headless LibreOffice.
"""
from __future__ import annotations

import datetime as dt
import re
from pathlib import Path

import numpy as np
import openpyxl
import pytest
from openpyxl.utils.cell import range_boundaries

import tailstop.workbooks.annotate_stream as annotate_stream
from libreoffice import LibreOfficeFailed, convert_with_libreoffice
from tailstop.commands import main
from tailstop.workbooks.annotate import annotate
from tailstop.workbooks.annotation import LIVE_MARGIN
from tailstop.workbooks.cached_values import EXCEL_ERRORS
from tailstop.workbooks.log_layout import BLOCK_TITLE, DECISION_HEADER, RulePlan
from test_annotate import all_cells, rule_stop

SHEET = "Bearing test"
THRESHOLD, ACCURACY, PILOT = 1500.0, 2.0, 10
BLANK_AFTER = (5, 17)  # a blank row follows these units
HEADER_ROW, FIRST_ROW = 3, 4


def bearing_hours(units=60, seed=7):
    """Seeded gamma draws rounded like a bench log (input data only, never a check value)."""
    rng = np.random.default_rng(seed)
    return [float(value) for value in np.round(rng.gamma(2.4, 700.0, size=units), 1)]


def bearing_log(path, hours=None, *, average=True):
    """The log: A serial, B date, C hours to failure, D remark; a summary block in G3:H5; a second sheet."""
    hours = bearing_hours() if hours is None else hours
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = SHEET
    sheet["A1"] = "Bearing life test B-7 (rig 2)"
    sheet.merge_cells("A1:E2")
    for column, text in enumerate(["Serial", "Date", "Hours to failure", "Remark"], start=1):
        sheet.cell(HEADER_ROW, column, text)
    row = FIRST_ROW
    for index, value in enumerate(hours):
        if index in BLANK_AFTER:
            row += 1
        sheet.cell(row, 1, f"SN-{1000 + index}")
        sheet.cell(row, 2, dt.date(2026, 3, 2) + dt.timedelta(days=index))
        sheet.cell(row, 2).number_format = "yyyy-mm-dd"
        sheet.cell(row, 3, value)
        if index % 9 == 4:
            sheet.cell(row, 4, "noisy at start")
        row += 1
    last = row - 1
    if average:
        sheet.cell(row, 2, "Average")
        sheet.cell(row, 3, f"=AVERAGE(C{FIRST_ROW}:C{last})")
    sheet["G3"], sheet["G4"], sheet["H4"] = "Summary", "Units", f"=COUNT(C{FIRST_ROW}:C{last})"
    sheet["G5"], sheet["H5"] = "Mean", f"=AVERAGE(C{FIRST_ROW}:C{last})"
    book.create_sheet("Rig notes")["A1"] = "Rig 2 calibrated 2026-02-28"
    book.save(path)
    return path


def log_rows(hours):
    """Sheet row of each unit."""
    rows, row = [], FIRST_ROW
    for index in range(len(hours)):
        if index in BLANK_AFTER:
            row += 1
        rows.append(row)
        row += 1
    return rows


def expected_decisions(hours):
    """(N, the decision of each unit) under the fixture's plan, from the rule written out plainly."""
    # check value: METHOD.md §5, the pass-fail rule of test_annotate.rule_stop, independent of the package
    stop = rule_stop(hours, THRESHOLD, ACCURACY, 0.95, PILOT)
    return stop, (["PILOT"] * (PILOT - 1) + ["CONTINUE"] * (stop - PILOT) + ["STOP"]
                  + ["PAST STOP"] * (len(hours) - stop))


def the_plan():
    return RulePlan.checked(THRESHOLD, ACCURACY, 0.95, PILOT)


@pytest.fixture(params=[False, True], ids=["openpyxl", "streamed"])
def streaming(request, monkeypatch):
    monkeypatch.setattr(annotate_stream, "STREAM_FROM_BYTES", 1 if request.param else 2**40)
    return request.param


def run(capsys, *arguments):
    code = main(["annotate", *map(str, arguments)])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


RULE = ["--threshold", THRESHOLD, "--accuracy", ACCURACY, "--pilot", PILOT]


# --------------------------------------------------------------------------- the header need not be in row 1


@pytest.mark.parametrize("column", ["C", "Hours to failure", " hours TO failure "])
def test_the_header_below_title_rows_is_found(tmp_path, capsys, streaming, column):
    hours = bearing_hours()
    path = bearing_log(tmp_path / "bearing.xlsx", hours, average=False)
    code, out, err = run(capsys, path, "--column", column, *RULE)
    assert code == 0 and err == ""
    assert "  header: row 3 ('Hours to failure'); the log is rows 4 to 65" in out
    assert ("edited as a stream" in out) == streaming
    sheet = openpyxl.load_workbook(tmp_path / "bearing-tailstop.xlsx")[SHEET]
    assert sheet["E3"].value == DECISION_HEADER
    rows = log_rows(hours)
    stop, expected = expected_decisions(hours)
    assert [sheet.cell(row, 5).value for row in rows] == expected
    assert [sheet.cell(row, 5).value for row in (1, 2, 9, 22)] == [None] * 4  # title rows and blank rows
    assert f"decision: STOP at row {rows[stop - 1]}, after {stop} units" in out


def test_header_row_given(tmp_path, capsys, streaming):
    path = bearing_log(tmp_path / "bearing.xlsx", average=False)
    code, out, _ = run(capsys, path, "--column", "Hours to failure", "--header-row", 3, *RULE)
    assert code == 0 and "header: row 3 ('Hours to failure')" in out
    code, _, err = run(capsys, path, "--column", "Hours to failure", "--header-row", 1, *RULE,
                       "--out", tmp_path / "other.xlsx")
    assert code == 1 and "no column 'Hours to failure'" in err and "Bearing life test" in err


def test_a_text_that_is_no_header_lists_the_header_row(tmp_path, capsys, streaming):
    path = bearing_log(tmp_path / "bearing.xlsx", average=False)
    code, _, err = run(capsys, path, "--column", "Hours", *RULE)
    assert code == 1
    assert "no column 'Hours': not a column letter, and the headers are 'Serial', 'Date', 'Hours to failure'" in err


def test_the_average_row_is_named_as_a_formula(tmp_path, capsys, streaming):
    path = bearing_log(tmp_path / "bearing.xlsx")
    code, out, err = run(capsys, path, "--column", "C", *RULE)
    assert code == 1 and out == ""
    assert err.strip() == ("tailstop annotate: 'Bearing test'!C66 holds a formula (=AVERAGE(C4:C65)); a summary row "
                           "inside the log would be counted as a unit: move it below the range or out of the column")


# --------------------------------------------------------------------------- where the decision column goes


def test_the_decisions_go_next_to_the_log_and_the_block_past_the_summary(tmp_path, streaming):
    path = bearing_log(tmp_path / "bearing.xlsx", average=False)
    before = all_cells(path)
    result = annotate(path, column="C", plan=the_plan(), out=tmp_path / "out.xlsx")
    # D holds remarks in some log rows, E is free from the header row down; G:H hold the summary in rows 3-5
    assert result.decision_column == 5
    assert result.block.startswith("I1:J")
    after = all_cells(result.path)
    for title, cells in before.items():
        assert {coordinate: after[title].get(coordinate) for coordinate in cells} == cells
    added = {coordinate for coordinate in after[SHEET] if coordinate not in before[SHEET]}
    assert {openpyxl.utils.cell.coordinate_from_string(coordinate)[0] for coordinate in added} == {"E", "I", "J"}
    assert after["Rig notes"] == before["Rig notes"]


def test_into_a_column_of_the_user_s_choice(tmp_path, capsys, streaming):
    path = bearing_log(tmp_path / "bearing.xlsx", average=False)
    code, out, _ = run(capsys, path, "--column", "C", "--into", "F", *RULE)
    assert code == 0 and "decision column 'Bearing test'!F" in out
    assert openpyxl.load_workbook(tmp_path / "bearing-tailstop.xlsx")[SHEET]["F3"].value == DECISION_HEADER
    for column, cell in (("D", "D3"), ("G", "G3"), ("C", None)):  # D3 the header "Remark", G3 "Summary"
        code, _, err = run(capsys, path, "--column", "C", "--into", column, *RULE, "--out", tmp_path / "x.xlsx")
        assert code == 1 and not (tmp_path / "x.xlsx").exists()
        assert (f"'Bearing test'!{cell} already holds a cell" in err) if cell else "the log column itself" in err


def format_column(path, column, first, last):
    """A column the user formatted ahead over rows ``first``..``last`` (fill, border, number format, width), no
    value in it: as a log kept in a ruled table looks."""
    from openpyxl.styles import Border, PatternFill, Side

    book = openpyxl.load_workbook(path)
    sheet = book[SHEET]
    for row in range(first, last + 1):
        cell = sheet.cell(row, column)
        cell.fill, cell.border, cell.number_format = PatternFill("solid", fgColor="FFF2CC"), Border(
            left=Side(style="thin"), right=Side(style="thin")), "@"
    sheet.column_dimensions[openpyxl.utils.get_column_letter(column)].width = 13
    book.save(path)


@pytest.mark.parametrize("live", [False, True], ids=["values", "live"])
def test_a_column_that_is_only_formatted_takes_the_decisions_and_keeps_its_format(tmp_path, capsys, soffice,
                                                                                   streaming, live):
    from book_contents import contents

    hours = bearing_hours()
    path = bearing_log(tmp_path / "bearing.xlsx", hours, average=False)
    format_column(path, 5, HEADER_ROW, 80)  # E, the column next to the log, formatted down past the log
    original = contents(path)["sheet"][SHEET]
    code, out, _ = run(capsys, path, "--column", "C", *RULE, *(["--live"] if live else []))
    assert code == 0
    assert "decision column 'Bearing test'!E" in out  # formatting alone does not make a column taken
    # every formatted cell written keeps its format: the header and the 60 units' rows (the live decisions also
    # fill the log's two blank rows and the margin below it, down to row 80 of the formatted ones)
    assert f"kept: the format already on {78 if live else 61} cells of the decision column" in out
    annotated = tmp_path / "bearing-tailstop.xlsx"
    written = contents(annotated)["sheet"][SHEET]
    for coordinate, (value, style) in original["cells"].items():
        assert written["cells"][coordinate][1] == style, coordinate  # read by openpyxl alone (book_contents)
    assert written["widths"][5] == original["widths"][5] == (13, False)
    rows = log_rows(hours)
    stop, expected = expected_decisions(hours)
    shown = openpyxl.load_workbook(convert_with_libreoffice(annotated, tmp_path / "lo"), data_only=True)
    assert shown_errors(shown) == []
    assert shown[SHEET]["E3"].value == DECISION_HEADER
    assert [shown[SHEET].cell(row, 5).value for row in rows] == expected
    # a week later the user's own format on the decision cells survives the run again
    book = openpyxl.load_workbook(annotated)
    book[SHEET]["E20"].font = openpyxl.styles.Font(italic=True)
    book.save(annotated)
    before = contents(annotated)["sheet"][SHEET]["cells"]
    annotate(annotated, column="C", plan=the_plan(), in_place=True, backup=False, live=live)
    after = contents(annotated)["sheet"][SHEET]["cells"]
    assert {c: after[c] for c in before if c.startswith("E")} == {c: v for c, v in before.items() if c.startswith("E")}


# --------------------------------------------------------------------------- in a spreadsheet program


def shown_errors(book):
    return [(sheet.title, cell.coordinate, cell.value) for sheet in book.worksheets for row in sheet.iter_rows()
            for cell in row if cell.data_type == "e" or cell.value in EXCEL_ERRORS]


@pytest.mark.parametrize("live", [False, True], ids=["values", "live"])
def test_libreoffice_shows_what_was_written(tmp_path, soffice, streaming, live):
    path = bearing_log(tmp_path / "bearing.xlsx", average=False)
    result = annotate(path, column="C", plan=the_plan(), out=tmp_path / "out.xlsx", live=live)
    try:
        shown = openpyxl.load_workbook(convert_with_libreoffice(result.path, tmp_path / "lo"), data_only=True)
    except LibreOfficeFailed as problem:
        pytest.fail(f"LibreOffice could not open the annotated log: {problem}")
    assert shown_errors(shown) == []
    written = openpyxl.load_workbook(result.path, data_only=True)[SHEET]
    low, _, high, last = range_boundaries(result.block)
    checked = 0
    for row in range(1, max(last, result.log.last_row) + 1):
        for column in (result.decision_column, low, high):
            stored = written.cell(row, column).value
            seen = shown[SHEET].cell(row, column).value
            if isinstance(stored, float):
                # property: what the engine shows is what was stored (tolerance 1e-14: a float's text form round-trips)
                assert seen == pytest.approx(stored, rel=1e-14), (row, column)
            else:
                assert (seen or None) == (stored or None), (row, column)
            checked += stored is not None
    assert checked > 80
    assert shown[SHEET]["H5"].value == pytest.approx(np.mean(bearing_hours()))  # the user's own formula


# --------------------------------------------------------------------------- live decisions in other programs


def test_live_decisions_on_blank_rows_are_guarded_and_recalculate_in_one_pass(tmp_path, monkeypatch, streaming):
    from test_filled_down import cell_by_cell, same_values, taken_out

    hours = bearing_hours()
    path = bearing_log(tmp_path / "bearing.xlsx", hours, average=False)
    result = annotate(path, column="C", plan=the_plan(), out=tmp_path / "live.xlsx", live=True)
    sheet = openpyxl.load_workbook(result.path)[SHEET]
    guarded = sheet["E9"].value  # row 9 is blank
    assert guarded.startswith('=IF(IFERROR(LEN(TRIM(C9)),1)=0,"",STOP_DECISION($C$4:C9,')
    columns, values = taken_out(result.path, monkeypatch)
    # the guarded decisions are still computed as one column, and the same as the engine computes each cell
    assert [(column.name, len(column.cells)) for column in columns] == [("STOP_DECISION", result.log.rows)]
    same_values(values, cell_by_cell(result.path, monkeypatch))
    cached = openpyxl.load_workbook(result.path, data_only=True)[SHEET]
    for row in range(FIRST_ROW, result.log.last_row + 1):
        assert (values[(SHEET.upper(), f"E{row}")] or None) == (cached[f"E{row}"].value or None), row


@pytest.mark.parametrize("live", [False, True], ids=["values", "live"])
def test_a_lifetime_cell_of_spaces_is_blank_everywhere(tmp_path, soffice, streaming, live):
    # someone typed spaces into a blank row: no unit, in the add-in's formulas, the guard of the live decision,
    # the block's counts, a recalculation, and LibreOffice without the add-in
    from tailstop.workbooks.recalc import recalc

    hours = bearing_hours()
    path = bearing_log(tmp_path / "bearing.xlsx", hours, average=False)
    book = openpyxl.load_workbook(path)
    book[SHEET]["C9"] = "   "  # row 9 is one of the log's blank rows
    book.save(path)
    result = annotate(path, column="C", plan=the_plan(), out=tmp_path / "out.xlsx", live=live)
    stop = rule_stop(hours, THRESHOLD, ACCURACY, 0.95, PILOT)  # the rule written out plainly (METHOD.md §5)
    computed = recalc(result.path, tmp_path / "recalc.xlsx")
    assert computed.errors == []
    for book_path, folder in ((result.path, "lo-written"), (computed.path, "lo-recalc")):
        for shown in (openpyxl.load_workbook(book_path, data_only=True),
                      openpyxl.load_workbook(convert_with_libreoffice(book_path, tmp_path / folder), data_only=True)):
            assert shown_errors(shown) == []
            sheet = shown[SHEET]
            assert sheet["E9"].value in (None, "")
            assert [sheet.cell(row, 5).value for row in log_rows(hours)[:PILOT]] == ["PILOT"] * (PILOT - 1) + [
                "CONTINUE" if stop > PILOT else "STOP"]
            block = {sheet.cell(row, 9).value: sheet.cell(row, 10).value for row in range(1, 30)}
            assert block["Units used, N"] == stop
            assert block["  of which suspended (marked +)"] == 0


@pytest.mark.parametrize("formula_text, taken_out_of_the_engine", [
    # not a decision: the guard's "" is applied where the last cell is blank, the other cells are the call
    ('=IF(ISBLANK(B{row}),"",TAIL_PROB_EST($B$2:B{row},1500))', True),
    ('=IF(ISBLANK(B{previous}),"",STOP_DECISION($B$2:B{row},1500,1.4,0.9,4))', False),  # guards another cell
])
def test_other_guards_give_the_engines_values(tmp_path, monkeypatch, formula_text, taken_out_of_the_engine):
    from test_filled_down import cell_by_cell, same_values, taken_out

    book = openpyxl.Workbook()
    sheet = book.active
    sheet["B1"] = "Hours"
    for row, value in enumerate(bearing_hours(30), start=2):
        sheet.cell(row, 2, None if row == 9 else value)
        sheet.cell(row, 3, formula_text.format(row=row, previous=row - 1))
    book.save(tmp_path / "guards.xlsx")
    columns, values = taken_out(tmp_path / "guards.xlsx", monkeypatch)
    assert bool(columns) is taken_out_of_the_engine
    same_values(values, cell_by_cell(tmp_path / "guards.xlsx", monkeypatch))


def test_a_recalculated_live_log_shows_its_values_in_libreoffice(tmp_path, soffice, streaming):
    from tailstop.workbooks.recalc import recalc

    path = bearing_log(tmp_path / "bearing.xlsx", average=False)
    result = annotate(path, column="C", plan=the_plan(), out=tmp_path / "live.xlsx", live=True)
    computed = recalc(result.path, tmp_path / "recalc.xlsx")
    assert computed.errors == []
    shown = openpyxl.load_workbook(convert_with_libreoffice(computed.path, tmp_path / "lo"), data_only=True)
    assert shown_errors(shown) == []
    written = openpyxl.load_workbook(computed.path, data_only=True)[SHEET]
    for row in range(FIRST_ROW, result.log.last_row + 1):
        assert (shown[SHEET][f"E{row}"].value or None) == (written[f"E{row}"].value or None), row


# --------------------------------------------------------------------------- run again on a growing log


def tool_marks(path):
    """Every cell reading the decision header or the block's title, and the conditional formats of the sheet."""
    sheet = openpyxl.load_workbook(path)[SHEET]
    marks = sorted(cell.coordinate for row in sheet.iter_rows() for cell in row
                   if cell.value in (DECISION_HEADER, BLOCK_TITLE))
    return marks, [str(entry.sqref) for entry in sheet.conditional_formatting]


@pytest.mark.parametrize("live", [False, True], ids=["values", "live"])
def test_running_again_on_an_unchanged_log_changes_no_cell(tmp_path, streaming, live):
    path = bearing_log(tmp_path / "bearing.xlsx", average=False)
    annotate(path, column="C", plan=the_plan(), in_place=True, backup=False, live=live)
    once = all_cells(path), tool_marks(path)
    again = annotate(path, column="C", plan=the_plan(), in_place=True, backup=False, live=live)
    assert (again.copied_parts is not None) == streaming  # a long log is written again as a stream
    assert (all_cells(path), tool_marks(path)) == once
    margin = LIVE_MARGIN if live else 0  # live decisions reach empty rows below the log
    assert once[1] == (["E3", "I1"], [f"E4:E{65 + margin}"])  # one decision column, one block, one STOP highlight


@pytest.mark.parametrize("live", [False, True], ids=["values", "live"])
def test_rows_added_since_the_last_run_get_their_decisions(tmp_path, streaming, live):
    hours = bearing_hours(90)
    path = bearing_log(tmp_path / "bearing.xlsx", hours[:40], average=False)
    first = annotate(path, column="C", plan=the_plan(), in_place=True, backup=False, live=live)
    # a week later: fifty more units typed below, and a note of the user's beside the block
    book = openpyxl.load_workbook(path)
    sheet = book[SHEET]
    rows = log_rows(hours)
    for index in range(40, 90):
        sheet.cell(rows[index], 1, f"SN-{1000 + index}")
        sheet.cell(rows[index], 3, hours[index])
    sheet["L2"] = "checked by R. Ortiz"
    book.save(path)
    before = all_cells(path)
    second = annotate(path, column="C", plan=the_plan(), in_place=True, backup=False, live=live)
    assert (second.copied_parts is not None) == streaming
    assert (second.decision_column, second.block.split(":")[0]) == (first.decision_column, "I1")
    assert tool_marks(path) == (["E3", "I1"], [f"E4:E{rows[-1] + (LIVE_MARGIN if live else 0)}"])
    shown = openpyxl.load_workbook(path, data_only=True)[SHEET]
    stop, expected = expected_decisions(hours)
    assert [shown.cell(row, 5).value for row in rows] == expected
    block = {shown.cell(row, 9).value: shown.cell(row, 10).value for row in range(1, 30)}
    assert block["Units used, N"] == stop
    # everything that is not the tool's own is as the user left it
    after = all_cells(path)
    for coordinate, content in before[SHEET].items():
        if openpyxl.utils.cell.coordinate_from_string(coordinate)[0] not in ("E", "I", "J"):
            assert after[SHEET][coordinate] == content, coordinate
    assert after["Rig notes"] == before["Rig notes"]


def type_units(path, hours, first_units):
    """The units after ``first_units`` typed below the log and a note beside the block, as a user adds them a week
    later (through openpyxl, as a spreadsheet program saves the book)."""
    book = openpyxl.load_workbook(path)
    sheet = book[SHEET]
    rows = log_rows(hours)
    for index in range(first_units, len(hours)):
        sheet.cell(rows[index], 1, f"SN-{1000 + index}")
        sheet.cell(rows[index], 3, hours[index])
    sheet["L2"] = "checked by R. Ortiz"
    book.save(path)


@pytest.mark.parametrize("live", [False, True], ids=["values", "live"])
def test_running_again_on_a_grown_log_is_running_once_on_it_and_loses_nothing(tmp_path, streaming, live):
    from book_contents import assert_nothing_lost

    hours = bearing_hours(90)
    path = bearing_log(tmp_path / "bearing.xlsx", hours[:40], average=False)
    reference = bearing_log(tmp_path / "reference.xlsx", hours[:40], average=False)
    annotate(path, column="C", plan=the_plan(), in_place=True, backup=False, live=live)
    type_units(path, hours, 40)
    type_units(reference, hours, 40)  # the same log, never annotated
    again = annotate(path, column="C", plan=the_plan(), in_place=True, backup=False, live=live)
    once = annotate(reference, column="C", plan=the_plan(), out=tmp_path / "once.xlsx", live=live)
    assert (again.copied_parts is not None) == streaming
    # the earlier run leaves no trace: the cells are those of one run on the grown log
    assert all_cells(again.path) == all_cells(once.path)
    assert all_cells(again.path, data_only=True) == all_cells(once.path, data_only=True)
    assert tool_marks(again.path) == tool_marks(once.path)
    # everything the user put into the book, read by openpyxl alone (book_contents), is still there
    low, _, high, _ = range_boundaries(again.block)
    assert_nothing_lost(reference, again.path, added_columns={SHEET: {again.decision_column, *range(low, high + 1)}})


@pytest.mark.parametrize("live", [False, True], ids=["values", "live"])
def test_a_streamed_run_again_on_an_unchanged_log_writes_the_same_bytes(tmp_path, live, monkeypatch):
    # stronger than the same cells: the earlier run's cells, its formats and its STOP highlight are taken again
    monkeypatch.setattr(annotate_stream, "STREAM_FROM_BYTES", 1)
    from test_safe_io import read_parts

    path = bearing_log(tmp_path / "bearing.xlsx", average=False)
    annotate(path, column="C", plan=the_plan(), in_place=True, backup=False, live=live)
    once = read_parts(path)
    again = annotate(path, column="C", plan=the_plan(), in_place=True, backup=False, live=live)
    assert again.copied_parts is not None
    assert read_parts(path) == once


def test_a_log_run_again_shows_its_values_in_libreoffice(tmp_path, soffice, streaming):
    hours = bearing_hours(90)
    path = bearing_log(tmp_path / "bearing.xlsx", hours[:40], average=False)
    annotate(path, column="C", plan=the_plan(), in_place=True, backup=False, live=True)
    type_units(path, hours, 40)
    again = annotate(path, column="C", plan=the_plan(), in_place=True, backup=False, live=True)
    shown = openpyxl.load_workbook(convert_with_libreoffice(again.path, tmp_path / "lo"), data_only=True)[SHEET]
    assert shown_errors(shown.parent) == []
    stop, expected = expected_decisions(hours)
    assert [shown.cell(row, 5).value for row in log_rows(hours)] == expected
    block = {shown.cell(row, 9).value: shown.cell(row, 10).value for row in range(1, 30)}
    assert block["Units used, N"] == stop


def append_units(path, hours, first_units):
    """The units after ``first_units`` added as rows at the end of the log sheet's markup, without loading the
    book: the serial, the date (in the style of the log's first date) and the hours to failure."""
    from test_safe_io import read_parts, write_parts

    parts = read_parts(path)
    name = "xl/worksheets/sheet1.xml"
    xml = parts[name]
    date_style = re.search(rb'<c r="B4" s="([0-9]+)"', xml).group(1).decode()
    rows = log_rows(hours)
    added = "".join(f'<row r="{rows[index]}"><c r="A{rows[index]}" t="inlineStr"><is><t>SN-{1000 + index}</t></is>'
                    f'</c><c r="B{rows[index]}" s="{date_style}"><v>{46083 + index}</v></c><c r="C{rows[index]}">'
                    f'<v>{hours[index]!r}</v></c></row>' for index in range(first_units, len(hours)))
    assert rows[first_units - 1] >= max(int(number) for number in re.findall(rb'<row r="([0-9]+)"', xml))
    parts[name] = xml.replace(b"</sheetData>", added.encode() + b"</sheetData>", 1)
    write_parts(path, parts)


def test_a_log_grown_long_is_written_again_as_a_stream_and_loses_nothing(tmp_path, monkeypatch):
    # the weekly step on a log that outgrew the openpyxl path: annotated when short, then some 62,000 units added
    from book_contents import assert_nothing_lost

    import tailstop.workbooks.annotate as annotate_module

    hours = bearing_hours(62_000, seed=3)
    path = bearing_log(tmp_path / "bearing.xlsx", hours[:40], average=False)
    reference = bearing_log(tmp_path / "reference.xlsx", hours[:40], average=False)
    first = annotate(path, column="C", plan=the_plan(), in_place=True, backup=False)
    assert first.copied_parts is None  # a short log goes through openpyxl
    append_units(path, hours, 40)
    append_units(reference, hours, 40)  # the same log, never annotated
    assert annotate_stream.wants_streaming(path)  # its sheet passes STREAM_FROM_BYTES: no test setting needed

    def no_load(*arguments, **options):
        raise AssertionError("the long log was loaded through openpyxl")

    monkeypatch.setattr(annotate_module, "open_workbook_safely", no_load)
    again = annotate(path, column="C", plan=the_plan(), in_place=True, backup=False)
    assert again.copied_parts is not None
    assert (again.decision_column, again.block) == (first.decision_column, first.block)
    sheet = openpyxl.load_workbook(path, read_only=True)[SHEET]
    decisions = [row[0] for row in sheet.iter_rows(min_row=FIRST_ROW, min_col=5, max_col=5, values_only=True)]
    stop, expected = expected_decisions(hours)
    assert [decisions[row - FIRST_ROW] for row in log_rows(hours)] == expected
    assert decisions.count(None) == len(BLANK_AFTER) and len(decisions) == len(hours) + len(BLANK_AFTER)
    low, _, high, _ = range_boundaries(again.block)
    assert_nothing_lost(reference, path, added_columns={SHEET: {again.decision_column, *range(low, high + 1)}})
    # one decision column, one block, one STOP highlight (the earlier one replaced)
    from test_safe_io import read_parts

    xml = read_parts(path)["xl/worksheets/sheet1.xml"]
    assert re.findall(rb'<conditionalFormatting sqref="([^"]*)"', xml) == [f"E4:E{log_rows(hours)[-1]}".encode()]
    top = [row for row in sheet.iter_rows(max_row=30, values_only=True)]
    assert sum(row.count(DECISION_HEADER) for row in top) == 1 and sum(row.count(BLOCK_TITLE) for row in top) == 1


def test_a_note_typed_into_the_decision_column_is_named_on_the_run_again(tmp_path, capsys, streaming):
    path = bearing_log(tmp_path / "bearing.xlsx", average=False)
    annotate(path, column="C", plan=the_plan(), in_place=True, backup=False)
    book = openpyxl.load_workbook(path)
    book[SHEET]["E30"] = "retest on rig 3"  # a remark typed over a decision
    book.save(path)
    before = path.read_bytes()
    code, out, err = run(capsys, path, "--column", "C", *RULE, "--in-place")
    assert code == 1 and out == "" and path.read_bytes() == before
    assert ("column E holds the decisions of an earlier run, and 'Bearing test'!E30 now holds a cell of its own "
            "there") in err and "--into COLUMN" in err
    code, out, _ = run(capsys, path, "--column", "C", *RULE, "--into", "F", "--out", tmp_path / "elsewhere.xlsx")
    assert code == 0 and "decision column 'Bearing test'!F" in out


def test_a_unit_typed_below_a_live_log_is_decided_and_counted(tmp_path, streaming, capsys):
    from tailstop.workbooks.recalc import recalc

    hours = bearing_hours(61)
    path = bearing_log(tmp_path / "bearing.xlsx", hours[:60], average=False)
    # odds within 1.2: the rule cannot stop within 61 units, so the block follows every unit
    code, out, _ = run(capsys, path, "--column", "C", "--threshold", THRESHOLD, "--accuracy", 1.2, "--pilot", PILOT,
                       "--live")
    assert code == 0 and "live: the decision formulas and the block's ranges reach row 165" in out
    annotated = tmp_path / "bearing-tailstop.xlsx"
    sheet = openpyxl.load_workbook(annotated)[SHEET]
    assert sheet["E100"].value.startswith('=IF(IFERROR(LEN(TRIM(C100)),1)=0,"",STOP_DECISION($C$4:C100,')
    book = openpyxl.load_workbook(annotated)
    book[SHEET]["C66"] = hours[60]  # the next result, typed in the row below the log
    book.save(tmp_path / "typed.xlsx")
    shown = openpyxl.load_workbook(recalc(tmp_path / "typed.xlsx", tmp_path / "computed.xlsx").path,
                                   data_only=True)[SHEET]
    assert rule_stop(hours, THRESHOLD, 1.2, 0.95, PILOT) is None  # the rule written out plainly (METHOD.md §5)
    assert shown["E66"].value == "CONTINUE"
    assert shown["E67"].value in (None, "")
    block = {shown.cell(row, 9).value: shown.cell(row, 10).value for row in range(1, 30)}
    assert block["Decision after the last row"] == shown["E66"].value
    assert block["Units used, N"] == 61  # all units, the one typed last among them
    # the pass-fail estimate is the share of units beyond the threshold, counted here
    # check value: the share counted here (definition of the pass-fail estimate); tolerance 1e-15, same k/n
    assert block["Estimate of p = P(life > threshold)"] == pytest.approx(
        sum(value > THRESHOLD for value in hours) / 61, rel=1e-15)


# --------------------------------------------------------------------------- the block when the rule has not stopped


@pytest.mark.parametrize("live", [False, True], ids=["values", "live"])
def test_bounds_say_the_accuracy_is_not_reached_before_the_stop(tmp_path, streaming, live):
    from tailstop.workbooks.recalc import evaluate_workbook

    hours = bearing_hours(40)
    path = bearing_log(tmp_path / "bearing.xlsx", hours, average=False)
    strict = RulePlan.checked(THRESHOLD, 1.2, 0.95, PILOT)  # odds within 1.2: no STOP in 40 units
    assert rule_stop(hours, THRESHOLD, 1.2, 0.95, PILOT) is None  # the rule written out plainly (METHOD.md §5)
    result = annotate(path, column="C", plan=strict, out=tmp_path / "out.xlsx", live=live)
    shown = openpyxl.load_workbook(result.path, data_only=True)[SHEET]
    block = {shown.cell(row, 9).value: shown.cell(row, 10).value for row in range(1, 30)}
    for label in ("p, lower bound", "p, upper bound", "Odds, lower bound (odds/d)", "Odds, upper bound (odds*d)"):
        assert block[label] == "accuracy not reached (no STOP yet): no guaranteed bound"
    # the rows used reach the sheet row of the last unit (no STOP); N and the units needed on the same units
    assert block["Sheet rows used (down to the STOP, or all)"] == log_rows(hours)[-1] == 45  # 40 units, 2 blanks
    assert block["Units used, N"] == 40
    from tailstop.sheet import UNITS_NEEDED_NOW

    assert block["Units the accuracy needs, judged by the N units used"] == UNITS_NEEDED_NOW(
        [[value] for value in hours], THRESHOLD, 1.2, 0.95)
    if live:  # the engine computes what was stored
        computed = evaluate_workbook(result.path)
        for row in range(1, 30):
            stored = shown.cell(row, 10).value
            engine = computed.get((SHEET.upper(), f"J{row}"))
            if isinstance(stored, float):
                # property: the engine recomputes the stored block (tolerance 1e-12: its order of operations)
                assert engine == pytest.approx(stored, rel=1e-12), row
            elif stored not in (None, ""):
                assert engine == stored, row
    stopped = annotate(path, column="C", plan=the_plan(), out=tmp_path / "stopped.xlsx", live=live)
    shown = openpyxl.load_workbook(stopped.path, data_only=True)[SHEET]
    block = {shown.cell(row, 9).value: shown.cell(row, 10).value for row in range(1, 30)}
    assert isinstance(block["p, lower bound"], float)  # at the STOP the interval is the guaranteed one


def test_an_array_formula_in_a_book_saved_by_libreoffice_recalculates(tmp_path, soffice):
    from openpyxl.worksheet.formula import ArrayFormula

    from tailstop.workbooks.recalc import recalc

    hours = bearing_hours()
    path = bearing_log(tmp_path / "bearing.xlsx", hours, average=False)
    book = openpyxl.load_workbook(path)
    book[SHEET]["L1"] = ArrayFormula("L1:M1", f"=TAIL_PROB_BOUNDS(C4:C65,{THRESHOLD},{ACCURACY})")
    book.save(path)
    saved = convert_with_libreoffice(path, tmp_path / "lo")  # LibreOffice stores #NAME? in both cells
    result = recalc(saved, tmp_path / "recalc.xlsx")
    assert result.errors == []
    shown = openpyxl.load_workbook(result.path, data_only=True)[SHEET]
    # check value: METHOD.md §2, the pass-fail odds q = S/(n-S) and the interval [q/d, q d] on the p scale
    beyond = sum(value > THRESHOLD for value in hours)
    odds = beyond / (len(hours) - beyond)
    # tolerance 1e-12: the closed forms in doubles, through the engine
    assert shown["L1"].value == pytest.approx(odds / (ACCURACY + odds), rel=1e-12)
    assert shown["M1"].value == pytest.approx(ACCURACY * odds / (1 + ACCURACY * odds), rel=1e-12)
