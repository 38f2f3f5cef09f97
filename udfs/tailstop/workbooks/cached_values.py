"""Write formula cells together with their cached values.

A spreadsheet program shows the value stored beside a formula (``<c><f>…</f>
<v>…</v></c>`` in the sheet XML) until it recalculates. A book that carries
tailstop formulas plus values computed headless therefore shows the values
even where the add-in is not installed.

openpyxl cannot write both: a cell holds either a formula or a value, and
formula cells are saved with an empty ``<v/>``. So ``save_with_cached_values``
lets openpyxl save the book into memory, then rewrites the ``<c>`` elements of
the cells that have a cached value, and writes the result atomically. The
rewrite touches only openpyxl's own output, whose cell markup is regular
(one ``<c>`` element per cell, text escaped, no nesting), and it turns off
openpyxl's ``fullCalcOnLoad`` flag, which would otherwise make a spreadsheet
program discard the cached values on opening.
"""
from __future__ import annotations

import io
import math
import numbers
import posixpath
import re
import zipfile
from xml.sax.saxutils import escape

import defusedxml.ElementTree
from openpyxl.utils.cell import get_column_letter, range_boundaries
from openpyxl.worksheet.formula import ArrayFormula

from .safe_io import write_file_atomically

__all__ = ["CellError", "EXCEL_ERRORS", "set_formula", "remember", "save_with_cached_values"]

EXCEL_ERRORS = frozenset({"#NULL!", "#DIV/0!", "#VALUE!", "#REF!", "#NAME?", "#NUM!", "#N/A",
                          "#GETTING_DATA", "#SPILL!", "#CALC!"})
_MAIN = "{http://schemas.openxmlformats.org/spreadsheetml/2006/main}"
_RELS = "{http://schemas.openxmlformats.org/package/2006/relationships}"
_REL_ID = "{http://schemas.openxmlformats.org/officeDocument/2006/relationships}id"
_CELL = re.compile(rb"<c\b([^>]*?)(?:/>|>(.*?)</c>)", re.S)
_REFERENCE = re.compile(rb'\br="([A-Z]+[0-9]+)"')
_TYPE = re.compile(rb'\s+t="[^"]*"')
_FORMULA = re.compile(rb"<f\b[^>]*?(?:/>|>.*?</f>)", re.S)


class CellError(str):
    """A spreadsheet error value such as ``#DIV/0!`` (as opposed to text that looks like one)."""

    def __new__(cls, code):
        if code not in EXCEL_ERRORS:
            raise ValueError(f"not a spreadsheet error code: {code!r}")
        return super().__new__(cls, code)


def set_formula(sheet, coordinate, formula, value, cached):
    """Put a formula in a cell and remember the value it computes.

    Parameters
    ----------
    sheet : openpyxl worksheet
    coordinate : str
        Top-left cell, e.g. ``"C2"``.
    formula : str
        The formula, starting with ``=``.
    value : number, str, bool, CellError, None or 2-D list
        What the formula computes. A 2-D list with more than one cell makes
        the formula an array formula over a block of that shape starting at
        ``coordinate``; the block's other cells get their values directly,
        which is how spreadsheet files store array results.
    cached : dict
        Collects ``(sheet title, coordinate) -> value``; give it to
        ``save_with_cached_values``.

    Returns
    -------
    str
        The range the formula occupies (``"C2"`` or ``"C2:D2"``).
    """
    if not formula.startswith("="):
        raise ValueError(f"a formula starts with '=' (got {formula!r})")
    rows = value if isinstance(value, list) else [[value]]
    if not rows or not all(isinstance(row, list) and len(row) == len(rows[0]) for row in rows):
        raise ValueError("an array result must be a non-empty rectangular 2-D list")
    column, row = range_boundaries(coordinate)[:2]
    end = f"{get_column_letter(column + len(rows[0]) - 1)}{row + len(rows) - 1}"
    block = coordinate if end == coordinate else f"{coordinate}:{end}"
    sheet[coordinate] = formula if block == coordinate else ArrayFormula(block, formula)
    for row_offset, row_values in enumerate(rows):
        for column_offset, cell_value in enumerate(row_values):
            cell = sheet.cell(row + row_offset, column + column_offset)
            if (row_offset, column_offset) != (0, 0):
                cell.value = None
            remember(cell, cell_value, cached)
    return block


def remember(cell, value, cached):
    """Record ``value`` as the cached value of ``cell`` (a formula cell or part of an array block).

    An empty cell gets a placeholder so that openpyxl writes an element for it;
    ``save_with_cached_values`` replaces the placeholder by the value.
    """
    if cell.value is None:
        cell.value = 0
    cached[(cell.parent.title, cell.coordinate)] = value


def save_with_cached_values(book, target, cached, *, in_place=False, backup=True):
    """Save a workbook atomically, storing ``cached`` values beside (or in) their cells.

    Parameters
    ----------
    book : openpyxl.Workbook
    target : str or os.PathLike
    cached : dict
        ``(sheet title, coordinate) -> value`` as collected by ``set_formula``
        (or by ``recalc``). Formula cells keep their formula; other cells
        listed here get the value.
    in_place, backup : bool
        As for ``save_workbook_atomically``.

    Returns
    -------
    SaveResult
    """
    if book.calculation is not None:  # a book read without <calcPr> has none
        book.calculation.fullCalcOnLoad = False
    saved = io.BytesIO()
    book.save(saved)
    by_sheet = _group_by_sheet(cached)
    return write_file_atomically(target, lambda handle: _rewrite_package(saved, handle, by_sheet),
                                 in_place=in_place, backup=backup)


def _group_by_sheet(cached):
    by_sheet = {}
    for (title, coordinate), value in cached.items():
        by_sheet.setdefault(title, {})[coordinate.encode("ascii")] = value
    return by_sheet


def _rewrite_package(saved, handle, by_sheet):
    with zipfile.ZipFile(saved) as source, zipfile.ZipFile(handle, "w", zipfile.ZIP_DEFLATED) as output:
        parts = _sheet_parts(source)
        missing = set(by_sheet) - set(parts)
        if missing:
            raise KeyError(f"cached values for sheets not in the workbook: {sorted(missing)}")
        rewrite = {parts[title]: values for title, values in by_sheet.items()}
        for info in source.infolist():
            data = source.read(info)
            if info.filename in rewrite:
                data = _rewrite_sheet(data, rewrite[info.filename])
            output.writestr(info, data)


def _sheet_parts(archive):
    """Sheet title -> worksheet part name, from the workbook and its relationships."""
    workbook = defusedxml.ElementTree.fromstring(archive.read("xl/workbook.xml"))
    rels = defusedxml.ElementTree.fromstring(archive.read("xl/_rels/workbook.xml.rels"))
    targets = {rel.get("Id"): rel.get("Target") for rel in rels.iter(f"{_RELS}Relationship")}
    parts = {}
    for sheet in workbook.iter(f"{_MAIN}sheet"):
        target = targets[sheet.get(_REL_ID)]
        parts[sheet.get("name")] = target.lstrip("/") if target.startswith("/") else posixpath.join("xl", target)
    return parts


def _rewrite_sheet(xml, values):
    remaining = dict(values)

    def rewrite(match):
        reference = _REFERENCE.search(match.group(1))
        if reference is None or reference.group(1) not in remaining:
            return match.group(0)
        value = remaining.pop(reference.group(1))
        formula = _FORMULA.search(match.group(2) or b"")
        return _cell_markup(match.group(1), formula.group(0) if formula else b"", value)

    rewritten = _CELL.sub(rewrite, xml)
    if remaining:
        cells = ", ".join(sorted(key.decode() for key in remaining))
        raise KeyError(f"cells with cached values were not written by openpyxl: {cells}")
    return rewritten


def _cell_markup(attributes, formula, value):
    kind, text = _serialize(value)
    attributes = _TYPE.sub(b"", attributes)
    if kind:
        attributes += b' t="' + kind + b'"'
    stored = b"" if text is None else b"<v>" + text + b"</v>"
    return b"<c" + attributes + b">" + formula + stored + b"</c>"


def _serialize(value):
    """(t attribute, <v> text) for a cached value; text None stores no value."""
    if value is None:
        return b"", None
    if isinstance(value, CellError):
        return b"e", value.encode()
    if isinstance(value, bool):
        return b"b", b"1" if value else b"0"
    if isinstance(value, numbers.Integral):
        return b"n", str(int(value)).encode()
    if isinstance(value, numbers.Real):
        if not math.isfinite(value):
            return b"e", b"#NUM!"
        return b"n", repr(float(value)).encode()
    if isinstance(value, str):
        return b"str", escape(value).encode("utf-8")
    raise TypeError(f"cannot store a cached value of type {type(value).__name__}")
