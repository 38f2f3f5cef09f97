"""Speed through the cell boundary: formulas over a log, cells in and cells out, against a baseline of the same run.

    python benchmarks/bench_formula_boundary.py

A spreadsheet passes a column as a list of one-element lists. The baseline is
the least any formula over it must do: turn that list into an array and make
one numpy pass over it (cumulative sum and compare). Each formula that
returns a column or a table from a log is timed through the formula itself
(cleaning the cells, the core, building the cells it returns), and printed
beside the baseline with their ratio:

* ``STOP_DECISION_COLUMN`` over 1,048,576 filled rows, for each method and
  model (target: <= 10x the baseline for pass-fail and known-shape, aim
  <= 5x; fitted-shape under 3 s), and over a whole-column reference holding
  a 500-row log (target: within 50 ms of the same log passed as its own 500
  rows, timed in the same run).
* ``TAIL_METHOD_NOTES`` and ``FIT_COMPARE`` over the full column. They return a
  few cells; their time is the statistics (fits and their checks), not the
  boundary.

Every time is the best of several runs, baseline and formula taken in turn so
that a busy machine slows both alike. After each call a container object is
made, so that a garbage collection the call left pending is counted in it.
The data are invented: gamma lifetimes (shape 2.4, scale 520 kcycles),
threshold 1,500 kcycles, accuracy 1.5, 95 % confidence, pilot 10.
"""
from __future__ import annotations

import math
import time
from operator import itemgetter

import numpy as np

import tailstop.sheet  # noqa: F401 - registers every formula
from tailstop.sheet.formula import FORMULAS

ROWS = 1_048_576
SHAPE, SCALE, THRESHOLD, ACCURACY, CONFIDENCE, PILOT = 2.4, 520.0, 1500.0, 1.5, 0.95, 10
DECISIONS = (("pass-fail", None, None), ("known-shape", SHAPE, None), ("fitted-shape", None, None),
             ("known-shape", 1.7, "weibull"), ("fitted-shape", None, "lognormal"))


def timed(function):
    start = time.perf_counter()
    result = function()
    [].append(result)  # a container allocation: a collection the call left pending happens here, timed
    return time.perf_counter() - start


def best_in_turn(function, baseline, repeat):
    """Best time of ``function`` and of ``baseline``, each run alternately ``repeat`` times."""
    ours, base = math.inf, math.inf
    for _ in range(repeat):
        base = min(base, timed(baseline))
        ours = min(ours, timed(function))
    return ours, base


def baseline_for(cells):
    """The floor: the list of rows to an array, one cumulative-sum-and-compare pass."""
    def run():
        x = np.fromiter(map(itemgetter(0), cells), dtype=float, count=len(cells))
        n = np.arange(1, x.size + 1)
        return int(np.argmax(n >= 23.0 * (np.cumsum(x) / n)))
    return run


def verdict(met):
    return "met" if met else "NOT MET"


def main():
    rng = np.random.default_rng(20261201)
    x = rng.gamma(SHAPE, SCALE, size=ROWS)
    full = [[float(v)] for v in x]
    baseline = baseline_for(full)
    column = FORMULAS["STOP_DECISION_COLUMN"]
    print(f"{ROWS:,} filled rows passed as a spreadsheet passes a column (a list of 1-element lists)")
    print(f"{'formula':22s} {'method':13s} {'model':10s} {'time':>10s} {'baseline':>10s} {'ratio':>7s}  target")
    for method, shape, model in DECISIONS:
        arguments = (THRESHOLD, ACCURACY, CONFIDENCE, PILOT, method, shape, None, model)
        seconds, base = best_in_turn(lambda: column(full, *arguments), baseline, repeat=3)
        ratio = seconds / base
        if method == "fitted-shape":
            target = f"< 3 s: {verdict(seconds < 3.0)}"
        else:
            target = f"<= 10x: {verdict(ratio <= 10.0)} (aim <= 5x: {verdict(ratio <= 5.0)})"
        print(f"{'STOP_DECISION_COLUMN':22s} {method:13s} {model or 'gamma':10s} {seconds * 1e3:7.1f} ms "
              f"{base * 1e3:7.1f} ms {ratio:7.1f}  {target}")
    for name, arguments in (("TAIL_METHOD_NOTES", (THRESHOLD,)), ("FIT_COMPARE", ())):
        function = FORMULAS[name]
        seconds, base = best_in_turn(lambda: function(full, *arguments), baseline, repeat=2)
        print(f"{name:22s} {'-':13s} {'-':10s} {seconds * 1e3:7.1f} ms {base * 1e3:7.1f} ms {seconds / base:7.1f}"
              "  (a few cells out: the time is the fits)")

    print()
    print("a 500-row log in a whole-column reference against the same 500 rows passed alone")
    log = full[:500]
    whole = log + [[None] for _ in range(ROWS - 500)]
    print(f"{'method':13s} {'whole column':>13s} {'500 rows':>10s} {'difference':>11s}  target")
    for method, shape, model in DECISIONS[:3]:
        arguments = (THRESHOLD, ACCURACY, CONFIDENCE, PILOT, method, shape)
        in_column, alone = best_in_turn(lambda: column(whole, *arguments), lambda: column(log, *arguments), 5)
        difference = in_column - alone
        print(f"{method:13s} {in_column * 1e3:10.1f} ms {alone * 1e3:7.1f} ms {difference * 1e3:8.1f} ms  "
              f"within 50 ms: {verdict(difference <= 0.050)}")


if __name__ == "__main__":
    main()
