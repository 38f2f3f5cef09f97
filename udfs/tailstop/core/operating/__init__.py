"""Operating characteristics of the sequential stopping rule (METHOD.md §6).

What will the purely sequential rule of ``rule.py`` do when the lifetimes
really follow the planning guess? How many units N will it test, how bad can
it get, and how often does its final interval cover the true probability?

* ``pass-fail``: EXACT. The state after n units is (n, S), S the number of
  units beyond the threshold. The probability of every still-running state
  is propagated forward, the states where ``rule.stops`` says STOP are
  removed, which gives P(N = n, S = k) exactly. Vectorized over S, cost
  O(n_max²) at most (states of probability exactly 0 are skipped).
* ``known-shape`` and ``fitted-shape``: Monte Carlo over replications,
  vectorized, seeded (numpy Generator), chunked so that memory stays
  bounded; every figure comes with its Monte Carlo standard error.

The stop decision is always ``rule.stops`` itself; the Monte Carlo only
skips calling it on prefixes where a conservative lower bound on σ̂² shows it
cannot say STOP (``_KnownShapeScreen``, ``_FittedShapeScreen``; each checks
its table against ``rule.rule_sigma2`` and switches itself off on a
mismatch), and tests check it against calling ``rule.stops`` everywhere.

Calibration (``calibrate``) finds the smallest critical value z' >= z for the
stopping boundary (n >= (z'/log d)² σ̂²_n) whose coverage at the planning
guess reaches the nominal confidence, and the price in expected units.
``compare_methods`` puts the three methods side by side at one guess.

References: Banerjee, S. & Mukhopadhyay, N. (2016), Ann. Inst. Stat. Math. 68,
541–570; Chow, Y. S. & Robbins, H. (1965), Ann. Math. Statist. 36, 457–462.
"""
from __future__ import annotations

from .. import guaranteed
from ..methods import get_method
from ..models import DEFAULT_MODEL, get_model
from ..models.gamma.tail import tail_probability  # noqa: F401  (the gamma tail, as callers import it from here)
from .calibration import calibrate
from .exact import pass_fail_exact
from .monte_carlo import reference_simulation, simulate
from .work import CELL_SECONDS, COMMAND_SECONDS, PlanTooLarge, WorkEstimate, check_work, exact_work, simulation_work
from .results import (
    DEFAULT_SEED,
    QUANTILE_LEVELS,
    Calibration,
    MethodComparison,
    OperatingCharacteristics,
    confidence_for_z,
    default_n_max,
)

__all__ = [
    "DEFAULT_SEED",
    "QUANTILE_LEVELS",
    "OperatingCharacteristics",
    "Calibration",
    "MethodComparison",
    "pass_fail_exact",
    "simulate",
    "reference_simulation",
    "operating_characteristics",
    "calibrate",
    "compare_methods",
    "default_n_max",
    "confidence_for_z",
    "CELL_SECONDS",
    "COMMAND_SECONDS",
    "PlanTooLarge",
    "WorkEstimate",
    "check_work",
    "exact_work",
    "simulation_work",
]

# --------------------------------------------------------------------------- dispatch and comparison


def _exact_from_guess(threshold, shape, scale, accuracy, confidence, pilot, method="pass-fail", **options):
    options.pop("replications", None)
    options.pop("seed", None)
    options.pop("screen", None)
    options.pop("common_numbers", None)
    model = options.pop("model", DEFAULT_MODEL)
    p = float(get_model(model).tail_probability(threshold, shape, scale).p)
    if not 0 < p < 1:
        raise ValueError("the guess puts (almost) every unit on one side of the threshold; no finite plan exists")
    return pass_fail_exact(p, accuracy, confidence, pilot, method=method, **options)


def _simulated(method):
    def run(threshold, shape, scale, accuracy, confidence, pilot, **options):
        return simulate(threshold, shape, scale, accuracy, confidence, pilot, method, **options)

    return run


_BY_METHOD = {
    "pass-fail": _exact_from_guess,
    "known-shape": _simulated("known-shape"),
    "fitted-shape": _simulated("fitted-shape"),
    "pass-fail-exact": lambda *plan, **options: _exact_from_guess(*plan, method="pass-fail-exact", **options),
}


def operating_characteristics(threshold, shape, scale, accuracy, confidence, pilot, method="pass-fail",
                              **options) -> OperatingCharacteristics:
    """Operating characteristics for one method: exact for pass-fail, simulated otherwise.

    ``options`` are passed on to ``pass_fail_exact`` (n_max, check_every,
    stop_z, progress) or ``simulate`` (replications, seed, n_max, ...);
    replications and seed are ignored by the exact pass-fail computation.
    ``model`` (gamma, weibull, lognormal) is the lifetime model of the guess:
    for pass-fail it only turns the guess into p.
    """
    return _BY_METHOD[get_method(method).name](threshold, shape, scale, accuracy, confidence, pilot, **options)


def compare_methods(threshold, shape, scale, accuracy, confidence, pilot, *, replications=10_000,
                    seed=DEFAULT_SEED, fitted_replications=None, progress=None,
                    model=DEFAULT_MODEL) -> MethodComparison:
    """n*, E[N], coverage... of the three methods at the same planning guess.

    pass-fail and pass-fail-exact exact (side by side: what the guarantee costs in units);
    known-shape and fitted-shape simulated with the same seed
    (``fitted_replications`` defaults to ``replications``).
    """
    plan = (threshold, shape, scale, accuracy, confidence, pilot)
    counts = {"known-shape": replications, "fitted-shape": fitted_replications or replications}
    weights = {"pass-fail": 0.03, "pass-fail-exact": 0.02, "known-shape": 0.25, "fitted-shape": 0.70}
    results, done = {}, 0.0
    methods = ("pass-fail", "pass-fail-exact", "known-shape", "fitted-shape")
    if not guaranteed.tunable(accuracy, confidence):
        methods = tuple(m for m in methods if m != "pass-fail-exact")  # refused this close to d = 1
    for method in methods:
        def report(fraction, base=done, weight=weights[method]):
            if progress is not None:
                progress(base + weight * fraction)

        options = {"progress": report, "model": model}
        if method in counts:
            options.update(replications=counts[method], seed=seed)
        results[method] = operating_characteristics(*plan, method, **options)
        done += weights[method]
    return MethodComparison(results)
