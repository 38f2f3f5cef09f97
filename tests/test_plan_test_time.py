"""``tailstop plan --test-time`` with ``--calibrate`` and ``--png``: the censored test simulated at every critical value."""
from __future__ import annotations

import math

import numpy as np
import pytest

from tailstop.commands import main
from tailstop.core import operating
from tailstop.core.methods import estimate_tail
from tailstop.core.models import get_model
from tailstop.core.operating.results import confidence_for_z
from tailstop.core.operating.time_terminated import TimeTerminatedRuns, simulate_with_test_time
from tailstop.core.sequential import stopping_units

PLAN = ["plan", "--threshold", "1000", "--shape", "2", "--scale", "600", "--accuracy", "1.6",
        "--confidence", "0.95", "--pilot", "8", "--replications", "300", "--fitted-replications", "60",
        "--test-time", "1500"]
CASES = [("gamma", "known-shape", 2.0, 600.0), ("weibull", "fitted-shape", 1.5, 900.0),
         ("lognormal", "known-shape", 0.7, 800.0)]


def table_rows(text):
    return {line.split("  ")[0].strip(): line for line in text.splitlines() if line.strip()}


@pytest.mark.parametrize("model, method, shape, scale", CASES)
def test_the_kept_runs_are_the_simulation_of_the_table(model, method, shape, scale):
    # property: the same seed gives the same runs, and at z the path search stops each where the rule does
    settings = (1000.0, shape, scale, 1.6, 0.95, 8, method, 1500.0)
    direct = simulate_with_test_time(*settings, replications=120, model=model)
    kept = TimeTerminatedRuns(*settings, replications=120, model=model).at()
    assert np.array_equal(kept.units, direct.units) and np.array_equal(kept.covered, direct.covered)
    assert (kept.coverage, kept.expected_units) == (direct.coverage, direct.expected_units)


@pytest.mark.parametrize("model, method, shape, scale", CASES)
def test_at_a_larger_critical_value_each_run_stops_where_the_rule_at_that_value_stops(model, method, shape, scale):
    # property: the rule applied to each run's censored log on its own, with the boundary of z' (written here)
    settings = (1000.0, shape, scale, 1.6, 0.95, 8, method, 1500.0)
    runs = TimeTerminatedRuns(*settings, replications=40, model=model)
    z_prime = 2.4
    figures = runs.at(z_prime)
    assert figures.stop_z == z_prime
    lifetime = get_model(model)
    rng = np.random.default_rng(operating.DEFAULT_SEED)
    p = float(lifetime.tail_probability(1000.0, shape, scale).p)
    known = shape if method == "known-shape" else None
    later = 0
    for run in range(40):
        lifetimes = np.asarray(lifetime.draw(rng, shape, scale, runs.plan.n_max), dtype=float)
        suspended = lifetimes > 1500.0
        times = np.where(suspended, 1500.0, lifetimes)
        n = stopping_units(times, 1000.0, 1.6, confidence_for_z(z_prime), 8, method, known, survivors=suspended,
                           model=model)
        assert figures.units[run] == (runs.plan.n_max + 1 if n is None else n)
        if n is not None:
            final = estimate_tail(times[:n], 1000.0, method, known, survivors=suspended[:n], model=model)
            covered = abs(final.log_odds - (math.log(p) - math.log1p(-p))) <= math.log(1.6)
            assert figures.covered[run] == covered
        later += figures.units[run] > runs.at().units[run]
    assert later > 20                                      # a wider boundary stops most runs later


def test_the_time_bound_keeps_the_runs_made_so_far():
    # property: with no time to spare the simulation stops after the least number of runs and says how many
    runs = TimeTerminatedRuns(1000.0, 2.0, 600.0, 1.6, 0.95, 8, "known-shape", 1500.0, replications=500, seconds=0.0,
                        least=30)
    assert runs.replications == 30
    assert runs.at().replications == 30


def test_calibrate_with_a_test_time_is_the_calibration_of_the_kept_runs(capsys):
    assert main(PLAN + ["--calibrate"]) == 0
    out = capsys.readouterr().out
    rows = table_rows(out)
    assert "calibrated z'" in rows
    header = next(line for line in out.splitlines() if line.startswith("calibrated critical value"))
    assert header.split()[3:] == ["pass-fail", "known-shape", "fitted-shape"]
    # the simulated columns are the core's calibration on the kept runs, the table's own runs
    cells = rows["calibrated z'"].split("  ")
    for method, count in (("known-shape", 300), ("fitted-shape", 60)):
        runs = TimeTerminatedRuns(1000.0, 2.0, 600.0, 1.6, 0.95, 8, method, 1500.0, replications=count)
        calibration = operating.calibrate(runs.at, 0.95)
        low = calibration.z_range[0]
        assert any(cell.strip().startswith(f"{calibration.z_calibrated:.4f} ({low:.3f}..") for cell in cells), cells
        assert f"{runs.at().coverage:.4f}" in rows["coverage at z"]       # the table's own runs
        assert f"{method}: calibrated on the {count:,} runs of the table above, every unit stopped at 1500" in out
    # the exact pass-fail column is unchanged by a test time at or beyond the threshold
    exact = operating.calibrate(
        lambda z: operating.pass_fail_exact(operating.tail_probability(1000, 2, 600).p, 1.6, 0.95, 8, stop_z=z), 0.95)
    assert rows["calibrated z'"].split()[2] == f"{exact.z_calibrated:.4f}"


def test_a_test_time_below_the_threshold_calibrates_the_simulated_methods_only(capsys):
    arguments = [a if a != "1500" else "700" for a in PLAN] + ["--method", "known-shape", "--calibrate"]
    assert main(arguments) == 0
    out = capsys.readouterr().out
    header = next(line for line in out.splitlines() if line.startswith("calibrated critical value"))
    assert header.split()[3:] == ["known-shape"]
    # the simulated runs of a censored test are not bounded by an estimate made beforehand, and the page says so
    assert "except the simulated runs of the test stopped at 700" in out


def test_png_with_a_test_time_writes_a_plot(tmp_path, capsys):
    pytest.importorskip("matplotlib")
    target = tmp_path / "plan.png"
    assert main(PLAN + ["--method", "pass-fail", "known-shape", "--png", str(target)]) == 0
    assert target.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert f"Plot written to {target}" in capsys.readouterr().out
