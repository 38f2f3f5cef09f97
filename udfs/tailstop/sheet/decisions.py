"""Formulas: stop/continue decisions for a live test log, the units needed now, the two-stage plan.

The log is one column, one unit per row, in test order.

Suspended units. A unit that had not failed when last seen (still running,
or taken off test) is written as that time followed by ``+`` (``1500+``,
the usual censoring notation of reliability logs), in the lifetime cell
itself: the mark stays with its unit when rows are sorted, copied or filled
down, and needs no second range. Every method reads it as right-censored
(``core/censored.py``); it counts as a unit for the pilot and for n. A log
with too few failures for the method says CONTINUE (PILOT in the pilot).

Blank rows. A blank row (or text of spaces, or "" from a formula) is not a
unit: the decision formulas show an empty cell there, and count units, not
rows, towards the pilot. The column formula ends at the last filled row, so
a whole-column reference costs no more than the log itself.

A cell that cannot be read (text, 0, an error) makes every row from it
downwards show the ``#TAILSTOP!`` text naming it, in both decision formulas,
and leaves the decisions above it as they were. Rows are counted from the
top of the range. A bad argument (pilot, accuracy, …) makes the column
formula return its ``#TAILSTOP!`` text once, in a single cell.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..core.rule import MIN_PILOT
from ..core.sequential import STATE_NAMES, decision_column, two_stage_plan, units_needed_now
from . import cells
from .estimate import HELP, clean_method_and_shape
from .formula import cell_column, formula

# Larger whole numbers are refused as typing errors (a sheet column has 1,048,576 rows).
_LARGEST_COUNT = 10**9

HELP_DECISIONS = {
    "observations": "Column of lifetimes in test order, one unit per row (fill down as $B$2:B2); blank rows are "
                    "skipped; a unit not failed when last seen at 1500 (running or taken off) is written 1500+",
    "pilot_observations": "The pilot's lifetimes, one unit per cell; blank cells are skipped; a unit not failed "
                          "when last seen at 1500 is written 1500+",
    "units_so_far": "Lifetimes of all units so far, one per cell; blank cells are skipped; a unit not failed when "
                    "last seen at 1500 is written 1500+",
    "pilot": "Pilot sample: units tested before the rule is first consulted (a whole number >= 2)",
    "check_every": "Optional: consult the rule only every k-th unit after the pilot, for a rig that tests k at a "
                   "time (default 1)",
}


@dataclass(frozen=True)
class _Request:
    threshold: float
    accuracy: float
    confidence: float
    method: str
    shape: float | None
    model: str


def _request(threshold, accuracy, confidence, method, shape, model=None) -> _Request:
    name, shape_value, model_name = clean_method_and_shape(method, shape, model)
    return _Request(cells.positive(threshold, "threshold"), cells.accuracy(accuracy), cells.confidence(confidence),
                    name, shape_value, model_name)


def _pilot(value) -> int:
    return cells.pilot(value, maximum=_LARGEST_COUNT)


def _check_every(value) -> int:
    if cells.is_missing(value):
        return 1
    return cells.whole_number(value, "check_every", minimum=1, maximum=_LARGEST_COUNT)


def _read_log(observations, request, name="observations", *, single_column) -> cells.LogCells:
    """The log's units, cut at the first cell that cannot be read."""
    return cells.read_log_cells(observations, name, single_column=single_column)


def _survivors(log):
    return log.survivors if log.survivors.any() else None


def _decisions(log, request, pilot, check_every):
    return decision_column(log.values, request.threshold, request.accuracy, request.confidence, pilot,
                           request.method, request.shape, survivors=_survivors(log), check_every=check_every,
                           model=request.model)


_DECISION_HELP = dict(
    observations=HELP_DECISIONS["observations"], threshold=HELP["threshold"], accuracy=HELP["accuracy"],
    confidence=HELP["confidence"], pilot=HELP_DECISIONS["pilot"], method=HELP["method"],
    shape=HELP["known_shape"], check_every=HELP_DECISIONS["check_every"], model=HELP["model"],
)


@formula(ranges=("observations",), returns="text", **_DECISION_HELP)
def STOP_DECISION(observations, threshold, accuracy, confidence, pilot, method=None, shape=None, check_every=None,
                  model=None):
    """Decision after the last row of the range: PILOT, CONTINUE, STOP or PAST STOP (empty on a blank row)."""
    request = _request(threshold, accuracy, confidence, method, shape, model)
    m, k = _pilot(pilot), _check_every(check_every)
    log = _read_log(observations, request, single_column=True)
    if log.problem is not None:
        raise cells.InputError(log.problem)
    if log.n_rows == 0 or log.filled_rows < log.n_rows:
        return ""
    return _decisions(log, request, m, k).decision


@formula(ranges=("observations",), returns="column", **_DECISION_HELP)
def STOP_DECISION_COLUMN(observations, threshold, accuracy, confidence, pilot, method=None, shape=None,
                         check_every=None, model=None):
    """Decisions for every row of the log at once, a column to its last filled row: the same as STOP_DECISION filled down."""
    request = _request(threshold, accuracy, confidence, method, shape, model)
    m, k = _pilot(pilot), _check_every(check_every)
    log = _read_log(observations, request, single_column=True)
    # one code per row: 0 a blank row, 1 + the state of a unit's decision, then the problem's text
    codes = np.zeros(max(log.filled_rows, 1), dtype=np.int8)
    codes[log.rows] = _decisions(log, request, m, k).states + 1
    if log.problem is not None:
        codes[log.problem_row:] = len(STATE_NAMES) + 1
    texts = ("", *STATE_NAMES, f"{cells.ERROR_PREFIX} {log.problem}")
    return cell_column(codes, choices=texts)


def _units_so_far(values, request, name, subject) -> cells.LogCells:
    """Every unit of the range, refused whole on a bad cell or with fewer than MIN_PILOT units."""
    log = _read_log(values, request, name, single_column=False)
    if log.problem is not None:
        raise cells.InputError(log.problem)
    if log.values.size < MIN_PILOT:
        raise cells.InputError(f"{subject} at least {MIN_PILOT} units (found {log.values.size})")
    return log


@formula(
    ranges=("observations",), observations=HELP_DECISIONS["units_so_far"],
    threshold=HELP["threshold"], accuracy=HELP["accuracy"], confidence=HELP["confidence"], method=HELP["method"],
    shape=HELP["known_shape"], model=HELP["model"],
)
def UNITS_NEEDED_NOW(observations, threshold, accuracy, confidence, method=None, shape=None, model=None):
    """Units the accuracy needs by the current estimate, (z/log d)^2 times the variance from all units so far, rounded up."""
    request = _request(threshold, accuracy, confidence, method, shape, model)
    log = _units_so_far(observations, request, "observations", "needs")
    return units_needed_now(log.values, request.threshold, request.accuracy, request.confidence, request.method,
                            request.shape, survivors=_survivors(log), model=request.model).whole


@formula(
    ranges=("pilot_observations",), pilot_observations=HELP_DECISIONS["pilot_observations"],
    threshold=HELP["threshold"], accuracy=HELP["accuracy"], confidence=HELP["confidence"], method=HELP["method"],
    shape=HELP["known_shape"], model=HELP["model"],
)
def TWO_STAGE_UNITS(pilot_observations, threshold, accuracy, confidence, method=None, shape=None, model=None):
    """Total units to test in a two-stage plan (pilot included), from the pilot's results."""
    request = _request(threshold, accuracy, confidence, method, shape, model)
    log = _units_so_far(pilot_observations, request, "pilot_observations", "the pilot needs")
    return two_stage_plan(log.values, request.threshold, request.accuracy, request.confidence, request.method,
                          request.shape, survivors=_survivors(log), model=request.model).total_units
