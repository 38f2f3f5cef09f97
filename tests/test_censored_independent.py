"""The censored Weibull and lognormal likelihood, and the rule on logs with suspended units, against
references written here: scipy.stats log-densities and log-survival functions differentiated
numerically, and the product-limit estimate done term by term."""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from tailstop.core.models import censored_log_location as log_location

LAWS = {
    # Y = log X = μ + b Z; in scipy's terms X is weibull_min(c = 1/b, scale = e^μ) or lognorm(s = b, scale = e^μ)
    "weibull": lambda mu, b: stats.weibull_min(1.0 / b, scale=np.exp(mu)),
    "lognormal": lambda mu, b: stats.lognorm(b, scale=np.exp(mu)),
}


def _scipy_log_likelihood(model, times, suspended, mu, alpha):
    """Σ log f(t) over failures + Σ log S(t) over suspensions at (μ, α = log b), from scipy.stats."""
    law = LAWS[model](mu, np.exp(alpha))
    return law.logpdf(times[~suspended]).sum() + law.logsf(times[suspended]).sum()


def _rows(times, suspended):
    """One row of log-times with 0/1 weights for the failures and for the suspensions (the module's layout)."""
    def part(mask):
        return np.log(times[mask])[None, :], np.ones((1, int(mask.sum())))
    return part(~suspended), part(suspended)


@pytest.mark.parametrize("model", ["weibull", "lognormal"])
@pytest.mark.parametrize("shift", [(0.3, 0.2), (-0.4, -0.3), (0.05, 0.4)])
def test_score_and_hessian_away_from_the_maximum_match_scipy(model, shift):
    # check value: central differences of the scipy-written log-likelihood (steps 1e-4 for the Hessian,
    # 1e-6 for the score). Away from the maximum the score is far from 0, so every term of ∂²ℓ/∂μ∂α shows
    # (at the maximum Σ T' = 0 hides a wrong sign on it). Tolerance 1e-5 relative to the largest entry:
    # a second difference with step 1e-4 of a smooth function is good to about 1e-7.
    rng = np.random.default_rng(31)
    lifetimes = stats.weibull_min(1.6, scale=200.0).rvs(120, random_state=rng) if model == "weibull" \
        else stats.lognorm(0.7, scale=200.0).rvs(120, random_state=rng)
    pulls = rng.uniform(0, 400.0, 120)
    suspended = pulls < lifetimes
    times = np.where(suspended, pulls, lifetimes)
    failures, suspensions = _rows(times, suspended)
    mu, alpha = np.log(200.0) + shift[0], np.log(1 / 1.6 if model == "weibull" else 0.7) + shift[1]
    family = log_location.FAMILIES[model]
    _, (g_mu, g_alpha), (h_mm, h_ma, h_aa) = log_location._derivatives(
        family, failures, suspensions, np.array([mu]), np.array([alpha]))

    def ell(m, a):
        return _scipy_log_likelihood(model, times, suspended, m, a)

    e = 1e-6
    score = np.array([(ell(mu + e, alpha) - ell(mu - e, alpha)) / (2 * e),
                      (ell(mu, alpha + e) - ell(mu, alpha - e)) / (2 * e)])
    h = 1e-4
    hessian = np.array([
        [(ell(mu + h, alpha) - 2 * ell(mu, alpha) + ell(mu - h, alpha)) / h ** 2,
         (ell(mu + h, alpha + h) - ell(mu + h, alpha - h) - ell(mu - h, alpha + h) + ell(mu - h, alpha - h)) / (4 * h * h)],
        [0.0, (ell(mu, alpha + h) - 2 * ell(mu, alpha) + ell(mu, alpha - h)) / h ** 2]])
    hessian[1, 0] = hessian[0, 1]
    ours_score = np.array([g_mu[0], g_alpha[0]])
    ours_hessian = np.array([[h_mm[0], h_ma[0]], [h_ma[0], h_aa[0]]])
    # check value: the finite differences above; tolerances as stated there
    assert np.max(np.abs(ours_score - score)) <= 1e-6 * np.max(np.abs(score))
    assert np.max(np.abs(ours_hessian - hessian)) <= 1e-5 * np.max(np.abs(hessian))


HESSIANS = [  # (h_xx, h_xy, h_yy): negative definite, indefinite, positive definite, singular
    (-2.0, 0.5, -1.0), (1.0, 0.0, -1.0), (-1.0, 2.0, -1.0), (3.0, 1.0, 2.0), (0.0, 0.0, 0.0), (-1.0, 1.0, -1.0)]
GRADIENTS = [(1.0, 0.1), (-0.3, 2.0), (1e-3, -1e-3), (5.0, 5.0)]


@pytest.mark.parametrize("hessian", HESSIANS)
@pytest.mark.parametrize("gradient", GRADIENTS)
def test_damped_newton_step_always_goes_uphill(hessian, gradient):
    # property (Levenberg 1944; Nocedal & Wright, Numerical Optimization, 2nd ed. §3.4 and §10.3, from
    # memory): a step -(H - sI)⁻¹ g with H - sI negative definite is an ascent direction, g·step > 0,
    # and where H is negative definite already (s = 0) it is the plain Newton step -H⁻¹g, solved here with
    # numpy. Steps are scaled to at most (10, 10); tolerance 1e-12 relative: a 2 × 2 solve in doubles.
    from tailstop.core.models.newton import damped_newton_step

    g = np.array(gradient)
    h_xx, h_xy, h_yy = hessian
    step = np.array([float(v[0]) for v in damped_newton_step(
        (np.array([g[0]]), np.array([g[1]])), (np.array([h_xx]), np.array([h_xy]), np.array([h_yy])),
        (np.array([10.0]), np.array([10.0])))])
    assert g @ step > 0
    # property: the step is uphill and within the limits (1e-12: rounding of the scaling)
    assert np.all(np.abs(step) <= 10.0 * (1 + 1e-12))
    matrix = np.array([[h_xx, h_xy], [h_xy, h_yy]])
    if np.all(np.linalg.eigvalsh(matrix) < 0):
        newton = -np.linalg.solve(matrix, g)
        scale = min(1.0, 10.0 / np.max(np.abs(newton)))
        # check value: numpy's 2 × 2 solve; tolerance 1e-12 (see above)
        assert step == pytest.approx(scale * newton, rel=1e-12)


def test_a_unit_suspended_exactly_at_the_threshold_counts_as_beyond_it():
    # check value: by hand. Units 5, 8, 10+ (suspended at the threshold c = 10), 12+: the unit stopped at c
    # had not failed at c, so it is known to have X > c (product_limit.py: "a suspension at or after c counts
    # as beyond the threshold") and is not censored below it. Failures at or below c: 5 (4 at risk),
    # 8 (3 at risk): Ŝ(10) = 3/4 · 2/3 = 1/2; Greenwood G = 1/(4·3) + 1/(3·2) = 1/4; beyond c: 2 units.
    from tailstop.core.methods import estimate_tail
    from tailstop.core.product_limit import product_limit

    times = np.array([5.0, 8.0, 10.0, 12.0])
    suspended = np.array([False, False, True, True])
    estimate = product_limit(times, suspended, 10.0)
    assert int(estimate.beyond) == 2 and int(estimate.suspended_below) == 0
    # tolerance 1e-15: products and sums of four exact fractions
    # check value: the hand computation above (tolerance 1e-15, exact fractions)
    assert float(estimate.survival) == pytest.approx(0.5, rel=1e-15)
    assert float(estimate.greenwood) == pytest.approx(0.25, rel=1e-15)
    # only the unit at c is beyond and suspended: still an estimate (it was seen at c, not before it)
    only = estimate_tail(np.array([5.0, 10.0]), 10.0, "pass-fail", survivors=np.array([False, True]))
    # check value: by hand, Ŝ(10) = 1 - 1/2 with one failure at 5 of 2 units at risk
    assert only.p == pytest.approx(0.5, rel=1e-15)


def test_the_row_of_the_first_suspension_below_the_threshold_uses_the_product_limit():
    # check value: by hand, pass-fail at d = 3, 90 %: B = (z / ln 3)² = (1.644854 / 1.098612)² = 2.2416
    # (z from NIST/SEMATECH §1.3.6.7.1). Ten units beyond c = 100, failures at 61 and 84, then a unit
    # suspended at 44. Read as a failure, the 13th row has k = 10 of n = 13 beyond and
    # k (n - k) / n = 30/13 = 2.31 >= B: STOP. Read as a suspension (product-limit, Kaplan & Meier 1958):
    # at 61 and 84 there are 12 and 11 units at risk, Ŝ = 11/12 · 10/11 = 5/6, Greenwood G = 1/(12·11)
    # + 1/(11·10) = 1/60, σ̂² = n G / (1 - Ŝ)² = 13 · 36 / 60 = 7.8 and B σ̂² = 17.5 > 13: CONTINUE.
    from tailstop.sheet import STOP_DECISION, STOP_DECISION_COLUMN

    values = (120, 130, 140, 150, 160, 170, 180, 190, 200, 210, 61, 84)
    suspended_last = [[v] for v in values + ("44+",)]
    failed_last = [[v] for v in values + (44,)]
    assert STOP_DECISION_COLUMN(failed_last, 100, 3.0, 0.9, 2)[-1] == ["STOP"]
    assert STOP_DECISION_COLUMN(suspended_last, 100, 3.0, 0.9, 2)[-1] == ["CONTINUE"]
    assert STOP_DECISION(suspended_last, 100, 3.0, 0.9, 2) == "CONTINUE"


def test_the_heavy_censoring_warning_starts_above_thirty_percent():
    # property: docs/method.md and docs/cautions.md promise the warning "when more than 30 % of the units are
    # suspended": 3 of 10 is not more than 30 %, 4 of 10 is; known-shape reads every + as censored
    from tailstop.core.censored import censoring_notes

    times = np.array([100.0, 200.0, 300.0, 400.0, 500.0, 600.0, 700.0, 800.0, 900.0, 1000.0])

    def codes(count):
        flags = np.arange(times.size) < count
        return [code for code, _, _ in censoring_notes(times, flags, 650.0, "known-shape")]

    assert "suspended-units" in codes(3) and "many-suspended" not in codes(3)
    assert "many-suspended" in codes(4)


@pytest.mark.parametrize("model, method, shape, failures", [
    ("weibull", "fitted-shape", None, 2), ("lognormal", "fitted-shape", None, 2), ("lognormal", "known-shape", 0.7, 1)])
def test_prefixes_with_just_the_failures_needed_are_estimated_far_into_the_log(model, method, shape, failures):
    # property: a prefix with exactly the failures its method needs (2 with the shape fitted, 1 with it
    # known) has an estimate, also past the prefixes fitted one by one at the start: here the first units
    # fail and the next 150 are all suspended. Check value: the fit of each prefix on its own
    # (estimate_tail, whose fits are checked against scipy.optimize in tests/test_censored_fits.py);
    # tolerance 1e-10, the agreement the prefix fits promise (censored_prefixes.py notes)
    from tailstop.core.methods import estimate_tail
    from tailstop.core.models.censored_prefixes import prefix_fits

    rng = np.random.default_rng(3)
    times = np.concatenate([[120.0, 260.0][:failures], rng.uniform(50.0, 400.0, 150)])
    flags = np.arange(times.size) >= failures
    fits = prefix_fits(model, times, flags, 300.0, method, shape)
    for n in (40, 60, 120, times.size):
        alone = estimate_tail(times[:n], 300.0, method, shape, survivors=flags[:n], model=model)
        # check value: the prefix fitted on its own; tolerance 1e-10 (see above)
        assert fits.location[n - 1] == pytest.approx(np.log(alone.scale), rel=1e-10)
        assert fits.sigma2[n - 1] == pytest.approx(alone.sigma2, rel=1e-10)


@pytest.mark.parametrize("z", [-2.0, -0.3, 0.0, 0.8, 2.5])
def test_unit_term_derivatives_of_the_prefix_series_match_mpmath(z):
    # check value: mpmath.diff at 50 digits of the unit terms T(z): log g = z - e^z and log Ḡ = -e^z for the
    # smallest extreme value law (Weibull), -z²/2 and log Φ(-z) for the normal (lognormal), orders 0 … 12
    # (censored_prefixes.py's series). Each order is weighed as the series uses it, T^(k) Δ^k / k! at the
    # largest step Δ = _REACH it is used for; tolerance 1e-12 of max(1, |T|) on each weighed term (the
    # normal's high orders come from hazard polynomials that lose digits at large z, 3e-7 relative at
    # order 12 and z = 2.5, which the weight 0.25^12/12! makes harmless).
    import mpmath

    from tailstop.core.models import censored_prefixes as prefixes

    terms = {
        "extreme value failure": (prefixes._extreme_value_failure, lambda x: x - mpmath.exp(x)),
        "extreme value suspension": (prefixes._extreme_value_suspension, lambda x: -mpmath.exp(x)),
        "normal failure": (prefixes._normal_failure, lambda x: -x * x / 2),
        "normal suspension": (prefixes._normal_suspension, lambda x: mpmath.log(mpmath.ncdf(-x))),
    }
    with mpmath.workdps(50):
        for name, (ours, reference) in terms.items():
            got = ours(np.array([z]))[:, 0]
            expected = np.array([float(mpmath.diff(reference, mpmath.mpf(z), k)) for k in range(got.size)])
            weight = np.array([prefixes._REACH ** k / math.factorial(k) for k in range(got.size)])
            # check value: mpmath.diff (above); tolerance 1e-12 of max(1, |T|) per weighed term (see above)
            assert np.max(np.abs(got - expected) * weight) <= 1e-12 * max(1.0, abs(expected[0])), name


@pytest.mark.parametrize("test_time", [0.0, -5.0, math.nan])
@pytest.mark.parametrize("model", ["gamma", "weibull", "lognormal"])
def test_a_test_time_that_is_not_positive_is_refused_by_the_core(model, test_time):
    # property: a test that stops every unit at time 0 (or before) has no information; the core refuses it by
    # name rather than returning some σ² (a log of 0 would otherwise read as "never stopped")
    from tailstop.core.time_terminated import time_terminated_sigma2

    with pytest.raises(ValueError, match="test_time must be a positive number"):
        time_terminated_sigma2("known-shape", 1000.0, 2.0, 600.0, test_time, model)
