"""Open untrusted workbooks safely, save workbooks atomically, read columns fast.

``open_workbook_safely`` runs ``inspect_package`` (see ``package.py``) before
openpyxl touches the file, so a hostile or damaged file is refused with one
clear ``WorkbookRefused`` message, and a book with content openpyxl would drop
on save is refused unless the caller accepts the loss.

``save_workbook_atomically`` never leaves a half-written file behind: it
writes a temporary file beside the target, flushes it to disk, and only then
moves it into place. It refuses to overwrite an existing file unless told to,
and then keeps a backup of the old one.
"""
from __future__ import annotations

import os
import re
import shutil
import stat
import tempfile
from dataclasses import dataclass
from pathlib import Path

import defusedxml.ElementTree
import openpyxl
import openpyxl.xml.functions

from .package import (
    GRID_COLUMNS,
    Limits,
    WorkbookRefused,
    column_number,
    inspect_package,
)

__all__ = [
    "WorkbookRefused",
    "Limits",
    "SaveResult",
    "open_workbook_safely",
    "require_defused_openpyxl",
    "save_workbook_atomically",
    "write_file_atomically",
    "resolve_column",
    "column_from_headers",
    "iter_column_values",
]

WORKBOOK_SUFFIXES = (".xlsx", ".xlsm", ".xltx", ".xltm")
_LETTERS = re.compile(r"[A-Za-z]{1,3}")


# ---------------------------------------------------------------------------
# opening
# ---------------------------------------------------------------------------
def require_defused_openpyxl():
    """Make sure openpyxl parses XML through defusedxml (or lxml without entity resolution).

    openpyxl switches to defusedxml when it is installed, unless the
    environment variable ``OPENPYXL_DEFUSEDXML`` is set to something other
    than ``True``.

    Raises
    ------
    RuntimeError
        openpyxl would parse workbook XML with the unprotected standard parser.
    """
    functions = openpyxl.xml.functions
    iterparse_safe = functions.iterparse is defusedxml.ElementTree.iterparse
    fromstring_safe = openpyxl.LXML or functions.fromstring is defusedxml.ElementTree.fromstring
    if not (openpyxl.DEFUSEDXML and iterparse_safe and fromstring_safe):
        raise RuntimeError(
            "openpyxl is not using defusedxml: install defusedxml and do not set "
            "OPENPYXL_DEFUSEDXML to anything but True")


def open_workbook_safely(path, *, allow_lossy=False, read_only=False, data_only=False, limits=Limits()):
    """Open an .xlsx workbook with openpyxl after checking that it is safe to.

    Parameters
    ----------
    path : str or os.PathLike
        The workbook.
    allow_lossy : bool
        Open even when saving the book with openpyxl would drop content
        (macros, slicers, shapes, ...). Read-only opening never saves, so
        it never needs this.
    read_only, data_only : bool
        Passed to ``openpyxl.load_workbook``.
    limits : Limits
        Size, zip-ratio, cell-count and sheet-extent bounds.

    Returns
    -------
    openpyxl.Workbook
        The workbook; ``wb.tailstop_report`` holds the ``PackageReport``.

    Raises
    ------
    WorkbookRefused
        The file is not a readable .xlsx package, is hostile, exceeds a limit,
        or would lose content on save and ``allow_lossy`` is false. The
        message says exactly what and where.
    """
    require_defused_openpyxl()
    report = inspect_package(path, limits)
    if report.losses and not (allow_lossy or read_only):
        raise WorkbookRefused(_loss_message(Path(path), report))
    try:
        book = openpyxl.load_workbook(path, read_only=read_only, data_only=data_only)
    except Exception as error:  # a damaged part openpyxl trips over (a shared-string index out of range, ...)
        raise WorkbookRefused(f"{Path(path).name}: openpyxl cannot read this workbook "
                              f"({type(error).__name__}: {error})") from None
    book.tailstop_report = report
    return book


def _loss_message(path, report):
    grouped = {}
    for loss in report.losses:
        grouped.setdefault(loss.what, []).append(loss.where)
    lines = [f"  - {what}: {', '.join(sorted(set(places)))}" for what, places in grouped.items()]
    return (f"{path.name}: saving this workbook with openpyxl would lose:\n" + "\n".join(lines)
            + "\nWork on a copy without that content, or accept the loss (allow_lossy).")


# ---------------------------------------------------------------------------
# saving
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class SaveResult:
    """Where a workbook was written, and the backup of the file it replaced (or None)."""

    path: Path
    backup: Path | None


def save_workbook_atomically(book, target, *, in_place=False, backup=True):
    """Save an openpyxl workbook so that the target is either the old file or the whole new one.

    Parameters
    ----------
    book : openpyxl.Workbook
        The workbook to save.
    target : str or os.PathLike
        Destination; must end in .xlsx, .xlsm, .xltx or .xltm.
    in_place : bool
        Allow replacing an existing file at ``target`` (typically the source).
    backup : bool
        When replacing a file, keep the old one as ``<name>.backup.xlsx``
        (numbered if that exists already).

    Returns
    -------
    SaveResult

    Raises
    ------
    FileExistsError
        ``target`` exists and ``in_place`` is false.
    """
    return write_file_atomically(target, book.save, in_place=in_place, backup=backup)


def write_file_atomically(target, write, *, in_place=False, backup=True, check=None):
    """Run ``write(handle)`` into a temporary file beside ``target``, then move it into place.

    Parameters
    ----------
    target : str or os.PathLike
        Destination workbook path.
    write : callable
        Called with a binary file handle open for writing.
    in_place, backup : bool
        As for ``save_workbook_atomically``.
    check : callable, optional
        Called with the temporary file's path once it is written and synced;
        an exception from it removes the temporary file and moves nothing.

    Returns
    -------
    SaveResult
    """
    target = Path(target).absolute()
    if target.suffix.lower() not in WORKBOOK_SUFFIXES:
        raise ValueError(f"{target.name}: a workbook name must end in one of {', '.join(WORKBOOK_SUFFIXES)}")
    if target.exists() and not in_place:
        raise FileExistsError(f"{target} exists; choose a new name or ask for in-place saving")
    temporary = _write_temporary(target, write)
    try:
        if check is not None:
            check(temporary)
        os.chmod(temporary, _mode_for(target))
        kept = _backup(target) if (in_place and backup and target.exists()) else None
        _move_into_place(temporary, target, replace=in_place)
    except BaseException:
        temporary.unlink(missing_ok=True)
        raise
    _sync_directory(target.parent)
    return SaveResult(target, kept)


def _write_temporary(target, write):
    folder = target.parent
    if not folder.is_dir():
        raise FileNotFoundError(f"the folder {folder} does not exist; create it or write somewhere else")
    try:
        descriptor, name = tempfile.mkstemp(prefix=f".{target.stem}.", suffix=".partial", dir=folder)
    except OSError as problem:
        raise OSError(f"cannot write a file in the folder {folder} ({problem.strerror or problem}); "
                      "write somewhere else") from None
    temporary = Path(name)
    try:
        with os.fdopen(descriptor, "wb") as handle:
            write(handle)
            handle.flush()
            os.fsync(handle.fileno())
    except BaseException:
        temporary.unlink(missing_ok=True)
        raise
    return temporary


def _mode_for(target):
    """Permissions of the file being replaced, else the usual ones for a new file."""
    if target.exists():
        return stat.S_IMODE(target.stat().st_mode)
    umask = os.umask(0)
    os.umask(umask)
    return 0o666 & ~umask


def _move_into_place(temporary, target, *, replace):
    if replace:
        os.replace(temporary, target)
        return
    try:
        os.link(temporary, target)  # fails if target appeared meanwhile: never clobbers
    except FileExistsError:
        raise FileExistsError(f"{target} exists; choose a new name or ask for in-place saving") from None
    except OSError:  # file system without hard links
        if target.exists():
            raise FileExistsError(f"{target} exists; choose a new name or ask for in-place saving") from None
        os.replace(temporary, target)
        return
    temporary.unlink()


def _backup(target):
    backup = _free_backup_name(target)
    try:
        os.link(target, backup)  # the old bytes stay in this inode after the replace
    except OSError:
        shutil.copy2(target, backup)
        with backup.open("rb") as handle:
            os.fsync(handle.fileno())
    return backup


def _free_backup_name(target):
    candidate = target.with_name(f"{target.stem}.backup{target.suffix}")
    number = 2
    while candidate.exists():
        candidate = target.with_name(f"{target.stem}.backup-{number}{target.suffix}")
        number += 1
    return candidate


def _sync_directory(folder):
    try:
        descriptor = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(descriptor)
    except OSError:
        pass
    finally:
        os.close(descriptor)


# ---------------------------------------------------------------------------
# columns
# ---------------------------------------------------------------------------
def resolve_column(sheet, key, *, header_row=1):
    """Find a column by number, letter or header text.

    Parameters
    ----------
    sheet : openpyxl worksheet (normal or read-only)
    key : int or str
        A 1-based column number, a column letter ('B'), or the text of a
        header cell in ``header_row`` (matched ignoring case and surrounding
        spaces).
    header_row : int
        Row holding the headers.

    Returns
    -------
    int
        1-based column number.

    Raises
    ------
    ValueError
        No such column, a header text that appears twice, or a key that is
        both a header text and a different column's letter.
    """
    if isinstance(key, int) and not isinstance(key, bool):
        return column_from_headers({}, key)
    return column_from_headers(_header_texts(sheet, header_row), key)


def column_from_headers(values: dict, key) -> int:
    """``resolve_column`` for a header row given as {column number: value} (values as openpyxl reads them)."""
    if isinstance(key, int) and not isinstance(key, bool):
        if not 1 <= key <= GRID_COLUMNS:
            raise ValueError(f"column number must be 1 to {GRID_COLUMNS} (got {key})")
        return key
    text = str(key).strip()
    headers = {number: str(value).strip() for number, value in sorted(values.items()) if value is not None}
    matches = [number for number, header in headers.items() if header.casefold() == text.casefold()]
    letter = column_number(text) if _LETTERS.fullmatch(text) else None
    if letter is not None and letter > GRID_COLUMNS:
        letter = None
    return _choose_column(text, matches, letter, headers)


def _header_texts(sheet, header_row):
    rows = sheet.iter_rows(min_row=header_row, max_row=header_row, values_only=True)
    values = next(iter(rows), ())
    return {number: str(value).strip() for number, value in enumerate(values, start=1) if value is not None}


def _choose_column(text, matches, letter, headers):
    if len(matches) > 1:
        letters = ", ".join(openpyxl.utils.get_column_letter(number) for number in matches)
        raise ValueError(f"header {text!r} appears in columns {letters}; give the column letter instead")
    if matches and letter is not None and matches[0] != letter:
        raise ValueError(f"{text!r} is the header of column {openpyxl.utils.get_column_letter(matches[0])} "
                         f"and also the letter of another column; give the column number instead")
    if matches:
        return matches[0]
    if letter is not None:
        return letter
    known = ", ".join(repr(header) for header in headers.values()) or "none"
    raise ValueError(f"no column {text!r}: not a column letter, and the headers are {known}")


def iter_column_values(sheet, column, *, first_row=2, last_row=None):
    """Yield the values of one column from ``first_row`` down, None for blank cells.

    Works in read-only mode (streams the sheet once) and in normal mode.
    Stops at ``last_row`` or at the sheet's last used row.

    Parameters
    ----------
    sheet : openpyxl worksheet
    column : int
        1-based column number (see ``resolve_column``).
    first_row, last_row : int
        Rows to read, inclusive.
    """
    rows = sheet.iter_rows(min_row=first_row, max_row=last_row, min_col=column, max_col=column,
                           values_only=True)
    for row in rows:
        yield row[0] if row else None


def lock_file(path):
    """The lock file a spreadsheet program keeps beside a book it holds open, or None.

    Excel writes ``~$NAME.xlsx``, LibreOffice ``.~lock.NAME.xlsx#`` into the book's folder while the book is
    open (and removes it on closing; a crash can leave one behind).
    """
    path = Path(path)
    for name in (f"~${path.name}", f".~lock.{path.name}#"):
        candidate = path.with_name(name)
        if candidate.exists():
            return candidate
    return None


def refuse_if_open(path, verb):
    """OSError when a spreadsheet program holds ``path`` open: replacing it now would lose the user's edits."""
    found = lock_file(path)
    if found is not None:
        raise OSError(f"{Path(path).name} is open in a spreadsheet program (its lock file {found.name} is beside "
                      f"it): close it there, then {verb} again; if no program has it open (the lock file was left "
                      "by a crash), give --force")

