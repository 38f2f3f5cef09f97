"""Speed of the stop/continue decision column, as ratios against baselines measured in the same run.

    python benchmarks/bench_decisions.py

1. A decision column of 1,048,576 rows (a full sheet column) for each method,
   against a bare numpy pass over the same data (cumulative sum and compare),
   in three cases: the rule stops early (the usual log), stops late (at about
   90 % of the rows: every check point before it is looked at), or never
   stops (the accuracy needs twice the rows); for fitted-shape also a late
   stop with the threshold far in the tail, the hardest case for its screen
   (see sequential.py). Targets: known-shape and
   pass-fail within 10x of the baseline, fitted-shape under 3 s. The same
   through the spreadsheet formula, cells in and out, is
   benchmarks/bench_formula_boundary.py.
2. fitted-shape against the naive way, refitting every prefix with
   scipy.stats.gamma.fit, at 2,000 rows.

The data are invented: gamma lifetimes (shape 2.4, scale 520 kcycles),
threshold 1,500 kcycles, 95 % confidence, pilot 10.
"""
from __future__ import annotations

import math
import time

import numpy as np
from scipy import stats

from tailstop.core.methods import model_sigma2
from tailstop.core.rule import boundary_factor
from tailstop.core.sequential import decision_column
from tailstop.core.models.gamma.variance import sigma2_fitted_shape

ROWS = 1_048_576
SHAPE, SCALE, THRESHOLD, CONFIDENCE, PILOT = 2.4, 520.0, 1500.0, 0.95, 10
FAR_THRESHOLD = 6000.0
METHODS = (("pass-fail", None), ("known-shape", SHAPE), ("fitted-shape", None))


def best_time(function, repeat):
    best = math.inf
    for _ in range(repeat):
        start = time.perf_counter()
        result = function()
        best = min(best, time.perf_counter() - start)
    return best, result


def baseline(x, factor):
    """A bare numpy pass: running mean by cumulative sum, compared with n / factor."""
    n = np.arange(1, x.size + 1)
    return int(np.argmax(n >= factor * (np.cumsum(x) / n)))


def target_text(method, seconds, ratio):
    """Whether a decision column met its target: fitted-shape under 3 s, the others within 10x of the baseline."""
    if method == "fitted-shape":
        return f"< 3 s: {'met' if seconds < 3.0 else 'NOT MET'}"
    return f"<= 10x: {'met' if ratio <= 10.0 else 'NOT MET'}"


def accuracy_for(method, units, threshold=THRESHOLD):
    """The accuracy factor whose fixed-size plan, at the true parameters, is ``units`` units."""
    sigma2 = float(model_sigma2(method, threshold, SHAPE, SCALE))
    return math.exp(stats.norm.isf((1 - CONFIDENCE) / 2) * math.sqrt(sigma2 / units))


def naive_stop(x, accuracy):
    """Refit every prefix with scipy.stats.gamma.fit (floc=0) and apply the rule: the slow, obvious way."""
    factor = boundary_factor(accuracy, CONFIDENCE)
    for n in range(PILOT, x.size + 1):
        a, _, s = stats.gamma.fit(x[:n], floc=0)
        if n >= factor * float(sigma2_fitted_shape(a, THRESHOLD / s)):
            return n
    return None


def main():
    rng = np.random.default_rng(20261201)
    x = rng.gamma(SHAPE, SCALE, size=ROWS)
    reference, _ = best_time(lambda: baseline(x, 23.0), repeat=7)
    print(f"decision column of {ROWS:,} rows; baseline (numpy cumulative sum and compare): {reference * 1e3:.1f} ms")
    print(f"{'method':13s} {'case':12s} {'stops at':>10s} {'time':>9s} {'ratio = ours / baseline':>25s}  target")
    for method, shape in METHODS:
        cases = [("stops early", THRESHOLD, 1.5), ("stops late", THRESHOLD, accuracy_for(method, 0.9 * ROWS)),
                 ("never stops", THRESHOLD, accuracy_for(method, 2.0 * ROWS))]
        if method == "fitted-shape":
            # far in the tail the known-shape bound is 2.3x below σ²: the full σ² at over half the rows
            cases.append(("late, c=4x", FAR_THRESHOLD, accuracy_for(method, 0.9 * ROWS, FAR_THRESHOLD)))
        for case, threshold, accuracy in cases:
            repeat = 2 if method == "fitted-shape" else 5
            seconds, column = best_time(
                lambda: decision_column(x, threshold, accuracy, CONFIDENCE, PILOT, method, shape), repeat)
            ratio = seconds / reference
            target = target_text(method, seconds, ratio)
            stop = f"{column.stop_units:,}" if column.stopped else "-"
            print(f"{method:13s} {case:12s} {stop:>10s} {seconds * 1e3:7.1f} ms {ratio:25.1f}  {target}")

    print()
    print("through the formula (cells in, a column of cells out): benchmarks/bench_formula_boundary.py")
    print()
    small = x[:2000]
    accuracy = accuracy_for("fitted-shape", 1900)
    naive_seconds, naive = best_time(lambda: naive_stop(small, accuracy), repeat=1)
    ours_seconds, ours = best_time(
        lambda: decision_column(small, THRESHOLD, accuracy, CONFIDENCE, PILOT, "fitted-shape"), repeat=20)
    print(f"fitted-shape at 2,000 rows, stopping near the end (naive N = {naive}, ours N = {ours.stop_units}, "
          f"{'same' if naive == ours.stop_units else 'DIFFERENT'})")
    print(f"  naive (scipy.stats.gamma.fit on every prefix): {naive_seconds * 1e3:9.1f} ms")
    print(f"  ours (running sums, all prefixes at once):     {ours_seconds * 1e3:9.1f} ms"
          f"   ratio = ours / naive = {ours_seconds / naive_seconds:.5f} ({naive_seconds / ours_seconds:,.0f}x faster)")


if __name__ == "__main__":
    main()
