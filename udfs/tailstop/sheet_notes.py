"""Formula: the warnings that apply to an estimate, one short line each.

A pass-fail log may mark survivors as the estimate formulas read them
(``1500+``: taken off test at or beyond the threshold without failing); they
count as beyond the threshold.

The formula has no accuracy or confidence argument, so it lists the model
and data warnings only. Whether the requested accuracy needs more units than
the log holds is what the decision column says (CONTINUE on the last row);
the headless tools, which know the accuracy and confidence, print that
warning too (``notes.method_notes(..., accuracy=, confidence=)``).
"""
from __future__ import annotations

from . import cells
from .formula import formula
from .notes import method_notes, note_lines
from .sheet_estimate import HELP, clean_method_and_shape


@formula(
    ranges=("observations",), returns="column", observations=HELP["observations"], threshold=HELP["threshold"],
    method=HELP["method"], shape=HELP["known_shape"],
)
def TAIL_METHOD_NOTES(observations, threshold, method=None, shape=None):
    """Warnings that apply to the estimate from this log and method, one line each (a column)."""
    name, shape_value = clean_method_and_shape(method, shape)
    c = cells.positive(threshold, "threshold")
    log = cells.read_log_cells(observations)
    if not log.problem:
        log = log.for_method(name, c)
    if log.problem:
        raise cells.InputError(log.problem)
    if log.values.size < 2:
        raise cells.InputError(f"observations: needs at least 2 lifetimes (found {log.values.size})")
    survivors = log.survivors if log.survivors.any() else None
    return [[line] for line in note_lines(method_notes(log.values, c, name, shape_value, survivors=survivors))]
