"""The plug-in σ̂² each estimator carries, and the unit counts built on it, against closed forms.

tests/test_variance.py checks the σ² functions at given (a, t); these check
the number an estimate from a sample actually carries (``estimate_tail``,
``units_needed_now``, the formulas), computed here from the sample by hand
(METHOD.md §3 and §5 written out in the test) or with mpmath.

Tolerances (common practice, no published source): 1e-14 to 1e-15 where both
sides are a few double operations apart; 1e-12 where a tail function of
scipy enters; 1e-9 for the ML shape (the solver's stopping rule) and 1e-7 for
the fitted-shape σ², whose shape derivative is a Richardson-extrapolated
finite difference (accurate to about 1e-9, tests/test_variance.py).
"""
from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest
from scipy import stats

from tailstop.core.methods import estimate_tail, model_sigma2, pass_fail_sigma2_from_p
from tailstop.core.sequential import two_stage_plan, units_needed_now
from tailstop.sheet import ACCURACY_FOR_UNITS, UNITS_NEEDED_NOW, UNITS_REQUIRED

mpmath.mp.dps = 40


def z_value(confidence):
    # check value: scipy.stats.norm, a general-purpose reference (1.959964 at 0.95: NIST/SEMATECH §1.3.6.7.1)
    return stats.norm.isf((1 - confidence) / 2)


def sample():
    """Invented lifetimes, rounded as a log would be (demo data, never a check value)."""
    return [412.0, 1210.5, 880.0, 1502.0, 95.5, 640.0, 2210.0, 1033.0, 720.5, 1388.0, 310.0, 990.0]


THRESHOLD = 1000.0


def test_pass_fail_plug_in_is_one_over_p_hat_q_hat():
    x = sample()
    beyond = sum(v > THRESHOLD for v in x)  # 5 of 12
    p_hat = beyond / len(x)
    estimate = estimate_tail(x, THRESHOLD, "pass-fail")
    # check value: METHOD.md §3, σ² = 1/(p(1-p)) at p̂ = 5/12: 144/35 = 4.114285…
    # tolerances 1e-14 / 1e-15: exact fractions in doubles, a few roundings; 1e-12 once z and a log enter
    assert beyond == 5
    assert estimate.sigma2 == pytest.approx(144 / 35, rel=1e-14)
    assert estimate.sigma2 == pytest.approx(1 / (p_hat * (1 - p_hat)), rel=1e-14)
    assert estimate.p == pytest.approx(5 / 12, rel=1e-15)
    # n̂* = (z / log d)² σ̂² (METHOD.md §4)
    assert estimate.units_required(1.5, 0.95) == pytest.approx((z_value(0.95) / math.log(1.5)) ** 2 * 144 / 35,
                                                                 rel=1e-12)


def test_pass_fail_rule_uses_the_plain_share():
    x = sample()
    # check value: METHOD.md §5 and docs/method.md, the plain share p̂ = S/n = 5/12 in σ̂² = 1/(p̂(1 - p̂)) = 144/(5·7)
    needed = units_needed_now(x, THRESHOLD, 1.5, 0.95, "pass-fail")
    # tolerances 1e-14 for an exact fraction in doubles, 1e-12 once z and a log enter
    assert needed.sigma2 == pytest.approx(144 / (5 * 7), rel=1e-14)
    assert needed.needed == pytest.approx((z_value(0.95) / math.log(1.5)) ** 2 * 144 / (5 * 7), rel=1e-12)
    whole = math.ceil((z_value(0.95) / math.log(1.5)) ** 2 * 144 / (5 * 7))
    assert UNITS_NEEDED_NOW([[v] for v in x], THRESHOLD, 1.5, 0.95) == whole
    assert two_stage_plan(x, THRESHOLD, 1.5, 0.95, "pass-fail").total_units == max(12, whole)


def exponential_sigma2(t):
    """Known-shape σ² at shape 1 (METHOD.md §3 hand check): t² / (1 - e^{-t})²."""
    return t * t / (1 - math.exp(-t)) ** 2


def shape_two_sigma2(t):
    """Known-shape σ² at shape 2 by hand: p = e^{-t}(1 + t), f = t² e^{-t}, σ² = f² / (2 p² (1-p)²)."""
    p = math.exp(-t) * (1 + t)
    f = t * t * math.exp(-t)
    return f * f / (2 * p * p * (1 - p) ** 2)


@pytest.mark.parametrize("shape, closed_form", [(1.0, exponential_sigma2), (2.0, shape_two_sigma2)])
def test_known_shape_plug_in_at_the_ml_scale(shape, closed_form):
    x = sample()
    mean = sum(x) / len(x)
    t_hat = THRESHOLD / (mean / shape)  # ŝ = x̄ / a (METHOD.md §3)
    estimate = estimate_tail(x, THRESHOLD, "known-shape", shape)
    # check value: ŝ = x̄ / a (METHOD.md §3) with x̄ summed in the test; tolerance 1e-14: two sums of the
    # same doubles in a different order differ by a few roundings
    assert estimate.scale == pytest.approx(mean / shape, rel=1e-14)
    # check value: closed forms written out above (the Erlang tail at shape 1 and 2); tolerance 1e-12:
    # the package goes through gammaincc and logs, the closed form through exp, a few ulps apart
    assert estimate.sigma2 == pytest.approx(closed_form(t_hat), rel=1e-12)
    assert units_needed_now(x, THRESHOLD, 1.5, 0.95, "known-shape", shape).sigma2 == pytest.approx(
        closed_form(t_hat), rel=1e-12)


def mp_ml_shape(x):
    """Gamma ML shape by mpmath: the root of log a - ψ(a) = log x̄ - mean(log x) (METHOD.md §3)."""
    x = [mpmath.mpf(v) for v in x]
    target = mpmath.log(sum(x) / len(x)) - sum(mpmath.log(v) for v in x) / len(x)
    start = (3 - target + mpmath.sqrt((target - 3) ** 2 + 24 * target)) / (12 * target)  # Minka's start
    return mpmath.findroot(lambda a: mpmath.log(a) - mpmath.digamma(a) - target, start)


def mp_fitted_sigma2(a, t):
    """gᵀ I⁻¹ g / (p(1-p))² with rate 1 and threshold t, from mpmath derivatives (METHOD.md §3)."""
    def p(shape, rate):
        return mpmath.gammainc(shape, t * rate, mpmath.inf, regularized=True)

    g = mpmath.matrix([mpmath.diff(lambda s: p(s, 1), a), mpmath.diff(lambda r: p(a, r), 1)])
    information = mpmath.matrix([[mpmath.psi(1, a), -1], [-1, a]])
    value = p(a, 1)
    return (g.T * information ** -1 * g)[0] / (value * (1 - value)) ** 2


def test_fitted_shape_plug_in_against_mpmath():
    x = sample()
    a = mp_ml_shape(x)
    scale = mpmath.mpf(sum(x) / len(x)) / a
    t = THRESHOLD / scale
    estimate = estimate_tail(x, THRESHOLD, "fitted-shape")
    # check value: the ML equation solved by mpmath.findroot and the Fisher information inverted in mpmath;
    # tolerance 1e-9 on the shape and p: the double-precision ML keeps about 10 digits of log x̄ - mean(log x);
    # 1e-7 on σ²: the package takes ∂p/∂a by a central difference (METHOD.md §3), good to about 8 digits
    assert estimate.shape == pytest.approx(float(a), rel=1e-9)
    assert estimate.p == pytest.approx(float(mpmath.gammainc(a, t, mpmath.inf, regularized=True)), rel=1e-9)
    expected = float(mp_fitted_sigma2(a, t))
    assert estimate.sigma2 == pytest.approx(expected, rel=1e-7)
    assert units_needed_now(x, THRESHOLD, 1.5, 0.95, "fitted-shape").sigma2 == pytest.approx(expected, rel=1e-7)
    # check value: scipy.stats.gamma.fit with floc=0, a general-purpose reference for the ML shape;
    # tolerance 1e-4: scipy's optimizer is only trusted to about 4 digits here (common practice)
    assert estimate.shape == pytest.approx(stats.gamma.fit(x, floc=0)[0], rel=1e-4)


@pytest.mark.parametrize("threshold, shape, scale", [(1000.0, 2.0, 600.0), (150.0, 0.7, 900.0), (40.0, 9.0, 3.0)])
def test_planning_sigma2_and_unit_counts_against_mpmath(threshold, shape, scale):
    t = mpmath.mpf(threshold) / scale
    p = mpmath.gammainc(shape, t, mpmath.inf, regularized=True)
    f = mpmath.exp(shape * mpmath.log(t) - t - mpmath.loggamma(shape))
    # check value: METHOD.md §3 in mpmath at 40 digits
    expected = {
        "pass-fail": 1 / (p * (1 - p)),
        "known-shape": f * f / (shape * p * p * (1 - p) ** 2),
        "fitted-shape": mp_fitted_sigma2(mpmath.mpf(shape), t),
    }
    z = z_value(0.95)
    # tolerances: 1e-8 on σ² (the package's numerical shape derivative), 1e-9 on d, 1e-15 for 1/(p(1-p)) (rounding)
    for method, sigma2 in expected.items():
        assert float(model_sigma2(method, threshold, shape, scale)) == pytest.approx(float(sigma2), rel=1e-8), method
        n_star = (z / math.log(1.5)) ** 2 * float(sigma2)  # METHOD.md §4
        assert UNITS_REQUIRED(threshold, shape, scale, 1.5, 0.95, method) == math.ceil(n_star), method
        # d = exp(z σ / √n) (METHOD.md §4, inverse)
        assert ACCURACY_FOR_UNITS(200, threshold, shape, scale, 0.95, method) == pytest.approx(
            math.exp(z * math.sqrt(float(sigma2) / 200)), rel=1e-9), method
    assert float(pass_fail_sigma2_from_p(0.2)) == pytest.approx(1 / 0.16, rel=1e-15)  # 1/(p(1-p)) by hand
