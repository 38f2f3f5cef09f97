"""``tailstop plan``: the comparison table, calibration, the plot and the progress bar."""
from __future__ import annotations

import builtins
import io
import math

import pytest

from tailstop.core import operating
from tailstop.commands import main
from tailstop.commands.plan import ProgressBar

PLAN = ["plan", "--threshold", "1000", "--shape", "2", "--scale", "600", "--accuracy", "1.6",
        "--confidence", "0.95", "--pilot", "8", "--replications", "2000", "--fitted-replications", "150"]


def table_rows(text):
    return {line.split("  ")[0].strip(): line for line in text.splitlines() if line.strip()}


def test_prints_the_three_methods_side_by_side(capsys):
    """The printed table is the core's (a regression guard on the printing); the figures themselves
    against hand computations: tests/test_planning_independent.py::test_the_printed_plan_table_against_hand_computations."""
    assert main(PLAN) == 0
    out = capsys.readouterr().out
    header = next(line for line in out.splitlines() if "pass-fail" in line and "known-shape" in line)
    assert header.split() == ["pass-fail", "pass-fail-exact", "known-shape", "fitted-shape"]
    rows = table_rows(out)
    for label in ("fixed-size units n*", "expected units E[N]", "sd of N", "N 50% quantile", "coverage"):
        assert label in rows
    # the printed figures are those of the core with the same seed
    expected = operating.compare_methods(1000, 2, 600, 1.6, 0.95, 8, replications=2000, fitted_replications=150)
    exact = expected.results["pass-fail"]
    known = expected.results["known-shape"]
    assert f"{exact.expected_units:.4g}" in rows["expected units E[N]"]
    assert f"{known.expected_units:.4g} ± {known.expected_units_se:.2g}" in rows["expected units E[N]"]
    assert f"{exact.fixed_units:,}" in rows["fixed-size units n*"]
    assert "exact" in rows["figures"] and "2,000 replications" in rows["figures"]
    assert "independent units" in out


def test_calibrate_adds_the_calibrated_critical_value(capsys):
    assert main(PLAN + ["--calibrate"]) == 0
    rows = table_rows(capsys.readouterr().out)
    assert "calibrated z'" in rows and "extra expected units" in rows
    z_values = rows["z"].split()[1:]
    assert [float(v) for v in z_values] == pytest.approx([1.96] * 3, abs=1e-4)  # check value: NIST §1.3.6.7.1
    # the exact pass-fail calibration printed equals the core's
    calibration = operating.calibrate(
        lambda z: operating.pass_fail_exact(operating.tail_probability(1000, 2, 600).p, 1.6, 0.95, 8, stop_z=z), 0.95)
    assert rows["calibrated z'"].split()[2] == f"{calibration.z_calibrated:.4f}"
    for value in rows["inflation z'/z"].split()[2:]:
        assert float(value) >= 1.0


def test_png_writes_a_plot(tmp_path, capsys):
    pytest.importorskip("matplotlib")
    target = tmp_path / "plan.png"
    assert main(PLAN + ["--png", str(target)]) == 0
    assert target.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert target.stat().st_size > 10_000
    assert str(target) in capsys.readouterr().out


def test_png_without_matplotlib_says_how_to_install_it(monkeypatch, tmp_path, capsys):
    real_import = builtins.__import__

    def no_matplotlib(name, *args, **kwargs):
        if name.startswith("matplotlib"):
            raise ImportError(name)
        return real_import(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", no_matplotlib)
    assert main(PLAN + ["--png", str(tmp_path / "x.png")]) == 1
    assert "tailstop[plot]" in capsys.readouterr().err
    assert not (tmp_path / "x.png").exists()


@pytest.mark.parametrize("change, text", [
    (("--accuracy", "0.9"), "accuracy must be > 1"),
    (("--pilot", "1"), "pilot must be a whole number >= 2"),
    (("--scale", "-5"), "scale must be"),
    (("--replications", "0"), "replications must be at least 1"),
])
def test_bad_plans_get_a_message(change, text, capsys):
    arguments = list(PLAN)
    arguments[arguments.index(change[0]) + 1] = change[1]
    assert main(arguments) == 1
    assert text in capsys.readouterr().err


class Clock:
    def __init__(self):
        self.now = 0.0

    def __call__(self):
        return self.now


def test_progress_bar_appears_only_after_a_couple_of_seconds():
    clock, stream = Clock(), io.StringIO()
    bar = ProgressBar("simulating", stream, delay=2.0, clock=clock)
    bar(0.3)
    clock.now = 1.9
    bar(0.5)
    assert stream.getvalue() == ""
    clock.now = 2.5
    bar(0.6)
    bar(0.6)  # the same percentage is not drawn twice
    bar(1.0)
    bar.close()
    text = stream.getvalue()
    assert text.count("\r") == 2 and " 60%" in text and "100%" in text and text.endswith("\n")
    assert "#" * ProgressBar.width in text


def test_quick_tasks_print_no_bar():
    stream = io.StringIO()
    bar = ProgressBar("simulating", stream, clock=Clock())
    for fraction in (0.1, 0.5, 1.0):
        bar(fraction)
    bar.close()
    assert stream.getvalue() == ""
    assert math.isclose(bar.delay, 2.0)
