"""``tailstop demo``: build the demo books from the invented valve scenario and say what they show.

The books (``workbooks/demo_books.py``) go to ``workbooks_demo/`` in the
current folder unless ``--out`` names another. A book that is already there
and identical is left alone; a different one is replaced, and the old one is
kept as ``<name>.backup.xlsx``.
"""
from __future__ import annotations

import sys
from pathlib import Path

__all__ = ["DEFAULT_FOLDER", "add_arguments", "run", "summary"]

DEFAULT_FOLDER = "workbooks_demo"


HELP = "Build the demo workbooks (an invented valve bench test) and print what they show."


def add_arguments(parser):
    parser.add_argument("--out", metavar="DIR", default=DEFAULT_FOLDER,
                        help=f"folder for the books (default: {DEFAULT_FOLDER}/ in the current folder)")
    return run


def run(args, out=None):
    from ..workbooks.demo_books import build_demo

    out = out or sys.stdout
    folder = Path(args.out)
    if folder.exists() and not folder.is_dir():
        print(f"tailstop demo: {folder} is a file; --out names the folder the demo books go into", file=sys.stderr)
        return 1
    try:
        result = build_demo(folder)
    except OSError as problem:
        print(f"tailstop demo: cannot write the demo books into {folder} ({problem.strerror or problem})",
              file=sys.stderr)
        return 1
    print(summary(result), file=out)
    return 0


def _number(value, digits=4):
    return f"{value:.{digits}f}" if isinstance(value, float) else str(value)


def summary(result) -> str:
    """What ``tailstop demo`` prints: units tested, the decision row, the estimate, the warnings, the plan."""
    from ..workbooks import scenario
    from ..workbooks.demo_books import notes_text

    analysis, log = result.analysis, result.log
    plan, figures = analysis.plan, analysis.figures
    unit = scenario.UNIT
    lines = [f"tailstop demo - solenoid valves on a cycling bench (invented data), warranty limit "
             f"{plan.threshold:g} {unit}",
             f"  log: {result.units} valve results on file; rule {plan.describe()}"]
    if analysis.stopped:
        row = log.first_row + analysis.stop_offset
        lines.append(f"  decision: STOP after valve {analysis.units_used} (Log row {row}); "
                     f"{result.units - analysis.units_used} valves after it are PAST STOP and not used")
    else:
        lines.append(f"  decision: {analysis.last_decision} - the rule has not stopped after {result.units} valves")
    lines.append(f"  estimate from the {analysis.units_used} valves: P(life > {plan.threshold:g} {unit}) = "
                 f"{_number(figures['estimate'])}, bounds {_number(figures['p_low'])} .. {_number(figures['p_high'])}; "
                 f"odds {_number(figures['odds'])} ({_number(figures['odds_low'])} .. {_number(figures['odds_high'])})")
    warnings = notes_text(analysis)
    lines += [f"  warning: {note}" for note in warnings] or ["  warnings: none for this log and method"]
    planning = result.planning
    lines.append(f"  planning guess (gamma shape {scenario.GUESS_SHAPE:g}, scale {scenario.GUESS_SCALE:g} {unit}): "
                 f"p = {planning['p_guess']:.4f}; {plan.method}: fixed-size test "
                 f"{planning[('UNITS_REQUIRED', plan.method)]} valves, sequential rule about "
                 f"{planning[('PLAN_EXPECTED_UNITS', plan.method)]:.1f} expected")
    for path in result.paths:
        state = "written" if path in result.changed else "unchanged"
        lines.append(f"  {state}: {path}")
    for backup in result.backups:
        lines.append(f"  the previous book differed and was kept as {backup}")
    return "\n".join(lines)
