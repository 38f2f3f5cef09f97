"""The add-in contract: what Excel would register for every formula.

xlwings' Windows machinery (``xlwings.udfs``) is plain Python once the
Windows-only modules it imports are replaced by stand-ins. This test applies
xlwings' real Windows decorators to every formula's spec (the same
``apply_xlwings`` the module uses at import time) and generates the VBA
wrapper xlwings would write into a workbook.
"""
from __future__ import annotations

import functools
import importlib
import io
import re
import sys
import types

import pytest

import tailstop.sheet as sheet
from tailstop.sheet.formula import apply_xlwings

# Words VBA reserves (Microsoft VBA language reference, keywords list; common practice to avoid them
# as parameter names since the generated wrapper would not compile).
VBA_RESERVED = {
    "and", "as", "boolean", "byref", "byte", "byval", "call", "case", "class", "const", "currency", "date",
    "decimal", "declare", "dim", "do", "double", "each", "else", "elseif", "empty", "end", "enum", "eqv",
    "erase", "error", "event", "exit", "false", "for", "friend", "function", "get", "global", "gosub", "goto",
    "if", "imp", "implements", "in", "integer", "is", "let", "like", "long", "longlong", "longptr", "loop",
    "lset", "me", "mod", "new", "next", "not", "nothing", "null", "object", "on", "option", "optional", "or",
    "paramarray", "preserve", "private", "property", "public", "raiseevent", "redim", "rem", "resume",
    "return", "rset", "select", "set", "single", "static", "step", "stop", "string", "sub", "then", "to",
    "true", "type", "typeof", "until", "variant", "wend", "while", "with", "withevents", "xor", "debug",
}

# Every documented formula with its arguments in the documented order; optional ones in brackets.
DOCUMENTED = {
    "TAIL_PROB": ["threshold", "shape", "scale", "[model]"],
    "TAIL_PROB_EST": ["observations", "threshold", "[method]", "[shape]", "[model]"],
    "TAIL_PROB_BOUNDS": ["observations", "threshold", "accuracy", "[method]", "[shape]", "[model]"],
    "TAIL_ODDS_BOUNDS": ["observations", "threshold", "accuracy", "[method]", "[shape]", "[model]"],
    "UNITS_REQUIRED": ["threshold", "shape", "scale", "accuracy", "confidence", "[method]", "[model]", "[test_time]"],
    "UNITS_REQUIRED_FROM_P": ["p_guess", "accuracy", "confidence"],
    "ACCURACY_FOR_UNITS": ["units", "threshold", "shape", "scale", "confidence", "[method]", "[model]",
                           "[test_time]"],
    "GAMMA_FIT_SHAPE": ["observations"],
    "GAMMA_FIT_SCALE": ["observations"],
    "GAMMA_FIT_PVALUE": ["observations"],
    "FIT_SHAPE": ["observations", "[model]"],
    "FIT_SCALE": ["observations", "[model]"],
    "FIT_PVALUE": ["observations", "[model]"],
    "FIT_COMPARE": ["observations"],
    "TAIL_METHOD_NOTES": ["observations", "threshold", "[method]", "[shape]", "[model]"],
    "STOP_DECISION": ["observations", "threshold", "accuracy", "confidence", "pilot", "[method]", "[shape]",
                      "[check_every]", "[model]"],
    "STOP_DECISION_COLUMN": ["observations", "threshold", "accuracy", "confidence", "pilot", "[method]", "[shape]",
                             "[check_every]", "[model]"],
    "UNITS_NEEDED_NOW": ["observations", "threshold", "accuracy", "confidence", "[method]", "[shape]", "[model]"],
    "TWO_STAGE_UNITS": ["pilot_observations", "threshold", "accuracy", "confidence", "[method]", "[shape]", "[model]"],
    **{name: ["threshold", "shape", "scale", "accuracy", "confidence", "pilot", "[method]", "[replications]", "[seed]",
              "[model]", "[test_time]"]
       for name in ("PLAN_EXPECTED_UNITS", "PLAN_COVERAGE", "PLAN_SUMMARY")},
    "PLAN_SUMMARY_FROM_P": ["p_guess", "accuracy", "confidence", "pilot"],
}


@pytest.fixture(scope="module")
def windows_udfs():
    """xlwings.udfs imported with stand-ins for pythoncom, pywintypes and win32com.client."""
    stand_ins = {
        "pythoncom": types.ModuleType("pythoncom"),
        "pywintypes": types.ModuleType("pywintypes"),
        "win32com": types.ModuleType("win32com"),
        "win32com.client": types.ModuleType("win32com.client"),
    }
    stand_ins["pythoncom"].CoInitialize = lambda: None
    stand_ins["pywintypes"].com_error = type("com_error", (Exception,), {})
    stand_ins["win32com.client"].Dispatch = lambda *args, **kwargs: None
    stand_ins["win32com"].client = stand_ins["win32com.client"]
    saved = {name: sys.modules.get(name) for name in [*stand_ins, "xlwings.udfs"]}
    sys.modules.update(stand_ins)
    sys.modules.pop("xlwings.udfs", None)
    try:
        yield importlib.import_module("xlwings.udfs")
    finally:
        for name, module in saved.items():
            if module is None:
                sys.modules.pop(name, None)
            else:
                sys.modules[name] = module


@pytest.fixture(scope="module")
def registered(windows_udfs):
    """A module of the formulas decorated by xlwings' Windows decorators, as Excel would import it."""
    module = types.ModuleType("tailstop_sheet_as_excel_sees_it")
    for name, function in sheet.FORMULAS.items():
        @functools.wraps(function)
        def fresh(*args, _function=function):
            return _function(*args)

        fresh.__wrapped__ = function.tailstop_body  # the signature Excel sees is the body's
        setattr(module, name, apply_xlwings(fresh, function.tailstop_spec, windows_udfs.xlfunc, windows_udfs.xlarg))
    return module


@pytest.fixture(scope="module")
def vba(windows_udfs, registered):
    text = io.StringIO()
    workbook = types.SimpleNamespace(Name="LifeTests.xlsm")
    windows_udfs.generate_vba_wrapper("tailstop.sheet", registered, text, workbook)
    return text.getvalue()


def test_every_documented_formula_is_in_the_module():
    assert set(DOCUMENTED) == set(sheet.FORMULAS)
    for name in sheet.FORMULAS:
        assert getattr(sheet, name) is sheet.FORMULAS[name]


@pytest.mark.parametrize("name", sorted(DOCUMENTED))
def test_registration_matches_the_documentation(registered, name):
    info = getattr(registered, name).__xlfunc__
    arguments = [("[%s]" % a["name"]) if "optional" in a else a["name"] for a in info["args"]]
    assert arguments == DOCUMENTED[name]
    assert info["category"] == "tailstop"
    assert info["ret"]["doc"] and len(info["ret"]["doc"]) <= 255
    for argument in info["args"]:
        assert argument["doc"] and not argument["doc"].startswith("Positional argument"), argument["name"]
        assert len(argument["doc"]) <= 255
        assert argument["name"].lower() not in VBA_RESERVED
        if argument["name"] in ("observations", "pilot_observations"):
            assert argument["options"].get("ndim") == 2


def test_every_formula_has_help_and_no_reserved_argument(registered):
    # covers formulas added later too
    for name in sheet.FORMULAS:
        info = getattr(registered, name).__xlfunc__
        assert info["ret"]["doc"].strip()
        for argument in info["args"]:
            assert argument["name"].lower() not in VBA_RESERVED, (name, argument["name"])
            assert not argument["doc"].startswith("Positional argument"), (name, argument["name"])


@pytest.mark.parametrize("name", sorted(DOCUMENTED))
def test_vba_wrapper_declares_the_documented_signature(vba, name):
    match = re.search(rf"^Function {name}\((.*)\)$", vba, flags=re.MULTILINE)
    assert match, f"no VBA wrapper for {name}"
    declared = [p.strip() for p in match.group(1).split(",") if p.strip()]
    expected = [("Optional " + a[1:-1]) if a.startswith("[") else a for a in DOCUMENTED[name]]
    assert declared == expected
    assert f'{name} = XLPy.CallUDF("tailstop.sheet", "{name}"' in vba


def test_decorators_are_inert_here_and_formulas_stay_plain_functions():
    # On Linux xlwings' decorators do nothing: no registration data, calls go straight to the function.
    assert not hasattr(sheet.TAIL_PROB, "__xlfunc__")
    # check value: e^-1 = 0.36787944117144233 (the double nearest, math.exp(-1)); tolerance 1e-15, one rounding
    assert sheet.TAIL_PROB(1.0, 1.0, 1.0) == pytest.approx(0.36787944117144233, rel=1e-15)  # e^-1
