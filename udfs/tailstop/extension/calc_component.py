"""The tailstop add-in as LibreOffice Calc loads it (copied into the extension).

LibreOffice runs this file in its own Python. The formula list comes from
``formulas.json`` beside it, written from the formula specs when the extension
is built, so the add-in can still name its functions (and say what is missing)
when that Python cannot import numpy or scipy. The formulas themselves are
those of ``tailstop.sheet``, bundled in the extension's ``pythonpath/`` folder.

Calc passes a range, and every required argument, as a tuple of row tuples
(an empty cell as ``""``; a single value as a 1×1 tuple) and an optional
argument as a number, a text or ``None`` when it is left out; an array result
must be a tuple of row tuples. This file only converts between
those and what the formulas take and give, as xlwings would.
"""
import json
import os
import re
import sys

try:  # absent when the file is imported outside LibreOffice, e.g. by tests
    import uno
    import unohelper
except ImportError:  # pragma: no cover - depends on the interpreter
    uno = unohelper = None

ERROR_PREFIX = "#TAILSTOP!"

_HERE = os.path.dirname(os.path.abspath(__file__))
with open(os.path.join(_HERE, "formulas.json"), encoding="utf-8") as _file:
    CATALOGUE = json.load(_file)  # written by tailstop/extension/build.py, the one source of these names
SPECS = {spec["name"]: spec for spec in CATALOGUE["formulas"]}
SERVICES = tuple(CATALOGUE["services"])  # com.sun.star.sheet.AddIn, then the add-in's own service name
GRID_RESULTS = tuple(CATALOGUE["grid_results"])

_formulas = None
_problem = None


def formulas():
    """name -> the cell-safe formula, imported on first use; None when the import failed."""
    global _formulas, _problem
    if _formulas is None and _problem is None:
        _bundled_package_first()
        try:
            from tailstop.sheet import FORMULAS
            _formulas = dict(FORMULAS)
        except ImportError as missing:
            _problem = import_problem(missing)
        except Exception as failure:  # noqa: BLE001 - it must reach the cell as text
            _problem = f"{ERROR_PREFIX} the add-in could not start ({type(failure).__name__}: {failure})"
    return _formulas


def _bundled_package_first():
    """Put the bundled copy of tailstop before any other on sys.path (LibreOffice appends it last)."""
    bundled = os.path.join(_HERE, "pythonpath")
    if bundled in sys.path:
        sys.path.remove(bundled)
    sys.path.insert(0, bundled)


def _missing_module(problem):
    """The name of the module that could not be found.

    LibreOffice's import hook (``uno.py``) replaces a failed ``from x import y``
    by an ImportError of its own whose message only quotes the original one, so
    the message is read when no error down the chain names the module.
    """
    seen, message = set(), str(problem)
    while problem is not None and id(problem) not in seen:
        seen.add(id(problem))
        if isinstance(problem, ModuleNotFoundError) and problem.name:
            return problem.name.split(".")[0]
        problem = problem.__cause__ or problem.__context__
    quoted = re.search(r"No module named '([^'.]+)", message)
    return quoted.group(1) if quoted else None


def import_problem(missing):
    """The one cell text every formula shows when LibreOffice's Python lacks a package."""
    name = _missing_module(missing) or str(missing)
    version = "%d.%d" % sys.version_info[:2]
    return (f"{ERROR_PREFIX} LibreOffice's Python {version} cannot import {name}: install numpy and scipy "
            f"for it (Debian/Ubuntu: apt install python3-numpy python3-scipy; elsewhere see the "
            f"LibreOffice section of tailstop's getting-started guide)")


def to_argument(value, is_range):
    """A Calc argument as xlwings passes it: ranges as lists of row lists, a single value as itself."""
    if isinstance(value, tuple):
        if not is_range and len(value) == 1 and isinstance(value[0], tuple) and len(value[0]) == 1:
            return value[0][0]
        return [list(row) if isinstance(row, tuple) else [row] for row in value]
    if is_range:
        return [[value]]
    return value


def to_result(value, returns):
    """A formula result as Calc takes it: a scalar, or a tuple of row tuples for an array formula."""
    if returns not in GRID_RESULTS:
        if isinstance(value, (list, tuple)):
            return f"{ERROR_PREFIX} internal error (an array where one value was expected)"
        return "" if value is None else value
    if not isinstance(value, (list, tuple)):
        return ((_cell(value),),)
    if value and all(isinstance(row, (list, tuple)) for row in value):
        width = max(len(row) for row in value)
        return tuple(tuple(_cell(item) for item in row) + ("",) * (width - len(row)) for row in value)
    if returns == "row":
        return (tuple(_cell(item) for item in value),)
    return tuple((_cell(item),) for item in value)


def _cell(value):
    return "" if value is None else value


def call_formula(name, arguments):
    """Evaluate one formula for Calc: never raises, always a value Calc can show."""
    spec = SPECS[name]
    table = formulas()
    if table is None:
        return to_result(_problem, spec["returns"])
    try:
        values = [to_argument(value, argument in spec["ranges"])
                  for value, argument in zip(arguments, spec["arguments"])]
        return to_result(_evaluate(table[name], spec, values), spec["returns"])
    except Exception as failure:  # noqa: BLE001 - no traceback may reach a cell
        return to_result(f"{ERROR_PREFIX} internal error ({type(failure).__name__}); please report it with the inputs",
                         spec["returns"])


def _evaluate(function, spec, values):
    """The formula's result; an optional 0 it refuses is taken as an argument left empty.

    Calc passes an empty cell referenced on its own as 0, where Excel passes
    nothing: a settings cell left blank (no shape, no batch size) would end in
    a message such as "check_every must be at least 1 (got 0)". When the
    formula refuses the values and some optional arguments are exactly 0, it
    is asked again with those left out, and that answer is kept unless it is a
    message too. A 0 the formula accepts (a seed of 0) stays a 0.
    """
    result = function(*values)
    if not _is_message(result):
        return result
    zeros = [index for index, argument in enumerate(spec["arguments"])
             if argument in spec["optional"] and type(values[index]) is float and values[index] == 0.0]
    if not zeros:
        return result
    retry = function(*[None if index in zeros else value for index, value in enumerate(values)])
    return result if _is_message(retry) else retry


def _is_message(result):
    return isinstance(result, str) and result.startswith(ERROR_PREFIX)


def _formula_method(name):
    def method(self, *arguments):
        return call_formula(name, arguments)

    method.__name__ = name
    return method


def create_addin(context):
    """The add-in object; its classes are looked up only now, once the type library is loaded."""
    from com.sun.star.lang import Locale, XLocalizable, XServiceInfo, XServiceName
    from com.sun.star.sheet import XAddIn

    interface = uno.getClass(CATALOGUE["interface"])

    class Formulas(unohelper.Base, XAddIn, XServiceName, XServiceInfo, XLocalizable, interface):
        def __init__(self, ctx):
            self.ctx = ctx
            self.locale = Locale("en", "US", "")

        # XAddIn: the texts the Function Wizard shows, straight from the specs
        def getProgrammaticFuntionName(self, display_name):  # sic: the UNO method is spelt so
            return display_name if display_name in SPECS else ""

        def getDisplayFunctionName(self, name):
            return name

        def getFunctionDescription(self, name):
            return SPECS[name]["summary"] if name in SPECS else ""

        def getDisplayArgumentName(self, name, index):
            arguments = SPECS.get(name, {}).get("arguments", [])
            return arguments[index] if 0 <= index < len(arguments) else ""

        def getArgumentDescription(self, name, index):
            arguments = SPECS.get(name, {}).get("arguments", [])
            return SPECS[name]["help"][arguments[index]] if 0 <= index < len(arguments) else ""

        def getProgrammaticCategoryName(self, name):
            return CATALOGUE["category"]

        def getDisplayCategoryName(self, name):
            return CATALOGUE["category"]

        # XServiceName: Calc stores a formula as SERVICE.FUNCTION in .xlsx
        def getServiceName(self):
            return SERVICES[-1]

        # XServiceInfo
        def getImplementationName(self):
            return CATALOGUE["implementation"]

        def supportsService(self, name):
            return name in SERVICES

        def getSupportedServiceNames(self):
            return SERVICES

        # XLocalizable
        def setLocale(self, locale):
            self.locale = locale

        def getLocale(self):
            return self.locale

    for formula_name in SPECS:
        setattr(Formulas, formula_name, _formula_method(formula_name))
    return Formulas(context)


if unohelper is not None:
    g_ImplementationHelper = unohelper.ImplementationHelper()
    g_ImplementationHelper.addImplementation(create_addin, CATALOGUE["implementation"], SERVICES)
