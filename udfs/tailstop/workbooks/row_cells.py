"""Append plain cells to the rows of a sheet after openpyxl has written it.

A decision column on a long log is a hundred thousand cells of a few fixed
texts. Creating them as openpyxl cells and letting openpyxl serialise them
costs more than loading the whole log, so ``tailstop annotate`` writes the
unstyled decision cells of the rows that already hold a log value as markup,
appended to the end of those rows in openpyxl's own output (the decision
column is to the right of every other cell of such a row, so the cells stay
in column order). The markup is openpyxl's: ``<c r="E7" t="inlineStr"><is>
<t>STOP</t></is></c>`` for a value, ``<c r="E7" t="str"><f>…</f><v>STOP</v></c>``
for a formula with its cached value.

Like ``cached_values``, this reads only openpyxl's regular output, and the
book is read back cell by cell afterwards (``cell_check``) before it is
written anywhere.
"""
from __future__ import annotations

import io
import re
import zipfile
from xml.sax.saxutils import escape

from .cell_check import worksheet_parts

__all__ = ["text_cell", "formula_cell", "append_to_rows", "append_to_sheet"]

_ROW_EVENT = re.compile(rb'<row r="([0-9]+)"[^>]*?(/?)>|</row>')
_ROW_START = re.compile(rb'<row r="([0-9]+)"[^>]*?(/?)>')


def text_cell(coordinate, text) -> bytes:
    """Markup of a cell holding ``text``."""
    return f'<c r="{coordinate}" t="inlineStr"><is><t>{escape(text)}</t></is></c>'.encode()


def formula_cell(coordinate, formula, cached_text) -> bytes:
    """Markup of a cell holding ``formula`` (starting with '=') with a text as its cached value."""
    return f'<c r="{coordinate}" t="str"><f>{escape(formula[1:])}</f><v>{escape(cached_text)}</v></c>'.encode()


def append_to_rows(xml, cells_by_row) -> bytes:
    """Sheet XML with ``cells_by_row[row]`` (markup) added at the end of each of those rows.

    Raises
    ------
    ValueError
        A row is missing from the XML or written as an empty element.
    """
    pieces = xml.split(b"</row>")
    starts = _ROW_START.findall(xml)
    if len(starts) != len(pieces) - 1:  # an empty <row/> element: take the slow way
        return _append_row_by_row(xml, cells_by_row)
    placed = 0
    for index, (row_text, empty) in enumerate(starts):
        markup = cells_by_row.get(int(row_text))
        if markup is not None:
            pieces[index] += markup
            placed += 1
    if placed != len(cells_by_row):
        raise ValueError(f"{len(cells_by_row) - placed} of the rows to extend are not in the sheet")
    return b"</row>".join(pieces)


def _append_row_by_row(xml, cells_by_row):
    pieces, position, row, placed = [], 0, None, 0
    for match in _ROW_EVENT.finditer(xml):
        if match.group(1) is not None:
            row = int(match.group(1))
            if match.group(2) and row in cells_by_row:
                raise ValueError(f"row {row} is written as an empty element")
            continue
        markup = cells_by_row.get(row)
        if markup is not None:
            pieces += [xml[position:match.start()], markup]
            position = match.start()
            placed += 1
    if placed != len(cells_by_row):
        raise ValueError(f"{len(cells_by_row) - placed} of the rows to extend are not in the sheet")
    pieces.append(xml[position:])
    return b"".join(pieces)


def append_to_sheet(data, sheet_title, cells_by_row) -> bytes:
    """An .xlsx package with cells appended to rows of one worksheet; every other part unchanged."""
    if not cells_by_row:
        return data
    output = io.BytesIO()
    with zipfile.ZipFile(io.BytesIO(data)) as source:
        part = worksheet_parts(source)[sheet_title]
        with zipfile.ZipFile(output, "w", zipfile.ZIP_DEFLATED) as target:
            for info in source.infolist():
                content = source.read(info)
                if info.filename == part:
                    content = append_to_rows(content, cells_by_row)
                target.writestr(info, content)
    return output.getvalue()
