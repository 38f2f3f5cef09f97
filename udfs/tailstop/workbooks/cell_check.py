"""Prove that a rewritten workbook kept every cell of the original, and find what openpyxl would round.

``tailstop annotate`` adds cells to a log and lets openpyxl write the book
again. Before the new file is put in place, every cell of every sheet of the
new package is read back and compared with the original: same value (or
same formula) in every cell, no cell gone, no cell added except the ones the
tool meant to add, which must hold exactly what it wrote.

What is compared, and why it is sound:

* **The original** is read once, by openpyxl's load (``snapshot``), before
  anything is changed. That load is openpyxl's sheet parser — the same one its
  read-only mode uses — plus one step that changes cells: a merged range
  keeps only its top-left cell, so a value hidden under a merge (LibreOffice
  can keep one) is dropped without a word. ``hidden_merged_values`` re-reads
  the original in read-only mode over the merged ranges to find such values.
  So the snapshot is what a second read of the original would give.
* **The new file** is read from the very bytes that will be written
  (``cells_of_package``). openpyxl writes its own regular markup (one ``<c>``
  element per cell, attributes in a fixed order, escaped text); a streaming
  reader for exactly that markup converts each cell as openpyxl's parser
  would (numbers, dates through the book's date styles and ``from_excel``,
  booleans, errors, inline strings, formulas, array formulas). Any cell markup
  it does not recognise sends the whole sheet to openpyxl's own parser
  instead, so the fast reader can only be faster, never laxer.
* Values are compared as openpyxl reads them, exactly (floats bit for bit);
  an empty string and an empty cell count as the same (openpyxl writes ``""``
  as an empty cell). Styles are not compared.

openpyxl writes numbers with 16 significant digits, which changes a float
that needs 17 (0.30000000000000004 becomes 0.3) and any integer beyond 2**53.
``snapshot`` lists those cells (``SheetCells.rounded``) so that the caller can
store their exact value (``cached_values.save_with_cached_values`` writes a
listed non-formula cell's value with ``repr``); then nothing is rounded and
the comparison stays exact.
"""
from __future__ import annotations

import contextlib
import gc
import io
import posixpath
import re
import zipfile
from dataclasses import dataclass, field

import defusedxml.ElementTree
import openpyxl
from openpyxl.cell.rich_text import CellRichText
from openpyxl.reader.strings import read_string_table
from openpyxl.styles.stylesheet import Stylesheet
from openpyxl.utils.cell import column_index_from_string, get_column_letter
from openpyxl.utils.datetime import CALENDAR_MAC_1904, WINDOWS_EPOCH, from_excel
from openpyxl.worksheet._reader import WorkSheetParser
from openpyxl.worksheet.formula import ArrayFormula, DataTableFormula

from .safe_io import require_defused_openpyxl

__all__ = [
    "CellDifference",
    "BookSnapshot",
    "snapshot",
    "cell_key",
    "key_position",
    "canonical",
    "hidden_merged_values",
    "cells_of_package",
    "package_holds",
    "worksheet_parts",
    "cells_written",
    "expected_after",
    "rounds_on_save",
    "differences",
    "collector_paused",
    "sheet_reference",
    "read_package",
    "package_parts",
    "SliceReader",
    "UnreadableCells",
    "raw_value",
    "same_cells",
]

_MAIN = "{http://schemas.openxmlformats.org/spreadsheetml/2006/main}"
_RELS = "{http://schemas.openxmlformats.org/package/2006/relationships}"
_REL_ID = "{http://schemas.openxmlformats.org/officeDocument/2006/relationships}id"
_WORKSHEET = "/worksheet"
_SHARED_STRINGS = "/sharedStrings"
_STYLES = "/styles"
# openpyxl's cell markup: <c r="B7" s="3" t="n"><v>1.5</v></c>, <c r="C7"><f>B7*2</f><v /></c>, <c r="D7" />
_CELL = re.compile(rb'<c r="([A-Z]{1,3})([0-9]{1,7})"(?: s="([0-9]+)")?(?: t="([A-Za-z]+)")? ?'
                   rb"(?:/>|>(?:<v>([^<]*)</v>|<is><t>([^<]*)</t></is>|(.*?))</c>)", re.S)
_PLAIN_FORMULA = re.compile(rb"<f>(.*?)</f>(?:<v ?/>|<v>.*?</v>)?\Z", re.S)
_ARRAY_FORMULA = re.compile(rb'<f t="array" ref="([A-Z]{1,3}[0-9]{1,7}(?::[A-Z]{1,3}[0-9]{1,7})?)">(.*?)</f>'
                            rb"(?:<v ?/>|<v>.*?</v>)?\Z", re.S)
_INLINE = re.compile(rb'<is><t(?: xml:space="preserve")?>(.*?)</t></is>\Z|<is><t ?/></is>\Z', re.S)
_VALUE = re.compile(rb"<v>(.*?)</v>\Z|<v ?/>\Z", re.S)
_ENTITIES = ((b"&lt;", b"<"), (b"&gt;", b">"), (b"&quot;", b'"'), (b"&apos;", b"'"), (b"&amp;", b"&"))
_EXACT_DIGITS = 2**53
_CHUNK_BYTES = 2**21


class _NotOpenpyxlMarkup(Exception):
    """A cell the fast reader does not recognise: read the sheet with openpyxl's parser."""


class _Differs(Exception):
    """A cell that is not what was expected."""


_ABSENT = object()


_PLAIN_TITLE = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")
_CELL_LIKE = re.compile(r"[A-Za-z]{1,3}[0-9]+|[Rr][0-9]*[Cc][0-9]*")


def sheet_reference(title) -> str:
    """A sheet title as a formula or a message names it: ``Log``, ``'Bench log'``, ``'It''s'``."""
    if _PLAIN_TITLE.fullmatch(title) and not _CELL_LIKE.fullmatch(title):
        return title
    return "'" + title.replace("'", "''") + "'"


@dataclass(frozen=True)
class CellDifference:
    """One cell that differs between the original and the rewritten book."""

    sheet: str
    row: int
    column: int
    before: object
    after: object

    @property
    def address(self) -> str:
        return f"{sheet_reference(self.sheet)}!{get_column_letter(self.column)}{self.row}"

    def __str__(self):
        return f"{self.address} was {_shown(self.before)}, is now {_shown(self.after)}"


def _shown(value):
    if value is None:
        return "empty"
    if isinstance(value, tuple):
        kind, *content = value
        if kind in ("f", "a"):
            return f"formula {content[-1]}"
        value = content[0]
    text = repr(value)
    return text if len(text) <= 40 else text[:37] + "..."


# --------------------------------------------------------------------------- canonical cell values
#
# A cell is keyed by one integer, row * 2**14 + column, and its content is kept
# as the plain value for numbers, text and dates; the rarer kinds are tagged
# tuples so that a formula never equals the text of the same characters, an
# error code never equals text, and TRUE never equals 1. Plain keys and values
# allocate no container per cell, so comparing a large book does not make the
# garbage collector rescan the loaded workbook again and again.

_COLUMN_BITS = 14


def cell_key(row, column) -> int:
    """The integer key of a cell."""
    return (row << _COLUMN_BITS) | column


def key_position(key):
    """(row, column) of a key."""
    return key >> _COLUMN_BITS, key & ((1 << _COLUMN_BITS) - 1)


def canonical(data_type, value):
    """A cell's content as a comparable value, or None for an empty cell.

    A number, a str or a date/time/timedelta stands for itself;
    ``('b', bool)``, ``('e', error code)``, ``('f', formula text)``,
    ``('a', ref, formula text)`` for an array formula and ``('t', attributes)``
    for a data-table formula are tagged.
    """
    if value is None:
        return None
    if data_type == "n" or data_type == "d":
        return value
    if data_type in ("s", "str", "inlineStr"):
        text = str(value) if isinstance(value, CellRichText) else value
        return None if text == "" else text
    if data_type == "f":
        if isinstance(value, ArrayFormula):
            return ("a", value.ref, value.text)
        if isinstance(value, DataTableFormula):
            return ("t", tuple(sorted(dict(value).items())))
        return ("f", value)
    if data_type == "b":
        return ("b", bool(value))
    return (data_type, value)


@dataclass
class BookSnapshot:
    """The cells of a book as openpyxl loaded it.

    Attributes
    ----------
    titles : list of str
        Every sheet's title, in order (chart sheets included).
    cells : dict
        Worksheet title -> {cell key: canonical value}.
    rounded : dict
        ``(sheet title, coordinate) -> value`` for numbers openpyxl's writer
        would round (see the module docstring).
    """

    titles: list
    cells: dict
    rounded: dict = field(default_factory=dict)

    @property
    def cell_count(self) -> int:
        return sum(map(len, self.cells.values()))


def snapshot(book) -> BookSnapshot:
    """Every non-empty cell of every worksheet of a loaded (not read-only) book."""
    result = BookSnapshot([sheet.title for sheet in book], {})
    with collector_paused():
        for sheet in book.worksheets:
            result.cells[sheet.title] = _sheet_snapshot(sheet, result.rounded)
    return result


def _sheet_snapshot(sheet, rounded):
    cells = {}
    for (row, column), cell in sheet._cells.items():
        value = cell._value
        if value is None:
            continue
        data_type = cell.data_type
        if data_type == "n":
            if rounds_on_save(value):
                rounded[(sheet.title, cell.coordinate)] = value
            cells[(row << _COLUMN_BITS) | column] = value
            continue
        entry = canonical(data_type, value)
        if entry is not None:
            cells[(row << _COLUMN_BITS) | column] = entry
    return cells


def rounds_on_save(value):
    """True if openpyxl's "%.16g" would not write this number exactly."""
    if type(value) is float:
        return float("%.16g" % value) != value
    if type(value) is int:
        return abs(value) >= _EXACT_DIGITS and int(float("%.16g" % value)) != value
    return False


def expected_after(before: BookSnapshot, added: dict, *, in_place=False) -> dict:
    """The cells the rewritten book must hold: the original's plus ``added`` {title: {key: canonical}}.

    ``in_place`` reuses the snapshot's tables (the snapshot then holds the result).
    """
    expected = {}
    for title, cells in before.cells.items():
        merged = cells if in_place else dict(cells)
        for key, value in added.get(title, {}).items():
            if value is None:
                merged.pop(key, None)
            else:
                merged[key] = value
        expected[title] = merged
    for title, cells in added.items():
        if title not in expected:
            expected[title] = {key: value for key, value in cells.items() if value is not None}
    return expected


def cells_written(sheet, positions, rounded) -> dict:
    """{key: canonical} of in-memory cells at ``positions`` (row, column): the ones a tool added.

    Numbers among them that openpyxl's writer would round are added to
    ``rounded`` (``(title, coordinate) -> value``), as ``snapshot`` does.
    """
    written = {}
    for row, column in positions:
        cell = sheet._cells.get((row, column))
        key = cell_key(row, column)
        if cell is None:
            written[key] = None
            continue
        if cell.data_type == "n" and rounds_on_save(cell._value):
            rounded.setdefault((sheet.title, cell.coordinate), cell._value)
        written[key] = canonical(cell.data_type, cell._value)
    return written


@contextlib.contextmanager
def collector_paused():
    """Pause the cyclic garbage collector while this module builds its tables.

    They hold no reference cycles; without the pause, each batch of new
    objects can start a full collection that walks the whole loaded workbook.
    """
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()


# --------------------------------------------------------------------------- values hidden under merged cells


def hidden_merged_values(path, book):
    """Values in the original that openpyxl's load dropped because a merged range covers them.

    Re-reads the original in read-only mode over the rows of the merged
    ranges only. ``book`` must have been opened from ``path`` with
    ``open_workbook_safely``, which has checked the file just before.

    Returns
    -------
    list of (sheet title, coordinate, value)
    """
    merged = {sheet.title: list(sheet.merged_cells.ranges) for sheet in book.worksheets if sheet.merged_cells.ranges}
    if not merged:
        return []
    require_defused_openpyxl()
    original = openpyxl.load_workbook(path, read_only=True)
    found = []
    try:
        for title, ranges in merged.items():
            hidden = set()
            for cell_range in ranges:
                positions = iter(cell_range.cells)
                next(positions)
                hidden.update(positions)
            low = min(r.min_row for r in ranges)
            high = max(r.max_row for r in ranges)
            for row in original[title].iter_rows(min_row=low, max_row=high):
                for cell in row:
                    value = getattr(cell, "value", None)
                    if value is None or value == "":
                        continue
                    if (cell.row, cell.column) in hidden:
                        found.append((title, cell.coordinate, value))
    finally:
        original.close()
    return found


# --------------------------------------------------------------------------- reading the new package


@dataclass(frozen=True)
class _Package:
    titles: list
    worksheet_parts: dict
    shared_strings: list
    date_styles: frozenset
    timedelta_styles: frozenset
    epoch: object


def cells_of_package(data: bytes):
    """Read every cell of every worksheet of an .xlsx package written by openpyxl.

    Returns
    -------
    (titles, cells, fast)
        Sheet titles in order; worksheet title -> {cell key: canonical};
        the titles of the sheets the fast reader handled (the others went
        through openpyxl's parser).
    """
    with zipfile.ZipFile(io.BytesIO(data)) as archive:
        package = _read_package(archive)
        cells, fast = {}, []
        for title, part in package.worksheet_parts.items():
            xml = archive.read(part)
            try:
                cells[title] = _fast_sheet_cells(xml, package)
                fast.append(title)
            except _NotOpenpyxlMarkup:
                cells[title] = _parsed_sheet_cells(xml, package)
    return package.titles, cells, fast


def package_holds(data: bytes, titles, expected: dict) -> bool:
    """True if the package has exactly these sheets and its worksheets exactly the ``expected`` cells.

    The same reading as ``cells_of_package``, but each cell is compared as
    it is read, and the first difference ends the check (use
    ``cells_of_package`` and ``differences`` to say where it is).
    """
    with zipfile.ZipFile(io.BytesIO(data)) as archive:
        package = _read_package(archive)
        if package.titles != list(titles) or set(package.worksheet_parts) != set(expected):
            return False
        for title, part in package.worksheet_parts.items():
            xml = archive.read(part)
            wanted = expected[title]
            try:
                if _check_sheet(xml, package, wanted) != len(wanted):
                    return False
            except _NotOpenpyxlMarkup:
                if _parsed_sheet_cells(xml, package) != wanted:
                    return False
            except _Differs:
                return False
    return True


def _check_sheet(xml, package, wanted):
    """How many cells of the sheet equal ``wanted``; ``_Differs`` at the first that does not."""
    return _fast_sheet_cells(xml, package, wanted)


def _package_parts(archive):
    """(sheet titles in order, worksheet title -> part, [(relationship type, part)]) of a package."""
    workbook = defusedxml.ElementTree.fromstring(archive.read("xl/workbook.xml"))
    rels = defusedxml.ElementTree.fromstring(archive.read("xl/_rels/workbook.xml.rels"))
    targets = {}
    for rel in rels.iter(f"{_RELS}Relationship"):
        target = rel.get("Target")
        part = target.lstrip("/") if target.startswith("/") else posixpath.normpath(posixpath.join("xl", target))
        targets[rel.get("Id")] = (rel.get("Type", ""), part)
    titles, worksheets = [], {}
    for sheet in workbook.iter(f"{_MAIN}sheet"):
        kind, part = targets[sheet.get(_REL_ID)]
        titles.append(sheet.get("name"))
        if kind.endswith(_WORKSHEET):
            worksheets[sheet.get("name")] = part
    return workbook, titles, worksheets, list(targets.values())


def worksheet_parts(archive) -> dict:
    """Worksheet title -> part name (``xl/worksheets/sheet1.xml``) in an open .xlsx zip."""
    return _package_parts(archive)[2]


def _read_package(archive):
    workbook, titles, worksheets, targets = _package_parts(archive)
    shared = []
    styles = None
    for kind, part in targets:
        if kind.endswith(_SHARED_STRINGS):
            shared = read_string_table(io.BytesIO(archive.read(part)))
        elif kind.endswith(_STYLES):
            styles = Stylesheet.from_tree(defusedxml.ElementTree.fromstring(archive.read(part)))
    properties = workbook.find(f"{_MAIN}workbookPr")
    date1904 = properties is not None and properties.get("date1904", "").lower() in ("1", "true")
    return _Package(
        titles=titles,
        worksheet_parts=worksheets,
        shared_strings=shared,
        date_styles=frozenset(styles.date_formats) if styles is not None else frozenset(),
        timedelta_styles=frozenset(styles.timedelta_formats) if styles is not None else frozenset(),
        epoch=CALENDAR_MAC_1904 if date1904 else WINDOWS_EPOCH,
    )


def _text(raw):
    """Element text as an XML parser delivers it (entities resolved, line ends normalised)."""
    if b"&" in raw:
        if b"&#" in raw:
            raise _NotOpenpyxlMarkup
        for entity, character in _ENTITIES:
            raw = raw.replace(entity, character)
    if b"\r" in raw:
        raw = raw.replace(b"\r\n", b"\n").replace(b"\r", b"\n")
    return raw.decode("utf-8")


def _fast_sheet_cells(xml, package, expected=None):
    """The cells of openpyxl's sheet XML; with ``expected``, the number of cells found equal to it instead.

    Raises ``_Differs`` at the first cell that is not in ``expected`` as read.
    """
    cells = {} if expected is None else expected
    columns = {}
    date_styles = {str(style).encode(): style in package.timedelta_styles for style in package.date_styles}
    matched, last = 0, [0]
    with collector_paused():
        for chunk in _row_chunks(xml):
            matched += _read_chunk(chunk, cells, expected is not None, columns, date_styles, package, last)
    return cells if expected is None else matched


def _row_chunks(xml, size=_CHUNK_BYTES):
    """Slices of the sheet XML that start at a <row element (cells never span rows)."""
    start = 0
    while start < len(xml):
        cut = xml.find(b"<row ", start + size)
        end = len(xml) if cut < 0 else cut
        yield xml[start:end]
        start = end


def _read_chunk(chunk, cells, checking, columns, date_styles, package, last):
    """Read (or check) the cells of one slice; ``last`` carries the previous cell's key.

    openpyxl writes rows in order and the cells of a row in order, so keys
    must strictly increase; otherwise (a cell written twice, say) the sheet
    goes to openpyxl's parser, and counting matched cells stays a proof.
    """
    matches = _CELL.findall(chunk)
    if len(matches) != chunk.count(b"<c "):
        raise _NotOpenpyxlMarkup
    epoch = package.epoch
    expected = cells.get
    matched = 0
    previous = last[0]
    for letters, row_text, style, kind, number, string, inner in matches:
        column = columns.get(letters)
        if column is None:
            column = columns[letters] = column_index_from_string(letters.decode())
        if number:  # <v>…</v> and nothing else: the common case
            if kind == b"n" or not kind:
                value = float(number) if (b"." in number or b"e" in number or b"E" in number) else int(number)
                if style and style in date_styles:
                    value = _date(value, epoch, date_styles[style])
            else:
                value = _typed_value(kind, number, package)
        elif string:  # <is><t>…</t></is>
            if kind != b"inlineStr":
                value = _general_cell(kind, inner, package)
            elif b"&" in string or b"\r" in string:
                value = _text(string)
            else:
                value = string.decode("utf-8")
        elif inner:
            value = _general_cell(kind, inner, package)
        else:
            continue
        if value is None:
            continue
        key = (int(row_text) << _COLUMN_BITS) | column
        if key <= previous:
            raise _NotOpenpyxlMarkup
        previous = key
        if not checking:
            cells[key] = value
        elif expected(key, _ABSENT) != value:
            raise _Differs
        else:
            matched += 1
    last[0] = previous
    return matched


def _date(value, epoch, is_timedelta):
    try:
        return from_excel(value, epoch, timedelta=is_timedelta)
    except (OverflowError, ValueError):
        raise _NotOpenpyxlMarkup from None


def _typed_value(kind, text, package):
    """A <v> text of a cell whose type is not a number."""
    if kind == b"b":
        return ("b", bool(int(text)))
    if kind == b"e":
        return ("e", _text(text))
    if kind == b"str":
        value = _text(text)
        return value or None
    if kind == b"s":
        return canonical("s", package.shared_strings[int(text)])
    raise _NotOpenpyxlMarkup


def _general_cell(kind, inner, package):
    """Formulas, empty values, strings kept with their spaces: the rarer markup."""
    if inner.startswith(b"<f"):
        return _formula_cell(inner)
    if kind == b"inlineStr":
        found = _INLINE.match(inner)
        if found is None:
            raise _NotOpenpyxlMarkup
        return _text(found.group(1) or b"") or None
    text = _value_text(inner)
    if not text:
        return None
    if kind == b"n" or not kind:
        raise _NotOpenpyxlMarkup  # a number with markup around it: let openpyxl's parser read it
    return _typed_value(kind, text, package)


def _value_text(inner):
    found = _VALUE.match(inner)
    if found is None:
        raise _NotOpenpyxlMarkup
    return found.group(1) or b""


def _formula_cell(inner):
    found = _PLAIN_FORMULA.match(inner)
    if found is not None:
        return ("f", "=" + _text(found.group(1)))
    found = _ARRAY_FORMULA.match(inner)
    if found is not None:
        return ("a", found.group(1).decode("ascii"), "=" + _text(found.group(2)))
    raise _NotOpenpyxlMarkup


def _parsed_sheet_cells(xml, package):
    """The exact path: openpyxl's own sheet parser."""
    parser = WorkSheetParser(io.BytesIO(xml), package.shared_strings, data_only=False, epoch=package.epoch,
                             date_formats=package.date_styles, timedelta_formats=package.timedelta_styles)
    cells = {}
    for _, row in parser.parse():
        for cell in row:
            entry = canonical(cell["data_type"], cell["value"])
            if entry is not None:
                cells[cell_key(cell["row"], cell["column"])] = entry
    return cells


# --------------------------------------------------------------------------- slices of any sheet


def read_package(archive):
    """Sheet titles, worksheet parts, shared strings, date styles and epoch of an open .xlsx zip."""
    return _read_package(archive)


def package_parts(archive):
    """(workbook element, sheet titles in order, worksheet title -> part, [(relationship type, part)])."""
    return _package_parts(archive)


class SliceReader:
    """Reads the cells of consecutive slices of one sheet's rows, each slice starting at a ``<row`` element.

    The fast reader takes the slices whose markup it recognises; any other
    slice is read by openpyxl's own sheet parser, wrapped in the sheet's own
    ``<worksheet>`` start tag (which declares the namespaces its rows use).
    Cells must come in increasing order across slices, as in any sheet.
    """

    def __init__(self, package, root_tag: bytes):
        self.package = package
        self.root = root_tag
        self.columns = {}
        self.date_styles = {str(style).encode(): style in package.timedelta_styles for style in package.date_styles}
        self.last = [0]
        self.parsed_slices = 0

    def cells(self, piece: bytes) -> dict:
        """{cell key: canonical} of the non-empty cells of one slice."""
        cells = {}
        with collector_paused():
            try:
                _read_chunk(piece, cells, False, self.columns, self.date_styles, self.package, self.last)
                return cells
            except (_NotOpenpyxlMarkup, LookupError, ValueError):  # the parser below says what is wrong
                pass
            xml = self.root + b"<sheetData>" + piece + b"</sheetData></worksheet>"
            try:
                cells = _parsed_sheet_cells(xml, self.package)
            except Exception as error:  # damaged cells, e.g. a shared-string index out of range
                raise UnreadableCells(f"cells of rows {_row_span(piece)} cannot be read "
                                      f"({type(error).__name__}: {error})") from None
        self.parsed_slices += 1
        if cells:
            self.last[0] = max(self.last[0], max(cells))
        return cells


class UnreadableCells(ValueError):
    """A slice of a sheet's rows that neither reader can read (a damaged part)."""


def _row_span(piece):
    rows = re.findall(rb'<row\b[^>]*?\br="([0-9]+)"', piece)
    return f"{int(rows[0])}-{int(rows[-1])}" if rows else "(unnumbered)"


def raw_value(entry):
    """The value openpyxl's load gives a cell (``cell._value``) for a canonical entry."""
    if not isinstance(entry, tuple):
        return entry
    if entry[0] in ("b", "e", "f"):
        return entry[1]
    if entry[0] == "a":
        return entry[2]
    return "="  # a data-table formula: text the log reader refuses


def same_cells(expected: dict, actual: dict) -> bool:
    """Both tables hold the same cells, each of the same kind (see ``differences``)."""
    if expected.keys() != actual.keys():
        return False
    return all(_same(value, actual[key]) for key, value in expected.items())


# --------------------------------------------------------------------------- comparing


def differences(expected: dict, actual: dict, *, limit=5) -> list:
    """The first ``limit`` cells (sheet by sheet, row by row) where two books' cells differ."""
    found = []
    for title in list(expected) + [t for t in actual if t not in expected]:
        before, after = expected.get(title, {}), actual.get(title, {})
        if before == after:
            continue
        keys = sorted(key for key in before.keys() | after.keys() if not _same(before.get(key), after.get(key)))
        for key in keys[: limit - len(found)]:
            row, column = key_position(key)
            found.append(CellDifference(title, row, column, before.get(key), after.get(key)))
        if len(found) >= limit:
            break
    return found


def _same(before, after):
    """Equal, and the same kind (an int and a float of one value are the same number)."""
    if before != after:
        return False
    return isinstance(before, tuple) == isinstance(after, tuple)
