"""Speed of the decision column under the Weibull and lognormal models, as ratios in the same run.

    python benchmarks/bench_models.py

1. A decision column of 1,048,576 rows for known-shape and fitted-shape under
   each model, against a bare numpy pass over the same data (cumulative sum
   and compare), in two cases: the rule stops early, or never stops (every
   prefix is needed). Targets: known-shape within 10x of the baseline,
   fitted-shape under 3 s.
2. The same through the spreadsheet formula STOP_DECISION_COLUMN (cleaning
   the cells and writing the column), a full column that never stops.
3. The Weibull fitted shape against the naive way, refitting every prefix with
   scipy.stats.weibull_min.fit (floc=0), at 2,000 rows.

The data are invented: Weibull lifetimes (shape 1.5, scale 100 h) for the
Weibull model, lognormal (shape 0.8, median 80 h) for the lognormal model,
threshold 40 h, 95 % confidence, pilot 10.
"""
from __future__ import annotations

import math

import numpy as np
from scipy import stats

from tailstop.core.methods import model_sigma2
from tailstop.core.models import weibull
from tailstop.core.rule import boundary_factor
from tailstop.core.sequential import decision_column
from tailstop.sheet.decisions import STOP_DECISION_COLUMN

from bench_decisions import baseline, best_time, target_text  # the same timing and baseline as the gamma benchmark

ROWS = 1_048_576
THRESHOLD, CONFIDENCE, PILOT = 40.0, 0.95, 10
GUESSES = {"weibull": (1.5, 100.0), "lognormal": (0.8, 80.0)}


def accuracy_for(method, model, units):
    """The accuracy factor whose fixed-size plan, at the true parameters, is ``units`` units."""
    shape, scale = GUESSES[model]
    sigma2 = float(model_sigma2(method, THRESHOLD, shape, scale, model))
    return math.exp(stats.norm.isf((1 - CONFIDENCE) / 2) * math.sqrt(sigma2 / units))


def naive_stop(x, accuracy):
    """Refit every prefix with scipy.stats.weibull_min.fit (floc=0) and apply the rule: the slow, obvious way."""
    factor = boundary_factor(accuracy, CONFIDENCE)
    for n in range(PILOT, x.size + 1):
        shape, _, scale = stats.weibull_min.fit(x[:n], floc=0)
        if n >= factor * float(weibull.sigma2_fitted_shape(shape, THRESHOLD / scale)):
            return n
    return None


def main():
    rng = np.random.default_rng(20261201)
    data = {"weibull": weibull.draw(rng, *GUESSES["weibull"], ROWS),
            "lognormal": GUESSES["lognormal"][1] * np.exp(GUESSES["lognormal"][0] * rng.standard_normal(ROWS))}
    reference, _ = best_time(lambda: baseline(data["weibull"], 23.0), repeat=7)
    print(f"decision column of {ROWS:,} rows; baseline (numpy cumulative sum and compare): {reference * 1e3:.1f} ms")
    print(f"{'model':10s} {'method':13s} {'case':12s} {'stops at':>10s} {'time':>10s} {'ratio':>8s}  target")
    for model, x in data.items():
        for method in ("known-shape", "fitted-shape"):
            shape = GUESSES[model][0] if method == "known-shape" else None
            for case, accuracy in (("stops early", 1.5), ("never stops", accuracy_for(method, model, 2.0 * ROWS))):
                seconds, column = best_time(lambda: decision_column(x, THRESHOLD, accuracy, CONFIDENCE, PILOT, method,
                                                                    shape, model=model), repeat=3)
                ratio = seconds / reference
                target = target_text(method, seconds, ratio)
                stop = f"{column.stop_units:,}" if column.stopped else "-"
                print(f"{model:10s} {method:13s} {case:12s} {stop:>10s} {seconds * 1e3:8.1f} ms {ratio:8.1f}  {target}")

    print()
    print("through the formula STOP_DECISION_COLUMN (cells in, a column of text out), 1,048,576 filled rows, never stops")
    for model, x in data.items():
        cells = [[float(v)] for v in x]
        for method in ("known-shape", "fitted-shape"):
            shape = GUESSES[model][0] if method == "known-shape" else None
            accuracy = accuracy_for(method, model, 2.0 * ROWS)
            seconds, _ = best_time(lambda: STOP_DECISION_COLUMN(cells, THRESHOLD, accuracy, CONFIDENCE, PILOT, method,
                                                                shape, None, model), repeat=1)
            print(f"  {model:10s} {method:13s} {seconds * 1e3:8.1f} ms   ratio = {seconds / reference:6.1f}   "
                  f"{target_text(method, seconds, seconds / reference)}")

    print()
    small = data["weibull"][:2000]
    accuracy = accuracy_for("fitted-shape", "weibull", 1900)
    naive_seconds, naive = best_time(lambda: naive_stop(small, accuracy), repeat=1)
    ours_seconds, ours = best_time(lambda: decision_column(small, THRESHOLD, accuracy, CONFIDENCE, PILOT,
                                                           "fitted-shape", model="weibull"), repeat=10)
    print(f"Weibull fitted-shape at 2,000 rows, stopping near the end (naive N = {naive}, ours N = {ours.stop_units}, "
          f"{'same' if naive == ours.stop_units else 'DIFFERENT'})")
    print(f"  naive (scipy.stats.weibull_min.fit on every prefix): {naive_seconds * 1e3:9.1f} ms")
    print(f"  ours (power sums around a moving expansion point):   {ours_seconds * 1e3:9.1f} ms"
          f"   ratio = ours / naive = {ours_seconds / naive_seconds:.5f} ({naive_seconds / ours_seconds:,.0f}x faster)")


if __name__ == "__main__":
    main()
