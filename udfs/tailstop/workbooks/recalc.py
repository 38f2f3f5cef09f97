"""Recalculate a workbook headless: tailstop formulas together with ordinary ones.

The evaluation engine is the ``formulas`` package (see docs/recalc-engine.md
for why). Each tailstop formula is registered with it under its own name
(and under ``_xludf.NAME``, the prefix a spreadsheet may store before
user-defined names); the function itself is looked up in
``tailstop.sheet.FORMULAS`` at every call. The result is written as a copy of
the book in which every formula is kept and its computed value is stored as
the cell's cached value, so a spreadsheet program without the add-in shows it.
"""
from __future__ import annotations

import contextlib
import functools
import importlib
import re
import types
from dataclasses import dataclass
from pathlib import Path

import formulas
import formulas.excel
import numpy as np
import schedula
from formulas.functions import Array, parse_ranges
from formulas.tokens.operand import Error, XlError
from openpyxl.utils.cell import get_column_letter, range_boundaries
from openpyxl.worksheet.formula import ArrayFormula

from . import filled_down
from .cached_values import EXCEL_ERRORS, CellError, remember, save_with_cached_values
from .cell_check import rounds_on_save
from .package import Limits, WorkbookRefused
from .safe_io import open_workbook_safely
from .spelling import respell_book

__all__ = ["RecalcResult", "recalc", "evaluate_workbook", "register_formulas"]

# as Excel may store a user-defined name, and as LibreOffice stores an add-in function (workbooks/spelling.py)
UDF_PREFIXES = ("", "_XLUDF.", "TAILSTOP.")
# the engine compiles every position of a sheet's used rectangle, empty or not (about 30 µs each)
MAX_ENGINE_AREA = 2_000_000
_EXTERNAL_LINK = "application/vnd.openxmlformats-officedocument.spreadsheetml.externalLink+xml"
_ENGINE_KEY = re.compile(r"^'?\[[^\]]*\](?P<sheet>.*?)'?!(?P<cell>[A-Z]+[0-9]+)$")
# an array formula that no other formula reads is solved only as its block, 'SHEET'!D1:E1
_ENGINE_BLOCK = re.compile(r"^'?\[[^\]]*\](?P<sheet>.*?)'?!(?P<block>[A-Z]+[0-9]+:[A-Z]+[0-9]+)$")


@dataclass(frozen=True)
class RecalcResult:
    """What ``recalc`` wrote.

    Attributes
    ----------
    path : pathlib.Path
        The recalculated book.
    backup : pathlib.Path or None
        Backup of the file that was replaced (in-place recalculation only).
    values : dict
        ``(sheet title, coordinate) -> cached value`` for every formula cell.
    errors : list of tuple
        ``(sheet title, coordinate, value)`` for the cells that ended in a
        spreadsheet error or a ``#TAILSTOP!`` message.
    """

    path: Path
    backup: Path | None
    values: dict
    errors: list


def recalc(book_path, out_path, *, in_place=False, backup=True, allow_lossy=False, limits=Limits(),
           max_area=MAX_ENGINE_AREA, evaluate=None, spelling=None):
    """Evaluate every formula of a workbook and write a copy that stores the results.

    Parameters
    ----------
    book_path : str or os.PathLike
        The workbook to evaluate; it is opened with ``open_workbook_safely``.
    out_path : str or os.PathLike
        Where to write the result. Must not exist unless ``in_place``.
    in_place : bool
        Allow ``out_path`` to be an existing file (for example ``book_path``).
    backup : bool
        Keep a backup of a replaced file.
    allow_lossy : bool
        Go on even if openpyxl would drop content of the book on save.
    limits : Limits
        Bounds for opening the book.
    max_area : int
        Largest used rectangle (rows × columns) of a sheet; the engine visits
        every position of it.
    evaluate : callable, optional
        ``evaluate(book_path)`` -> values as ``evaluate_workbook`` returns them
        (the default); ``tailstop.extension.engine.evaluate_with_libreoffice``
        lets LibreOffice compute instead.
    spelling : {None, 'excel', 'libreoffice'}
        Rewrite the tailstop calls for this program (``workbooks/spelling.py``);
        None keeps each formula as written.

    Returns
    -------
    RecalcResult

    Raises
    ------
    WorkbookRefused
        The book is unsafe, would lose content, links to other workbooks
        (their formulas would read files the checks never saw), or has a
        sheet larger than ``max_area``.
    """
    book = open_workbook_safely(book_path, allow_lossy=allow_lossy, limits=limits)
    _refuse_external_links(Path(book_path), book.tailstop_report)
    _refuse_large_sheets(Path(book_path), book, max_area)
    computed = (evaluate or evaluate_workbook)(book_path)
    cached = _cached_values(book, computed)
    if spelling is not None:
        respell_book(book, spelling)
    exact = {**_numbers_openpyxl_would_round(book), **cached}
    saved = save_with_cached_values(book, out_path, exact, in_place=in_place, backup=backup)
    errors = [(title, cell, value) for (title, cell), value in cached.items() if _is_error(value)]
    return RecalcResult(saved.path, saved.backup, cached, errors)


def _refuse_external_links(path, report):
    links = [name for name, kind in report.content_types.items() if kind == _EXTERNAL_LINK]
    if links:
        raise WorkbookRefused(f"{path.name}: links to other workbooks ({', '.join(links)}); recalculation "
                              "does not follow them. Paste the linked values in, then recalculate")


def _refuse_large_sheets(path, book, max_area):
    for sheet in book.worksheets:
        area = sheet.max_row * sheet.max_column
        if area > max_area:
            raise WorkbookRefused(
                f"{path.name}: sheet '{sheet.title}' spans {sheet.max_row:,} rows × {sheet.max_column:,} columns "
                f"({area:,} cells); recalculation visits every one and is limited to {max_area:,}. Delete "
                "stray cells far from the data")


def _is_error(value):
    return isinstance(value, CellError) or (isinstance(value, str) and value.startswith("#TAILSTOP!"))


# ---------------------------------------------------------------------------
# evaluation
# ---------------------------------------------------------------------------
def evaluate_workbook(book_path):
    """Compute every cell of a workbook with the ``formulas`` engine.

    The caller is responsible for having checked the file
    (``open_workbook_safely``); ``recalc`` does both.

    Parameters
    ----------
    book_path : str or os.PathLike

    Returns
    -------
    dict
        ``(SHEET TITLE IN UPPER CASE, coordinate) -> value`` with plain
        Python values, ``None`` for empty and ``CellError`` for errors.
    """
    register_formulas()
    path = str(Path(book_path).absolute())
    with _quiet_progress():
        results = _calculate_with_filled_down_columns(path)
        if results is None:
            results = formulas.ExcelModel().loads(path).finish().calculate(), {}
    solution, filled = results
    computed, blocks = {}, []
    for key, ranges in solution.items():
        match = _ENGINE_KEY.match(str(key))
        if match and hasattr(ranges, "value"):
            computed[(match["sheet"].upper(), match["cell"])] = _from_engine(ranges.value)
        elif hasattr(ranges, "value") and (block := _ENGINE_BLOCK.match(str(key))):
            blocks.append((block["sheet"].upper(), block["block"], ranges.value))
    _spread_lone_blocks(blocks, computed)
    for key, value in filled.items():
        match = _ENGINE_KEY.match(key)
        computed[(match["sheet"].upper(), match["cell"])] = _from_engine(value)
    return computed


def _spread_lone_blocks(blocks, computed):
    """Give the cells of a block whose top-left cell the engine did not solve on its own their values.

    A range some formula reads has its cells solved one by one already; only an
    array formula that nothing reads is solved as a block alone.
    """
    for sheet, block, values in blocks:
        first_column, first_row, last_column, last_row = range_boundaries(block)
        if (sheet, f"{get_column_letter(first_column)}{first_row}") in computed:
            continue
        grid = np.atleast_2d(np.asarray(values, dtype=object))
        for row in range(min(last_row - first_row + 1, grid.shape[0])):
            for column in range(min(last_column - first_column + 1, grid.shape[1])):
                coordinate = f"{get_column_letter(first_column + column)}{first_row + row}"
                computed.setdefault((sheet, coordinate), _from_engine(grid[row, column]))


def _calculate_with_filled_down_columns(path):
    """The engine's results, and the values of the tailstop columns filled down a log (``filled_down``).

    Such a column is taken out of the engine's dependency graph and computed
    in one pass; None when one turns out to read its own cells (the book is
    then computed cell by cell).
    """
    model = formulas.ExcelModel()
    book, context = model.add_book(path)
    _clear_array_members(book)
    columns = filled_down.take_out(book, UDF_PREFIXES, _computes_filled_down)
    model.pushes(*book.worksheets, context=context)
    solution = model.finish().calculate()
    if not columns:
        return solution, {}
    return filled_down.put_back(model, solution, columns, context, _tailstop_formulas(), _to_cells, _to_engine)


def _clear_array_members(book):
    """Blank the cells an array formula fills, but its first, in the engine's copy of the book.

    A program that does not know a formula stores its error in every cell of the array (LibreOffice saves
    ``#NAME?`` there); read as constants, those would hide the array's own values.
    """
    for sheet in book.worksheets:
        for cell in list(getattr(sheet, "_cells", {}).values()):
            if isinstance(cell.value, ArrayFormula):
                for member in _block(cell)[1:]:
                    member.value = None


def _computes_filled_down(name):
    return importlib.import_module("tailstop.sheet.filled_down").takes_a_log_first(name)


@contextlib.contextmanager
def _quiet_progress():
    """Silence the progress bar ``formulas`` prints while it compiles a book (its module only)."""
    progress = getattr(formulas.excel, "tqdm", None)
    if progress is None:
        yield
        return
    formulas.excel.tqdm = types.SimpleNamespace(tqdm=functools.partial(progress.tqdm, disable=True))
    try:
        yield
    finally:
        formulas.excel.tqdm = progress


def _cached_values(book, computed):
    """(sheet title, coordinate) -> value for every formula cell and array-formula block."""
    cached = {}
    for sheet in book.worksheets:
        for cell in _formula_cells(sheet):
            for member in _block(cell):
                remember(member, computed.get((sheet.title.upper(), member.coordinate)), cached)
    return cached


def _numbers_openpyxl_would_round(book):
    """(sheet title, coordinate) -> value of the numbers openpyxl's writer would round (17 digits, > 2**53).

    ``save_with_cached_values`` writes them exactly, as annotate does (``cell_check.rounds_on_save``).
    """
    return {(sheet.title, cell.coordinate): cell._value for sheet in book.worksheets
            for cell in list(sheet._cells.values()) if cell.data_type == "n" and rounds_on_save(cell._value)}


def _formula_cells(sheet):
    """The sheet's formula cells, in no particular order.

    Reads openpyxl's store of existing cells: its public iterators create an
    empty cell for every position of the used rectangle, which for a sparse
    sheet can be many millions.
    """
    for cell in list(sheet._cells.values()):
        if isinstance(cell.value, ArrayFormula) or cell.data_type == "f":
            yield cell


def _block(cell):
    if not isinstance(cell.value, ArrayFormula):
        return [cell]
    first_column, first_row, last_column, last_row = range_boundaries(cell.value.ref)
    return [cell.parent.cell(row, column)
            for row in range(first_row, last_row + 1)
            for column in range(first_column, last_column + 1)]


# ---------------------------------------------------------------------------
# tailstop formulas inside the engine
# ---------------------------------------------------------------------------
def register_formulas():
    """Register every formula in ``tailstop.sheet.FORMULAS`` with the ``formulas`` engine.

    Safe to call repeatedly; formulas added to the registry since the last
    call are picked up.
    """
    registry = formulas.get_functions()
    for name in _tailstop_formulas():
        for prefix in UDF_PREFIXES:
            registry[prefix + name.upper()] = _engine_function(name)


def _tailstop_formulas():
    return importlib.import_module("tailstop.sheet").FORMULAS


def _engine_function(name):
    """An engine-side function that converts arguments, calls the formula, converts the result."""

    def call(*arguments):
        function = _tailstop_formulas().get(name)
        if function is None:
            return _engine_error("#NAME?")
        values, _ = parse_ranges(*arguments)
        ranges = set(getattr(getattr(function, "tailstop_spec", None), "ranges", ()))
        parameters = list(getattr(getattr(function, "tailstop_spec", None), "argument_help", {}))
        cells = [_to_cells(value, index < len(parameters) and parameters[index] in ranges)
                 for index, value in enumerate(values)]
        return _to_engine(function(*cells))

    call.__name__ = name
    return call


def _to_cells(value, is_range):
    """An engine argument as a spreadsheet passes it: a scalar, or a 2-D list for a range."""
    if not isinstance(value, np.ndarray):
        return _plain(value)
    if value.ndim == 0:
        return _plain(value.item())
    rows = [[_plain(item) for item in row] for row in np.atleast_2d(value).tolist()]
    if not is_range and len(rows) == 1 and len(rows[0]) == 1:
        return rows[0][0]
    return rows


def _plain(item):
    """One engine value as a cell value: None for empty, error text for errors, Python numbers."""
    if item is schedula.EMPTY or item is None:
        return None
    if isinstance(item, XlError):
        return str(item)
    if isinstance(item, (bool, np.bool_)):
        return bool(item)
    if isinstance(item, np.integer):
        return int(item)
    if isinstance(item, np.floating):
        return float(item)
    return item


def _to_engine(result):
    if isinstance(result, list):
        rows = [[schedula.EMPTY if item is None else item for item in row] for row in result]
        return np.asarray(rows, dtype=object).view(Array)
    return schedula.EMPTY if result is None else result


def _engine_error(code):
    return np.asarray([[Error.errors[code]]], dtype=object).view(Array)


def _from_engine(value):
    """The top-left value of an engine result as a cached cell value."""
    while isinstance(value, np.ndarray):
        value = value.item(0) if value.size else None
    if isinstance(value, XlError):
        code = str(value)
        return CellError(code) if code in EXCEL_ERRORS else code
    return _plain(value)
