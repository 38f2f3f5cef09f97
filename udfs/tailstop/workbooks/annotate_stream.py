"""``tailstop annotate`` for long logs: the book is edited as bytes, never loaded (``workbooks/sheet_stream.py``).

The cells written are the ones the openpyxl path writes — the estimate block
is laid out by the same ``log_layout`` functions, on a scratch sheet, and
turned into markup cell by cell; the decision cells come from
``log_layout.decision_cell`` — and the written file is checked before it is
moved into place:

* every part other than the log's sheet and the style sheet has the same
  size and CRC as in the original, and inflates without error;
* the style sheet, read by openpyxl, keeps every existing font, fill, border,
  number format, cell format and differential format at its index, and the
  new cell formats carry the intended font, fill and number format;
* the log's sheet, read slice by slice beside the original, holds every
  original cell unchanged and exactly the added cells; the elements around
  the rows differ from the original only in the dimension, the new column
  widths and the new conditional format.
"""
from __future__ import annotations

import zipfile
from pathlib import Path

import defusedxml.ElementTree
import openpyxl
from openpyxl.styles import Font, PatternFill
from openpyxl.styles.fills import Fill
from openpyxl.styles.numbers import (
    BUILTIN_FORMATS,
    BUILTIN_FORMATS_MAX_SIZE,
    BUILTIN_FORMATS_REVERSE,
)
from openpyxl.styles.stylesheet import Stylesheet
from openpyxl.xml.functions import tostring

from . import cell_check
from . import sheet_stream as ss
from .annotation import (AnnotateRefused, AnnotateResult, check_log_column, column_number_of, earlier_run,
                         first_log_row, place_columns, with_margin)
from .log_layout import (
    HEADER_SEARCH_ROWS,
    LogRange,
    Occupancy,
    analyse_log,
    decision_cell,
    decision_content,
    decision_rule,
    highlight_stop,
    write_decision_header,
    write_estimate_block,
)
from .package import Limits, WorkbookRefused, inspect_package
from .safe_io import write_file_atomically

__all__ = ["STREAM_FROM_BYTES", "STREAM_LIMITS", "wants_streaming", "annotate_streamed", "NotStreamable",
           "AnnotatedBefore"]

NotStreamable = ss.NotStreamable


class AnnotatedBefore(NotStreamable):
    """The sheet holds an earlier run's cells: they are replaced through openpyxl, whatever the log's length."""

# A sheet part this large (about 80,000 rows of two columns) is edited as bytes:
# openpyxl's cell model of it would take some 200 MiB and most of the run time.
STREAM_FROM_BYTES = 8 * 2**20
# The byte editor holds one copy of the sheet's XML and never a cell model, so it takes parts and cell
# counts that the openpyxl path's limits refuse (a full-sheet log of six columns is some 280 MB of XML and
# 6.3 million cells); the zip-bomb ratio and the sheet-extent checks stay as they are.
STREAM_LIMITS = Limits(max_part_bytes=384 * 2**20, max_total_bytes=768 * 2**20, max_cells=25_000_000)
WIDTHS = (18, 44, 24)  # decision column, block labels, block values (as the openpyxl path sets them)
_WORKBOOK = "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet.main+xml"
_MAIN = "{http://schemas.openxmlformats.org/spreadsheetml/2006/main}"
_WRITE_BYTES = 2**20


def wants_streaming(source, sheet=None) -> bool:
    """True when the log's sheet part inflates to ``STREAM_FROM_BYTES`` or more (False if that cannot be told)."""
    try:
        with zipfile.ZipFile(source) as archive:
            workbook, titles, worksheets, _ = cell_check.package_parts(archive)
            title = sheet if sheet is not None else _active_title(workbook, titles)
            part = worksheets.get(title)
            return part is not None and archive.getinfo(part).file_size >= STREAM_FROM_BYTES
    except Exception:  # anything odd: the openpyxl path refuses it with its own message
        return False


def _active_title(workbook, titles):
    view = workbook.find(f"{_MAIN}bookViews/{_MAIN}workbookView")
    try:
        index = int(view.get("activeTab", 0)) if view is not None else 0
    except ValueError:
        index = 0
    return titles[index] if 0 <= index < len(titles) else titles[0]


def annotate_streamed(source: Path, target: Path, *, column, plan, sheet=None, in_place=False, backup=True,
                      live=False, header_row=None, into=None) -> AnnotateResult:
    """``annotate`` without loading the book; ``NotStreamable`` when its markup needs the openpyxl path."""
    report = inspect_package(source, STREAM_LIMITS)
    if _WORKBOOK not in report.content_types.values():
        raise NotStreamable("not a plain .xlsx workbook (a template or a macro-enabled book)")
    with zipfile.ZipFile(source) as archive:
        try:
            package = cell_check.read_package(archive)
            workbook, titles, worksheets, targets = cell_check.package_parts(archive)
        except (KeyError, ValueError, IndexError) as problem:  # parts where this path does not look for them
            raise NotStreamable(f"the workbook's parts are not where this path reads them ({problem})") from None
        title = _sheet_title(workbook, titles, worksheets, sheet, source)
        part = worksheets[title]
        styles_part = next((name for kind, name in targets if kind.endswith("/styles")), None)
        if styles_part is None or styles_part not in archive.namelist():
            raise NotStreamable("the book has no style sheet")
        split = ss.split_sheet(archive.read(part))
        styles_xml = archive.read(styles_part)
    try:
        shape, log, values, header, occupancy = _scan(split, package, title, column, header_row)
    except cell_check.UnreadableCells as problem:
        raise WorkbookRefused(f"{source.name}: sheet {title!r}: {problem}") from None
    check_log_column(log, header)
    filled = log.last_row
    log, values = with_margin(log, values, live)
    analysis = analyse_log(log, values, plan)
    del values
    decision_column, label_column, layout = place_columns(log, occupancy, analysis, live, into)
    del occupancy
    edit = ss.StylesEdit(styles_xml, BUILTIN_FORMATS_REVERSE)
    block, added, cf = _block_markup(title, log, decision_column, layout, analysis, live, edit)
    last_row = max(shape.max_row, log.last_row, layout.last_row)
    widths = dict(zip((decision_column, label_column, label_column + 1), WIDTHS))
    head = ss.edit_head(split.head, last_row, max(shape.max_column, label_column + 1), widths)
    sqref, dxf, operator, formula = cf
    dxf_id = edit.differential_format(dxf)
    tail = ss.edit_tail(split.tail, ss.conditional_format(sqref, dxf_id, ss.next_priority(split.tail), operator,
                                                          formula))
    new_styles = edit.result()
    rule = decision_rule(layout) if live else None

    def additions():
        return _additions(log, decision_column, analysis.decisions, rule, block)

    def write(handle):
        _write_package(source, handle, part, styles_part, new_styles,
                       (head, ss.extended_rows(split, additions(), max(shape.max_column, label_column + 1)), tail))

    checked = {}

    def check(path):
        checked.update(_verify(source, path, part, styles_part, split, package, edit, dxf, added,
                               log, decision_column, analysis.decisions, rule))

    saved = write_file_atomically(target, write, in_place=in_place, backup=backup, check=check)
    return AnnotateResult(saved.path, saved.backup, log, decision_column, layout.reference(), analysis,
                          checked["cells"], len(worksheets), [], live, copied_parts=checked["copied"],
                          header="" if header is None else str(header), margin=log.last_row - filled)


def _sheet_title(workbook, titles, worksheets, sheet, source):
    if sheet is None:
        title = _active_title(workbook, titles)
    elif sheet in titles:
        title = sheet
    else:
        raise AnnotateRefused(f"{source.name} has no sheet {sheet!r}; its sheets are "
                              + ", ".join(repr(name) for name in titles))
    if title not in worksheets:
        raise AnnotateRefused(f"{title!r} is a chart sheet, not a sheet with a log; choose one with --sheet")
    return title


# --------------------------------------------------------------------------- reading the log


def _scan(split, package, title, column, header_row):
    """The sheet's shape, the log range and values, the header cell's value and where the sheet has cells.

    The cells of the top rows (``HEADER_SEARCH_ROWS``, or down to ``header_row``) are kept until the log
    column is known from them; from then on only that column's values are.
    """
    shape = ss.SheetShape()
    reader = cell_check.SliceReader(package, split.root)
    occupancy, letters = Occupancy(), {}
    window = header_row or HEADER_SEARCH_ROWS
    number, found, top = None, {}, {}
    for _, piece in split.slices():
        shape.take(piece)
        for row, col in ss.cell_positions(piece, letters):
            occupancy.add(row, col)
        cells = reader.cells(piece)
        if number is None:
            top.update({(key >> 14, key & 0x3FFF): cell_check.raw_value(value) for key, value in cells.items()
                        if key >> 14 <= window})
            if shape.max_row <= window:
                continue
            number = column_number_of(title, top, column, header_row)
        for key, value in cells.items():
            if key & 0x3FFF == number:
                found[key >> 14] = cell_check.raw_value(value)
    if number is None:
        number = column_number_of(title, top, column, header_row)
    found.update({row: value for (row, col), value in top.items() if col == number})
    shape.take_merges(split.tail)
    for rectangle in ss.merged_ranges(split.tail):
        occupancy.add_merged(*rectangle)
    header = first_log_row(title, number, found, header_row)
    if earlier_run(top, LogRange(title, number, header + 1, header + 1)).found:
        raise AnnotatedBefore("the sheet holds the cells of an earlier annotate run")
    last = max((row for row, value in found.items() if value is not None), default=header)
    values = [found.get(row) for row in range(header + 1, last + 1)]
    return shape, LogRange(title, number, header + 1, last), values, found.get(header), occupancy


# --------------------------------------------------------------------------- the new cells


def _block_markup(title, log, decision_column, layout, analysis, live, edit):
    """Markup of the header and the estimate block by row, their canonical contents, and the STOP highlight."""
    book = openpyxl.Workbook()
    scratch = book.active
    scratch.title = title
    cached = {}
    write_estimate_block(scratch, layout, log, decision_column, analysis, live=live, cached=cached,
                         source="values computed by tailstop annotate")
    write_decision_header(scratch, log, decision_column)
    highlight_stop(scratch, log, decision_column)
    by_row, added = {}, {}
    for (row, column), cell in sorted(scratch._cells.items()):
        style = _style(cell, edit)
        value = cell._value
        data_type = cell.data_type
        if data_type == "f" and not isinstance(value, str):
            raise ValueError(f"{cell.coordinate}: array formulas are not written by the streaming path")
        markup = ss.cell_markup(cell.coordinate, style, data_type, value, cached.get((title, cell.coordinate)))
        by_row.setdefault(row, []).append((column, markup))
        entry = cell_check.canonical(data_type, value)
        if entry is not None:
            added[cell_check.cell_key(row, column)] = entry
    rules = [(str(cf.sqref), rule) for cf in scratch.conditional_formatting for rule in cf.rules]
    (sqref, rule), = rules
    cf = (sqref, tostring(rule.dxf.to_tree()), rule.operator, rule.formula[0])
    return by_row, added, cf


def _style(cell, edit):
    if not cell.has_style:
        return 0
    array = cell._style
    if array.alignmentId or array.borderId or array.protectionId:
        raise ValueError(f"{cell.coordinate}: only fonts, fills and number formats are written by the streaming path")
    font = None if cell.font == Font() else tostring(cell.font.to_tree())
    fill = None if cell.fill == PatternFill() else tostring(cell.fill.to_tree())
    return edit.cell_format(font, fill, cell.number_format)


def _additions(log, decision_column, decisions, rule, block):
    """(row, [(column, markup), ...]) in row order: the decision cell and the block's cells of that row."""
    block_rows = sorted(block)
    index = 0
    for offset, decision in enumerate(decisions):
        row = log.first_row + offset
        while index < len(block_rows) and block_rows[index] < row:
            yield block_rows[index], block[block_rows[index]]
            index += 1
        extra = []
        if index < len(block_rows) and block_rows[index] == row:
            extra = block[row]
            index += 1
        cell, _ = decision_cell(log, decision_column, row, decision, rule)
        if cell is not None or extra:
            yield row, ([(decision_column, cell)] if cell is not None else []) + extra
    for row in block_rows[index:]:
        yield row, block[row]


def _decision_contents(log, decision_column, decisions, rule, low, high):
    """{cell key: canonical} of the decision cells in rows low <= row < high (high None: to the end)."""
    first = max(low, log.first_row)
    last = log.first_row + len(decisions) if high is None else min(high, log.first_row + len(decisions))
    contents = {}
    for row in range(first, last):
        content = decision_content(log, row, decisions[row - log.first_row], rule)
        if content is not None:
            contents[cell_check.cell_key(row, decision_column)] = content
    return contents


# --------------------------------------------------------------------------- writing


def _copy_info(info):
    copy = zipfile.ZipInfo(info.filename, info.date_time)
    copy.compress_type = info.compress_type
    copy.external_attr = info.external_attr
    copy.create_system = info.create_system
    return copy


def _write_package(source, handle, part, styles_part, styles_xml, sheet_pieces):
    head, rows, tail = sheet_pieces
    with zipfile.ZipFile(source) as original, zipfile.ZipFile(handle, "w", zipfile.ZIP_DEFLATED) as output:
        for info in original.infolist():
            if info.filename == part:
                entry = _copy_info(info)
                entry.compress_type = zipfile.ZIP_DEFLATED
                with output.open(entry, "w") as stream:  # parts stay far below 2 GiB: no ZIP64 records
                    stream.write(head)
                    batch, size = [], 0
                    for piece in rows:
                        batch.append(piece)
                        size += len(piece)
                        if size >= _WRITE_BYTES:
                            stream.write(b"".join(batch))
                            batch, size = [], 0
                    stream.write(b"".join(batch))
                    stream.write(tail)
            elif info.filename == styles_part:
                output.writestr(_copy_info(info), styles_xml)
            else:
                with original.open(info) as data, output.open(_copy_info(info), "w") as stream:
                    while chunk := data.read(_WRITE_BYTES):
                        stream.write(chunk)


# --------------------------------------------------------------------------- checking what was written


def _verify(source, path, part, styles_part, split, package, edit, dxf, added, log, decision_column, decisions,
            rule):
    with zipfile.ZipFile(source) as original, zipfile.ZipFile(path) as written:
        copied = _check_copied_parts(source, original, written, {part, styles_part})
        _check_styles(source, original.read(styles_part), written.read(styles_part), edit, dxf)
        with written.open(part) as stream:
            new = ss.StreamedSheet(stream)
            cells = _check_rows(source, split, new, package, added, log, decision_column, decisions, rule)
    _check_around_rows(source, split, new)
    return {"cells": cells, "copied": copied}


def _refuse(source, what):
    raise AnnotateRefused(f"{source.name}: the rewritten book would not keep everything as it was: {what}. "
                          "Nothing was written.")


def _check_copied_parts(source, original, written, edited):
    names = [info.filename for info in original.infolist()]
    if [info.filename for info in written.infolist()] != names:
        _refuse(source, "its parts are not the original's")
    copied = 0
    for before, after in zip(original.infolist(), written.infolist()):
        if before.filename in edited:
            continue
        if (before.CRC, before.file_size) != (after.CRC, after.file_size):
            _refuse(source, f"part {before.filename} changed")
        with written.open(after) as stream:  # zipfile checks the CRC of what it inflates
            while stream.read(_WRITE_BYTES):
                pass
        copied += 1
    return copied


def _stylesheet(xml):
    return Stylesheet.from_tree(defusedxml.ElementTree.fromstring(xml))


def _check_styles(source, before_xml, after_xml, edit, dxf):
    before, after = _stylesheet(before_xml), _stylesheet(after_xml)
    for name in ("fonts", "fills", "borders", "cell_styles", "alignments", "protections", "number_formats",
                 "dxfs"):
        old, new = list(getattr(before, name)), list(getattr(after, name))
        if new[: len(old)] != old:
            _refuse(source, f"the style sheet's {name.replace('_', ' ')} changed")
    for (font, fill, number_format), index in edit.cell_formats.items():
        style = after.cell_styles[index]
        wanted_font = Font.from_tree(defusedxml.ElementTree.fromstring(font)) if font else after.fonts[0]
        wanted_fill = Fill.from_tree(defusedxml.ElementTree.fromstring(fill)) if fill else after.fills[0]
        if after.fonts[style.fontId] != wanted_font or after.fills[style.fillId] != wanted_fill:
            _refuse(source, f"cell format {index} of the style sheet is not the one written")
        code = (BUILTIN_FORMATS.get(style.numFmtId) if style.numFmtId < BUILTIN_FORMATS_MAX_SIZE
                else after.number_formats[style.numFmtId - BUILTIN_FORMATS_MAX_SIZE])
        if code != number_format:
            _refuse(source, f"cell format {index} of the style sheet has number format {code!r}")
    if len(after.dxfs) != len(before.dxfs) + 1 or tostring(after.dxfs[-1].to_tree()) != dxf:
        _refuse(source, "the highlight of the STOP row is not the one written")


_AROUND = (f"{_MAIN}dimension", f"{_MAIN}cols")


def _check_around_rows(source, before, after):
    """Outside the rows only the dimension, the column widths and one new conditional format may differ."""
    old = list(defusedxml.ElementTree.fromstring(before.head + before.tail))
    new = list(defusedxml.ElementTree.fromstring(after.head + after.tail))
    old_kept = [tostring(element) for element in old if element.tag not in _AROUND]
    new_kept = [(element.tag, tostring(element)) for element in new if element.tag not in _AROUND]
    ours = [index for index, (tag, _) in enumerate(new_kept) if tag == f"{_MAIN}conditionalFormatting"]
    if not any([text for _, text in new_kept[:index] + new_kept[index + 1:]] == old_kept for index in ours):
        _refuse(source, "the elements around the rows changed")
    if [e.tag for e in old if e.tag == _AROUND[0]] != [e.tag for e in new if e.tag == _AROUND[0]]:
        _refuse(source, "the sheet's dimension element changed")
    if not set(_col_entries(old)) <= set(_col_entries(new)):
        _refuse(source, "column widths changed")


def _col_entries(children):
    return [tuple(sorted(col.attrib.items())) for element in children if element.tag == f"{_MAIN}cols"
            for col in element]


def _check_rows(source, before, after, package, added, log, decision_column, decisions, rule):
    """Compare the rows slice by slice; the number of original cells found unchanged."""
    old_reader = cell_check.SliceReader(package, before.root)
    new_reader = cell_check.SliceReader(package, after.root)
    checked = 0
    for old_piece, new_piece, low, high in ss.aligned_slices(before, after.rows()):
        old_cells = old_reader.cells(old_piece)
        checked += len(old_cells)
        expected = old_cells
        expected.update({key: value for key, value in added.items()
                         if key >> 14 >= low and (high is None or key >> 14 < high)})
        expected.update(_decision_contents(log, decision_column, decisions, rule, low, high))
        actual = new_reader.cells(new_piece)
        if not cell_check.same_cells(expected, actual):
            found = cell_check.differences({log.sheet_title: expected}, {log.sheet_title: actual})
            listed = "\n".join(f"  - {difference}" for difference in found) or "  - the cells differ"
            raise AnnotateRefused(f"{source.name}: the rewritten book would not keep every cell as it was:\n"
                                  f"{listed}\nNothing was written.")
    return checked
