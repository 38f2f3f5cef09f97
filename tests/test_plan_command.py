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
    # tolerance 1e-4: the table prints z to 2 decimals (1.96); NIST/SEMATECH gives 1.959964
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


class Terminal(io.StringIO):
    """A stream that says it is a terminal, as a user's console does."""

    def isatty(self):
        return True


def test_progress_bar_shows_the_time_left_on_a_terminal():
    stream = Terminal()
    bar = ProgressBar("simulating", stream, delay=0.0, refresh=0.0)
    for fraction in (0.1, 0.5, 1.0):
        bar(fraction)
    bar.close()
    text = stream.getvalue()
    assert "simulating" in text and "100%" in text and "left" in text   # tqdm's remaining-time field


def test_progress_bar_stays_off_when_the_output_is_not_a_terminal():
    stream = io.StringIO()
    bar = ProgressBar("simulating", stream, delay=0.0)
    for fraction in (0.1, 0.5, 1.0):
        bar(fraction)
    bar.close()
    assert stream.getvalue() == "" and not bar.shown


def _run_child(arguments, seconds, memory_bytes):
    """Run `tailstop plan` in a child process under a wall-clock alarm and an address-space limit."""
    import os
    import resource
    import subprocess
    import sys

    def limits():
        resource.setrlimit(resource.RLIMIT_AS, (memory_bytes, memory_bytes))

    udfs = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "udfs")
    environment = dict(os.environ, PYTHONPATH=udfs)
    return subprocess.run([sys.executable, "-m", "tailstop.commands", "plan", *arguments], capture_output=True,
                          text=True, timeout=seconds, preexec_fn=limits, env=environment)


def test_a_plan_of_two_billion_units_is_refused_in_words_within_memory():
    # p = 1e-8 (gamma shape 2, scale 600, threshold 12921): pass-fail n* = (z / ln 1.5)² / (p (1 - p))
    # ≈ 2.33e9 units; the exact propagation would need hundreds of GiB. Within 2 GiB and 60 s the
    # command must answer: the two simulated methods, and pass-fail refused with what is known.
    done = _run_child(["--threshold", "12921", "--shape", "2", "--scale", "600", "--accuracy", "1.5",
                       "--replications", "500", "--fitted-replications", "100"], 120, 2 * 1024 ** 3)
    assert done.returncode == 0, done.stderr
    assert "MemoryError" not in done.stdout + done.stderr
    assert "pass-fail: not computed — this plan needs about 2,334,873,290 units" in done.stdout
    assert "known-shape" in done.stdout.splitlines()[3]


@pytest.mark.parametrize("arguments", [
    ["--threshold", "1000", "--shape", "2", "--scale", "600", "--accuracy", "1.001"],
    ["--threshold", "1", "--shape", "2", "--scale", "600", "--accuracy", "1.5"],
])
def test_plans_that_used_to_run_for_ever_answer_within_the_bound(arguments):
    # check value (common practice, no published source): the bound is 30 s of estimated work per
    # computation; the alarm leaves room for three of them plus start-up on a shared machine
    done = _run_child(arguments, 150, 2 * 1024 ** 3)
    assert done.returncode == 0, done.stderr
    assert "not computed — this plan needs about" in done.stdout


def test_method_and_p_guess(capsys):
    from tailstop.sheet import PLAN_SUMMARY_FROM_P

    assert main(["plan", "--p-guess", "0.3", "--accuracy", "1.5", "--pilot", "10"]) == 0
    out = capsys.readouterr().out
    rows = table_rows(out)
    table = dict(PLAN_SUMMARY_FROM_P(0.3, 1.5, 0.95, 10))
    assert f"{table['expected units E[N]']:.4g}" in rows["expected units E[N]"]
    assert "known-shape" not in rows[""]
    assert main(PLAN[:-4] + ["--method", "known-shape", "--replications", "300"]) == 0
    header = table_rows(capsys.readouterr().out)[""]
    assert header.split() == ["known-shape"]
    assert main(["plan", "--p-guess", "0.3", "--accuracy", "1.5", "--method", "known-shape"]) == 1
    assert "pass-fail and pass-fail-exact only" in capsys.readouterr().err
    assert main(["plan", "--accuracy", "1.5"]) == 1
    assert "--p-guess" in capsys.readouterr().err


def test_png_refuses_an_existing_file_and_a_missing_folder_before_computing(tmp_path, capsys, monkeypatch):
    pytest.importorskip("matplotlib")
    from tailstop.core import operating

    target = tmp_path / "plan.png"
    target.write_bytes(b"keep me")

    def no_computing(*args, **kwargs):
        raise AssertionError("computed before the --png target was checked")

    monkeypatch.setattr(operating, "pass_fail_exact", no_computing)
    monkeypatch.setattr(operating, "operating_characteristics", no_computing)
    assert main(PLAN + ["--png", str(target)]) == 1
    assert "add --force" in capsys.readouterr().err and target.read_bytes() == b"keep me"
    assert main(PLAN + ["--png", str(tmp_path / "no-such-folder" / "plan.png")]) == 1
    assert "does not exist" in capsys.readouterr().err


def test_png_force_replaces_the_file(tmp_path, capsys):
    pytest.importorskip("matplotlib")
    target = tmp_path / "plan.png"
    target.write_bytes(b"old")
    assert main(["plan", "--p-guess", "0.3", "--accuracy", "2", "--png", str(target), "--force"]) == 0
    assert target.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_quantiles_carry_no_error_and_a_coverage_from_few_runs_is_rough(capsys):
    assert main(PLAN[:-4] + ["--method", "known-shape", "--replications", "10"]) == 0
    rows = table_rows(capsys.readouterr().out)
    for level in ("5%", "50%", "95%"):
        assert "±" not in rows[f"N {level} quantile"]
    # check value: √(0.95·0.05/10) = 0.069 > 0.01, so 10 runs give a rough coverage
    assert "(rough: 10 runs)" in rows["coverage"]


def test_a_plan_that_falls_short_says_so_and_shows_the_calibrated_value(capsys):
    # check value: docs/method.md's table, pass-fail at p = 0.01, d = 10, 95 %: exact coverage 0.904
    assert main(["plan", "--p-guess", "0.01", "--accuracy", "10", "--pilot", "10"]) == 0
    out = capsys.readouterr().out
    assert "pass-fail: the real coverage 0.9043 is below the nominal 0.95 by 0.0457" in out
    rows = table_rows(out)
    calibration = operating.calibrate(lambda z: operating.pass_fail_exact(0.01, 10.0, 0.95, 10, stop_z=z), 0.95)
    assert rows["calibrated z'"].split()[-1] == f"{calibration.z_calibrated:.4f}"
    assert float(rows["coverage at z'"].split()[-1]) >= 0.95
    # a plan that reaches its level is not calibrated unless asked
    assert main(["plan", "--p-guess", "0.5", "--accuracy", "1.5"]) == 0
    assert "calibrated z'" not in capsys.readouterr().out
