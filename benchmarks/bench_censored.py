"""Speed of the decision column on logs with suspended units, through the cell boundary, against the same log without them.

    python benchmarks/bench_censored.py

``STOP_DECISION_COLUMN`` is called as a spreadsheet calls it: a list of
one-element lists in, a column of cells out; a suspended unit is the text
``1200+``. Each case is timed on a log with 10 % of the units pulled at
uniform times (every pull at its own time, the dearest case) and on a
time-terminated log (every survivor stopped at one test time), each printed
beside the same column with the suspension marks removed (the complete-data
path, the baseline of the same run) as ``ratio = censored / complete``.
The rule never stops (an accuracy of 1.01), so every check point is looked
at. Baseline and measurement are taken in turn, best of three.

The Weibull and lognormal prefixes, and the gamma ones with a known shape
(up to shape 20), are fitted all at once around a moving expansion point
(``core/models/censored_prefixes.py``), Weibull with a known shape from its
closed form: O(n) for the column. Gamma pass-fail (the product-limit estimate
of every prefix) and gamma fitted-shape refit each check point (O(n · J), J
the distinct suspension times), so they are timed at 2,000 rows only.
docs/benchmarks.md holds the figures of a run.

The data are invented: gamma lifetimes (shape 2.4, scale 520 kcycles),
threshold 1,500 kcycles, 95 % confidence, pilot 10, test time 2,000 kcycles.
"""
from __future__ import annotations

import math
import time

import numpy as np

import tailstop.sheet  # noqa: F401 - registers every formula
from tailstop.sheet.formula import FORMULAS

SHAPE, SCALE, THRESHOLD, CONFIDENCE, PILOT, ACCURACY, TEST_TIME = 2.4, 520.0, 1500.0, 0.95, 10, 1.01, 2000.0
FAST = (("known-shape", SHAPE, "gamma"), ("known-shape", 2.0, "weibull"), ("fitted-shape", None, "weibull"),
        ("known-shape", 0.7, "lognormal"), ("fitted-shape", None, "lognormal"))
SLOW = (("pass-fail", None, "gamma"), ("fitted-shape", None, "gamma"))


def timed(function):
    start = time.perf_counter()
    result = function()
    [].append(result)  # a collection the call left pending happens here, timed
    return time.perf_counter() - start


def best_in_turn(function, baseline, repeat=3):
    ours, base = math.inf, math.inf
    for _ in range(repeat):
        base = min(base, timed(baseline))
        ours = min(ours, timed(function))
    return ours, base


def cells(times, flags):
    """The column as a spreadsheet passes it: numbers, and ``t+`` texts for the suspended units."""
    return [[f"{float(t)!r}+"] if flag else [float(t)] for t, flag in zip(times, flags)]


def logs(rows, rng):
    lifetimes = rng.gamma(SHAPE, SCALE, rows)
    pulled = np.where(rng.random(rows) < 0.1, rng.uniform(0, 3000, rows), np.inf)
    random_flags = pulled < lifetimes
    type_one = lifetimes > TEST_TIME
    return {"10 % pulled": cells(np.where(random_flags, pulled, lifetimes), random_flags),
            "type I": cells(np.where(type_one, TEST_TIME, lifetimes), type_one)}


def complete(column):
    """The same cells with the suspension marks removed."""
    return [[float(value[0].rstrip("+"))] if isinstance(value[0], str) else value for value in column]


def main():
    formula = FORMULAS["STOP_DECISION_COLUMN"]
    rng = np.random.default_rng(20261202)
    print(f"{'rows':>8s} {'model':10s} {'method':13s} {'log':12s} {'censored':>11s} {'complete':>11s} {'ratio':>7s}")
    for rows, cases in ((2_000, FAST + SLOW), (100_000, FAST)):
        for label, column in logs(rows, rng).items():
            plain = complete(column)
            for method, shape, model in cases:
                arguments = (THRESHOLD, ACCURACY, CONFIDENCE, PILOT, method, shape, None, model)
                result = formula(column, *arguments)
                if any(isinstance(v[0], str) and v[0].startswith("#") for v in result):
                    raise SystemExit(f"{model} {method}: the column answered {result[-1][0]}")
                ours, base = best_in_turn(lambda: formula(column, *arguments),
                                          lambda: formula(plain, *arguments), repeat=1 if rows > 10_000 else 3)
                print(f"{rows:8,d} {model:10s} {method:13s} {label:12s} {ours * 1e3:8.1f} ms {base * 1e3:8.1f} ms "
                      f"{ours / base:7.1f}")


if __name__ == "__main__":
    main()
