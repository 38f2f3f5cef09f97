"""Maximum likelihood with suspended units (right censoring), checked against scipy.optimize."""
import numpy as np
import pytest
from scipy import optimize, stats

from tailstop.core.methods import estimate_tail
from tailstop.core.models.gamma.fit import fit_gamma


DISTRIBUTIONS = {"gamma": stats.gamma, "weibull": stats.weibull_min, "lognormal": stats.lognorm}


def _censored_log(seed, model, shape, scale, n, share=0.3):
    """Lifetimes of the model; a share of the units pulled at a uniform time before they fail."""
    rng = np.random.default_rng(seed)
    lifetimes = DISTRIBUTIONS[model].rvs(shape, scale=scale, size=n, random_state=rng)
    pulled = rng.uniform(0.0, 3.0 * np.median(lifetimes), n)
    suspended = (rng.random(n) < share) & (pulled < lifetimes)
    return np.where(suspended, pulled, lifetimes), suspended


def _negative_log_likelihood(model, times, suspended, shape, scale):
    """Written for the test: density for each failure, survival function for each suspension (scipy.stats)."""
    law = DISTRIBUTIONS[model]
    return -(law.logpdf(times[~suspended], shape, scale=scale).sum()
             + law.logsf(times[suspended], shape, scale=scale).sum())


def _log_odds(model, threshold, shape, scale):
    law = DISTRIBUTIONS[model]
    return law.logsf(threshold, shape, scale=scale) - law.logcdf(threshold, shape, scale=scale)


def _hessian(function, point, step=1e-4):
    point = np.asarray(point, dtype=float)
    size = point.size
    hessian = np.empty((size, size))
    for i in range(size):
        for j in range(size):
            e_i, e_j = np.eye(size)[i] * step, np.eye(size)[j] * step
            hessian[i, j] = (function(point + e_i + e_j) - function(point + e_i - e_j)
                             - function(point - e_i + e_j) + function(point - e_i - e_j)) / (4 * step * step)
    return hessian


CASES = [("gamma", 1, 0.7, 300.0, 150), ("gamma", 2, 2.5, 100.0, 200), ("gamma", 3, 6.0, 40.0, 120),
         ("weibull", 4, 0.8, 500.0, 150), ("weibull", 5, 3.0, 100.0, 200),
         ("lognormal", 6, 0.4, 100.0, 150), ("lognormal", 7, 1.2, 300.0, 200)]


@pytest.mark.parametrize("model, seed, shape, scale, n", CASES)
def test_known_shape_against_a_numerical_maximisation(model, seed, shape, scale, n):
    # check value: scipy.optimize.minimize_scalar on the censored log-likelihood written above
    times, suspended = _censored_log(seed, model, shape, scale, n)
    threshold = 1.5 * scale
    estimate = estimate_tail(times, threshold, "known-shape", shape, survivors=suspended, model=model)
    result = optimize.minimize_scalar(
        lambda u: _negative_log_likelihood(model, times, suspended, shape, np.exp(u)),
        bracket=(np.log(scale) - 1, np.log(scale) + 1), tol=1e-12)
    # check value: scipy.optimize.minimize_scalar (above). Tolerance 1e-7 on the scale and 1e-6 on p: its tol=1e-12 on the log-likelihood leaves the
    # argmax good to about sqrt(1e-12) relative in the worst case, better in practice
    assert estimate.scale == pytest.approx(np.exp(result.x), rel=1e-7)
    law = DISTRIBUTIONS[model]
    assert estimate.p == pytest.approx(law.sf(threshold, shape, scale=np.exp(result.x)), rel=1e-6)
    # σ² = n (d log q/du)² / J_uu, with J from finite differences of the same log-likelihood
    information = _hessian(lambda v: _negative_log_likelihood(model, times, suspended, shape, np.exp(v[0])),
                           [result.x])
    slope = (_log_odds(model, threshold, shape, np.exp(result.x + 1e-5))
             - _log_odds(model, threshold, shape, np.exp(result.x - 1e-5))) / 2e-5
    # check value: finite differences of the scipy-written likelihood (steps 1e-4, 1e-5), good to about 1e-7;
    # tolerance 1e-5 leaves room for the step error of the second difference
    assert estimate.sigma2 == pytest.approx(n * slope ** 2 / information[0, 0], rel=1e-5)


@pytest.mark.parametrize("model, seed, shape, scale, n", CASES)
def test_fitted_shape_against_a_numerical_maximisation(model, seed, shape, scale, n):
    # check value: scipy.optimize.minimize (Nelder-Mead) on the censored log-likelihood written above,
    # and scipy.stats' own censored fit (CensoredData, floc=0) as a second reference
    times, suspended = _censored_log(seed, model, shape, scale, n)
    threshold = 1.5 * scale
    estimate = estimate_tail(times, threshold, "fitted-shape", survivors=suspended, model=model)

    def objective(v):
        return _negative_log_likelihood(model, times, suspended, np.exp(v[0]), np.exp(v[1]))

    result = optimize.minimize(objective, [np.log(shape), np.log(scale)], method="Nelder-Mead",
                               options={"xatol": 1e-10, "fatol": 1e-12, "maxiter": 4000})
    best_shape, best_scale = np.exp(result.x)
    # check value: Nelder-Mead (above); tolerance 1e-5: the simplex stops within about that of the argmax
    assert estimate.shape == pytest.approx(best_shape, rel=1e-5)
    assert estimate.scale == pytest.approx(best_scale, rel=1e-5)
    data = stats.CensoredData(uncensored=times[~suspended], right=times[suspended])
    scipy_shape, _, scipy_scale = DISTRIBUTIONS[model].fit(data, shape, floc=0, scale=scale)
    # check value: scipy.stats CensoredData fit; tolerance 1e-4: scipy's general optimiser tolerance
    assert estimate.shape == pytest.approx(scipy_shape, rel=1e-4)
    assert estimate.scale == pytest.approx(scipy_scale, rel=1e-4)
    information = _hessian(objective, result.x)
    gradient = np.array([(_log_odds(model, threshold, *np.exp(result.x + e))
                          - _log_odds(model, threshold, *np.exp(result.x - e))) / 2e-5 for e in np.eye(2) * 1e-5])
    # check value: finite-difference observed information and gradient of the scipy-written likelihood;
    # tolerance 1e-4: second differences with step 1e-4 at a Nelder-Mead argmax good to about 1e-5
    assert estimate.sigma2 == pytest.approx(n * gradient @ np.linalg.solve(information, gradient), rel=1e-4)


def test_weibull_known_shape_is_total_time_on_test_in_beta_powers_by_hand():
    # check value: by hand. β = 2 known; units 100, 200+, 300, 400+: Σ t² = 300000 over r = 2 failures,
    # θ̂ = η̂² = 150000. At c = 250, w = c²/θ̂ = 5/12 and p = e^{-w}; Var(log θ̂) = 1/r (X^β exponential),
    # d log q / d log θ = w / (1 - p), so σ² = n w² / ((1 - p)² r)
    times = np.array([100.0, 200.0, 300.0, 400.0])
    suspended = np.array([False, True, False, True])
    estimate = estimate_tail(times, 250.0, "known-shape", 2.0, survivors=suspended, model="weibull")
    # check value: by hand (above); tolerances: 1e-13 for a square root and an exp of exact inputs, 1e-10 for
    # σ² (1 - p cancels to 0.34)
    assert estimate.scale == pytest.approx(np.sqrt(150000.0), rel=1e-13)
    w = 250.0 ** 2 / 150000.0
    assert estimate.p == pytest.approx(np.exp(-w), rel=1e-13)
    assert estimate.sigma2 == pytest.approx(4 * w ** 2 / ((1 - np.exp(-w)) ** 2 * 2), rel=1e-10)


def test_exponential_scale_is_total_time_on_test_over_failures():
    # check value: by hand, the exponential (gamma shape 1) ML scale from censored data is the total
    # time on test over the number of failures: 6-MP remission data (Gehan 1965), 359 weeks / 9 relapses
    weeks = np.array([6, 6, 6, 6, 7, 9, 10, 10, 11, 13, 16, 17, 19, 20, 22, 23, 25, 32, 32, 34, 35], float)
    censored = np.array([0, 0, 0, 1, 0, 1, 0, 1, 1, 0, 0, 1, 1, 1, 0, 0, 1, 1, 1, 1, 1], bool)
    estimate = estimate_tail(weeks, 10.0, "known-shape", 1.0, survivors=censored)
    # tolerance 1e-12 (scale) and 1e-9 (σ²): the censored Newton iteration stops at about 1e-11 relative
    assert estimate.scale == pytest.approx(359 / 9, rel=1e-12)
    # Var(log θ̂) = 1/r for censored exponential data (observed information r at the estimate); by hand
    t = 10.0 / (359 / 9)
    assert estimate.sigma2 == pytest.approx(21 * (t / -np.expm1(-t)) ** 2 / 9, rel=1e-9)


def test_without_suspensions_the_censored_fit_is_the_complete_data_fit():
    # property: with no suspension the likelihood is the complete-data one (METHOD.md §3 closed forms)
    from tailstop.core.models.gamma import censored as gamma_censored

    rng = np.random.default_rng(4)
    x = rng.gamma(3.0, 20.0, 80)
    failures = (np.array([80.0]), np.array([x.sum()]), np.array([np.log(x).sum()]))
    # check value: the complete-data ML (x̄/a closed form; fit_gamma, itself checked against mpmath and scipy in
    # tests/test_fit.py). Tolerances: 1e-12 for a closed form, 1e-7 for two Newton iterations from different
    # starts, 1e-5 for σ² (observed against expected information, equal at the estimate to the ML's digits)
    none = (np.zeros((1, 0)), np.zeros((1, 0), dtype=bool))
    assert np.exp(gamma_censored.fit_known_shape(failures, none, 3.0)[0]) == pytest.approx(x.mean() / 3.0, rel=1e-12)
    shape, log_scale = gamma_censored.fit_shape_and_scale(failures, none, np.array([1.0]))
    reference = fit_gamma(x)
    assert shape[0] == pytest.approx(reference.shape, rel=1e-7)
    assert np.exp(log_scale[0]) == pytest.approx(reference.scale, rel=1e-7)
    complete = estimate_tail(x, 90.0, "fitted-shape")
    sigma2 = gamma_censored.sigma2_fitted_shape(failures, none, shape, log_scale, 90.0, 80)
    # property: observed and expected information agree at a complete-data estimate; tolerance 1e-5 (above)
    assert sigma2[0] == pytest.approx(complete.sigma2, rel=1e-5)


@pytest.mark.parametrize("method, shape, needed", [("known-shape", 2.0, "1 failure"),
                                                   ("fitted-shape", None, "2 failures")])
def test_too_few_failures_say_how_many_are_needed(method, shape, needed):
    times = np.array([100.0, 120.0, 80.0, 130.0, 95.0])
    suspended = np.array([True, True, False, True, True])
    if method == "known-shape":
        suspended[2] = True
    with pytest.raises(ValueError, match=f"needs at least {needed}"):
        estimate_tail(times, 90.0, method, shape, survivors=suspended)
