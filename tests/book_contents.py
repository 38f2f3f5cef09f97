"""Test helper: everything a user put into a workbook, read with openpyxl alone, to compare books.

``contents(path)`` reads a workbook's bytes with openpyxl (never with tailstop's
own readers or checks) and lists what a user would miss if a tool dropped it:
per sheet the cells (value or formula, number format, font, fill, border,
alignment, protection), merged ranges, column widths, row heights, freeze
panes, data validations, conditional formats, comments, hyperlinks, print
settings and sheet-scoped defined names; per book the sheet order, the
workbook's defined names and the print areas and titles.

``assert_nothing_lost(original, written, added_columns=...)`` compares the
original's contents with a written book's: every item of the original must
be in the written book unchanged. A tool that adds a decision column and a
block may add cells and widths in those columns (where the original had no
cell) and a conditional format; nothing else may differ.
"""
from __future__ import annotations

import datetime as dt
import math

import openpyxl
from openpyxl.utils.cell import column_index_from_string, coordinate_from_string, range_boundaries
from openpyxl.worksheet.formula import ArrayFormula

__all__ = ["contents", "assert_nothing_lost", "differences"]


def _color(color):
    if color is None:
        return None
    return (color.type, color.rgb if color.type == "rgb" else color.theme if color.type == "theme" else color.indexed,
            color.tint)


def _font(font):
    return (font.name, font.sz, font.b, font.i, font.u, font.strike, font.vertAlign, _color(font.color))


def _fill(fill):
    return (getattr(fill, "patternType", None) or getattr(fill, "fill_type", None),
            _color(getattr(fill, "fgColor", None)), _color(getattr(fill, "bgColor", None)))


def _side(side):
    return (side.style, _color(side.color)) if side is not None else None


def _border(border):
    return tuple(_side(getattr(border, name)) for name in ("left", "right", "top", "bottom", "diagonal"))


def _alignment(alignment):
    return (alignment.horizontal, alignment.vertical, alignment.wrap_text, alignment.shrink_to_fit,
            alignment.indent, alignment.text_rotation)


def _value(cell):
    value = cell.value
    if isinstance(value, ArrayFormula):
        return ("array formula", value.ref, value.text)
    if isinstance(value, float) and math.isnan(value):
        return ("nan",)
    if isinstance(value, (dt.datetime, dt.date, dt.time, dt.timedelta)):
        return (type(value).__name__, value)
    if value == "":
        return None  # openpyxl writes "" as an empty cell
    return value


def _cells(sheet):
    found = {}
    for (row, column), cell in sorted(sheet._cells.items()):
        style = (cell.number_format, _font(cell.font), _fill(cell.fill), _border(cell.border),
                 _alignment(cell.alignment), (cell.protection.locked, cell.protection.hidden))
        value = _value(cell)
        if value is None and not cell.has_style:
            continue
        found[cell.coordinate] = (value, style)
    return found


def _widths(sheet):
    widths = {}
    for key, dimension in sheet.column_dimensions.items():
        if dimension.width is None and not dimension.hidden:
            continue
        low = dimension.min or column_index_from_string(key)
        high = dimension.max or low
        for column in range(low, high + 1):
            widths[column] = (dimension.width if dimension.customWidth else None, bool(dimension.hidden))
    return {column: value for column, value in widths.items() if value != (None, False)}


def _heights(sheet):
    return {row: (dimension.height, bool(dimension.hidden)) for row, dimension in sheet.row_dimensions.items()
            if dimension.height is not None or dimension.hidden}


def _validations(sheet):
    return sorted((str(v.sqref), v.type, v.operator, v.formula1, v.formula2, bool(v.allow_blank),
                   bool(v.showErrorMessage), v.error, v.errorTitle, v.prompt, v.promptTitle)
                  for v in sheet.data_validations.dataValidation)


def _conditional_formats(sheet):
    found = []
    for target in sheet.conditional_formatting:
        for rule in target.rules:
            dxf = rule.dxf
            look = None if dxf is None else (
                None if dxf.font is None else _font(dxf.font), None if dxf.fill is None else _fill(dxf.fill))
            found.append((str(target.sqref), rule.type, rule.operator, tuple(rule.formula or ()), rule.text,
                          bool(rule.stopIfTrue), look))
    return sorted(found, key=repr)


def _comments(sheet):
    return {cell.coordinate: (cell.comment.text, cell.comment.author)
            for cell in sheet._cells.values() if cell.comment is not None}


def _hyperlinks(sheet):
    return {cell.coordinate: (cell.hyperlink.target, cell.hyperlink.location, cell.hyperlink.tooltip)
            for cell in sheet._cells.values() if cell.hyperlink is not None}


def _print_settings(sheet):
    setup, margins, options = sheet.page_setup, sheet.page_margins, sheet.print_options
    return {
        "print area": sheet.print_area,
        "print title rows": sheet.print_title_rows,
        "print title columns": sheet.print_title_cols,
        "page setup": (setup.orientation, setup.paperSize, setup.scale, setup.fitToWidth, setup.fitToHeight),
        "fit to page": bool(sheet.sheet_properties.pageSetUpPr and sheet.sheet_properties.pageSetUpPr.fitToPage),
        "margins": (margins.left, margins.right, margins.top, margins.bottom, margins.header, margins.footer),
        "options": (options.gridLines, options.headings, options.horizontalCentered, options.verticalCentered),
        "header": (sheet.oddHeader.left.text, sheet.oddHeader.center.text, sheet.oddHeader.right.text),
        "footer": (sheet.oddFooter.left.text, sheet.oddFooter.center.text, sheet.oddFooter.right.text),
    }


def _sheet_names(sheet):
    names = getattr(sheet, "defined_names", None)
    if names is None:
        return {}
    return {name: value.attr_text for name, value in names.items() if name not in _BUILT_IN_NAMES}


_BUILT_IN_NAMES = {"_xlnm.Print_Area", "_xlnm.Print_Titles", "_xlnm._FilterDatabase"}


def contents(path):
    """{'sheets': [titles], 'names': {...}, 'sheet': {title: {what: ...}}}, all read by openpyxl."""
    book = openpyxl.load_workbook(path)
    found = {
        "sheets": [sheet.title for sheet in book.worksheets],
        "states": {sheet.title: sheet.sheet_state for sheet in book.worksheets},
        "names": {name: value.attr_text for name, value in book.defined_names.items()
                  if name not in _BUILT_IN_NAMES},
        "sheet": {},
    }
    for sheet in book.worksheets:
        found["sheet"][sheet.title] = {
            "cells": _cells(sheet),
            "merged": sorted(str(merged) for merged in sheet.merged_cells.ranges),
            "widths": _widths(sheet),
            "heights": _heights(sheet),
            "freeze panes": sheet.freeze_panes,
            "validations": _validations(sheet),
            "conditional formats": _conditional_formats(sheet),
            "comments": _comments(sheet),
            "hyperlinks": _hyperlinks(sheet),
            "print": _print_settings(sheet),
            "names": _sheet_names(sheet),
            "tab color": _color(sheet.sheet_properties.tabColor),
            "auto filter": sheet.auto_filter.ref,
        }
    return found


def _column_of(coordinate):
    return column_index_from_string(coordinate_from_string(coordinate)[0])


def differences(before, after, *, added_columns=None):
    """What the written book lost or changed, as readable lines (empty: nothing lost).

    ``added_columns`` maps a sheet title to the column numbers a tool may add
    to (new cells where the original had none, widths): those additions are
    not losses. A cell of the original is never allowed to change.
    """
    added_columns = added_columns or {}
    found = []
    if after["sheets"] != before["sheets"]:
        found.append(f"sheets {before['sheets']} became {after['sheets']}")
    for title, state in before["states"].items():
        if after["states"].get(title) != state:
            found.append(f"sheet {title!r} was {state}, is {after['states'].get(title)}")
    for name, text in before["names"].items():
        if after["names"].get(name) != text:
            found.append(f"defined name {name}: {text!r} became {after['names'].get(name)!r}")
    for title, was in before["sheet"].items():
        now = after["sheet"].get(title)
        if now is None:
            continue
        allowed = added_columns.get(title, set())
        for coordinate, cell in was["cells"].items():
            if now["cells"].get(coordinate) != cell:
                found.append(f"{title}!{coordinate}: {cell!r} became {now['cells'].get(coordinate)!r}")
        for coordinate in set(now["cells"]) - set(was["cells"]):
            if _column_of(coordinate) not in allowed:
                found.append(f"{title}!{coordinate}: a cell appeared: {now['cells'][coordinate]!r}")
        for column, width in was["widths"].items():
            if now["widths"].get(column) != width:
                found.append(f"{title} column {column} width {width} became {now['widths'].get(column)}")
        for column in set(now["widths"]) - set(was["widths"]):
            if column not in allowed:
                found.append(f"{title} column {column} got a width {now['widths'][column]}")
        for what in ("merged", "heights", "freeze panes", "validations", "comments", "hyperlinks", "print",
                     "tab color", "auto filter"):
            if now[what] != was[what]:
                found.append(f"{title} {what}: {was[what]!r} became {now[what]!r}")
        missing = [rule for rule in was["conditional formats"] if rule not in now["conditional formats"]]
        if missing:
            found.append(f"{title} conditional formats lost: {missing!r}")
        for name, text in was["names"].items():
            if now["names"].get(name) != text:
                found.append(f"{title} defined name {name}: {text!r} became {now['names'].get(name)!r}")
    return found


def assert_nothing_lost(original, written, *, added_columns=None):
    """Fail, listing every loss, unless ``written`` keeps everything ``original`` holds (see module doc)."""
    found = differences(contents(original), contents(written), added_columns=added_columns)
    assert not found, "the written book lost or changed:\n  " + "\n  ".join(found[:40])
