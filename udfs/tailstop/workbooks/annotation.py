"""What both annotate paths share: the refusal, the result, where the output and the new columns go.

``annotate`` (through openpyxl) and ``annotate_stream`` (long logs, edited as bytes) both use these,
so neither imports the other's internals.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from openpyxl.utils.cell import get_column_letter

from ..sheet import cells
from .cell_check import sheet_reference
from .log_layout import (BLOCK_TITLE, CAUTION, DECISION_HEADER, HEADER_SEARCH_ROWS, LIVE_NOTE_LINES, LogAnalysis,
                         LogRange, block_layout, find_column, header_row_of)
from .package import GRID_COLUMNS

__all__ = ["AnnotateRefused", "AnnotateResult", "BLOCK_GAP", "OUTPUT_SUFFIX", "check_log_column", "default_output",
           "place_columns", "column_number_of", "first_log_row", "EarlierRun", "earlier_run",
           "earlier_decision_column", "earlier_block", "is_decision", "LIVE_MARGIN", "with_margin"]

OUTPUT_SUFFIX = "-tailstop"
BLOCK_GAP = 1  # empty columns between the decision column and the estimate block


class AnnotateRefused(ValueError):
    """The log was not annotated; the message says why and what to do."""


@dataclass(frozen=True)
class AnnotateResult:
    """What ``annotate`` wrote.

    Attributes
    ----------
    path, backup : pathlib.Path, pathlib.Path or None
    log : LogRange
        The log column that was read.
    decision_column : int
    block : str
        The estimate block's range, e.g. ``'G1:H27'``.
    analysis : LogAnalysis
    cells_checked : int
        Pre-existing non-empty cells found unchanged in the written book.
    sheets_checked : int
    losses : list of str
        What was given up with ``allow_lossy`` (empty otherwise).
    live : bool
    copied_parts : int or None
        For a long log edited as bytes (``annotate_stream``): the parts of the
        package copied unchanged (checked by size and CRC); ``cells_checked``
        then counts the log sheet's cells. None when the book went through openpyxl.
    header : str
        The text of the header cell (the row above ``log.first_row``).
    margin : int
        Empty rows below the log that the live formulas cover (``log`` includes them).
    formats_kept : int
        Cells of the decision column that held a format and no content: written with that format kept.
    """

    path: Path
    backup: Path | None
    log: LogRange
    decision_column: int
    block: str
    analysis: LogAnalysis
    cells_checked: int
    sheets_checked: int
    losses: list
    live: bool
    copied_parts: int | None = None
    header: str = ""
    margin: int = 0
    formats_kept: int = 0


def default_output(source) -> Path:
    """``LOG-tailstop.xlsx`` beside ``LOG.xlsx``."""
    source = Path(source)
    return source.with_name(f"{source.stem}{OUTPUT_SUFFIX}.xlsx")


# live formulas reach this many empty rows below the log, so that units typed there are decided and counted
LIVE_MARGIN = 100
LAST_SHEET_ROW = 1_048_576


def with_margin(log: LogRange, values, live):
    """(log range, values) reaching ``LIVE_MARGIN`` empty rows further down in live mode (the sheet's end at most)."""
    if not live:
        return log, values
    last = min(log.last_row + LIVE_MARGIN, LAST_SHEET_ROW)
    extended = LogRange(log.sheet_title, log.column, log.first_row, last)
    return extended, list(values) + [None] * (last - log.last_row)


DECISION_TEXTS = frozenset({"PILOT", "CONTINUE", "STOP", "PAST STOP"})


@dataclass(frozen=True)
class EarlierRun:
    """What an earlier ``annotate`` wrote on the sheet, recognised by its marks.

    The decision column is the one whose cell in the log's header row reads ``DECISION_HEADER``; the
    block starts at a ``BLOCK_TITLE`` cell in the top rows and ends at the caution line below it.

    Attributes
    ----------
    decision_column, label_column : int or None
    cells : list of (row, column)
        The cells it wrote: the header and the decisions (texts, ``#TAILSTOP!`` texts, STOP_DECISION
        formulas) of the decision column, and every cell of the block's two columns from title to caution.
    """

    decision_column: int | None
    label_column: int | None
    cells: list

    @property
    def found(self) -> bool:
        return self.decision_column is not None or self.label_column is not None


def earlier_run(values: dict, log: LogRange) -> EarlierRun:
    """``EarlierRun`` from the sheet's cells, {(row, column): raw value} (formulas as their text)."""
    header_row = log.first_row - 1
    decision = earlier_decision_column(
        {column: [row] for (row, column), value in values.items() if value == DECISION_HEADER}, log)
    taken = []
    if decision is not None:
        taken = [(row, column) for (row, column), value in values.items()
                 if column == decision and (row == header_row or (row > header_row and is_decision(value)))]
    label, block = earlier_block(values)
    return EarlierRun(decision, label, taken + block)


def earlier_decision_column(header_rows: dict, log: LogRange):
    """The decision column of an earlier run: the first column, other than the log's, with the header in the
    log's header row. ``header_rows`` maps column -> rows where the column reads ``DECISION_HEADER``."""
    header_row = log.first_row - 1
    return min((column for column, rows in header_rows.items() if header_row in rows and column != log.column),
               default=None)


def earlier_block(values: dict):
    """(label column or None, [(row, column), ...]) of an earlier run's estimate block.

    The block starts at the first ``BLOCK_TITLE`` cell in the top rows and ends at the caution line below it in
    the same column; its cells are every cell of its two columns between them. ``values`` needs the top rows only.
    """
    titles = sorted((row, column) for (row, column), value in values.items()
                    if value == BLOCK_TITLE and row <= HEADER_SEARCH_ROWS)
    if not titles:
        return None, []
    top, label = titles[0]
    end = min((row for (row, col), value in values.items() if col == label and row > top and value == CAUTION),
              default=None)
    if end is None:
        return None, []
    return label, [(row, col) for (row, col) in values if col in (label, label + 1) and top <= row <= end]


def is_decision(value) -> bool:
    """True for what the decision column of a run holds below its header: a decision, a ``#TAILSTOP!`` text,
    or a live STOP_DECISION formula."""
    if not isinstance(value, str):
        return False
    return value in DECISION_TEXTS or value.startswith(cells.ERROR_PREFIX) or (
        value.startswith("=") and "STOP_DECISION(" in value.upper())


def place_columns(log, occupancy, analysis, live, into=None, block_at=None, content=None, decision_at=None):
    """The decision column, the estimate block's label column and its layout, over no cell that holds anything.

    The decision column covers the header row and the log's rows: the column ``into`` names, or the first
    column right of the log free there — with no value or formula there (``content``; a cell that only holds
    a format does not count, and keeps its format). The block takes the first two adjacent columns, at least
    ``BLOCK_GAP`` columns right of the decision column, that hold no cell at all in the block's rows
    (``occupancy``); ``block_at`` (where an earlier run put it) when it is free there. Without ``into``, the
    decision column is ``decision_at`` when an earlier run put it there (refused if it now holds a cell of
    the user's in those rows).
    """
    rows = (log.first_row - 1, log.last_row)
    taken = occupancy if content is None else content
    if into is not None:
        decision_column = _into_column(log, taken, into, rows)
    elif decision_at is not None:
        decision_column = _earlier_column(log, taken, decision_at, rows)
    else:
        decision_column = next((column for column in range(log.column + 1, GRID_COLUMNS + 1)
                                if taken.free(column, *rows)), None)
    notes = LIVE_NOTE_LINES if live else len(analysis.notes)
    probe = block_layout(1, 1, notes)
    block_rows = (probe.top_row, probe.last_row)
    start = GRID_COLUMNS if decision_column is None else decision_column + 1 + BLOCK_GAP
    candidates = range(start, GRID_COLUMNS)
    if block_at is not None and block_at >= start:
        candidates = [block_at, *candidates]
    label_column = next((column for column in candidates
                         if occupancy.free(column, *block_rows) and occupancy.free(column + 1, *block_rows)), None)
    if decision_column is None or label_column is None:
        raise AnnotateRefused(f"sheet {sheet_reference(log.sheet_title)} has no free columns right of the log for "
                              "the decision column and the estimate block")
    return decision_column, label_column, block_layout(1, label_column, notes)


def _into_column(log, occupancy, into, rows):
    try:
        column = find_column({}, int(into) if str(into).strip().isdigit() else into)
    except ValueError as problem:
        raise AnnotateRefused(f"--into: {problem}") from None
    letter = get_column_letter(column)
    if column == log.column:
        raise AnnotateRefused(f"--into {letter} is the log column itself; choose an empty column")
    taken = occupancy.first_taken(column, *rows)
    if taken is not None:
        raise AnnotateRefused(f"--into {letter}: {sheet_reference(log.sheet_title)}!{letter}{taken} already holds "
                              f"a cell (rows {rows[0]} to {rows[1]} of that column must hold no value or formula); "
                              "choose another column, or leave --into out to take the first free one")
    return column


def _earlier_column(log, taken, column, rows):
    row = taken.first_taken(column, *rows)
    if row is not None:
        letter = get_column_letter(column)
        raise AnnotateRefused(f"column {letter} holds the decisions of an earlier run, and "
                              f"{sheet_reference(log.sheet_title)}!{letter}{row} now holds a cell of its own there "
                              f"(rows {rows[0]} to {rows[1]} of that column are the decisions'); move or clear that "
                              "cell, or give --into COLUMN to write the decisions elsewhere")
    return column


def column_number_of(title, top_cells, column, header_row):
    """``log_layout.find_column`` with its problem as a refusal."""
    if header_row is not None and header_row < 1:
        raise AnnotateRefused(f"--header-row must be a row number, 1 or more (got {header_row})")
    try:
        return find_column(top_cells, column, header_row)
    except ValueError as problem:
        raise AnnotateRefused(f"sheet {title!r}: {problem}") from None


def first_log_row(title, number, found, header_row):
    """The header's row of the log column (``header_row_of``); refused when no caption stands above the log."""
    header = header_row_of(found, header_row)
    if header is not None:
        return header
    letter = get_column_letter(number)
    first = min((row for row, value in found.items() if not cells.is_blank(value)), default=None)
    if first is None:
        raise AnnotateRefused(f"column {letter} of sheet {title!r} is empty: no log to annotate")
    shown = cells.describe(found[first]).removeprefix("holds ")
    raise AnnotateRefused(f"{sheet_reference(title)}!{letter}{first} holds {shown}, the column's first value, and "
                          "no header stands above it: the row above the log must hold the column's header; insert "
                          "a header row, or give --header-row")


def check_log_column(log, header_value):
    """Refuse a log column without a header or without a log."""
    header_row = log.first_row - 1
    if isinstance(header_value, (int, float)) and not isinstance(header_value, bool):
        raise AnnotateRefused(f"{log.address(header_row)} holds {header_value:g}: the header row must hold the "
                              "column's header, with the log below it; insert a header row")
    if log.rows == 0:
        raise AnnotateRefused(f"{log.address(log.first_row)} and the rows below are empty: no log to annotate in "
                              f"column {log.letter} of sheet {log.sheet_title!r}")
