"""The three ways of estimating p = P(X > threshold) from a test log (METHOD.md §3).

* ``known-shape`` — the shape of the lifetime model is given; the scale is
  estimated by ML (gamma: ŝ = mean / a, p̂ = Q(a, c/ŝ); Weibull:
  η̂ = (mean x^β)^{1/β}; lognormal: the median e^{mean log x}).
* ``pass-fail`` — p̂ is the share of units beyond the threshold. Needs no
  lifetime model; a unit taken off test at or beyond the threshold without
  failing (a survivor) counts as beyond it.
* ``fitted-shape`` — shape and scale both by ML of the model (location 0).
* ``pass-fail-exact`` — pass-fail's estimate; only its stopping rule differs
  (a tuned boundary whose coverage is guaranteed exactly: ``core.guaranteed``).

The model (``core.models.MODELS``: gamma, the default, Weibull, lognormal)
is an argument of every function here; pass-fail ignores it.

Every method works from the sufficient statistics only, vectorized, so the
same code gives the estimate for one sample or for every prefix of a log
at once (``SufficientStatistics.running``). Where an estimate does not exist
for a prefix (no exceedance yet, all values equal) the vectorized results are
NaN or ±inf; ``estimate_tail`` turns those cases into clear errors.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from . import accuracy as _accuracy
from .censored import censored_estimate, is_censored
from .models import DEFAULT_MODEL, get_model
from .probability import TailProbability

__all__ = [
    "METHOD_NAMES",
    "PASS_FAIL_METHODS",
    "SUSPENDED_BELOW_EXACT",
    "SufficientStatistics",
    "TailEstimate",
    "estimate_from_statistics",
    "estimate_tail",
    "model_sigma2",
    "pass_fail_sigma2_from_p",
    "get_method",
]


@dataclass(frozen=True)
class SufficientStatistics:
    """What the estimators need from a sample (or from every prefix of a log).

    Attributes
    ----------
    n : ndarray
        Number of units.
    sum_x : ndarray
        Σx over the units.
    log_ratio : ndarray
        log(mean x) - mean(log x), the statistic of the gamma shape.
    exceedances : ndarray
        Number of units with x > threshold, survivors included.
    model_statistics : object or None
        What a model's estimators need beyond these (``LifetimeModel.statistics``; the Weibull
        and lognormal fits), None for the gamma model and for pass-fail.
    """

    n: np.ndarray
    sum_x: np.ndarray
    log_ratio: np.ndarray
    exceedances: np.ndarray
    model_statistics: object = None

    @classmethod
    def of(cls, observations, threshold, survivors=None, *, model=DEFAULT_MODEL, method=None,
           shape=None) -> "SufficientStatistics":
        """Statistics of one sample; ``survivors`` flags units stopped without failing.

        ``model``, ``method`` and ``shape`` say which model statistics to add (see
        ``model_statistics``); the gamma model needs none.
        """
        x = np.asarray(observations, dtype=float).ravel()
        n = x.size
        mean = x.mean() if n else np.nan
        with np.errstate(divide="ignore", invalid="ignore"):
            log_ratio = np.log(mean) - np.mean(np.log(x)) if n else np.nan
            if n and log_ratio < 1e-3:
                # values close together: avoid the cancellation of the two logs
                log_ratio = -np.mean(np.log1p((x - mean) / mean))
        return cls(
            n=np.asarray(n),
            sum_x=np.asarray(x.sum()),
            log_ratio=np.asarray(log_ratio),
            exceedances=np.asarray(_exceeds(x, threshold, survivors).sum()),
            model_statistics=_model_statistics(x, model, method, shape, running=False),
        )

    @classmethod
    def running(cls, observations, threshold, survivors=None, *, model=DEFAULT_MODEL, method=None,
                shape=None) -> "SufficientStatistics":
        """Statistics of every prefix x[..., :1], x[..., :2], …, from running sums (O(n)).

        ``observations`` may be 1-D (one log) or 2-D (one log per row, e.g.
        simulated replications); prefixes run along the last axis.
        """
        x = np.asarray(observations, dtype=float)
        if x.ndim == 0:
            x = x.reshape(1)
        n = np.arange(1, x.shape[-1] + 1)
        # Sums of logs relative to a reference value keep the two terms of the
        # log-ratio small, so their difference keeps its digits.
        reference = x[..., :1] if x.shape[-1] else 1.0
        scaled = x / reference
        with np.errstate(divide="ignore", invalid="ignore"):
            log_ratio = np.log(np.cumsum(scaled, axis=-1) / n) - np.cumsum(np.log(scaled), axis=-1) / n
        return cls(
            n=np.broadcast_to(n, x.shape),
            sum_x=np.cumsum(x, axis=-1),
            log_ratio=np.maximum(log_ratio, 0.0),
            exceedances=np.cumsum(_exceeds(x, threshold, survivors), axis=-1),
            model_statistics=_model_statistics(x, model, method, shape, running=True),
        )


def _model_statistics(x, model, method, shape, running):
    """The model's own statistics for a parametric method (None for gamma, pass-fail, an empty log)."""
    lifetime = get_model(model)
    if lifetime.statistics is None or method not in ("known-shape", "fitted-shape") or x.size == 0:
        return None
    with np.errstate(all="ignore"):
        return lifetime.statistics(x, method, shape, running=running)


def _exceeds(x, threshold, survivors):
    beyond = x > threshold
    if survivors is not None:
        beyond = beyond | np.asarray(survivors, dtype=bool).reshape(beyond.shape)
    return beyond


@dataclass(frozen=True)
class TailEstimate:
    """Estimate of p = P(X > threshold) with its plug-in asymptotic variance.

    Attributes
    ----------
    method : str
    n : ndarray
        Units used.
    tail : TailProbability
        p̂ with ``log_p``, ``log_cdf``, ``log_odds``.
    sigma2 : ndarray
        Plug-in σ̂² = n·Var(log q̂) (METHOD.md §3).
    shape, scale : ndarray or None
        The model parameters used (None for pass-fail).
    """

    method: str
    n: np.ndarray
    tail: TailProbability
    sigma2: np.ndarray
    shape: np.ndarray | None = None
    scale: np.ndarray | None = None

    @property
    def p(self):
        return self.tail.p

    @property
    def log_odds(self):
        return self.tail.log_odds

    @property
    def odds(self):
        return self.tail.odds

    def odds_interval(self, accuracy) -> _accuracy.Interval:
        """[q̂/d, q̂·d]."""
        return _accuracy.odds_interval(self.log_odds, accuracy)

    def probability_interval(self, accuracy) -> _accuracy.Interval:
        """[q̂/(d + q̂), d·q̂/(1 + d·q̂)]."""
        return _accuracy.probability_interval(self.log_odds, accuracy)

    def units_required(self, accuracy, confidence):
        """Plug-in n̂* = (z / log d)² σ̂²_n, real-valued."""
        return _accuracy.units_for_accuracy(self.sigma2, accuracy, confidence)


class _KnownShape:
    name = "known-shape"
    needs_shape = True
    uses_lifetimes = True

    def estimate(self, statistics, threshold, shape, model):
        shape = np.asarray(shape, dtype=float)
        scale = model.scale_for_shape(statistics, shape)
        t = threshold / scale
        return TailEstimate(
            self.name, statistics.n, model.tail_standard(shape, t), model.sigma2_known_shape(shape, t),
            shape=np.broadcast_to(shape, np.shape(t)), scale=scale,
        )

    def model_sigma2(self, shape, t, model):
        return model.sigma2_known_shape(shape, t)


class _PassFail:
    name = "pass-fail"
    needs_shape = False
    uses_lifetimes = False

    def estimate(self, statistics, threshold, shape, model):
        n = np.asarray(statistics.n, dtype=float)
        k = np.asarray(statistics.exceedances, dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            p = k / n
            log_p = np.log(k) - np.log(n)
            log_cdf = np.log(n - k) - np.log(n)
            sigma2 = n * n / (k * (n - k))
        return TailEstimate(self.name, statistics.n, TailProbability(p, log_p, log_cdf), sigma2)

    def model_sigma2(self, shape, t, model):
        tail = model.tail_standard(shape, t)
        with np.errstate(over="ignore"):
            return np.exp(-tail.log_p - tail.log_cdf)


class _FittedShape:
    name = "fitted-shape"
    needs_shape = False
    uses_lifetimes = True

    def estimate(self, statistics, threshold, shape, model):
        fitted = model.fitted_shape(statistics)
        valid = np.isfinite(fitted)
        safe_shape = np.where(valid, fitted, 1.0)
        scale = model.fitted_scale(statistics, safe_shape)
        t = threshold / scale
        tail = model.tail_standard(safe_shape, t)
        nan = np.where(valid, 0.0, np.nan)
        return TailEstimate(
            self.name, statistics.n,
            TailProbability(tail.p + nan, tail.log_p + nan, tail.log_cdf + nan),
            model.sigma2_fitted_shape(safe_shape, t) + nan,
            shape=fitted, scale=scale + nan,
        )

    def model_sigma2(self, shape, t, model):
        return model.sigma2_fitted_shape(shape, t)


class _PassFailExact(_PassFail):
    """pass-fail's estimate and interval; its stopping rule has a tuned boundary (``core.guaranteed``)."""

    name = "pass-fail-exact"


PASS_FAIL_METHODS = ("pass-fail", "pass-fail-exact")
SUSPENDED_BELOW_EXACT = ("a unit taken off test below the threshold has no exact guarantee in pass-fail-exact "
                         "(it counts units on each side only): use pass-fail for a log with such units")
_METHODS = {m.name: m for m in (_KnownShape(), _PassFail(), _FittedShape(), _PassFailExact())}
METHOD_NAMES = tuple(_METHODS)


def get_method(name):
    """The method object for a name; ValueError listing the choices otherwise."""
    try:
        return _METHODS[name]
    except (KeyError, TypeError):
        raise ValueError(f"method must be one of {', '.join(METHOD_NAMES)} (got {name!r})") from None


def estimate_from_statistics(statistics, threshold, method="pass-fail", shape=None, model=DEFAULT_MODEL) -> TailEstimate:
    """Vectorized estimate over (possibly many) sets of sufficient statistics, unchecked."""
    return get_method(method).estimate(statistics, threshold, shape, get_model(model))


def estimate_tail(observations, threshold, method="pass-fail", shape=None, survivors=None,
                  model=DEFAULT_MODEL) -> TailEstimate:
    """Estimate p = P(X > threshold) from one sample of lifetimes.

    Parameters
    ----------
    observations : array_like
        Positive lifetimes, one per unit.
    threshold : float
        The threshold c > 0, in the unit of the lifetimes.
    method : {'pass-fail', 'known-shape', 'fitted-shape'}
    shape : float, optional
        The model's shape; required by ``known-shape`` only.
    survivors : array_like of bool, optional
        Units taken off test at or beyond the threshold without failing
        (``pass-fail`` only): they count as beyond the threshold.
    model : str
        The lifetime model of the parametric methods (a name of ``core.models.MODELS``).

    Raises
    ------
    ValueError
        With a message saying what to change, when the estimate does not
        exist for these data.
    """
    estimator, lifetime = get_method(method), get_model(model)
    x = np.asarray(observations, dtype=float).ravel()
    _check_sample(x, threshold, estimator, shape, survivors, lifetime)
    if is_censored(x, survivors, threshold, estimator.name):
        fit = censored_estimate(x, survivors, threshold, estimator.name, shape, lifetime.name)
        return TailEstimate(fit.method, fit.n, fit.tail, fit.sigma2, fit.shape, fit.scale)
    statistics = SufficientStatistics.of(x, threshold, survivors, model=lifetime.name, method=estimator.name,
                                         shape=shape)
    if estimator.name == "fitted-shape" and not (statistics.log_ratio > 1e-13
                                                 and np.isfinite(lifetime.fitted_shape(statistics))):
        raise ValueError(f"all lifetimes are equal (or nearly): the {lifetime.title} shape cannot be estimated")
    result = estimator.estimate(statistics, threshold, shape, lifetime)
    return _as_scalars(result)


def _check_sample(x, threshold, model, shape, survivors, lifetime):
    if not (np.isfinite(threshold) and threshold > 0):
        raise ValueError(f"threshold must be a positive number (got {threshold!r})")
    if not np.all(np.isfinite(x) & (x > 0)):
        raise ValueError("lifetimes must be positive finite numbers")
    if x.size < 2:
        raise ValueError(f"at least 2 units are needed (got {x.size})")
    if model.needs_shape and (shape is None or not (np.isfinite(shape) and shape > 0)):
        raise ValueError(f"known-shape needs the {lifetime.title} shape, a positive number")
    if survivors is not None and np.size(survivors) != x.size:
        raise ValueError(f"survivors must have one flag per lifetime ({x.size}, got {np.size(survivors)})")
    if survivors is not None and model.name == "pass-fail-exact" and np.any(np.asarray(survivors, bool) & (x < threshold)):
        raise ValueError(SUSPENDED_BELOW_EXACT)


def _as_scalars(result: TailEstimate) -> TailEstimate:
    def scalar(v):
        return None if v is None else float(np.asarray(v))

    return TailEstimate(
        result.method, int(result.n),
        TailProbability(scalar(result.tail.p), scalar(result.tail.log_p), scalar(result.tail.log_cdf)),
        scalar(result.sigma2), scalar(result.shape), scalar(result.scale),
    )


def model_sigma2(method, threshold, shape, scale, model=DEFAULT_MODEL):
    """σ² under an assumed lifetime model (planning before any data), vectorized."""
    lifetime = get_model(model)
    lifetime.tail_probability(threshold, shape, scale)  # validates the parameters
    t = np.asarray(threshold, dtype=float) / np.asarray(scale, dtype=float)
    return get_method(method).model_sigma2(np.asarray(shape, dtype=float), t, lifetime)


def pass_fail_sigma2_from_p(p):
    """σ² = 1 / (p (1 - p)) for pass-fail planning from a guessed probability."""
    p = np.asarray(p, dtype=float)
    if not np.all((p > 0) & (p < 1)):
        raise ValueError("the guessed probability must be strictly between 0 and 1")
    with np.errstate(over="ignore"):
        return 1.0 / (p * (1.0 - p))  # inf for p within a few doubles of 0: no finite plan
