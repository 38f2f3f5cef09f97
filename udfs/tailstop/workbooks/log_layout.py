"""The decision column and the estimate block tailstop writes beside a test log.

Both ``tailstop annotate`` and the demo books use this layout:

* the **decision column**: a header in row 1, then one decision per row of the
  log (PILOT, CONTINUE, STOP, PAST STOP; empty on a blank row);
* the **estimate block**: two columns, labels and values, from row 1 down —
  the rule's settings, where it stopped, the estimate with its bounds for the
  probability and for the odds from the units up to the STOP (or from all
  units while the rule has not stopped), the units the accuracy needs, and the
  warnings that apply.

Every figure is computed by calling the tailstop formula itself
(``tailstop.sheet.FORMULAS``) with the arguments a spreadsheet would pass, so
the values written headless are exactly what the live formulas show. In live
mode a cell holds the formula with that value stored as its cached value; the
rule's settings are then plain input cells that the formulas refer to, so a
user with the add-in can change them. Array results are read element by
element through ``INDEX(...)`` (LibreOffice recomputes array formulas on load,
see docs/recalc-engine.md).
"""
from __future__ import annotations

import bisect
from dataclasses import dataclass, field

from openpyxl.cell.cell import Cell
from openpyxl.formatting.rule import CellIsRule
from openpyxl.styles import Font, PatternFill
from openpyxl.utils.cell import get_column_letter

from ..core.methods import METHOD_NAMES
from ..core.notes import method_notes, note_lines
from ..core.rule import MIN_PILOT
from ..sheet import cells
from . import row_cells
from .cached_values import set_formula
from .cell_check import collector_paused, sheet_reference
from .safe_io import column_from_headers

__all__ = [
    "RulePlan",
    "LogRange",
    "LogProblem",
    "LogAnalysis",
    "BlockLayout",
    "DECISION_HEADER",
    "BLOCK_TITLE",
    "LIVE_NOTE_LINES",
    "read_log_range",
    "HEADER_SEARCH_ROWS",
    "header_row_of",
    "find_column",
    "Occupancy",
    "sheet_reference",
    "analyse_log",
    "block_layout",
    "write_decision_column",
    "write_decision_header",
    "highlight_stop",
    "decision_rule",
    "decision_formula",
    "blank_guard",
    "decision_cell",
    "decision_content",
    "write_estimate_block",
    "set_width",
    "HEADER_FONT",
    "HEADER_FILL",
    "INPUT_FILL",
    "TITLE_FONT",
]

DECISION_HEADER = "tailstop decision"
BLOCK_TITLE = "tailstop estimate"
# TAIL_METHOD_NOTES gives at most three warnings (fit, shape, units on a side) or one "no warnings" line
LIVE_NOTE_LINES = 3
CAUTION = ("Asymptotic method; the gamma methods assume a gamma model; units must be independent. The governing "
           "standard and engineering judgment decide.")

# Our look: a slate header with white text, sand-coloured input cells, a green STOP.
HEADER_FONT = Font(bold=True, color="FFFFFF")
HEADER_FILL = PatternFill("solid", fgColor="34495E")
TITLE_FONT = Font(bold=True, size=12, color="34495E")
LABEL_FONT = Font(bold=True, color="34495E")
INPUT_FILL = PatternFill("solid", fgColor="FBEFD5")
STOP_FILL = PatternFill("solid", fgColor="CDEBC5")
WARNING_FONT = Font(color="9C3D10")
PROBABILITY_FORMAT = "0.0000"
ODDS_FORMAT = "0.0000"


# --------------------------------------------------------------------------- the rule's settings


@dataclass(frozen=True)
class RulePlan:
    """The settings of the stopping rule and of the estimate, checked.

    Use ``RulePlan.checked(...)``: it validates with the same rules (and the
    same messages) as the formulas.
    """

    threshold: float
    accuracy: float
    confidence: float
    pilot: int
    method: str = "pass-fail"
    shape: float | None = None
    check_every: int = 1
    model: str = "gamma"

    @classmethod
    def checked(cls, threshold, accuracy, confidence, pilot, method=None, shape=None, check_every=None, model=None):
        """A plan from user input; ``cells.InputError`` saying what to fix."""
        from ..sheet.estimate import clean_model

        name = cells.method_name(method, METHOD_NAMES)
        model_name = clean_model(model)
        shape_value = None
        if name == "known-shape":
            if cells.is_missing(shape):
                raise cells.InputError(f"known-shape needs the {model_name} shape (--shape)")
            shape_value = cells.positive(shape, "shape")
        elif not cells.is_missing(shape):
            raise cells.InputError(f"a shape is used by known-shape only, not by {name}")
        every = 1 if cells.is_missing(check_every) else cells.whole_number(check_every, "check_every", minimum=1)
        return cls(
            threshold=cells.positive(threshold, "threshold"),
            accuracy=cells.accuracy(accuracy),
            confidence=cells.confidence(confidence),
            pilot=cells.whole_number(pilot, "pilot", minimum=MIN_PILOT),
            method=name,
            shape=shape_value,
            check_every=every,
            model=model_name,
        )

    def describe(self) -> str:
        shape = f", shape {self.shape:g}" if self.shape is not None else ""
        model = f" ({self.model})" if self.model != "gamma" and self.method != "pass-fail" else ""
        every = f", checked every {self.check_every} units" if self.check_every > 1 else ""
        return (f"{self.method}{model}{shape}: odds within a factor {self.accuracy:g} at {self.confidence * 100:g} % "
                f"confidence, pilot {self.pilot}{every}")


# --------------------------------------------------------------------------- where the log is


@dataclass(frozen=True)
class LogRange:
    """One column of a sheet holding a test log: a header in row ``first_row - 1``, units below."""

    sheet_title: str
    column: int
    first_row: int
    last_row: int

    @property
    def letter(self) -> str:
        return get_column_letter(self.column)

    @property
    def rows(self) -> int:
        return self.last_row - self.first_row + 1

    def reference(self, last_row=None, *, on_sheet=False) -> str:
        """``$B$2:$B$141`` (or ``'Log'!$B$2:$B$141`` with ``on_sheet``)."""
        last = self.last_row if last_row is None else last_row
        text = f"${self.letter}${self.first_row}:${self.letter}${last}"
        return f"{sheet_reference(self.sheet_title)}!{text}" if on_sheet else text

    def growing_reference(self, row) -> str:
        """``$B$2:B17``: the log down to ``row``, for a formula filled down."""
        return f"${self.letter}${self.first_row}:{self.letter}{row}"

    def address(self, row) -> str:
        """``Log!B17`` as messages name a cell."""
        return f"{sheet_reference(self.sheet_title)}!{self.letter}{row}"

    def text(self) -> str:
        return f"{sheet_reference(self.sheet_title)}!{self.letter}{self.first_row}:{self.letter}{self.last_row}"


class LogProblem(ValueError):
    """A cell of the log the method cannot use, named by its address."""


def read_log_range(sheet, column, first_row=2):
    """The log column of a loaded (not read-only) worksheet: its ``LogRange`` and its values.

    Reads openpyxl's store of existing cells, so no empty cell is created.
    The log ends at the last row of the column that holds a value.

    Returns
    -------
    (LogRange, list)
        The range, and the raw value of every row in it (None for blanks).
    """
    stored = sheet._cells
    values = []
    for row in range(first_row, sheet.max_row + 1):
        cell = stored.get((row, column))
        values.append(None if cell is None else cell._value)
    while values and values[-1] is None:
        values.pop()
    last_row = first_row + len(values) - 1
    return LogRange(sheet.title, column, first_row, last_row), values


# Rows searched for a header text given as --column (title rows, a merged title, notes above the log)
HEADER_SEARCH_ROWS = 100


def header_row_of(column_values: dict, header_row=None):
    """The header's row of a log column: the last caption above its first value (None if there is none).

    ``column_values`` maps row -> raw value (blank rows may be missing); ``header_row`` given by the user wins.
    Blank cells and captions (``cells.is_header_text``) may stand above the log; the first other cell starts it.
    """
    if header_row is not None:
        return header_row
    header = None
    for row in sorted(column_values):
        value = column_values[row]
        if cells.is_blank(value):
            continue
        if not cells.is_header_text(value):
            break
        header = row
    return header


def find_column(top_cells: dict, key, header_row=None) -> int:
    """The log column from a letter, a number or a header text found in the top rows.

    ``top_cells`` maps (row, column) -> raw value for the rows up to ``HEADER_SEARCH_ROWS`` (or the
    header row). A text matches a cell of any of those rows (or of ``header_row`` only, when given),
    ignoring case and surrounding spaces.

    Raises
    ------
    ValueError
        As ``safe_io.column_from_headers``: no such column (listing the texts of the row that looks like
        the header row), or a text found in two columns.
    """
    if isinstance(key, int) and not isinstance(key, bool):
        return column_from_headers({}, key)
    wanted = str(key).strip().casefold()
    matches, by_row = {}, {}
    for (row, column), value in top_cells.items():
        if not isinstance(value, str) or (header_row is not None and row != header_row):
            continue
        by_row.setdefault(row, {})[column] = value
        if value.strip().casefold() == wanted:
            matches.setdefault(column, value)
    # for the message: the row holding the most texts, the first of them on a tie
    listed = max(sorted(by_row), key=lambda row: len(by_row[row]), default=None)
    headers = dict(by_row.get(listed, {}))
    headers.update(matches)
    return column_from_headers(headers, key)


class Occupancy:
    """Which rows of each column hold a cell (any cell element, styled blanks too) or a merged range.

    Cells are added column by column in increasing rows (``add``), or in any order through ``from_keys``.
    """

    def __init__(self):
        self._starts, self._ends = {}, {}
        self._merged = []

    @classmethod
    def from_keys(cls, keys, merged=()):
        found = cls()
        for row, column in sorted(keys, key=lambda key: (key[1], key[0])):
            found.add(row, column)
        for rectangle in merged:
            found.add_merged(*rectangle)
        return found

    def add(self, row, column):
        starts, ends = self._starts.get(column), self._ends.get(column)
        if starts is None:
            self._starts[column], self._ends[column] = [row], [row]
        elif ends[-1] + 1 >= row >= starts[-1]:
            ends[-1] = max(ends[-1], row)
        else:
            starts.append(row)
            ends.append(row)

    def release(self, column, rows):
        """Count the cells of ``column`` in ``rows`` (increasing) as free again: cells about to be written over."""
        starts, ends = self._starts.get(column), self._ends.get(column)
        if not starts:
            return
        kept_starts, kept_ends = [], []
        pending = iter(rows)
        row = next(pending, None)
        for start, end in zip(starts, ends):
            while row is not None and row < start:
                row = next(pending, None)
            while row is not None and row <= end:
                if row > start:
                    kept_starts.append(start)
                    kept_ends.append(row - 1)
                start = max(start, row + 1)
                row = next(pending, None)
            if start <= end:
                kept_starts.append(start)
                kept_ends.append(end)
        self._starts[column], self._ends[column] = kept_starts, kept_ends

    def add_merged(self, min_column, min_row, max_column, max_row):
        self._merged.append((min_column, min_row, max_column, max_row))

    def first_taken(self, column, first_row, last_row):
        """The first row in first_row..last_row where ``column`` holds something, or None."""
        taken = []
        starts, ends = self._starts.get(column, []), self._ends.get(column, [])
        index = bisect.bisect_right(starts, last_row) - 1
        while index >= 0 and ends[index] >= first_row:
            taken.append(max(starts[index], first_row))
            index -= 1
        for min_column, min_row, max_column, max_row in self._merged:
            if min_column <= column <= max_column and min_row <= last_row and max_row >= first_row:
                taken.append(max(min_row, first_row))
        return min(taken, default=None)

    def free(self, column, first_row, last_row) -> bool:
        return self.first_taken(column, first_row, last_row) is None


# --------------------------------------------------------------------------- the figures


def _formula(name):
    from ..sheet import FORMULAS

    return FORMULAS[name]


def _decision_column(column, arguments):
    """STOP_DECISION_COLUMN's result.

    Its body is called directly: it already returns plain text for every
    row, and the formula wrapper's cell-by-cell conversion of a long log
    would cost more than the decisions themselves. Errors become the same
    ``#TAILSTOP!`` text the wrapper gives.
    """
    body = _formula("STOP_DECISION_COLUMN").tailstop_body
    try:
        return body(column, *arguments)
    except (ValueError, ArithmeticError) as problem:
        return f"{cells.ERROR_PREFIX} {problem}"


def _as_range(values):
    return [[value] for value in values]


def _index(result, row, column):
    """What ``IFERROR(INDEX(result,row,column),"")`` shows for a formula result."""
    if isinstance(result, list):
        try:
            return result[row - 1][column - 1]
        except IndexError:
            return ""
    return result if (row, column) == (1, 1) else ""


def _odds(p):
    """What ``IFERROR(p/(1-p),"")`` shows."""
    if isinstance(p, (int, float)) and not isinstance(p, bool) and p != 1:
        return p / (1 - p)
    return ""


@dataclass(frozen=True)
class LogAnalysis:
    """Everything the decision column and the estimate block show, computed through the formulas.

    Attributes
    ----------
    decisions : list of str
        One per row of the log ('' on a blank row): STOP_DECISION_COLUMN.
    stop_offset : int or None
        Row of the STOP counted from 0 at the log's first row; None if the rule has not stopped.
    rows_used : int
        Log rows the estimate uses: down to the STOP, or all of them.
    units, units_used : int
        Units in the whole log, and in the rows used.
    filled_used : int
        Non-empty cells in the rows used (what COUNTA counts; equals ``units_used``
        unless a cell holds only spaces).
    suspended_used : int
        Units among them marked suspended (``1200+``); the others failed.
    last_decision : str
        STOP_DECISION over the whole log.
    figures : dict
        name -> value for the estimate, bounds, odds and units needed (a number or a
        ``#TAILSTOP!`` text).
    notes : list of str
        Warnings with the accuracy check (``notes.method_notes``), for values mode.
    live_notes : list of str
        TAIL_METHOD_NOTES lines, the cached values of the live block.
    """

    plan: RulePlan
    decisions: list
    stop_offset: int | None
    rows_used: int
    units: int
    units_used: int
    filled_used: int
    last_decision: str
    figures: dict
    notes: list
    live_notes: list = field(default_factory=list)
    suspended_used: int = 0

    @property
    def stopped(self) -> bool:
        return self.stop_offset is not None


def analyse_log(log: LogRange, values, plan: RulePlan) -> LogAnalysis:
    """Decisions, estimate and warnings for a log column.

    Raises
    ------
    LogProblem
        For the first cell the method cannot use, e.g. "Log!B17 holds text 'n/a'",
        or a log with fewer units than two.
    """
    with collector_paused():
        return _analyse(log, values, plan)


def _analyse(log, values, plan):
    column = _as_range(values)
    _refuse_bad_cells(log, column, plan)
    arguments = (plan.threshold, plan.accuracy, plan.confidence, plan.pilot, plan.method, plan.shape,
                 plan.check_every, plan.model)
    result = _decision_column(column, arguments)
    _refuse_text(result, log)
    decisions = [row[0] for row in result]
    decisions += [""] * (len(values) - len(decisions))
    stop_offset = decisions.index("STOP") if "STOP" in decisions else None
    filled = len(values)
    while filled and values[filled - 1] is None:  # empty rows a live log keeps ready below its last unit
        filled -= 1
    rows_used = filled if stop_offset is None else stop_offset + 1
    used = _as_range(values[:rows_used])
    reading = cells.read_log_cells(column)
    units_used = int((reading.rows < rows_used).sum())
    if units_used < MIN_PILOT:
        raise LogProblem(f"{log.text()} holds {units_used} unit{'s' if units_used != 1 else ''}; "
                         f"an estimate needs at least {MIN_PILOT}")
    last_decision = _formula("STOP_DECISION")(column[:filled], *arguments)
    figures = _figures(used, column, plan)
    survivors = reading.survivors[: units_used] if reading.survivors[: units_used].any() else None
    try:
        notes = note_lines(method_notes(reading.values[:units_used], plan.threshold, plan.method, plan.shape,
                                        accuracy=plan.accuracy, confidence=plan.confidence, survivors=survivors,
                                        model=plan.model))
    except ValueError as problem:  # the estimate itself shows the same problem as #TAILSTOP! text
        notes = [str(problem)]
    live = _formula("TAIL_METHOD_NOTES")(used, plan.threshold, plan.method, plan.shape, plan.model)
    live_notes = [_index(live, line, 1) for line in range(1, LIVE_NOTE_LINES + 1)]
    filled = sum(1 for value in values[:rows_used] if value is not None and value != "")
    return LogAnalysis(plan, decisions, stop_offset, rows_used, int(reading.values.size), units_used, filled,
                       last_decision, figures, notes, live_notes, int(reading.survivors[:units_used].sum()))


def _refuse_bad_cells(log, column, plan):
    reading = cells.read_log_cells(column, "log", single_column=True)
    if reading.problem is not None:
        prefix = f"log: row {reading.problem_row + 1} "
        reason = reading.problem[len(prefix):] if reading.problem.startswith(prefix) else reading.problem
        raise LogProblem(f"{log.address(log.first_row + reading.problem_row)} {reason}")


def _refuse_text(result, log):
    """A formula that answered with its #TAILSTOP! text about the arguments: refuse with that text."""
    if isinstance(result, str):
        raise LogProblem(f"{log.text()}: {result.removeprefix(cells.ERROR_PREFIX).strip()}")


def _figures(used, column, plan):
    estimate = _formula("TAIL_PROB_EST")(used, plan.threshold, plan.method, plan.shape, plan.model)
    bounds = _formula("TAIL_PROB_BOUNDS")(used, plan.threshold, plan.accuracy, plan.method, plan.shape, plan.model)
    odds_bounds = _formula("TAIL_ODDS_BOUNDS")(used, plan.threshold, plan.accuracy, plan.method, plan.shape,
                                               plan.model)
    needed = _formula("UNITS_NEEDED_NOW")(used, plan.threshold, plan.accuracy, plan.confidence, plan.method,
                                          plan.shape, plan.model)
    return {
        "estimate": estimate,
        "p_low": _index(bounds, 1, 1),
        "p_high": _index(bounds, 1, 2),
        "odds": _odds(estimate),
        "odds_low": _index(odds_bounds, 1, 1),
        "odds_high": _index(odds_bounds, 1, 2),
        "units_needed": needed,
    }


# --------------------------------------------------------------------------- the estimate block


_INPUTS = (
    # key, label, plan attribute
    ("threshold", "Threshold{unit}", "threshold"),
    ("method", "Method", "method"),
    ("shape", "Shape of the model (known-shape only)", "shape"),
    ("accuracy", "Accuracy d: odds within a factor d", "accuracy"),
    ("confidence", "Confidence", "confidence"),
    ("pilot", "Pilot (units)", "pilot"),
    ("check_every", "Rule checked every (units)", "check_every"),
    ("model", "Lifetime model (gamma, weibull, lognormal)", "model"),
)
_OUTPUTS = (
    # key, label, number format
    ("last_decision", "Decision after the last row", None),
    # the sheet row the rows used reach, shown "4 to 57": the rows used are the sheet's rows from the log's first
    ("rows_used", "Sheet rows used (down to the STOP, or all)", '"{first} to "0'),
    ("units_used", "Units used, N", "0"),
    ("failures", "  of which failed", "0"),
    ("suspended", "  of which suspended (marked +)", "0"),
    ("estimate", "Estimate of p = P(life > threshold)", PROBABILITY_FORMAT),
    ("p_low", "p, lower bound", PROBABILITY_FORMAT),
    ("p_high", "p, upper bound", PROBABILITY_FORMAT),
    ("odds", "Odds p/(1-p)", ODDS_FORMAT),
    ("odds_low", "Odds, lower bound (odds/d)", ODDS_FORMAT),
    ("odds_high", "Odds, upper bound (odds*d)", ODDS_FORMAT),
    ("units_needed", "Units the accuracy needs, judged by the N units used", "0"),
)


@dataclass(frozen=True)
class BlockLayout:
    """Where the estimate block's cells are.

    Attributes
    ----------
    top_row, label_column : int
        The block's top-left cell (the title).
    cells : dict
        key -> coordinate of the value cell ('threshold', 'estimate', ...).
    note_rows : list of int
        Rows of the warning lines.
    last_row : int
    """

    top_row: int
    label_column: int
    cells: dict
    note_rows: list
    last_row: int

    @property
    def value_column(self) -> int:
        return self.label_column + 1

    def absolute(self, key) -> str:
        """``$H$3`` for a value cell."""
        coordinate = self.cells[key]
        letters = "".join(ch for ch in coordinate if ch.isalpha())
        return f"${letters}${coordinate[len(letters):]}"

    def reference(self) -> str:
        last = get_column_letter(self.value_column)
        return f"{get_column_letter(self.label_column)}{self.top_row}:{last}{self.last_row}"


def block_layout(top_row, label_column, note_lines_count) -> BlockLayout:
    """The coordinates of an estimate block whose title is at (top_row, label_column)."""
    value_letter = get_column_letter(label_column + 1)
    row = top_row + 2  # title, then the log range
    coordinates = {"log": f"{value_letter}{top_row + 1}"}
    for key, _, _ in _INPUTS:
        coordinates[key] = f"{value_letter}{row}"
        row += 1
    row += 1  # a blank row between the settings and the results
    for key, _, _ in _OUTPUTS:
        coordinates[key] = f"{value_letter}{row}"
        row += 1
    note_rows = list(range(row, row + max(note_lines_count, 1)))
    caution_row = note_rows[-1] + 1
    coordinates["caution"] = f"{get_column_letter(label_column)}{caution_row}"
    return BlockLayout(top_row, label_column, coordinates, note_rows, caution_row)


def _block_formulas(layout: BlockLayout, log: LogRange, decision_column: int):
    """Live formulas of the block's results, by key."""
    a = layout.absolute
    decisions = f"${get_column_letter(decision_column)}${log.first_row}:" \
                f"${get_column_letter(decision_column)}${log.last_row}"
    whole = log.reference()
    above = log.first_row - 1  # sheet rows above the log: the rows used cell holds a sheet row
    used = f"INDEX({whole},1):INDEX({whole},{a('rows_used')}-{above})"
    method_args = f"{a('method')},{a('shape')},{a('model')}"
    rule = decision_rule(layout)
    last_filled = f'MAX(IFERROR(MATCH(9.99E+307,{whole}),0),IFERROR(MATCH(REPT("z",255),{whole}),0))'
    return _guarded_bounds({
        # the log down to its last filled row (the last number's or text's position): the decision after it
        "last_decision": f"=STOP_DECISION(INDEX({whole},1):INDEX({whole},{last_filled}),{rule})",
        "rows_used": f'=IFERROR(MATCH("STOP",{decisions},0),{last_filled})+{above}',
        # the cells that are not blank to the formulas (a cell of spaces is no unit), as in the spreadsheet's
        # own functions; SUMPRODUCT takes the array without array entry, in Excel and LibreOffice alike
        "units_used": f"=SUMPRODUCT((LEN(TRIM({used}))>0)*1)",
        # a failure is a number, a suspended unit the text 1200+
        "failures": f"=COUNT({used})",
        "suspended": f"={a('units_used')}-{a('failures')}",
        "estimate": f"=TAIL_PROB_EST({used},{a('threshold')},{method_args})",
        "p_low": f'=IFERROR(INDEX(TAIL_PROB_BOUNDS({used},{a("threshold")},{a("accuracy")},{method_args}),1,1),"")',
        "p_high": f'=IFERROR(INDEX(TAIL_PROB_BOUNDS({used},{a("threshold")},{a("accuracy")},{method_args}),1,2),"")',
        "odds": f'=IFERROR({a("estimate")}/(1-{a("estimate")}),"")',
        "odds_low": f'=IFERROR(INDEX(TAIL_ODDS_BOUNDS({used},{a("threshold")},{a("accuracy")},{method_args}),1,1),"")',
        "odds_high": f'=IFERROR(INDEX(TAIL_ODDS_BOUNDS({used},{a("threshold")},{a("accuracy")},{method_args}),1,2),"")',
        "units_needed": f"=UNITS_NEEDED_NOW({used},{a('threshold')},{a('accuracy')},{a('confidence')},{method_args})",
        "note": lambda line: f'=IFERROR(INDEX(TAIL_METHOD_NOTES({used},{a("threshold")},{method_args}),{line},1),"")',
    }, decisions)


# what the bounds rows say while the rule has not stopped: q/d and q*d are no guaranteed interval yet
NOT_REACHED = "accuracy not reached (no STOP yet): no guaranteed bound"
_BOUNDS = ("p_low", "p_high", "odds_low", "odds_high")


def _guarded_bounds(formulas, decisions):
    """The bounds formulas showing ``NOT_REACHED`` while the decision column holds no STOP."""
    for key in _BOUNDS:
        formulas[key] = f'=IF(ISNUMBER(MATCH("STOP",{decisions},0)),{formulas[key][1:]},"{NOT_REACHED}")'
    return formulas


def _output_values(analysis: LogAnalysis, log: LogRange):
    values = dict(analysis.figures)
    if not analysis.stopped:
        values.update(dict.fromkeys(_BOUNDS, NOT_REACHED))
    values["last_decision"] = analysis.last_decision
    values["rows_used"] = log.first_row - 1 + analysis.rows_used  # the last sheet row used
    values["units_used"] = analysis.units_used
    values["failures"] = analysis.units_used - analysis.suspended_used
    values["suspended"] = values["units_used"] - values["failures"]
    return values


def write_estimate_block(sheet, layout: BlockLayout, log: LogRange, decision_column: int, analysis: LogAnalysis,
                         *, live: bool, cached: dict, unit: str = "", source: str = "") -> BlockLayout:
    """Write the estimate block at ``layout``; live formulas record their values in ``cached``."""
    label_letter = get_column_letter(layout.label_column)
    value_letter = get_column_letter(layout.value_column)
    title = sheet[f"{label_letter}{layout.top_row}"]
    title.value, title.font = BLOCK_TITLE, TITLE_FONT
    mode = sheet[f"{value_letter}{layout.top_row}"]
    mode.value = "live tailstop formulas" if live else (source or "values computed by tailstop")
    mode.font = Font(italic=True, color="5D6D7E")
    _label(sheet, layout.cells["log"], "Log column")
    sheet[layout.cells["log"]] = log.text()
    plan = analysis.plan
    unit_text = f" ({unit})" if unit else ""
    for key, label, attribute in _INPUTS:
        _label(sheet, layout.cells[key], label.format(unit=unit_text))
        cell = sheet[layout.cells[key]]
        cell.value = getattr(plan, attribute)
        cell.fill = INPUT_FILL
    formulas = _block_formulas(layout, log, decision_column)
    values = _output_values(analysis, log)
    for key, label, number_format in _OUTPUTS:
        _label(sheet, layout.cells[key], label)
        _put(sheet, layout.cells[key], formulas[key] if live else None, values[key], cached)
        if number_format:
            sheet[layout.cells[key]].number_format = number_format.format(first=log.first_row)
    lines = analysis.live_notes if live else analysis.notes
    for line, row in enumerate(layout.note_rows, start=1):
        if line == 1:
            sheet[f"{label_letter}{row}"] = "Warnings"
            sheet[f"{label_letter}{row}"].font = LABEL_FONT
        coordinate = f"{value_letter}{row}"
        text = lines[line - 1] if line <= len(lines) else ""
        _put(sheet, coordinate, formulas["note"](line) if live else None, text, cached)
        sheet[coordinate].font = WARNING_FONT
    caution = sheet[layout.cells["caution"]]
    caution.value = CAUTION
    caution.font = Font(italic=True, size=9, color="5D6D7E")
    return layout


def _label(sheet, value_coordinate, text):
    cell = sheet[value_coordinate]
    label = sheet.cell(cell.row, cell.column - 1)
    label.value, label.font = text, LABEL_FONT


def _put(sheet, coordinate, formula, value, cached):
    if formula is None:
        if isinstance(value, float):
            value = float("%.16g" % value)  # what a spreadsheet file stores; no 17th digit to carry
        sheet[coordinate] = None if value == "" else value
    else:
        set_formula(sheet, coordinate, formula, value, cached)


# --------------------------------------------------------------------------- the decision column


def write_decision_column(sheet, log: LogRange, column: int, analysis: LogAnalysis, *, live: bool, cached: dict,
                          layout: BlockLayout | None = None, header: str = DECISION_HEADER, as_markup=()):
    """Write the header and one decision per log row into ``column``.

    Live mode fills ``=STOP_DECISION($B$2:B<row>, <the block's settings>)`` down
    (``layout`` gives the settings' cells); values mode writes the decisions.
    The STOP cell is highlighted by a conditional format, so it follows a live
    recalculation.

    Rows in ``as_markup`` are not put into the book: their cells come back as
    ``{row: markup}`` for ``row_cells.append_to_sheet`` (rows that are written
    anyway because they hold a log value; see ``row_cells``).

    Returns
    -------
    dict
        row -> (cell markup, canonical content) for the rows in ``as_markup``.
    """
    write_decision_header(sheet, log, column, header)
    rule = decision_rule(layout) if live else None
    as_markup = set(as_markup)
    markup = {}
    texts = []
    for offset, decision in enumerate(analysis.decisions):
        row = log.first_row + offset
        if row in as_markup:
            cell, content = decision_cell(log, column, row, decision, rule)
            if cell is not None:
                markup[row] = (cell, content)
            if not live:
                texts.append("")
            continue
        if live:
            set_formula(sheet, f"{get_column_letter(column)}{row}", decision_formula(log, row, rule), decision,
                        cached)
        else:
            texts.append(decision)
    if not live:
        _write_texts(sheet, column, log.first_row, texts)
    highlight_stop(sheet, log, column)
    return markup


def write_decision_header(sheet, log: LogRange, column: int, header: str = DECISION_HEADER):
    """The decision column's header cell, in the row above the log; a cell that holds a format keeps it."""
    head = sheet.cell(log.first_row - 1, column, header)
    if not head.has_style:
        head.font, head.fill = HEADER_FONT, HEADER_FILL


def highlight_stop(sheet, log: LogRange, column: int):
    """The conditional format that shows the STOP cell of the decision column."""
    if log.rows > 0:
        letter = get_column_letter(column)
        target = f"{letter}{log.first_row}:{letter}{log.last_row}"
        sheet.conditional_formatting.add(target, CellIsRule(operator="equal", formula=['"STOP"'], fill=STOP_FILL,
                                                            font=Font(bold=True)))


def decision_rule(layout: BlockLayout) -> str:
    """The rule's arguments of a live decision cell: the settings cells of the block."""
    a = layout.absolute
    return (f"{a('threshold')},{a('accuracy')},{a('confidence')},{a('pilot')},{a('method')},{a('shape')},"
            f"{a('check_every')},{a('model')}")


def blank_guard(cell: str) -> str:
    """``IFERROR(LEN(TRIM(B9)),1)=0``: true, in the spreadsheet's own functions, for a cell the formulas read as
    blank — empty, empty text, or only spaces. TRIM and LEN mean the same in Excel and LibreOffice (TRIM takes
    out the spaces; from memory, their function references); a cell holding an error is not blank (IFERROR),
    so the formula it guards still names the error.
    """
    return f"IFERROR(LEN(TRIM({cell})),1)=0"


def decision_formula(log: LogRange, row: int, rule: str) -> str:
    """``=IF(IFERROR(LEN(TRIM(B<row>)),1)=0,"",STOP_DECISION($B$2:B<row>, <rule>))``: the live decision of a row.

    STOP_DECISION shows an empty cell on a blank row anyway (a cell of spaces is blank to it too); the guard
    (``blank_guard``) says so with the spreadsheet's own functions, so that a program without the add-in,
    which recalculates a formula whose stored value is empty text (LibreOffice does), shows the empty cell
    instead of an unknown-function error.
    """
    return f'=IF({blank_guard(f"{log.letter}{row}")},"",STOP_DECISION({log.growing_reference(row)},{rule}))'



def decision_cell(log: LogRange, column: int, row: int, decision: str, rule: str | None = None):
    """Markup and canonical content of one unstyled decision cell (``rule`` given: a live formula).

    Returns ``(None, None)`` for a values-mode row without a decision (no cell).
    """
    content = decision_content(log, row, decision, rule)
    if content is None:
        return None, None
    coordinate = f"{get_column_letter(column)}{row}"
    if rule is not None:
        return row_cells.formula_cell(coordinate, content[1], decision), content
    return row_cells.text_cell(coordinate, decision), content


def decision_content(log: LogRange, row: int, decision: str, rule: str | None = None):
    """What a decision cell holds as ``cell_check.canonical`` reads it: the text, ('f', formula), or None."""
    if rule is not None:
        return ("f", decision_formula(log, row, rule))
    return decision or None


def _write_texts(sheet, column, first_row, texts):
    """Put plain texts down a column of empty cells ('' leaves a cell empty); a cell that holds only a format
    keeps it.

    Builds the cells directly, as openpyxl's own reader does: a long log has
    a hundred thousand of them, and ``sheet.cell`` costs twice as much each.
    """
    stored = sheet._cells
    for offset, text in enumerate(texts):
        if text:
            row = first_row + offset
            cell = stored.get((row, column))
            if cell is None:
                cell = stored[(row, column)] = Cell(sheet, row=row, column=column)
            elif cell._value not in (None, ""):
                raise ValueError(f"{get_column_letter(column)}{row} is not empty")
            cell._value, cell.data_type = text, "s"


def column_is_free_of_widths(sheet, column) -> bool:
    """True when no existing column-width entry covers ``column`` (so setting one cannot overlap)."""
    for dimension in sheet.column_dimensions.values():
        low, high = dimension.min or 0, dimension.max or 0
        if low <= column <= high:
            return False
    return True


def set_width(sheet, column, width):
    """Set a column's width unless the sheet already has a width entry covering it."""
    if column_is_free_of_widths(sheet, column):
        sheet.column_dimensions[get_column_letter(column)].width = width
