"""docs/formulas.md describes every formula, and its examples return what the page says.

The page shows each example as a spreadsheet user would type it:

    =TAIL_PROB(18.307, 5, 2)
    → 0.0500

and each error text as a table row ``| `=FORMULA(...)` | `#TAILSTOP! ...` |``.
This test parses every example and every error row, calls the formula the
way a spreadsheet passes the arguments (cell ranges of the page's example
sheet as 2-D lists with None for blanks, array constants ``{1;2;3}`` as
columns) and compares the result with the page: numbers to the digits the
page shows, text exactly. It also checks that every registered formula has
a section headed by its argument list in the order of the code, an argument
table in that order, and a "Returns" line that matches what it returns.
"""
from __future__ import annotations

import datetime
import inspect
import math
import re
from pathlib import Path

import pytest

import tailstop.sheet as sheet

PAGE = Path(__file__).resolve().parents[1] / "docs" / "formulas.md"
TEXT = PAGE.read_text(encoding="utf-8")

RETURNS = {"number": "a number", "text": "a text", "row": "a 1×2 row", "column": "a column", "table": "a table"}


# --------------------------------------------------------------------------- the example sheet


def example_sheet():
    """{(column letter, row number): value} from the table under '## The example sheet'."""
    section = TEXT.split("## The example sheet", 1)[1].split("\n## ", 1)[0]
    lines = [line for line in section.splitlines() if line.startswith("|")]
    header = [cell.strip() for cell in lines[0].strip("|").split("|")]
    columns = header[1:]
    assert all(re.fullmatch(r"[A-Z]", c) for c in columns), header
    cells = {}
    for line in lines[2:]:
        row, *values = [cell.strip() for cell in line.strip().strip("|").split("|")]
        for column, value in zip(columns, values):
            cells[(column, int(row))] = _sheet_value(value)
    return cells


def _sheet_value(text):
    """A cell as the page shows it: a number, text (also 1500+), or blank."""
    if text == "":
        return None
    if text.startswith("*") and text.endswith("*"):
        return text.strip("*")  # header text, shown in italics
    try:
        return float(text) if "." in text or "e" in text.lower() else int(text)
    except ValueError:
        return text


SHEET = example_sheet()


def cell_range(reference):
    """A range such as A2:A13 as a spreadsheet passes it: rows of cells, None for blanks."""
    match = re.fullmatch(r"([A-Z])(\d+)(?::([A-Z])(\d+))?", reference)
    first_col, first_row = match.group(1), int(match.group(2))
    last_col, last_row = (match.group(3), int(match.group(4))) if match.group(3) else (first_col, first_row)
    columns = [chr(c) for c in range(ord(first_col), ord(last_col) + 1)]
    rows = [[SHEET.get((c, r)) for c in columns] for r in range(first_row, last_row + 1)]
    return rows if match.group(3) else rows[0][0]


# --------------------------------------------------------------------------- formulas as typed


def split_arguments(text):
    """Top-level comma-separated arguments (commas inside quotes or braces stay)."""
    parts, depth, quoted, current = [], 0, False, ""
    for char in text:
        if char == '"':
            quoted = not quoted
        elif not quoted and char == "{":
            depth += 1
        elif not quoted and char == "}":
            depth -= 1
        if char == "," and depth == 0 and not quoted:
            parts.append(current)
            current = ""
        else:
            current += char
    parts.append(current)
    return [part.strip() for part in parts]


def argument(text):
    """One argument as a spreadsheet passes it to the formula."""
    if text == "":
        return None
    if text.startswith('"') and text.endswith('"'):
        return text[1:-1]
    if text in {"TRUE", "FALSE"}:
        return text == "TRUE"
    if text.startswith("{"):
        rows = text[1:-1].split(";")
        return [[argument(value.strip()) for value in row.split(",")] for row in rows]
    if re.fullmatch(r"[A-Z]\d+(:[A-Z]\d+)?", text):
        return cell_range(text)
    if text.startswith("#"):
        return text  # an error value, as engines other than Windows Excel pass it
    return float(text) if re.search(r"[.eE]", text) else int(text)


def call(formula_text):
    """Evaluate '=NAME(arg, ...)' with the registered formula."""
    match = re.fullmatch(r"=([A-Z_]+)\((.*)\)", formula_text.strip())
    assert match, formula_text
    name, inside = match.groups()
    arguments = [argument(a) for a in split_arguments(inside)] if inside.strip() else []
    return name, sheet.FORMULAS[name](*arguments)


def matches(actual, shown):
    """Does a cell value agree with the page, to the digits the page shows?"""
    if isinstance(actual, str) or shown.startswith("#TAILSTOP!"):
        return actual == shown
    if isinstance(actual, bool) or not isinstance(actual, (int, float)):
        return False
    try:
        float(shown)
    except ValueError:
        return False
    if "e" in shown.lower():
        mantissa = shown.lower().split("e")[0]
        digits = len(mantissa.split(".")[1]) if "." in mantissa else 0
        return f"{actual:.{digits}e}" == shown
    digits = len(shown.split(".")[1]) if "." in shown else 0
    return f"{actual:.{digits}f}" == shown


def as_rows(result):
    """Any formula result as a list of rows."""
    if isinstance(result, list):
        return [row if isinstance(row, list) else [row] for row in result]
    return [[result]]


# --------------------------------------------------------------------------- what the page holds


def example_blocks():
    """(formula text, shown rows) for every example in a fenced block."""
    examples = []
    for block in re.findall(r"```text\n(.*?)```", TEXT, flags=re.DOTALL):
        lines = block.splitlines()
        i = 0
        while i < len(lines):
            if lines[i].startswith("="):
                formula_text = lines[i]
                assert lines[i + 1].startswith("→ "), f"no result after {formula_text}"
                shown = [lines[i + 1][2:]]
                i += 2
                while i < len(lines) and lines[i].startswith("  "):
                    shown.append(lines[i][2:])
                    i += 1
                examples.append((formula_text, [[c.strip() for c in row.split(" | ")] for row in shown]))
            else:
                i += 1
    return examples


def error_rows():
    """(formula text, error text) for every row of the error tables."""
    # the text sits in `...`, or in `` ... `` when it holds a backtick itself
    rows = re.findall(r"^\| `(=[A-Z_]+\(.*?\))` \| (`+) ?(#TAILSTOP! .*?) ?\2 \|", TEXT, flags=re.MULTILINE)
    return [(formula_text, message) for formula_text, _, message in rows]


def sections():
    """{name: section text} for every '### NAME(args)' heading."""
    found = {}
    for heading, body in re.findall(r"^### `([A-Z_]+\(.*?\))`\n(.*?)(?=^##)", TEXT + "\n##", flags=re.DOTALL | re.MULTILINE):
        found[heading.split("(")[0]] = (heading, body)
    return found


def result_kind(name, body):
    """What the formula's first working example in its section returns: number, text, row, column or table."""
    for formula_text, _ in EXAMPLES:
        if formula_text.startswith(f"={name}(") and formula_text in body:
            result = call(formula_text)[1]
            if isinstance(result, str) and not result.startswith("#TAILSTOP!"):
                return "text"
            if isinstance(result, (int, float)):
                return "number"
            if isinstance(result, list):
                rows = as_rows(result)
                if len(rows) == 1 and len(rows[0]) == 2:
                    return "row"
                return "column" if all(len(row) == 1 for row in rows) else "table"
    raise AssertionError(f"{name}: no working example in its section")


def signature(name):
    parameters = inspect.signature(sheet.FORMULAS[name].tailstop_body).parameters.items()
    return [f"[{p}]" if q.default is not inspect.Parameter.empty else p for p, q in parameters]


EXAMPLES = example_blocks()
ERRORS = error_rows()
SECTIONS = sections()


# --------------------------------------------------------------------------- tests


def test_the_page_has_examples_and_error_rows():
    # a parser that finds nothing would make every test below pass vacuously
    assert len(EXAMPLES) >= len(sheet.FORMULAS)
    assert len(ERRORS) >= len(sheet.FORMULAS)
    assert len(SHEET) >= 12


@pytest.mark.parametrize("formula_text, shown", EXAMPLES, ids=[e[0] for e in EXAMPLES])
def test_example_returns_what_the_page_shows(formula_text, shown):
    _, result = call(formula_text)
    rows = as_rows(result)
    assert len(rows) == len(shown), f"{formula_text}: {len(rows)} rows, the page shows {len(shown)}: {rows}"
    for row, shown_row in zip(rows, shown):
        assert len(row) == len(shown_row), f"{formula_text}: row {row} against {shown_row}"
        for value, text in zip(row, shown_row):
            assert matches(value, text), f"{formula_text}: returns {value!r}, the page shows {text!r}"


@pytest.mark.filterwarnings("ignore:overflow encountered:RuntimeWarning")
@pytest.mark.parametrize("formula_text, message", ERRORS, ids=[e[0] for e in ERRORS])
def test_error_text_is_what_the_formula_says(formula_text, message):
    _, result = call(formula_text)
    assert result == message


# What each row of the page's "is described as" table stands for, as a spreadsheet passes it.
DESCRIBED = {
    "a date or a time": datetime.date(2026, 1, 31),
    "the `#TAILSTOP!` text of another formula": "#TAILSTOP! threshold must be > 0 (got 0)",
    "an infinite value": float("inf"),
}


def test_cell_descriptions_are_what_the_formulas_say():
    rows = dict(re.findall(r"^\| (a date or a time|the `#TAILSTOP!` text of another formula|an infinite value) \| `(.*?)` \|$",
                           TEXT, flags=re.MULTILINE))
    assert set(rows) == set(DESCRIBED)
    for label, value in DESCRIBED.items():
        result = sheet.TAIL_PROB_EST([[412.0], [value], [877.0]], 1000)
        assert result == f"#TAILSTOP! observations: row 2 {rows[label]}", label


def test_matches_is_strict_about_the_digits_shown():
    # the comparison itself: a wrong value or a wrong rounding must not pass
    assert matches(0.04999, "0.0500") and not matches(0.0502, "0.0500")
    assert matches(115, "115") and not matches(116, "115")
    assert matches(8.357e-13, "8.357e-13") and not matches(8.36e-13, "8.357e-13")
    assert not matches("STOP", "PAST STOP") and not matches(1.0, "one")


@pytest.mark.parametrize("name", list(sheet.FORMULAS))
def test_every_formula_has_a_section_with_its_arguments_in_order(name):
    assert name in SECTIONS, f"docs/formulas.md has no '### `{name}(...)`' section"
    heading, body = SECTIONS[name]
    assert heading == f"{name}({', '.join(signature(name))})"
    table = re.findall(r"^\| `([a-z_]+)` \|", body, flags=re.MULTILINE)
    assert table == [p.strip("[]") for p in signature(name)], f"{name}: argument table {table}"
    kind = result_kind(name, body)
    assert re.search(rf"^\*\*Returns\*\* {re.escape(RETURNS[kind])}\b", body, flags=re.MULTILINE), \
        f"{name}: the Returns line should start with '{RETURNS[kind]}'"


@pytest.mark.parametrize("name", list(sheet.FORMULAS))
def test_every_formula_has_an_example_and_an_error_text_in_its_section(name):
    _, body = SECTIONS[name]
    own_examples = [f for f, _ in EXAMPLES if f.startswith(f"={name}(") and f in body]
    assert own_examples, f"{name}: no example in its section"
    assert any(not str(call(f)[1]).startswith("#TAILSTOP!") for f in own_examples), \
        f"{name}: every example in its section is an error"
    own_errors = [f for f, _ in ERRORS if f.startswith(f"={name}(") and f in body]
    assert own_errors, f"{name}: no error text in its section"


def test_each_formula_has_exactly_one_section():
    headings = re.findall(r"^### `([A-Z_]+)\(", TEXT, flags=re.MULTILINE)
    assert sorted(headings) == sorted(sheet.FORMULAS)


def test_check_values_quoted_on_the_page():
    shown = {formula_text: rows for formula_text, rows in EXAMPLES}
    # check value: NIST/SEMATECH §1.3.6.7.4, chi-square upper 5 % point 18.307 at 10 df (gamma shape 5, scale 2)
    assert shown["=TAIL_PROB(18.307, 5, 2)"] == [[f"{0.05:.4f}"]]
    # check value: Erlang identity Q(k, t) = P(Poisson(t) <= k - 1) (Johnson, Kotz & Balakrishnan vol. 1)
    assert shown["=TAIL_PROB(1800, 2, 600)"] == [[f"{math.exp(-3.0) * (1 + 3.0):.4f}"]]
    # check value: z = 1.959964, NIST/SEMATECH §1.3.6.7.1; pass-fail σ² = 1/(p(1-p)) = 4 at p = 0.5
    assert shown["=UNITS_REQUIRED_FROM_P(0.5, 1.5, 0.95)"] == [[str(math.ceil((1.959964 / math.log(1.5)) ** 2 * 4))]]
    # by hand from the example sheet: 5 of 12 beyond 1000 h, odds 5/7, bounds within a factor 2
    beyond = sum(1 for r in range(2, 14) if SHEET[("A", r)] > 1000)
    assert beyond == 5
    assert shown["=TAIL_PROB_EST(A2:A13, 1000)"] == [[f"{beyond / 12:.4f}"]]
    odds = beyond / (12 - beyond)
    assert shown["=TAIL_ODDS_BOUNDS(A2:A13, 1000, 2)"] == [[f"{odds / 2:.4f}", f"{odds * 2:.4f}"]]
    assert shown["=TAIL_PROB_BOUNDS(A2:A13, 1000, 2)"] == [[f"{odds / 2 / (1 + odds / 2):.4f}",
                                                           f"{odds * 2 / (1 + odds * 2):.4f}"]]


def test_column_b_is_column_a_run_as_a_pass_fail_test():
    # what the page says of its invented sheet: B is A with every unit past 1000 h taken off at 1000 h
    assert all(SHEET[("B", r)] == (SHEET[("A", r)] if SHEET[("A", r)] <= 1000 else "1000+") for r in range(2, 14))


def test_limits_quoted_on_the_page_are_the_code_s():
    from tailstop.core.models.gamma import fit
    from tailstop.sheet import planning

    said = " ".join(TEXT.split())
    samples = inspect.signature(fit.gamma_fit_pvalue).parameters["samples"].default
    assert samples == 999 and "999 simulated samples" in said
    assert f"more than about {round(fit.GOF_VALUE_BUDGET / samples, -3):,.0f} units" in said
    assert f"more than {fit.GOF_VALUE_BUDGET // fit.GOF_MIN_SAMPLES:,} units are refused" in said
    limits = (f"exact plans up to {planning.EXACT_UNITS_LIMIT:,} units, at most "
              f"{planning.REPLICATIONS_LIMIT:,} replications, and at most "
              f"{planning.WORK_LIMIT['known-shape']:,} (known-shape) or "
              f"{planning.WORK_LIMIT['fitted-shape']:,} (fitted-shape) replications × units per run")
    assert limits in said
    assert set(planning.DEFAULT_REPLICATIONS.values()) == {10_000} and "(default 10,000" in said
    assert f"a whole number from 2 to {planning.EXACT_UNITS_LIMIT:,}" in said
