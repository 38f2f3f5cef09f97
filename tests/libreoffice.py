"""Test helper: convert a workbook with headless LibreOffice and read back what it shows.

LibreOffice runs with a private profile under a temporary folder (so it never
touches a user's settings and two runs never share a lock), in its own
process group, bounded by a timeout after which the whole group is killed.

Where the program is looked for: ``TAILSTOP_SOFFICE`` when it is set (and
then nowhere else, so a value that names no program means "missing"),
otherwise ``soffice`` or ``libreoffice`` on PATH and the usual install
folders. ``libreoffice_status`` converts a one-cell book once per test run
to see that the program works; ``require_libreoffice`` turns a missing or
broken LibreOffice into a skip that says why, or, when ``CI=true``, into a
failure with the same message, so that CI never passes without these tests.
"""
from __future__ import annotations

import os
import shutil
import signal
import subprocess
import tempfile
from pathlib import Path

import openpyxl
import pytest

__all__ = ["find_soffice", "convert_with_libreoffice", "values_after_libreoffice", "LibreOfficeFailed",
           "libreoffice_status", "require_libreoffice", "in_ci", "SOFFICE_VARIABLE"]

SOFFICE_VARIABLE = "TAILSTOP_SOFFICE"
# where Debian's packages and LibreOffice's own installer put the program
INSTALL_FOLDERS = ("/usr/lib/libreoffice/program/soffice", "/opt/libreoffice/program/soffice")
INSTALL_HINT = "install libreoffice-calc-nogui (Debian) or point TAILSTOP_SOFFICE at the soffice program"

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
    """Path of the LibreOffice ``soffice`` program, or None when it is not installed.

    ``TAILSTOP_SOFFICE``, when set, is the only place looked at: a program
    name found on PATH or a path to an executable file.
    """
    chosen = os.environ.get(SOFFICE_VARIABLE)
    if chosen is not None:
        found = shutil.which(chosen)
        return found if found and os.path.isfile(found) else None
    for name in ("soffice", "libreoffice"):
        found = shutil.which(name)
        if found:
            return found
    for candidate in INSTALL_FOLDERS:
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
        raise LibreOfficeFailed(f"soffice not found; {INSTALL_HINT}")
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


def in_ci():
    """True when the environment says this is a CI run (``CI=true``, as CI services set it)."""
    return os.environ.get("CI", "").strip().lower() in {"true", "1", "yes"}


_STATUS = {}


def libreoffice_status(probe_folder=None):
    """(path of soffice, None) when LibreOffice converts a one-cell book, else (None, why not).

    The probe runs once per test run (per ``TAILSTOP_SOFFICE`` value); pass a
    folder to probe afresh there.
    """
    key = os.environ.get(SOFFICE_VARIABLE)
    if probe_folder is None and key in _STATUS:
        return _STATUS[key]
    soffice = find_soffice()
    if soffice is None:
        where = (f"{SOFFICE_VARIABLE}={key!r} names no program" if key is not None
                 else "no soffice or libreoffice on PATH or in the usual folders")
        status = (None, f"LibreOffice is not installed ({where}); {INSTALL_HINT}")
    else:
        status = _probe(soffice, probe_folder)
    if probe_folder is None:
        _STATUS[key] = status
    return status


def _probe(soffice, folder):
    with tempfile.TemporaryDirectory(prefix="tailstop-lo-probe-") as scratch:
        folder = Path(folder) if folder is not None else Path(scratch)
        folder.mkdir(parents=True, exist_ok=True)
        book = openpyxl.Workbook()
        book.active["A1"] = 1
        book.save(folder / "probe.xlsx")
        try:
            converted = convert_with_libreoffice(folder / "probe.xlsx", folder / "probe-out")
            value = openpyxl.load_workbook(converted).active["A1"].value
        except (LibreOfficeFailed, OSError) as problem:
            return None, f"{soffice} is installed but the probe conversion of a one-cell book failed: {problem}"
        except Exception as problem:  # noqa: BLE001 - a damaged converted file is a failed probe too
            return None, (f"{soffice} is installed but its probe conversion is unreadable: "
                          f"{type(problem).__name__}: {problem}")
        if value != 1:
            return None, f"{soffice} is installed but its probe conversion shows {value!r} instead of 1"
    return soffice, None


def require_libreoffice(probe_folder=None):
    """The soffice path; otherwise skip saying why, or fail saying why when ``CI=true``."""
    soffice, problem = libreoffice_status(probe_folder)
    if soffice is not None:
        return soffice
    if in_ci():
        pytest.fail(f"CI=true and LibreOffice cannot run these tests: {problem}", pytrace=False)
    pytest.skip(problem)


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
    try:
        process = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True,
                                   stdin=subprocess.DEVNULL, start_new_session=True)
    except OSError as problem:  # not executable, not a program
        raise LibreOfficeFailed(f"{command[0]} could not be started: {problem}") from None
    try:
        output, _ = process.communicate(timeout=timeout)
    except subprocess.TimeoutExpired:
        os.killpg(process.pid, signal.SIGKILL)
        process.communicate()
        raise LibreOfficeFailed(f"LibreOffice did not finish within {timeout} s") from None
    return output
