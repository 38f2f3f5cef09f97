"""Estimates and the stopping rule's σ̂² from a log with suspended units.

A suspended unit (``1200+`` in its cell) had not failed at the time shown:
still running, taken off for another reason, or stopped at the end of a
time-terminated test. Each method reads it as right-censored:

* ``pass-fail``: a unit suspended at or beyond the threshold outlasted it
  and simply counts as beyond; once a unit is suspended below the threshold
  the estimate is the product-limit estimate of P(X > c) with Greenwood's
  variance (``product_limit``). Without such a unit it is the plain share
  beyond, with the same numbers as a log without suspensions.
* ``known-shape`` and ``fitted-shape``: maximum likelihood with the density
  for each failure and the survival function for each suspension, σ̂² by the
  delta method on the observed information (``models.<model>.censored``).
  A log without suspensions takes the complete-data path unchanged.

Every unit, failed or suspended, counts in n (for the pilot and for n in the
stopping rule), so σ̂² = n · Var(log q̂) carries the current share of
suspended units, and (z / log d)² σ̂² is the number of units the accuracy
needs if units keep being suspended at that rate.

All of it assumes independent censoring: a unit's suspension says nothing
about its own lifetime beyond that it had not failed yet. A unit pulled
because it looked about to fail breaks that, and the estimate of p comes out
too high.
"""
from __future__ import annotations

from dataclasses import dataclass
from functools import partial

import numpy as np

from .models import MODEL_NAMES, get_model
from .models.base import ModelFit
from .models.compare import ModelComparison
from .models import censored_log_location as _log_location
from .models.censored_prefixes import fits_every_prefix, prefix_fits
from .models.gamma import censored as _gamma_censored
from .models.gamma.fit import shape_from_log_ratio
from .probability import TailProbability
from .product_limit import prefix_counts, product_limit, regularized_sigma2

__all__ = ["FAILURES_NEEDED", "CensoredEstimate", "censored_units", "is_censored", "failures_message",
           "censored_estimate", "censored_fit", "censored_paths", "compare_censored_models", "FIT_CHECK_NEEDS_FAILURES", "CensoredRule", "censoring_notes"]

# The fewest failures each method needs before it can estimate anything.
FAILURES_NEEDED = {"pass-fail": 1, "known-shape": 1, "fitted-shape": 2}


# Cells (check points × suspensions) handled at a time by the rule.
_RULE_CELLS = 1 << 20


def censored_units(times, suspended, threshold, method):
    """Per unit: True for a suspension the method must treat as censored.

    pass-fail reads a unit suspended at or beyond the threshold as beyond it,
    so only suspensions below the threshold are censored for it.
    """
    x = np.asarray(times, dtype=float).ravel()
    if suspended is None:
        return np.zeros(x.size, dtype=bool)
    flags = np.asarray(suspended, dtype=bool).ravel()
    return flags & (x < threshold) if method in ("pass-fail", "pass-fail-exact") else flags


def is_censored(times, suspended, threshold, method) -> bool:
    """True when the log has a suspension the method must treat as censored."""
    return bool(censored_units(times, suspended, threshold, method).any())


def failures_message(method, failures, threshold=None) -> str:
    """What a method needs when a log has too few failures."""
    needed = FAILURES_NEEDED[method]
    if method == "pass-fail":
        return (f"pass-fail needs at least {needed} failure at or below the threshold {threshold:g} "
                f"(found {failures}) to estimate from a log with suspended units")
    plural = "s" if needed > 1 else ""
    return (f"{method} needs at least {needed} failure{plural} (units not marked +) to estimate "
            f"from a log with suspended units (found {failures})")


# --------------------------------------------------------------------------- one log


@dataclass(frozen=True)
class CensoredEstimate:
    """What ``methods.TailEstimate`` holds, from a log with suspended units (scalars)."""

    method: str
    n: int
    tail: TailProbability
    sigma2: float
    shape: float | None = None
    scale: float | None = None


def censored_estimate(times, suspended, threshold, method, shape=None, model="gamma") -> CensoredEstimate:
    """The estimate of p = P(X > threshold) from a log with suspended units (scalars).

    Parameters
    ----------
    times : array_like
        Positive times: the failure time, or the time a suspended unit was
        last seen running.
    suspended : array_like of bool
    threshold : float
    method : {'pass-fail', 'known-shape', 'fitted-shape'}
    shape : float, optional
        The model's shape, for known-shape.
    model : str
        The lifetime model of known-shape and fitted-shape: gamma, weibull or lognormal.

    Raises
    ------
    ValueError
        Too few failures for the method, or (pass-fail) no unit still on test
        at the threshold, or (fitted-shape) a likelihood without a maximum.
    """
    x = np.asarray(times, dtype=float).ravel()
    flags = np.asarray(suspended, dtype=bool).ravel()
    if method == "pass-fail":
        return _pass_fail_estimate(x, flags, threshold)
    _check_model(model)
    failures = int((~flags).sum())
    if failures < FAILURES_NEEDED[method]:
        raise ValueError(failures_message(method, failures))
    if (model, method) in _CLOSED_FORMS:
        log_scale, sigma2 = _CLOSED_FORMS[model, method](x, flags, np.array([x.size]), float(shape), threshold)
        shape_value = np.array([float(shape)])
    else:
        data = _prefix_data(x, flags, np.array([x.size]), model)
        shape_value, log_scale, sigma2 = _model_fit(data, threshold, method, shape, model)
    lifetime = get_model(model)
    if not (np.isfinite(log_scale[0]) and np.isfinite(sigma2[0])):
        raise ValueError(f"{method}: the {lifetime.title} likelihood of these failures and suspensions has no "
                         f"maximum (found {failures} failures); test more units to failure")
    scale = float(np.exp(log_scale[0]))
    a = float(shape_value[0])
    tail = lifetime.tail_standard(a, threshold / scale)
    return CensoredEstimate(method, int(x.size), _scalar_tail(tail), float(sigma2[0]), a, scale)


def _check_model(model):
    if model not in _FITS:
        raise ValueError(f"suspended units (marked +) work with the {', '.join(_FITS)} model; "
                         f"not yet with {model}")


def _pass_fail_estimate(x, flags, threshold):
    estimate = product_limit(x, flags, threshold)
    if estimate.beyond == 0 and estimate.log_survival > -np.inf:
        raise ValueError(f"pass-fail: no unit has been seen past the threshold {threshold:g} (every unit that "
                         f"did not fail was suspended before it); the product-limit estimate cannot see past "
                         f"{x[flags].max():g}")
    return CensoredEstimate("pass-fail", int(x.size), _scalar_tail(estimate.tail), float(estimate.sigma2))


def _scalar_tail(tail):
    return TailProbability(float(np.asarray(tail.p)), float(np.asarray(tail.log_p)),
                           float(np.asarray(tail.log_cdf)))


# --------------------------------------------------------------------------- many prefixes at once


class _PrefixData:
    """Failures and suspensions of the first n units, for several n at once."""

    def __init__(self, units, failures, log_ratio, suspension_times, suspension_weights, failure_times=None):
        self.units = units
        self.failures = failures           # (r, Σx, Σ log x) over the failures
        self.log_ratio = log_ratio         # log(mean) - mean(log) over the failures
        self.suspensions = (suspension_times, suspension_weights)
        self.failure_times = failure_times  # (times, weights) of every failure, for the Weibull and lognormal


def _padded(times, counts):
    """Each row the first ``counts[i]`` of ``times``, as (rows × most) times and 0/1 weights."""
    width = int(counts.max()) if counts.size else 0
    return (np.broadcast_to(times[:width], (counts.size, width)),
            (np.arange(width) < counts[:, None]).astype(float))


def _grouped(x, flags, n):
    """The distinct suspension times and, per prefix, how many units were suspended at each.

    A time-terminated test suspends every survivor at the same time: one
    column then serves all of them.
    """
    values, column = np.unique(x[flags], return_inverse=True)
    per_unit = np.full(x.size, -1, dtype=np.int64)
    per_unit[flags] = column
    counts = prefix_counts(per_unit, values.size, n).astype(float)
    return np.broadcast_to(values, counts.shape), counts


def _prefix_data(x, flags, n, model="gamma"):
    failed = ~flags
    failure_times = x[failed]
    r = np.cumsum(failed)[n - 1]
    # sums relative to the first failure keep log(mean) - mean(log) accurate (as methods.SufficientStatistics)
    reference = failure_times[0] if failure_times.size else 1.0
    scaled = np.concatenate([[0.0], np.cumsum(failure_times / reference)])[r]
    logs = np.concatenate([[0.0], np.cumsum(np.log(failure_times / reference))])[r]
    count = np.maximum(r, 1)
    total = scaled * reference
    log_total = r * np.log(reference) + logs
    with np.errstate(divide="ignore", invalid="ignore"):
        log_ratio = np.where(r > 0, np.maximum(np.log(scaled / count) - logs / count, 0.0), np.nan)
    suspension_times, weights = _grouped(x, flags, n)
    failure_matrix = _padded(failure_times, r) if model in _log_location.FAMILIES else None
    return _PrefixData(n, (r.astype(float), total, log_total), log_ratio, suspension_times, weights, failure_matrix)


def _model_fit(data, threshold, method, shape, model="gamma"):
    """(shape, log-scale, σ̂²) per prefix; NaN where the estimate does not exist."""
    return _FITS[model](data, threshold, method, shape)


def _gamma_fit(data, threshold, method, shape):
    fits = _gamma_censored
    failures, suspensions = data.failures, data.suspensions
    if method == "known-shape":
        shape_value = np.full(data.units.shape, float(shape))
        log_scale = fits.fit_known_shape(failures, suspensions, shape_value)
        with np.errstate(all="ignore"):
            sigma2 = fits.sigma2_known_shape(failures, suspensions, shape_value, log_scale, threshold, data.units)
        return shape_value, log_scale, sigma2
    shape_value, log_scale = _gamma_shape_and_scale(data)
    ok = np.isfinite(shape_value)
    safe = np.where(ok, shape_value, 1.0)
    with np.errstate(all="ignore"):
        sigma2 = fits.sigma2_fitted_shape(failures, suspensions, safe, np.where(ok, log_scale, 0.0), threshold,
                                          data.units)
    return shape_value, log_scale, np.where(ok, sigma2, np.nan)


def _gamma_shape_and_scale(data):
    """The joint censored ML (shape, log-scale) of the gamma, per prefix; NaN where none exists."""
    with np.errstate(all="ignore"):
        start = shape_from_log_ratio(np.where(data.log_ratio > 0, data.log_ratio, np.nan))
    return _gamma_censored.fit_shape_and_scale(data.failures, data.suspensions, start)


def _log_times(data):
    return ((np.log(data.failure_times[0]), data.failure_times[1]),
            (np.log(data.suspensions[0]), data.suspensions[1]))


def _log_location_shape_and_scale(data, *, family):
    """The joint censored ML (shape, log-scale) of the Weibull or lognormal, per prefix; NaN where none exists."""
    with np.errstate(all="ignore"):
        location, log_width = _log_location.fit_shape_and_scale(family, *_log_times(data))
        return family.shape_from_width(np.exp(log_width)), location


def _log_location_fit(data, threshold, method, shape, *, family):
    fits = _log_location
    failures, suspensions = _log_times(data)
    with np.errstate(all="ignore"):
        if method == "known-shape":
            shape_value = np.full(data.units.shape, float(shape))
            location = fits.fit_known_shape(family, failures, suspensions, shape_value)
            sigma2 = fits.sigma2_known_shape(family, failures, suspensions, location, shape_value, threshold,
                                             data.units)
            return shape_value, location, sigma2
        location, log_width = fits.fit_shape_and_scale(family, failures, suspensions)
        ok = np.isfinite(location)
        sigma2 = fits.sigma2_fitted_shape(family, failures, suspensions, np.where(ok, location, 0.0),
                                          np.where(ok, log_width, 0.0), threshold, data.units)
        return family.shape_from_width(np.exp(log_width)), location, np.where(ok, sigma2, np.nan)


# The censored maximum likelihood of each model: gamma's own, and the log-location-scale one of the others.
_FITS = {"gamma": _gamma_fit, **{name: partial(_log_location_fit, family=family)
                                 for name, family in _log_location.FAMILIES.items()}}


# The joint censored ML of each model: data -> (shape, log-scale) per prefix.
_SHAPE_AND_SCALE = {"gamma": _gamma_shape_and_scale, **{name: partial(_log_location_shape_and_scale, family=family)
                                                        for name, family in _log_location.FAMILIES.items()}}


def censored_fit(times, suspended, model="gamma") -> ModelFit:
    """The maximum likelihood fit (location 0) of a log with suspended units: the fit the estimates use.

    Each failure contributes the density, each suspension the survival
    function; ``log_likelihood`` is Σ log f(failures) + Σ log P(X > t) over
    the suspensions, so the AIC of the three models fitted to one log compare
    as with complete data. Without suspensions this is the complete-data fit.

    Raises
    ------
    ValueError
        Fewer than 2 failures, or a likelihood without a maximum.
    """
    x = np.asarray(times, dtype=float).ravel()
    flags = np.asarray(suspended, dtype=bool).ravel()
    lifetime = get_model(model)
    _check_model(lifetime.name)
    failures = int((~flags).sum())
    if failures < FAILURES_NEEDED["fitted-shape"]:
        raise ValueError(f"the {lifetime.title} fit needs at least {FAILURES_NEEDED['fitted-shape']} failures "
                         f"(units not marked +; found {failures})")
    data = _prefix_data(x, flags, np.array([x.size]), lifetime.name)
    shape, log_scale = (float(v[0]) for v in _SHAPE_AND_SCALE[lifetime.name](data))
    if not (np.isfinite(shape) and np.isfinite(log_scale)):
        raise ValueError(f"the {lifetime.title} likelihood of these failures and suspensions has no maximum "
                         f"(found {failures} failures); test more units to failure")
    scale = float(np.exp(log_scale))
    log_likelihood = float(np.sum(lifetime.log_pdf(x[~flags], shape, scale))
                           + np.sum(lifetime.log_sf(x[flags], shape, scale)))
    return ModelFit(lifetime.name, shape, scale, int(x.size), log_likelihood)


# What the fit check says of a log with suspended units.
FIT_CHECK_NEEDS_FAILURES = ("the fit p-value needs every unit's failure time: the Anderson-Darling test has no "
                            "standard form for units marked +")


def compare_censored_models(times, suspended) -> tuple:
    """Every model's censored fit (``censored_fit``), best (lowest AIC) first; ties keep the table's order.

    No fit check p-value (``FIT_CHECK_NEEDS_FAILURES``): AIC compares the
    models' likelihoods of the same failures and suspensions.
    """
    rows = [ModelComparison(censored_fit(times, suspended, name), None, FIT_CHECK_NEEDS_FAILURES)
            for name in MODEL_NAMES]
    return tuple(sorted(rows, key=lambda row: row.aic))


# Estimates with a closed form from running sums: (times, suspended, prefixes, shape, threshold) -> (log scale, σ̂²)
_CLOSED_FORMS = {("weibull", "known-shape"): _log_location.weibull_known_shape_prefixes}


def censored_paths(times, suspended, threshold, method, shape=None, model="gamma"):
    """(σ̂²_n, log q̂_n) of the first n units for every n = 1 … N, from the censored fit of each prefix.

    The fits and σ̂² of ``CensoredRule`` (known-shape, fitted-shape), for
    every prefix at once; NaN where a prefix has no estimate (too few
    failures, no maximum). For simulations that need the whole path of a
    run, e.g. to find where the rule would stop for many critical values.
    """
    x = np.asarray(times, dtype=float).ravel()
    flags = np.asarray(suspended, dtype=bool).ravel()
    lifetime = get_model(model)
    _check_model(lifetime.name)
    if method not in ("known-shape", "fitted-shape"):
        raise ValueError(f"the paths are those of known-shape and fitted-shape (got {method!r})")
    prefixes = np.arange(1, x.size + 1)
    known = float(shape) if method == "known-shape" else None
    if (lifetime.name, method) in _CLOSED_FORMS:
        log_scale, sigma2 = _CLOSED_FORMS[lifetime.name, method](x, flags, prefixes, known, threshold)
        shapes = np.full(x.size, known)
    elif fits_every_prefix(lifetime.name, method, known):
        fits = prefix_fits(lifetime.name, x, flags, threshold, method, known)
        log_scale, sigma2 = fits.location, fits.sigma2
        shapes = (np.full(x.size, known) if known is not None else
                  _log_location.FAMILIES[lifetime.name].shape_from_width(np.exp(fits.log_width)))
    else:
        width = max(1, np.unique(x[flags]).size)
        rows = max(1, _RULE_CELLS // width)
        parts = [_model_fit(_prefix_data(x, flags, prefixes[start:start + rows], lifetime.name), threshold, method,
                            known, lifetime.name) for start in range(0, x.size, rows)]
        shapes, log_scale, sigma2 = (np.concatenate([part[i] for part in parts]) for i in range(3))
    fitted = np.isfinite(shapes) & np.isfinite(log_scale)
    with np.errstate(all="ignore"):
        safe_shape = np.where(fitted, shapes, 1.0)
        t = threshold / np.exp(np.where(fitted, log_scale, 0.0))
        tail = lifetime.tail_standard(safe_shape, t)
        log_odds = np.asarray(tail.log_p) - np.asarray(tail.log_cdf)
        # before the first suspension the rule takes the complete-data σ̂² (``CensoredRule``)
        complete = (lifetime.sigma2_known_shape if known is not None else lifetime.sigma2_fitted_shape)(safe_shape, t)
    sigma2 = np.where(prefixes < _first_suspension(flags), complete, sigma2)
    ok = fitted & np.isfinite(sigma2)
    return np.where(ok, sigma2, np.nan), np.where(ok, log_odds, np.nan)


def _first_suspension(flags):
    """The number of units up to and including the first suspended one (N + 1 without any)."""
    return int(np.argmax(flags)) + 1 if flags.any() else flags.size + 1


def _stop_condition(n, factor, sigma2):
    with np.errstate(invalid="ignore"):
        return (n >= factor * sigma2) & np.isfinite(sigma2)


class CensoredRule:
    """The stopping rule's σ̂² on a log with suspended units, for ``sequential``.

    Check points before the first censored suspension are left to the
    evaluator of the complete log (``plain``), so their decisions are the
    very same; after it σ̂² is the censored one: the product-limit σ̂² for
    pass-fail (``product_limit.regularized_sigma2``; the rule never
    stops while no unit has failed at or below the threshold or none is seen
    beyond it), the observed-information σ̂² for the parametric methods (the rule
    continues while there are too few failures). The Weibull and lognormal
    prefixes, and the gamma ones with a known shape up to
    ``censored_prefixes.GAMMA_LARGEST_SHAPE``, are fitted all at once around a
    moving expansion point (``models.censored_prefixes``), Weibull with a
    known shape from its closed form, the gamma with its shape fitted check
    point by check point.
    """

    # each censored check point costs a fit over its prefix: start with few of them
    first_chunk = 32
    # the prefixes ``censored_prefixes`` fits are fitted all at once up to these lengths, then the whole log
    _PREFIX_LIMITS = (1 << 12, 1 << 16)

    def __init__(self, plain, method, model="gamma"):
        self.plain = plain
        self.method = method
        self.model = model
        self._prefix_limit, self._prefix_sigma2 = 0, np.empty(0)

    def running_sums(self, x, threshold, survivors):
        censored = censored_units(x, survivors, threshold, self.method)
        first = int(np.argmax(censored)) + 1 if censored.any() else x.size + 1
        beyond = None if survivors is None else np.asarray(survivors, dtype=bool) & ~censored
        plain = self.plain.running_sums(x, threshold, beyond if self.method == "pass-fail" else None)
        return plain, x, np.asarray(survivors, dtype=bool), first

    def sigma2(self, sums, n, threshold, shape):
        """σ̂²_n at the check points n (all after the first censored suspension)."""
        _, x, flags, _ = sums
        if self.method == "pass-fail":
            return regularized_sigma2(product_limit(x, flags, threshold, prefixes=n))
        if (self.model, self.method) in _CLOSED_FORMS:
            return _CLOSED_FORMS[self.model, self.method](x, flags, n, float(shape), threshold)[1]
        if fits_every_prefix(self.model, self.method, shape):
            return self._prefixes_up_to(x, flags, int(n.max()), threshold, shape)[n - 1]
        out = np.empty(n.size)
        suspended = np.unique(x[: n.max()][flags[: n.max()]]).size
        width = max(1, suspended)
        rows = max(1, _RULE_CELLS // width)
        for start in range(0, n.size, rows):
            part = n[start:start + rows]
            data = _prefix_data(x, flags, part, self.model)
            out[start:start + rows] = _model_fit(data, threshold, self.method, shape, self.model)[2]
        return out

    def _prefixes_up_to(self, x, flags, last, threshold, shape):
        """σ̂² of every prefix of the first L units (``prefix_fits``), L the next limit at or past ``last``."""
        if last > self._prefix_limit:
            limit = next((size for size in self._PREFIX_LIMITS if size >= last), x.size)
            limit = min(x.size, max(limit, last))
            fits = prefix_fits(self.model, x, flags, threshold, self.method, shape, count=limit)
            self._prefix_limit, self._prefix_sigma2 = limit, fits.sigma2
        return self._prefix_sigma2

    def stops(self, sums, n, factor, threshold, shape):
        plain, _, _, first = sums
        early = n < first
        hits = np.zeros(n.size, dtype=bool)
        if early.any():
            hits[early] = self.plain.stops(plain, n[early], factor, threshold, shape)
        late = np.flatnonzero(~early)
        if late.size:
            hits[late] = _stop_condition(n[late], factor, self.sigma2(sums, n[late], threshold, shape))
        return hits

    def current_sigma2(self, sums, n, threshold, shape):
        plain, x, flags, first = sums
        if n < first:
            return self.plain.current_sigma2(plain, n, threshold, shape)
        sigma2 = float(self.sigma2(sums, np.array([n]), threshold, shape)[0])
        if np.isfinite(sigma2):
            return sigma2
        raise ValueError(self._undefined(x[:n], flags[:n], threshold))

    def _undefined(self, x, flags, threshold):
        if self.method == "pass-fail":
            estimate = product_limit(x, flags, threshold)
            if estimate.failures_below == 0:
                return failures_message("pass-fail", 0, threshold) + "; the units needed cannot be estimated yet"
            return (f"no unit has been seen past the threshold {threshold:g} yet; the units needed cannot be "
                    f"estimated until one is")
        failures = int((~flags).sum())
        if failures < FAILURES_NEEDED[self.method]:
            return failures_message(self.method, failures)
        return f"{self.method}: the likelihood of these failures and suspensions has no maximum yet"


# --------------------------------------------------------------------------- what the notes say

# A share of suspended units above this gets its own warning.
LARGE_SUSPENDED_SHARE = 0.3
# Notes that mean the method cannot estimate from the log yet.
NOT_YET_CODES = ("too-few-failures", "none-seen-beyond")


def censoring_notes(times, suspended, threshold, method):
    """Warnings about the suspended units of a log, as (code, text, figures); empty without any.

    ``too-few-failures`` (or ``none-seen-beyond`` for pass-fail) says that
    the method cannot estimate yet and the rule goes on (CONTINUE);
    ``suspended-units`` states the independent-censoring assumption;
    ``many-suspended`` warns when more than LARGE_SUSPENDED_SHARE of the
    units are suspended.
    """
    x = np.asarray(times, dtype=float).ravel()
    censored = censored_units(x, suspended, threshold, method)
    if not censored.any() or method not in FAILURES_NEEDED:
        return []  # pass-fail-exact refuses a unit suspended below the threshold (methods.estimate_tail)
    flags = np.asarray(suspended, dtype=bool).ravel()
    n, count = int(x.size), int(censored.sum())
    failures = int(np.sum(~flags & (x <= threshold))) if method == "pass-fail" else int(np.sum(~flags))
    figures = {"units": n, "suspended": count, "failures": failures}
    notes = []
    if failures < FAILURES_NEEDED[method]:
        notes.append(("too-few-failures", f"{failures_message(method, failures, threshold)}: the rule says "
                                          f"CONTINUE until then", figures))
    elif method == "pass-fail" and product_limit(x, flags, threshold).beyond == 0:
        notes.append(("none-seen-beyond", f"no unit has been seen past the threshold {threshold:g} (the others "
                                          f"were suspended before it): no estimate yet, the rule says CONTINUE",
                      figures))
    where = " before the threshold" if method == "pass-fail" else ""
    notes.append(("suspended-units",
                  f"{count} of {n} units suspended{where} (marked +): the estimate assumes a unit's suspension "
                  f"is independent of its lifetime (a unit pulled because it looked about to fail breaks this)",
                  figures))
    if count > LARGE_SUSPENDED_SHARE * n:
        notes.append(("many-suspended",
                      f"{count / n:.0%} of the units are suspended: with heavy censoring the stated accuracy is "
                      f"optimistic; plan with a test time to see the real coverage",
                      figures))
    return notes
