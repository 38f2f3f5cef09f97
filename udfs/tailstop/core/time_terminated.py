"""Planning a test in which every unit is stopped at a test time T (type I censoring).

"We can only run each unit 2,000 hours: how many units then, and what
coverage?" A unit that has not failed by T is suspended there, so it adds
only the information of "survived to T". The σ² of the log-odds per unit is
gᵀ I_T⁻¹ g with I_T the expected information of one unit under that
censoring:

* gamma, in (a, u = log s): closed form up to shape derivatives of log Q
  (``models.gamma.censored.expected_information``);
* Weibull and lognormal, in (μ = log scale, α = log b): one unit fails before
  T with the density g and adds -∂² log g, or survives and adds -∂² log Ḡ at
  z_T = (log T - μ)/b; the integral over the failures is taken by adaptive
  quadrature (scipy.integrate.quad). For the Weibull with β known this is
  I_μμ = β² P(X <= T) (X^β exponential: the information on θ = η^β is
  P(X <= T)/θ²), so σ² = w² / ((1 - p)² P(X <= T)) with w = (c/η)^β.

pass-fail reads a unit stopped at T >= c as beyond the threshold, so its
plan does not change; with T < c it cannot see P(X > c) at all, and the
plan is refused. T = ∞ gives the complete-data σ².
"""
from __future__ import annotations

import math

import numpy as np
from scipy import integrate

from .methods import model_sigma2
from .models import get_model
from .models import censored_log_location as _log_location
from .models.gamma import censored as _gamma_censored

__all__ = ["check_test_time", "time_terminated_sigma2", "expected_information_log_location"]


def check_test_time(test_time, threshold, method):
    """ValueError for a test time that is not positive, or one below the threshold under pass-fail."""
    if test_time is None:
        return
    if not (test_time > 0):
        raise ValueError(f"test_time must be a positive number (got {test_time!r})")
    if method in ("pass-fail", "pass-fail-exact") and test_time < threshold:
        raise ValueError(f"{method} cannot see past the test time: every unit still running at {test_time:g} "
                         f"is stopped before the threshold {threshold:g}; run units to at least the threshold "
                         f"or use known-shape or fitted-shape")


def time_terminated_sigma2(method, threshold, shape, scale, test_time=None, model="gamma"):
    """σ² = n·Var(log q̂) per unit when each unit is stopped at ``test_time`` (None: never stopped).

    Raises
    ------
    ValueError
        Parameters out of range, or a test time pass-fail cannot use.
    """
    sigma2 = model_sigma2(method, threshold, shape, scale, model)  # validates the parameters
    check_test_time(test_time, threshold, method)
    if test_time is None or not math.isfinite(test_time) or method in ("pass-fail", "pass-fail-exact"):
        return float(sigma2)
    lifetime = get_model(model)
    t, tau = threshold / scale, test_time / scale
    if lifetime.name in _log_location.FAMILIES:
        return _log_location_sigma2(_log_location.FAMILIES[lifetime.name], method, shape, scale, threshold,
                                    test_time)
    planner = (_gamma_censored.planning_sigma2_known_shape if method == "known-shape"
               else _gamma_censored.planning_sigma2_fitted_shape)
    with np.errstate(all="ignore"):
        return float(planner(float(shape), t, tau))


def expected_information_log_location(family, width, z_end):
    """Per-unit expected information of (μ, α) with each unit stopped at z = z_end: (I_μμ, I_μα, I_αα)."""
    def density(z):
        return math.exp(family.density_terms(np.array(z))[0])

    def failure_part(z, which):
        _, first, second = (float(v) for v in family.density_terms(np.array(z)))
        return (-second, -(z * second + first), -(z * first + z * z * second))[which] * density(z)

    low = -40.0 if family is _log_location.FAMILIES["weibull"] else -40.0 + min(z_end, 0.0)
    failed = [integrate.quad(failure_part, low, z_end, args=(which,), limit=200, epsabs=1e-13)[0]
              for which in range(3)]
    log_survival, first, second = (float(v) for v in family.survival_terms(np.array(z_end)))
    survival = math.exp(log_survival)
    censored = (-second, -(z_end * second + first), -(z_end * first + z_end * z_end * second))
    i_mm, i_ma, i_aa = (f + survival * c for f, c in zip(failed, censored))
    return i_mm / width ** 2, i_ma / width, i_aa


def _log_location_sigma2(family, method, shape, scale, threshold, test_time):
    width = float(family.width_from_shape(shape))
    location, log_width = math.log(scale), math.log(width)
    z_end = (math.log(test_time) - location) / width
    if not math.isfinite(z_end) or z_end > 40:
        z_end = 40.0
    i_mm, i_ma, i_aa = expected_information_log_location(family, width, z_end)
    g_mu, g_alpha = (float(v) for v in _log_location._log_odds_gradient(
        family, np.array(location), np.array(log_width), threshold))
    if method == "known-shape":
        return g_mu * g_mu / i_mm
    return (g_mu * g_mu * i_aa - 2 * g_mu * g_alpha * i_ma + g_alpha * g_alpha * i_mm) / (i_mm * i_aa - i_ma * i_ma)
