"""Speed of pass-fail-exact, as ratios against baselines measured in the same run.

    python benchmarks/bench_exact_pass_fail.py

1. Tuning (no cache): the bisection on the boundary factor with its exact
   coverage check, for common (d, confidence), pilot 2, every unit checked,
   against one exact pass-fail planning figure at p = 0.01 (the exact
   propagation of the same settings) as the baseline. Target: under 5 s for
   d >= 1.2.
2. The cache: reading a tuning from the disk file in a fresh process memory,
   and from memory, against the tuning itself.
3. A decision column of 1,048,576 rows, pass-fail-exact against pass-fail
   (target: about 1x, the tuned rule costs what pass-fail costs once tuned),
   on an invented log that never stops (every unit at or below the threshold:
   every check point is looked at) and on one that stops late.
"""
from __future__ import annotations

import os
import tempfile

import numpy as np

ROWS = 1_048_576
SETTINGS = ((1.2, 0.95), (1.2, 0.90), (1.5, 0.95), (2.0, 0.95), (3.0, 0.90), (5.0, 0.95), (10.0, 0.95))


def best_time(function, repeat=1):
    """Smallest wall time of ``repeat`` calls, and the last result (bench_operating's helper)."""
    from bench_operating import best_of

    return best_of(repeat, function)


def main():
    os.environ["TAILSTOP_CACHE_DIR"] = tempfile.mkdtemp(prefix="tailstop-bench-")
    from tailstop.core import guaranteed
    from tailstop.core.operating import pass_fail_exact
    from tailstop.core.sequential import decision_column

    print("1. tuning, no cache (ratio = tuning / one exact pass-fail planning figure at p = 0.01)")
    for accuracy, confidence in SETTINGS:
        base, _ = best_time(lambda: pass_fail_exact(0.01, accuracy, confidence, 2))
        guaranteed.clear_memory_cache()
        seconds, tuned = best_time(lambda: guaranteed.tune(accuracy, confidence, 2, 1))
        print(f"   d = {accuracy:<4g} confidence {confidence:<5g} tuning {seconds:6.2f} s  baseline {base:6.3f} s  "
              f"ratio = {seconds / base:7.1f}   (c = {tuned.factor:.3f}, p_low = {tuned.p_low:.2g}, "
              f"{tuned.intervals} intervals){'' if seconds < 5 or accuracy < 1.2 else '  ABOVE 5 s'}")

    print("2. the cache (ratio = read / tuning)")
    guaranteed.clear_memory_cache()
    cold, _ = best_time(lambda: guaranteed.tuning(2.0, 0.95, 2))
    guaranteed.clear_memory_cache()
    disk, _ = best_time(lambda: guaranteed.tuning(2.0, 0.95, 2))
    memory, _ = best_time(lambda: guaranteed.tuning(2.0, 0.95, 2), repeat=100)
    print(f"   tuning {cold:.2f} s; from disk {disk * 1e3:.2f} ms, ratio = {disk / cold:.2g}; "
          f"from memory {memory * 1e6:.1f} µs, ratio = {memory / cold:.2g}")

    print("3. decision column of 1,048,576 rows (ratio = pass-fail-exact / pass-fail)")
    rng = np.random.default_rng(20261202)
    threshold = 1000.0
    never = rng.uniform(1.0, threshold, ROWS)
    late = rng.uniform(1.0, threshold, ROWS)
    late[rng.random(ROWS) < 4e-5] = 2 * threshold  # rare exceedances: the rule waits for about F of them
    guaranteed.tuning(1.5, 0.95, 10)
    for label, log in (("never stops", never), ("stops late", late)):
        plain, a = best_time(lambda: decision_column(log, threshold, 1.5, 0.95, 10, "pass-fail"), repeat=3)
        exact, b = best_time(lambda: decision_column(log, threshold, 1.5, 0.95, 10, "pass-fail-exact"), repeat=3)
        print(f"   {label:12s} pass-fail {plain:.3f} s (stop {a.stop_units}), pass-fail-exact {exact:.3f} s "
              f"(stop {b.stop_units}); ratio = {exact / plain:.2f}")


if __name__ == "__main__":
    main()
