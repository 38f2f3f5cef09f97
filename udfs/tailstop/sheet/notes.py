"""Formula: the warnings that apply to an estimate, one short line each.

A log may mark suspended units as the estimate formulas read them
(``1500+``: not failed when last seen at 1500). A log with too few failures
for the method gets the note saying how many it needs, not an error.

The formula has no accuracy or confidence argument, so it lists the model
and data warnings only. Whether the requested accuracy needs more units than
the log holds is what the decision column says (CONTINUE on the last row,
with UNITS_NEEDED_NOW saying by how much); code that knows the accuracy and
confidence, such as the headless tools, gets that warning with the others
from ``notes.method_notes(..., accuracy=, confidence=)``.
"""
from __future__ import annotations

from ..core.notes import method_notes, note_lines
from .estimate import HELP, clean_log_arguments
from .formula import formula


@formula(
    ranges=("observations",), returns="column", observations=HELP["observations"], threshold=HELP["threshold"],
    method=HELP["method"], shape=HELP["known_shape"], model=HELP["model"],
)
def TAIL_METHOD_NOTES(observations, threshold, method=None, shape=None, model=None):
    """Warnings that apply to the estimate from this log and method, one line each (a column)."""
    log = clean_log_arguments(observations, threshold, method, shape, model)
    notes = method_notes(log.values, log.threshold, log.method, log.shape, survivors=log.survivors, model=log.model)
    return [[line] for line in note_lines(notes)]
