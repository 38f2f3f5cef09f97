"""The planning formulas called as a spreadsheet calls them, with inputs from an openpyxl fixture workbook."""
from __future__ import annotations

import math

import numpy as np
import openpyxl
import pytest
from scipy import stats

from conftest import range_values
from test_operating import straightforward_propagation
from tailstop import sheet
from tailstop.sheet import PLAN_COVERAGE, PLAN_EXPECTED_UNITS, PLAN_SUMMARY, PLAN_SUMMARY_FROM_P

Z95 = 1.959964  # check value: NIST/SEMATECH §1.3.6.7.1, two-sided 95 %


def is_message(value):
    return isinstance(value, str) and value.startswith("#TAILSTOP! ")


def as_dict(table):
    assert all(len(row) == 2 for row in table)
    return {label: value for label, value in table}


@pytest.fixture
def planning_book(tmp_path):
    """A planning sheet as an engineer would type it: labels in A, values in B (an invented bench plan)."""
    book = openpyxl.Workbook()
    plan = book.active
    plan.title = "Plan"
    rows = [("threshold", 1000.0), ("shape", 2.0), ("scale", 600.0), ("accuracy", 1.5), ("confidence", 0.95),
            ("pilot", 10), ("method", "Known Shape"), ("replications", None), ("seed", None)]
    for label, value in rows:
        plan.append([label, value])
    path = tmp_path / "plan.xlsx"
    book.save(path)
    return path


def plan_arguments(path):
    return [row[1] for row in range_values(path, "Plan", "A1:B9")]


def test_formulas_are_registered():
    for name in ("PLAN_EXPECTED_UNITS", "PLAN_COVERAGE", "PLAN_SUMMARY", "PLAN_SUMMARY_FROM_P"):
        assert name in sheet.FORMULAS


def test_summary_from_p_is_exact_and_matches_the_plain_propagation():
    table = as_dict(PLAN_SUMMARY_FROM_P(0.5, 1.5, 0.95, 10))
    # check value: METHOD.md §4, n* = (z / ln 1.5)^2 * 4 = 93.5 -> 94 units, z from NIST
    assert table["fixed-size units n*"] == math.ceil((Z95 / math.log(1.5)) ** 2 * 4)
    assert table["figures"] == "exact" and table["method"] == "pass-fail"
    assert not any("std. error" in label for label in table)
    # the plain full-grid propagation (tests/test_operating.py), far past where any mass is left
    distribution, coverage, _ = straightforward_propagation(0.5, 1.5, 0.95, 10, 400)
    n = np.arange(distribution.size)
    mean = np.dot(n, distribution) / distribution.sum()
    # check value: the plain full-grid propagation (above); tolerances 1e-9 / 1e-10 / 1e-8 absolute: the two
    # propagations cut the running mass at different points (far below 1e-12) and sum hundreds of terms; the sd
    # squares the differences, so one digit less
    assert table["expected units E[N]"] == pytest.approx(mean, abs=1e-9)
    assert table["coverage"] == pytest.approx(coverage, abs=1e-10)
    assert table["sd of N"] == pytest.approx(math.sqrt(np.dot((n - mean) ** 2, distribution)), abs=1e-8)
    cdf = np.cumsum(distribution)
    assert table["N 50% quantile"] == int(np.searchsorted(cdf, 0.5))
    # property: the confidence asked is shown as typed
    assert table["nominal confidence"] == 0.95


def test_pass_fail_from_gamma_parameters_uses_the_gamma_tail(planning_book):
    threshold, shape, scale, accuracy, confidence, pilot, *_ = plan_arguments(planning_book)
    # check value: scipy.stats.gamma.sf, a general-purpose reference
    p = stats.gamma.sf(threshold, shape, scale=scale)
    from_p = as_dict(PLAN_SUMMARY_FROM_P(p, accuracy, confidence, pilot))
    # check value: scipy.stats.gamma.sf (above) into the p-based formula; tolerance 1e-9 (E[N], coverage: the
    # same exact propagation from p's a few roundings apart), 1e-12 on p itself
    assert PLAN_EXPECTED_UNITS(threshold, shape, scale, accuracy, confidence, pilot) == pytest.approx(
        from_p["expected units E[N]"], rel=1e-9)
    assert PLAN_COVERAGE(threshold, shape, scale, accuracy, confidence, pilot, "pass-fail") == pytest.approx(
        from_p["coverage"], rel=1e-9)
    assert as_dict(PLAN_SUMMARY(threshold, shape, scale, accuracy, confidence, pilot))["true probability p"] == \
        pytest.approx(p, rel=1e-12)


def test_simulated_summary_from_the_workbook(planning_book):
    arguments = plan_arguments(planning_book)
    table = as_dict(PLAN_SUMMARY(*arguments))
    assert table["method"] == "known-shape" and table["figures"] == "simulated"
    assert table["replications"] == 10_000 and table["seed"] == 20261201
    # the standard error of E[N] is sd / sqrt(R); that of the coverage sqrt(c (1 - c) / R)
    # derivation: a Monte Carlo mean of R = 10,000 runs has standard error sd/√R = sd/100, a share c has
    # √(c(1-c)/R); tolerance 1e-9 for rounding
    assert table["expected units E[N]: MC std. error"] == pytest.approx(table["sd of N"] / 100, rel=1e-9)
    c = table["coverage"]
    assert table["coverage: MC std. error"] == pytest.approx(math.sqrt(c * (1 - c) / 10_000), rel=1e-9)
    assert table["N 5% quantile"] <= table["N 50% quantile"] <= table["N 95% quantile"]
    assert table["expected units E[N]"] >= 10
    # the same numbers through the single-figure formulas (same default seed)
    assert PLAN_EXPECTED_UNITS(*arguments) == table["expected units E[N]"]
    assert PLAN_COVERAGE(*arguments) == table["coverage"]


def test_results_fit_in_cells(planning_book, tmp_path):
    table = PLAN_SUMMARY(*plan_arguments(planning_book))
    book = openpyxl.Workbook()
    for row in table:
        book.active.append(row)
    book.save(tmp_path / "out.xlsx")
    back = range_values(tmp_path / "out.xlsx", "Sheet", f"A1:B{len(table)}")
    assert [row[0] for row in back] == [row[0] for row in table]
    for (_, read), (_, written) in zip(back, table):
        assert isinstance(written, (str, int, float)) and not isinstance(written, bool)
        # property: a number written to a cell and read back with openpyxl keeps its value (1e-14: the text form
        # of a double in the XML keeps 15-17 digits)
        assert read == written if isinstance(written, str) else read == pytest.approx(written, rel=1e-14)


def test_seed_makes_results_reproducible():
    args = (1000.0, 2.0, 600.0, 1.5, 0.95, 10, "fitted-shape", 150)
    first, again = PLAN_EXPECTED_UNITS(*args, 7), PLAN_EXPECTED_UNITS(*args, 7)
    assert first == again
    assert PLAN_EXPECTED_UNITS(*args, 8) != first
    assert PLAN_EXPECTED_UNITS(*args) == PLAN_EXPECTED_UNITS(*args, None)


def test_known_shape_saves_units_over_pass_fail():
    # σ² known-shape < σ² pass-fail (METHOD.md §3): trusting the shape costs fewer units
    args = (1000.0, 2.0, 600.0, 1.5, 0.95, 10)
    assert PLAN_EXPECTED_UNITS(*args, "known-shape", 3000) < PLAN_EXPECTED_UNITS(*args, "pass-fail")


@pytest.mark.parametrize("call, text", [
    (lambda: PLAN_EXPECTED_UNITS(1000, 2, 600, 1.5, 0.95, 1), "pilot must be at least 2"),
    (lambda: PLAN_EXPECTED_UNITS(1000, 2, 600, 1.5, 0.95, "ten"), "pilot holds text"),
    (lambda: PLAN_EXPECTED_UNITS(1000, 2, 600, 1.5, 0.95, 10.5), "pilot must be a whole number"),
    (lambda: PLAN_EXPECTED_UNITS(1000, 2, 600, 0.9, 0.95, 10), "accuracy must be > 1"),
    (lambda: PLAN_COVERAGE(1000, 2, 600, 1.5, 95, 10), "for 95 % enter 0.95"),
    (lambda: PLAN_COVERAGE(1000, -2, 600, 1.5, 0.95, 10), "shape must be > 0"),
    (lambda: PLAN_COVERAGE(1000, 2, 600, 1.5, 0.95, 10, "weibull"), "method must be one of"),
    (lambda: PLAN_COVERAGE(1e6, 2, 1, 1.5, 0.95, 10), "one side of the threshold"),
    (lambda: PLAN_SUMMARY(1000, 2, 600, 1.5, 0.95, 10, "known-shape", 0), "replications must be at least 1"),
    (lambda: PLAN_SUMMARY(1000, 2, 600, 1.5, 0.95, 10, "known-shape", 10**6), "replications must be at most 100,000"),
    (lambda: PLAN_SUMMARY(1000, 2, 600, 1.5, 0.95, 10, "known-shape", 100, -1), "seed must be at least 0"),
    (lambda: PLAN_SUMMARY(1000, 2, 600, 1.5, 0.95, 10, "known-shape", "many"), "replications holds text"),
    (lambda: PLAN_SUMMARY_FROM_P(1.2, 1.5, 0.95, 10), "p_guess must be strictly between 0 and 1"),
    (lambda: PLAN_SUMMARY_FROM_P(None, 1.5, 0.95, 10), "p_guess is blank"),
])
def test_bad_input_gets_a_message(call, text):
    result = call()
    assert is_message(result) and text in result, result


def test_every_call_is_bounded():
    # too many units for an exact computation in a cell, within the command's bound
    result = PLAN_SUMMARY_FROM_P(0.5, 1.03, 0.95, 10)
    assert is_message(result) and "10,000 units" in result and "tailstop plan" in result
    # beyond the command's bound too: the cell says what is known instead of sending users to it
    # check value: n* = (z / ln 1.01)² · 4 = 155,196.2 (z from NIST/SEMATECH §1.3.6.7.1, derivation METHOD.md §4),
    # so the fixed-size test needs 155,197 units
    result = PLAN_SUMMARY_FROM_P(0.5, 1.01, 0.95, 10)
    assert is_message(result) and "tailstop plan" not in result and "a fixed-size test of 155,197 units" in result
    # replications × units beyond the cap of a simulating cell: the message says how many are allowed
    result = PLAN_SUMMARY(1000, 2, 600, 1.1, 0.95, 10, "known-shape", 50_000)
    assert is_message(result) and "capped at 20,000,000 for known-shape" in result and "use at most" in result
    allowed = int(result.rsplit("use at most ", 1)[1].split()[0].replace(",", ""))
    assert not is_message(PLAN_EXPECTED_UNITS(1000, 2, 600, 1.1, 0.95, 10, "fitted-shape", 10))
    assert 1 <= allowed < 50_000
    # with the default count, a large fitted-shape plan runs fewer replications, and says so in the table
    table = as_dict(PLAN_SUMMARY(1000, 2, 600, 1.12, 0.95, 10, "fitted-shape"))
    # property: the work cap WORK_LIMIT["fitted-shape"] = 4,000,000 (sheet/planning.py) holds, with 1 % for
    # the rounding of the replication count
    assert table["replications"] * (table["fixed-size units n*"] + 400) <= 4_000_000 * 1.01
    assert 100 <= table["replications"] < 10_000


@pytest.mark.parametrize("call", [
    lambda: PLAN_SUMMARY_FROM_P(0.001, 1.5, 0.95, 10),          # beyond a cell, within the command
    lambda: PLAN_SUMMARY_FROM_P(1e-8, 1.5, 0.95, 10),           # beyond both
    lambda: sheet.PLAN_SUMMARY(12921, 2, 600, 1.5, 0.95, 10),   # p ≈ 1e-8 from a gamma guess
    lambda: sheet.PLAN_COVERAGE(1000, 2, 600, 1.001, 0.95, 10, "known-shape"),
    lambda: sheet.PLAN_COVERAGE(1000, 2, 600, 1.005, 0.95, 10, "fitted-shape"),
])
def test_a_cell_suggests_the_command_only_where_it_answers(call):
    from tailstop.core import operating

    text = call()
    assert isinstance(text, str) and text.startswith("#TAILSTOP!")
    suggests = "tailstop plan" in text
    # the command's own bound decides: its refusal (PlanTooLarge) is what a cell must not send users to
    refusal = "beyond the 30 s a plan may take" in text
    assert suggests != refusal, text
    if refusal:
        # what is known without computing, and (where there is one) the change that makes it answerable
        assert "a fixed-size test of" in text and "E[N] ≈ n*" in text
    else:
        assert operating.exact_work(0.001, 1.5, 0.95, 10).seconds <= operating.COMMAND_SECONDS


def test_summary_says_when_the_coverage_falls_short_and_gives_the_calibrated_value():
    from tailstop.core import operating

    # check value: docs/method.md's table (exact, pass-fail): p = 0.01, d = 10, 95 % covers 0.904
    table = as_dict(PLAN_SUMMARY_FROM_P(0.01, 10, 0.95, 10))
    assert table["coverage short of nominal by"] == pytest.approx(0.95 - table["coverage"], abs=1e-15)
    calibration = operating.calibrate(lambda z: operating.pass_fail_exact(0.01, 10.0, 0.95, 10, stop_z=z), 0.95)
    assert table["calibrated critical value z'"] == pytest.approx(calibration.z_calibrated, rel=1e-12)
    # check value: 2Φ(z') - 1 from scipy.stats.norm
    assert table["confidence to give the decision formulas"] == pytest.approx(
        2 * stats.norm.cdf(calibration.z_calibrated) - 1, rel=1e-12)
    assert table["coverage at z'"] >= 0.95
    # a plan that reaches its level has no such rows
    assert "coverage short of nominal by" not in as_dict(PLAN_SUMMARY_FROM_P(0.5, 1.5, 0.95, 10))
