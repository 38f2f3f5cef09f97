"""tailstop demo: the committed books are what the command builds, and what they show is right."""
from __future__ import annotations

import math
from pathlib import Path

import openpyxl
import pytest
from scipy import special, stats

from tailstop.workbooks import scenario
from tailstop.commands import main
from tailstop.sheet import STOP_DECISION, UNITS_NEEDED_NOW
from tailstop.workbooks.demo_books import LOG_BOOK, PLAN_BOOK, build_demo, deterministic_bytes, log_book, plan_book
from tailstop.workbooks.recalc import evaluate_workbook

ROOT = Path(__file__).resolve().parent.parent
COMMITTED = ROOT / "workbooks_demo"


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    folder = tmp_path_factory.mktemp("demo")
    return folder, build_demo(folder)


def book_content(path):
    """What a reader of the book sees and what a spreadsheet would compute from, sheet by sheet."""
    formulas = openpyxl.load_workbook(path)
    values = openpyxl.load_workbook(path, data_only=True)
    content = {"sheets": formulas.sheetnames, "active": formulas.active.title}
    for sheet in formulas.worksheets:
        shown = values[sheet.title]
        content[sheet.title] = {
            "cells": {c.coordinate: (c.value, c.number_format) for row in sheet.iter_rows() for c in row
                      if c.value is not None},
            "values": {c.coordinate: c.value for row in shown.iter_rows() for c in row if c.value is not None},
            "merged": sorted(r.coord for r in sheet.merged_cells.ranges),
            "freeze": sheet.freeze_panes,
            "widths": {k: d.width for k, d in sheet.column_dimensions.items() if d.width},
            "charts": [[(s.xVal.numRef.f, s.yVal.numRef.f) for s in chart.series] for chart in sheet._charts],
            "formatting": sorted(str(r.sqref) for r in sheet.conditional_formatting),
        }
    return content


def assert_same_content(expected, actual):
    assert expected.keys() == actual.keys()
    for key, part in expected.items():
        if not isinstance(part, dict):
            assert actual[key] == part, key
            continue
        for name, value in part.items():
            if name != "values":
                assert actual[key][name] == value, (key, name)
        assert actual[key]["values"].keys() == part["values"].keys(), key
        for coordinate, value in part["values"].items():
            shown = actual[key]["values"][coordinate]
            if isinstance(value, float):
                # the cached figures come from scipy and numpy; allow for their last digits across versions
                assert shown == pytest.approx(value, rel=1e-9, abs=1e-12), (key, coordinate)
            else:
                assert shown == value, (key, coordinate)


@pytest.mark.parametrize("name", [LOG_BOOK, PLAN_BOOK])
def test_committed_books_match_what_the_command_builds(built, name):
    """Regression guard only: the committed books against the command; what they show is checked below by hand."""
    folder, _ = built
    committed = COMMITTED / name
    assert committed.is_file(), f"{committed} is missing: run `tailstop demo` at the top of the repository"
    assert_same_content(book_content(committed), book_content(folder / name))


def test_the_books_are_reproducible_byte_for_byte(built):
    """Regression guard: the same build gives the same bytes (a property, no check value)."""
    folder, _ = built
    book, cached, _, _ = log_book()
    assert deterministic_bytes(book, cached) == (folder / LOG_BOOK).read_bytes()
    book, cached, _ = plan_book()
    assert deterministic_bytes(book, cached) == (folder / PLAN_BOOK).read_bytes()


def test_rerun_keeps_identical_books_and_backs_up_an_edited_one(tmp_path, capsys):
    assert main(["demo", "--out", str(tmp_path)]) == 0
    first = capsys.readouterr().out
    assert f"written: {tmp_path / LOG_BOOK}" in first and f"written: {tmp_path / PLAN_BOOK}" in first
    edited = openpyxl.load_workbook(tmp_path / LOG_BOOK)
    edited["Log"]["M3"] = 1000  # a user tried another threshold
    edited.save(tmp_path / LOG_BOOK)
    kept = (tmp_path / LOG_BOOK).read_bytes()
    assert main(["demo", "--out", str(tmp_path)]) == 0
    second = capsys.readouterr().out
    assert f"unchanged: {tmp_path / PLAN_BOOK}" in second
    assert "the previous book differed and was kept as" in second
    assert (tmp_path / "valve-bench-log.backup.xlsx").read_bytes() == kept


def pass_fail_stop(lifetimes, threshold, accuracy, confidence, pilot):
    """METHOD.md §5 for pass-fail, written out plainly: the N at which the rule stops."""
    # check value: METHOD.md §5 with the plain share S/n in σ̂² (docs/method.md); z from scipy.stats.norm
    z = stats.norm.ppf(1 - (1 - confidence) / 2)
    beyond = 0
    for n, value in enumerate(lifetimes, start=1):
        beyond += value > threshold
        if n >= pilot and 0 < beyond < n and beyond * (n - beyond) >= (z / math.log(accuracy)) ** 2 * n:
            return n
    return None


def test_the_log_book_shows_the_rule_and_the_final_estimate(built):
    folder, result = built
    lifetimes = [float(v) for v in scenario.bench_log()]
    c, d = scenario.THRESHOLD, scenario.ACCURACY
    stop = pass_fail_stop(lifetimes, c, d, scenario.CONFIDENCE, scenario.PILOT)
    values = openpyxl.load_workbook(folder / LOG_BOOK, data_only=True)["Log"]
    decisions = [values.cell(row, 3).value for row in range(2, len(lifetimes) + 2)]
    assert decisions == (["PILOT"] * (scenario.PILOT - 1) + ["CONTINUE"] * (stop - scenario.PILOT) + ["STOP"]
                         + ["PAST STOP"] * (len(lifetimes) - stop))
    block = {values.cell(row, 12).value: values.cell(row, 13).value for row in range(1, 30)}
    # check value: the pass-fail estimate is the share beyond the threshold, counted here
    share = sum(v > c for v in lifetimes[:stop]) / stop
    odds = share / (1 - share)
    assert block["Units used, N"] == stop == result.analysis.units_used
    # tolerance 1e-15 for the same k/n in doubles, 1e-14 for the bounds (a few roundings of q)
    assert block["Estimate of p = P(life > threshold)"] == pytest.approx(share, rel=1e-15)
    # check value: METHOD.md §2, [q/d, q d] and [q/(d + q), d q/(1 + d q)]
    assert block["Odds, lower bound (odds/d)"] == pytest.approx(odds / d, rel=1e-14)
    assert block["Odds, upper bound (odds*d)"] == pytest.approx(odds * d, rel=1e-14)
    assert block["p, lower bound"] == pytest.approx(odds / (d + odds), rel=1e-14)
    assert block["p, upper bound"] == pytest.approx(d * odds / (1 + d * odds), rel=1e-14)
    # the running columns at the STOP row agree with the block and with the log-odds scale
    row = stop + 1
    assert values.cell(row, 4).value == block["Estimate of p = P(life > threshold)"]
    log_odds = math.log(share / (1 - share))
    # check value: the log-odds of the share counted here; tolerance 1e-14 for the logs of the same doubles
    assert values.cell(row, 7).value == pytest.approx(log_odds, rel=1e-14)
    assert values.cell(row, 8).value == pytest.approx(log_odds - math.log(d), rel=1e-14)
    assert values.cell(row, 9).value == pytest.approx(log_odds + math.log(d), rel=1e-14)
    # the rule stops where the units tested first reach the units needed (METHOD.md §5)
    assert values.cell(row, 10).value <= stop < values.cell(row - 1, 10).value + 1
    assert all(values.cell(r, 4).value is None for r in range(2, scenario.PILOT + 1))


def test_the_decision_column_is_the_decision_formula_row_by_row(built):
    folder, _ = built
    sheet = openpyxl.load_workbook(folder / LOG_BOOK)["Log"]
    values = openpyxl.load_workbook(folder / LOG_BOOK, data_only=True)["Log"]
    column = [[float(v)] for v in scenario.bench_log()]
    arguments = (scenario.THRESHOLD, scenario.ACCURACY, scenario.CONFIDENCE, scenario.PILOT, "pass-fail")
    for row in range(2, len(column) + 2):
        assert sheet.cell(row, 3).value == (f'=IF(IFERROR(LEN(TRIM(B{row})),1)=0,"",STOP_DECISION($B$2:B{row},'
                                             f'$M$3,$M$6,$M$7,$M$8,$M$4,$M$5,$M$9,$M$10))')
        assert values.cell(row, 3).value == STOP_DECISION(column[: row - 1], *arguments), row
    for row in (scenario.PILOT + 1, 130, len(column) + 1):
        needed = UNITS_NEEDED_NOW(column[: row - 1], scenario.THRESHOLD, scenario.ACCURACY, scenario.CONFIDENCE)
        assert values.cell(row, 10).value == needed


def test_cached_values_are_what_the_formulas_compute(tmp_path):
    # the formula engine of `tailstop recalc` evaluates the books' formulas from scratch
    short, cached, _, _ = log_book(units=60)
    (tmp_path / "log.xlsx").write_bytes(deterministic_bytes(short, cached))
    plan, plan_cached, _ = plan_book()
    (tmp_path / "plan.xlsx").write_bytes(deterministic_bytes(plan, plan_cached))
    for name, stored in (("log.xlsx", cached), ("plan.xlsx", plan_cached)):
        computed = evaluate_workbook(tmp_path / name)
        for (title, coordinate), value in stored.items():
            engine = computed[(title.upper(), coordinate)]
            if isinstance(value, float):
                # property: the formula engine recomputes the cached values (tolerance 1e-12: its order of operations)
                assert engine == pytest.approx(value, rel=1e-12), (name, title, coordinate)
            else:
                assert (engine if engine is not None else "") == value, (name, title, coordinate)


def test_the_planning_book_checks_tail_prob_against_gamma_dist(built):
    folder, result = built
    formulas = openpyxl.load_workbook(folder / PLAN_BOOK)["Plan"]
    values = openpyxl.load_workbook(folder / PLAN_BOOK, data_only=True)["Plan"]
    tail_cell, gamma_cell = result.planning["gamma_check_cells"]
    assert formulas[tail_cell].value == "=TAIL_PROB($B$3,$B$4,$B$5)"
    assert formulas[gamma_cell].value == "=1-_xlfn.GAMMA.DIST($B$3,$B$4,$B$5,TRUE)"
    assert values[gamma_cell].value is None  # left for the spreadsheet program to compute
    # check value: scipy.special.gammaincc as the reference library
    expected = special.gammaincc(scenario.GUESS_SHAPE, scenario.THRESHOLD / scenario.GUESS_SCALE)
    # tolerance 1e-13: gammaincc in the body, a few roundings apart
    assert values[tail_cell].value == pytest.approx(expected, rel=1e-13)
    # the inputs are plain cells the formulas refer to
    assert [formulas[f"B{row}"].value for row in range(3, 6)] == [scenario.THRESHOLD, scenario.GUESS_SHAPE,
                                                                   scenario.GUESS_SCALE]
    summary = result.planning["summary"]
    first = next(row for row in range(1, 80) if values[f"A{row}"].value == summary[0][0])
    assert [[values[f"A{first + i}"].value, values[f"B{first + i}"].value] for i in range(len(summary))] == summary


def test_the_charts_draw_the_log_odds_and_mark_the_stop(built):
    folder, result = built
    book = openpyxl.load_workbook(folder / LOG_BOOK)
    values = openpyxl.load_workbook(folder / LOG_BOOK, data_only=True)["Charts"]
    odds_chart, units_chart = book["Charts"]._charts
    last = len(scenario.bench_log()) + 1
    first = scenario.PILOT + 1
    series = [(s.xVal.numRef.f, s.yVal.numRef.f) for s in odds_chart.series]
    assert series[:3] == [(f"'Log'!$A${first}:$A${last}", f"'Log'!${letter}${first}:${letter}${last}")
                          for letter in "GHI"]
    assert series[3] == ("'Charts'!$D$3:$D$4", "'Charts'!$E$3:$E$4")
    assert [s.yVal.numRef.f for s in units_chart.series][0] == f"'Log'!$J${first}:$J${last}"
    stop = result.analysis.units_used
    assert values["B3"].value == values["D3"].value == values["D4"].value == stop
    log = openpyxl.load_workbook(folder / LOG_BOOK, data_only=True)["Log"]
    assert values["B4"].value == log.cell(stop + 1, 7).value


def test_the_summary_names_the_stop_and_the_estimate(built, capsys, tmp_path):
    assert main(["demo", "--out", str(tmp_path)]) == 0
    out = capsys.readouterr().out
    _, result = built
    figures = result.analysis.figures
    assert f"STOP after valve {result.analysis.units_used}" in out
    assert f"{figures['estimate']:.4f}, bounds {figures['p_low']:.4f} .. {figures['p_high']:.4f}" in out
    assert "warnings: none for this log and method" in out
    assert "invented data" in out
