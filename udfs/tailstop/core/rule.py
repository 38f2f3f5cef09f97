"""The purely sequential fixed-accuracy stopping rule (METHOD.md §5), vectorized.

After each unit n >= m (the pilot) the rule recomputes σ̂²_n from all n units
and stops at the first n with n >= (z / log d)² σ̂²_n.

Degenerate prefixes never stop:

* pass-fail: σ̂² = 1 / (p̂ (1 - p̂)) with the plain share p̂ = S / n (S the
  number of units beyond the threshold) while there are units on both
  sides; while every unit so far is on one side (S = 0 or S = n) it uses the
  regularized plug-in p̃ = (S + ½) / (n + 1), which is finite, and the rule
  never stops there. The regularization only keeps σ̂² defined: using p̃ at
  every n instead lets the rule stop at the first exceedance when the
  accuracy is loose, and the real coverage then falls far below nominal
  (docs/method.md, "Why the plain share");
* fitted-shape: while all values so far are equal the ML shape does not
  exist (σ̂² is NaN) and the rule continues;
* any σ̂² that is NaN or infinite means "continue".

pass-fail-exact uses the same σ̂² with its own tuned boundary
n >= c (z / log d)² σ̂² (``guaranteed.stop_condition``, c from
``guaranteed.tuning``), and the same no-stop while S = 0 or S = n.

References: Chow, Y. S. & Robbins, H. (1965), Ann. Math. Statist. 36,
457–462; Banerjee, S. & Mukhopadhyay, N. (2016), Ann. Inst. Stat. Math. 68,
541–570.
"""
from __future__ import annotations

import numpy as np

from . import guaranteed
from .accuracy import critical_value
from .methods import estimate_from_statistics
from .models import DEFAULT_MODEL

__all__ = ["MIN_PILOT", "rule_sigma2", "boundary_factor", "is_check_point", "stops"]

MIN_PILOT = 2


def pass_fail_rule_sigma2(n, exceedances):
    """σ̂² of the pass-fail rule: n² / (S (n - S)) while both sides have units, else 1 / (p̃ (1 - p̃)).

    p̃ = (S + ½) / (n + 1) is used only while every unit is on one side
    (S = 0 or S = n), where the plain share gives an infinite σ̂²; the rule
    never stops there either way.
    """
    n = np.asarray(n, dtype=float)
    s = np.asarray(exceedances, dtype=float)
    one_sided = (s <= 0) | (s >= n)
    p_tilde = (s + 0.5) / (n + 1.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(one_sided, 1.0 / (p_tilde * (1.0 - p_tilde)), n * n / (s * (n - s)))


def rule_sigma2(statistics, threshold, method, shape=None, model=DEFAULT_MODEL):
    """σ̂²_n as the stopping rule uses it, for every set of statistics (NaN = undefined)."""
    if method == "pass-fail":
        return pass_fail_rule_sigma2(statistics.n, statistics.exceedances)
    if method == "pass-fail-exact":
        return pass_fail_rule_sigma2(statistics.n, statistics.exceedances)
    with np.errstate(all="ignore"):
        return np.asarray(estimate_from_statistics(statistics, threshold, method, shape, model).sigma2, dtype=float)


def boundary_factor(accuracy, confidence):
    """(z / log d)²: the rule stops when n >= boundary_factor · σ̂²_n."""
    return float((critical_value(confidence) / np.log(accuracy)) ** 2)


def is_check_point(n, pilot, check_every=1):
    """True at the units where the rule is consulted: n = pilot, pilot + k, pilot + 2k, …"""
    n = np.asarray(n)
    return (n >= pilot) & ((n - pilot) % check_every == 0)


def stops(statistics, threshold, accuracy, confidence, pilot, method, shape=None, check_every=1,
          model=DEFAULT_MODEL):
    """Boolean array: does the rule say STOP at each set of statistics (each prefix)?

    This is the stop condition at each n on its own; the decision column is
    STOP at the first True and PAST STOP after it.
    """
    if method == guaranteed.METHOD:
        boundary = guaranteed.tuning(accuracy, confidence, pilot, check_every).boundary
        return guaranteed.stop_condition(statistics.n, statistics.exceedances, boundary, pilot, check_every)
    sigma2 = rule_sigma2(statistics, threshold, method, shape, model)
    n = np.asarray(statistics.n)
    with np.errstate(invalid="ignore"):
        enough = n >= boundary_factor(accuracy, confidence) * sigma2
    enough &= np.isfinite(sigma2)
    if method == "pass-fail":
        s = np.asarray(statistics.exceedances)
        enough &= (s > 0) & (s < n)
    return enough & is_check_point(n, pilot, check_every)
