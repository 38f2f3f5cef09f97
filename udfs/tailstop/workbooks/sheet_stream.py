"""Add cells to one worksheet of an .xlsx package without loading the book: the path for long logs.

openpyxl builds every cell of a sheet as a Python object; a full-sheet log
(1,048,576 rows) takes about a gigabyte that way before anything is added.
``tailstop annotate`` therefore edits long logs as bytes instead:

* every part of the package other than the log's worksheet and the style
  sheet is copied unchanged (same inflated bytes, so same CRC);
* the worksheet keeps every byte of its rows; the new cells are appended at
  the end of their rows (they lie right of every cell of the sheet, so the
  cells of a row stay in column order), rows that do not exist yet are
  inserted in row order, and three small elements change: the ``<dimension>``
  reference, ``<cols>`` (the widths of the new columns) and one new
  ``<conditionalFormatting>`` element at its place in the schema order;
* cells of given columns can be taken out of their rows first (an earlier
  run's cells, written again), and given ``<conditionalFormatting>``
  elements out of the part after the rows;
* the style sheet gets the new fonts, fills, number formats, cell formats
  and the one differential format appended after the existing ones, so no
  existing style index changes.

Only markup this module understands is edited this way (``NotStreamable``
otherwise, and the caller takes the openpyxl path): a worksheet and a style
sheet in the default SpreadsheetML namespace, rows in increasing order, every
row and cell with its reference, no comments or CDATA among the rows.

Everything is read in slices that start at a ``<row`` element: the original
sheet's XML is held once, the written one is checked as it inflates, so
memory stays near the size of the sheet's XML, not of a cell model.
"""
from __future__ import annotations

import re
from dataclasses import dataclass
from xml.sax.saxutils import escape

from openpyxl.utils.cell import column_index_from_string, get_column_letter

__all__ = [
    "NotStreamable",
    "SheetXml",
    "split_sheet",
    "StreamedSheet",
    "aligned_slices",
    "SheetShape",
    "StylesEdit",
    "cell_markup",
    "extended_rows",
    "cell_positions",
    "merged_ranges",
    "edit_head",
    "edit_tail",
    "conditional_formats",
    "first_priority",
    "without_spans",
    "MAIN_NAMESPACE",
]

MAIN_NAMESPACE = b"http://schemas.openxmlformats.org/spreadsheetml/2006/main"
SLICE_BYTES = 2**21

_ROOT = re.compile(rb"<worksheet\b[^>]*>")
_DEFAULT_NS = re.compile(rb'\sxmlns="([^"]*)"')
_SHEET_DATA = re.compile(rb"<sheetData\s*(/?)>")
_ROW_TAG = re.compile(rb"<row\b([^>]*?)(/?)>")
_ROW_NUMBER = re.compile(rb'\br="([0-9]+)"')
_SPANS = re.compile(rb'\sspans="[^"]*"')
_CELL_START = re.compile(rb"<c[\s/>]")
_CELL_COLUMN = re.compile(rb'<c r="([A-Z]{1,3})[0-9]')
_CELL_REF = re.compile(rb'<c r="([A-Z]{1,3})([0-9]+)"')
_MERGE_REF = re.compile(rb'<mergeCell\b[^>]*?\bref="([A-Z]{1,3}[0-9]+(?::[A-Z]{1,3}[0-9]+)?)"')
_MERGE = re.compile(rb'<mergeCell\b[^>]*?\bref="([A-Z]{1,3})[0-9]+(?::([A-Z]{1,3})[0-9]+)?"')
_DIMENSION = re.compile(rb'(<dimension\b[^>]*?\bref=")([^"]*)(")')
_COLS = re.compile(rb"<cols>(.*?)</cols>|<cols\s*/>", re.S)
_COL = re.compile(rb"<col\b[^>]*?/>|<col\b[^>]*?>.*?</col>", re.S)
_MIN = re.compile(rb'\bmin="([0-9]+)"')
_MAX = re.compile(rb'\bmax="([0-9]+)"')
_PRIORITY = re.compile(rb'\bpriority="([0-9]+)"')
# worksheet children that come after <conditionalFormatting> (ECMA-376 Part 1, CT_Worksheet sequence)
_AFTER_CONDITIONAL_FORMATS = (b"dataValidations", b"hyperlinks", b"printOptions", b"pageMargins", b"pageSetup",
                              b"headerFooter", b"rowBreaks", b"colBreaks", b"customProperties", b"cellWatches",
                              b"ignoredErrors", b"smartTags", b"drawing", b"legacyDrawing", b"legacyDrawingHF",
                              b"picture", b"oleObjects", b"controls", b"webPublishItems", b"tableParts", b"extLst")
# controls and embedded objects come wrapped in markup-compatibility blocks, also after the formats
_LATER_TAIL = re.compile(rb"<(?:" + b"|".join(_AFTER_CONDITIONAL_FORMATS) + rb")[\s/>]|<[A-Za-z0-9_]+:AlternateContent[\s>]"
                         rb"|</worksheet>")


class NotStreamable(Exception):
    """The markup is not one this module edits; take the openpyxl path."""


@dataclass(frozen=True)
class SheetXml:
    """A worksheet part cut around its rows, without copying them.

    The rows are ``xml[start:end]``; ``head + rows + tail`` is the part (with
    ``<sheetData/>`` opened into ``<sheetData></sheetData>``). ``root`` is the
    ``<worksheet …>`` start tag, which declares the namespaces the rows may use.
    """

    root: bytes
    head: bytes
    xml: bytes
    start: int
    end: int
    tail: bytes

    def slices(self, size: int = SLICE_BYTES):
        """``(offset, slice)`` of the rows, each slice starting at a ``<row`` element."""
        xml, start, end = self.xml, self.start, self.end
        while start < end:
            cut = xml.find(b"<row", start + size, end)
            stop = end if cut < 0 else cut
            yield start, xml[start:stop]
            start = stop


def split_sheet(xml: bytes) -> SheetXml:
    """Cut a worksheet part around its rows; ``NotStreamable`` for markup this module does not edit."""
    root = _check_root(xml)
    found = list(_SHEET_DATA.finditer(xml))
    if len(found) != 1:
        raise NotStreamable("the worksheet has no single <sheetData> element")
    start = found[0]
    if start.group(1):
        return SheetXml(root, xml[: start.start()] + b"<sheetData>", xml, start.end(), start.end(),
                        b"</sheetData>" + xml[start.end():])
    end = xml.find(b"</sheetData>", start.end())
    if end < 0 or xml.find(b"</sheetData>", end + 1) >= 0:
        raise NotStreamable("the worksheet's <sheetData> element is not closed once")
    if xml.find(b"<!", start.end(), end) >= 0:
        raise NotStreamable("comments or CDATA among the rows")
    return SheetXml(root, xml[: start.end()], xml, start.end(), end, xml[end:])


def _check_root(xml):
    root = _ROOT.search(xml, 0, 4096)
    namespace = _DEFAULT_NS.search(root.group(0)) if root else None
    if namespace is None or namespace.group(1) != MAIN_NAMESPACE:
        raise NotStreamable("the worksheet does not use the default SpreadsheetML namespace")
    return root.group(0)


class StreamedSheet:
    """A worksheet part read from a decompressing stream: its head, then its rows in pieces, then its tail.

    Used to check a written sheet without holding it in memory. The rows come
    from ``rows()`` in pieces of any length; ``tail`` is set once they are done.
    """

    def __init__(self, stream, chunk: int = 2**20):
        self.stream = stream
        self.chunk = chunk
        buffer = b""
        while (found := _SHEET_DATA.search(buffer)) is None:
            data = stream.read(chunk)
            if not data:
                raise NotStreamable("the written worksheet has no <sheetData> element")
            buffer += data
        if found.group(1):
            raise NotStreamable("the written worksheet has an empty <sheetData/> element")
        self.head = buffer[: found.end()]
        self.root = _check_root(self.head)
        self._rest = buffer[found.end():]
        self.tail = None

    def rows(self):
        """Pieces of the rows, in order (no piece holds a comment or CDATA)."""
        buffer, self._rest = self._rest, b""
        keep = len(b"</sheetData>") - 1  # a closing tag may be cut between two reads
        while True:
            end = buffer.find(b"</sheetData>")
            if end >= 0:
                self.tail = buffer[end:] + self.stream.read()
                yield _no_markup_declarations(buffer[:end])
                return
            if len(buffer) > keep:
                _no_markup_declarations(buffer)  # the whole buffer: "<!" may straddle the cut
                yield buffer[: len(buffer) - keep]
                buffer = buffer[len(buffer) - keep:]
            data = self.stream.read(self.chunk)
            if not data:
                raise NotStreamable("the written worksheet's <sheetData> element is not closed")
            buffer += data


def _no_markup_declarations(piece):
    if b"<!" in piece:
        raise NotStreamable("comments or CDATA among the written rows")
    return piece


def _row_number(attributes):
    found = _ROW_NUMBER.search(attributes)
    if found is None:
        raise NotStreamable("a row without its row number")
    return int(found.group(1))


def first_row_of(piece: bytes):
    """The row number of the first ``<row`` element of a slice (None if it has none)."""
    found = _ROW_TAG.search(piece)
    return None if found is None else _row_number(found.group(1))


def aligned_slices(old: SheetXml, new_rows, size: int = SLICE_BYTES):
    """Pairs of slices of two sheets' rows that hold the same row numbers.

    ``old`` is cut at ``<row`` elements every ``size`` bytes; ``new_rows``
    (pieces of the other sheet's rows, of any length) is cut before the same
    row numbers, so rows present only in the new sheet fall into the slice of
    their row range.

    Yields
    ------
    (old slice, new slice, first row (0 for the first slice), next slice's first row or None)
    """
    cuts = [(piece, first_row_of(piece)) for _, piece in old.slices(size)]
    pieces = iter(new_rows)
    if not cuts:
        yield b"", b"".join(pieces), 0, None
        return
    buffer, scanned = b"", 0
    for index, (piece, row) in enumerate(cuts):
        low = 0 if index == 0 else row
        upto = cuts[index + 1][1] if index + 1 < len(cuts) else None
        if upto is None:
            yield piece, buffer + b"".join(pieces), low, None
            return
        cut = None
        while cut is None:
            for match in _ROW_TAG.finditer(buffer, scanned):
                if _row_number(match.group(1)) >= upto:
                    cut = match.start()
                    break
                scanned = match.end()
            if cut is None:
                more = next(pieces, None)
                if more is None:
                    cut = len(buffer)
                else:
                    buffer += more
        yield piece, buffer[:cut], low, upto
        buffer, scanned = buffer[cut:], 0


# --------------------------------------------------------------------------- the shape of the sheet


@dataclass
class SheetShape:
    """What the writer needs to know of the rows: last row, rightmost cell, and that rows are in order."""

    max_row: int = 0
    max_column: int = 0
    cells: int = 0

    def take(self, piece: bytes):
        """Account for one slice of rows (slices in order)."""
        previous = self.max_row
        rows = 0
        for match in _ROW_TAG.finditer(piece):
            row = _row_number(match.group(1))
            if row <= previous:
                raise NotStreamable("rows are not in increasing order")
            previous = row
            rows += 1
        if rows != piece.count(b"<row"):
            raise NotStreamable("row markup this module does not read")
        self.max_row = max(self.max_row, previous)
        letters = set(_CELL_COLUMN.findall(piece))
        found = len(_CELL_START.findall(piece))
        if found != piece.count(b"<c r=\""):
            raise NotStreamable("a cell without its reference")
        self.cells += found
        if letters:
            self.max_column = max(self.max_column, max(column_index_from_string(text.decode()) for text in letters))

    def take_merges(self, tail: bytes):
        """Merged ranges count as occupied up to their right edge (openpyxl's load does the same)."""
        for first, last in _MERGE.findall(tail):
            self.max_column = max(self.max_column, column_index_from_string((last or first).decode()))


def cell_positions(piece: bytes, columns: dict):
    """(row, column) of every cell element of a slice, styled blanks included, in document order.

    ``columns`` caches column letters -> number across slices.
    """
    for letters, row in _CELL_REF.findall(piece):
        column = columns.get(letters)
        if column is None:
            column = columns[letters] = column_index_from_string(letters.decode())
        yield int(row), column


def merged_ranges(tail: bytes):
    """(min column, min row, max column, max row) of every merged range in the part after the rows."""
    from openpyxl.utils.cell import range_boundaries

    return [range_boundaries(ref.decode()) for ref in _MERGE_REF.findall(tail)]


# --------------------------------------------------------------------------- cells and rows


def cell_markup(coordinate: str, style: int, data_type: str, value, cached=None) -> bytes:
    """Markup of one new cell (``style`` 0: no ``s`` attribute).

    ``data_type`` as openpyxl's: 'n' number, 's' text, 'b' boolean, 'f'
    formula (``value`` starts with '='; ``cached`` is its stored result).
    """
    from .cached_values import (
        _serialize,  # the same serialisation as the cached-value writer
    )

    attributes = f'<c r="{coordinate}"' + (f' s="{style}"' if style else "")
    if value is None:
        return (attributes + "/>").encode()
    if data_type == "f":
        kind, text = _serialize(cached)
        kind_attribute = f' t="{kind.decode()}"' if kind else ""
        stored = "" if text is None else f"<v>{text.decode('utf-8')}</v>"
        return f"{attributes}{kind_attribute}><f>{escape(value[1:])}</f>{stored}</c>".encode()
    if data_type == "s":
        space = ' xml:space="preserve"' if value != value.strip() else ""
        return f'{attributes} t="inlineStr"><is><t{space}>{escape(value)}</t></is></c>'.encode()
    if data_type == "b":
        return f'{attributes} t="b"><v>{int(bool(value))}</v></c>'.encode()
    if data_type == "n":
        text = str(value) if isinstance(value, int) else repr(float(value))
        return f'{attributes} t="n"><v>{text}</v></c>'.encode()
    raise ValueError(f"no markup for a {data_type!r} cell")


def extended_rows(sheet: SheetXml, edits, last_column: int, keep_formats=(), kept=None):
    """The sheet's rows with ``edits`` — ``(row, [(column, markup), ...], {columns})`` in increasing row order —
    made: the cells of the listed columns taken out of the row, the new cells added.

    In a row that exists each new cell goes before the first cell of a
    column right of it, or before ``</row>`` (cells stay in column order; a
    ``spans`` hint is widened to ``last_column``); a row that does not exist
    is inserted in order, and a row this editor inserted (no attribute but its
    number) that is left without a cell is dropped. After the removals, the
    columns of new cells hold no cell of the row but cells without content
    (formatted blanks), which the new cells replace.

    In the columns of ``keep_formats`` a new cell takes the format (the ``s``
    attribute, when not 0) of the cell it replaces, a formatted blank or a
    cell taken out; ``kept`` (a dict) counts under ``"blanks"`` the formatted
    blanks whose format was taken. Yields pieces of bytes.
    """
    xml, limit = sheet.xml, sheet.end
    keep_formats = set(keep_formats)
    pending = next(edits, None)
    position = sheet.start
    for match in _ROW_TAG.finditer(xml, sheet.start, limit):
        if pending is None:
            break
        row = _row_number(match.group(1))
        while pending is not None and pending[0] < row:
            yield xml[position: match.start()]
            position = match.start()
            yield _new_row(pending)
            pending = next(edits, None)
        if pending is None or pending[0] != row:
            continue
        _, cells, removed = pending
        attributes = _widened(match.group(1), last_column)
        yield xml[position: match.start()]
        if match.group(2):
            yield b"<row" + attributes + b">" + _joined(cells) + b"</row>" if cells else match.group(0)
            position = match.end()
        else:
            end = xml.find(b"</row>", match.end(), limit)
            if end < 0:
                raise NotStreamable(f"row {row} is not closed")
            content, formats = xml[match.end(): end], {}
            if removed:
                content = _without_cells(content, row, removed, formats)
            if cells:
                content = _without_blanks(content, row, [column for column, _ in cells], formats, kept)
                cells = [(column, _with_format(markup, formats[column]) if formats.get(column) and
                          column in keep_formats else markup) for column, markup in cells]
            if not content and not cells and match.group(1).strip() == b'r="%d"' % row:
                position = end + len(b"</row>")
            else:
                yield b"<row" + attributes + b">"
                yield _merged_cells(content, cells)
                position = end
        pending = next(edits, None)
    yield xml[position: limit]
    while pending is not None:
        yield _new_row(pending)
        pending = next(edits, None)


_FORMAT = re.compile(rb'\ss="([0-9]+)"')
_NEW_CELL_START = re.compile(rb'^(<c r="[A-Z]{1,3}[0-9]+")(?: s="[0-9]+")?')


def _with_format(markup: bytes, style: int) -> bytes:
    """New cell markup with the format ``style`` (an index into the style sheet's cell formats)."""
    return _NEW_CELL_START.sub(lambda found: found.group(1) + b' s="%d"' % style, markup, count=1)


def _cell_span(content: bytes, row: int, column: int):
    """(start, end of the start tag, end) of the cell element of ``column`` in a row's markup, or None."""
    start = content.find(b'<c r="%s%d"' % (get_column_letter(column).encode(), row))
    if start < 0:
        return None
    tag_end = content.find(b">", start)
    if tag_end < 0:
        raise NotStreamable(f"a cell of row {row} is not closed")
    if content[tag_end - 1] == ord("/"):
        return start, tag_end + 1, tag_end + 1
    end = content.find(b"</c>", tag_end)
    if end < 0:
        raise NotStreamable(f"a cell of row {row} is not closed")
    return start, tag_end + 1, end + len(b"</c>")


def _format_of(content: bytes, span) -> int:
    found = _FORMAT.search(content, span[0], span[1])
    return int(found.group(1)) if found else 0


def _without_cells(content: bytes, row: int, columns, formats=None) -> bytes:
    """A row's cell markup without the cells of ``columns``; ``formats`` collects {column: their format}."""
    spans = []
    for column in columns:
        span = _cell_span(content, row, column)
        if span is not None:
            spans.append((span[0], span[2]))
            if formats is not None:
                formats[column] = _format_of(content, span)
    return without_spans(content, sorted(spans))


def _without_blanks(content: bytes, row: int, columns, formats, kept) -> bytes:
    """A row's cell markup without the cells of ``columns`` that hold nothing (formatted blanks), their formats
    collected in ``formats``; a cell with content stays (the new cell then meets it: ``NotStreamable``)."""
    spans = []
    for column in columns:
        span = _cell_span(content, row, column)
        if span is None or content[span[1]: span[2]].removesuffix(b"</c>").strip():
            continue
        spans.append((span[0], span[2]))
        style = _format_of(content, span)
        formats.setdefault(column, style)
        if style and kept is not None:
            kept["blanks"] = kept.get("blanks", 0) + 1
    return without_spans(content, sorted(spans)) if spans else content


def _new_row(edit):
    row, cells, _ = edit  # nothing to take out of a row that is not there
    return b'<row r="%d">' % row + _joined(cells) + b"</row>" if cells else b""


def _joined(cells):
    return b"".join(markup for _, markup in sorted(cells, key=lambda cell: cell[0]))


def _merged_cells(content: bytes, cells) -> bytes:
    """A row's cell markup with new ``(column, markup)`` cells put in column order among its own."""
    cells = sorted(cells, key=lambda cell: cell[0])
    last = _CELL_REF.match(content, max(content.rfind(b'<c r="'), 0))
    if not cells or last is None or column_index_from_string(last.group(1).decode()) < cells[0][0]:
        return content + b"".join(markup for _, markup in cells)  # every new cell right of the row's cells
    starts = [(column_index_from_string(found.group(1).decode()), found.start())
              for found in _CELL_REF.finditer(content)]
    pieces, position, index = [], 0, 0
    for column, start in starts:
        while index < len(cells) and cells[index][0] < column:
            pieces += [content[position:start], cells[index][1]]
            position = start
            index += 1
        if index < len(cells) and cells[index][0] == column:
            raise NotStreamable(f"a new cell in column {column} meets an existing one")
    pieces.append(content[position:])
    pieces += [markup for _, markup in cells[index:]]
    return b"".join(pieces)


def _widened(attributes, last_column):
    found = _SPANS.search(attributes)
    if found is None:
        return attributes
    bounds = found.group(0).split(b'"')[1].split(b":")
    low = bounds[0] or b"1"
    high = max(last_column, int(bounds[-1])) if bounds[-1].isdigit() else last_column
    return attributes[: found.start()] + b' spans="%s:%d"' % (low, high) + attributes[found.end():]


# --------------------------------------------------------------------------- the elements around the rows


def edit_head(head: bytes, last_row: int, last_column: int, widths: dict) -> bytes:
    """The part before the rows with the dimension widened and ``widths`` {column: width} added to ``<cols>``.

    A width is added only where no existing ``<col>`` entry covers the column
    (the same rule as ``log_layout.set_width``).
    """
    head = _DIMENSION.sub(lambda found: found.group(1) + _dimension(found.group(2), last_row, last_column)
                          + found.group(3), head, count=1)
    cols = _COLS.search(head)
    entries = _COL.findall(cols.group(1) or b"") if cols else []
    spans = [(int(_MIN.search(entry).group(1)), int(_MAX.search(entry).group(1))) for entry in entries
             if _MIN.search(entry) and _MAX.search(entry)]
    if len(spans) != len(entries):
        raise NotStreamable("a column entry without its range")
    for column, width in widths.items():
        if not any(low <= column <= high for low, high in spans):
            entries.append(b'<col min="%d" max="%d" width="%s" customWidth="1"/>'
                           % (column, column, repr(float(width)).removesuffix(".0").encode()))
            spans.append((column, column))
    ordered = b"".join(entry for _, entry in sorted(zip(spans, entries), key=lambda pair: pair[0]))
    if cols:
        return head[: cols.start()] + b"<cols>" + ordered + b"</cols>" + head[cols.end():]
    if not ordered:
        return head
    at = head.rfind(b"<sheetData")
    return head[:at] + b"<cols>" + ordered + b"</cols>" + head[at:]


def _dimension(reference, last_row, last_column):
    corners = reference.split(b":")
    match = re.fullmatch(rb"\$?([A-Z]{1,3})\$?([0-9]+)", corners[-1])
    if match is None:
        raise NotStreamable("a dimension reference this module does not read")
    column = max(column_index_from_string(match.group(1).decode()), last_column)
    row = max(int(match.group(2)), last_row)
    return corners[0] + b":" + get_column_letter(column).encode() + str(row).encode()


def edit_tail(tail: bytes, conditional_format: bytes) -> bytes:
    """The part after the rows with one ``<conditionalFormatting>`` element inserted at its place."""
    found = _LATER_TAIL.search(tail)
    if found is None:
        raise NotStreamable("the worksheet does not end with </worksheet>")
    return tail[: found.start()] + conditional_format + tail[found.start():]


_CONDITIONAL_FORMAT = re.compile(rb"<conditionalFormatting\b[^>]*?(?:/>|>.*?</conditionalFormatting>)", re.S)


def conditional_formats(tail: bytes):
    """The ``<conditionalFormatting>`` elements of the part after the rows, as (start, end) spans."""
    return [found.span() for found in _CONDITIONAL_FORMAT.finditer(tail)]


def without_spans(data: bytes, spans) -> bytes:
    """``data`` with the (start, end) spans, in order and not overlapping, cut out."""
    pieces, position = [], 0
    for start, end in spans:
        pieces.append(data[position:start])
        position = end
    pieces.append(data[position:])
    return b"".join(pieces)


def first_priority(element: bytes) -> int:
    """The priority of the first rule of a ``<conditionalFormatting>`` element (1 if it gives none)."""
    found = _PRIORITY.search(element)
    return 1 if found is None else int(found.group(1))


def next_priority(tail: bytes) -> int:
    """A conditional-format priority above every existing one."""
    return max((int(value) for value in _PRIORITY.findall(tail)), default=0) + 1


def conditional_format(sqref: str, dxf_id: int, priority: int, operator: str, formula: str) -> bytes:
    """A ``cellIs`` conditional format over ``sqref``."""
    return (f'<conditionalFormatting sqref="{sqref}"><cfRule type="cellIs" dxfId="{dxf_id}" priority="{priority}" '
            f'operator="{operator}"><formula>{escape(formula)}</formula></cfRule></conditionalFormatting>').encode()


# --------------------------------------------------------------------------- the style sheet


_STYLES_ROOT = re.compile(rb"<styleSheet\b[^>]*>")
_CUSTOM_FORMAT_IDS = re.compile(rb'<numFmt\b[^>]*?\bnumFmtId="([0-9]+)"')
_AFTER_DXFS = re.compile(rb"<tableStyles[\s/>]|<colors[\s/>]|<extLst[\s/>]|</styleSheet>")
FIRST_CUSTOM_FORMAT = 164  # ids below are built in (ECMA-376 Part 1, 18.8.30)


class StylesEdit:
    """Append cell formats and differential formats to a style sheet's XML; existing indexes stay.

    Parameters
    ----------
    xml : bytes
        The ``styles.xml`` part.
    builtin_formats : dict
        Number format code -> built-in id (openpyxl's ``BUILTIN_FORMATS_REVERSE``).
    existing : optional
        Finds a format the style sheet already holds: ``existing.cell_format(font, fill, number_format)`` and
        ``existing.differential_format(dxf)`` give its index or None. An earlier run's formats are then taken
        again instead of appended once more.
    """

    def __init__(self, xml: bytes, builtin_formats: dict, existing=None):
        root = _STYLES_ROOT.search(xml, 0, 4096)
        namespace = _DEFAULT_NS.search(root.group(0)) if root else None
        if namespace is None or namespace.group(1) != MAIN_NAMESPACE:
            raise NotStreamable("the style sheet does not use the default SpreadsheetML namespace")
        self.xml = xml
        self.builtin = builtin_formats
        self.counts = {name: self._count(name, child) for name, child in
                       ((b"fonts", b"font"), (b"fills", b"fill"), (b"borders", b"border"), (b"cellXfs", b"xf"),
                        (b"cellStyleXfs", b"xf"), (b"dxfs", b"dxf"))}
        for required in (b"fonts", b"fills", b"borders", b"cellXfs"):
            if not self.counts[required]:
                raise NotStreamable(f"the style sheet has no {required.decode()}")
        self.added = {b"fonts": [], b"fills": [], b"cellXfs": [], b"dxfs": [], b"numFmts": []}
        self.formats = {}
        self.next_format = max([FIRST_CUSTOM_FORMAT - 1] + [int(v) for v in _CUSTOM_FORMAT_IDS.findall(xml)]) + 1
        self.cell_formats = {}
        self.existing = existing

    def _section(self, name):
        found = re.search(rb"<" + name + rb"\b[^>]*?(?:/>|>(.*?)</" + name + rb">)", self.xml, re.S)
        return found

    def _count(self, name, child):
        found = self._section(name)
        if found is None:
            return 0
        return len(re.findall(rb"<" + child + rb"[\s/>]", found.group(1) or b""))

    def cell_format(self, font: bytes | None, fill: bytes | None, number_format: str) -> int:
        """The index of a new cell format (``xf``) with this font and fill markup and number format code.

        None for the font or the fill means the book's first (default) one.
        """
        key = (font, fill, number_format)
        if key in self.cell_formats:
            return self.cell_formats[key]
        found = None if self.existing is None else self.existing.cell_format(font, fill, number_format)
        if found is not None:
            self.cell_formats[key] = found
            return found
        font_id = 0 if font is None else self._append(b"fonts", font)
        fill_id = 0 if fill is None else self._append(b"fills", fill)
        format_id = self._number_format(number_format)
        applied = b"".join(flag for flag, used in ((b' applyNumberFormat="1"', format_id != 0),
                                                   (b' applyFont="1"', font is not None),
                                                   (b' applyFill="1"', fill is not None)) if used)
        style = b' xfId="0"' if self.counts[b"cellStyleXfs"] else b""
        xf = b'<xf numFmtId="%d" fontId="%d" fillId="%d" borderId="0"%s%s/>' % (format_id, font_id, fill_id, style,
                                                                               applied)
        index = self._append(b"cellXfs", xf)
        self.cell_formats[key] = index
        return index

    def differential_format(self, dxf: bytes) -> int:
        found = None if self.existing is None else self.existing.differential_format(dxf)
        return self._append(b"dxfs", dxf) if found is None else found

    def _append(self, section, markup):
        index = self.counts.get(section, 0) + len(self.added[section])
        self.added[section].append(markup)
        return index

    def _number_format(self, code):
        if code in self.builtin:
            return self.builtin[code]
        if code not in self.formats:
            self.formats[code] = self.next_format
            self.added[b"numFmts"].append(b'<numFmt numFmtId="%d" formatCode="%s"/>'
                                          % (self.next_format, escape(code, {'"': "&quot;"}).encode()))
            self.next_format += 1
        return self.formats[code]

    def result(self) -> bytes:
        xml = self.xml
        for section, child in ((b"numFmts", b"numFmt"), (b"fonts", b"font"), (b"fills", b"fill"),
                               (b"cellXfs", b"xf"), (b"dxfs", b"dxf")):
            if self.added[section]:
                xml = _append_children(xml, section, child, b"".join(self.added[section]))
        return xml


def _append_children(xml, section, child, markup):
    found = re.search(rb"<" + section + rb"\b([^>]*?)(/?)>", xml)
    if found is None:
        count = len(re.findall(rb"<" + child + rb"[\s/>]", markup))
        element = b'<%s count="%d">%s</%s>' % (section, count, markup, section)
        if section == b"numFmts":
            at = _STYLES_ROOT.search(xml).end()
        else:  # dxfs
            at = _AFTER_DXFS.search(xml).start()
        return xml[:at] + element + xml[at:]
    if found.group(2):
        end_start, end_stop = found.end(), found.end()
        start_tag = b"<" + section + found.group(1) + b">"
        closing = b"</" + section + b">"
        content = b""
    else:
        end_start = xml.find(b"</" + section + b">", found.end())
        end_stop = end_start
        start_tag = found.group(0)
        closing = b""
        content = xml[found.end(): end_start]
    count = len(re.findall(rb"<" + child + rb"[\s/>]", content + markup))
    start_tag = _with_count(start_tag, count)
    return xml[: found.start()] + start_tag + content + markup + closing + xml[end_stop:]


def _with_count(start_tag, count):
    if re.search(rb'\bcount="[0-9]*"', start_tag):
        return re.sub(rb'\bcount="[0-9]*"', b'count="%d"' % count, start_tag, count=1)
    return start_tag[:-1] + b' count="%d">' % count
