"""Weibull and lognormal fits of every prefix of a log with suspended units, from one expansion point at a time.

Each prefix is compared with the same censored fit made on that prefix alone,
and a few prefixes with an independent numerical maximisation (scipy.optimize
on a log-likelihood written here with scipy.stats).
"""
import numpy as np
import pytest
from scipy import optimize, stats

from tailstop.core.models import censored_log_location as log_location
from tailstop.core.models.censored_prefixes import GAMMA_LARGEST_SHAPE, prefix_fits
from tailstop.core.models.gamma import censored as gamma_censored
from tailstop.core.rule import boundary_factor
from tailstop.core.sequential import decision_column

THRESHOLD = 1500.0
FITS = [("weibull", "fitted-shape", None), ("lognormal", "known-shape", 0.7), ("lognormal", "fitted-shape", None),
        ("gamma", "known-shape", 2.4), ("gamma", "known-shape", 0.3), ("gamma", "known-shape", GAMMA_LARGEST_SHAPE)]
LAWS = {"weibull": stats.weibull_min, "lognormal": stats.lognorm, "gamma": stats.gamma}


def _random_pulls(seed, n=1500, share=0.1):
    """Gamma lifetimes (shape 2.4, scale 520), a share pulled at uniform times in (0, 3000)."""
    rng = np.random.default_rng(seed)
    lifetimes = rng.gamma(2.4, 520.0, n)
    pulled = np.where(rng.random(n) < share, rng.uniform(0.0, 3000.0, n), np.inf)
    flags = pulled < lifetimes
    return np.where(flags, pulled, lifetimes), flags


def _time_terminated(seed, n=1500, test_time=900.0):
    lifetimes = np.random.default_rng(seed).gamma(2.4, 520.0, n)
    flags = lifetimes > test_time
    return np.where(flags, test_time, lifetimes), flags


def _heavy_and_wide(seed, n=1500):
    """Weibull lifetimes of shape 0.5 (log-times spread wide), 60 % pulled at log-uniform times."""
    rng = np.random.default_rng(seed)
    lifetimes = 1000.0 * rng.weibull(0.5, n)
    pulled = np.exp(rng.uniform(0.0, 10.0, n))
    flags = (rng.random(n) < 0.6) & (pulled < lifetimes)
    return np.where(flags, pulled, lifetimes), flags


def _drifting(seed, n=1500):
    """The first 600 units from one population and the rest from another: the estimate moves far."""
    rng = np.random.default_rng(seed)
    lifetimes = np.concatenate([rng.gamma(0.8, 3000.0, 600), rng.gamma(6.0, 150.0, n - 600)])
    pulled = np.where(rng.random(n) < 0.3, rng.uniform(0.0, 2000.0, n), np.inf)
    flags = pulled < lifetimes
    return np.where(flags, pulled, lifetimes), flags


LOGS = {"random pulls": _random_pulls, "time-terminated": _time_terminated, "heavy and wide": _heavy_and_wide,
        "drifting": _drifting}


def _direct(model, method, shape, times, flags, prefixes, threshold):
    """Each prefix fitted on its own by the censored fit of one log (padded rows, no running sums)."""
    log_t = np.log(times)
    present = np.arange(times.size) < prefixes[:, None]
    if model == "gamma":
        failed = present & ~flags
        failures = (failed.sum(axis=1).astype(float), np.where(failed, times, 0.0).sum(axis=1),
                    np.where(failed, log_t, 0.0).sum(axis=1))
        suspensions = (np.broadcast_to(times, present.shape), (present & flags).astype(float))
        shapes = np.full(prefixes.size, shape)
        with np.errstate(all="ignore"):
            log_scale = gamma_censored.fit_known_shape(failures, suspensions, shapes)
            sigma2 = gamma_censored.sigma2_known_shape(failures, suspensions, shapes, log_scale, threshold, prefixes)
        return log_scale, np.where(np.isfinite(log_scale), 0.0, np.nan), sigma2
    family = log_location.FAMILIES[model]
    failures = (np.broadcast_to(log_t, present.shape), (present & ~flags).astype(float))
    suspensions = (np.broadcast_to(log_t, present.shape), (present & flags).astype(float))
    with np.errstate(all="ignore"):
        if method == "known-shape":
            shapes = np.full(prefixes.size, shape)
            location = log_location.fit_known_shape(family, failures, suspensions, shapes)
            log_width = np.log(family.width_from_shape(shapes)) + 0.0 * location
            sigma2 = log_location.sigma2_known_shape(family, failures, suspensions, location, shapes, threshold,
                                                     prefixes)
        else:
            location, log_width = log_location.fit_shape_and_scale(family, failures, suspensions)
            sigma2 = log_location.sigma2_fitted_shape(family, failures, suspensions, location, log_width,
                                                      threshold, prefixes)
    return location, log_width, sigma2


def _sampled_prefixes(size, seed):
    rng = np.random.default_rng(seed)
    return np.unique(np.concatenate([np.arange(1, 200), rng.integers(200, size + 1, 60), [size]]))


@pytest.mark.parametrize("model, method, shape", FITS)
@pytest.mark.parametrize("name", LOGS)
def test_every_prefix_equals_its_own_censored_fit(model, method, shape, name):
    # property: the running expansion gives each prefix's own maximum likelihood (a wrong series or a stale
    # expansion point moves the estimate far beyond 1e-10)
    times, flags = LOGS[name](11)
    fits = prefix_fits(model, times, flags, THRESHOLD, method, shape)
    prefixes = _sampled_prefixes(times.size, 12)
    location, log_width, sigma2 = _direct(model, method, shape, times, flags, prefixes, THRESHOLD)
    for ours, theirs in ((fits.location, location), (fits.log_width, log_width), (fits.sigma2, sigma2)):
        ours = ours[prefixes - 1]
        assert np.array_equal(np.isnan(ours), np.isnan(theirs))
        finite = np.isfinite(theirs)
        # property: most sampled prefixes have a fit; the running fits equal the direct ones to 1e-10 (rounding
        # of running sums against fresh sums; both iterate to about 1e-12)
        assert finite.sum() > 0.8 * prefixes.size
        np.testing.assert_allclose(ours[finite], theirs[finite], rtol=1e-10, atol=0)


@pytest.mark.parametrize("model, method, shape", FITS)
def test_prefixes_against_a_numerical_maximisation(model, method, shape):
    # check value: scipy.optimize (Nelder-Mead, or a bounded scalar search with the shape known) on the
    # censored log-likelihood written here with scipy.stats logpdf / logsf
    times, flags = _random_pulls(21, n=1200, share=0.3)
    fits = prefix_fits(model, times, flags, THRESHOLD, method, shape)
    law = LAWS[model]
    for n in (60, 333, 1200):
        x, s = times[:n], flags[:n]

        def negative(log_shape, log_scale):
            return -(law.logpdf(x[~s], np.exp(log_shape), scale=np.exp(log_scale)).sum()
                     + law.logsf(x[s], np.exp(log_shape), scale=np.exp(log_scale)).sum())

        start_scale = np.log(np.median(x))
        if method == "known-shape":
            best = optimize.minimize_scalar(lambda u: negative(np.log(shape), u),
                                            bracket=(start_scale - 1, start_scale + 1), tol=1e-12)
            # tolerance 1e-7: minimize_scalar's tol=1e-12 on the log-likelihood leaves the argmax good to about that
            assert np.exp(fits.location[n - 1]) == pytest.approx(np.exp(best.x), rel=1e-7)
            continue
        best = optimize.minimize(lambda v: negative(*v), [0.0, start_scale], method="Nelder-Mead",
                                 options={"xatol": 1e-10, "fatol": 1e-12, "maxiter": 4000})
        fitted_shape = log_location.FAMILIES[model].shape_from_width(np.exp(fits.log_width[n - 1]))
        # tolerance 1e-6: the Nelder-Mead simplex stops within about that of the argmax
        assert fitted_shape == pytest.approx(np.exp(best.x[0]), rel=1e-6)
        assert np.exp(fits.location[n - 1]) == pytest.approx(np.exp(best.x[1]), rel=1e-6)


@pytest.mark.parametrize("model, method, shape", FITS)
def test_a_late_stop_is_where_the_direct_fit_of_each_prefix_says_stop(model, method, shape):
    # property: the decision column on the running fits stops at the first prefix whose own fit says stop
    times, flags = _random_pulls(31, n=1200, share=0.2)
    target = 800  # an accuracy whose boundary the log meets here (or before), past the directly fitted prefixes
    prefixes = np.arange(10, target + 1)
    sigma2 = np.concatenate([_direct(model, method, shape, times, flags, part, THRESHOLD)[2]
                             for part in np.array_split(prefixes, 4)])
    accuracy = float(np.exp(1.6448536269514722 * np.sqrt(sigma2[target - 10] / target))) * 1.0001
    factor = boundary_factor(accuracy, 0.9)
    expected = prefixes[np.argmax(np.isfinite(sigma2) & (prefixes >= factor * sigma2))]
    assert expected > 300
    column = decision_column(times, THRESHOLD, accuracy, 0.9, 10, method, shape, survivors=flags, model=model)
    assert column.stop_units == expected


def test_a_log_without_enough_failures_has_no_estimate():
    # property: no estimate before the method's failures (1 with the shape known, 2 fitted)
    times = np.array([100.0, 200.0, 300.0, 400.0, 50.0, 600.0, 700.0])
    flags = np.array([True, True, True, False, True, False, True])
    known = prefix_fits("lognormal", times, flags, THRESHOLD, "known-shape", 0.7)
    fitted = prefix_fits("weibull", times, flags, THRESHOLD, "fitted-shape")
    assert np.isnan(known.sigma2[:3]).all() and np.isfinite(known.sigma2[3:]).all()
    assert np.isnan(fitted.sigma2[:5]).all() and np.isfinite(fitted.sigma2[5:]).all()
    assert np.isnan(prefix_fits("weibull", times[:3], flags[:3], THRESHOLD, "fitted-shape").location).all()
