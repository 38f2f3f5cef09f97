"""From raw cell values to clean numbers, and from problems to cell text.

This is the one place that knows what a spreadsheet passes to a formula:
scalars, 2-D lists with None for blank cells, numbers, numeric text, other
text, booleans, dates, and error cells (special integers on Windows, text
such as '#N/A' from other engines). Everything past this module sees only
clean numpy arrays and floats.
"""
from __future__ import annotations

import dataclasses
import datetime as _dt
import math
from dataclasses import dataclass
from itertools import chain
from operator import itemgetter

import numpy as np

__all__ = [
    "InputError",
    "ERROR_PREFIX",
    "CleanRange",
    "clean_lifetimes",
    "number",
    "positive",
    "accuracy",
    "confidence",
    "whole_number",
    "pilot",
    "probability",
    "method_name",
    "is_missing",
    "describe",
]

ERROR_PREFIX = "#TAILSTOP!"

# What Windows Excel passes to Python for an error cell (COM error codes).
SPREADSHEET_ERROR_CODES = {
    -2146826281: "#DIV/0!",
    -2146826246: "#N/A",
    -2146826259: "#NAME?",
    -2146826288: "#NULL!",
    -2146826252: "#NUM!",
    -2146826265: "#REF!",
    -2146826273: "#VALUE!",
    -2146826245: "#GETTING_DATA",
}
_ERROR_TEXTS = frozenset(SPREADSHEET_ERROR_CODES.values()) | {
    "#SPILL!", "#CALC!", "#FIELD!", "#BLOCKED!", "#CONNECT!", "#BUSY!", "#UNKNOWN!", "#EXTERNAL!", "#PYTHON!",
}


class InputError(ValueError):
    """A problem with what the user typed; its message goes to the cell."""


def is_spreadsheet_error(value) -> bool:
    """True for an error cell as any engine passes it (code or text)."""
    if type(value) is int:
        return value in SPREADSHEET_ERROR_CODES
    if isinstance(value, str):
        text = value.strip().upper()
        return text in _ERROR_TEXTS or text.startswith(ERROR_PREFIX)
    return False


def is_missing(value) -> bool:
    """An optional argument left out: None, an empty cell or empty text."""
    if isinstance(value, (list, tuple)):
        cells = list(chain.from_iterable(r if isinstance(r, (list, tuple)) else [r] for r in value))
        return len(cells) == 0 or (len(cells) == 1 and is_missing(cells[0]))
    return value is None or (isinstance(value, str) and value.strip() == "")


def describe(value) -> str:
    """A short description of a bad cell value, for a message."""
    if value is None:
        return "is blank"
    if is_spreadsheet_error(value):
        if isinstance(value, str) and value.strip().upper().startswith(ERROR_PREFIX):
            return "holds an error from another tailstop formula"
        return "holds a spreadsheet error"
    if isinstance(value, bool):
        return f"holds {'TRUE' if value else 'FALSE'}, not a number"
    if isinstance(value, (_dt.datetime, _dt.date, _dt.time, _dt.timedelta)):
        return "holds a date or time, not a number of hours or cycles"
    if isinstance(value, str) and is_formula_text(value):
        shown = value if len(value) <= 40 else value[:37] + "..."
        return (f"holds a formula ({shown}); a summary row inside the log would be counted as a unit: move it "
                "below the range or out of the column")
    if isinstance(value, str):
        shown = value if len(value) <= 20 else value[:17] + "..."
        return f"holds text {shown!r}"
    if isinstance(value, (int, float, np.number)):
        number_value = float(value)
        if math.isnan(number_value):
            return "holds NaN, not a number"
        if math.isinf(number_value):
            return "holds an infinite value"
        if number_value == 0:
            return "holds 0; lifetimes must be > 0"
        if number_value < 0:
            return f"holds {number_value:g}; lifetimes must be > 0"
        return f"holds {number_value:g}"
    return f"holds a value of type {type(value).__name__}"


def is_formula_text(value) -> bool:
    """A cell read as its formula, as a workbook reader gives one: '=AVERAGE(C2:C134)'."""
    return isinstance(value, str) and value.startswith("=") and len(value) > 1


def is_blank(value) -> bool:
    """An empty cell, or one holding only spaces."""
    return _is_blank(value)


def is_header_text(value) -> bool:
    """Text that can only be a caption: not a number, a survivor mark, an error or a formula."""
    if not isinstance(value, str) or _is_blank(value) or is_spreadsheet_error(value) or is_formula_text(value):
        return False
    text = value.strip()
    return not text.endswith(SURVIVOR_MARK) and _as_number(text) is None


def header_cells(flat) -> int:
    """How many cells at the top of a range are its header: blanks and caption text above the first unit.

    Text below the first unit is not skipped: it stays a bad cell, named by its row.
    """
    count = 0
    for value in flat:
        if _is_blank(value) or is_header_text(value):
            count += 1
        else:
            break
    return count


LARGE_COUNT = 10**12  # no test runs this many units; sheet_estimate refuses such plans too


def units_text(units) -> str:
    """'about 1,044,507 units', or 'more than 10^12 units (about 2.3e+291)' where digits would say nothing."""
    if not math.isfinite(units) or units >= LARGE_COUNT:
        about = f" (about {units:.2g})" if math.isfinite(units) else ""
        return f"more than 10^12 units{about}"
    return f"about {math.ceil(units):,} units"


def _as_number(value):
    """float for a number or numeric text; None if it is not one."""
    if isinstance(value, bool):
        return None
    if isinstance(value, (int, float, np.integer, np.floating)):
        if type(value) is int and value in SPREADSHEET_ERROR_CODES:
            return None
        try:
            return float(value)
        except OverflowError:
            return None
    if isinstance(value, str):
        text = value.strip().replace("\u00a0", "")
        if not text or text.lower() in {"nan", "inf", "-inf", "+inf", "infinity", "-infinity", "+infinity"}:
            return None
        try:
            return float(text)
        except ValueError:
            return None
    return None


def _rows_of(values):
    """The range as a list of rows (a scalar is a 1×1 range, a flat list a column)."""
    if isinstance(values, np.ndarray):
        values = values.tolist()
    if not isinstance(values, (list, tuple)):
        return [[values]]
    if set(map(type, values)) <= {list, tuple}:
        return values
    return [row if isinstance(row, (list, tuple)) else [row] for row in values]


@dataclass(frozen=True)
class CleanRange:
    """The numbers of a range, with the (0-based) row each came from.

    Attributes
    ----------
    values : ndarray of float
        The non-blank cells in reading order (row by row).
    rows : ndarray of int
        Row of each value, counted from the top of the range.
    n_rows : int
        Number of rows in the range (blank ones included).
    """

    values: np.ndarray
    rows: np.ndarray
    n_rows: int


def _position(rows, flat_index, single_column):
    if single_column:
        return f"row {flat_index + 1}"
    seen = 0
    for r, row in enumerate(rows):
        if flat_index < seen + len(row):
            return f"row {r + 1}, column {flat_index - seen + 1}"
        seen += len(row)
    return f"cell {flat_index + 1}"


def clean_lifetimes(values, name="observations", *, minimum=0) -> CleanRange:
    """Positive finite failure times from a range; blanks are skipped.

    For formulas that need every unit's failure time: a survivor mark
    (``1500+``) is refused like any other unusable cell.

    Raises
    ------
    InputError
        Naming the first offending cell: "row 17 holds text 'n/a'".
    """
    log = read_log_cells(values, name)
    if log.problem:
        raise InputError(log.problem)
    return _failure_times(log, name, minimum)


def _failure_times(log, name, minimum) -> CleanRange:
    log = log.refuse(log.survivors, lambda value: f"marks a survivor ({value:g}+); this needs failure times")
    if log.problem:
        raise InputError(log.problem)
    if log.values.size < minimum:
        raise InputError(f"{name}: needs at least {minimum} lifetimes (found {log.values.size})")
    with np.errstate(over="ignore"):
        total = float(np.sum(log.values))
    if not math.isfinite(total):
        raise InputError(f"{name}: the lifetimes are too large to add up (the largest is "
                         f"{float(np.max(log.values)):.3g}); enter them in a larger unit, e.g. thousands of hours")
    return CleanRange(values=log.values, rows=log.rows, n_rows=log.n_rows)


def clean_log_units(values, name="observations", *, minimum=2):
    """(times, suspended or None) of a log's units, failed or marked + (suspended), for a fit.

    InputError at the first unusable cell; a log without a + cell gets the
    checks of ``clean_lifetimes``.
    """
    log = read_log_cells(values, name)
    if log.problem:
        raise InputError(log.problem)
    if not log.survivors.any():
        return _failure_times(log, name, minimum).values, None
    if log.values.size < minimum:
        raise InputError(f"{name}: needs at least {minimum} lifetimes (found {log.values.size})")
    return log.values, log.survivors


def number(value, name) -> float:
    """A single finite number from a cell (numeric text accepted)."""
    if isinstance(value, (list, tuple, np.ndarray)):
        cells = list(chain.from_iterable(_rows_of(value)))
        if len(cells) != 1:
            raise InputError(f"{name} must be a single cell (got a range of {len(cells)} cells)")
        value = cells[0]
    if is_missing(value):
        raise InputError(f"{name} is blank; enter a number")
    result = _as_number(value)
    if result is None or not math.isfinite(result):
        raise InputError(f"{name} {describe(value)}; enter a number")
    return result


def positive(value, name, unit="") -> float:
    """A number > 0."""
    result = number(value, name)
    if not result > 0:
        raise InputError(f"{name} must be > 0{unit} (got {result:g})")
    return result


def accuracy(value) -> float:
    """The accuracy factor d > 1 (odds known within a factor d)."""
    result = number(value, "accuracy")
    if not result > 1:
        raise InputError(f"accuracy must be > 1, e.g. 1.5 for odds within a factor 1.5 (got {result:g})")
    return result


def confidence(value) -> float:
    """A confidence level strictly between 0 and 1 (95 % is 0.95)."""
    result = number(value, "confidence")
    if 1 < result < 100:
        raise InputError(f"confidence must be between 0 and 1; for {result:g} % enter {result / 100:g}")
    if not 0 < result < 1:
        raise InputError(f"confidence must be between 0 and 1, e.g. 0.95 (got {result:g})")
    return result


def whole_number(value, name, minimum=1, maximum=None) -> int:
    """A whole number in [minimum, maximum]."""
    result = number(value, name)
    if result != math.floor(result):
        raise InputError(f"{name} must be a whole number (got {result:g})")
    if result < minimum:
        raise InputError(f"{name} must be at least {minimum} (got {result:g})")
    if maximum is not None and result > maximum:
        raise InputError(f"{name} must be at most {maximum:,} (got {result:g})")
    return int(result)


def pilot(value, maximum) -> int:
    """The pilot sample size: a whole number of units, at least 2 (σ² needs two units)."""
    m = number(value, "pilot")
    if m != int(m):
        raise InputError(f"pilot must be a whole number of units (got {m:g})")
    if m < 2:
        raise InputError(f"pilot must be at least 2 units; fewer cannot estimate the variance (got {m:g})")
    if m > maximum:
        raise InputError(f"pilot must be at most {maximum:,} (got {m:g})")
    return int(m)


def probability(value, name) -> float:
    """A probability strictly between 0 and 1."""
    p = number(value, name)
    if not 0 < p < 1:
        raise InputError(f"{name} must be strictly between 0 and 1 (got {p:g})")
    return p


def method_name(value, choices, default="pass-fail") -> str:
    """A method name, forgiving case, spaces and underscores."""
    if is_missing(value):
        return default
    if isinstance(value, (list, tuple)):
        value = list(chain.from_iterable(_rows_of(value)))[0]
    if not isinstance(value, str):
        raise InputError(f"method must be one of {', '.join(choices)}")
    text = "-".join(value.strip().lower().replace("_", " ").replace("-", " ").split())
    if text not in choices:
        shown = value if len(value) <= 20 else value[:17] + "..."
        raise InputError(f"method must be one of {', '.join(choices)} (got {shown!r})")
    return text


# --------------------------------------------------------------------------- test logs with survivor marks

SURVIVOR_MARK = "+"


@dataclass(frozen=True)
class LogCells:
    """The units of a test-log range, read down to the first cell that cannot be read.

    A cell holds a lifetime (a number, or numeric text), or a survivor: the
    time a unit was taken off test without failing, followed by ``+``
    (``1500+``, the usual censoring notation of reliability logs). Blank
    cells (empty, or text of spaces only) are skipped, and so are caption
    texts above the first unit (a header, see ``header_cells``).

    Attributes
    ----------
    values : ndarray of float
        One lifetime per unit in reading order; for a survivor, the time it
        was taken off test.
    survivors : ndarray of bool
        True for a unit marked as a survivor.
    rows, columns : ndarray of int
        Row and column of each unit, counted from 0 at the top left of the range.
    n_rows : int
        Rows in the range.
    filled_rows : int
        Rows down to the last one that is not blank (trailing blanks left out).
    problem_row : int or None
        Row of the first cell that cannot be used; only the units above it
        are in ``values``.
    problem : str or None
        What is wrong with that cell, e.g. "observations: row 17 holds text 'n/a'".
    name : str
    single_column : bool
    """

    values: np.ndarray
    survivors: np.ndarray
    rows: np.ndarray
    columns: np.ndarray
    n_rows: int
    filled_rows: int
    problem_row: int | None
    problem: str | None
    name: str = "observations"
    single_column: bool = True

    def position(self, unit) -> str:
        """Where a unit is, as a message names it: 'row 5' or 'row 5, column 2'."""
        row = int(self.rows[unit]) + 1
        return f"row {row}" if self.single_column else f"row {row}, column {int(self.columns[unit]) + 1}"

    def refuse(self, units, reason) -> "LogCells":
        """The log cut at the first unit where ``units`` (bool per unit) is True.

        That unit becomes the problem, its text ``"<name>: <position> <reason(value)>"``.
        """
        units = np.asarray(units, dtype=bool)
        if not units.any():
            return self
        first = int(np.argmax(units))
        text = f"{self.name}: {self.position(first)} {reason(float(self.values[first]))}"
        keep = slice(0, first)
        return LogCells(self.values[keep], self.survivors[keep], self.rows[keep], self.columns[keep],
                        self.n_rows, self.filled_rows, int(self.rows[first]), text, self.name, self.single_column)


def read_log_cells(values, name="observations", *, single_column=False) -> LogCells:
    """Read a test-log range: lifetimes, survivor marks, blanks, and the first unreadable cell.

    Unlike ``clean_lifetimes`` this does not raise on a bad cell: it reports
    it (``problem``, ``problem_row``) with the units above it, so that a
    column of decisions can stay correct above the bad cell. Trailing blank
    cells cost next to nothing (whole-column references).

    Raises
    ------
    InputError
        Only if ``single_column`` is asked for and the range has several columns.
    """
    if type(values) is LogPrefix and values.log.name == name:
        return values.log
    try:
        blank_below = _blank_rows_at_end(values) if isinstance(values, list) else 0
    except (TypeError, ValueError):  # rows that do not compare with a list (arrays): nothing is left out
        blank_below = 0
    rows = _rows_of(values[: len(values) - blank_below] if blank_below else values)
    lengths = set(map(len, rows))
    is_column = lengths <= {1}
    flat = list(map(itemgetter(0), rows)) if is_column else list(chain.from_iterable(rows))
    if not flat:
        rows, is_column = [], True
    if single_column and not is_column:
        raise InputError(f"{name} must be a single column, one unit per row")
    filled = len(flat) - _trailing_blanks(flat)
    cells = flat[:filled]
    header = header_cells(cells)
    if header:  # a caption above the first unit (a whole-column reference takes the header row along)
        cells = [None] * header + cells[header:]
    parsed = _fast_log_numbers(cells)
    if parsed is None:
        parsed = _read_log_cells_one_by_one(cells)
    numbers, survivors, bad_at, reason = parsed
    stop = filled if bad_at is None else bad_at
    units = np.flatnonzero(~np.isnan(numbers[:stop]))
    if is_column:
        unit_rows, unit_columns = units, np.zeros(units.size, dtype=np.int64)
        filled_rows = filled
        problem_row = bad_at
    else:
        starts = np.cumsum([0] + [len(row) for row in rows])
        unit_rows = np.searchsorted(starts, units, side="right") - 1
        unit_columns = units - starts[unit_rows]
        filled_rows = int(np.searchsorted(starts, filled - 1, side="right")) if filled else 0
        problem_row = None if bad_at is None else int(np.searchsorted(starts, bad_at, side="right") - 1)
    problem = None if bad_at is None else f"{name}: {_position(rows, bad_at, is_column)} {reason}"
    return LogCells(numbers[units], survivors[units], unit_rows.astype(np.int64, copy=False),
                    unit_columns.astype(np.int64, copy=False), len(rows) + blank_below, filled_rows, problem_row,
                    problem, name, is_column)


_BLANK_ROWS = ([None], [""])


def _blank_rows_at_end(rows) -> int:
    """How many rows at the end are a single blank cell (``[None]`` or ``[""]``), in C-level passes.

    A whole-column reference passes a million rows, nearly all ``[None]``
    below the log; they are left out before any row is looked at one by one.
    A few rows are probed to find where the blank rows at the end begin
    (galloping up from the bottom, then halving), and one count over the
    list confirms that every row below is blank; when it is not (a filled
    row far down), the stretches are counted from the bottom up instead.
    """
    size = len(rows)
    if not size or rows[-1] not in _BLANK_ROWS:
        return 0
    filled, blank, step = -1, size - 1, 1
    while size - 1 - step >= 0:
        if rows[size - 1 - step] not in _BLANK_ROWS:
            filled = size - 1 - step
            break
        blank, step = size - 1 - step, step * 2
    while blank - filled > 1:
        middle = (filled + blank) // 2
        if rows[middle] in _BLANK_ROWS:
            blank = middle
        else:
            filled = middle
    if _count_blank_rows(rows, blank) == size - blank:
        return size - blank
    return _blank_rows_at_end_by_stretches(rows)


def _count_blank_rows(rows, start):
    """Blank rows in ``rows[start:]``, counted without copying the longer part of the list."""
    counts = []
    for blank in _BLANK_ROWS:
        if len(rows) - start <= start:
            counts.append(rows[start:].count(blank))
        else:
            counts.append(rows.count(blank) - rows[:start].count(blank))
        if sum(counts) == len(rows) - start:
            break
    return sum(counts)


def _blank_rows_at_end_by_stretches(rows) -> int:
    """As ``_blank_rows_at_end``: stretches at the end double while all blank, then halve (``_trailing_blanks``)."""
    end, step, growing = len(rows), 64, True
    while end and step:
        start = max(0, end - step)
        part = rows[start:end]
        blank = part.count([None])
        if blank != end - start:
            blank += part.count([""])
        if blank == end - start:
            end = start
            step = step * 2 if growing else step
        else:
            growing, step = False, step // 2
    return len(rows) - end


def _is_blank(value) -> bool:
    return value is None or (isinstance(value, str) and not value.strip())


def _trailing_blanks(flat) -> int:
    """How many cells at the end are blank, counted in C-level passes (``list.count``).

    Stretches ending at the last cell not yet known to be blank double while
    they are all blank, then halve down to single cells.
    """
    end, step, growing = len(flat), 64, True
    while end and step:
        start = max(0, end - step)
        part = flat[start:end]
        if part.count(None) + part.count("") == end - start:
            end = start
            step = step * 2 if growing else step
        else:
            growing, step = False, step // 2
    while end and _is_blank(flat[end - 1]):  # text of spaces only
        end -= 1
    return len(flat) - end


def _fast_log_numbers(cells):
    """All plain numbers and blanks (the common case): NaN marks a blank; None if anything else is there."""
    kinds = set(map(type, cells))
    if not kinds <= {float, int, type(None)}:
        return None
    if int in kinds and not SPREADSHEET_ERROR_CODES.keys().isdisjoint(cells):
        return None
    try:
        numbers = np.array(cells, dtype=float)
    except OverflowError:
        return None
    blanks = np.count_nonzero(np.isnan(numbers))  # a None is a NaN: without a NaN there is no None to count
    if blanks and blanks != cells.count(None):
        return None  # a NaN that is not a blank: let the slow reader name it
    good = np.isnan(numbers) | (np.isfinite(numbers) & (numbers > 0))
    bad_at = None if good.all() else int(np.argmin(good))
    reason = None if bad_at is None else describe(cells[bad_at])
    return numbers, np.zeros(numbers.size, dtype=bool), bad_at, reason


def _read_log_cells_one_by_one(cells):
    numbers = np.full(len(cells), np.nan)
    survivors = np.zeros(len(cells), dtype=bool)
    for i, value in enumerate(cells):
        if _is_blank(value):
            continue
        number, survivor, reason = _log_cell(value)
        if reason is not None:
            return numbers, survivors, i, reason
        numbers[i], survivors[i] = number, survivor
    return numbers, survivors, None, None


def _log_cell(value):
    """(lifetime, is survivor, None) for a usable cell, or (None, None, reason)."""
    text = value.strip() if isinstance(value, str) else None
    if text is not None and text.endswith(SURVIVOR_MARK) and not is_spreadsheet_error(value):
        number = _as_number(text[: -len(SURVIVOR_MARK)])
        if number is None or not math.isfinite(number):
            return None, None, f"{describe(value)}; a survivor is written as its time off test followed by +, e.g. 1500+"
        if not number > 0:
            return None, None, f"{describe(value)}; a survivor's time off test must be > 0"
        return number, True, None
    number = _as_number(value)
    if number is None or not (math.isfinite(number) and number > 0):
        return None, None, describe(value)
    return number, False, None


# --------------------------------------------------------------------------- every prefix of one column


class LogPrefix(list):
    """The rows of a prefix of a column, with the ``LogCells`` that ``read_log_cells`` reads from them.

    It is a list of those rows, so anything that reads cells reads it as
    such; ``read_log_cells`` with the same name returns ``log`` without
    reading the rows again.
    """

    log: LogCells


class ColumnPrefixes:
    """Every prefix ``rows[:end]`` of a one-column range, read once.

    ``prefixes(ends)`` gives, for each end, what ``read_log_cells(rows[:end], name)``
    gives, cut from one reading of the whole column: a column of formulas
    filled down over ``$B$2:B2``, ``$B$2:B3``, … reads each cell once instead
    of once a row.

    Parameters
    ----------
    rows : list of list
        The range as a spreadsheet passes it, one cell a row.
    name : str
        The argument's name, for messages.
    """

    def __init__(self, rows, name="observations"):
        if any(len(row) != 1 for row in rows):
            raise ValueError("ColumnPrefixes reads a range one cell wide")
        self.rows = rows
        self.log = read_log_cells(rows, name)
        for array in (self.log.values, self.log.survivors, self.log.rows, self.log.columns):
            array.flags.writeable = False  # every prefix shares them
        filled = np.fromiter((not _is_blank(row[0]) for row in rows), dtype=bool, count=len(rows))
        # filled rows of rows[:end] is last_filled[end]: one past the last non-blank row above end
        self._last_filled = np.concatenate(
            ([0], np.maximum.accumulate(np.where(filled, np.arange(1, len(rows) + 1), 0))))

    def log_of(self, end) -> LogCells:
        """What ``read_log_cells(rows[:end], name)`` gives (1 <= end <= len(rows))."""
        log = self.log
        keep = slice(0, int(np.searchsorted(log.rows, end)))
        has_problem = log.problem_row is not None and log.problem_row < end
        return dataclasses.replace(
            log, values=log.values[keep], survivors=log.survivors[keep], rows=log.rows[keep],
            columns=log.columns[keep], n_rows=end, filled_rows=int(self._last_filled[end]),
            problem_row=log.problem_row if has_problem else None, problem=log.problem if has_problem else None)

    def prefixes(self, ends):
        """``(index into ends, LogPrefix)`` for every end, shortest first.

        One list grows from prefix to prefix (each is valid until the next
        is taken), so that handing out n prefixes copies n rows, not n²/2.
        """
        part = LogPrefix()
        for index in sorted(range(len(ends)), key=ends.__getitem__):
            end = ends[index]
            if end < len(part):
                part = LogPrefix(self.rows[:end])
            else:
                part.extend(self.rows[len(part):end])
            part.log = self.log_of(end)
            yield index, part
