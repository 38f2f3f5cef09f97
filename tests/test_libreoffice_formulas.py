"""tailstop's formulas computed live by LibreOffice Calc with the extension (headless).

One book calls every formula (scalars; ranges with blanks and ``1500+``
survivors; array results; bad input). ``tailstop recalc --engine libreoffice``
lets LibreOffice compute it; every cell must equal the same formula called in
Python. A second LibreOffice run reads what the Function Wizard lists and
saves a book as .xlsx, to pin down the spelling Calc stores. Outside CI the
tests skip when LibreOffice or its Python ``uno`` module is missing; in CI
(``CI=true``) they fail instead, as .ci/run installs both.
"""
from __future__ import annotations

import inspect
import json
import math
import os
import shutil
import subprocess
import tempfile
import zipfile
from pathlib import Path

import openpyxl
import pytest
from openpyxl.utils import get_column_letter
from openpyxl.worksheet.formula import ArrayFormula

from libreoffice import in_ci
from tailstop.commands import main
from tailstop.extension.build import build_extension
from tailstop.extension.libreoffice import LibreOfficeError, Sandbox, find_program, is_root, office_environment
from tailstop.sheet import FORMULAS

SESSION_SCRIPT = Path(__file__).with_name("libreoffice_session.py")

# Invented bench data (scenario of our own): a log with blanks and survivors, failure times, a tiny sample.
LOG = [310.0, None, "1500+", 720.0, 150.0, "1500+", 980.0, None, 420.0, 1330.0, 260.0, 870.0]
FAILURES = [310.0, 720.0, 150.0, 980.0, 420.0, 1330.0, 260.0, 870.0, 505.0, 640.0]
PAIR = [410.0, 390.0]
RANGES = {"LOG": ("A", LOG), "FAILURES": ("B", FAILURES), "PAIR": ("C", PAIR), "BLANK": ("D", [None])}

# Every formula, with good and bad arguments; range names stand for the columns above.
CASES = {
    "TAIL_PROB": [[1000, 2, 400], [-1, 2, 400], ["many", 2, 400], [1000, 2, 400, "weibull"]],
    "TAIL_PROB_EST": [["LOG", 500], ["LOG", 500, "known-shape", 1.5], ["LOG", 500, "fitted-shape"]],
    "TAIL_PROB_BOUNDS": [["LOG", 500, 2], ["LOG", 500, 0.5]],
    "TAIL_ODDS_BOUNDS": [["LOG", 500, 2, "known-shape", 1.5]],
    "UNITS_REQUIRED": [[500, 1.5, 400, 2, 0.9], [500, 1.5, 400, 2, 0.9, "fitted-shape"]],
    "UNITS_REQUIRED_FROM_P": [[0.3, 1.5, 0.95], [1.3, 1.5, 0.95]],
    "ACCURACY_FOR_UNITS": [[40, 500, 1.5, 400, 0.9], [40, 500, 1.5, 400, 0.9, "known-shape"]],
    "GAMMA_FIT_SHAPE": [["FAILURES"]],
    "GAMMA_FIT_SCALE": [["FAILURES"]],
    "GAMMA_FIT_PVALUE": [["FAILURES"], ["PAIR"]],
    "FIT_SHAPE": [["FAILURES", "weibull"]],
    "FIT_SCALE": [["FAILURES", "lognormal"]],
    "FIT_PVALUE": [["FAILURES", "weibull"], ["FAILURES", "circle"]],
    "FIT_COMPARE": [["FAILURES"]],
    "STOP_DECISION": [["LOG", 500, 3, 0.9, 4], ["LOG", 500, 3, 0.9, 1],
                      ["FAILURES", 500, 2, 0.9, 4, "known-shape", 1.8, 1, "weibull"],
                      # settings cells left blank, which Calc passes as 0 and Excel as nothing
                      ["LOG", 500, 3, 0.9, 4, "BLANK", "BLANK", "BLANK", "BLANK"]],
    "STOP_DECISION_COLUMN": [["LOG", 500, 3, 0.9, 4]],
    "UNITS_NEEDED_NOW": [["LOG", 500, 2, 0.9]],
    "TWO_STAGE_UNITS": [["LOG", 500, 2, 0.9]],
    "TAIL_METHOD_NOTES": [["LOG", 500, "known-shape", 1.5]],
    "PLAN_EXPECTED_UNITS": [[500, 1.5, 400, 3, 0.9, 5, "pass-fail"]],
    "PLAN_COVERAGE": [[500, 1.5, 400, 3, 0.9, 5, "known-shape", 200, 7]],
    "PLAN_SUMMARY": [[500, 1.5, 400, 3, 0.9, 5]],
    # p = 0.31, not 0.3: at p = 0.3 and accuracy 3 the true p lies exactly on an interval end
    # (9 of 16 beyond), where the exact coverage depends on the last bit of a logarithm
    "PLAN_SUMMARY_FROM_P": [[0.31, 3, 0.9, 5]],
}
GRID = ("row", "column", "table")
# LibreOffice keeps 15 significant digits when it saves
DIGITS = 1e-14
# Maximum-likelihood fits iterate to a relative step of 1e-13 (core/models/gamma/fit.py), and
# LibreOffice's Python runs the system's numpy and scipy (Debian 12: 1.24 and 1.10), whose special
# functions differ from the newest in the last bits; a fitted figure may move a little more.
FITTED = 1e-10


def tolerance(name, arguments):
    fitted = name.startswith(("FIT_", "GAMMA_FIT_")) or "fitted-shape" in arguments
    return FITTED if fitted else DIGITS


def optional_arguments(function):
    """The arguments a formula may leave out (default None in its Python signature)."""
    parameters = inspect.signature(function.tailstop_body).parameters.values()
    return {parameter.name for parameter in parameters if parameter.default is None}


def libreoffice_python():
    """A Python that imports LibreOffice's uno module (Debian: the system python3 with python3-uno)."""
    for candidate in ("/usr/bin/python3", "/usr/local/bin/python3"):
        if Path(candidate).exists():
            done = subprocess.run([candidate, "-c", "import uno"], capture_output=True, timeout=60)
            if done.returncode == 0:
                return candidate
    return None


@pytest.fixture(scope="module")
def office():
    """soffice, unopkg and LibreOffice's Python; a skip outside CI when missing, a failure in CI."""
    try:
        programs = {name: find_program(name) for name in ("soffice", "unopkg")}
    except LibreOfficeError as missing:
        programs = None
        reason = str(missing)
    python = libreoffice_python()
    if programs is None or python is None:
        reason = reason if programs is None else "no Python with LibreOffice's uno module (install python3-uno)"
        if in_ci():
            pytest.fail(f"CI=true and LibreOffice cannot run the live formula tests: {reason}", pytrace=False)
        pytest.skip(reason)
    return {**programs, "python": python}


def reference(name):
    column, values = RANGES[name]
    return f"Data!${column}$1" if name == "BLANK" else f"Data!${column}$1:${column}${len(values)}"


def formula_text(name, arguments):
    def one(argument):
        if isinstance(argument, str):
            return reference(argument) if argument in RANGES else f'"{argument}"'
        return repr(argument)

    return f"={name}({', '.join(one(argument) for argument in arguments)})"


def python_value(name, arguments):
    """The formula called in Python with the arguments as xlwings passes them, as a grid of cells."""
    def cells_of(argument):
        if argument == "BLANK":
            return None  # an empty cell, referenced on its own
        if isinstance(argument, str) and argument in RANGES:
            return [[value] for value in RANGES[argument][1]]
        return float(argument) if isinstance(argument, (int, float)) else argument

    cells = [cells_of(argument) for argument in arguments]
    value = FORMULAS[name](*cells)
    if not isinstance(value, list):
        return [[value]]
    if FORMULAS[name].tailstop_spec.returns == "row" and not isinstance(value[0], list):
        return [value]
    return [row if isinstance(row, list) else [row] for row in value]


def case_book(path):
    """The book of every case; returns [(name, arguments, top-left row, expected grid)]."""
    book = openpyxl.Workbook()
    data = book.active
    data.title = "Data"
    for column, values in RANGES.values():
        for row, value in enumerate(values, start=1):
            if value is not None:
                data[f"{column}{row}"] = value
    sheet = book.create_sheet("Cases")
    cases, row = [], 1
    for name, calls in CASES.items():
        for arguments in calls:
            expected = python_value(name, arguments)
            text = formula_text(name, arguments)
            if FORMULAS[name].tailstop_spec.returns in GRID:
                corner = get_column_letter(1 + len(expected[0]))
                sheet[f"B{row}"] = ArrayFormula(f"B{row}:{corner}{row + len(expected) - 1}", text)
            else:
                sheet[f"B{row}"] = text
            sheet[f"A{row}"] = name
            cases.append((name, arguments, row, expected))
            row += len(expected) + 1
    book.save(path)
    return cases


def same(shown, expected, rel_tol=DIGITS):
    if expected is None or expected == "":
        return shown in (None, "")
    if isinstance(expected, (int, float)) and not isinstance(expected, bool):
        # tolerance: DIGITS (15 significant digits LibreOffice keeps); abs 1e-300 lets a 0 equal a subnormal
        return isinstance(shown, (int, float)) and math.isclose(shown, expected, rel_tol=rel_tol, abs_tol=1e-300)
    return shown == expected


@pytest.fixture(scope="module")
def computed(office, tmp_path_factory):
    folder = tmp_path_factory.mktemp("lo-cases")
    cases = case_book(folder / "cases.xlsx")
    assert main(["recalc", str(folder / "cases.xlsx"), "--engine", "libreoffice", "--out",
                 str(folder / "computed.xlsx")]) == 0
    return cases, openpyxl.load_workbook(folder / "computed.xlsx", data_only=True)["Cases"], \
        openpyxl.load_workbook(folder / "computed.xlsx")["Cases"]


def test_the_cases_call_every_formula():
    assert set(CASES) == set(FORMULAS), "add the new formula to CASES"


def test_every_cell_computed_by_libreoffice_equals_python(computed):
    cases, values, _ = computed
    checked, wrong = 0, []
    for name, arguments, row, expected in cases:
        for down, expected_row in enumerate(expected):
            for across, value in enumerate(expected_row):
                coordinate = f"{get_column_letter(2 + across)}{row + down}"
                shown = values[coordinate].value
                checked += 1
                # check value: the same formula called directly in Python (tailstop.sheet), which the
                # add-in must reproduce cell for cell, messages included
                if not same(shown, value, tolerance(name, arguments)):
                    wrong.append((name, arguments, coordinate, value, shown))
    assert not wrong, wrong[:5]
    assert checked >= 80


def test_a_value_known_independently(computed):
    _, values, _ = computed
    # check value: Erlang identity Q(2, t) = e^{-t} (1 + t) (Johnson, Kotz & Balakrishnan, vol. 1), t = 2.5
    # tolerance 1e-14: LibreOffice keeps 15 significant digits when it saves
    assert math.isclose(values["B1"].value, math.exp(-2.5) * 3.5, rel_tol=1e-14)
    # check value: Weibull survival exp(-(c/eta)^beta) in closed form, c = 1000, beta = 2, eta = 400
    # tolerance 1e-14: as above
    assert math.isclose(values["B7"].value, math.exp(-6.25), rel_tol=1e-14)


def test_bad_input_shows_the_formula_message(computed):
    _, values, _ = computed
    assert values["B3"].value.startswith("#TAILSTOP! threshold")
    assert values["B5"].value.startswith("#TAILSTOP!") and "many" in values["B5"].value


def test_the_result_keeps_the_books_own_spelling(computed):
    _, _, formulas = computed
    assert formulas["B1"].value == "=TAIL_PROB(1000, 2, 400)"


@pytest.fixture(scope="module")
def session(office, tmp_path_factory):
    """One LibreOffice run: the Function Wizard's list, and a book with both spellings saved as .xlsx."""
    folder = tmp_path_factory.mktemp("lo-session")
    sandbox = Sandbox(folder / "sandbox")
    sandbox.install(build_extension(folder))
    book = openpyxl.Workbook()
    book.active["A1"] = "=TAIL_PROB(1000, 2, 400)"
    book.active["A2"] = "=TAILSTOP.TAIL_PROB(1000, 2, 400)"
    book.save(folder / "spellings.xlsx")
    done = subprocess.run([office["python"], str(SESSION_SCRIPT), office["soffice"], str(folder / "spellings.xlsx"),
                           str(folder / "saved.xlsx"), *sandbox.office_arguments()],
                          capture_output=True, text=True, timeout=300, env=office_environment())
    assert done.returncode == 0, done.stderr[-2000:]
    return json.loads(done.stdout.strip().splitlines()[-1]), folder / "saved.xlsx"


def test_the_function_wizard_shows_the_specs(session):
    functions, _ = session
    for name, function in FORMULAS.items():
        spec = function.tailstop_spec
        listed = functions[name]
        assert listed["description"] == spec.summary
        optional = optional_arguments(function)
        assert listed["arguments"] == [[argument, help_text, argument in optional]
                                       for argument, help_text in spec.argument_help.items()]
    # check value: Calc's function groups, Add-In is ID 11 (LibreOffice source, sc/source/core/tool/addincol.cxx,
    # lcl_GetCategory: a category name Calc does not know goes to the Add-In group)
    assert {functions[name]["category"] for name in FORMULAS} == {11}


def test_calc_stores_the_programmatic_name_and_refuses_the_short_one(session):
    _, saved = session
    with zipfile.ZipFile(saved) as archive:
        sheet = archive.read("xl/worksheets/sheet1.xml").decode()
    assert "<f aca=\"false\">TAILSTOP.TAIL_PROB(1000, 2, 400)</f>" in sheet
    values = openpyxl.load_workbook(saved, data_only=True).active
    assert values["A1"].value == "#NAME?"
    # check value: Erlang identity Q(2, t) = e^{-t} (1 + t), t = 2.5
    # tolerance 1e-14: LibreOffice keeps 15 significant digits when it saves
    assert math.isclose(values["A2"].value, math.exp(-2.5) * 3.5, rel_tol=1e-14)


def test_install_for_an_ordinary_user_with_no_profile_yet(office, tmp_path_factory):
    """`tailstop extension install` run by a user who never started LibreOffice, then Calc computes with it."""
    if not is_root() or shutil.which("setpriv") is None:
        pytest.skip("needs root and setpriv to act as an ordinary user (CI has both)")
    import tailstop

    home = Path(tempfile.mkdtemp(prefix="tailstop-user-"))  # under /tmp, so the user can reach it
    try:
        shutil.copytree(Path(tailstop.__file__).parent, home / "udfs" / "tailstop",
                        ignore=shutil.ignore_patterns("__pycache__"))
        book = openpyxl.Workbook()
        book.active["A1"] = "=TAILSTOP.TAIL_PROB(1000, 2, 400)"
        book.save(home / "book.xlsx")
        (home / "out").mkdir()
        subprocess.run(["chown", "-R", "nobody", str(home)], check=True)
        os.chmod(home, 0o755)
        as_user = ["setpriv", "--reuid=nobody", "--regid=nogroup", "--clear-groups", "env", f"HOME={home}",
                   "PATH=/usr/local/bin:/usr/bin:/bin", f"PYTHONPATH={home / 'udfs'}"]
        # the verb alone: LibreOffice's Python has numpy and scipy but not the workbook tools' openpyxl
        verb = ("import argparse, sys; from tailstop.commands import extension; parser = argparse.ArgumentParser(); "
                "extension.add_arguments(parser); sys.exit(extension.run(parser.parse_args(['install'])))")
        installed = subprocess.run([*as_user, office["python"], "-c", verb],
                                   capture_output=True, text=True, timeout=300, cwd=home)
        assert installed.returncode == 0, installed.stderr[-2000:]
        assert "installed tailstop.oxt for this user" in installed.stdout
        subprocess.run([*as_user, office["soffice"], "--headless", "--norestore", "--convert-to", "xlsx",
                        "--outdir", str(home / "out"), str(home / "book.xlsx")],
                       capture_output=True, timeout=300, cwd=home, check=True)
        value = openpyxl.load_workbook(home / "out" / "book.xlsx", data_only=True).active["A1"].value
        # check value: Erlang identity Q(2, t) = e^{-t} (1 + t), t = 2.5
        # tolerance 1e-14: LibreOffice keeps 15 significant digits when it saves
        assert math.isclose(value, math.exp(-2.5) * 3.5, rel_tol=1e-14)
    finally:
        shutil.rmtree(home, ignore_errors=True)


def test_without_numpy_in_libreoffice_every_formula_says_what_to_install(office, tmp_path):
    """An extension whose bundled folder shadows numpy with one that cannot be imported, as if it were missing."""
    oxt = build_extension(tmp_path / "oxt")
    with zipfile.ZipFile(oxt, "a") as archive:  # pythonpath/ comes first on LibreOffice's sys.path
        archive.writestr("pythonpath/numpy/__init__.py",
                         "raise ModuleNotFoundError(\"No module named 'numpy'\", name='numpy')\n")
    sandbox = Sandbox(tmp_path / "sandbox")
    sandbox.install(oxt)
    book = openpyxl.Workbook()
    book.active["A1"] = "=TAILSTOP.TAIL_PROB(1000, 2, 400)"
    book.active["B1"] = ArrayFormula("B1:C2", "=TAILSTOP.PLAN_SUMMARY_FROM_P(0.3, 2, 0.9, 5)")
    book.save(tmp_path / "book.xlsx")
    shown = openpyxl.load_workbook(sandbox.convert(tmp_path / "book.xlsx", tmp_path / "out"), data_only=True).active
    message = shown["A1"].value
    assert message.startswith("#TAILSTOP! LibreOffice's Python") and "cannot import numpy" in message
    assert {shown[cell].value for cell in ("B1", "C1", "B2", "C2")} == {message}
