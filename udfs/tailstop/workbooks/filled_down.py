"""Recalculation of tailstop formulas filled down a log, outside the engine's dependency graph.

A live log fills ``=STOP_DECISION($B$2:B<row>, …)`` down its rows, often
with ``TAIL_PROB_EST`` and ``UNITS_NEEDED_NOW`` beside it. The engine gives
every one of those growing ranges a graph of its own — a log of n rows costs
about n²/2 edges and one formula compilation per cell — so recalculating it
grows nearly quadratically. Here such a column is taken out of the book
before the engine compiles it:

1. ``take_out`` finds the filled-down columns: cells of one sheet that call
   the same tailstop formula (one whose first argument is a log and whose
   result is one cell) on a one-column range starting at the same cell, with
   the same other arguments (cell references or constants). Their cells
   become blank constants in the engine's copy of the book.
2. After the engine has computed the book once, ``put_back`` reads each
   column's range and arguments from the engine's results, exactly as the
   engine would have passed them to the formula, computes every cell with
   ``sheet.filled_down`` (one pass over the column), and computes the book a
   second time with those cells given to the engine as constants, so that
   formulas reading them see their values.
3. If a column's range or arguments came out differently the second time
   (they depend on the column itself), the caller recalculates the book cell
   by cell instead.

The values are those of the formulas evaluated cell by cell in the engine
(the tests compare both ways cell for cell).
"""
from __future__ import annotations

import re
from dataclasses import dataclass, field

import formulas
import numpy as np
import schedula
from formulas.functions import replace_empty
from openpyxl.worksheet.formula import ArrayFormula

__all__ = ["FilledColumn", "take_out", "put_back"]

# a column must have this many cells to be taken out of the engine
MIN_CELLS = 2

_CALL = re.compile(r"^=\s*(?P<name>[A-Za-z_][A-Za-z0-9_.]*)\((?P<arguments>.*)\)\s*$", re.S)
_RANGE = re.compile(r"^\$?(?P<c1>[A-Za-z]{1,3})\$?(?P<r1>[0-9]+):\$?(?P<c2>[A-Za-z]{1,3})\$?(?P<r2>[0-9]+)$")
_CELL = re.compile(r"^\$?(?P<column>[A-Za-z]{1,3})\$?(?P<row>[0-9]+)$")
# a decision that shows an empty cell on a blank row anyway, guarded so that a spreadsheet without the add-in
# shows it too; computed as the call inside. "trim": =IF(IFERROR(LEN(TRIM(B9)),1)=0,"",STOP_DECISION($B$2:B9,…)),
# as annotate --live writes a decision; "isblank": =IF(ISBLANK(B9),"",…), as it wrote one before
_GUARD_CELL = r"\s*\$?(?P<column>[A-Za-z]{1,3})\$?(?P<row>[0-9]+)\s*"
_GUARD_CALL = r'\s*,\s*""\s*,\s*(?P<call>.*)\)\s*$'
_BLANK_GUARDS = {
    "trim": re.compile(r"^=\s*IF\(\s*IFERROR\(\s*LEN\(\s*TRIM\(" + _GUARD_CELL + r"\)\s*\)\s*,\s*1\s*\)\s*=\s*0"
                       + _GUARD_CALL, re.S),
    "isblank": re.compile(r"^=\s*IF\(\s*ISBLANK\(" + _GUARD_CELL + r"\)" + _GUARD_CALL, re.S),
}
# placeholder the engine holds for a taken-out cell until its value is known
_PLACEHOLDER = ""


@dataclass
class FilledColumn:
    """Cells of one sheet calling one tailstop formula on growing ranges of one column.

    Attributes
    ----------
    sheet : str
        The sheet's title.
    name : str
        The tailstop formula.
    column : str
        Letter of the range's column.
    first_row : int
        Row where every range starts.
    arguments : tuple of str
        The formula's other arguments, as written.
    cells : list of (str, int)
        (coordinate, last row of its range) of every cell.
    """

    sheet: str
    name: str
    column: str
    first_row: int
    arguments: tuple
    cells: list = field(default_factory=list)
    constants: dict = field(default_factory=dict)
    # cells written =IF(<blank guard of the last cell of the range>,"",<the call>): coordinate -> kind of guard
    guarded: dict = field(default_factory=dict)
    # False when no formula of the book can read the column's cells
    read: bool = True

    @property
    def last_row(self):
        return max(end for _, end in self.cells)

    def input_cells(self):
        """Coordinates the column reads: its range down to the last row, and the referenced cells."""
        rows = [f"{self.column}{row}" for row in range(self.first_row, self.last_row + 1)]
        return rows + [_cell_coordinate(text) for text in self.arguments if _CELL.match(text)]


def _cell_coordinate(text):
    match = _CELL.match(text)
    return f"{match['column'].upper()}{int(match['row'])}"


def split_arguments(text):
    """The top-level arguments of a call, split at commas outside parentheses and quotes."""
    parts, depth, quoted, start = [], 0, False, 0
    for index, char in enumerate(text):
        if char == '"':
            quoted = not quoted
        elif quoted:
            continue
        elif char in "({":
            depth += 1
        elif char in ")}":
            depth -= 1
        elif char == "," and depth == 0:
            parts.append(text[start:index].strip())
            start = index + 1
    parts.append(text[start:].strip())
    return parts


def _constant(text, cache):
    """The engine's value of a constant argument (a number, a text, TRUE), or None if it is not one."""
    if text not in cache:
        cache[text] = None
        try:
            compiled = formulas.Parser().ast("=" + text)[1].compile()
        except Exception:  # noqa: BLE001 - anything the engine cannot read stays with the engine
            return None
        if not compiled.inputs:
            cache[text] = (compiled(),)
    return cache[text]


def _recognise(cell, prefixes, eligible, constants):
    """(name, column, first row, last row, arguments) of a filled-down call, or None."""
    if cell.data_type != "f" or isinstance(cell.value, ArrayFormula) or not isinstance(cell.value, str):
        return None
    kind, guard = next(((kind, found) for kind, pattern in _BLANK_GUARDS.items()
                        if (found := pattern.match(cell.value)) is not None), (None, None))
    call = _CALL.match("=" + guard["call"] if guard else cell.value)
    if call is None:
        return None
    name = call["name"].upper()
    for prefix in sorted(prefixes, key=len, reverse=True):
        if prefix and name.startswith(prefix):
            name = name[len(prefix):]
            break
    if not eligible(name):
        return None
    arguments = split_arguments(call["arguments"])
    span = _RANGE.match(arguments[0])
    if span is None or span["c1"].upper() != span["c2"].upper() or int(span["r2"]) < int(span["r1"]):
        return None
    if guard and (guard["column"].upper(), int(guard["row"])) != (span["c2"].upper(), int(span["r2"])):
        return None  # the guard must test the last cell of the range
    rest = tuple(arguments[1:])
    for text in rest:
        if not text or not (_CELL.match(text) or _constant(text, constants) is not None):
            return None
    return name, span["c1"].upper(), int(span["r1"]), int(span["r2"]), rest, kind


def take_out(book, prefixes, eligible):
    """Find the filled-down columns of a book and blank their cells in it.

    Parameters
    ----------
    book : openpyxl.Workbook
        The engine's own copy of the book (it is changed).
    prefixes : iterable of str
        Prefixes a spreadsheet may write before a formula's name (upper case).
    eligible : callable
        ``eligible(name)``: the formula can be computed by ``sheet.filled_down``.

    Returns
    -------
    list of FilledColumn
    """
    constants = {}
    found = {}
    for sheet in book.worksheets:
        for cell in list(getattr(sheet, "_cells", {}).values()):
            recognised = _recognise(cell, prefixes, eligible, constants)
            if recognised is None:
                continue
            name, column, first_row, last_row, arguments, guarded = recognised
            key = (sheet.title, name, column, first_row, arguments)
            if key not in found:
                found[key] = FilledColumn(sheet.title, name, column, first_row, arguments)
            found[key].cells.append((cell.coordinate, last_row))
            if guarded:
                found[key].guarded[cell.coordinate] = guarded
    columns = [column for column in found.values() if len(column.cells) >= MIN_CELLS]
    columns = _independent(columns)
    for column in columns:
        sheet = book[column.sheet]
        for coordinate, _ in column.cells:
            sheet[coordinate].value = _PLACEHOLDER
    if columns and not _has_formulas(book):
        # nothing reads the taken-out cells: the engine needs no cell for them
        for column in columns:
            sheet = book[column.sheet]
            for coordinate, _ in column.cells:
                sheet[coordinate].value = None
            column.read = False
    for column in columns:
        column.constants = {text: constants[text][0] for text in column.arguments if not _CELL.match(text)}
    return columns


def _has_formulas(book):
    return any(cell.data_type == "f" for sheet in book.worksheets for cell in getattr(sheet, "_cells", {}).values())


def _independent(columns):
    """The columns whose inputs hold no cell of a taken-out column (dropping others until none does)."""
    while True:
        taken = {(column.sheet, coordinate) for column in columns for coordinate, _ in column.cells}
        kept = [column for column in columns
                if not any((column.sheet, coordinate) in taken for coordinate in column.input_cells())]
        if len(kept) == len(columns):
            return kept
        columns = kept


def _node_prefix(book_context, sheet):
    """The engine's name of a cell of ``sheet`` is this text followed by its coordinate."""
    context = dict(book_context, sheet=sheet.upper())
    return formulas.Ranges().push("A1", context=context).ranges[0]["name"][:-2]


def _engine_value(solution, node):
    """A cell's value as the engine holds it (its empty marker for a cell it has no value for)."""
    ranges = solution.get(node)
    if ranges is None or not hasattr(ranges, "value"):
        return schedula.EMPTY
    return np.asarray(ranges.value, dtype=object).item(0)


def _guard_holds(kind, value):
    """The guard's test on the last cell of the range, as the engine holds that cell.

    ISBLANK is true only for a cell the engine holds nothing for ("" is text); LEN(TRIM(…))=0 also for empty
    text and text of white space (the engine's TRIM is ``str.strip``; a spreadsheet's takes out spaces only);
    an error is not blank to either.
    """
    if value is schedula.EMPTY:
        return True
    return kind == "trim" and isinstance(value, str) and not value.strip()


def _inputs(column, solution, book_context, spec, to_cells):
    """The column's range (rows of cells) and other arguments, as the engine passes them to the formula."""
    prefix = _node_prefix(book_context, column.sheet)
    rows = np.empty((column.last_row - column.first_row + 1, 1), dtype=object)
    for index, row in enumerate(range(column.first_row, column.last_row + 1)):
        rows[index, 0] = _engine_value(solution, f"{prefix}{column.column}{row}")
    parameters = list(spec.argument_help)
    arguments = []
    for position, text in enumerate(column.arguments, start=1):
        is_range = position < len(parameters) and parameters[position] in spec.ranges
        if _CELL.match(text):
            value = np.array([[_engine_value(solution, prefix + _cell_coordinate(text))]], dtype=object)
        else:
            value = column.constants[text]
        arguments.append(to_cells(value, is_range))
    return to_cells(rows, True), tuple(arguments)


def put_back(model, solution, columns, book_context, functions, to_cells, to_engine):
    """Compute the taken-out columns, then the book again with their values; None if they read themselves.

    Parameters
    ----------
    model : formulas.ExcelModel
        The engine's model of the book, with the columns taken out.
    solution : dict
        The engine's first results.
    columns : list of FilledColumn
    book_context : dict
        The engine's context of the book (``ExcelModel.add_book``).
    functions : dict
        tailstop's formulas by name (``tailstop.sheet.FORMULAS``).
    to_cells, to_engine : callable
        The conversions the engine's formula calls use.

    Returns
    -------
    (dict, dict) or None
        The engine's results (computed again if a formula may read the
        columns) and ``engine name of the cell -> value as the engine holds
        it`` for the columns' cells; None when a column's inputs changed.
    """
    from ..sheet.filled_down import filled_down

    given, inputs_seen = {}, []
    for column in columns:
        spec = functions[column.name].tailstop_spec
        rows, arguments = _inputs(column, solution, book_context, spec, to_cells)
        inputs_seen.append((rows, arguments))
        first = column.first_row
        values = filled_down(column.name, rows, [end - first + 1 for _, end in column.cells], arguments)
        prefix = _node_prefix(book_context, column.sheet)
        for (coordinate, end), value in zip(column.cells, values):
            guard = column.guarded.get(coordinate)
            if guard and _guard_holds(guard, _engine_value(solution, f"{prefix}{column.column}{end}")):
                value = ""
            given[prefix + coordinate] = replace_empty(to_engine(value))
    if not any(column.read for column in columns):
        return solution, given
    second = model.calculate(inputs=given)
    for column, seen in zip(columns, inputs_seen):
        spec = functions[column.name].tailstop_spec
        if not _same(_inputs(column, second, book_context, spec, to_cells), seen):
            return None
    return second, given


def _same(first, second):
    """Equal cell for cell, type included (NaN never equals itself: then not the same)."""
    def typed(value):
        if isinstance(value, (list, tuple)):
            return [typed(item) for item in value]
        return (type(value), value)
    return typed(first) == typed(second)
