"""Weibull and lognormal lifetime models: far-tail probabilities, ML fits, σ², draws, fit check."""
from __future__ import annotations

import math

import mpmath as mp
import numpy as np
import pytest
from scipy import stats

from tailstop.core.models import MODEL_NAMES, get_model
from tailstop.core.models import lognormal, weibull

# Deep-groove ball bearings, millions of revolutions to failure, 23 units (Lieblein & Zelen 1956),
# as tabled in Lawless, Statistical Models and Methods for Lifetime Data (2nd ed., 2003).
BALL_BEARINGS = [17.88, 28.92, 33.00, 41.52, 42.12, 45.60, 48.48, 51.84, 51.96, 54.12, 55.56, 67.80,
                 68.64, 68.64, 68.88, 84.12, 93.12, 98.64, 105.12, 105.84, 127.92, 128.04, 173.40]


def relative_error(value, reference):
    reference = mp.mpf(reference)
    return abs(float((mp.mpf(float(value)) - reference) / reference))


# --------------------------------------------------------------------------- tail probabilities


@pytest.mark.parametrize("shape", [0.5, 1.0, 2.5, 7.0])
@pytest.mark.parametrize("hazard", [690.0, 300.0, 20.0, 1.0, 1e-3, 1e-9, 1e-15])
def test_weibull_tail_in_logs_matches_mpmath(shape, hazard):
    # check value: mpmath at 60 digits, p = exp(-(c/η)^β) for the double c actually passed
    scale = 3.7
    c = float(scale * mp.mpf(hazard) ** (1 / mp.mpf(shape)))
    tail = weibull.tail_probability(c, shape, scale)
    with mp.workdps(60):
        u = (mp.mpf(c) / mp.mpf(scale)) ** shape
        log_p, log_cdf = -u, mp.log1p(-mp.exp(-u))
        # tolerance 1e-11: 11 significant digits of each log (METHOD.md §1 asks for 10)
        assert relative_error(tail.log_p, log_p) < 1e-11
        assert relative_error(tail.log_cdf, log_cdf) < 1e-11
        assert relative_error(tail.log_odds, log_p - log_cdf) < 1e-11
        assert relative_error(tail.p, mp.exp(log_p)) < 1e-11


@pytest.mark.parametrize("shape", [0.2, 1.0, 3.0])
@pytest.mark.parametrize("score", [-7.9, -3.0, -0.5, 0.3, 2.0, 10.0, 37.0])
def test_lognormal_tail_in_logs_matches_mpmath(shape, score):
    # check value: mpmath at 60 digits, p = Φ(-z), z = log(c/median)/σ for the double c actually passed
    median = 5.0
    c = float(median * mp.exp(score * shape))
    tail = lognormal.tail_probability(c, shape, median)
    with mp.workdps(60):
        z = mp.log(mp.mpf(c) / median) / shape
        log_p, log_cdf = mp.log(mp.ncdf(-z)), mp.log1p(-mp.ncdf(-z))
        # check value: mpmath (above); tolerance 1e-11: 11 significant digits (METHOD.md §1 asks for 10)
        assert relative_error(tail.log_p, log_p) < 1e-11
        assert relative_error(tail.log_cdf, log_cdf) < 1e-11
        assert relative_error(tail.log_odds, log_p - log_cdf) < 1e-11


def test_tails_agree_with_scipy_in_the_body():
    # check value: scipy.stats.weibull_min / lognorm survival functions; tolerance 1e-13: in the body both
    # routes are a few double operations from the same closed forms
    c = np.array([1.0, 20.0, 80.0, 300.0])
    assert np.allclose(weibull.tail_probability(c, 1.7, 90.0).p, stats.weibull_min.sf(c, 1.7, scale=90.0), rtol=1e-13)
    assert np.allclose(lognormal.tail_probability(c, 0.6, 70.0).p, stats.lognorm.sf(c, 0.6, scale=70.0), rtol=1e-13)
    assert np.allclose(weibull.log_pdf(c, 1.7, 90.0), stats.weibull_min.logpdf(c, 1.7, scale=90.0), rtol=1e-13)
    assert np.allclose(lognormal.log_pdf(c, 0.6, 70.0), stats.lognorm.logpdf(c, 0.6, scale=70.0), rtol=1e-13)
    assert np.allclose(weibull.log_sf(c, 1.7, 90.0), stats.weibull_min.logsf(c, 1.7, scale=90.0), rtol=1e-13)
    assert np.allclose(lognormal.log_sf(c, 0.6, 70.0), stats.lognorm.logsf(c, 0.6, scale=70.0), rtol=1e-13)


def test_weibull_shape_one_is_the_exponential():
    # check value: exponential survival e^{-c/η} (Weibull with β = 1), math.exp; tolerance 1e-15: the same
    # exp of the same double, up to one rounding of 30/100
    assert weibull.tail_probability(30.0, 1.0, 100.0).p == pytest.approx(math.exp(-0.3), rel=1e-15)


@pytest.mark.parametrize("model", ["weibull", "lognormal"])
def test_zero_threshold_and_bad_parameters(model):
    # common practice, no published source: every lifetime exceeds 0; parameters must be positive
    tail = get_model(model).tail_probability(0.0, 2.0, 10.0)
    assert tail.p == 1.0 and tail.log_cdf == -np.inf
    for shape, scale in ((0.0, 1.0), (-1.0, 1.0), (1.0, 0.0), (np.nan, 1.0), (1.0, np.inf)):
        with pytest.raises(ValueError, match="must be a positive finite number"):
            get_model(model).tail_probability(1.0, shape, scale)


def test_model_table_and_names():
    # common practice, no published source: the three models, gamma first (the default)
    assert MODEL_NAMES == ("gamma", "weibull", "lognormal")
    assert get_model("Weibull").name == "weibull"
    with pytest.raises(ValueError, match="gamma, weibull, lognormal"):
        get_model("normal")


# --------------------------------------------------------------------------- maximum likelihood


def test_fits_of_the_ball_bearing_data_match_the_textbook():
    # check value: Lawless (2003), ball bearing data: Weibull β̂ = 2.102, η̂ = 81.88; lognormal
    # μ̂ = 4.150, σ̂ = 0.5217 (values from memory, to the digits quoted)
    w = weibull.fit(BALL_BEARINGS)
    assert (round(w.shape, 3), round(w.scale, 2)) == (2.102, 81.88)
    ln = lognormal.fit(BALL_BEARINGS)
    assert (round(math.log(ln.scale), 3), round(ln.shape, 3)) == (4.150, 0.522)
    # from memory (same book): the lognormal fits these data a little better than the Weibull
    assert ln.log_likelihood > w.log_likelihood


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_fits_match_scipy_with_location_zero(seed):
    # check value: scipy.stats.weibull_min.fit / lognorm.fit with floc=0 (scipy's Weibull optimiser
    # stops earlier than ours, so ours must reach at least its log-likelihood). Tolerances: 1e-5 on the
    # Weibull parameters (scipy's optimiser tolerance), 1e-13 on log L from scipy's logpdf at our estimate
    # (the same sum in two routes); the lognormal ML is closed form in both, so 1e-10 and 1e-12
    rng = np.random.default_rng(seed)
    x = 100.0 * rng.weibull(0.7 + seed, 40)
    ours = weibull.fit(x)
    shape, _, scale = stats.weibull_min.fit(x, floc=0)
    assert ours.shape == pytest.approx(shape, rel=1e-5) and ours.scale == pytest.approx(scale, rel=1e-5)
    assert ours.log_likelihood >= stats.weibull_min.logpdf(x, shape, 0, scale).sum() - 1e-9
    assert ours.log_likelihood == pytest.approx(stats.weibull_min.logpdf(x, ours.shape, 0, ours.scale).sum(), rel=1e-13)
    ours = lognormal.fit(x)
    shape, _, scale = stats.lognorm.fit(x, floc=0)
    # check value: scipy's closed-form lognormal ML; tolerances 1e-10 / 1e-12 (see above)
    assert ours.shape == pytest.approx(shape, rel=1e-10) and ours.scale == pytest.approx(scale, rel=1e-10)
    assert ours.log_likelihood == pytest.approx(stats.lognorm.logpdf(x, shape, 0, scale).sum(), rel=1e-12)


def test_known_shape_scales():
    # check value: the closed forms η̂ = (mean x^β)^{1/β} and median = exp(mean log x), numpy;
    # tolerance 1e-14: the same sums in another order
    x = np.array(BALL_BEARINGS)
    assert weibull.ml_scale(x, 1.5) == pytest.approx(np.mean(x ** 1.5) ** (1 / 1.5), rel=1e-14)
    assert lognormal.ml_scale(x, 0.5) == pytest.approx(np.exp(np.mean(np.log(x))), rel=1e-14)


@pytest.mark.parametrize("model", ["weibull", "lognormal"])
def test_fit_refuses_what_it_cannot_fit(model):
    # common practice, no published source: no ML for equal values, non-positive values or one value
    fit = get_model(model).fit
    with pytest.raises(ValueError, match="all lifetimes are equal"):
        fit([5.0, 5.0, 5.0])
    with pytest.raises(ValueError, match="positive"):
        fit([5.0, -1.0, 3.0])
    with pytest.raises(ValueError, match="at least 2"):
        fit([5.0])


def test_running_shapes_equal_the_direct_fit_of_every_prefix():
    # check value: fit_shape_rows on each prefix alone (the direct ML), and scipy at the last prefix
    rng = np.random.default_rng(11)
    for shape in (0.4, 1.5, 6.0):
        x = 50.0 * rng.weibull(shape, 1500)
        x[700] = x.max() * 40.0  # an outlier that forces the expansion point to move
        running = weibull.running_shapes(x)
        direct = np.array([np.nan] + [weibull.fit_shape_rows(np.log(x[:n]))[0] for n in range(2, x.size + 1)])
        assert np.isnan(running[0])
        assert np.nanmax(np.abs(running - direct) / direct) < 1e-12
        # check value: scipy.stats.weibull_min.fit (floc=0); tolerance 1e-5: scipy's optimiser tolerance
        assert running[-1] == pytest.approx(stats.weibull_min.fit(x, floc=0)[0], rel=1e-5)


def test_running_shapes_while_values_are_equal():
    # common practice, no published source: no shape while all lifetimes so far are equal
    shapes = weibull.running_shapes([3.0, 3.0, 3.0, 4.0, 6.0])
    assert np.isnan(shapes[:3]).all() and np.isfinite(shapes[3:]).all()


# --------------------------------------------------------------------------- σ² of the log-odds


def _numerical_sigma2(log_pdf, log_odds, params, known_shape):
    """gᵀ I⁻¹ g with I the expected Fisher information by quadrature of the score products (mpmath)."""
    free = [1] if known_shape else [0, 1]

    def at(i, value):
        return [value if j == i else params[j] for j in range(2)]

    def score(x, i):
        return mp.diff(lambda v: log_pdf(x, *at(i, v)), params[i])

    info = mp.matrix(len(free), len(free))
    for a, i in enumerate(free):
        for b, j in enumerate(free):
            info[a, b] = mp.quad(lambda x: score(x, i) * score(x, j) * mp.exp(log_pdf(x, *params)),
                                 [0, params[1], 10 * params[1], mp.inf])
    gradient = mp.matrix([mp.diff(lambda v: log_odds(*at(i, v)), params[i]) for i in free])
    return float((gradient.T * info ** -1 * gradient)[0])


@pytest.mark.parametrize("shape, scale, threshold", [(1.5, 100.0, 20.0), (0.7, 50.0, 400.0), (3.0, 10.0, 10.0)])
def test_weibull_sigma2_closed_forms_match_the_numerical_information(shape, scale, threshold):
    # check value: mpmath, expected Fisher information by quadrature and the gradient of log q by
    # numerical differentiation, 30 digits
    with mp.workdps(30):
        def log_pdf(x, b, e):
            return mp.log(b / e) + (b - 1) * mp.log(x / e) - (x / e) ** b

        def log_odds(b, e):
            u = (mp.mpf(threshold) / e) ** b
            return -u - mp.log(-mp.expm1(-u))

        params = [mp.mpf(shape), mp.mpf(scale)]
        fitted = _numerical_sigma2(log_pdf, log_odds, params, known_shape=False)
        known = _numerical_sigma2(log_pdf, log_odds, params, known_shape=True)
    # check value: mpmath (above); tolerance 1e-10: mpmath's quadrature and numerical derivatives at 30 digits
    # are far better than that, the closed forms lose a few digits in u/(1 - p) near p = 1
    assert float(weibull.sigma2_fitted_shape(shape, threshold / scale)) == pytest.approx(fitted, rel=1e-10)
    assert float(weibull.sigma2_known_shape(shape, threshold / scale)) == pytest.approx(known, rel=1e-10)


@pytest.mark.parametrize("shape, scale, threshold", [(0.5, 100.0, 60.0), (1.2, 10.0, 80.0)])
def test_lognormal_sigma2_closed_forms_match_the_numerical_information(shape, scale, threshold):
    # check value: mpmath, as for the Weibull
    with mp.workdps(30):
        def log_pdf(x, s, m):
            return -mp.log(x * s * mp.sqrt(2 * mp.pi)) - mp.log(x / m) ** 2 / (2 * s * s)

        def log_odds(s, m):
            z = mp.log(mp.mpf(threshold) / m) / s
            return mp.log(mp.ncdf(-z)) - mp.log(mp.ncdf(z))

        params = [mp.mpf(shape), mp.mpf(scale)]
        fitted = _numerical_sigma2(log_pdf, log_odds, params, known_shape=False)
        known = _numerical_sigma2(log_pdf, log_odds, params, known_shape=True)
    # check value: mpmath (above); tolerance 1e-10 as for the Weibull
    assert float(lognormal.sigma2_fitted_shape(shape, threshold / scale)) == pytest.approx(fitted, rel=1e-10)
    assert float(lognormal.sigma2_known_shape(shape, threshold / scale)) == pytest.approx(known, rel=1e-10)


def test_weibull_known_shape_sigma2_of_the_exponential():
    # check value: METHOD.md §3 hand check for the exponential, σ² = t² / (1 - p)², t = c/s
    t = 0.3
    assert float(weibull.sigma2_known_shape(1.0, 0.3)) == pytest.approx(t ** 2 / (1 - math.exp(-t)) ** 2)


def test_sigma2_far_in_the_tails_is_finite_and_grows():
    # common practice, no published source: σ² stays finite and grows as p -> 0 (the rare-event regime)
    for model in (weibull, lognormal):
        values = [float(model.sigma2_fitted_shape(1.5, t)) for t in (5.0, 50.0, 500.0)]
        assert all(np.isfinite(values)) and values[0] < values[1] < values[2]


@pytest.mark.parametrize("model, shape, scale, threshold", [
    (weibull, 1.5, 100.0, 30.0), (lognormal, 0.8, 50.0, 20.0)])
def test_sigma2_matches_a_seeded_simulation(model, shape, scale, threshold):
    # check value: seeded simulation, n·Var(log q̂) over 3,000 samples of 1,000 units; the sample
    # variance has a relative standard error of about √(2/3000) = 2.6 %, so 4 standard errors = 10 %
    rng = np.random.default_rng(20261201)
    replications, n = 3000, 1000
    x = model.draw(rng, shape, scale, (replications, n))
    log_x = np.log(x)
    if model is weibull:
        fitted_shape = weibull.fit_shape_rows(log_x)
        fitted_scale = np.exp(weibull.log_scale_for_shape(log_x, fitted_shape))
        known_scale = np.exp(weibull.log_scale_for_shape(log_x, np.full(replications, shape)))
    else:
        fitted_shape, fitted_scale = log_x.std(axis=1), np.exp(log_x.mean(axis=1))
        known_scale = fitted_scale
    fitted = n * model.tail_probability(threshold, fitted_shape, fitted_scale).log_odds.var()
    known = n * model.tail_probability(threshold, shape, known_scale).log_odds.var()
    # check value: the seeded simulation above; tolerance 10 % = 4 standard errors of a sample variance
    assert fitted == pytest.approx(float(model.sigma2_fitted_shape(shape, threshold / scale)), rel=0.10)
    assert known == pytest.approx(float(model.sigma2_known_shape(shape, threshold / scale)), rel=0.10)


# --------------------------------------------------------------------------- draws and the fit check


def test_draws_follow_the_model():
    # check value: scipy.stats.kstest against weibull_min / lognorm with the same parameters. Level 0.01:
    # common practice; seed-dependent, at seed 5 the p-values are 0.043 and 0.31 (for right draws p is
    # uniform, so 0.01 would fail for 1 seed in 100)
    rng = np.random.default_rng(5)
    assert stats.kstest(weibull.draw(rng, 1.7, 90.0, 4000), stats.weibull_min(1.7, scale=90.0).cdf).pvalue > 0.01
    assert stats.kstest(lognormal.draw(rng, 0.6, 70.0, 4000), stats.lognorm(0.6, scale=70.0).cdf).pvalue > 0.01


@pytest.mark.parametrize("model, distribution", [(weibull, stats.weibull_min), (lognormal, stats.lognorm)])
def test_fit_check_statistic_and_pvalue_match_scipy(model, distribution):
    # check value: scipy.stats.goodness_of_fit(..., known_params={"loc": 0}, statistic="ad"): the same
    # statistic (to the precision of scipy's own fit), and a p-value within Monte Carlo error
    rng = np.random.default_rng(8)
    x = 100.0 * rng.weibull(2.0, 30)
    reference = stats.goodness_of_fit(distribution, x, known_params={"loc": 0}, statistic="ad",
                                      n_mc_samples=999, random_state=1)
    assert float(model._anderson_darling_rows(x)) == pytest.approx(reference.statistic, rel=1e-5)
    ours = model.fit_pvalue(x)
    assert abs(ours - reference.pvalue) < 4 * math.sqrt(0.25 / 999) * 2
    assert model.fit_pvalue(x) == ours  # seeded


def test_fit_check_tells_the_models_apart():
    # common practice, no published source: 300 strongly skewed lognormal lifetimes fail the Weibull check;
    # seed-dependent: at seed 9 the p-values are 0.005 (Weibull, the smallest of 199 samples) and 0.54
    rng = np.random.default_rng(9)
    x = lognormal.draw(rng, 1.2, 100.0, 300)
    assert weibull.fit_pvalue(x, samples=199) < 0.05
    assert lognormal.fit_pvalue(x, samples=199) > 0.05


def test_running_fit_of_many_logs_equals_one_log_at_a_time():
    # check value: running_fit (the one-log path, itself checked against direct fits above) on each row
    rng = np.random.default_rng(12)
    x = 100.0 * rng.weibull(1.5, (30, 120))
    x[3, :25] = 7.0  # a log whose first 25 units are equal: no shape until the 26th
    shapes, log_scales = weibull.running_fit_rows(x)
    for row in range(x.shape[0]):
        one_shape, one_scale = weibull.running_fit(x[row])
        assert np.array_equal(np.isfinite(shapes[row]), np.isfinite(one_shape))
        assert np.nanmax(np.abs(shapes[row] - one_shape) / one_shape) < 1e-12
        # property: the two routes agree to 1e-12 (each is within about 1e-13 of the direct fit, running_fit)
        assert np.nanmax(np.abs(log_scales[row] - one_scale)) < 1e-12
