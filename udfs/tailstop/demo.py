"""``tailstop demo``: run the main job on the invented demo scenario."""
from __future__ import annotations

from . import scenario
from .cli import command


@command("demo", "Run tailstop on the shipped demo scenario and print what it found.")
def add_arguments(parser):
    return run


def run(args):
    from .sheet import TAIL_PROB_BOUNDS, TAIL_PROB_EST, UNITS_REQUIRED

    log = scenario.bench_log()
    column = [[float(v)] for v in log]
    planned = UNITS_REQUIRED(scenario.THRESHOLD, scenario.GUESS_SHAPE, scenario.GUESS_SCALE,
                             scenario.ACCURACY, scenario.CONFIDENCE, "pass-fail")
    used = column[: int(planned)]
    print(f"Demo: solenoid valves on a cycling bench, warranty limit {scenario.THRESHOLD:g} {scenario.UNIT}")
    print(f"Fixed-size plan (pass-fail, guess shape {scenario.GUESS_SHAPE:g}, scale {scenario.GUESS_SCALE:g}): "
          f"{planned} units for odds within x{scenario.ACCURACY:g} at {scenario.CONFIDENCE:.0%}")
    for method in ("pass-fail", "fitted-shape"):
        p = TAIL_PROB_EST(used, scenario.THRESHOLD, method)
        low, high = TAIL_PROB_BOUNDS(used, scenario.THRESHOLD, scenario.ACCURACY, method)[0]
        print(f"  {method:12s} P(life > {scenario.THRESHOLD:g}) = {p:.4f}   bounds {low:.4f} .. {high:.4f}")
    return 0
