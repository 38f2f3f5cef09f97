"""The spreadsheet contract of a tailstop formula, kept in one declarative place.

``@formula(...)`` records a ``FormulaSpec`` (argument help, which arguments are
ranges) on the function, wraps the body so that nothing but a number, an
array or a ``#TAILSTOP!`` text ever reaches a cell, and applies xlwings'
decorators from that spec. On Windows and macOS those decorators register the
formula with Excel; on Linux they are inert. Because the decoration is
derived from the spec by ``apply_xlwings``, a test can apply xlwings' real
Windows decorators (``xlwings.udfs``) to the same spec and inspect the
registration and the VBA wrapper Excel would get.
"""
from __future__ import annotations

import contextlib
import functools
import gc
import inspect
import math
from dataclasses import dataclass, field

import numpy as np
try:
    import xlwings as xw
except ImportError:  # LibreOffice's Python runs the formulas without xlwings
    xw = None

from .cells import ERROR_PREFIX, InputError

__all__ = ["FormulaSpec", "formula", "apply_xlwings", "cell_column", "to_cells", "FORMULAS", "CATEGORY"]

CATEGORY = "tailstop"

# name -> the cell-safe function, in the order the formulas are defined
FORMULAS: dict = {}


@dataclass(frozen=True)
class FormulaSpec:
    """What Excel needs to know about a formula besides its Python signature."""

    name: str
    summary: str
    argument_help: dict
    ranges: tuple = ()
    returns: str = "number"
    extra: dict = field(default_factory=dict)


def apply_xlwings(function, spec: FormulaSpec, func=None, arg=None):
    """Apply xlwings' ``func``/``arg`` decorators as the spec says; returns the function."""
    if xw is None and func is None:
        return function
    func = func or xw.func
    arg = arg or xw.arg
    decorated = function
    for name, help_text in spec.argument_help.items():
        options = {"ndim": 2} if name in spec.ranges else {}
        decorated = arg(name, doc=help_text, **options)(decorated)
    # func last, as @xw.func stands on top in xlwings' own examples: every
    # xlwings.udfs.xlarg call re-runs xlfunc and would reset the category.
    return func(category=CATEGORY)(decorated)


def formula(*, ranges=(), returns="number", **argument_help):
    """Declare a spreadsheet formula.

    Parameters
    ----------
    ranges : tuple of str
        Arguments that take a range (passed as 2-D lists).
    returns : str
        'number', 'text', 'row' (1×n), 'column' (n×1) or 'table'.
    **argument_help
        One short help text per argument, shown by the spreadsheet.
    """

    def declare(body):
        parameters = list(inspect.signature(body).parameters)
        missing = [p for p in parameters if p not in argument_help]
        if missing or set(argument_help) - set(parameters):
            raise TypeError(f"{body.__name__}: help texts must match the arguments exactly (missing {missing})")
        summary = (body.__doc__ or "").strip().splitlines()[0] if body.__doc__ else ""
        if not summary:
            raise TypeError(f"{body.__name__}: a formula needs a one-line docstring")
        spec = FormulaSpec(
            name=body.__name__,
            summary=summary,
            argument_help={p: argument_help[p] for p in parameters},
            ranges=tuple(ranges),
            returns=returns,
        )

        signature = inspect.signature(body)

        @functools.wraps(body)
        def cell_safe(*args, **keywords):
            if keywords:  # a Python caller: a wrong name is a TypeError, as for any Python function
                signature.bind(*args, **keywords)
            try:
                return to_cells(body(*args, **keywords))
            except InputError as problem:
                return f"{ERROR_PREFIX} {problem}"
            except (ValueError, ArithmeticError) as problem:
                return f"{ERROR_PREFIX} {problem}"
            except MemoryError:
                return f"{ERROR_PREFIX} not enough memory for this request; use a smaller range or fewer replications"
            except Exception as problem:  # noqa: BLE001 - no traceback may reach a cell
                return f"{ERROR_PREFIX} internal error ({type(problem).__name__}); please report it with the inputs"

        cell_safe.__doc__ = summary
        cell_safe.tailstop_spec = spec
        cell_safe.tailstop_body = body
        registered = apply_xlwings(cell_safe, spec)
        FORMULAS[spec.name] = registered
        return registered

    return declare


def to_cells(result):
    """numpy scalars and arrays to plain Python values a cell can hold.

    A column built by ``cell_column`` is made of such values already and is
    handed over as it is: it was checked once, as a whole, when it was built.
    """
    if type(result) is _CellColumn:
        return list(result)
    if isinstance(result, str):
        return result
    if isinstance(result, np.ndarray):
        result = _array_values(result)
    if isinstance(result, (list, tuple)):
        return [to_cells(item) if isinstance(item, (list, tuple, np.ndarray)) else _cell_value(item) for item in result]
    return _cell_value(result)


_NOT_FINITE = "the result is not a finite number for these inputs"


def _array_values(array):
    """``array.tolist()``, a float array checked for finite numbers at once rather than cell by cell."""
    if array.dtype.kind == "f" and not np.isfinite(array).all():
        raise ValueError(_NOT_FINITE)
    return array.tolist()


def _cell_value(value):
    if value is None or isinstance(value, (str, bool)):
        return value
    if isinstance(value, (int, np.integer)):
        return int(value)
    value = float(value)
    if not math.isfinite(value):
        raise ValueError(_NOT_FINITE)
    return value


class _CellColumn(list):
    """Rows of one plain cell value each, made by ``cell_column``; ``to_cells`` takes it as it is."""


def cell_column(values, choices=None):
    """The result of a formula that returns a column: one row per value.

    The same rows as ``to_cells([[value] for value in values])``, made in one
    numpy pass instead of cell by cell (a formula over a whole-column
    reference returns up to 1,048,576 rows).

    Parameters
    ----------
    values : ndarray, 1-D
        Text (an object array holding only ``str``), numbers or booleans; with
        ``choices``, whole numbers indexing into it.
    choices : sequence, optional
        The few distinct values of the column (checked once each), as for
        a column of states.

    Raises
    ------
    ValueError
        A number that is not finite, with the message ``to_cells`` gives.
    TypeError
        Values of any other kind.
    """
    values = np.asarray(values)
    if values.ndim != 1:
        raise TypeError("cell_column takes one value per row")
    if choices is not None:
        if values.dtype.kind not in "iu":
            raise TypeError("cell_column takes whole numbers indexing into its choices")
        options = np.empty(len(choices), dtype=object)
        options[:] = list(choices)
        _check_column_values(options)
        values = options[values]
    else:
        _check_column_values(values)
    with _collector_paused():
        return _CellColumn(values.reshape(-1, 1).tolist())


def _check_column_values(values):
    if values.dtype == object:
        if not set(map(type, values.tolist())) <= {str}:
            raise TypeError("cell_column takes text, numbers or booleans")
    elif values.dtype.kind == "f":
        if not np.isfinite(values).all():
            raise ValueError(_NOT_FINITE)
    elif values.dtype.kind not in "biuU":
        raise TypeError(f"cell_column cannot take values of type {values.dtype}")


@contextlib.contextmanager
def _collector_paused():
    """Make a million small lists without the cyclic garbage collector walking them.

    None of them can be part of a reference cycle. With the collector running
    it walks the new lists (and those of the input) several times while they
    are made, and all of them once more soon after. ``freeze`` then
    ``unfreeze`` moves every tracked object to the oldest generation in
    constant time, so the new lists wait for the next full collection instead.
    That is skipped when the host process keeps objects frozen itself
    (``unfreeze`` would release those too).
    """
    enabled = gc.isenabled()
    host_froze = gc.get_freeze_count() > 0
    gc.disable()
    try:
        yield
    finally:
        if not host_froze:
            gc.freeze()
            gc.unfreeze()
        if enabled:
            gc.enable()
