"""Nothing a user put into a book is lost by annotate (both paths) or recalc.

The reference is the original file read by openpyxl alone (``book_contents``):
values, formulas, number formats, fonts, fills, borders, alignment, merged
ranges, column widths, row heights, freeze panes, data validations,
conditional formats, comments, hyperlinks, defined names and print settings,
on the log sheet and on every other sheet. The written book is read the same
way and must hold all of it unchanged; the only additions allowed are new
cells and widths in the decision column and the estimate block's columns
(where the original had no cell) and the tool's conditional format.
tailstop's own checks (``cell_check``, the stream's read-back) are not used
here, so a loss they would not see is still found.
"""
from __future__ import annotations

import openpyxl
import pytest
from openpyxl.utils.cell import range_boundaries

from book_contents import assert_nothing_lost, contents, differences
from styled_books import LOG_COLUMN, LOG_HEADER, LOG_SHEET, OTHER_SHEET, SEVENTEEN_DIGITS, TAIL_THRESHOLD, styled_log
from tailstop.workbooks.annotate import annotate
from tailstop.workbooks.log_layout import RulePlan
from tailstop.workbooks.recalc import recalc


def tool_columns(*results):
    """{log sheet: the columns annotate wrote to}: its decision column and the block's two columns."""
    columns = set()
    for result in results:
        low, _, high, _ = range_boundaries(result.block)
        columns |= {result.decision_column, *range(low, high + 1)}
    return {LOG_SHEET: columns}


def plan(method="pass-fail", shape=None):
    # threshold and accuracy chosen so the invented 40-unit log stops part-way (common practice for a bench plan)
    return RulePlan.checked(threshold=900, accuracy=3.0, confidence=0.9, pilot=10, method=method, shape=shape)


@pytest.fixture
def original(tmp_path):
    return styled_log(tmp_path / "log.xlsx")


def test_the_fixture_holds_everything_that_is_compared(original):
    # guards the reference itself: an empty list would make every comparison pass
    found = contents(original)
    for title in (LOG_SHEET, OTHER_SHEET):
        sheet = found["sheet"][title]
        for what in ("merged", "widths", "heights", "validations", "conditional formats", "comments",
                     "hyperlinks"):
            assert sheet[what], (title, what)
        assert sheet["freeze panes"] == "B2"
        assert sheet["print"]["print area"] and sheet["print"]["print title rows"] == "$1:$1"
        formats = {style[0] for _, style in sheet["cells"].values()}
        assert len(formats) >= 3, (title, formats)
    assert found["names"] == {"Threshold": f"'{OTHER_SHEET}'!$B$2"}
    assert found["sheet"][LOG_SHEET]["names"] == {"LogStart": f"'{LOG_SHEET}'!$C$2"}
    # the 17-digit number is really in the file (openpyxl alone would have written 0.3)
    # property: the 17-digit number read back is the double written (openpyxl's own writing would round it)
    assert found["sheet"][LOG_SHEET]["cells"]["G6"][0] == float(SEVENTEEN_DIGITS) != 0.3


def test_the_comparison_sees_each_kind_of_loss(original, tmp_path):
    # the checker itself: each kind of loss, made by hand with openpyxl, is reported
    def damaged(change):
        book = openpyxl.load_workbook(original)
        change(book)
        path = tmp_path / f"damaged-{len(list(tmp_path.iterdir()))}.xlsx"
        book.save(path)
        return differences(contents(original), contents(path), added_columns={LOG_SHEET: {9, 10, 11}})

    log = lambda book: book[LOG_SHEET]  # noqa: E731
    other = lambda book: book[OTHER_SHEET]  # noqa: E731
    changes = {
        "merge": lambda b: log(b).unmerge_cells("G3:H4"),
        "number format": lambda b: setattr(log(b)["C5"], "number_format", "General"),
        "font": lambda b: setattr(other(b)["D3"], "font", openpyxl.styles.Font()),
        "width": lambda b: setattr(other(b).column_dimensions["B"], "width", 8),
        "height": lambda b: setattr(log(b).row_dimensions[1], "height", None),
        "freeze": lambda b: setattr(other(b), "freeze_panes", None),
        "validation": lambda b: log(b).data_validations.dataValidation.clear(),
        "comment": lambda b: setattr(other(b)["A2"], "comment", None),
        "hyperlink": lambda b: setattr(log(b)["B3"], "hyperlink", None),
        "name": lambda b: b.defined_names.pop("Threshold"),
        "print": lambda b: setattr(other(b).page_setup, "orientation", "portrait"),
        "value": lambda b: setattr(log(b)["C7"], "value", 1.0),
        "formula": lambda b: setattr(other(b)["D4"], "value", 0.25),
        "a cell outside the tool's columns": lambda b: setattr(log(b)["F2"], "value", "x"),
    }
    for kind, change in changes.items():
        assert damaged(change), kind


@pytest.mark.parametrize("streaming", [False, True], ids=["openpyxl", "stream"])
@pytest.mark.parametrize("live", [False, True], ids=["values", "live"])
def test_annotate_loses_nothing_on_any_sheet(original, tmp_path, streaming, live):
    result = annotate(original, column=LOG_HEADER, plan=plan(), out=tmp_path / "annotated.xlsx", live=live,
                      streaming=streaming)
    assert_nothing_lost(original, result.path, added_columns=tool_columns(result))


@pytest.mark.parametrize("streaming", [False, True], ids=["openpyxl", "stream"])
def test_annotate_loses_nothing_when_the_log_is_not_the_first_sheet(tmp_path, streaming):
    original = styled_log(tmp_path / "log.xlsx", other_sheet_first=True)
    result = annotate(original, column=LOG_COLUMN, sheet=LOG_SHEET, plan=plan("known-shape", 2.0),
                      out=tmp_path / "annotated.xlsx", streaming=streaming)
    assert_nothing_lost(original, result.path, added_columns=tool_columns(result))


def test_annotate_in_place_keeps_the_original_as_backup_and_loses_nothing(original, tmp_path):
    reference = tmp_path / "reference.xlsx"
    reference.write_bytes(original.read_bytes())
    result = annotate(original, column=LOG_HEADER, plan=plan(), in_place=True)
    assert result.backup.read_bytes() == reference.read_bytes()
    assert_nothing_lost(reference, original, added_columns=tool_columns(result))


def test_recalc_loses_nothing_and_stores_the_values(original, tmp_path):
    result = recalc(original, tmp_path / "recalculated.xlsx")
    assert_nothing_lost(original, result.path)
    shown = openpyxl.load_workbook(result.path, data_only=True)
    # check value: hand computation in the test, the AVERAGE and the share formulas of the fixture
    log = openpyxl.load_workbook(original)[LOG_SHEET]
    lifetimes = [log.cell(row, 3).value for row in range(2, log.max_row + 1) if log.cell(row, 3).value is not None]
    # tolerance 1e-12: the engine's order of operations; 1e-15 for the same k/n
    assert shown[LOG_SHEET]["G7"].value == pytest.approx(sum(lifetimes) / len(lifetimes), rel=1e-12)
    assert shown[OTHER_SHEET]["D3"].value == pytest.approx(200.0 / sum(100.0 * k for k in range(1, 9)), rel=1e-12)
    assert shown[OTHER_SHEET]["F5"].value == len(lifetimes)
    # check value: the pass-fail estimate is the share of units beyond the threshold, counted here
    assert shown[LOG_SHEET]["G9"].value == pytest.approx(
        sum(v > TAIL_THRESHOLD for v in lifetimes) / len(lifetimes), rel=1e-15)


@pytest.mark.parametrize("streaming", [False, True], ids=["openpyxl", "stream"])
def test_annotating_again_in_place_loses_nothing_of_the_original(original, tmp_path, streaming):
    # the weekly routine: the log is annotated in place, grows, and is annotated in place again
    reference = tmp_path / "reference.xlsx"
    reference.write_bytes(original.read_bytes())
    earlier = annotate(original, column=LOG_HEADER, plan=plan(), in_place=True, backup=False, streaming=streaming)
    first = original.read_bytes()
    result = annotate(original, column=LOG_HEADER, plan=plan(), in_place=True, streaming=streaming)
    assert (result.copied_parts is not None) == streaming  # the stream writes the earlier run's cells again
    assert result.backup.read_bytes() == first
    assert_nothing_lost(reference, original, added_columns=tool_columns(earlier, result))
