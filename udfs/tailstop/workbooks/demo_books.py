"""The demo books of ``tailstop demo``, built from the invented valve scenario (``tailstop.scenario``).

Two books:

``valve-bench-log.xlsx``
    *Read me*; *Log*: the bench log (unit, cycles to leak), the decision
    column, the running estimate with its bounds and its log-odds, the units
    the accuracy needs by the estimate so far, and the estimate block (the
    same layout ``tailstop annotate`` writes); *Charts*: the running log-odds
    with its fixed-accuracy bounds and the STOP marked, and the units needed
    against the units tested.
``valve-test-plan.xlsx``
    *Read me*; *Plan*: the planning guess as editable inputs, the exceedance
    probability under the guess (with the spreadsheet's own GAMMA.DIST beside
    it as a check), the three methods side by side (fixed-size units, expected
    units and real coverage of the sequential rule, accuracy of the units
    available) and the detailed table of what the rule will do.

Every tailstop cell holds its formula and, as its cached value, what that
formula returns when called headless with the same arguments — so the books
read correctly without the add-in and recompute with it. The cells of the
spreadsheet's own gamma check hold no cached value: the spreadsheet program
computes them on opening, which makes them an independent check.

The files are byte-for-byte reproducible: fixed document timestamps and
fixed zip entry times.
"""
from __future__ import annotations

import datetime as _dt
import io
import math
import re
import tempfile
import zipfile
from dataclasses import dataclass
from pathlib import Path

import openpyxl
from openpyxl.chart import Reference, ScatterChart, Series
from openpyxl.chart.layout import Layout, ManualLayout
from openpyxl.chart.marker import Marker
from openpyxl.chart.shapes import GraphicalProperties
from openpyxl.formatting.rule import FormulaRule
from openpyxl.styles import Alignment, Font, PatternFill
from openpyxl.utils.cell import get_column_letter

from ..core.notes import NO_NOTES_TEXT
from . import scenario
from .cached_values import save_with_cached_values, set_formula
from .log_layout import (
    HEADER_FILL,
    HEADER_FONT,
    INPUT_FILL,
    LIVE_NOTE_LINES,
    TITLE_FONT,
    LogAnalysis,
    LogRange,
    RulePlan,
    analyse_log,
    block_layout,
    sheet_reference,
    write_decision_column,
    write_estimate_block,
)
from .safe_io import write_file_atomically

__all__ = ["LOG_BOOK", "PLAN_BOOK", "DemoResult", "build_demo", "log_book", "plan_book", "deterministic_bytes"]

LOG_BOOK = "valve-bench-log.xlsx"
PLAN_BOOK = "valve-test-plan.xlsx"
FIXED_TIME = _dt.datetime(2026, 1, 5, 8, 0, 0)
METHOD = "pass-fail"
PLAN_METHODS = ("pass-fail", "known-shape", "fitted-shape")
SUMMARY_ROWS = 24  # the longest PLAN_SUMMARY table (pass-fail, with its pass-fail-exact rows)

SOFT_FONT = Font(italic=True, color="5D6D7E")
ROW_STOP_FILL = PatternFill("solid", fgColor="E3F2DD")
WRAP = Alignment(wrap_text=True, vertical="top")
# Series colours of the charts: estimate, bounds, stop marker, units tested.
ESTIMATE_COLOUR, BOUND_COLOUR, STOP_COLOUR, TESTED_COLOUR = "1F5F8B", "8EA9C1", "C0392B", "7F8C8D"


@dataclass(frozen=True)
class DemoResult:
    """What ``build_demo`` wrote and found."""

    paths: list
    changed: list
    backups: list
    analysis: LogAnalysis
    log: LogRange
    units: int
    planning: dict


def _formula(name):
    from ..sheet import FORMULAS

    return FORMULAS[name]


# --------------------------------------------------------------------------- the bench-log book


LOG_COLUMNS = {
    # letter: (header, width, number format)
    "A": ("Unit", 7, "0"),
    "B": (f"Cycles to leak ({scenario.UNIT})", 16, "0.0"),
    "C": None,  # the decision column (log_layout)
    "D": ("Estimate of p so far", 13, "0.0000"),
    "E": ("p, lower bound", 12, "0.0000"),
    "F": ("p, upper bound", 12, "0.0000"),
    "G": ("Log-odds so far", 12, "0.000"),
    "H": ("Log-odds, lower (- ln d)", 13, "0.000"),
    "I": ("Log-odds, upper (+ ln d)", 13, "0.000"),
    "J": ("Units needed now", 11, "0"),
}
DECISION_COLUMN = 3
BLOCK_COLUMN = 12  # L: labels, M: values


def log_book(units=None):
    """The bench-log book and what it shows: (workbook, cached values, LogAnalysis, LogRange).

    ``units`` shortens the log (for quick tests); default the whole scenario log.
    """
    lifetimes = [float(value) for value in scenario.bench_log()]
    if units is not None:
        lifetimes = lifetimes[:units]
    plan = RulePlan.checked(scenario.THRESHOLD, scenario.ACCURACY, scenario.CONFIDENCE, scenario.PILOT, METHOD)
    book = openpyxl.Workbook()
    _read_me(book.active, LOG_READ_ME)
    sheet = book.create_sheet("Log")
    for letter, spec in LOG_COLUMNS.items():
        if spec is None:
            continue
        header, width, _ = spec
        cell = sheet[f"{letter}1"]
        cell.value, cell.font, cell.fill = header, HEADER_FONT, HEADER_FILL
        cell.alignment = Alignment(wrap_text=True, vertical="center")
        sheet.column_dimensions[letter].width = width
    for unit, value in enumerate(lifetimes, start=1):
        sheet.cell(unit + 1, 1, unit).number_format = "0"
        sheet.cell(unit + 1, 2, value).number_format = "0.0"
    log = LogRange(sheet.title, 2, 2, len(lifetimes) + 1)
    analysis = analyse_log(log, lifetimes, plan)
    cached = {}
    layout = block_layout(1, BLOCK_COLUMN, LIVE_NOTE_LINES)
    write_estimate_block(sheet, layout, log, DECISION_COLUMN, analysis, live=True, cached=cached,
                         unit=scenario.UNIT)
    write_decision_column(sheet, log, DECISION_COLUMN, analysis, live=True, cached=cached, layout=layout)
    _running_columns(sheet, log, lifetimes, plan, layout, cached)
    for row in range(1, log.last_row + 1):
        sheet.cell(row, DECISION_COLUMN).alignment = Alignment(horizontal="center", vertical="center",
                                                               wrap_text=row == 1)
    sheet.row_dimensions[1].height = 32
    sheet.column_dimensions["C"].width = 15
    sheet.column_dimensions["K"].width = 3
    sheet.column_dimensions["L"].width = 44
    sheet.column_dimensions["M"].width = 22
    sheet.freeze_panes = "A2"
    sheet.conditional_formatting.add(f"A2:J{log.last_row}",
                                     FormulaRule(formula=['$C2="STOP"'], fill=ROW_STOP_FILL, stopIfTrue=False))
    _print_one_page_wide(sheet)
    charts = book.create_sheet("Charts")
    _charts(charts, sheet, log, analysis, plan, layout, cached)
    book.active = 0
    return book, cached, analysis, log


def _running_columns(sheet, log, lifetimes, plan, layout, cached):
    """D..J from the pilot's last unit down: the estimate of every prefix of the log, live."""
    a = layout.absolute
    method_args = f"{a('method')},{a('shape')}"
    estimate_of = _formula("TAIL_PROB_EST")
    bounds_of = _formula("TAIL_PROB_BOUNDS")
    needed_of = _formula("UNITS_NEEDED_NOW")
    column = [[value] for value in lifetimes]
    log_d = math.log(plan.accuracy)
    for units in range(plan.pilot, len(lifetimes) + 1):
        row = log.first_row + units - 1
        prefix = column[:units]
        rows = log.growing_reference(row)
        estimate = estimate_of(prefix, plan.threshold, plan.method, plan.shape)
        bounds = bounds_of(prefix, plan.threshold, plan.accuracy, plan.method, plan.shape)
        log_odds = _log_odds(estimate)
        needed = needed_of(column[:units], plan.threshold, plan.accuracy, plan.confidence, plan.method, plan.shape)
        cells = {
            "D": (f"=TAIL_PROB_EST({rows},{a('threshold')},{method_args})", estimate),
            "E": (f'=IFERROR(INDEX(TAIL_PROB_BOUNDS({rows},{a("threshold")},{a("accuracy")},{method_args}),1,1),"")',
                  _element(bounds, 0)),
            "F": (f'=IFERROR(INDEX(TAIL_PROB_BOUNDS({rows},{a("threshold")},{a("accuracy")},{method_args}),1,2),"")',
                  _element(bounds, 1)),
            "G": (f'=IFERROR(LN(D{row}/(1-D{row})),"")', log_odds),
            "H": (f'=IFERROR(G{row}-LN({a("accuracy")}),"")', "" if log_odds == "" else log_odds - log_d),
            "I": (f'=IFERROR(G{row}+LN({a("accuracy")}),"")', "" if log_odds == "" else log_odds + log_d),
            "J": (f"=UNITS_NEEDED_NOW({rows},{a('threshold')},{a('accuracy')},{a('confidence')},{method_args})",
                  needed),
        }
        for letter, (text, value) in cells.items():
            set_formula(sheet, f"{letter}{row}", text, value, cached)
            sheet[f"{letter}{row}"].number_format = LOG_COLUMNS[letter][2]


def _element(result, index):
    """IFERROR(INDEX(result,1,index+1),"") of a 1×2 formula result."""
    if isinstance(result, list):
        return result[0][index]
    return result if index == 0 else ""


def _log_odds(p):
    """What IFERROR(LN(p/(1-p)),"") shows."""
    if isinstance(p, float) and 0 < p < 1:
        return math.log(p / (1 - p))
    return ""


def _charts(charts, log_sheet, log, analysis, plan, layout, cached):
    """The helper cells that place the STOP marker, and the two charts."""
    title = charts["A1"]
    title.value, title.font = "Where the rule stopped (read from the Log sheet; the charts use these cells)", TITLE_FONT
    on_log = sheet_reference(log_sheet.title)
    first, last = log.first_row + plan.pilot - 1, log.last_row
    units_cell = f"{on_log}!{layout.absolute('units_used')}"
    rows_cell = f"{on_log}!{layout.absolute('rows_used')}"
    columns = {letter: f"{on_log}!${letter}${first}:${letter}${last}" for letter in "AGHIJ"}
    stop_row = log.first_row + (analysis.stop_offset if analysis.stopped else log.rows - 1)
    values = {letter: _cached_column(cached, log_sheet.title, letter, first, last) for letter in "GHIJ"}
    log_odds_at_stop = cached[(log_sheet.title, f"G{stop_row}")]
    lowest = min(v for v in values["H"] if isinstance(v, float))
    highest = max(v for v in values["I"] if isinstance(v, float))
    most_needed = max(v for v in values["J"] if isinstance(v, int))
    rows = [
        ("Unit at the STOP (N)", f"={units_cell}", analysis.filled_used, "0"),
        # the block's rows used cell holds the sheet row of the STOP: an index into the column from row 1
        ("Log-odds at the STOP", f"=INDEX({on_log}!$G$1:$G${last},{rows_cell})", log_odds_at_stop,
         "0.000"),
        ("Lowest lower bound shown", f"=MIN({columns['H']})", lowest, "0.000"),
        ("Highest upper bound shown", f"=MAX({columns['I']})", highest, "0.000"),
        ("Most units needed shown", f"=MAX({columns['J']})", most_needed, "0"),
    ]
    for offset, (label, formula, value, number_format) in enumerate(rows, start=3):
        charts.cell(offset, 1, label).font = Font(bold=True, color="34495E")
        set_formula(charts, f"B{offset}", formula, value, cached)
        charts[f"B{offset}"].number_format = number_format
    _stop_lines(charts, analysis.filled_used, lowest, highest, most_needed, cached)
    charts.column_dimensions["A"].width = 30
    charts.column_dimensions["B"].width = 12
    charts.add_chart(_log_odds_chart(log_sheet, charts, first, last, plan), "A10")
    charts.add_chart(_units_chart(log_sheet, charts, first, last), "A42")


def _stop_lines(charts, units, lowest, highest, most_needed, cached):
    """Two-point series (N, low) - (N, high) that draw the vertical STOP line of each chart."""
    charts["D2"], charts["E2"], charts["F2"] = "STOP line x", "log-odds y", "units y"
    for cell in ("D2", "E2", "F2"):
        charts[cell].font = SOFT_FONT
    for row, (y_odds, y_cached) in enumerate((("=$B$5", lowest), ("=$B$6", highest)), start=3):
        set_formula(charts, f"D{row}", "=$B$3", units, cached)
        set_formula(charts, f"E{row}", y_odds, y_cached, cached)
    charts["F3"] = 0
    set_formula(charts, "F4", "=$B$7", most_needed, cached)
    for row in (3, 4):
        charts[f"D{row}"].number_format, charts[f"E{row}"].number_format = "0", "0.000"
        charts[f"F{row}"].number_format = "0"


def _cached_column(cached, title, letter, first, last):
    return [cached.get((title, f"{letter}{row}")) for row in range(first, last + 1)]


def _line(series, colour, width=22000, dash=None):
    series.marker = Marker(symbol="none")
    series.smooth = False
    series.graphicalProperties.line.solidFill = colour
    series.graphicalProperties.line.width = width
    if dash:
        series.graphicalProperties.line.dashStyle = dash


def _scatter(title, x_title, y_title):
    chart = ScatterChart()
    chart.title = title
    chart.style = 2
    chart.x_axis.title = x_title
    chart.y_axis.title = y_title
    chart.x_axis.delete = False
    chart.y_axis.delete = False
    chart.x_axis.crosses = "min"  # the unit axis at the bottom, also when every log-odds is negative
    chart.x_axis.scaling.min = 0
    chart.height, chart.width = 14, 26
    chart.legend.position = "b"
    chart.layout = Layout(manualLayout=ManualLayout(x=0.06, y=0.08, w=0.9, h=0.72))
    return chart


def _log_odds_chart(log_sheet, charts, first, last, plan):
    chart = _scatter("Running estimate of the log-odds, with the fixed-accuracy bounds (± ln d)",
                     "units tested", "log-odds  ln(p / (1 - p))")
    units = Reference(log_sheet, min_col=1, min_row=first, max_row=last)
    for column, name, colour, dash in ((7, "log-odds estimate", ESTIMATE_COLOUR, None),
                                       (8, f"lower bound (/ {plan.accuracy:g} on the odds)", BOUND_COLOUR, "dash"),
                                       (9, f"upper bound (x {plan.accuracy:g} on the odds)", BOUND_COLOUR, "dash")):
        series = Series(Reference(log_sheet, min_col=column, min_row=first, max_row=last), units, title=name)
        _line(series, colour, dash=dash)
        chart.series.append(series)
    stop = Series(Reference(charts, min_col=5, min_row=3, max_row=4), Reference(charts, min_col=4, min_row=3, max_row=4),
                  title="rule stopped (STOP)")
    _line(stop, STOP_COLOUR, width=28000)
    chart.series.append(stop)
    point = Series(Reference(charts, min_col=2, min_row=4, max_row=4), Reference(charts, min_col=2, min_row=3, max_row=3),
                   title="estimate at the STOP")
    point.marker = Marker(symbol="circle", size=8)
    point.marker.graphicalProperties = GraphicalProperties(solidFill=STOP_COLOUR)
    point.marker.graphicalProperties.line.solidFill = STOP_COLOUR
    point.graphicalProperties.line.noFill = True
    chart.series.append(point)
    return chart


def _units_chart(log_sheet, charts, first, last):
    chart = _scatter("Units the accuracy needs by the estimate so far, against the units tested",
                     "units tested", "units")
    units = Reference(log_sheet, min_col=1, min_row=first, max_row=last)
    needed = Series(Reference(log_sheet, min_col=10, min_row=first, max_row=last), units,
                    title="units needed by the estimate so far")
    _line(needed, ESTIMATE_COLOUR)
    tested = Series(Reference(log_sheet, min_col=1, min_row=first, max_row=last), units, title="units tested")
    _line(tested, TESTED_COLOUR, dash="dash")
    stop = Series(Reference(charts, min_col=6, min_row=3, max_row=4), Reference(charts, min_col=4, min_row=3, max_row=4),
                  title="rule stopped (STOP): units tested reached units needed")
    _line(stop, STOP_COLOUR, width=28000)
    chart.series += [needed, tested, stop]
    return chart


# --------------------------------------------------------------------------- the planning book


PLAN_INPUTS = (
    # key, label, value, number format
    ("threshold", f"Threshold: warranty limit ({scenario.UNIT})", scenario.THRESHOLD, "0"),
    ("shape", "Guessed gamma shape", scenario.GUESS_SHAPE, "0.00"),
    ("scale", f"Guessed gamma scale ({scenario.UNIT})", scenario.GUESS_SCALE, "0"),
    ("accuracy", "Accuracy d: odds within a factor d", scenario.ACCURACY, "0.00"),
    ("confidence", "Confidence", scenario.CONFIDENCE, "0.00"),
    ("pilot", "Pilot (units)", scenario.PILOT, "0"),
    ("method", "Method of the detailed table", METHOD, None),
    ("available", "Units available for a fixed-size test", 60, "0"),
)


def plan_book():
    """The planning book: (workbook, cached values, {figure: value} for the summary)."""
    book = openpyxl.Workbook()
    _read_me(book.active, PLAN_READ_ME)
    sheet = book.create_sheet("Plan")
    cached = {}
    sheet["A1"] = "Planning the valve life test: change the sand-coloured inputs, the figures follow (with the add-in)"
    sheet["A1"].font = TITLE_FONT
    inputs = {}
    for row, (key, label, value, number_format) in enumerate(PLAN_INPUTS, start=3):
        sheet.cell(row, 1, label).font = Font(bold=True, color="34495E")
        cell = sheet.cell(row, 2, value)
        cell.fill = INPUT_FILL
        if number_format:
            cell.number_format = number_format
        inputs[key] = f"$B${row}"
    values = {key: value for key, _, value, _ in PLAN_INPUTS}
    guess = f"{inputs['threshold']},{inputs['shape']},{inputs['scale']}"
    rule = f"{guess},{inputs['accuracy']},{inputs['confidence']}"
    figures = {}

    row = len(PLAN_INPUTS) + 4
    _section(sheet, row, "The guess: probability that a valve outlasts the limit")
    p_guess = _formula("TAIL_PROB")(values["threshold"], values["shape"], values["scale"])
    figures["p_guess"] = p_guess
    sheet.cell(row + 1, 1, "P(life > threshold), tailstop TAIL_PROB").font = Font(bold=True, color="34495E")
    set_formula(sheet, f"B{row + 1}", f"=TAIL_PROB({guess})", p_guess, cached)
    sheet.cell(row + 2, 1, "The same by the spreadsheet's own GAMMA.DIST (computed on opening)").font = SOFT_FONT
    sheet[f"B{row + 2}"] = f"=1-_xlfn.GAMMA.DIST({guess},TRUE)"
    sheet.cell(row + 3, 1, "Difference (a check of the add-in)").font = SOFT_FONT
    sheet[f"B{row + 3}"] = f"=ABS(B{row + 1}-B{row + 2})"
    for offset, number_format in ((1, "0.000000"), (2, "0.000000"), (3, "0.0E+00")):
        sheet[f"B{row + offset}"].number_format = number_format
    figures["gamma_check_cells"] = (f"B{row + 1}", f"B{row + 2}")

    row += 5
    _section(sheet, row, "The three methods side by side (pass-fail exact; the gamma methods simulated)")
    for offset, method in enumerate(PLAN_METHODS):
        head = sheet.cell(row + 1, 3 + offset, method)
        head.font, head.fill, head.alignment = HEADER_FONT, HEADER_FILL, Alignment(horizontal="center")
    method_row = row + 1
    table = (
        ("Units for a fixed-size test (UNITS_REQUIRED)", "UNITS_REQUIRED", f"{rule}", "0"),
        ("Expected units of the sequential rule, E[N] (PLAN_EXPECTED_UNITS)", "PLAN_EXPECTED_UNITS",
         f"{rule},{inputs['pilot']}", "0.0"),
        ("Real coverage of its final interval (PLAN_COVERAGE)", "PLAN_COVERAGE", f"{rule},{inputs['pilot']}", "0.000"),
        ("Accuracy d the units available reach (ACCURACY_FOR_UNITS)", "ACCURACY_FOR_UNITS",
         f"{inputs['available']},{guess},{inputs['confidence']}", "0.000"),
    )
    for offset, (label, name, arguments, number_format) in enumerate(table, start=2):
        sheet.cell(row + offset, 1, label).font = Font(bold=True, color="34495E")
        for index, method in enumerate(PLAN_METHODS):
            letter = get_column_letter(3 + index)
            value = _plan_value(name, values, method)
            figures[(name, method)] = value
            set_formula(sheet, f"{letter}{row + offset}", f"={name}({arguments},{letter}${method_row})", value, cached)
            sheet[f"{letter}{row + offset}"].number_format = number_format

    row += len(table) + 3
    _section(sheet, row, "What the sequential rule will do with the method of the detailed table")
    summary = _formula("PLAN_SUMMARY")(values["threshold"], values["shape"], values["scale"], values["accuracy"],
                                       values["confidence"], values["pilot"], values["method"])
    figures["summary"] = summary
    arguments = f"{rule},{inputs['pilot']},{inputs['method']}"
    for line in range(1, SUMMARY_ROWS + 1):
        for column in (1, 2):
            letter = get_column_letter(column)
            value = summary[line - 1][column - 1] if line <= len(summary) else ""
            set_formula(sheet, f"{letter}{row + line}",
                        f'=IFERROR(INDEX(PLAN_SUMMARY({arguments}),{line},{column}),"")', value, cached)
        sheet[f"B{row + line}"].number_format = SUMMARY_NUMBER_FORMAT
    caution = sheet.cell(row + SUMMARY_ROWS + 2, 1, "Figures assume independent valves with gamma lifetimes at the "
                                                    "guessed parameters (pass-fail: only the probability).")
    caution.font = SOFT_FONT
    _three_models(sheet, row + SUMMARY_ROWS + 4, inputs, values, figures, cached)
    sheet.column_dimensions["A"].width = 64
    for letter in "BCDE":
        sheet.column_dimensions[letter].width = 14
    sheet.freeze_panes = "A3"
    _print_one_page_wide(sheet)
    book.active = 1
    return book, cached, figures


MODEL_NAMES_SHOWN = ("gamma", "weibull", "lognormal")


def matched_models(shape, scale):
    """(shape, scale) of each model with the mean and standard deviation of the gamma guess (a, s)."""
    from scipy import optimize, special

    mean, cv2 = shape * scale, 1.0 / shape  # gamma: mean a·s, squared coefficient of variation 1/a

    def weibull_cv2(beta):
        return math.exp(special.gammaln(1 + 2 / beta) - 2 * special.gammaln(1 + 1 / beta)) - 1 - cv2

    beta = optimize.brentq(weibull_cv2, 0.05, 100.0, xtol=1e-14)
    sigma2 = math.log1p(cv2)
    return {
        "gamma": (shape, scale),
        "weibull": (beta, mean / math.exp(special.gammaln(1 + 1 / beta))),
        "lognormal": (math.sqrt(sigma2), mean / math.exp(sigma2 / 2)),
    }


def _three_models(sheet, row, inputs, values, figures, cached):
    """The team's guess under each lifetime model, matched by mean and standard deviation."""
    _section(sheet, row, "The same guess under three lifetime models (matched to the gamma guess's mean and spread)")
    models = matched_models(values["shape"], values["scale"])
    for index, model in enumerate(MODEL_NAMES_SHOWN):
        head = sheet.cell(row + 1, 3 + index, model)
        head.font, head.fill, head.alignment = HEADER_FONT, HEADER_FILL, Alignment(horizontal="center")
    sheet.cell(row + 2, 1, "Shape (gamma a, Weibull β, lognormal σ)").font = Font(bold=True, color="34495E")
    sheet.cell(row + 3, 1, f"Scale ({scenario.UNIT}; gamma s, Weibull η, lognormal median)").font = \
        Font(bold=True, color="34495E")
    table = (
        ("P(life > threshold) (TAIL_PROB)", "TAIL_PROB", "0.0000"),
        ("Units for a fixed-size test, fitted-shape (UNITS_REQUIRED)", "UNITS_REQUIRED", "0"),
        ("Expected units of the pass-fail rule, E[N] (PLAN_EXPECTED_UNITS, exact)", "PLAN_EXPECTED_UNITS", "0.0"),
    )
    for offset, (label, _, _) in enumerate(table, start=4):
        sheet.cell(row + offset, 1, label).font = Font(bold=True, color="34495E")
    for index, model in enumerate(MODEL_NAMES_SHOWN):
        letter = get_column_letter(3 + index)
        shape, scale = models[model]
        for offset, value, number_format, source in ((2, shape, "0.000", inputs["shape"]),
                                                      (3, scale, "0", inputs["scale"])):
            coordinate = f"{letter}{row + offset}"
            if model == "gamma":  # the gamma column is the team's guess itself
                set_formula(sheet, coordinate, f"={source}", value, cached)
            else:
                sheet[coordinate] = float("%.6g" % value)
                sheet[coordinate].fill = INPUT_FILL
            sheet[coordinate].number_format = number_format
        shape_value = shape if model == "gamma" else sheet[f"{letter}{row + 2}"].value
        scale_value = scale if model == "gamma" else sheet[f"{letter}{row + 3}"].value
        shape_cell, scale_cell = f"{letter}${row + 2}", f"{letter}${row + 3}"
        guess = f"{inputs['threshold']},{shape_cell},{scale_cell}"
        model_cell = f"{letter}${row + 1}"
        rule = f"{guess},{inputs['accuracy']},{inputs['confidence']}"
        formulas = {
            "TAIL_PROB": (f"=TAIL_PROB({guess},{model_cell})",
                          _formula("TAIL_PROB")(values["threshold"], shape_value, scale_value, model)),
            "UNITS_REQUIRED": (f'=UNITS_REQUIRED({rule},"fitted-shape",{model_cell})',
                               _formula("UNITS_REQUIRED")(values["threshold"], shape_value, scale_value,
                                                          values["accuracy"], values["confidence"], "fitted-shape",
                                                          model)),
            "PLAN_EXPECTED_UNITS": (f'=PLAN_EXPECTED_UNITS({rule},{inputs["pilot"]},"pass-fail",,,{model_cell})',
                                    _formula("PLAN_EXPECTED_UNITS")(values["threshold"], shape_value, scale_value,
                                                                    values["accuracy"], values["confidence"],
                                                                    values["pilot"], "pass-fail", None, None, model)),
        }
        for offset, (label, name, number_format) in enumerate(table, start=4):
            formula, value = formulas[name]
            figures[("models", name, model)] = value
            set_formula(sheet, f"{letter}{row + offset}", formula, value, cached)
            sheet[f"{letter}{row + offset}"].number_format = number_format
    note = sheet.cell(row + len(table) + 5, 1, "The three fit a short log about equally well, yet differ in the tail "
                                               "beyond the threshold: the choice of model matters (FIT_COMPARE on "
                                               "the log; docs/method.md).")
    note.font = SOFT_FONT


def _plan_value(name, values, method):
    function = _formula(name)
    guess = (values["threshold"], values["shape"], values["scale"])
    if name == "UNITS_REQUIRED":
        return function(*guess, values["accuracy"], values["confidence"], method)
    if name == "ACCURACY_FOR_UNITS":
        return function(values["available"], *guess, values["confidence"], method)
    return function(*guess, values["accuracy"], values["confidence"], values["pilot"], method)


def _print_one_page_wide(sheet, orientation="landscape"):
    """Every column on one page width (rows run on as they need)."""
    sheet.page_setup.orientation = orientation
    sheet.page_setup.fitToWidth = 1
    sheet.page_setup.fitToHeight = 0
    sheet.sheet_properties.pageSetUpPr.fitToPage = True


def _section(sheet, row, text):
    cell = sheet.cell(row, 1, text)
    cell.font = Font(bold=True, size=11, color="FFFFFF")
    cell.fill = HEADER_FILL
    for column in range(2, 6):
        sheet.cell(row, column).fill = HEADER_FILL


# --------------------------------------------------------------------------- read-me sheets


CAUTION_LINES = (
    "Cautions. The accuracy guarantee is asymptotic (it holds as the accuracy factor d approaches 1). The gamma "
    "methods assume gamma-distributed lifetimes; pass-fail assumes nothing about their shape. Every method "
    "assumes independent, identically tested units. Reliability figures feed safety decisions: the governing "
    "standards, the customer's requirements and licensed engineering judgment take precedence over any figure "
    "in this book.",
    "All data in this book are invented for the demonstration (an imaginary bench test of solenoid valves).",
)

LOG_READ_ME = (
    "Valve bench log: when to stop testing, and what the test shows",
    "An imaginary maker of irrigation solenoid valves runs valves on a cycling bench until the seat leaks. The "
    f"question: what share of valves outlasts the warranty limit of {scenario.THRESHOLD:g} {scenario.UNIT}, with "
    f"the odds known within a factor {scenario.ACCURACY:g} at {scenario.CONFIDENCE * 100:g} % confidence?",
    "How to read the Log sheet",
    "Column B is the log, one valve per row, in test order. Column C says after each valve what the stopping rule "
    f"decides: PILOT for the first {scenario.PILOT - 1} valves, CONTINUE while more valves are needed, STOP at "
    "the first valve after which the data show the accuracy is reached (that row is shaded green), PAST STOP for "
    "valves tested afterwards (they are not used for the final figure).",
    "Columns D to F: the estimate of p = P(life > limit) from the valves so far, with its fixed-accuracy bounds. "
    "Columns G to I: the same on the log-odds scale, where the bounds are the estimate ± ln d. Column J: the "
    "valves the accuracy needs by the estimate so far; the rule stops once the valves tested reach it.",
    "The estimate block (columns L and M) gives the final figures: from the valves down to the STOP row. Its "
    "sand-coloured cells are the rule's settings; with the tailstop add-in installed, change one and every "
    "column recomputes. Without the add-in the book shows the values tailstop stored when it built the book.",
    "The Charts sheet draws the running log-odds with its bounds and the units needed against the units "
    "tested, with the STOP marked.",
    *CAUTION_LINES,
)

PLAN_READ_ME = (
    "Planning the valve life test: a what-if sheet for the planning meeting",
    "Before the test starts, the team brings a guess of the valves' lifetime distribution (a gamma shape and "
    "scale). The Plan sheet shows what a fixed-size test would need, what the sequential stopping rule will do "
    "(how many valves it is expected to test, how often its final interval holds the true value) for each "
    "method, and the accuracy a given number of valves buys.",
    "How to use it",
    "Change a sand-coloured input: with the tailstop add-in installed, every figure recomputes. Without the "
    "add-in the sheet shows the values tailstop stored when it built the book. The spreadsheet's own "
    "GAMMA.DIST, next to TAIL_PROB, is computed by your spreadsheet program: the two must agree.",
    "pass-fail figures are exact; known-shape and fitted-shape figures are simulated (seeded, so they repeat), "
    "with their Monte Carlo standard errors in the detailed table.",
    *CAUTION_LINES,
)


# The detailed table holds counts, expected units, probabilities far in the tail and names in one column,
# and its rows change with the method typed in the sheet: a format by size, not by row.
SUMMARY_NUMBER_FORMAT = "[>=100]0.0;[>=0.001]0.0000;0.000E+00"

# The Read me column fits a portrait page at 100 % in a wide default font too (DejaVu Sans, where Calibri is
# missing); the characters that fit on one of its lines in that font, a line's height in points.
_READ_ME_WIDTH = 72
_READ_ME_CHARACTERS_PER_LINE = 80
_LINE_POINTS = 15


def _read_me(sheet, lines):
    sheet.title = "Read me"
    sheet.column_dimensions["A"].width = _READ_ME_WIDTH
    row = 1
    for index, text in enumerate(lines):
        cell = sheet.cell(row, 1, text)
        cell.alignment = WRAP
        # spreadsheet programs do not all grow a row to fit wrapped text on opening
        wrapped_lines = max(1, math.ceil(len(text) / _READ_ME_CHARACTERS_PER_LINE))
        sheet.row_dimensions[row].height = _LINE_POINTS * wrapped_lines + (6 if index == 0 else 2)
        if index == 0:
            cell.font = Font(bold=True, size=14, color="34495E")
        elif text.startswith("How to"):
            cell.font = Font(bold=True, color="34495E")
        elif text.startswith(("Cautions", "All data")):
            cell.font = Font(italic=True, color="5D6D7E")
        row += 2 if index == 0 else 1
    sheet.sheet_view.showGridLines = False
    _print_one_page_wide(sheet, "portrait")


# --------------------------------------------------------------------------- writing


_CORE_TIMES = re.compile(rb"(<dcterms:(?:created|modified)[^>]*>)[^<]*(</dcterms:(?:created|modified)>)")


def deterministic_bytes(book, cached) -> bytes:
    """The book as .xlsx bytes that depend only on its content: fixed timestamps everywhere."""
    book.properties.creator = "tailstop demo"
    book.properties.created = FIXED_TIME
    book.properties.lastModifiedBy = None
    with tempfile.TemporaryDirectory(prefix="tailstop-demo-") as folder:
        path = Path(folder) / "book.xlsx"
        save_with_cached_values(book, path, cached)
        data = path.read_bytes()
    stamp = FIXED_TIME.strftime("%Y-%m-%dT%H:%M:%SZ").encode()
    output = io.BytesIO()
    with zipfile.ZipFile(io.BytesIO(data)) as source, zipfile.ZipFile(output, "w", zipfile.ZIP_DEFLATED) as target:
        for info in source.infolist():
            content = source.read(info)
            if info.filename == "docProps/core.xml":
                content = _CORE_TIMES.sub(lambda m: m.group(1) + stamp + m.group(2), content)
            fixed = zipfile.ZipInfo(info.filename, date_time=FIXED_TIME.timetuple()[:6])
            fixed.compress_type = zipfile.ZIP_DEFLATED
            fixed.external_attr = 0o644 << 16
            target.writestr(fixed, content)
    return output.getvalue()


def _write(folder, name, data):
    """Write a book unless an identical one is there; a different one is kept as a backup."""
    path = Path(folder) / name
    if path.exists() and path.read_bytes() == data:
        return path, False, None
    saved = write_file_atomically(path, lambda handle: handle.write(data), in_place=True, backup=True)
    return path, True, None if saved.backup is None else path.with_name(saved.backup.name)


def build_demo(folder) -> DemoResult:
    """Build both demo books into ``folder`` (created if needed)."""
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    book, cached, analysis, log = log_book()
    log_data = deterministic_bytes(book, cached)
    plan, plan_cached, figures = plan_book()
    plan_data = deterministic_bytes(plan, plan_cached)
    paths, changed, backups = [], [], []
    for name, data in ((LOG_BOOK, log_data), (PLAN_BOOK, plan_data)):
        path, was_written, backup = _write(folder, name, data)
        paths.append(path)
        if was_written:
            changed.append(path)
        if backup is not None:
            backups.append(backup)
    return DemoResult(paths, changed, backups, analysis, log, log.rows, figures)


def notes_text(analysis) -> list:
    """The warnings of the final estimate, without the 'no warnings' line."""
    return [note for note in analysis.notes if note != NO_NOTES_TEXT]
