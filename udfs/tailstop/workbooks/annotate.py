"""``tailstop annotate``: add the decision column and the estimate block to an existing test log.

What it writes (layout in ``workbooks/log_layout.py``):

* the **decision column** next to the log: the first column right of the
  lifetimes that holds no value or formula in the log's rows (or the column
  ``into`` names, refused if it holds one there), its header in the log's
  header row, one decision per log row; a cell there that holds only a format
  (a fill, a border, a number format) is written into and keeps its format;
* the **estimate block** from row 1 down, in the first two columns at least
  one column right of the decision column that hold nothing in the block's
  rows: the rule's settings, where it stopped, the estimate and its bounds
  for the probability and the odds, the units the accuracy needs, the
  warnings.

The header need not be in row 1: it is the last caption above the first
value of the column (title rows, a merged title and blank rows may stand
above it), or the row ``header_row`` gives. No cell that holds a value or a
formula is written over, and the block goes where no cell stands at all.

By default both hold computed values, so the file reads the same in any
spreadsheet program. With ``live`` they hold tailstop formulas (with the
values stored as cached values): the settings in the block become inputs a
user with the add-in can change. A live decision column fills
``STOP_DECISION($B$2:B<row>, …)`` down, which a spreadsheet recalculates from
the top of the log for every row; on logs of many thousands of rows the
default computed values are the better choice.

No loss, checked. The log is opened with ``open_workbook_safely`` (hostile
files refused; content openpyxl would drop refused unless ``allow_lossy``).
The new book is built in memory and every cell of every sheet is read back
from those bytes and compared with the original (``workbooks/cell_check.py``);
only if every pre-existing cell holds its value and formula, and the added
cells hold what was meant, is the file written — to a new name unless
``in_place`` — through the atomic saver, and the written file is checked to
be byte for byte what was verified.

Long logs are not loaded at all: ``annotate_stream`` edits the sheet's XML
as a stream (same cells, same styles), copies every other part unchanged and
checks the written file slice by slice before it is moved into place.
"""
from __future__ import annotations

import hashlib
import io
import tempfile
from pathlib import Path

from . import cell_check
from .annotation import (
    AnnotateRefused,
    AnnotateResult,
    check_log_column,
    column_number_of,
    earlier_run,
    with_margin,
    default_output,
    first_log_row,
    place_columns,
)
from .cached_values import save_with_cached_values
from .log_layout import (
    HEADER_SEARCH_ROWS,
    Occupancy,
    RulePlan,
    analyse_log,
    read_log_range,
    set_width,
    sheet_reference,
    write_decision_column,
    write_estimate_block,
)
from .row_cells import append_to_sheet
from .safe_io import open_workbook_safely, refuse_if_open, write_file_atomically

__all__ = ["AnnotateRefused", "AnnotateResult", "annotate", "default_output", "check_log_column", "place_columns"]

def annotate(source, *, column, plan: RulePlan, sheet=None, out=None, in_place=False, backup=True, live=False,
             allow_lossy=False, streaming=None, force=False, header_row=None, into=None) -> AnnotateResult:
    """Add the decision column and the estimate block to a test log and write the result.

    Parameters
    ----------
    source : path
        The log, an .xlsx workbook.
    column : str or int
        The log column: a letter, a 1-based number, or its header text (in the top rows).
    plan : RulePlan
        The rule's settings (``RulePlan.checked``).
    sheet : str, optional
        The sheet; default the active one.
    out : path, optional
        Where to write; default ``default_output(source)``. Never overwritten.
    in_place : bool
        Replace ``source`` itself (keeping ``<name>.backup.xlsx`` unless ``backup`` is false).
    live : bool
        Write tailstop formulas (with cached values) instead of values.
    allow_lossy : bool
        Go on although openpyxl would drop some content of the book; the
        losses are listed in the result.
    streaming : bool, optional
        Edit the book as bytes instead of loading it (``annotate_stream``).
        Default: when the log's sheet is long (``STREAM_FROM_BYTES``) and its
        markup allows it; the openpyxl path otherwise. True insists
        (``AnnotateRefused`` if the markup does not allow it); False never streams.
        Either path recognises a sheet annotated before and writes its decision column and block again
        where they are.
    force : bool
        With ``in_place``: replace the log although a spreadsheet program's lock file says it is open.
    header_row : int, optional
        The header's row; default the last caption above the column's first value.
    into : str or int, optional
        The decision column (a letter or a number); default the first free column right of the log.

    Raises
    ------
    AnnotateRefused, WorkbookRefused, LogProblem, FileExistsError
        With a message saying what is wrong; nothing is written then.
    """
    source = Path(source)
    target = _target(source, out, in_place)
    if in_place and not force:
        refuse_if_open(source, "annotate")
    if streaming is not False:
        from . import annotate_stream

        if streaming or annotate_stream.wants_streaming(source, sheet):
            try:
                return annotate_stream.annotate_streamed(source, target, column=column, plan=plan, sheet=sheet,
                                                         in_place=in_place, backup=backup, live=live,
                                                         header_row=header_row, into=into)
            except annotate_stream.NotStreamable as reason:
                if streaming:
                    raise AnnotateRefused(f"{source.name} cannot be edited as a stream: {reason}") from None
    book = open_workbook_safely(source, allow_lossy=allow_lossy)
    losses = [str(loss) for loss in book.tailstop_report.losses]
    losses += _hidden_values(source, book, allow_lossy)
    worksheet = _worksheet(book, sheet, source)
    log, values, header = _log_column(worksheet, column, header_row)
    filled = log.last_row
    log, values = with_margin(log, values, live)
    analysis = analyse_log(log, values, plan)
    before = cell_check.snapshot(book)
    cached = dict(before.rounded)  # numbers openpyxl would round are stored exactly
    formatted = _formatted_blanks(worksheet)
    earlier = _clear_earlier(worksheet, log)
    decision_column, layout, markup, added = _add(worksheet, log, values, analysis, live, cached, into, earlier)
    stored = worksheet._cells
    kept = sum(1 for key in formatted if key[1] == decision_column and key in stored
               and stored[key]._value not in (None, ""))
    checked = before.cell_count
    expected = cell_check.expected_after(before, {worksheet.title: added}, in_place=True)
    data = _package_bytes(book, cached)
    data = append_to_sheet(data, worksheet.title, markup)
    _verify(data, before, expected, source)
    saved = write_file_atomically(target, lambda handle: handle.write(data), in_place=in_place, backup=backup)
    _check_written(saved.path, data)
    return AnnotateResult(saved.path, saved.backup, log, decision_column, layout.reference(), analysis,
                          checked, len(before.cells), losses, live, header=header, margin=log.last_row - filled,
                          formats_kept=kept)


def _formatted_blanks(worksheet):
    """(row, column) of the cells that hold a format and no content."""
    return [key for key, cell in worksheet._cells.items() if cell._value in (None, "") and cell.has_style]


def _clear_earlier(worksheet, log):
    """Take an earlier run's cells and STOP highlight off the sheet, to be written again for the log as it is now.

    A cell of the earlier decision column that holds a format keeps it (a formatted blank now), so that the
    decision written there again keeps the look the user gave it; the block's cells go.
    """
    stored = worksheet._cells
    earlier = earlier_run({key: cell._value for key, cell in stored.items()}, log)
    for key in earlier.cells:
        if key[1] == earlier.decision_column and stored[key].has_style:
            stored[key].value = None
        else:
            del stored[key]
    if earlier.decision_column is not None:
        _drop_highlight(worksheet, earlier.decision_column)
    return earlier


def _drop_highlight(worksheet, column):
    """Remove the conditional formats that highlight STOP in ``column`` and nowhere else."""
    formats = worksheet.conditional_formatting
    for entry in list(formats._cf_rules):
        ranges = list(entry.sqref.ranges)
        rules = formats._cf_rules[entry]
        if ranges and all(part.min_col == part.max_col == column for part in ranges) and rules and all(
                rule.type == "cellIs" and rule.operator == "equal" and list(rule.formula) == ['"STOP"']
                for rule in rules):
            del formats._cf_rules[entry]


def _add(worksheet, log, values, analysis, live, cached, into, earlier):
    """Write the decision column next to the log and the block beside it, over no existing cell.

    Returns
    -------
    (decision column, BlockLayout, {row: markup to append}, {cell key: canonical content of every added cell})
    """
    merged = [ranged.bounds for ranged in worksheet.merged_cells.ranges]
    occupancy = Occupancy.from_keys(worksheet._cells, merged)
    content = Occupancy.from_keys([key for key, cell in worksheet._cells.items() if cell._value not in (None, "")],
                                  merged)
    decision_column, label_column, layout = place_columns(log, occupancy, analysis, live, into,
                                                          block_at=earlier.label_column, content=content,
                                                          decision_at=earlier.decision_column)
    write_estimate_block(worksheet, layout, log, decision_column, analysis, live=live, cached=cached,
                         source="values computed by tailstop annotate")
    # decision cells can be appended to the end of openpyxl's row markup only where nothing stands to their right
    # (and where the decision column holds no cell yet: a formatted blank is written into, keeping its format)
    crowded = {row for row, column in worksheet._cells if column >= decision_column}
    as_markup = [row for row in _rows_written_anyway(log, values, layout) if row not in crowded]
    markup = write_decision_column(worksheet, log, decision_column, analysis, live=live, cached=cached,
                                   layout=layout, as_markup=as_markup)
    set_width(worksheet, decision_column, 18)
    set_width(worksheet, label_column, 44)
    set_width(worksheet, label_column + 1, 24)
    added = {cell_check.cell_key(row, column): None for row, column in earlier.cells}  # gone unless written again
    added.update(_added_cells(worksheet, log, decision_column, layout, cached))
    added.update({cell_check.cell_key(row, decision_column): content for row, (_, content) in markup.items()})
    return decision_column, layout, {row: cell for row, (cell, _) in markup.items()}, added


def _target(source, out, in_place):
    if in_place and out is not None:
        raise AnnotateRefused("give either --out or --in-place, not both")
    target = source if in_place else Path(out) if out is not None else default_output(source)
    if not in_place and target.suffix.lower() != ".xlsx":
        raise AnnotateRefused(f"{target.name}: the annotated book is written as .xlsx; give a name ending in .xlsx")
    if not in_place and target.exists():
        raise FileExistsError(f"{target} exists; choose another name with --out, or replace the log with --in-place")
    return target


def _hidden_values(source, book, allow_lossy):
    hidden = cell_check.hidden_merged_values(source, book)
    if not hidden:
        return []
    shown = "; ".join(f"{sheet_reference(title)}!{coordinate} holds {value!r}"
                      for title, coordinate, value in hidden[:3])
    more = f" and {len(hidden) - 3} more" if len(hidden) > 3 else ""
    if not allow_lossy:
        raise AnnotateRefused(f"{source.name}: cells hidden under merged ranges hold values that openpyxl drops "
                              f"on save: {shown}{more}. Unmerge those cells or clear them, or accept the loss "
                              "with --allow-lossy")
    return [f"values hidden under merged ranges ({shown}{more})"]


def _worksheet(book, sheet, source):
    if sheet is None:
        chosen = book.active
    elif sheet in book.sheetnames:
        chosen = book[sheet]
    else:
        raise AnnotateRefused(f"{source.name} has no sheet {sheet!r}; its sheets are "
                              + ", ".join(repr(name) for name in book.sheetnames))
    if not hasattr(chosen, "_cells"):
        raise AnnotateRefused(f"{chosen.title!r} is a chart sheet, not a sheet with a log; choose one with --sheet")
    return chosen


def _log_column(worksheet, column, header_row):
    """The log's range and values, and its header text; the header found as ``header_row_of`` says."""
    stored = worksheet._cells
    window = header_row or HEADER_SEARCH_ROWS
    top = {key: cell._value for key, cell in stored.items() if key[0] <= window}
    number = column_number_of(worksheet.title, top, column, header_row)
    found = {row: cell._value for (row, col), cell in stored.items() if col == number and cell._value is not None}
    header = first_log_row(worksheet.title, number, found, header_row)
    log, values = read_log_range(worksheet, number, header + 1)
    header_value = found.get(header)
    check_log_column(log, header_value)
    return log, values, "" if header_value is None else str(header_value)


def _rows_written_anyway(log, values, layout):
    """Log rows below the estimate block whose log cell holds a value: their decision can be appended as markup."""
    first = max(log.first_row, layout.last_row + 1)
    return [row for row in range(first, log.last_row + 1) if values[row - log.first_row] is not None]


def _added_cells(worksheet, log, decision_column, layout, cached):
    coordinates = [(log.first_row - 1 + offset, decision_column) for offset in range(log.rows + 1)]
    for row in range(layout.top_row, layout.last_row + 1):
        coordinates += [(row, layout.label_column), (row, layout.value_column)]
    return cell_check.cells_written(worksheet, coordinates, cached)


def _package_bytes(book, cached):
    """The .xlsx package as it will be written; formula cells and listed numbers keep their cached values."""
    if not cached:
        buffer = io.BytesIO()
        book.save(buffer)
        return buffer.getvalue()
    with tempfile.TemporaryDirectory(prefix="tailstop-annotate-") as folder:
        path = Path(folder) / "annotated.xlsx"
        save_with_cached_values(book, path, cached)
        return path.read_bytes()


def _verify(data, before, expected, source):
    if cell_check.package_holds(data, before.titles, expected):
        return
    titles, actual, _ = cell_check.cells_of_package(data)
    if titles != before.titles:
        raise AnnotateRefused(f"{source.name}: the rewritten book would not have the same sheets "
                              f"({before.titles} became {titles}); nothing was written")
    found = cell_check.differences(expected, actual) or [
        "the sheets differ, though no cell does (report this with the workbook)"]
    if found:
        listed = "\n".join(f"  - {difference}" for difference in found)
        raise AnnotateRefused(f"{source.name}: the rewritten book would not keep every cell as it was:\n{listed}\n"
                              "Nothing was written.")


def _check_written(path, data):
    if hashlib.sha256(Path(path).read_bytes()).digest() != hashlib.sha256(data).digest():
        raise OSError(f"{path} does not hold the bytes that were checked; do not use it")
