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
