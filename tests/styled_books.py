"""Test helper: a life-test log dressed the way engineers dress their logs, built with openpyxl alone.

Every sheet carries every kind of content a user would miss if a tool
dropped it: number formats, fonts, fills, borders, alignment, merged
ranges, column widths, row heights, freeze panes, data validation,
conditional formats, comments, hyperlinks, defined names, print settings,
formulas with styles, and a number that needs 17 significant digits (so
that it goes through the cached-value rewrite of the openpyxl path).
"""
from __future__ import annotations

import datetime as dt
import io
import zipfile

import numpy as np
import openpyxl
from openpyxl.comments import Comment
from openpyxl.formatting.rule import CellIsRule, FormulaRule
from openpyxl.styles import Alignment, Border, Font, PatternFill, Side
from openpyxl.workbook.defined_name import DefinedName
from openpyxl.worksheet.datavalidation import DataValidation

__all__ = ["LOG_SHEET", "OTHER_SHEET", "LOG_COLUMN", "LOG_HEADER", "TAIL_THRESHOLD", "SEVENTEEN_DIGITS", "styled_log",
           "lifetimes"]

LOG_SHEET = "Bench log"
OTHER_SHEET = "Rig notes"
LOG_COLUMN = "C"
LOG_HEADER = "Hours to leak"
TAIL_THRESHOLD = 900  # the threshold of the fixture's TAIL_PROB_EST cell (invented, like the log)
# openpyxl writes floats with 16 significant digits; this placeholder is swapped for a
# 17-digit number in the saved XML, so the book holds a number openpyxl cannot write back
_PLACEHOLDER = "0.123456789"
SEVENTEEN_DIGITS = "0.30000000000000004"


def lifetimes(count=40, seed=11):
    """Invented lifetimes (seeded gamma draws, rounded like a log): demo data, never a check value."""
    rng = np.random.default_rng(seed)
    return [float(v) for v in np.round(rng.gamma(2.0, 600.0, size=count), 1)]


def _dress(sheet, first_row, last_row):
    """Styles, validation, formats, comments, links and print settings on one sheet."""
    thin = Side(style="thin", color="FF404040")
    for row in range(first_row, last_row + 1):
        for column in range(1, 5):
            sheet.cell(row, column).border = Border(left=thin, right=thin, top=thin, bottom=thin)
    sheet["A1"].font = Font(name="Arial", size=12, bold=True, color="FF1F3864")
    sheet["A1"].fill = PatternFill("solid", fgColor="FFDDEBF7")
    sheet["B1"].alignment = Alignment(horizontal="center", vertical="top", wrap_text=True)
    sheet.column_dimensions["A"].width = 9.5
    sheet.column_dimensions["B"].width = 21.0
    sheet.column_dimensions["D"].hidden = True
    sheet.row_dimensions[1].height = 31.5
    sheet.row_dimensions[4].hidden = True
    sheet.freeze_panes = "B2"
    validation = DataValidation(type="decimal", operator="greaterThan", formula1="0", allow_blank=True,
                                showErrorMessage=True, error="a lifetime is a positive number",
                                errorTitle="Lifetime")
    validation.add(f"{LOG_COLUMN}2:{LOG_COLUMN}500")
    sheet.add_data_validation(validation)
    sheet.conditional_formatting.add(f"{LOG_COLUMN}2:{LOG_COLUMN}500", CellIsRule(
        operator="lessThan", formula=["100"], font=Font(color="FF9C0006"),
        fill=PatternFill("solid", bgColor="FFFFC7CE")))
    sheet.conditional_formatting.add("A2:A500", FormulaRule(formula=["MOD(A2,10)=0"], font=Font(italic=True)))
    sheet["A2"].comment = Comment("first unit off the line", "bench lead")
    sheet["B3"].hyperlink = "https://example.invalid/rigs/3"
    sheet["B3"].style = "Hyperlink"
    sheet["B5"].hyperlink = f"#'{OTHER_SHEET}'!A1"
    sheet.print_title_rows = "1:1"
    sheet.print_area = f"A1:E{last_row}"
    sheet.page_setup.orientation = "landscape"
    sheet.page_setup.paperSize = sheet.PAPERSIZE_A4
    sheet.page_setup.fitToWidth = 1
    sheet.page_setup.fitToHeight = 0
    sheet.sheet_properties.pageSetUpPr.fitToPage = True
    sheet.page_margins.left = 0.4
    sheet.page_margins.top = 0.9
    sheet.print_options.gridLines = True
    sheet.oddHeader.center.text = "Valve bench &D"
    sheet.oddFooter.right.text = "page &P of &N"
    sheet.sheet_properties.tabColor = "FF70AD47"


def styled_log(path, values=None, *, other_sheet_first=False):
    """Write the dressed log book to ``path``; returns ``path``.

    Sheet ``Bench log``: A unit, B rig (text), C lifetime (format ``0.0``,
    blue font), D a styled formula (=C*2, hidden column), E a remark; a
    merged title beside the log (G3:H4), a 17-digit number in a styled cell
    (G6), styled formulas (G7 ordinary, G9 a tailstop formula). Sheet ``Rig notes`` carries the same
    dressing, with its own merged range, styled formulas and 17-digit
    number. The book has a workbook-level and a sheet-level defined name.
    """
    values = lifetimes() if values is None else values
    book = openpyxl.Workbook()
    log = book.active
    log.title = LOG_SHEET
    other = book.create_sheet(OTHER_SHEET)
    if other_sheet_first:
        book.move_sheet(other, offset=-1)
        book.active = 1
    log.append(["Unit", "Rig", LOG_HEADER, "Twice", "Remark"])
    for unit, value in enumerate(values, start=1):
        row = unit + 1
        log.append([unit, f"rig {unit % 3 + 1}", value, f"=C{row}*2", "seal replaced" if unit % 9 == 0 else None])
        log.cell(row, 3).number_format = "0.0"
        log.cell(row, 3).font = Font(name="Calibri", size=11, color="FF0070C0")
        log.cell(row, 4).number_format = "#,##0.00"
        log.cell(row, 4).font = Font(italic=True)
    last = len(values) + 1
    _dress(log, 1, last)
    log.merge_cells("G3:H4")
    log["G3"] = "Bench B, second shift"
    log["G3"].alignment = Alignment(horizontal="center", vertical="center")
    log["G6"] = float(_PLACEHOLDER)
    log["G6"].number_format = "0.000000000000000000"
    log["G6"].font = Font(bold=True, color="FFC00000")
    log["G7"] = f"=AVERAGE(C2:C{last})"
    log["G7"].number_format = "0.0"
    log["G7"].font = Font(bold=True, underline="single")
    log["G7"].fill = PatternFill("solid", fgColor="FFFFF2CC")
    log["G8"] = dt.date(2026, 3, 2)
    log["G8"].number_format = "dd mmm yyyy"
    log["G9"] = f'=TAIL_PROB_EST(C2:C{last},{TAIL_THRESHOLD},"pass-fail")'  # a tailstop formula, styled
    log["G9"].number_format = "0.0000"
    log["G9"].font = Font(name="Cambria", bold=True)

    other.append(["Rig", "Hours", LOG_HEADER, "Share"])
    for rig in range(1, 9):
        other.append([f"rig {rig}", 100.0 * rig, 50.0 * rig + 0.5, f"=B{rig + 1}/SUM(B$2:B$9)"])
        other.cell(rig + 1, 4).number_format = "0.0%"
        other.cell(rig + 1, 4).font = Font(name="Consolas", size=10, bold=True)
    _dress(other, 1, 9)
    other.merge_cells("F1:G2")
    other["F1"] = "Maintenance"
    other["F4"] = float(_PLACEHOLDER)
    other["F4"].number_format = "0.00000000000000000"
    other["F4"].font = Font(strike=True)
    other["F5"] = f"=COUNT('{LOG_SHEET}'!C2:C{last})"
    other["F5"].number_format = "0 \"units\""
    other["F5"].fill = PatternFill("solid", fgColor="FFE2EFDA")

    book.defined_names["Threshold"] = DefinedName("Threshold", attr_text=f"'{OTHER_SHEET}'!$B$2")
    log.defined_names["LogStart"] = DefinedName("LogStart", attr_text=f"'{LOG_SHEET}'!$C$2")
    buffer = io.BytesIO()
    book.save(buffer)
    path.write_bytes(_seventeen_digits(buffer.getvalue()))
    return path


def _seventeen_digits(data):
    """The saved package with the placeholder number replaced by one that needs 17 digits."""
    source = zipfile.ZipFile(io.BytesIO(data))
    output = io.BytesIO()
    replaced = 0
    with zipfile.ZipFile(output, "w", zipfile.ZIP_DEFLATED) as target:
        for info in source.infolist():
            part = source.read(info)
            if info.filename.startswith("xl/worksheets/"):
                marker = f"<v>{_PLACEHOLDER}</v>".encode()
                replaced += part.count(marker)
                part = part.replace(marker, f"<v>{SEVENTEEN_DIGITS}</v>".encode())
            target.writestr(info, part)
    assert replaced == 2, "the placeholder number was not found where openpyxl writes it"
    return output.getvalue()
