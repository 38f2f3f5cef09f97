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

A sheet annotated before (its decision column and block recognised as
``annotation.earlier_run`` recognises them) is written again in the same
pass: the earlier run's cells are taken out of their rows and written anew
where they were, its STOP highlight is replaced (keeping its priority), and
the cell and differential formats it added to the style sheet are taken again
rather than appended once more — so a run on a log that has not changed
writes the same bytes. The check then expects the original without the
earlier run's cells and highlight.
"""
from __future__ import annotations

import bisect
import zipfile
from array import array
from dataclasses import dataclass, field
from pathlib import Path

import defusedxml.ElementTree
import openpyxl
from openpyxl.styles import Font, PatternFill
from openpyxl.styles.differential import DifferentialStyle as _DifferentialStyle
from openpyxl.styles.fills import Fill
from openpyxl.styles.numbers import (
    BUILTIN_FORMATS,
    BUILTIN_FORMATS_MAX_SIZE,
    BUILTIN_FORMATS_REVERSE,
)
from openpyxl.styles.stylesheet import Stylesheet
from openpyxl.utils.cell import range_boundaries
from openpyxl.xml.functions import tostring

from . import cell_check
from . import sheet_stream as ss
from .annotation import (AnnotateRefused, AnnotateResult, check_log_column, column_number_of, earlier_block,
                         earlier_decision_column, first_log_row, is_decision, place_columns, with_margin)
from .log_layout import (
    DECISION_HEADER,
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

__all__ = ["STREAM_FROM_BYTES", "STREAM_LIMITS", "wants_streaming", "annotate_streamed", "NotStreamable"]

NotStreamable = ss.NotStreamable

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
    """``annotate`` without loading the book; ``NotStreamable`` when its markup needs the openpyxl path.

    A sheet that an earlier run annotated keeps its decision column and block where they are: their cells
    (``EarlierCells``) are taken out of their rows and written again for the log as it is now, the STOP
    highlight replaced, the formats the earlier run added to the style sheet taken again.
    """
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
        shape, log, values, header, (occupancy, content), earlier = _scan(split, package, title, column, header_row)
    except cell_check.UnreadableCells as problem:
        raise WorkbookRefused(f"{source.name}: sheet {title!r}: {problem}") from None
    check_log_column(log, header)
    filled = log.last_row
    log, values = with_margin(log, values, live)
    analysis = analyse_log(log, values, plan)
    del values
    earlier.release(occupancy)
    earlier.release(content)
    decision_column, label_column, layout = place_columns(log, occupancy, analysis, live, into,
                                                          block_at=earlier.label_column, content=content,
                                                          decision_at=earlier.decision_column)
    del occupancy, content
    edit = ss.StylesEdit(styles_xml, BUILTIN_FORMATS_REVERSE, _ExistingFormats(styles_xml))
    block, added, cf = _block_markup(title, log, decision_column, layout, analysis, live, edit)
    last_row = max(shape.max_row, log.last_row, layout.last_row)
    widths = dict(zip((decision_column, label_column, label_column + 1), WIDTHS))
    head = ss.edit_head(split.head, last_row, max(shape.max_column, label_column + 1), widths)
    sqref, dxf, operator, formula = cf
    dxf_id = edit.differential_format(dxf)
    kept_tail, priority = _without_highlight(split.tail, earlier)
    tail = ss.edit_tail(kept_tail, ss.conditional_format(sqref, dxf_id, priority, operator, formula))
    new_styles = edit.result()
    rule = decision_rule(layout) if live else None

    def edits():
        return _edits(_additions(log, decision_column, analysis.decisions, rule, block), earlier.removals())

    kept = {}

    def write(handle):
        kept.clear()
        rows = ss.extended_rows(split, edits(), max(shape.max_column, label_column + 1),
                                keep_formats={decision_column}, kept=kept)
        _write_package(source, handle, part, styles_part, new_styles, (head, rows, tail))

    checked = {}

    def check(path):
        checked.update(_verify(source, path, part, styles_part, split, package, edit, (dxf, dxf_id), added,
                               log, decision_column, analysis.decisions, rule, earlier, kept_tail))

    saved = write_file_atomically(target, write, in_place=in_place, backup=backup, check=check)
    return AnnotateResult(saved.path, saved.backup, log, decision_column, layout.reference(), analysis,
                          checked["cells"], len(worksheets), [], live, copied_parts=checked["copied"],
                          header="" if header is None else str(header), margin=log.last_row - filled,
                          formats_kept=kept.get("blanks", 0))


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
    """The sheet's shape, the log range and values, the header cell's value, where the sheet has cells (any
    cell, and cells with content), and the cells an earlier run wrote (``EarlierCells``).

    The cells of the top rows (``HEADER_SEARCH_ROWS``, or down to ``header_row``) are kept until the log
    column is known from them; from then on only that column's values are, and the rows of the decision-like
    cells of each column that holds the decision column's header.
    """
    shape = ss.SheetShape()
    reader = cell_check.SliceReader(package, split.root)
    occupancy, content, letters = Occupancy(), Occupancy(), {}
    window = max(header_row or 0, HEADER_SEARCH_ROWS)
    number, found, top = None, {}, {}
    marks, top_positions = _Marks(), []
    for _, piece in split.slices():
        shape.take(piece)
        for row, col in ss.cell_positions(piece, letters):
            occupancy.add(row, col)
            if row <= HEADER_SEARCH_ROWS:
                top_positions.append((row, col))
        cells = reader.cells(piece)
        for key in cells:
            content.add(key >> 14, key & _COLUMN_MASK)
        marks.take(cells)
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
        content.add_merged(*rectangle)
    header = first_log_row(title, number, found, header_row)
    last = max((row for row, value in found.items() if value is not None), default=header)
    values = [found.get(row) for row in range(header + 1, last + 1)]
    log = LogRange(title, number, header + 1, last)
    return shape, log, values, found.get(header), (occupancy, content), marks.earlier(top, top_positions, log)


_COLUMN_MASK = 0x3FFF


class _Marks:
    """The columns holding the decision column's header, and the rows of their decision-like cells below it."""

    def __init__(self):
        self.headers = {}  # column -> rows reading DECISION_HEADER
        self.decisions = {}  # column -> rows of decision-like cells below its first header

    def take(self, cells):
        """Account for the cells of one slice ({key: canonical}, slices in order)."""
        decisions, headers = self.decisions, self.headers
        for key, value in cells.items():
            column = key & _COLUMN_MASK
            if column in decisions:
                raw = cell_check.raw_value(value)
                if raw == DECISION_HEADER:
                    headers[column].append(key >> 14)
                elif is_decision(raw):
                    decisions[column].append(key >> 14)
            elif value == DECISION_HEADER:
                headers[column] = [key >> 14]
                decisions[column] = array("q")

    def earlier(self, top, top_positions, log):
        """The cells an earlier run wrote on the sheet (``annotation.earlier_run`` for a sheet read in slices).

        ``top`` holds the values of the top rows, ``top_positions`` every cell there, styled blanks too.
        """
        decision = earlier_decision_column(self.headers, log)
        header_row = log.first_row - 1
        rows = array("q")
        if decision is not None:
            rows.append(header_row)
            rows.extend(row for row in self.decisions[decision] if row > header_row)
        label, _ = earlier_block(top)
        block = []
        if label is not None:
            _, cells = earlier_block({**dict.fromkeys(top_positions), **top})
            block = sorted(cells)
        return EarlierCells(decision, rows, label, block)


@dataclass
class EarlierCells:
    """What an earlier run wrote: its decision column's header and decisions, and its block's cells.

    Attributes
    ----------
    decision_column, label_column : int or None
    decision_rows : array of int
        Rows of the earlier cells in the decision column, increasing (its header row first).
    block : list of (row, column)
        The block's cells, in row order.
    """

    decision_column: int | None
    decision_rows: array = field(default_factory=lambda: array("q"))
    label_column: int | None = None
    block: list = field(default_factory=list)

    def release(self, occupancy):
        """Count these cells as free in ``occupancy``: they are written again."""
        if self.decision_column is not None:
            occupancy.release(self.decision_column, self.decision_rows)
        for column in {column for _, column in self.block}:
            occupancy.release(column, [row for row, col in self.block if col == column])

    def removals(self):
        """(row, [], {columns}) in row order: the earlier cells taken out of each row."""
        by_row = {}
        for row, column in self.block:
            by_row.setdefault(row, set()).add(column)
        decision = {self.decision_column}
        rows = ((row, [], decision) for row in self.decision_rows)
        return _edits(rows, ((row, [], by_row[row]) for row in sorted(by_row)))

    def keys(self, low, high):
        """Cell keys of the earlier cells in rows low <= row < high (high None: to the end)."""
        found = [cell_check.cell_key(row, column) for row, column in self.block
                 if row >= low and (high is None or row < high)]
        if self.decision_column is not None:
            rows = self.decision_rows
            first = bisect.bisect_left(rows, low)
            last = len(rows) if high is None else bisect.bisect_left(rows, high)
            found += [cell_check.cell_key(rows[index], self.decision_column) for index in range(first, last)]
        return found

    def is_highlight(self, element: bytes) -> bool:
        """True for a ``<conditionalFormatting>`` element an earlier run wrote: one ``cellIs`` rule, equal to
        "STOP", over ranges of the decision column only (as the openpyxl path recognises it)."""
        if self.decision_column is None:
            return False
        try:
            tree = defusedxml.ElementTree.fromstring(element.replace(b"<conditionalFormatting",
                                                                     b'<conditionalFormatting xmlns="' +
                                                                     ss.MAIN_NAMESPACE + b'"', 1))
        except Exception:  # markup of another namespace, or no element this reads: not ours
            return False
        ranges = (tree.get("sqref") or "").split()
        rules = list(tree)
        if not ranges or len(rules) != 1:
            return False
        rule = rules[0]
        formulas = [child.text for child in rule]
        if (rule.tag != f"{_MAIN}cfRule" or rule.get("type") != "cellIs" or rule.get("operator") != "equal"
                or formulas != ['"STOP"']):
            return False
        try:
            bounds = [range_boundaries(part) for part in ranges]
        except ValueError:
            return False
        return all(low == high == self.decision_column for low, _, high, _ in bounds)


def _without_highlight(tail, earlier):
    """(the part after the rows without the earlier run's STOP highlight, the priority the new one takes)."""
    spans = [span for span in ss.conditional_formats(tail) if earlier.is_highlight(tail[span[0]:span[1]])]
    if not spans:
        return tail, ss.next_priority(tail)
    priority = ss.first_priority(tail[spans[0][0]:spans[0][1]])
    return ss.without_spans(tail, spans), priority


def _edits(first, second):
    """Two streams of (row, [(column, markup), ...], {columns}), each in row order and one item a row at most,
    merged into one such stream."""
    one, other = next(first, None), next(second, None)
    while one is not None or other is not None:
        if other is None or (one is not None and one[0] < other[0]):
            yield one
            one = next(first, None)
        elif one is None or other[0] < one[0]:
            yield other
            other = next(second, None)
        else:
            cells = one[1] + other[1] if other[1] else one[1]
            removed = {*one[2], *other[2]} if one[2] else other[2]
            yield one[0], cells, removed
            one, other = next(first, None), next(second, None)


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
    """(row, [(column, markup), ...], ()) in row order: the decision cell and the block's cells of that row."""
    block_rows = sorted(block)
    index = 0
    for offset, decision in enumerate(decisions):
        row = log.first_row + offset
        while index < len(block_rows) and block_rows[index] < row:
            yield block_rows[index], block[block_rows[index]], ()
            index += 1
        extra = []
        if index < len(block_rows) and block_rows[index] == row:
            extra = block[row]
            index += 1
        cell, _ = decision_cell(log, decision_column, row, decision, rule)
        if cell is not None or extra:
            yield row, ([(decision_column, cell)] if cell is not None else []) + extra, ()
    for row in block_rows[index:]:
        yield row, block[row], ()


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
            rule, earlier, kept_tail):
    with zipfile.ZipFile(source) as original, zipfile.ZipFile(path) as written:
        copied = _check_copied_parts(source, original, written, {part, styles_part})
        _check_styles(source, original.read(styles_part), written.read(styles_part), edit, dxf)
        with written.open(part) as stream:
            new = ss.StreamedSheet(stream)
            cells = _check_rows(source, split, new, package, added, log, decision_column, decisions, rule, earlier)
    _check_around_rows(source, split.head + kept_tail, new)
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


def _check_styles(source, before_xml, after_xml, edit, highlight):
    dxf, dxf_id = highlight
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
        code = _number_format_code(after, style.numFmtId)
        if code != number_format:
            _refuse(source, f"cell format {index} of the style sheet has number format {code!r}")
    appended = dxf_id >= len(before.dxfs)
    if (len(after.dxfs) != len(before.dxfs) + appended or dxf_id >= len(after.dxfs)
            or _DifferentialStyle.from_tree(defusedxml.ElementTree.fromstring(dxf)) != after.dxfs[dxf_id]):
        _refuse(source, "the highlight of the STOP row is not the one written")


class _ExistingFormats:
    """Finds, for ``StylesEdit``, a cell format or differential format the style sheet already holds that
    looks exactly as a new one would: an earlier run's, taken again so that the style sheet does not grow."""

    def __init__(self, xml):
        self.sheet = _stylesheet(xml)

    def cell_format(self, font, fill, number_format):
        sheet = self.sheet
        wanted_font = Font.from_tree(defusedxml.ElementTree.fromstring(font)) if font else sheet.fonts[0]
        wanted_fill = Fill.from_tree(defusedxml.ElementTree.fromstring(fill)) if fill else sheet.fills[0]
        for index, (style, xf) in enumerate(zip(sheet.cell_styles, sheet.cellXfs.xf)):
            if (style.borderId or style.alignmentId or style.protectionId or style.quotePrefix or style.pivotButton
                    or style.xfId):
                continue
            if sheet.fonts[style.fontId] != wanted_font or sheet.fills[style.fillId] != wanted_fill:
                continue
            if _number_format_code(sheet, style.numFmtId) != number_format:
                continue
            # the flags a new format carries, so that every program applies it alike
            if (font and not xf.applyFont) or (fill and not xf.applyFill) or (style.numFmtId and not
                                                                               xf.applyNumberFormat):
                continue
            return index
        return None

    def differential_format(self, dxf):
        wanted = _DifferentialStyle.from_tree(defusedxml.ElementTree.fromstring(dxf))
        return next((index for index, existing in enumerate(self.sheet.dxfs) if existing == wanted), None)


def _number_format_code(sheet, number_format_id):
    if number_format_id < BUILTIN_FORMATS_MAX_SIZE:
        return BUILTIN_FORMATS.get(number_format_id)
    return sheet.number_formats[number_format_id - BUILTIN_FORMATS_MAX_SIZE]


_AROUND = (f"{_MAIN}dimension", f"{_MAIN}cols")


def _check_around_rows(source, before, after):
    """Outside the rows only the dimension, the column widths and one new conditional format may differ.

    ``before`` is the original's markup around the rows, without an earlier run's STOP highlight.
    """
    old = list(defusedxml.ElementTree.fromstring(before))
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


def _check_rows(source, before, after, package, added, log, decision_column, decisions, rule, earlier):
    """Compare the rows slice by slice; the number of original cells found unchanged (an earlier run's cells,
    written again, not counted)."""
    old_reader = cell_check.SliceReader(package, before.root)
    new_reader = cell_check.SliceReader(package, after.root)
    checked = 0
    for old_piece, new_piece, low, high in ss.aligned_slices(before, after.rows()):
        old_cells = old_reader.cells(old_piece)
        for key in earlier.keys(low, high):
            old_cells.pop(key, None)
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
