"""pass-fail-exact: a pass-fail rule whose exact coverage is at least the confidence for every p in its range.

The checks of the guarantee use a forward propagation of P(n, S) written here
from the rule as docs/method.md states it (n >= c (z / log d)² / (p̂ (1 - p̂)),
p̂ = S/n, 0 < S < n, at the check points) — not the lattice
counts of ``core.guaranteed`` — and a seeded simulation of logs through the
spreadsheet formulas themselves.
"""
from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy import stats

from tailstop.core import guaranteed
from tailstop.core.guaranteed import cache as tuning_cache
from tailstop.core.guaranteed import certify, lattice
from tailstop.core.guaranteed import bisection as tuning_module
from tailstop.core.operating import pass_fail_exact
from tailstop.sheet import (
    ACCURACY_FOR_UNITS,
    PLAN_SUMMARY,
    STOP_DECISION,
    STOP_DECISION_COLUMN,
    TAIL_ODDS_BOUNDS,
    TAIL_PROB_BOUNDS,
    TWO_STAGE_UNITS,
    UNITS_NEEDED_NOW,
    UNITS_REQUIRED,
)


@pytest.fixture(autouse=True)
def private_cache(tmp_path, monkeypatch):
    """Every test tunes into its own cache folder and starts with an empty memory cache."""
    monkeypatch.setenv("TAILSTOP_CACHE_DIR", str(tmp_path / "cache"))
    guaranteed.clear_memory_cache()
    yield
    guaranteed.clear_memory_cache()


def propagated_coverage(p, accuracy, confidence, pilot, check_every, factor, tolerance=1e-11):
    """(coverage, E[N], P(not stopped)) at p by forward propagation of P(n, S), written from docs/method.md.

    The states still running form a window of S; a run not stopped when the
    running probability falls below ``tolerance`` counts as not covered.
    """
    z = stats.norm.ppf(0.5 + confidence / 2)
    boundary = factor * (z / math.log(accuracy)) ** 2
    q = p / (1 - p)
    mass = stats.binom.pmf(np.arange(pilot + 1), pilot, p)
    low = 0  # mass[i] is P(n, S = low + i)
    n, covered, mean = pilot, 0.0, 0.0
    while True:
        s = low + np.arange(mass.size)
        if n >= pilot and (n - pilot) % check_every == 0:
            share = s / n
            with np.errstate(divide="ignore"):
                stop = (n >= boundary / (share * (1 - share))) & (s > 0) & (s < n)
            estimate = s[stop] / (n - s[stop])
            inside = (estimate / accuracy <= q * (1 + 1e-12)) & (q <= estimate * accuracy * (1 + 1e-12))
            covered += mass[stop][inside].sum()
            mean += n * mass[stop].sum()
            mass = np.where(stop, 0.0, mass)
        nonzero = np.flatnonzero(mass > 1e-300)
        if nonzero.size == 0 or mass.sum() < tolerance:
            return covered, mean, mass.sum()
        mass, low = mass[nonzero[0]: nonzero[-1] + 1], low + int(nonzero[0])
        mass = np.concatenate([mass * (1 - p), [0.0]]) + np.concatenate([[0.0], mass * p])
        n += 1


def grid_in_range(p_low, count):
    """p from p_low to 1 - p_low, evenly spaced in log-odds."""
    x = np.linspace(math.log(p_low / (1 - p_low)), -math.log(p_low / (1 - p_low)), count)
    return 1 / (1 + np.exp(-x))


SETTINGS = [(3.0, 0.90, 2, 1), (2.0, 0.95, 5, 3)]


@pytest.mark.parametrize("accuracy, confidence, pilot, check_every", SETTINGS)
def test_exact_coverage_never_below_the_confidence(accuracy, confidence, pilot, check_every):
    tuned = guaranteed.tuning(accuracy, confidence, pilot, check_every)
    rng = np.random.default_rng(20261202)
    inner = tuned.p_low * (1 + 1e-9)
    points = np.concatenate([
        grid_in_range(inner, 25),
        rng.uniform(inner, 1 - inner, 8),
        inner * np.exp(rng.uniform(0, math.log(20), 3)),          # near 0
        1 - inner * np.exp(rng.uniform(0, math.log(20), 3)),      # near 1
    ])
    lowest = 1.0
    for p in points:
        coverage, _, _ = propagated_coverage(p, accuracy, confidence, pilot, check_every, tuned.factor)
        lowest = min(lowest, coverage)
        assert coverage >= confidence, f"p = {p:.6g}: coverage {coverage:.6f} < {confidence}"
    # the certified bound is a lower bound of every coverage seen
    # property: the certified bound is a lower bound (1e-9: the propagation's own truncation tolerance)
    assert tuned.coverage_bound <= lowest + 1e-9


def test_the_untuned_boundary_is_pass_fails_and_falls_short():
    # c = 1 is pass-fail's own rule: the propagation here agrees with the planning figures of pass-fail
    for p in (0.4, 0.05, 0.01):
        coverage, mean, _ = propagated_coverage(p, 3.0, 0.90, 2, 1, factor=1.0, tolerance=1e-13)
        plain = pass_fail_exact(p, 3.0, 0.90, 2)
        # check value: the propagation written in this file against pass-fail's exact planning figures;
        # tolerance 1e-9: both truncate the running mass near 1e-13 and sum thousands of terms
        assert coverage == pytest.approx(plain.coverage, abs=1e-9)
        assert mean == pytest.approx(plain.expected_units, rel=1e-9)
    # ... and its coverage is below 0.90 somewhere: the check finds a p, and the propagation confirms it
    found = tuning_module.check(1.0, 3.0, 0.90, 2, 1, tuning_module.p_low_for(3.0, 0.90))
    assert not found.holds and found.reason == "point below"
    witness = found.where[0]
    # property: the witness is below 90 % under the untuned rule and reaches it under the tuned one
    # (the propagation written in this file decides; 0.90 is the confidence asked)
    assert propagated_coverage(witness, 3.0, 0.90, 2, 1, factor=1.0)[0] < 0.90
    tuned = guaranteed.tuning(3.0, 0.90, 2)
    assert tuned.factor > 1
    assert propagated_coverage(witness, 3.0, 0.90, 2, 1, tuned.factor)[0] >= 0.90


def test_lattice_counts_give_the_propagated_distribution():
    # two ways to the same exact figures: first-passage path counts against P(n, S) propagation
    accuracy, confidence, pilot, factor = 2.0, 0.95, 4, 1.2
    boundary = factor * tuning_module.base_boundary(accuracy, confidence)
    states = lattice.first_passage_counts(boundary, pilot, 2, *tuning_module.box_for(boundary, 0.01))
    for p in (0.5, 0.2, 0.03, 0.011):
        mass = states.mass(p)
        coverage, mean, left = propagated_coverage(p, accuracy, confidence, pilot, 2, factor, tolerance=1e-14)
        # check value: the propagation written in this file; tolerance 1e-9: it stops at 1e-14 of mass left,
        # the lattice box at p = 0.01 cuts a little more
        assert mass.sum() == pytest.approx(1.0, abs=1e-9)
        assert float(np.dot(states.k + states.f, mass)) == pytest.approx(mean, rel=1e-9)
        assert certify.coverage_at(states, p, accuracy) == pytest.approx(coverage, abs=1e-9)


def test_interval_bound_is_below_the_coverage_inside_the_interval():
    accuracy, confidence, pilot, factor = 3.0, 0.90, 2, 1.3
    boundary = factor * tuning_module.base_boundary(accuracy, confidence)
    states = lattice.first_passage_counts(boundary, pilot, 1, *tuning_module.box_for(boundary, 0.005))
    rng = np.random.default_rng(5)
    for _ in range(5):
        a = float(np.exp(rng.uniform(math.log(0.02), math.log(0.5))))
        b = a * float(np.exp(rng.uniform(0.001, 0.05)))
        bound = certify.interval_bound(states, a, b, accuracy)
        inside = np.linspace(a, b, 9)
        # property: the interval bound is below the coverage at every p inside (1e-12: rounding)
        assert bound <= min(propagated_coverage(p, accuracy, confidence, pilot, 1, factor)[0] for p in inside) + 1e-12


def test_the_rule_treats_p_and_one_minus_p_alike():
    n = np.arange(2, 400)[:, None]
    k = np.arange(0, 400)[None, :]
    n, k = np.broadcast_arrays(n, k)
    valid = k <= n
    forward = lattice.stop_condition(n, k, 7.3, 3, 2)
    mirrored = lattice.stop_condition(n, n - k, 7.3, 3, 2)
    assert np.array_equal(forward[valid], mirrored[valid])


def test_simulated_logs_through_the_formulas_agree_with_the_exact_figures():
    """Seeded runs of invented lifetimes through STOP_DECISION_COLUMN and TAIL_ODDS_BOUNDS."""
    accuracy, confidence, pilot, threshold = 3.0, 0.90, 2, 1000.0
    p = 0.08
    scale = threshold / -math.log(p)   # exponential lifetimes: P(X > threshold) = p
    exact = pass_fail_exact(p, accuracy, confidence, pilot, method="pass-fail-exact")
    rng = np.random.default_rng(424242)
    runs, units, covered = 400, [], 0
    q = p / (1 - p)
    for _ in range(runs):
        log = np.round(rng.exponential(scale, 1200), 1) + 0.1
        column = STOP_DECISION_COLUMN([[v] for v in log], threshold, accuracy, confidence, pilot, "pass-fail-exact")
        decisions = [row[0] for row in column]
        stop = decisions.index("STOP") + 1
        low, high = TAIL_ODDS_BOUNDS([[v] for v in log[:stop]], threshold, accuracy, "pass-fail-exact")[0]
        units.append(stop)
        covered += low <= q <= high
    units = np.array(units, float)
    assert abs(units.mean() - exact.expected_units) < 4 * units.std() / math.sqrt(runs)
    share = covered / runs
    assert abs(share - exact.coverage) < 4 * math.sqrt(exact.coverage * (1 - exact.coverage) / runs)


def test_formulas_take_the_method(tmp_path):
    log = [[v] for v in (500, 1500, 700, 2100, 300, 1200, 800, 950, 1800, 400, 650, 1300)]
    tuned = guaranteed.tuning(2.0, 0.9, 2)
    assert STOP_DECISION(log, 1000, 2.0, 0.9, 2, "pass-fail-exact") in ("CONTINUE", "STOP", "PAST STOP")
    low, high = TAIL_PROB_BOUNDS(log, 1000, 2.0, "pass-fail-exact")[0]
    assert (low, high) == tuple(TAIL_PROB_BOUNDS(log, 1000, 2.0, "pass-fail")[0])  # same estimate and interval
    needed = UNITS_NEEDED_NOW(log, 1000, 2.0, 0.9, "pass-fail-exact")
    plain = UNITS_NEEDED_NOW(log, 1000, 2.0, 0.9, "pass-fail")
    assert needed >= plain
    # the tuned boundary: ceil(c (z/log d)² σ̂²) with S = 5 of n = 12 beyond, σ̂² = n²/(S (n - S))
    assert needed == math.ceil(tuned.boundary * 144 / 35 - 1e-9)
    assert TWO_STAGE_UNITS(log, 1000, 2.0, 0.9, "pass-fail-exact") >= TWO_STAGE_UNITS(log, 1000, 2.0, 0.9, "pass-fail")
    required = UNITS_REQUIRED(1000, 1, 1000 / math.log(2), 2.0, 0.9, "pass-fail-exact")   # p = 1/2
    z = stats.norm.ppf(0.95)
    assert required == math.ceil(tuned.factor * 4 * (z / math.log(2)) ** 2)
    assert "no accuracy for a unit count" in ACCURACY_FOR_UNITS(100, 1000, 2, 600, 0.9, "pass-fail-exact")


def test_a_survivor_past_the_threshold_counts_and_one_below_is_refused():
    log = [[v] for v in (500, "1500+", 700, 2100, 300, 1200, 800, 950, 1800, 400, 650, 1300)]
    beyond = [[v] for v in (500, 1500, 700, 2100, 300, 1200, 800, 950, 1800, 400, 650, 1300)]
    assert STOP_DECISION_COLUMN(log, 1000, 3.0, 0.9, 2, "pass-fail-exact") == \
        STOP_DECISION_COLUMN(beyond, 1000, 3.0, 0.9, 2, "pass-fail-exact")
    below = [[v] for v in (500, "700+", 700, 2100, 300, 1200, 800, 950, 1800, 400, 650, 1300)]
    text = STOP_DECISION(below, 1000, 3.0, 0.9, 2, "pass-fail-exact")
    assert text.startswith("#TAILSTOP!") and "use pass-fail" in text
    text = TAIL_PROB_BOUNDS(below, 1000, 3.0, "pass-fail-exact")
    assert isinstance(text, str) and text.startswith("#TAILSTOP!") and "use pass-fail" in text


def test_plan_summary_shows_both_rules_and_the_range():
    table = dict((row[0], row[1]) for row in PLAN_SUMMARY(1000, 1, 1000 / -math.log(0.02), 3, 0.9, 2,
                                                          "pass-fail-exact"))
    tuned = guaranteed.tuning(3.0, 0.9, 2)
    assert table["method"] == "pass-fail-exact"
    # property: the tuned rule's coverage is the 0.9 asked at least; pass-fail figures from
    # operating.pass_fail_exact (checked against the propagation above), tolerance 1e-9 as there
    assert table["coverage"] >= 0.9
    assert table["pass-fail-exact guaranteed from p"] == tuned.p_low
    assert table["pass-fail-exact guarantee covers this p"] == "yes"
    plain = pass_fail_exact(table["true probability p"], 3.0, 0.9, 2)
    assert table["pass-fail: expected units E[N]"] == pytest.approx(plain.expected_units, rel=1e-9)
    assert table["pass-fail: coverage"] == pytest.approx(plain.coverage, rel=1e-9)
    assert table["expected units E[N]"] > table["pass-fail: expected units E[N]"]


# --------------------------------------------------------------------------- the cache


def test_tuning_is_cached_on_disk_and_in_memory(monkeypatch):
    first = guaranteed.tuning(3.0, 0.9, 2)
    stored = json.loads(tuning_cache.cache_file().read_text())
    assert len(stored) == 1
    guaranteed.clear_memory_cache()

    def refuse(*args, **kwargs):
        raise AssertionError("tuned again although the cache holds the result")

    monkeypatch.setattr(guaranteed, "tune", refuse)
    again = guaranteed.tuning(3.0, 0.9, 2)
    assert again == first
    assert guaranteed.tuning(3.0, 0.9, 2) is again  # from memory now


def _tuned_again(monkeypatch):
    """The tuning of (3, 0.9, 2) asked for again from a cold memory cache, with the calls to tune counted."""
    guaranteed.clear_memory_cache()
    calls = []
    original = guaranteed.tune

    def counted(*args):
        calls.append(args)
        return original(*args)

    monkeypatch.setattr(guaranteed, "tune", counted)
    return guaranteed.tuning(3.0, 0.9, 2), calls


@pytest.mark.parametrize("damage", ["value", "hash", "garbage"])
def test_a_damaged_cache_is_recomputed(monkeypatch, damage):
    first = guaranteed.tuning(3.0, 0.9, 2)
    path = tuning_cache.cache_file()
    if damage == "garbage":
        path.write_text("{not json")
    else:
        content = json.loads(path.read_text())
        entry = next(iter(content.values()))
        if damage == "value":
            entry["record"]["factor"] = 1.0
        else:
            entry["sha256"] = "0" * 64
        path.write_text(json.dumps(content))
    again, calls = _tuned_again(monkeypatch)
    assert len(calls) == 1
    assert again.factor == first.factor
    content = json.loads(path.read_text())
    entry = next(iter(content.values()))
    assert entry["record"]["factor"] == first.factor  # written again, intact


@pytest.mark.parametrize("field, value", [("factor", 0.5), ("boundary", 1.0), ("p_low", 0.7), ("factor", math.nan)])
def test_a_signed_but_impossible_record_is_recomputed(monkeypatch, field, value):
    # property: a record whose hash matches but whose figures cannot be a tuning (factor below 1 or not
    # finite, a boundary that is not factor × (z / log d)², p_low outside (0, ½)) is not trusted, whoever
    # wrote it; the tuning is computed again
    first = guaranteed.tuning(3.0, 0.9, 2)
    path = tuning_cache.cache_file()
    content = json.loads(path.read_text())
    entry = next(iter(content.values()))
    entry["record"][field] = value
    entry["sha256"] = tuning_cache._digest(entry["record"])
    path.write_text(json.dumps(content))
    again, calls = _tuned_again(monkeypatch)
    assert len(calls) == 1
    assert (again.factor, again.boundary, again.p_low) == (first.factor, first.boundary, first.p_low)


@pytest.mark.parametrize("accuracy, confidence", [(3.0, 0.9), (5.0, 0.9)])
def test_the_table_in_the_method_page_is_what_the_tuning_gives(accuracy, confidence):
    from pathlib import Path

    text = (Path(__file__).resolve().parents[1] / "docs" / "method.md").read_text(encoding="utf-8")
    row = next(line for line in text.splitlines() if line.startswith(f"| {accuracy:g} | {confidence:g} | "))
    cells = [cell.strip() for cell in row.strip("|").split("|")]
    tuned = guaranteed.tuning(accuracy, confidence, 2)
    assert f"{tuned.factor:.3f}" == cells[2]
    assert f"{tuned.p_low:.2g}" == cells[3]
    assert f"{tuned.coverage_bound:.4f}" == cells[4]
    assert float(cells[4]) >= confidence
    # the pass-fail column: its lowest coverage is below the confidence (propagation written here, at a p near it)
    assert float(cells[6]) < confidence


def test_an_accuracy_too_tight_to_tune_is_refused_in_words():
    log = [[v] for v in (500, 1500, 700, 2100, 300, 1200, 800, 950, 1800, 400, 650, 1300)]
    text = STOP_DECISION(log, 1000, 1.01, 0.95, 2, "pass-fail-exact")
    assert text.startswith("#TAILSTOP!") and "use pass-fail" in text.lower()
    assert STOP_DECISION(log, 1000, 1.01, 0.95, 2, "pass-fail") == "CONTINUE"


def test_annotate_writes_the_decisions_of_the_formula(tmp_path, capsys):
    import openpyxl

    from conftest import write_log
    from tailstop.commands import main
    from tailstop.workbooks.annotate import default_output
    from tailstop.workbooks.log_layout import DECISION_HEADER

    rng = np.random.default_rng(99)
    lifetimes = [float(v) for v in np.round(rng.exponential(1000 / -math.log(0.2), 120), 1) + 0.1]
    path = write_log(tmp_path / "log.xlsx", lifetimes)
    code = main(["annotate", str(path), "--column", "B", "--threshold", "1000", "--accuracy", "3",
                 "--confidence", "0.9", "--pilot", "2", "--method", "pass-fail-exact"])
    assert code == 0, capsys.readouterr()
    sheet = openpyxl.load_workbook(default_output(path))["Log"]
    column = next(cell.column for cell in sheet[1] if cell.value == DECISION_HEADER)
    written = [sheet.cell(row, column).value for row in range(2, len(lifetimes) + 2)]
    expected = [row[0] for row in STOP_DECISION_COLUMN([[v] for v in lifetimes], 1000, 3, 0.9, 2, "pass-fail-exact")]
    assert written == expected and "STOP" in written
