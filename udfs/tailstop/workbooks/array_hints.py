"""Tailstop formulas whose result is a range, typed into a single cell: the cell shows only the first value.

A formula such as ``STOP_DECISION_COLUMN`` answers with a column. Typed as a plain formula into one
cell, a spreadsheet (and ``tailstop recalc``) shows its first value only; entered as an array formula
over a column (or a row, for ``TAIL_PROB_BOUNDS``) it fills the range. The recalculation summary names
the plain ones so the user can enter them over a range.
"""
from __future__ import annotations

import re

from openpyxl.worksheet.formula import ArrayFormula

__all__ = ["single_cell_ranges"]

_CALL = re.compile(r"(?<![A-Za-z0-9_.])(?:_xludf\.)?([A-Za-z_][A-Za-z0-9_]*)\s*\(", re.I)
_SHAPES = {"column": "a column", "row": "a row", "table": "a table"}


def single_cell_ranges(book):
    """(sheet, coordinate, formula name, 'a column'/'a row'/'a table') of every plain cell calling one."""
    from ..sheet import FORMULAS

    shapes = {name: _SHAPES[function.tailstop_spec.returns] for name, function in FORMULAS.items()
              if function.tailstop_spec.returns in _SHAPES}
    found = []
    for sheet in book.worksheets:
        for cell in getattr(sheet, "_cells", {}).values():
            value = cell._value
            if cell.data_type != "f" or isinstance(value, ArrayFormula) or not isinstance(value, str):
                continue
            if "INDEX(" in value.upper():
                continue  # an element read out of the result on purpose
            called = [name.upper() for name in _CALL.findall(value)]
            ranged = [name for name in called if name in shapes]
            if ranged and called[0] == ranged[0]:  # the formula's result is the range itself
                found.append((sheet.title, cell.coordinate, ranged[0], shapes[ranged[0]]))
    return found
