"""LibreOffice Calc as the calculator of ``tailstop recalc --engine libreoffice``.

The book is copied with every tailstop call in LibreOffice's spelling, opened
in a throwaway LibreOffice profile that has the extension installed and that
recalculates everything on load, and saved by LibreOffice as ``.xlsx``; the
values it stored are read back. ``tailstop recalc`` then writes them into the
user's own book exactly as it does for its built-in engine, so LibreOffice
never rewrites the user's file.
"""
from __future__ import annotations

import shutil
import tempfile
from pathlib import Path

from openpyxl import load_workbook

from ..workbooks.cached_values import EXCEL_ERRORS, CellError
from ..workbooks.safe_io import open_workbook_safely
from ..workbooks.spelling import respell_book
from .build import build_extension
from .libreoffice import sandbox

__all__ = ["evaluate_with_libreoffice"]


def evaluate_with_libreoffice(book_path, *, allow_lossy=True, saved_copy=None):
    """Every cell value of a book as LibreOffice computes it with the tailstop extension.

    Parameters
    ----------
    book_path : path
        The book (already checked by the caller, as ``recalc`` does).
    allow_lossy : bool
        Compute even if the temporary copy loses content openpyxl cannot keep
        (only the values are taken from it).
    saved_copy : path, optional
        Also keep the book as LibreOffice saved it here.

    Returns
    -------
    dict
        ``(SHEET TITLE IN UPPER CASE, coordinate) -> value`` with plain Python
        values and ``CellError`` for spreadsheet errors, as ``evaluate_workbook``.
    """
    with tempfile.TemporaryDirectory(prefix="tailstop-lo-book-") as folder, sandbox() as office:
        folder = Path(folder)
        book = open_workbook_safely(book_path, allow_lossy=allow_lossy)
        respell_book(book, "libreoffice")
        copy = folder / "book.xlsx"
        book.save(copy)
        office.install(build_extension(folder / "extension"))
        computed = office.convert(copy, folder / "computed")
        if saved_copy is not None:
            shutil.copyfile(computed, saved_copy)
        return _values(computed)


def _values(path):
    book = load_workbook(path, data_only=True, read_only=True)
    try:
        values = {}
        for sheet in book.worksheets:
            for row in sheet.iter_rows():
                for cell in row:
                    if getattr(cell, "value", None) is not None:
                        values[(sheet.title.upper(), cell.coordinate)] = _value(cell.value)
        return values
    finally:
        book.close()


def _value(value):
    if isinstance(value, str) and value in EXCEL_ERRORS:
        return CellError(value)
    return value
