"""The README, CI and the registered formulas must not drift apart."""
from __future__ import annotations

import inspect
import re
from pathlib import Path

import tailstop.sheet as sheet

ROOT = Path(__file__).resolve().parent.parent


def readme_commands():
    return re.findall(r"```sh\n(.*?)\n```", (ROOT / "README.md").read_text(), flags=re.DOTALL)


def test_ci_runs_exactly_the_readme_test_command():
    commands = readme_commands()
    test_command = next(c for c in commands if "pytest" in c)
    ci = (ROOT / ".ci" / "run").read_text()
    assert test_command in ci.splitlines()


def test_readme_lists_every_formula_with_its_arguments():
    readme = (ROOT / "README.md").read_text()
    for name, function in sheet.FORMULAS.items():
        parameters = inspect.signature(function.tailstop_body).parameters.items()
        arguments = ", ".join(f"[{p}]" if q.default is not inspect.Parameter.empty else p for p, q in parameters)
        assert f"`{name}({arguments})`" in readme, name


def quick_look():
    """The README's quick-look block, computed from the demo scenario by the formulas."""
    from tailstop.workbooks import scenario
    from tailstop.sheet import STOP_DECISION_COLUMN, TAIL_PROB_BOUNDS, TAIL_PROB_EST

    log = scenario.bench_log()
    column = [[float(v)] for v in log]
    decisions = [row[0] for row in STOP_DECISION_COLUMN(column, scenario.THRESHOLD, scenario.ACCURACY,
                                                        scenario.CONFIDENCE, scenario.PILOT)]
    stop = decisions.index("STOP")
    shown = [*range(0, 3), *range(scenario.PILOT - 1, scenario.PILOT + 2), *range(stop - 1, stop + 3)]
    lines = ["| unit | kcycles to leak | decision |", "|---:|---:|---|"]
    for previous, row in zip([None, *shown], shown):
        if previous is not None and row != previous + 1:
            lines.append("| … | … | … |")
        lines.append(f"| {row + 1} | {log[row]:.1f} | {decisions[row]} |")
    used = column[: stop + 1]
    p = TAIL_PROB_EST(used, scenario.THRESHOLD)
    [[low, high]] = TAIL_PROB_BOUNDS(used, scenario.THRESHOLD, scenario.ACCURACY)
    lines.append("")
    lines.append(f"Estimate from the {stop + 1} valves up to the STOP: P(life > {scenario.THRESHOLD:g} kcycles) = "
                 f"{p:.4f}, bounds {low:.4f} to {high:.4f} (odds within a factor {scenario.ACCURACY:g}).")
    return "\n".join(lines)


def test_readme_quick_look_is_what_the_demo_computes():
    """Regression guard only: the README block against the formulas (their figures are checked in tests/test_demo.py)."""
    readme = (ROOT / "README.md").read_text()
    block = readme.split("<!-- quick-look -->\n", 1)[1].split("\n<!-- /quick-look -->", 1)[0]
    assert block == quick_look()
