"""The fit formulas on logs with units marked + (suspended): censored maximum likelihood, censored AIC, no p-value."""
import numpy as np
import pytest
from scipy import optimize, stats

from tailstop import sheet
from tailstop.core.methods import estimate_tail

LAWS = {"gamma": stats.gamma, "weibull": stats.weibull_min, "lognormal": stats.lognorm}
CASES = [("gamma", 1, 2.5, 100.0), ("weibull", 2, 1.6, 400.0), ("lognormal", 3, 0.6, 250.0)]


def _log(model, seed, shape, scale, n=120, share=0.35):
    """Lifetimes of the model; a share of the units pulled at a uniform time before they fail."""
    rng = np.random.default_rng(seed)
    lifetimes = LAWS[model].rvs(shape, scale=scale, size=n, random_state=rng)
    pulled = rng.uniform(0.0, 2.5 * np.median(lifetimes), n)
    suspended = (rng.random(n) < share) & (pulled < lifetimes)
    return np.where(suspended, pulled, lifetimes), suspended


def _cells(times, suspended):
    return [[f"{float(t)!r}+"] if flag else [float(t)] for t, flag in zip(times, suspended)]


def _log_likelihood(model, times, suspended, shape, scale):
    """Written for the test: log density of each failure plus log survival of each suspension (scipy.stats)."""
    law = LAWS[model]
    return (law.logpdf(times[~suspended], shape, scale=scale).sum()
            + law.logsf(times[suspended], shape, scale=scale).sum())


def _maximised(model, times, suspended, shape, scale):
    best = optimize.minimize(lambda v: -_log_likelihood(model, times, suspended, *np.exp(v)),
                             np.log([shape, scale]), method="Nelder-Mead",
                             options={"xatol": 1e-10, "fatol": 1e-12, "maxiter": 4000})
    return np.exp(best.x), -best.fun


@pytest.mark.parametrize("model, seed, shape, scale", CASES)
def test_fit_shape_and_scale_are_the_censored_maximum_likelihood(model, seed, shape, scale):
    # check value: scipy.optimize (Nelder-Mead) on the censored log-likelihood written above, and
    # scipy.stats' own censored fit (CensoredData.right_censored, floc=0)
    times, suspended = _log(model, seed, shape, scale)
    assert suspended.sum() > 15
    column = _cells(times, suspended)
    fitted_shape, fitted_scale = sheet.FIT_SHAPE(column, model), sheet.FIT_SCALE(column, model)
    (best_shape, best_scale), _ = _maximised(model, times, suspended, shape, scale)
    # tolerance 1e-6: the Nelder-Mead simplex stops within about that of the argmax; 1e-4 for scipy's general fit
    assert fitted_shape == pytest.approx(best_shape, rel=1e-6)
    assert fitted_scale == pytest.approx(best_scale, rel=1e-6)
    data = stats.CensoredData.right_censored(times, suspended)
    scipy_shape, location, scipy_scale = LAWS[model].fit(data, shape, floc=0, scale=scale)
    assert location == 0
    assert fitted_shape == pytest.approx(scipy_shape, rel=1e-4)
    assert fitted_scale == pytest.approx(scipy_scale, rel=1e-4)
    # the fit the estimates use (same code), and it differs from the fit of the failures alone
    estimate = estimate_tail(times, scale, "fitted-shape", survivors=suspended, model=model)
    assert (estimate.shape, estimate.scale) == (fitted_shape, fitted_scale)
    # property: leaving out the suspensions shrinks the scale by more than 2 % here (what the check must see)
    assert sheet.FIT_SCALE([[float(t)] for t in times[~suspended]], model) < 0.98 * fitted_scale


def test_the_gamma_formulas_are_the_gamma_model_of_the_general_ones():
    times, suspended = _log("gamma", 4, 1.8, 300.0)
    column = _cells(times, suspended)
    assert sheet.GAMMA_FIT_SHAPE(column) == sheet.FIT_SHAPE(column)
    assert sheet.GAMMA_FIT_SCALE(column) == sheet.FIT_SCALE(column, "gamma")


def test_compare_ranks_the_censored_likelihoods():
    # check value: the log-likelihood written above, maximised by scipy.optimize for each model;
    # AIC = 2·2 − 2 ln L (two parameters; Akaike 1974)
    times, suspended = _log("weibull", 5, 0.9, 500.0, n=150)
    table = sheet.FIT_COMPARE(_cells(times, suspended))
    assert table[0] == ["model", "shape", "scale", "log-likelihood", "AIC", "fit p-value"]
    rows = table[1:]
    assert [row[4] for row in rows] == sorted(row[4] for row in rows)
    starts = {"gamma": (1.0, 500.0), "weibull": (1.0, 500.0), "lognormal": (1.0, 300.0)}
    for model, shape, scale, log_likelihood, aic, pvalue in rows:
        (best_shape, best_scale), best = _maximised(model, times, suspended, *starts[model])
        # check value: the maximised likelihood above; tolerance 1e-6 on the parameters (simplex), 1e-7 absolute on
        # log L (flat at the maximum: second order in the parameter error), AIC written out (rel 1e-15, one rounding)
        assert shape == pytest.approx(best_shape, rel=1e-6) and scale == pytest.approx(best_scale, rel=1e-6)
        assert log_likelihood == pytest.approx(best, abs=1e-7)
        assert log_likelihood >= best - 1e-9                  # a maximum at least as high as the optimizer's
        assert aic == pytest.approx(4.0 - 2.0 * log_likelihood, rel=1e-15)
        assert pvalue == "not run: units marked +"


@pytest.mark.parametrize("call", [lambda c: sheet.FIT_PVALUE(c, "weibull"), lambda c: sheet.GAMMA_FIT_PVALUE(c)])
def test_the_fit_check_asks_for_complete_data_and_says_what_to_use(call):
    times, suspended = _log("gamma", 6, 2.0, 100.0, n=30)
    result = call(_cells(times, suspended))
    assert result.startswith("#TAILSTOP! the fit p-value needs every unit's failure time"), result
    assert f"({int(suspended.sum())} here)" in result and "FIT_COMPARE" in result and "pass-fail" in result
    complete = call([[float(t)] for t in times])
    assert 0 < complete <= 1


@pytest.mark.parametrize("model", LAWS)
def test_too_few_failures_say_how_many(model):
    column = [["500+"], ["700+"], [900.0], ["1200+"]]
    title = {"gamma": "gamma", "weibull": "Weibull", "lognormal": "lognormal"}[model]
    expected = f"#TAILSTOP! the {title} fit needs at least 2 failures (units not marked +; found 1)"
    assert sheet.FIT_SHAPE(column, model) == expected
    assert sheet.FIT_COMPARE(column) == "#TAILSTOP! the gamma fit needs at least 2 failures (units not marked +; found 1)"


def test_a_bad_cell_is_still_named_by_its_row():
    assert sheet.FIT_SHAPE([[100.0], ["200+"], ["n/a"], [300.0]], "weibull") == \
        "#TAILSTOP! observations: row 3 holds text 'n/a'"
