"""Shared fixtures: life-test logs written with openpyxl and read back as a spreadsheet passes them."""
from __future__ import annotations

import numpy as np
import openpyxl
import pytest

from libreoffice import require_libreoffice


def range_values(path, sheet, cell_range):
    """Read a range the way a spreadsheet hands it to a formula: a 2-D list, None for blanks."""
    book = openpyxl.load_workbook(path, data_only=True)
    return [[cell.value for cell in row] for row in book[sheet][cell_range]]


def write_log(path, lifetimes, *, header="Hours to failure", extra_rows=()):
    """A life-test log: column A the unit number, column B the lifetime (None leaves a blank)."""
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "Log"
    sheet.append(["Unit", header])
    for unit, value in enumerate(lifetimes, start=1):
        sheet.append([unit, value])
    for row in extra_rows:
        sheet.append(list(row))
    book.save(path)
    return path


@pytest.fixture
def fixture_log(tmp_path):
    """An invented bench log of 60 units (seeded gamma draws, rounded like a log), with one blank row."""
    rng = np.random.default_rng(7)
    values = [float(v) for v in np.round(rng.gamma(2.2, 450.0, size=60), 1)]
    values[30] = None  # a unit whose result was never entered
    path = write_log(tmp_path / "log.xlsx", values)
    return path, values


@pytest.fixture(scope="session")
def soffice():
    """The LibreOffice program for the tests that open books in it.

    Skips, saying why, when LibreOffice is missing or its probe conversion fails;
    with CI=true that is a failure with the same message (tests/libreoffice.py).
    """
    return require_libreoffice()


@pytest.fixture(autouse=True, scope="session")
def tuning_cache_in_a_temporary_folder(tmp_path_factory):
    """pass-fail-exact keeps its tunings in a cache folder: the tests use one of their own, never the user's."""
    folder = tmp_path_factory.mktemp("tuning-cache")
    patch = pytest.MonkeyPatch()
    patch.setenv("TAILSTOP_CACHE_DIR", str(folder))
    yield folder
    patch.undo()
