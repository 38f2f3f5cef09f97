"""Test helper: convert a workbook with headless LibreOffice and read back what it shows.

LibreOffice runs with a private profile under a temporary folder (so it never
touches a user's settings and two runs never share a lock), in its own
process group, bounded by a timeout after which the whole group is killed.
"""
from __future__ import annotations

import os
import shutil
import signal
import subprocess
import tempfile
from pathlib import Path

import openpyxl

__all__ = ["find_soffice", "convert_with_libreoffice", "values_after_libreoffice", "LibreOfficeFailed"]

CONVERT_TIMEOUT = 180  # seconds; the first start of a fresh profile is the slow part
RECALC_MODES = {"always": 0, "never": 1, "prompt": 2}  # Calc/Formula/Load/OOXMLRecalcMode
_PROFILE_SETTINGS = """<?xml version="1.0" encoding="UTF-8"?>
<oor:items xmlns:oor="http://openoffice.org/2001/registry" xmlns:xs="http://www.w3.org/2001/XMLSchema"
           xmlns:xsi="http://www.w3.org/2001/XMLSchema-instance">
<item oor:path="/org.openoffice.Office.Calc/Formula/Load"><prop oor:name="OOXMLRecalcMode" oor:op="fuse">
<value>{mode}</value></prop></item>
</oor:items>
"""


class LibreOfficeFailed(RuntimeError):
    """LibreOffice did not produce the converted file."""


def find_soffice():
    """Path of the LibreOffice ``soffice`` program, or None when it is not installed."""
    for name in ("soffice", "libreoffice"):
        found = shutil.which(name)
        if found:
            return found
    for candidate in ("/usr/lib/libreoffice/program/soffice", "/opt/libreoffice/program/soffice"):
        if os.access(candidate, os.X_OK):
            return candidate
    return None


def convert_with_libreoffice(book, out_dir, *, recalc_mode=None, timeout=CONVERT_TIMEOUT):
    """Open ``book`` in headless LibreOffice and save it as .xlsx into ``out_dir``.

    Parameters
    ----------
    book : path
        The workbook to convert.
    out_dir : path
        Folder for the converted copy (same file name as ``book``); must
        differ from the folder of ``book``.
    recalc_mode : {None, 'always', 'never', 'prompt'}
        LibreOffice's "recalculation on file load" setting for Excel 2007+
        files; None keeps LibreOffice's default.
    timeout : float
        Seconds before the LibreOffice process group is killed.

    Returns
    -------
    pathlib.Path
        The converted workbook.
    """
    soffice = find_soffice()
    if soffice is None:
        raise LibreOfficeFailed("soffice not found")
    book, out_dir = Path(book).absolute(), Path(out_dir).absolute()
    if book.parent == out_dir:
        raise ValueError("out_dir must differ from the book's folder (LibreOffice keeps the file name)")
    out_dir.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory(prefix="tailstop-lo-profile-") as profile:
        _write_profile(Path(profile), recalc_mode)
        command = [soffice, f"-env:UserInstallation={Path(profile).as_uri()}", "--headless", "--norestore",
                   "--convert-to", "xlsx", "--outdir", str(out_dir), str(book)]
        output = _run_bounded(command, timeout)
    converted = out_dir / (book.stem + ".xlsx")
    if not converted.is_file():
        raise LibreOfficeFailed(f"LibreOffice wrote no {converted.name}; it said: {output.strip()[-500:]}")
    return converted


def values_after_libreoffice(book, out_dir, **options):
    """Convert with LibreOffice and return the converted book opened with ``data_only=True``."""
    return openpyxl.load_workbook(convert_with_libreoffice(book, out_dir, **options), data_only=True)


def _write_profile(profile, recalc_mode):
    if recalc_mode is None:
        return
    settings = profile / "user" / "registrymodifications.xcu"
    settings.parent.mkdir(parents=True)
    settings.write_text(_PROFILE_SETTINGS.format(mode=RECALC_MODES[recalc_mode]))


def _run_bounded(command, timeout):
    process = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True,
                               stdin=subprocess.DEVNULL, start_new_session=True)
    try:
        output, _ = process.communicate(timeout=timeout)
    except subprocess.TimeoutExpired:
        os.killpg(process.pid, signal.SIGKILL)
        process.communicate()
        raise LibreOfficeFailed(f"LibreOffice did not finish within {timeout} s") from None
    return output
