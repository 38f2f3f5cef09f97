"""Seeded simulation of the purely sequential rule: E[N]/n* and coverage for an accuracy factor close to 1.

Known properties (METHOD.md §5): N is finite with probability 1, E[N]/n* -> 1
and the coverage of [q̂/d, q̂·d] from the first N units -> 1 - γ as d ↓ 1.
Sources: Chow, Y. S. & Robbins, H. (1965), "On the asymptotic theory of
fixed-width sequential confidence intervals for the mean", Ann. Math.
Statist. 36, 457–462; Banerjee, S. & Mukhopadhyay, N. (2016), "A general
sequential fixed-accuracy confidence interval estimation methodology for a
positive parameter", Ann. Inst. Stat. Math. 68, 541–570.

Set-up: lifetimes gamma(shape 2, scale 500 h), threshold 1200 h, so t = 2.4;
d = 1.1 at 95 %, pilot 20. n* is about 1,270 to 1,980 units, large enough
for the asymptotics to show.

Tolerances.
* E[N]/n*: second-order theory gives E[N] = n* + η + o(1) with η a
  bounded constant (Woodroofe 1977, Ann. Statist. 5, 984–995, from memory),
  so at n* > 1,000 the bias is well under 1 %; the
  Monte Carlo standard error of the mean ratio is about 0.1 % here (checked
  below). Allowed: 2 %. A rule with a wrong boundary, e.g. a one-sided z
  (ratio 0.70) or σ in place of σ² (ratio 0.5 or less), is far outside.
* coverage: its Monte Carlo standard error is √(0.95·0.05/R); allowed
  4 standard errors plus 0.005 for the O(1/n*) error of the asymptotic
  interval at this n*.
"""
from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest

from tailstop.core.methods import estimate_tail
from tailstop.core.sequential import stopping_units

SHAPE, SCALE, THRESHOLD = 2.0, 500.0, 1200.0
ACCURACY, CONFIDENCE, PILOT = 1.1, 0.95, 20
Z95 = 1.959964  # check value: NIST/SEMATECH e-Handbook §1.3.6.7.1


def true_p():
    # check value: Erlang identity (Johnson, Kotz & Balakrishnan vol. 1): Q(2, t) = e^{-t} (1 + t)
    t = THRESHOLD / SCALE
    return math.exp(-t) * (1.0 + t)


def true_sigma2(method):
    """σ² of METHOD.md §3 at the true parameters, computed here in closed form or with mpmath."""
    t = THRESHOLD / SCALE
    p = true_p()
    if method == "pass-fail":
        return 1.0 / (p * (1.0 - p))
    f = t**SHAPE * math.exp(-t) / math.gamma(SHAPE)
    v = f / (p * (1.0 - p))
    if method == "known-shape":
        return v * v / SHAPE
    # fitted-shape: u = ∂ log q / ∂a by mpmath differentiation at 30 digits (an outside reference)
    with mpmath.workdps(30):
        def log_odds(a):
            q = mpmath.gammainc(a, t, mpmath.inf, regularized=True)
            return mpmath.log(q / (1 - q))
        u = float(mpmath.diff(log_odds, SHAPE))
        trigamma = float(mpmath.psi(1, SHAPE))
    return (SHAPE * u * u - 2.0 * u * v + trigamma * v * v) / (SHAPE * trigamma - 1.0)


def simulate(method, replications, seed):
    rng = np.random.default_rng(seed)
    shape = SHAPE if method == "known-shape" else None
    n_star = (Z95 / math.log(ACCURACY)) ** 2 * true_sigma2(method)
    length = int(3 * n_star)
    log_q = math.log(true_p() / (1.0 - true_p()))
    units, covered = [], 0
    for _ in range(replications):
        x = rng.gamma(SHAPE, SCALE, size=length)
        n = stopping_units(x, THRESHOLD, ACCURACY, CONFIDENCE, PILOT, method, shape)
        assert n is not None, "the rule must stop (N is finite with probability 1)"
        estimate = estimate_tail(x[:n], THRESHOLD, method, shape)
        covered += abs(estimate.log_odds - log_q) <= math.log(ACCURACY)
        units.append(n)
    return np.asarray(units, dtype=float), covered / replications, n_star


@pytest.mark.parametrize("method, replications, seed", [
    ("pass-fail", 1500, 20261201),
    ("known-shape", 1000, 20261202),
    ("fitted-shape", 250, 20261203),
])
def test_average_stopping_size_and_coverage_for_d_close_to_one(method, replications, seed):
    units, coverage, n_star = simulate(method, replications, seed)
    ratio = units.mean() / n_star
    ratio_se = units.std(ddof=1) / math.sqrt(replications) / n_star
    assert n_star > 1000
    # check value: E[N]/n* -> 1 and coverage -> nominal (Chow & Robbins 1965); tolerance 2 % on the ratio (about
    # five of its standard errors, held below 0.004 first), coverage within 4 binomial standard errors plus 0.005
    # for the O(1/n*) shortfall of the asymptotic interval
    assert ratio_se < 0.004  # the check below is meaningful at this number of replications
    assert abs(ratio - 1.0) <= 0.02, (ratio, ratio_se)
    coverage_se = math.sqrt(CONFIDENCE * (1 - CONFIDENCE) / replications)
    assert abs(coverage - CONFIDENCE) <= 4 * coverage_se + 0.005, (coverage, coverage_se)
    assert units.min() >= PILOT
