"""A formula filled down a column over growing ranges (``$B$2:B2``, ``$B$2:B3``, …), in one pass.

A live log fills ``=STOP_DECISION($B$2:B<row>, …)`` (or ``TAIL_PROB_EST``,
``UNITS_NEEDED_NOW``, …) down beside the lifetimes. Evaluated cell by cell,
every row reads every cell above it again. ``filled_down`` gives the value
of every such cell from one reading of the column: the column is read once
(``cells.ColumnPrefixes``) and each cell's formula gets its rows already
read; ``STOP_DECISION`` takes its whole column from ``STOP_DECISION_COLUMN``
at once. The values are exactly those of the formula called on each range
(the tests compare them cell by cell).
"""
from __future__ import annotations

from . import cells
from .formula import FORMULAS

__all__ = ["filled_down", "takes_a_log_first"]


def takes_a_log_first(name) -> bool:
    """True for a formula whose first argument is a range and whose result is one cell."""
    function = FORMULAS.get(name)
    spec = getattr(function, "tailstop_spec", None)
    if getattr(spec, "returns", None) not in ("number", "text"):
        return False
    first = next(iter(spec.argument_help), None)
    return first is not None and first in spec.ranges


def filled_down(name, rows, ends, arguments):
    """What ``FORMULAS[name](rows[:end], *arguments)`` returns, for every end in ``ends``.

    Parameters
    ----------
    name : str
        A formula for which ``takes_a_log_first(name)`` holds.
    rows : list of list
        The column as a spreadsheet passes it, one cell a row, down to the
        largest end.
    ends : sequence of int
        Rows of each cell's range, counted from the top of ``rows`` (>= 1).
    arguments : tuple
        The formula's other arguments, as a spreadsheet passes them.

    Returns
    -------
    list
        One cell value per end.
    """
    function = FORMULAS[name]
    whole = _WHOLE_COLUMN.get(name)
    if whole is not None:
        values = whole(rows, ends, arguments)
        if values is not None:
            return values
    values = [None] * len(ends)
    first_argument = next(iter(function.tailstop_spec.argument_help))
    for index, prefix in cells.ColumnPrefixes(rows, first_argument).prefixes(list(ends)):
        values[index] = function(prefix, *arguments)
    return values


def _stop_decisions(rows, ends, arguments):
    """STOP_DECISION filled down, from one STOP_DECISION_COLUMN over the whole column.

    Below the column's last filled row every range ends in blank rows: the
    decision there is blank, or the column's ``#TAILSTOP!`` text when a cell
    above cannot be read. None (cell by cell instead) when the column
    answers with a single text (an argument the formula refuses).
    """
    column = FORMULAS["STOP_DECISION_COLUMN"](rows, *arguments)
    if isinstance(column, str):
        return None
    labels = [row[0] for row in column]
    below = labels[-1] if labels[-1].startswith(cells.ERROR_PREFIX) else ""
    return [labels[end - 1] if end <= len(labels) else below for end in ends]


_WHOLE_COLUMN = {"STOP_DECISION": _stop_decisions}
