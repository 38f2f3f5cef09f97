"""How much work a plan is, estimated before any of it is done, and the bound on it.

Every operating-characteristics computation is estimated from n*, the pilot
and the replications before it starts; a plan whose estimate is beyond the
bound is refused with ``PlanTooLarge``, whose text gives what is known
without computing (n*, the fixed-size plan, E[N] ≈ n* by the asymptotics of
the purely sequential rule) and what makes the question answerable.

* exact pass-fail: the propagation visits about n_end rows of (n, S) states,
  each over the window of S where the probability is not 0 (at most about
  76 √(n p (1 - p)) + 1 states: a binomial underflows 38 standard deviations
  from its mean); n_end ≈ (B + 12 √B + 30) / (p (1 - p)) + pilot,
  B = (z / log d)², is where less than 1e-12 of the runs are still on test
  (the rule needs about B units on the rarer side, a count that is nearly
  Poisson; n* = B / (p (1 - p)));
* Monte Carlo: replications × (about 1.1 n* + a fixed cost per run) units.

The costs per state and per unit were measured on the machines this runs on
(two shared cores) and err on the slow side. Memory grows only with n_end
(exact) or with the replications (their N), never with their product: the
bound on the time keeps both far below 2 GiB.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .. import accuracy as _accuracy

__all__ = [
    "COMMAND_SECONDS",
    "CELL_SECONDS",
    "PlanTooLarge",
    "WorkEstimate",
    "exact_work",
    "simulation_work",
    "check_work",
]

# The bound of a plan at the command line, and of a planning formula in a cell.
COMMAND_SECONDS = 30.0
CELL_SECONDS = 3.0

# exact pass-fail: seconds per (n, S) state visited and per row n
_STATE_SECONDS = 1.2e-7
_ROW_SECONDS = 6e-5
# Monte Carlo: seconds per simulated unit and the fixed cost of one run, in units
_UNIT_SECONDS = {
    ("gamma", "known-shape"): 8e-8, ("gamma", "fitted-shape"): 4e-7, ("gamma", "pass-fail"): 8e-8,
    ("weibull", "fitted-shape"): 5e-6,
}
_OTHER_MODEL_UNIT_SECONDS = 8e-7
_RUN_UNITS = {"known-shape": 20, "fitted-shape": 400, "pass-fail": 20}
_OTHER_MODEL_RUN_UNITS = 100


class PlanTooLarge(ValueError):
    """The plan's estimated work is beyond the bound; the message says what is known and what to change."""


@dataclass(frozen=True)
class WorkEstimate:
    """Estimated cost of one operating-characteristics computation.

    Attributes
    ----------
    method, model : str
    n_star : float
        The fixed-size plan n* (real-valued).
    rows : int
        Exact: the last n expected to be examined; simulated: units per run.
    replications : int or None
        Simulated runs (None for the exact pass-fail computation).
    seconds : float
        Estimated time on these machines.
    """

    method: str
    model: str
    n_star: float
    rows: int
    replications: int | None
    seconds: float

    @property
    def exact(self) -> bool:
        return self.replications is None


def _exact_rows(p, accuracy, confidence, pilot):
    boundary = float((_accuracy.critical_value(confidence) / math.log(accuracy)) ** 2)
    return (boundary + 12.0 * math.sqrt(boundary) + 30.0) / (p * (1.0 - p)) + pilot


def exact_work(p, accuracy, confidence, pilot, n_star=None, n_max=None) -> WorkEstimate:
    """Estimated cost of ``pass_fail_exact`` for this plan (``n_max``: the last n it may examine)."""
    if n_star is None:
        n_star = float(_accuracy.units_for_accuracy(1.0 / (p * (1.0 - p)), accuracy, confidence))
    rows = _exact_rows(p, accuracy, confidence, pilot)
    if n_max is not None:
        rows = min(rows, float(n_max))
    width = min(rows + 1.0, 76.0 * math.sqrt(rows * p * (1.0 - p)) + 2.0)
    seconds = rows * width * _STATE_SECONDS + rows * _ROW_SECONDS
    return WorkEstimate("pass-fail", "any", n_star, int(min(rows, 1e18)), None, seconds)


def _unit_cost(method, model):
    seconds = _UNIT_SECONDS.get((model, method), None if model == "gamma" else _OTHER_MODEL_UNIT_SECONDS)
    run = _RUN_UNITS[method] if model == "gamma" else _OTHER_MODEL_RUN_UNITS
    if model == "weibull" and method == "fitted-shape":
        run = 1000
    return seconds, run


def simulation_work(method, n_star, pilot, replications, model="gamma") -> WorkEstimate:
    """Estimated cost of ``simulate`` for this plan."""
    seconds_per_unit, run_units = _unit_cost(method, model)
    units = 1.1 * max(n_star, pilot) + run_units
    return WorkEstimate(method, model, n_star, int(min(units, 1e18)), int(replications),
                        replications * units * seconds_per_unit)


def _largest_simulated_n_star(estimate, bound):
    """The largest n* whose simulation stays within the bound at the same replications."""
    seconds_per_unit, run_units = _unit_cost(estimate.method, estimate.model)
    return max((bound / (estimate.replications * seconds_per_unit) - run_units) / 1.1, 0.0)


def _units(value):
    return f"{value:,.0f}" if value < 1e15 else f"{value:.3g}"


def check_work(estimate: WorkEstimate, bound, *, sigma2, confidence, p=None, accuracy=None, pilot=None):
    """Raise ``PlanTooLarge`` when the estimate is beyond ``bound`` seconds.

    The message gives n*, the fixed-size plan and E[N] ≈ n*, and the loosest
    change that brings the plan within the bound: the accuracy factor that
    can be computed with the same replications, and (simulated) the
    replications that fit at the accuracy asked for.
    """
    if estimate.seconds <= bound:
        return
    n_star = estimate.n_star
    known = (f"this plan needs about {_units(n_star)} units: a fixed-size test of "
             f"{_units(float(_accuracy.whole_units(n_star)))} units, and the sequential rule tests about as many "
             "on average (E[N] ≈ n* by its asymptotics)")
    effort = ("computing its exact figures" if estimate.exact
              else f"simulating {estimate.replications:,} runs of it")
    text = f"{known}; {effort} would take about {_duration(estimate.seconds)}, beyond the {bound:g} s a plan may take"
    if estimate.exact:
        largest = _largest_exact_n_star(p, accuracy, confidence, pilot, bound)
    else:
        largest = _largest_simulated_n_star(estimate, bound)
    advice = []
    if largest and largest >= 1:
        with np.errstate(over="ignore"):
            loosest = float(_accuracy.accuracy_for_units(sigma2, largest, confidence))
        advice.append(f"ask for a looser accuracy (a factor of {math.ceil(loosest * 1000) / 1000:g} or more can be computed)")
    if not estimate.exact:
        seconds_per_unit, _ = _unit_cost(estimate.method, estimate.model)
        affordable = int(bound / (estimate.rows * seconds_per_unit))
        if affordable >= 100:
            advice.append(f"or simulate at most {affordable:,} runs")
    if advice:
        text += ": " + ", ".join(advice)
    elif estimate.exact:
        shown = f"{p:.3g}" if p <= 0.5 else f"1 - {1.0 - p:.3g}"
        text += (f"; at p = {shown} even the loosest accuracy needs more units than can be followed in that time "
                 "(the rule waits for tens of units on the rarer side of the threshold)")
    raise PlanTooLarge(text)


def _largest_exact_n_star(p, accuracy, confidence, pilot, bound):
    """Largest n* whose exact computation fits the bound at the same p, confidence and pilot (bisection on d)."""
    sigma2 = 1.0 / (p * (1.0 - p))

    def seconds(n_star):
        with np.errstate(over="ignore"):
            d = float(_accuracy.accuracy_for_units(sigma2, n_star, confidence))
        if not 1.0 < d < 1e300:
            return math.inf
        return exact_work(p, d, confidence, pilot, n_star).seconds

    z = float(_accuracy.critical_value(confidence))
    low, high = max(1.0, sigma2 * z * z / 600.0 ** 2), 1e15
    if seconds(low) > bound:
        return None
    for _ in range(200):
        middle = math.sqrt(low * high)
        if seconds(middle) <= bound:
            low = middle
        else:
            high = middle
        if high / low < 1.0001:
            break
    return low


def _duration(seconds):
    if seconds < 120:
        return f"{seconds:.0f} s"
    if seconds < 7200:
        return f"{seconds / 60:.0f} minutes"
    if seconds < 2 * 86400:
        return f"{seconds / 3600:.0f} hours"
    if seconds < 2 * 365 * 86400:
        return f"{seconds / 86400:.0f} days"
    return f"{seconds / (365 * 86400):.2g} years"
