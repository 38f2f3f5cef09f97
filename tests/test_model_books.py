"""The lifetime model in the annotated log and in the demo planning book."""
from __future__ import annotations

import math

import numpy as np
import openpyxl
import pytest
from scipy import stats

from tailstop.commands import main
from tailstop.workbooks import demo_books
from tailstop.workbooks.annotate import annotate
from tailstop.workbooks.log_layout import RulePlan
from test_annotate import LOG_SHEET, rich_log


def block_of(path):
    """{label: value} of the estimate block, wherever annotate placed it (value right of its label)."""
    sheet = openpyxl.load_workbook(path)[LOG_SHEET]
    return {cell.value: sheet.cell(cell.row, cell.column + 1).value
            for row in sheet.iter_rows(max_row=60) for cell in row if isinstance(cell.value, str)}


def warning_text(path):
    sheet = openpyxl.load_workbook(path)[LOG_SHEET]
    return " ".join(str(cell.value) for row in sheet.iter_rows(max_row=60) for cell in row
                    if isinstance(cell.value, str))


def test_annotate_reports_the_model_and_a_better_fitting_one(tmp_path):
    # check value: the fitted-shape Weibull estimate from scipy.stats.weibull_min.fit (floc=0) at the STOP
    rng = np.random.default_rng(21)
    lifetimes = np.round(900.0 * np.exp(0.9 * rng.standard_normal(150)), 1)  # lognormal lifetimes
    path = rich_log(tmp_path / "bench.xlsx", lifetimes)
    plan = RulePlan.checked(1500.0, 1.2, 0.95, 10, "fitted-shape", None, None, "Weibull")
    result = annotate(path, column="D", plan=plan)
    block = block_of(result.path)
    assert block["Lifetime model (gamma, weibull, lognormal)"] == "weibull"
    used = int(block["Units used, N"])
    shape, _, scale = stats.weibull_min.fit(lifetimes[:used], floc=0)
    assert block["Estimate of p = P(life > threshold)"] == pytest.approx(
        # tolerance 1e-4: scipy's Weibull optimiser (its tolerance, common practice)
        stats.weibull_min.sf(1500.0, shape, scale=scale), rel=1e-4)
    warnings = warning_text(result.path)
    # common practice, no published source: 150 strongly skewed lognormal lifetimes are told apart by AIC
    assert "lognormal model fits this log clearly better than the Weibull model" in warnings


def test_annotate_command_takes_the_model(tmp_path, capsys):
    # common practice, no published source: a bad model is refused with the allowed names
    path = rich_log(tmp_path / "bench.xlsx")
    args = ["annotate", str(path), "--column", "D", "--threshold", "1500", "--accuracy", "2", "--pilot", "10",
            "--method", "fitted-shape"]
    assert main(args + ["--model", "beta"]) == 1
    assert "model must be one of gamma, weibull, lognormal" in capsys.readouterr().err
    assert main(args + ["--model", "lognormal", "--out", str(tmp_path / "out.xlsx")]) == 0
    assert block_of(tmp_path / "out.xlsx")["Lifetime model (gamma, weibull, lognormal)"] == "lognormal"


def test_plan_command_takes_the_model(capsys):
    # check value: p = exp(-(c/η)^β) by hand for the Weibull guess
    assert main(["plan", "--threshold", "40", "--shape", "1.5", "--scale", "100", "--accuracy", "2",
                 "--model", "weibull", "--replications", "200", "--fitted-replications", "100"]) == 0
    out = capsys.readouterr().out
    assert f"p = {math.exp(-0.4 ** 1.5):.6g}" in out and "weibull lifetimes" in out


def test_demo_models_match_the_guess_mean_and_spread():
    # check value: scipy.stats mean and std of gamma(2, 600), weibull_min and lognorm at the matched parameters
    models = demo_books.matched_models(2.0, 600.0)
    reference = stats.gamma(2.0, scale=600.0)
    for name, distribution in (("weibull", stats.weibull_min), ("lognormal", stats.lognorm)):
        shape, scale = models[name]
        matched = distribution(shape, scale=scale)
        # tolerance 1e-10: the matching solves for the shape numerically, to about 1e-12
        assert matched.mean() == pytest.approx(reference.mean(), rel=1e-10)
        assert matched.std() == pytest.approx(reference.std(), rel=1e-10)


def test_cautions_quote_the_three_models_of_the_demo_guess():
    # regression guard: the figures docs/cautions.md quotes are what TAIL_PROB gives for the matched models
    from pathlib import Path

    from tailstop import sheet
    from tailstop.workbooks import scenario

    text = (Path(__file__).resolve().parents[1] / "docs" / "cautions.md").read_text(encoding="utf-8")
    models = demo_books.matched_models(scenario.GUESS_SHAPE, scenario.GUESS_SCALE)
    quoted = [f"{sheet.TAIL_PROB(scenario.THRESHOLD, *models[name], name):.2f}" for name in demo_books.MODEL_NAMES_SHOWN]
    assert f"p = {quoted[0]}, {quoted[1]} and {quoted[2]}" in " ".join(text.split())
