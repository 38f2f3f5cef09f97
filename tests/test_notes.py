"""Warnings on the estimate: each one with data that triggers it and data that does not.

The trigger conditions are recomputed here independently of tailstop: fit
p-values by scipy.stats.goodness_of_fit with its own random stream, the shape
likelihood ratio from scipy.stats.gamma log-densities and fits, side counts by
hand, unit counts from the closed forms of METHOD.md with z from NIST.
"""
from __future__ import annotations

import math

import numpy as np
import openpyxl
import pytest
from scipy import stats

from tailstop import sheet
from tailstop.core.notes import NO_NOTES_TEXT, method_notes, note_lines, shape_likelihood_ratio
from tailstop.sheet import TAIL_METHOD_NOTES

Z95 = 1.959964  # check value: NIST/SEMATECH §1.3.6.7.1, two-sided 95 %


def codes(notes):
    return [note.code for note in notes]


def column(values):
    return [[float(v)] for v in values]


def reference_fit_pvalue(x, seed=424242):
    """Anderson–Darling gamma fit p-value straight from scipy, on a random stream of its own."""
    # check value: scipy.stats.goodness_of_fit (METHOD.md §7 names it as the reference)
    return stats.goodness_of_fit(stats.gamma, x, known_params={"loc": 0.0}, statistic="ad",
                                 n_mc_samples=999, rng=np.random.default_rng(seed)).pvalue


@pytest.fixture(scope="module")
def gamma_log():
    """60 seeded gamma draws (shape 2.4): a log the gamma model fits."""
    return np.random.default_rng(11).gamma(2.4, 520.0, size=60)


@pytest.fixture(scope="module")
def two_cluster_log():
    """Two well-separated clusters (around 10 and around 1000): no gamma fits this."""
    rng = np.random.default_rng(12)
    return np.concatenate([rng.gamma(40.0, 0.25, size=40), rng.gamma(40.0, 25.0, size=40)])


# --- gamma fit check -------------------------------------------------------------------------

@pytest.mark.parametrize("method,shape", [("fitted-shape", None), ("known-shape", 1.0)])
def test_failed_fit_check_is_reported_for_gamma_methods(two_cluster_log, method, shape):
    # check value: scipy's goodness_of_fit p-value (reference_fit_pvalue); 0.01 and 0.05: common practice levels
    assert reference_fit_pvalue(two_cluster_log) < 0.01  # clearly below 5 %, whatever the Monte Carlo stream
    notes = method_notes(two_cluster_log, 300.0, method, shape)
    assert "gamma-fit-fails" in codes(notes)
    note = notes[codes(notes).index("gamma-fit-fails")]
    # property: the note is raised below the common practice 5 % level, and carries the p-value
    assert note.figures["pvalue"] < 0.05
    assert "pass-fail" in note.text


def test_passed_fit_check_is_not_reported(gamma_log):
    # check value: scipy's goodness_of_fit p-value; common practice: clearly above the 5 % level
    assert reference_fit_pvalue(gamma_log) > 0.2  # clearly above 5 %
    assert "gamma-fit-fails" not in codes(method_notes(gamma_log, 1500.0, "fitted-shape"))
    assert "gamma-fit-fails" not in codes(method_notes(gamma_log, 1500.0, "known-shape", 2.4))


def test_pass_fail_needs_no_fit_check(two_cluster_log):
    # pass-fail uses no lifetime model, so a failed gamma fit is no warning for it
    notes = method_notes(two_cluster_log, 300.0, "pass-fail")
    assert not {"gamma-fit-fails", "gamma-fit-impossible", "shape-disagrees"} & set(codes(notes))


def test_a_log_too_long_for_the_fit_check_says_the_check_was_skipped(gamma_log, monkeypatch):
    from tailstop.core.models.gamma import fit

    # shrink the check's budget so that this 60-unit log is "too long" for it
    monkeypatch.setattr(fit, "GOF_VALUE_BUDGET", fit.GOF_MIN_SAMPLES * (gamma_log.size - 1))
    notes = method_notes(gamma_log, 1500.0, "fitted-shape")
    assert codes(notes)[0] == "gamma-fit-skipped" and "not run" in notes[0].text
    assert "gamma-fit-skipped" not in codes(method_notes(gamma_log, 1500.0, "pass-fail"))


def test_equal_lifetimes_under_known_shape_cannot_be_checked():
    notes = method_notes([50.0] * 8, 40.0, "known-shape", 2.0)
    assert codes(notes)[0] == "gamma-fit-impossible"
    assert "shape-disagrees" not in codes(notes)


def test_equal_lifetimes_under_fitted_shape_are_an_error_as_for_the_estimate():
    with pytest.raises(ValueError, match="equal"):
        method_notes([50.0] * 8, 40.0, "fitted-shape")
    assert TAIL_METHOD_NOTES(column([50.0] * 8), 40.0, "fitted-shape").startswith("#TAILSTOP!")


# --- given shape against the log ---------------------------------------------------------------

def reference_shape_statistic(x, given):
    """2 (max log-likelihood - max log-likelihood with the shape fixed), from scipy's gamma."""
    # check value: scipy.stats.gamma.fit with floc=0 (METHOD.md §8) and gamma.logpdf
    shape, _, scale = stats.gamma.fit(x, floc=0)
    _, _, scale_given = stats.gamma.fit(x, fa=given, floc=0)
    free = stats.gamma.logpdf(x, shape, scale=scale).sum()
    fixed = stats.gamma.logpdf(x, given, scale=scale_given).sum()
    return 2.0 * (free - fixed)


@pytest.mark.parametrize("given", [1.0, 1.8, 2.4, 4.0])
def test_shape_statistic_matches_scipy_likelihoods(gamma_log, given):
    test = shape_likelihood_ratio(gamma_log, given)
    # check value: scipy.stats.gamma.fit and logpdf (reference_shape_statistic); tolerance 1e-5 relative, 1e-6
    # absolute: scipy's optimiser agrees with the exact ML to about 6 digits
    assert test.statistic == pytest.approx(reference_shape_statistic(gamma_log, given), rel=1e-5, abs=1e-6)
    assert test.fitted == pytest.approx(stats.gamma.fit(gamma_log, floc=0)[0], rel=1e-5)


def test_shape_test_rejects_at_the_chi_square_critical_value():
    # check value: chi-square 1 df upper 5 % point 3.841, NIST/SEMATECH §1.3.6.7.4
    x = np.random.default_rng(5).gamma(2.0, 1.0, size=200)
    fitted = shape_likelihood_ratio(x, 2.0).fitted
    # walk the given shape away from the fitted one until the statistic crosses 3.841
    givens = fitted * np.exp(np.linspace(0.0, 0.5, 400))
    statistics = np.array([shape_likelihood_ratio(x, g).statistic for g in givens])
    first = int(np.argmax(statistics > 3.841))
    assert 0 < first
    assert shape_likelihood_ratio(x, givens[first]).pvalue < 0.05 <= shape_likelihood_ratio(x, givens[first - 1]).pvalue


def test_wrong_known_shape_is_reported(gamma_log):
    # check value: scipy chi-square sf of scipy's likelihood ratio; 0.05: common practice level
    assert stats.chi2.sf(reference_shape_statistic(gamma_log, 1.0), 1) < 0.05
    notes = method_notes(gamma_log, 1500.0, "known-shape", 1.0)
    assert "shape-disagrees" in codes(notes)
    note = notes[codes(notes).index("shape-disagrees")]
    # check value: scipy.stats.gamma.fit (floc=0); tolerance 1e-5: scipy's optimiser tolerance
    assert note.figures["fitted"] == pytest.approx(stats.gamma.fit(gamma_log, floc=0)[0], rel=1e-5)
    assert "fitted-shape" in note.text


def test_right_known_shape_is_not_reported(gamma_log):
    # check value: scipy chi-square sf of scipy's likelihood ratio; 0.05: common practice level
    assert stats.chi2.sf(reference_shape_statistic(gamma_log, 2.4), 1) > 0.05
    assert "shape-disagrees" not in codes(method_notes(gamma_log, 1500.0, "known-shape", 2.4))


def test_shape_check_only_for_known_shape(gamma_log):
    assert "shape-disagrees" not in codes(method_notes(gamma_log, 1500.0, "fitted-shape"))


# --- units on each side of the threshold -------------------------------------------------------

# Handmade logs around a threshold of 100 (common practice, no published source: counts by hand)
BELOW = [12.0, 35.0, 48.0, 60.0, 71.0, 77.0, 83.0, 90.0, 95.0, 100.0]   # 10 at or below 100 (100 itself does not exceed)
ABOVE = [101.0, 115.0, 130.0, 160.0, 210.0, 260.0]                      # 6 beyond 100


@pytest.mark.parametrize("method,shape", [("pass-fail", None), ("fitted-shape", None), ("known-shape", 2.0)])
def test_fewer_than_five_beyond_is_reported(method, shape):
    values = BELOW + ABOVE[:4]
    notes = method_notes(values, 100.0, method, shape)
    assert "few-on-a-side" in codes(notes)
    note = notes[codes(notes).index("few-on-a-side")]
    assert (note.figures["beyond"], note.figures["below"], note.figures["units"]) == (4, 10, 14)
    assert "4 of 14" in note.text


def test_fewer_than_five_below_is_reported():
    values = BELOW[:3] + ABOVE
    note = method_notes(values, 100.0)[0]
    assert note.code == "few-on-a-side"
    assert (note.figures["beyond"], note.figures["below"]) == (6, 3)


def test_five_on_each_side_is_enough():
    values = BELOW[-5:] + ABOVE[:5]  # includes the unit exactly at 100, which does not exceed it
    for method, shape in [("pass-fail", None), ("fitted-shape", None), ("known-shape", 2.0)]:
        assert "few-on-a-side" not in codes(method_notes(values, 100.0, method, shape))


@pytest.mark.parametrize("values,side", [(BELOW, "at or before"), (ABOVE, "outlasted")])
def test_pass_fail_with_every_unit_on_one_side(values, side):
    notes = method_notes(values, 100.0, "pass-fail")
    assert codes(notes) == ["one-side-only"]  # it replaces the few-on-a-side note
    assert side in notes[0].text


def test_one_unit_across_is_not_one_side_only():
    notes = method_notes(BELOW + ABOVE[:1], 100.0, "pass-fail")
    assert codes(notes) == ["few-on-a-side"]


def test_gamma_methods_with_every_unit_on_one_side_get_the_count_note():
    assert "one-side-only" not in codes(method_notes(BELOW, 100.0, "fitted-shape"))
    assert "few-on-a-side" in codes(method_notes(BELOW, 100.0, "fitted-shape"))


def test_survivors_count_beyond_the_threshold():
    # five units taken off test at 100 without failing count as beyond it
    values = BELOW[:5] + [100.0] * 5
    flags = [False] * 5 + [True] * 5
    assert codes(method_notes(values, 100.0, "pass-fail")) == ["one-side-only"]
    assert codes(method_notes(values, 100.0, "pass-fail", survivors=flags)) == []


# --- requested accuracy against the log -------------------------------------------------------

def hand_units(sigma2, accuracy):
    """ceil((z / log d)² σ²), METHOD.md §4, with z from NIST."""
    return math.ceil((Z95 / math.log(accuracy)) ** 2 * sigma2)


def test_pass_fail_accuracy_needs_more_units_than_the_log():
    values = BELOW + [float(v) for v in np.linspace(101.0, 400.0, 10)]  # 10 beyond, 10 at or below
    # regularized plug-in of the stopping rule: p~ = (S + 1/2) / (n + 1) = 10.5 / 21 = 1/2, so σ~² = 4
    needed = hand_units(4.0, 1.5)
    assert needed == 94  # (1.959964 / log 1.5)² · 4 = 93.5 by hand
    notes = method_notes(values, 100.0, "pass-fail", accuracy=1.5, confidence=0.95)
    assert codes(notes) == ["accuracy-needs-more"]
    assert notes[0].figures == {"units_needed": 94.0, "units": 20}
    assert "94 units" in notes[0].text and "holds 20" in notes[0].text


def test_pass_fail_accuracy_reached():
    values = (BELOW + [float(v) for v in np.linspace(101.0, 400.0, 10)]) * 2  # 40 units, S = 20
    # p~ = 20.5 / 41 = 1/2: (1.959964 / log 2)² · 4 = 32.0 units by hand, the log holds 40
    assert hand_units(4.0, 2.0) <= 40
    assert method_notes(values, 100.0, "pass-fail", accuracy=2.0, confidence=0.95) == []


@pytest.mark.parametrize("units_needed", [19, 20, 21, 22])
def test_accuracy_note_starts_one_unit_past_the_log(units_needed):
    values = BELOW + [float(v) for v in np.linspace(101.0, 400.0, 10)]  # n = 20, σ~² = 4 as above
    # the accuracy d whose hand count ceil((z / log d)² · 4) is units_needed (aim half a unit below it)
    accuracy = math.exp(Z95 * math.sqrt(4.0 / (units_needed - 0.5)))
    assert hand_units(4.0, accuracy) == units_needed
    notes = method_notes(values, 100.0, "pass-fail", accuracy=accuracy, confidence=0.95)
    assert codes(notes) == (["accuracy-needs-more"] if units_needed > 20 else [])


def test_known_shape_accuracy_against_the_exponential_hand_formula():
    x = np.random.default_rng(21).gamma(1.0, 300.0, size=50)
    threshold = 300.0
    t = threshold / x.mean()          # shape 1: scale estimate is the mean
    p = math.exp(-t)
    sigma2 = t * t / (1.0 - p) ** 2   # METHOD.md §3 hand check for shape 1
    for accuracy in (1.3, 1.6, 2.5, 4.0):
        needed = hand_units(sigma2, accuracy)
        notes = [n for n in method_notes(x, threshold, "known-shape", 1.0, accuracy, 0.95)
                 if n.code == "accuracy-needs-more"]
        assert bool(notes) == (needed > 50)
        if notes:
            assert notes[0].figures["units_needed"] == needed
    # the grid above covers both outcomes
    assert hand_units(sigma2, 1.3) > 50 >= hand_units(sigma2, 4.0)


@pytest.mark.parametrize("method,shape", [("pass-fail", None), ("known-shape", 2.4), ("fitted-shape", None)])
def test_accuracy_note_quotes_the_units_needed_now(gamma_log, method, shape):
    # the note's figure is the one the spreadsheet shows in UNITS_NEEDED_NOW for the same log
    from tailstop.sheet import UNITS_NEEDED_NOW

    notes = [n for n in method_notes(gamma_log, 1500.0, method, shape, 1.2, 0.95) if n.code == "accuracy-needs-more"]
    assert notes and notes[0].figures["units_needed"] == UNITS_NEEDED_NOW(column(gamma_log), 1500.0, 1.2, 0.95, method, shape)


def test_accuracy_needs_both_arguments(gamma_log):
    with pytest.raises(ValueError, match="both"):
        method_notes(gamma_log, 1500.0, accuracy=1.5)
    with pytest.raises(ValueError, match="accuracy"):
        method_notes(gamma_log, 1500.0, accuracy=0.8, confidence=0.95)
    with pytest.raises(ValueError, match="confidence"):
        method_notes(gamma_log, 1500.0, accuracy=1.5, confidence=95)


def test_without_accuracy_there_is_no_accuracy_note():
    values = BELOW[-5:] + ABOVE[:5]
    assert method_notes(values, 100.0) == []


# --- the formula ------------------------------------------------------------------------------

def test_formula_is_registered_with_the_fixed_arguments():
    assert sheet.TAIL_METHOD_NOTES is TAIL_METHOD_NOTES
    spec = TAIL_METHOD_NOTES.tailstop_spec
    assert list(spec.argument_help) == ["observations", "threshold", "method", "shape", "model"]
    assert spec.returns == "column" and spec.ranges == ("observations",)


def log_range_from_workbook(path, values):
    """Write a one-column log with openpyxl, read it back as a spreadsheet passes a range."""
    book = openpyxl.Workbook()
    book.active.title = "Log"
    book.active.append(["Hours to failure"])
    for value in values:
        book.active.append([value])
    book.save(path)
    sheet = openpyxl.load_workbook(path, data_only=True)["Log"]
    return [[cell.value for cell in row] for row in sheet[f"A2:A{len(values) + 1}"]]


def test_formula_lists_notes_as_a_column_from_a_workbook(tmp_path):
    values = BELOW + ABOVE[:4] + [None]  # a blank row at the end, as in a log still being filled
    cells = log_range_from_workbook(tmp_path / "log.xlsx", values)
    assert cells[-1] == [None]
    result = TAIL_METHOD_NOTES(cells, 100, "pass-fail")
    assert result == [[line] for line in note_lines(method_notes(BELOW + ABOVE[:4], 100.0))]
    assert len(result) == 1 and "4 of 14" in result[0][0]


def test_formula_several_notes_one_per_row(two_cluster_log):
    threshold = float(np.sort(two_cluster_log)[2])  # exactly 3 units at or below it
    result = TAIL_METHOD_NOTES(column(two_cluster_log), threshold, "known-shape", 1.0)
    lines = [row[0] for row in result]
    assert all(len(row) == 1 for row in result)
    assert len(lines) == 3  # fit fails, shape disagrees, 3 at or below the threshold
    assert "3 of 80" in lines[2]
    assert not any(line.startswith("#") for line in lines)


def test_formula_says_so_when_nothing_applies():
    values = BELOW[-5:] + ABOVE[:5]
    assert TAIL_METHOD_NOTES(column(values), 100.0) == [[NO_NOTES_TEXT]]
    assert TAIL_METHOD_NOTES(column(values), "100", "Pass Fail", None) == [[NO_NOTES_TEXT]]


def test_formula_reads_survivor_marks_for_pass_fail():
    # five units taken off test at the threshold without failing, written 100+, count as beyond it
    values = [[v] for v in BELOW[:5]] + [["100+"]] * 5
    assert TAIL_METHOD_NOTES(values, 100.0) == [[NO_NOTES_TEXT]]
    without_marks = [[v] for v in BELOW[:5]] + [[100.0]] * 5
    assert "at or before" in TAIL_METHOD_NOTES(without_marks, 100.0)[0][0]


@pytest.mark.parametrize("method,shape", [("fitted-shape", None), ("known-shape", 2)])
def test_formula_states_the_censoring_assumption_for_gamma_methods(method, shape):
    values = [[v] for v in BELOW[:5]] + [["100+"]] * 5
    lines = [row[0] for row in TAIL_METHOD_NOTES(values, 100.0, method, shape)]
    assert any("5 of 10 units suspended" in line and "independent of its lifetime" in line for line in lines)
    assert any("50% of the units are suspended" in line for line in lines)
    assert any("fit check not run" in line for line in lines)


def test_formula_reads_a_suspension_below_the_threshold():
    lines = [row[0] for row in TAIL_METHOD_NOTES([[10.0], [20.0], ["50+"], [130.0]], 100.0)]
    assert any("1 of 4 units suspended before the threshold" in line for line in lines)


def test_formula_says_how_many_failures_a_method_needs():
    lines = [row[0] for row in TAIL_METHOD_NOTES([[10.0], ["20+"], ["50+"], ["130+"]], 100.0, "fitted-shape")]
    assert "fitted-shape needs at least 2 failures" in lines[0] and "CONTINUE" in lines[0]


@pytest.mark.parametrize("args,fragment", [
    (([[10.0], ["n/a"], [30.0]], 100.0), "row 2"),
    (([[10.0], [20.0]], None), "threshold"),
    (([[10.0], [20.0]], -5.0), "threshold"),
    (([[10.0], [20.0]], 100.0, "known-shape"), "shape"),
    (([[10.0], [20.0]], 100.0, "known-shape", 0), "shape"),
    (([[10.0], [20.0]], 100.0, "weibull"), "method"),
    (([[10.0]], 100.0), "at least 2"),
])
def test_formula_answers_bad_input_with_cell_text(args, fragment):
    result = TAIL_METHOD_NOTES(*args)
    assert isinstance(result, str) and result.startswith("#TAILSTOP!")
    assert fragment in result


def test_formula_refuses_a_suspension_below_the_threshold_under_pass_fail_exact():
    # its exact guarantee counts units on each side of the threshold only: the notes say so, as the estimate does
    values = [[10.0], [20.0], ["50+"], [130.0]]
    result = TAIL_METHOD_NOTES(values, 100.0, "pass-fail-exact")
    assert isinstance(result, str) and result.startswith("#TAILSTOP!") and "pass-fail-exact" in result
    assert "internal error" not in result
