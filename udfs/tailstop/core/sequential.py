"""Stop/continue decisions for a whole test log in one pass (METHOD.md §5).

The purely sequential fixed-accuracy rule is consulted at the check points
n = m, m + k, m + 2k, … (m the pilot, k = ``check_every``) and stops at the
first one with n >= (z / log d)² σ̂²_n. Along a log the decisions are

    PILOT      fewer than m units so far
    CONTINUE   the rule has not stopped (or is not consulted at this unit)
    STOP       the first check point at which it stops
    PAST STOP  every unit after that

Cost. Every prefix is described by running sums (Σx, Σlog x, the count of
units beyond the threshold), so the statistics of all prefixes cost O(n).
The column is settled by its first STOP, so the check points are taken in
chunks, in order, until it comes; inside a chunk a cheap lower bound of σ̂²
rules out most check points before σ̂² itself is computed:

* known-shape (f = t^a e^{-t}/Γ(a), p = Q(a, t); METHOD.md §3): over a
  block of check points whose t = c/ŝ lies in
  [t_lo, t_hi], σ² = (f/p + f/(1-p))² / a >= (f/p at t_lo + f/(1-p) at t_hi)² / a,
  because f/p increases and f/(1-p) decreases in t (they are the hazard and
  the reversed hazard of log X, whose density exp(a u - e^u)/Γ(a) is
  log-concave; Bagnoli & Bergstrom, Econ. Theory 26 (2005) 445–469).
  One pair of tail evaluations per block instead of one per check point.
* fitted-shape: σ²_fitted(a, t) - σ²_known(a, t) = (√a u - v/√a)² / (a ψ'(a) - 1) >= 0
  (u = ∂ log q/∂a, v = f/(p(1-p)); METHOD.md §3), so the known-shape σ²
  at the fitted shape, one tail evaluation, rules out a check point before
  the numerical shape derivative (four more) is needed.

Where a bound cannot decide, σ̂² is computed by the functions
``rule.rule_sigma2`` uses, on the same running sums, so the decisions are
those of ``rule.stops`` (the tests compare them); the bounds are applied with
a safety margin far above rounding error. The fitted shapes of all prefixes
are solved at once (``fit.shape_from_log_ratio``, each prefix converging on
its own).

References: Chow, Y. S. & Robbins, H. (1965), Ann. Math. Statist. 36,
457–462; Banerjee, S. & Mukhopadhyay, N. (2016), Ann. Inst. Stat. Math. 68,
541–570.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .censored import CensoredRule, is_censored
from . import guaranteed
from .methods import METHOD_NAMES, PASS_FAIL_METHODS, SUSPENDED_BELOW_EXACT, SufficientStatistics
from .models import DEFAULT_MODEL, get_model
from .models.gamma.fit import shape_from_log_ratio
from .models.gamma.tail import log_density_term, tail_probability_standard
from .models.gamma.variance import sigma2_fitted_shape, sigma2_known_shape
from .rule import MIN_PILOT, boundary_factor, pass_fail_rule_sigma2

__all__ = [
    "STATE_NAMES",
    "PILOT",
    "CONTINUE",
    "STOP",
    "PAST_STOP",
    "DecisionColumn",
    "UnitsNeeded",
    "TwoStagePlan",
    "decision_column",
    "stopping_units",
    "units_needed_now",
    "two_stage_plan",
    "known_shape_sigma2_floor",
]

STATE_NAMES = ("PILOT", "CONTINUE", "STOP", "PAST STOP")
PILOT, CONTINUE, STOP, PAST_STOP = range(4)
_LABELS = np.array(STATE_NAMES, dtype=object)

# Check points are evaluated in chunks of this many, doubling up to the largest.
_FIRST_CHUNK = 256
_LARGEST_CHUNK = 1 << 16
# Check points per block of the known-shape bound.
_BLOCK = 256
# A bound rules a check point out only when n < (1 - margin) · (z/log d)² · bound.
_MARGIN = 1e-6


# --------------------------------------------------------------------------- results


@dataclass(frozen=True)
class DecisionColumn:
    """The decision after every unit of a log.

    Attributes
    ----------
    states : ndarray of int8
        One code per unit: ``PILOT``, ``CONTINUE``, ``STOP`` or ``PAST_STOP``
        (indices into ``STATE_NAMES``).
    stop_units : int or None
        N, the number of units at the STOP; None while the rule has not stopped.
    pilot, check_every : int
    method : str
    boundary : float
        (z / log d)²: the rule stops when n >= boundary · σ̂²_n.
    """

    states: np.ndarray
    stop_units: int | None
    pilot: int
    check_every: int
    method: str
    boundary: float

    @property
    def labels(self) -> np.ndarray:
        """The states as text ('PILOT', 'CONTINUE', 'STOP', 'PAST STOP'), one per unit."""
        return _LABELS[self.states]

    @property
    def decision(self) -> str | None:
        """The decision after the last unit (None for an empty log)."""
        return STATE_NAMES[self.states[-1]] if self.states.size else None

    @property
    def stopped(self) -> bool:
        return self.stop_units is not None


@dataclass(frozen=True)
class UnitsNeeded:
    """The plug-in unit count (z / log d)² σ̂²_n after n units.

    Attributes
    ----------
    units : int
        n, the units so far.
    sigma2 : float
        σ̂²_n as the stopping rule uses it.
    needed : float
        (z / log d)² σ̂²_n, real-valued.
    """

    units: int
    sigma2: float
    needed: float

    @property
    def whole(self) -> int:
        """ceil(needed): at a check point the rule stops exactly when units >= whole."""
        return int(math.ceil(self.needed))


@dataclass(frozen=True)
class TwoStagePlan:
    """A two-stage plan: the pilot, then one final batch.

    Attributes
    ----------
    pilot_units : int
        m, the units of the pilot.
    sigma2 : float
        σ̂²_m from the pilot, as the stopping rule uses it.
    total_units : int
        max(m, ceil((z / log d)² σ̂²_m)): units to test in all, pilot included.
    """

    pilot_units: int
    sigma2: float
    total_units: int

    @property
    def final_batch(self) -> int:
        """Units still to test after the pilot."""
        return self.total_units - self.pilot_units


# --------------------------------------------------------------------------- public functions


def decision_column(lifetimes, threshold, accuracy, confidence, pilot, method="pass-fail", shape=None, *,
                    survivors=None, check_every=1, model=DEFAULT_MODEL) -> DecisionColumn:
    """The stop/continue decision after every unit of a test log, in O(n).

    Parameters
    ----------
    lifetimes : array_like
        Positive lifetimes in test order, one per unit (for a survivor: the
        time it was taken off test).
    threshold : float
        The threshold c > 0.
    accuracy : float
        d > 1: the odds are to be known within a factor d.
    confidence : float
        Strictly between 0 and 1.
    pilot : int
        m >= 2, the units tested before the rule is first consulted.
    method : {'pass-fail', 'known-shape', 'fitted-shape'}
    shape : float, optional
        The gamma shape, for known-shape only.
    survivors : array_like of bool, optional
        pass-fail only: units taken off test at or beyond the threshold
        without failing; they count as beyond it.
    check_every : int
        k >= 1: the rule is consulted at n = m, m + k, m + 2k, …

    Returns
    -------
    DecisionColumn

    Raises
    ------
    ValueError
        For a parameter out of range, a lifetime that is not positive, or a
        survivor the method cannot use.

    Notes
    -----
    Purely sequential fixed-accuracy estimation (Banerjee & Mukhopadhyay
    2016; Chow & Robbins 1965). σ̂²_n is ``rule.rule_sigma2``: for pass-fail
    1/(p̂(1-p̂)) with the plain share p̂ = S/n, and no stop while S is 0 or n.
    """
    x, flags = _check_log(lifetimes, threshold, method, shape, survivors)
    factor = _boundary(method, accuracy, confidence, pilot, check_every)
    pilot, check_every = int(pilot), int(check_every)
    stop = _first_stop(x, flags, threshold, factor, pilot, method, shape, check_every, model)
    states = np.full(x.size, CONTINUE, dtype=np.int8)
    states[: min(pilot - 1, x.size)] = PILOT
    if stop is not None:
        states[stop - 1] = STOP
        states[stop:] = PAST_STOP
    return DecisionColumn(states, stop, pilot, check_every, method, factor)


def stopping_units(lifetimes, threshold, accuracy, confidence, pilot, method="pass-fail", shape=None, *,
                   survivors=None, check_every=1, model=DEFAULT_MODEL) -> int | None:
    """N, the number of units at which the rule stops on this log; None if it has not stopped.

    Same arguments as ``decision_column``; cheaper when only N is wanted
    (simulations).
    """
    x, flags = _check_log(lifetimes, threshold, method, shape, survivors)
    factor = _boundary(method, accuracy, confidence, pilot, check_every)
    return _first_stop(x, flags, threshold, factor, int(pilot), method, shape, int(check_every), model)


def units_needed_now(lifetimes, threshold, accuracy, confidence, method="pass-fail", shape=None, *,
                     survivors=None, model=DEFAULT_MODEL) -> UnitsNeeded:
    """The current plug-in unit count (z / log d)² σ̂²_n from all n units so far.

    σ̂²_n is the one the stopping rule uses, computed from the same running
    sums, so at a check point the rule stops exactly when
    n >= ``UnitsNeeded.whole``.

    Raises
    ------
    ValueError
        Fewer than 2 units; pass-fail with every unit on one side of the
        threshold (the rule cannot stop there, and σ̂² says nothing yet);
        fitted-shape with all lifetimes equal.
    """
    x, flags = _check_log(lifetimes, threshold, method, shape, survivors)
    factor = _boundary(method, accuracy, confidence, MIN_PILOT, 1)
    sigma2 = _current_sigma2(x, flags, threshold, method, shape, model)
    return UnitsNeeded(units=int(x.size), sigma2=sigma2, needed=factor * sigma2)


def two_stage_plan(pilot_lifetimes, threshold, accuracy, confidence, method="pass-fail", shape=None, *,
                   survivors=None, model=DEFAULT_MODEL) -> TwoStagePlan:
    """The two-stage plan: after a pilot of m units, test up to max(m, ceil((z/log d)² σ̂²_m)) in all.

    The same σ̂² as the sequential rule, from the pilot only; undefined (a
    ValueError) in the same cases as ``units_needed_now``.

    Notes
    -----
    The two-stage procedure fixes the total after the pilot, so its coverage
    depends on how well σ̂²_m estimates σ²: it needs a larger pilot than the
    purely sequential rule (two-stage procedures: Mukhopadhyay & de Silva,
    Sequential Methods and Their Applications, 2009; from memory).
    """
    x, flags = _check_log(pilot_lifetimes, threshold, method, shape, survivors)
    factor = _boundary(method, accuracy, confidence, max(MIN_PILOT, x.size), 1)
    sigma2 = _current_sigma2(x, flags, threshold, method, shape, model)
    total = max(int(x.size), int(math.ceil(factor * sigma2)))
    return TwoStagePlan(pilot_units=int(x.size), sigma2=sigma2, total_units=total)


# --------------------------------------------------------------------------- checks


def _check_plan(accuracy, confidence, pilot, check_every):
    """(z / log d)² after checking the parameters of the rule."""
    if not (np.isfinite(accuracy) and accuracy > 1):
        raise ValueError(f"accuracy must be > 1 (got {accuracy!r})")
    if not 0 < confidence < 1:
        raise ValueError(f"confidence must be strictly between 0 and 1 (got {confidence!r})")
    if not (float(pilot).is_integer() and pilot >= MIN_PILOT):
        raise ValueError(f"pilot must be a whole number >= {MIN_PILOT}: σ² cannot be estimated from fewer "
                         f"units (got {pilot!r})")
    if not (float(check_every).is_integer() and check_every >= 1):
        raise ValueError(f"check_every must be a whole number >= 1 (got {check_every!r})")
    return boundary_factor(accuracy, confidence)


def _boundary(method, accuracy, confidence, pilot, check_every):
    """The factor F of the stop condition n >= F σ̂²: (z / log d)², or pass-fail-exact's tuned c (z / log d)²."""
    factor = _check_plan(accuracy, confidence, pilot, check_every)
    if method == guaranteed.METHOD:
        return guaranteed.tuning(accuracy, confidence, int(pilot), int(check_every)).boundary
    return factor


def _check_log(lifetimes, threshold, method, shape, survivors):
    if method not in METHOD_NAMES:
        raise ValueError(f"method must be one of {', '.join(METHOD_NAMES)} (got {method!r})")
    if not (np.isfinite(threshold) and threshold > 0):
        raise ValueError(f"threshold must be a positive number (got {threshold!r})")
    if method == "known-shape" and (shape is None or not (np.isfinite(shape) and shape > 0)):
        raise ValueError("known-shape needs the gamma shape, a positive number")
    x = np.asarray(lifetimes, dtype=float).ravel()
    if not np.all(np.isfinite(x) & (x > 0)):
        raise ValueError("lifetimes must be positive finite numbers")
    if survivors is None:
        return x, None
    flags = np.asarray(survivors, dtype=bool).ravel()
    if flags.size != x.size:
        raise ValueError(f"survivors must have one flag per lifetime ({x.size}, got {flags.size})")
    if not flags.any():
        return x, None
    if method == guaranteed.METHOD and np.any(flags & (x < threshold)):
        raise ValueError(SUSPENDED_BELOW_EXACT)
    return x, flags


# --------------------------------------------------------------------------- the first stop


def _first_stop(x, survivors, threshold, factor, pilot, method, shape, check_every, model=DEFAULT_MODEL):
    """The first check point at which the rule stops, or None; chunk by chunk."""
    check_points = np.arange(int(pilot), x.size + 1, int(check_every))
    if check_points.size == 0:
        return None
    evaluator = _evaluator(x, survivors, threshold, method, model)
    sums = evaluator.running_sums(x, threshold, survivors)
    start, size = 0, getattr(evaluator, "first_chunk", _FIRST_CHUNK)
    while start < check_points.size:
        chunk = check_points[start:start + size]
        hits = evaluator.stops(sums, chunk, factor, threshold, shape)
        if hits.any():
            return int(chunk[np.argmax(hits)])
        start += size
        size = min(2 * size, _LARGEST_CHUNK)
    return None


def _current_sigma2(x, survivors, threshold, method, shape, model=DEFAULT_MODEL):
    """σ̂²_n from all n units, exactly as the rule computes it at n; ValueError where undefined."""
    if x.size < MIN_PILOT:
        raise ValueError(f"at least {MIN_PILOT} units are needed (got {x.size})")
    evaluator = _evaluator(x, survivors, threshold, method, model)
    sums = evaluator.running_sums(x, threshold, survivors)
    return evaluator.current_sigma2(sums, x.size, threshold, shape)


def _enough(n, factor, sigma2):
    """The stop condition of ``rule.stops``: n >= factor · σ̂², with σ̂² finite."""
    with np.errstate(invalid="ignore"):
        return (n >= factor * sigma2) & np.isfinite(sigma2)


def _ruled_out(n, factor, floor, margin=_MARGIN):
    """True where a lower bound of σ̂² already shows that the rule cannot stop."""
    with np.errstate(invalid="ignore"):
        return n < (1.0 - margin) * factor * floor


class _PassFail:
    """σ̂² = n²/(S(n-S)) in closed form: every check point is cheap, no bound needed."""

    @staticmethod
    def running_sums(x, threshold, survivors):
        beyond = x > threshold
        if survivors is not None:
            beyond |= survivors
        return np.cumsum(beyond)

    @staticmethod
    def stops(exceedances, n, factor, threshold, shape):
        s = exceedances[n - 1]
        sigma2 = pass_fail_rule_sigma2(n, s)
        return _enough(n, factor, sigma2) & (s > 0) & (s < n)

    @staticmethod
    def current_sigma2(exceedances, n, threshold, shape):
        s = int(exceedances[n - 1])
        if s == 0:
            raise ValueError("no unit has outlasted the threshold yet; the units needed cannot be estimated "
                             "until one has")
        if s == n:
            raise ValueError("every unit so far has outlasted the threshold; the units needed cannot be "
                             "estimated until one fails at or below it")
        return float(pass_fail_rule_sigma2(n, s))


class _KnownShape:
    """σ̂² from t = c/ŝ with ŝ = x̄/a; blocks of check points ruled out by the log-concavity bound."""

    @staticmethod
    def running_sums(x, threshold, survivors):
        return np.cumsum(x)

    @staticmethod
    def _t(sum_x, n, threshold, shape):
        # the same operations as methods._KnownShape.estimate, so the same bits
        shape = np.asarray(shape, dtype=float)
        scale = sum_x / (n * shape)
        return threshold / scale

    @classmethod
    def stops(cls, sum_x, n, factor, threshold, shape):
        t = cls._t(sum_x[n - 1], n, threshold, shape)
        hits = np.zeros(n.size, dtype=bool)
        undecided = np.flatnonzero(~_known_shape_blocks_ruled_out(n, t, float(shape), factor))
        if undecided.size:
            sigma2 = sigma2_known_shape(shape, t[undecided])
            hits[undecided] = _enough(n[undecided], factor, sigma2)
        return hits

    @classmethod
    def current_sigma2(cls, sum_x, n, threshold, shape):
        return float(sigma2_known_shape(shape, cls._t(sum_x[n - 1], n, threshold, shape)))


def known_shape_sigma2_floor(shape, t_low, t_high):
    """A lower bound of the known-shape σ²(a, t) over every t in [t_low, t_high].

    σ² = (e1 + e2)² / a with e1 = f/p increasing and e2 = f/(1-p) decreasing
    in t (see the module docstring), so σ² >= (e1(t_low) + e2(t_high))² / a.
    """
    low = tail_probability_standard(shape, t_low)
    high = tail_probability_standard(shape, t_high)
    e1 = np.exp(log_density_term(shape, t_low) - low.log_p)
    e2 = np.exp(log_density_term(shape, t_high) - high.log_cdf)
    return (e1 + e2) ** 2 / shape


def _known_shape_blocks_ruled_out(n, t, shape, factor):
    """Per check point: True if its whole block is ruled out by ``known_shape_sigma2_floor``."""
    blocks = -(-n.size // _BLOCK)
    pad = blocks * _BLOCK - n.size
    t_blocks = np.pad(t, (0, pad), mode="edge").reshape(blocks, _BLOCK)
    n_last = np.pad(n, (0, pad), mode="edge").reshape(blocks, _BLOCK)[:, -1]
    with np.errstate(all="ignore"):
        floor = known_shape_sigma2_floor(shape, t_blocks.min(axis=1), t_blocks.max(axis=1))
    ruled_out = _ruled_out(n_last, factor, floor)
    return np.repeat(ruled_out, _BLOCK)[: n.size]


class _FittedShape:
    """Shapes of all prefixes at once; the known-shape σ² at â rules out a check point first."""

    @staticmethod
    def running_sums(x, threshold, survivors):
        return SufficientStatistics.running(x, threshold)

    @staticmethod
    def _shape_and_t(statistics, n, threshold):
        shape = shape_from_log_ratio(statistics.log_ratio[n - 1])
        valid = np.flatnonzero(np.isfinite(shape))
        shape, units = shape[valid], n[valid]
        # the same operations as methods._FittedShape.estimate
        scale = statistics.sum_x[units - 1] / (units * shape)
        return valid, shape, threshold / scale

    @classmethod
    def stops(cls, statistics, n, factor, threshold, shape=None):
        hits = np.zeros(n.size, dtype=bool)
        valid, fitted, t = cls._shape_and_t(statistics, n, threshold)
        with np.errstate(all="ignore"):
            floor = sigma2_known_shape(fitted, t)
        # the computed difference of the two σ² loses about a·1e-12 to rounding for a large shape
        margin = _MARGIN * np.maximum(1.0, fitted)
        undecided = np.flatnonzero(~_ruled_out(n[valid], factor, floor, margin))
        if undecided.size:
            with np.errstate(all="ignore"):
                sigma2 = sigma2_fitted_shape(fitted[undecided], t[undecided])
            hits[valid[undecided]] = _enough(n[valid[undecided]], factor, sigma2)
        return hits

    @classmethod
    def current_sigma2(cls, statistics, n, threshold, shape=None):
        valid, fitted, t = cls._shape_and_t(statistics, np.array([n]), threshold)
        if valid.size == 0:
            raise ValueError("all lifetimes are equal: the gamma shape cannot be estimated yet")
        with np.errstate(all="ignore"):
            sigma2 = float(sigma2_fitted_shape(fitted, t)[0])
        if not np.isfinite(sigma2):
            raise ValueError("the fitted-shape σ² is not finite for these lifetimes")
        return sigma2


class _PassFailExact(_PassFail):
    """pass-fail's counts with the tuned stop condition of ``guaranteed.stop_condition`` (F is the tuned boundary)."""

    @staticmethod
    def stops(exceedances, n, factor, threshold, shape):
        # ``n`` holds check points only, so the condition is asked with pilot 0 and every unit consulted
        return guaranteed.stop_condition(n, exceedances[n - 1], factor, 0, 1)


_EVALUATORS = {"pass-fail": _PassFail, "known-shape": _KnownShape, "fitted-shape": _FittedShape,
               "pass-fail-exact": _PassFailExact}


def _evaluator(x, survivors, threshold, method, model=DEFAULT_MODEL):
    """The method's evaluator; the censored one when the log has a suspension the method must censor;
    for the Weibull and lognormal models the parametric methods' ``_ModelRule``."""
    name = get_model(model).name
    parametric = name != DEFAULT_MODEL and method not in PASS_FAIL_METHODS
    plain = _ModelRule(name, method) if parametric else _EVALUATORS[method]
    if is_censored(x, survivors, threshold, method):
        return CensoredRule(plain, method, name)
    return plain


class _ModelRule:
    """σ̂² of every prefix from the model's running statistics (Weibull, lognormal).

    For both models σ² depends on the prefix only through one score (Weibull
    w = β̂ ln(c/η̂), lognormal z = ln(c/median)/σ̂; ``LifetimeModel.score``),
    so blocks of _BLOCK check points are first ruled out by the model's floor
    of σ² over the block's range of scores (``LifetimeModel.sigma2_floor``),
    and σ² itself is computed only in the blocks left, with the same margin as
    the gamma screens. The scores of the first L units are computed once for
    L = 4,096, then 65,536, then the whole log, as the check points reach
    them: a log that stops early costs little, one that never stops costs
    about one pass (for the Weibull fitted shape, ``weibull.running_fit``).
    """

    _LIMITS = (1 << 12, 1 << 16)

    def __init__(self, model, method):
        self.model, self.method = get_model(model), method
        self.limit, self.scores = 0, np.empty(0)

    def running_sums(self, x, threshold, survivors):
        return x

    def _scores_up_to(self, x, last, threshold, shape):
        if last > self.limit:
            limit = next((size for size in self._LIMITS if size >= last), x.size)
            limit = min(x.size, max(limit, last))
            self.limit, self.scores = limit, self._prefix_scores(x[:limit], threshold, shape)
        return self.scores

    def _prefix_scores(self, x, threshold, shape):
        """The score of every prefix, from the model's statistics as ``methods`` computes them (NaN: no fit)."""
        model = self.model
        statistics = SufficientStatistics(
            n=np.arange(1, x.size + 1), sum_x=None, log_ratio=None, exceedances=None,
            model_statistics=model.statistics(x, self.method, shape, running=True))
        with np.errstate(all="ignore"):
            if self.method == "known-shape":
                return model.score(shape, threshold / model.scale_for_shape(statistics, shape))
            fitted = model.fitted_shape(statistics)
            valid = np.isfinite(fitted)
            safe = np.where(valid, fitted, 1.0)
            scores = model.score(safe, threshold / model.fitted_scale(statistics, safe))
        return np.where(valid, scores, np.nan)

    def _sigma2(self, scores):
        with np.errstate(all="ignore"):
            return self.model.sigma2_of_score[self.method](scores)

    def stops(self, x, n, factor, threshold, shape):
        scores = self._scores_up_to(x, int(n[-1]), threshold, shape)[n - 1]
        blocks = -(-n.size // _BLOCK)
        pad = blocks * _BLOCK - n.size
        grid = np.pad(scores, (0, pad), mode="edge").reshape(blocks, _BLOCK)
        n_last = np.pad(n, (0, pad), mode="edge").reshape(blocks, _BLOCK)[:, -1]
        with np.errstate(all="ignore"):
            floor = self.model.sigma2_floor(self.method, np.fmin.reduce(grid, axis=1), np.fmax.reduce(grid, axis=1))
        ruled_out = np.repeat(_ruled_out(n_last, factor, floor), _BLOCK)[: n.size]
        hits = np.zeros(n.size, dtype=bool)
        undecided = np.flatnonzero(~ruled_out)
        if undecided.size:
            hits[undecided] = _enough(n[undecided], factor, self._sigma2(scores[undecided]))
        return hits

    def current_sigma2(self, x, n, threshold, shape):
        sigma2 = float(self._sigma2(self._scores_up_to(x, n, threshold, shape)[n - 1]))
        if not np.isfinite(sigma2):
            raise ValueError(f"all lifetimes are equal: the {self.model.title} shape cannot be estimated yet")
        return sigma2
