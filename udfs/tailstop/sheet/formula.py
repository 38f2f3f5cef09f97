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

import functools
import inspect
import math
from dataclasses import dataclass, field

import numpy as np
try:
    import xlwings as xw
except ImportError:  # LibreOffice's Python runs the formulas without xlwings
    xw = None

from .cells import ERROR_PREFIX, InputError

__all__ = ["FormulaSpec", "formula", "apply_xlwings", "FORMULAS", "CATEGORY"]

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

        @functools.wraps(body)
        def cell_safe(*args):
            try:
                return to_cells(body(*args))
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
    """numpy scalars and arrays to plain Python values a cell can hold."""
    if isinstance(result, str):
        return result
    if isinstance(result, np.ndarray):
        result = result.tolist()
    if isinstance(result, (list, tuple)):
        return [to_cells(item) if isinstance(item, (list, tuple, np.ndarray)) else _cell_value(item) for item in result]
    return _cell_value(result)


def _cell_value(value):
    if value is None or isinstance(value, (str, bool)):
        return value
    if isinstance(value, (int, np.integer)):
        return int(value)
    value = float(value)
    if not math.isfinite(value):
        raise ValueError("the result is not a finite number for these inputs")
    return value
