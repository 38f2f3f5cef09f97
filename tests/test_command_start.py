"""The command line starts without the heavy libraries; each verb imports them only when it runs.

Measured as which modules a fresh interpreter has loaded (never as a time:
benchmarks/bench_command_start.py measures the CPU time against a bare
interpreter). ``tailstop.sheet`` still registers every formula at import.
"""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

from tailstop.commands import VERBS

PACKAGE = str(Path(__file__).resolve().parents[1] / "udfs")
# what a `--help` must not load: each costs 0.1 s to over 1 s of CPU to import
HEAVY = ("numpy", "scipy", "openpyxl", "xlwings", "formulas", "schedula", "matplotlib", "PIL", "defusedxml")


def loaded_after(code):
    """Top-level packages of HEAVY that a fresh interpreter has loaded after running ``code``."""
    probe = f"""
import json, sys
{code}
print(json.dumps(sorted({{name.split(".")[0] for name in sys.modules}} & set({list(HEAVY)!r}))))
"""
    done = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, timeout=120,
                          env={"PYTHONPATH": PACKAGE, "PATH": "/usr/bin:/bin"})
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout.strip().splitlines()[-1])


def help_of(*words):
    return f"""
import contextlib, io
from tailstop.commands import main
with contextlib.redirect_stdout(io.StringIO()):
    try:
        main({list(words)!r})
    except SystemExit:
        pass
"""


def test_the_command_list_loads_nothing_heavy():
    assert loaded_after(help_of("--help")) == []


@pytest.mark.parametrize("verb", sorted(VERBS))
def test_a_verbs_help_loads_nothing_heavy(verb):
    assert loaded_after(help_of(verb, "--help")) == []


def test_parsing_a_command_line_loads_nothing_heavy():
    code = """
from tailstop.commands import build_parser
build_parser().parse_args(["plan", "--threshold", "1500", "--shape", "2", "--scale", "600", "--accuracy", "1.5"])
"""
    assert loaded_after(code) == []


def test_the_core_api_is_still_there_on_first_use():
    import tailstop

    for name in tailstop.__all__:
        assert getattr(tailstop, name) is not None, name
    assert tailstop.tail_probability(1500.0, 2.0, 600.0).p > 0
    with pytest.raises(AttributeError):
        tailstop.no_such_name  # noqa: B018


def test_the_spreadsheet_module_registers_every_formula_at_import():
    import tailstop.sheet

    code = "import tailstop.sheet\nprint(sorted(tailstop.sheet.FORMULAS))"
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120,
                          env={"PYTHONPATH": PACKAGE, "PATH": "/usr/bin:/bin"})
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == str(sorted(tailstop.sheet.FORMULAS))
    assert "STOP_DECISION_COLUMN" in tailstop.sheet.FORMULAS
