"""What both annotate paths share: the refusal, the result, where the output and the new columns go.

``annotate`` (through openpyxl) and ``annotate_stream`` (long logs, edited as bytes) both use these,
so neither imports the other's internals.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from .log_layout import LIVE_NOTE_LINES, LogAnalysis, LogRange, block_layout
from .package import GRID_COLUMNS

__all__ = ["AnnotateRefused", "AnnotateResult", "BLOCK_GAP", "OUTPUT_SUFFIX", "check_log_column", "default_output",
           "place_columns"]

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


def default_output(source) -> Path:
    """``LOG-tailstop.xlsx`` beside ``LOG.xlsx``."""
    source = Path(source)
    return source.with_name(f"{source.stem}{OUTPUT_SUFFIX}.xlsx")


def place_columns(title, max_column, analysis, live):
    """The decision column right of everything on the sheet, then the estimate block's label column and layout."""
    decision_column = max_column + 1
    label_column = decision_column + 1 + BLOCK_GAP
    if label_column + 1 > GRID_COLUMNS:
        raise AnnotateRefused(f"sheet {title!r} has no free columns on the right for the decision column and "
                              "the estimate block")
    layout = block_layout(1, label_column, LIVE_NOTE_LINES if live else len(analysis.notes))
    return decision_column, label_column, layout


def check_log_column(log, header_value):
    """Refuse a log column without a header or without a log."""
    if isinstance(header_value, (int, float)) and not isinstance(header_value, bool):
        raise AnnotateRefused(f"{log.address(1)} holds {header_value:g}: row 1 must hold the column's header, "
                              "with the log from row 2 down; insert a header row")
    if log.rows == 0:
        raise AnnotateRefused(f"{log.address(2)} and the rows below are empty: no log to annotate in column "
                              f"{log.letter} of sheet {log.sheet_title!r}")
