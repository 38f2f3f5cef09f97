"""Monte Carlo operating characteristics of the known-shape and fitted-shape rules (seeded, chunked)."""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .. import accuracy as _accuracy
from .. import rule
from ..methods import (
    SufficientStatistics,
    estimate_from_statistics,
    get_method,
    model_sigma2,
)
from ..models import DEFAULT_MODEL, get_model
from ..models.gamma.fit import log_minus_digamma, shape_from_log_ratio
from ..models.gamma.tail import tail_probability
from ..models.gamma.variance import sigma2_fitted_shape
from .model_simulation import simulate_model_runs
from .work import COMMAND_SECONDS, check_work, simulation_work
from .results import (
    DEFAULT_SEED,
    QUANTILE_LEVELS,
    OperatingCharacteristics,
    _check_plan,
    _stop_confidence,
    _stop_z,
    default_n_max,
    planned_units,
)

# Monte Carlo memory: replications per chunk and the longest block of units drawn at once.
_CHUNK_REPLICATIONS = 8192
_LONGEST_BLOCK = 64
_FIRST_BLOCK = 8
# Rounds of one question per run before the screened candidates left are asked about at once.
_SCREEN_ROUNDS = 3


# --------------------------------------------------------------------------- Monte Carlo


@dataclass(frozen=True)
class _Plan:
    """Everything one simulated run needs (internal)."""

    threshold: float
    shape: float
    scale: float
    method: str
    accuracy: float
    stop_confidence: float
    pilot: int
    n_max: int
    check_every: int
    probability: float

    @property
    def known_shape(self):
        return self.shape if self.method == "known-shape" else None

    def stops(self, statistics):
        return rule.stops(statistics, self.threshold, self.accuracy, self.stop_confidence, self.pilot,
                          self.method, self.known_shape, self.check_every)

    def covers(self, statistics):
        with np.errstate(all="ignore"):
            log_odds = estimate_from_statistics(statistics, self.threshold, self.method, self.known_shape).log_odds
        interval = _accuracy.probability_interval(log_odds, self.accuracy)
        return (interval.low <= self.probability) & (self.probability <= interval.high)


class _KnownShapeScreen:
    """A conservative lower bound on σ̂² as a function of t̂ = c/ŝ (known-shape).

    The known-shape σ̂² depends on the data only through t̂ = threshold·shape·n/Σx.
    It is tabulated with ``rule.rule_sigma2`` on a fine log grid of t around
    the planning value; every grid cell gets the smaller of its two end values,
    lowered near each local minimum of the table by the rise to the
    neighbouring points (a parabola cannot dip below its lowest grid value by
    more than a quarter of that) and by a relative 1e-6 for rounding. Running
    minima from both ends make the bound unimodal, so for each n the t̂ that
    can possibly stop form one interval. Outside the table every prefix is a
    candidate. ``rule.stops`` then decides on the candidates only.
    """

    points = 12001
    half_width = 6.0  # in log t around the planning value

    def __init__(self, plan: _Plan):
        self.plan = plan
        t_plan = plan.threshold / plan.scale
        self.t = t_plan * np.exp(np.linspace(-self.half_width, self.half_width, self.points))
        statistics = SufficientStatistics(
            n=np.ones(self.points), sum_x=plan.threshold * plan.shape / self.t,
            log_ratio=np.zeros(self.points), exceedances=np.zeros(self.points),
        )
        sigma2 = rule.rule_sigma2(statistics, plan.threshold, plan.method, plan.shape)
        self.valid = self._depends_on_t_only(sigma2, statistics)
        # undefined σ̂² (NaN) gets bound 0: its neighbourhood is always checked exactly
        sigma2 = np.where(np.isnan(sigma2), 0.0, sigma2)
        cell = np.minimum(sigma2[:-1], sigma2[1:])
        dip = np.zeros_like(cell)
        inner = np.arange(1, self.points - 1)
        local_min = inner[(sigma2[inner] <= sigma2[inner - 1]) & (sigma2[inner] <= sigma2[inner + 1])]
        rise = np.maximum(sigma2[local_min - 1], sigma2[local_min + 1]) - sigma2[local_min]
        for side in (local_min - 1, local_min):  # the two cells touching each local minimum
            dip[side] = np.maximum(dip[side], rise)
        bound = (cell - dip) * (1.0 - 1e-6)
        lowest = int(np.argmin(bound))
        self.left = np.minimum.accumulate(bound[: lowest + 1])          # non-increasing
        self.right = np.minimum.accumulate(bound[lowest:][::-1])[::-1]   # non-decreasing
        self.lowest = lowest
        self.factor = rule.boundary_factor(plan.accuracy, plan.stop_confidence)

    def _depends_on_t_only(self, sigma2, statistics):
        """The table is valid only if σ̂² is the same at any n for the same t̂ (checked on a few points)."""
        sample = np.linspace(0, self.points - 1, 9).astype(int)
        for n in (7.0, 1234.0):
            other = SufficientStatistics(n=np.full(sample.size, n), sum_x=statistics.sum_x[sample] * n,
                                         log_ratio=np.zeros(sample.size), exceedances=np.zeros(sample.size))
            again = rule.rule_sigma2(other, self.plan.threshold, self.plan.method, self.plan.shape)
            if not np.allclose(again, sigma2[sample], rtol=1e-9, atol=0, equal_nan=True):
                return False
        return True

    def candidates(self, n, statistics):
        """Mask of the prefixes where STOP is possible; ``n`` 1-D (one per column), statistics rows × columns.

        t̂ = c a n / Σx, so each t-interval is turned into an interval of Σx per
        column and the rows are compared with it.
        """
        level = n / self.factor * (1.0 + 1e-9)
        first_cell = np.searchsorted(-self.left, -level, side="left")            # cells before it: bound > level
        last_cell = self.lowest + np.searchsorted(self.right, level, side="right") - 1
        possible = first_cell <= last_cell
        scale = self.plan.threshold * self.plan.shape * n
        t_low = self.t[np.minimum(first_cell, self.points - 1)] * (1.0 - 1e-9)
        t_high = self.t[np.minimum(last_cell + 1, self.points - 1)] * (1.0 + 1e-9)
        sum_x = statistics.sum_x
        sum_high = np.where(possible, scale / t_low, -np.inf)   # t̂ >= t_low
        sum_low = np.where(possible, scale / t_high, np.inf)    # t̂ <= t_high
        outside = (sum_x > scale / (self.t[0] * (1.0 - 1e-9))) | (sum_x < scale / (self.t[-1] * (1.0 + 1e-9)))
        return outside | ((sum_x >= sum_low) & (sum_x <= sum_high))


class _FittedShapeScreen:
    """A conservative lower bound on σ̂² as a function of (r, u) (fitted-shape).

    The fitted-shape σ̂² depends on the data only through the log-ratio
    r = log(mean x) - mean(log x) and u = c/mean x (then â solves
    log a - ψ(a) = r and t̂ = â u). log σ̂² is tabulated on a grid of
    (log r, log u) around the planning values with the helpers the estimator
    uses (``fit.shape_from_log_ratio``, ``variance.sigma2_fitted_shape``; checked
    against ``rule.rule_sigma2`` at sample nodes, or the screen is off). A
    prefix is a candidate unless log(n / B) is below the bilinear interpolation
    minus a margin of the local second differences (8 times the interpolation
    error bound (h²/8)|f''|) plus 1e-6. Outside the table, and in any cell
    with an undefined corner, every prefix is a candidate.
    """

    points = 161
    half_width = 3.0  # in log r and log u around the planning values

    def __init__(self, plan: _Plan):
        self.plan = plan
        steps = np.linspace(-self.half_width, self.half_width, self.points)
        self.log_r = float(np.log(log_minus_digamma(plan.shape))) + steps
        self.log_u = math.log(plan.threshold / (plan.shape * plan.scale)) + steps
        self.step = steps[1] - steps[0]
        shape = shape_from_log_ratio(np.exp(self.log_r))[:, None]
        t = shape * np.exp(self.log_u)[None, :]
        with np.errstate(all="ignore"):
            sigma2 = sigma2_fitted_shape(np.broadcast_to(shape, t.shape), t)
        self.valid = self._agrees_with_the_rule(sigma2)
        with np.errstate(all="ignore"):
            log_sigma2 = np.log(sigma2)
        defined = np.isfinite(log_sigma2)
        self.table = np.where(defined, log_sigma2, 0.0)
        curvature = self._second_differences(self.table)
        corners = lambda a: np.maximum.reduce([a[:-1, :-1], a[1:, :-1], a[:-1, 1:], a[1:, 1:]])  # noqa: E731
        self.margin = corners(curvature) + 1e-6
        self.margin[corners(~defined)] = np.inf
        self.log_factor = math.log(rule.boundary_factor(plan.accuracy, plan.stop_confidence))

    def _agrees_with_the_rule(self, sigma2):
        rows = np.linspace(0, self.points - 1, 7).astype(int)
        columns = np.linspace(0, self.points - 1, 7).astype(int)
        i, j = (a.ravel() for a in np.meshgrid(rows, columns, indexing="ij"))
        for units in (10.0, 1234.0):  # the same (r, u) at any n must give the same σ̂²
            n = np.full(i.size, units)
            statistics = SufficientStatistics(n=n, sum_x=self.plan.threshold * n / np.exp(self.log_u[j]),
                                              log_ratio=np.exp(self.log_r[i]), exceedances=np.zeros(i.size))
            from_rule = rule.rule_sigma2(statistics, self.plan.threshold, self.plan.method)
            if not np.allclose(from_rule, sigma2[i, j], rtol=1e-9, atol=0, equal_nan=True):
                return False
        return True

    @staticmethod
    def _second_differences(table):
        """|Δ²| along each axis at every node (edges copy their neighbour), summed."""
        padded = np.pad(table, 1, mode="edge")
        along_r = np.abs(padded[2:, 1:-1] - 2 * padded[1:-1, 1:-1] + padded[:-2, 1:-1])
        along_u = np.abs(padded[1:-1, 2:] - 2 * padded[1:-1, 1:-1] + padded[1:-1, :-2])
        along_r[[0, -1], :] = along_r[[1, -2], :]
        along_u[:, [0, -1]] = along_u[:, [1, -2]]
        return along_r + along_u

    def candidates(self, n, statistics):
        """Mask of the prefixes where STOP is possible; ``n`` 1-D (one per column), statistics rows × columns."""
        with np.errstate(all="ignore"):
            row = (np.log(statistics.log_ratio) - self.log_r[0]) / self.step
            column = (np.log(self.plan.threshold * n / statistics.sum_x) - self.log_u[0]) / self.step
        inside = (row >= 0) & (row < self.points - 1) & (column >= 0) & (column < self.points - 1)
        i = np.where(inside, row, 0).astype(np.intp)
        j = np.where(inside, column, 0).astype(np.intp)
        di, dj = np.where(inside, row - i, 0.0), np.where(inside, column - j, 0.0)
        table = self.table
        interpolated = ((table[i, j] * (1 - dj) + table[i, j + 1] * dj) * (1 - di)
                        + (table[i + 1, j] * (1 - dj) + table[i + 1, j + 1] * dj) * di)
        level = np.log(n) - self.log_factor + 1e-9
        return ~inside | (level >= interpolated - self.margin[i, j])


_SCREENS = {"known-shape": _KnownShapeScreen, "fitted-shape": _FittedShapeScreen}


class _Runs:
    """Running sufficient statistics of the replications still on test (one chunk)."""

    def __init__(self, plan: _Plan, rng, count):
        self.plan = plan
        self.reference = plan.shape * plan.scale  # logs of x / mean keep the log-ratio digits
        pilot = plan.pilot
        if plan.method == "known-shape":
            # the pilot total of m gamma(a, s) units is one gamma(m a, s) draw
            self.sum_x = rng.gamma(pilot * plan.shape, plan.scale, size=count)
            self.sum_log = np.zeros(count)
            self.exceedances = np.zeros(count)
        else:
            self.sum_x, self.sum_log, self.exceedances = np.zeros(count), np.zeros(count), np.zeros(count)
            for start in range(0, pilot, _LONGEST_BLOCK):  # in blocks, so a long pilot stays in bounded memory
                x = rng.gamma(plan.shape, plan.scale, size=(count, min(_LONGEST_BLOCK, pilot - start)))
                self.sum_x += x.sum(axis=1)
                self.sum_log += np.log(x / self.reference).sum(axis=1)
                self.exceedances += (x > plan.threshold).sum(axis=1)

    def prefix_statistics(self, x, n):
        """SufficientStatistics of the prefixes extended by the units ``x`` (rows × block)."""
        sum_x = self.sum_x[:, None] + np.cumsum(x, axis=1)
        shape = sum_x.shape
        if self.plan.method == "known-shape":
            zero = np.broadcast_to(0.0, shape)  # known-shape needs n and Σx only
            self._block = (sum_x, None, None)
            return SufficientStatistics(n=np.broadcast_to(n, shape), sum_x=sum_x, log_ratio=zero, exceedances=zero)
        sum_log = self.sum_log[:, None] + np.cumsum(np.log(x / self.reference), axis=1)
        exceedances = self.exceedances[:, None] + np.cumsum(x > self.plan.threshold, axis=1)
        self._block = (sum_x, sum_log, exceedances)
        with np.errstate(divide="ignore", invalid="ignore"):
            log_ratio = np.maximum(np.log(sum_x / (n * self.reference)) - sum_log / n, 0.0)
        return SufficientStatistics(n=np.broadcast_to(n, shape), sum_x=sum_x, log_ratio=log_ratio,
                                    exceedances=exceedances)

    def pilot_statistics(self):
        """SufficientStatistics after the pilot, as a block of one column (rows × 1)."""
        sum_x = self.sum_x[:, None]
        n = np.full(sum_x.shape, float(self.plan.pilot))
        if self.plan.method == "known-shape":
            zero = np.zeros(sum_x.shape)
            return SufficientStatistics(n=n, sum_x=sum_x, log_ratio=zero, exceedances=zero)
        with np.errstate(divide="ignore", invalid="ignore"):
            log_ratio = np.maximum(np.log(sum_x / (n * self.reference)) - self.sum_log[:, None] / n, 0.0)
        return SufficientStatistics(n=n, sum_x=sum_x, log_ratio=log_ratio, exceedances=self.exceedances[:, None])

    def keep(self, rows, column=None):
        """Keep only ``rows``; with ``column``, first move the totals to that unit of the last block."""
        if column is not None:
            sum_x, sum_log, exceedances = self._block
            self.sum_x = sum_x[:, column]
            if sum_log is not None:
                self.sum_log, self.exceedances = sum_log[:, column], exceedances[:, column]
        self.sum_x = self.sum_x[rows]
        self.exceedances = self.exceedances[rows]
        self.sum_log = self.sum_log[rows]


def _take(statistics, mask):
    """The statistics at the True entries of ``mask``, as 1-D arrays."""
    return SufficientStatistics(*(np.asarray(getattr(statistics, name))[mask]
                                  for name in ("n", "sum_x", "log_ratio", "exceedances")))


def _decide(plan, statistics, screen):
    """STOP mask over a block whose first True per row is the rule's first STOP.

    Without a screen ``rule.stops`` is asked about every prefix; with one only
    about the screen's candidates (and then only up to each row's first STOP).
    """
    if screen is None:
        return plan.stops(statistics)
    n = np.asarray(statistics.n)[0]
    candidates = screen.candidates(n.astype(float), statistics)
    candidates &= rule.is_check_point(n, plan.pilot, plan.check_every)
    # Only the first STOP of each row matters: ask about each row's next candidate, a few
    # rounds, then about all the candidates left in the rows still undecided.
    decision = np.zeros(candidates.shape, bool)
    pending = candidates.copy()
    for _ in range(_SCREEN_ROUNDS):
        rows = np.flatnonzero(pending.any(axis=1))
        if rows.size == 0:
            return decision
        asked = np.zeros(candidates.shape, bool)
        asked[rows, np.argmax(pending[rows], axis=1)] = True
        decision[asked] = plan.stops(_take(statistics, asked))
        pending &= ~asked
        pending[decision.any(axis=1)] = False
    if pending.any():
        decision[pending] = plan.stops(_take(statistics, pending))
    return decision


def _simulate_chunk(plan: _Plan, rng, count, screen, common_numbers=False):
    """N and coverage of ``count`` replications.

    With ``common_numbers`` every block draws units for all ``count`` runs, stopped
    or not, so that run i sees the same lifetimes whatever the boundary
    (common random numbers for calibration); otherwise only the runs still
    on test draw.
    """
    units = np.full(count, plan.n_max + 1, dtype=np.int64)
    covered = np.zeros(count, bool)
    runs = _Runs(plan, rng, count)
    alive = np.arange(count)
    pilot_statistics = runs.pilot_statistics()
    at_pilot = _decide(plan, pilot_statistics, screen)
    stopped = at_pilot[:, 0]
    if stopped.any():
        units[alive[stopped]] = plan.pilot
        covered[alive[stopped]] = plan.covers(_take(pilot_statistics, at_pilot))
    alive = alive[~stopped]
    runs.keep(~stopped)
    done, block = plan.pilot, _FIRST_BLOCK
    while alive.size and done < plan.n_max:
        width = min(block, plan.n_max - done)
        n = np.arange(done + 1, done + width + 1, dtype=float)
        if common_numbers:
            x = rng.gamma(plan.shape, plan.scale, size=(count, width))[alive]
        else:
            x = rng.gamma(plan.shape, plan.scale, size=(alive.size, width))
        statistics = runs.prefix_statistics(x, n)
        decision = _decide(plan, statistics, screen)
        rows = decision.any(axis=1)
        if rows.any():
            first = np.argmax(decision[rows], axis=1)
            at_stop = np.zeros(decision.shape, bool)
            at_stop[np.flatnonzero(rows), first] = True
            units[alive[rows]] = done + 1 + first
            covered[alive[rows]] = plan.covers(_take(statistics, at_stop))
        runs.keep(~rows, width - 1)
        alive = alive[~rows]
        done += width
        block = min(2 * block, _LONGEST_BLOCK)
    return units, covered


def simulate(threshold, shape, scale, accuracy, confidence, pilot, method="known-shape", *,
             replications=10_000, seed=DEFAULT_SEED, n_max=None, check_every=1, stop_z=None,
             screen=True, common_numbers=False, progress=None, model=DEFAULT_MODEL,
             work_bound=COMMAND_SECONDS) -> OperatingCharacteristics:
    """Monte Carlo operating characteristics of the stopping rule under a guessed lifetime model.

    Parameters
    ----------
    threshold, shape, scale : float
        The planning guess: lifetimes ~ model(shape, scale), threshold c.
    accuracy, confidence, pilot : float, float, int
        The plan.
    method : {'known-shape', 'fitted-shape', 'pass-fail'}
        The estimator whose stopping rule is simulated (known-shape is told
        the guessed shape).
    replications : int
        Simulated test runs; memory is bounded by simulating them in chunks
        of 8,192 and drawing at most 64 units per run at a time.
    seed : int
        Seed of the numpy Generator: the same seed gives the same figures.
    n_max : int, optional
        A run not stopped by n_max counts as "N > n_max" (default ``default_n_max``).
    stop_z : float, optional
        Critical value for the stopping boundary instead of z(confidence).
    work_bound : float
        Seconds the simulation may take by its estimate (``work.simulation_work``,
        made before it starts); beyond it ``work.PlanTooLarge`` is raised.
    screen : bool
        known-shape and fitted-shape: call ``rule.stops`` only where a conservative lower
        bound on σ̂² allows STOP (same results, much faster; see ``_KnownShapeScreen``
        and ``_FittedShapeScreen``).
    common_numbers : bool
        Let every run see the same lifetimes whatever the stopping boundary
        (slower; used by calibration, so coverage(z') is compared on the same data).
    progress : callable, optional
        Called with the fraction done (0..1).
    model : str
        The lifetime model of the guess and of the estimator: gamma (the screened,
        vectorized simulation here), weibull or lognormal (``model_simulation``, where
        every run sees its own lifetimes whatever the boundary, so ``common_numbers``
        holds already).

    Returns
    -------
    OperatingCharacteristics
        With Monte Carlo standard errors: sd/√R for E[N]; √(c(1-c)/R) for
        proportions; the delta method for the sd of N; for the quantiles half
        the distance between the order statistics at R·level ± √(R·level(1-level)).
    """
    _check_plan(accuracy, confidence, pilot, check_every)
    estimator = get_method(method)
    replications = int(replications)
    if replications < 1:
        raise ValueError(f"replications must be at least 1 (got {replications})")
    lifetime = get_model(model)
    tail = lifetime.tail_probability(threshold, shape, scale)
    p = float(tail.p)
    sigma2 = float(model_sigma2(estimator.name, threshold, shape, scale, lifetime.name))
    n_star, n_max = planned_units(p, sigma2, accuracy, confidence, pilot, n_max)
    check_work(simulation_work(estimator.name, min(n_star, n_max), pilot, replications, lifetime.name), work_bound,
               sigma2=sigma2, confidence=confidence)
    plan = _Plan(float(threshold), float(shape), float(scale), estimator.name, float(accuracy),
                 _stop_confidence(confidence, stop_z), int(pilot), n_max, int(check_every), p)
    if lifetime.name != DEFAULT_MODEL:
        if plan.method == "pass-fail":
            raise ValueError("pass-fail plans are exact: use operating_characteristics (or pass_fail_exact)")
        units, covered = simulate_model_runs(plan, lifetime.name, np.random.default_rng(seed), replications,
                                             n_star, progress)
        return _simulated_result(plan, n_star, confidence, _stop_z(confidence, stop_z), seed, units, covered)
    sigma_screen = _SCREENS[plan.method](plan) if (screen and plan.method in _SCREENS) else None
    if sigma_screen is not None and not sigma_screen.valid:
        sigma_screen = None  # the rule's σ̂² is no longer what the table assumes: check every prefix
    rng = np.random.default_rng(seed)
    units, covered = [], []
    for start in range(0, replications, _CHUNK_REPLICATIONS):
        count = min(_CHUNK_REPLICATIONS, replications - start)
        with np.errstate(all="ignore"):
            chunk_units, chunk_covered = _simulate_chunk(plan, rng, count, sigma_screen, common_numbers)
        units.append(chunk_units)
        covered.append(chunk_covered)
        if progress is not None:
            progress((start + count) / replications)
    return _simulated_result(plan, n_star, confidence, _stop_z(confidence, stop_z), seed,
                             np.concatenate(units), np.concatenate(covered))


def reference_simulation(threshold, shape, scale, accuracy, confidence, pilot, method="known-shape", *,
                         replications=200, seed=DEFAULT_SEED, n_max=None, check_every=1):
    """The straightforward simulation, one replication at a time (slow; the check for ``simulate``).

    Each replication draws a whole log of n_max lifetimes, takes
    ``SufficientStatistics.running`` of it and the first STOP of ``rule.stops``.
    Returns (units, covered) arrays; N = n_max + 1 means it did not stop.
    """
    _check_plan(accuracy, confidence, pilot)
    p = float(tail_probability(threshold, shape, scale).p)
    sigma2 = float(model_sigma2(method, threshold, shape, scale))
    n_max = default_n_max(float(_accuracy.units_for_accuracy(sigma2, accuracy, confidence)), pilot) if n_max is None else n_max
    known = shape if method == "known-shape" else None
    rng = np.random.default_rng(seed)
    units = np.full(replications, n_max + 1, dtype=np.int64)
    covered = np.zeros(replications, bool)
    for i in range(replications):
        log = rng.gamma(shape, scale, size=n_max)
        statistics = SufficientStatistics.running(log, threshold)
        with np.errstate(all="ignore"):
            decision = rule.stops(statistics, threshold, accuracy, confidence, pilot, method, known, check_every)
        if decision.any():
            index = int(np.argmax(decision))
            units[i] = index + 1
            final = SufficientStatistics.of(log[: index + 1], threshold)
            log_odds = estimate_from_statistics(final, threshold, method, known).log_odds
            interval = _accuracy.probability_interval(log_odds, accuracy)
            covered[i] = bool(interval.low <= p <= interval.high)
    return units, covered


def _simulated_result(plan, n_star, confidence, stop_z, seed, units, covered):
    replications = units.size
    stopped = units <= plan.n_max
    beyond = 1.0 - stopped.mean()
    coverage = float(covered.mean())
    stopped_units = units[stopped].astype(float)
    if stopped_units.size:
        mean = float(stopped_units.mean())
        sd = float(stopped_units.std(ddof=1)) if stopped_units.size > 1 else 0.0
        mean_se = sd / math.sqrt(stopped_units.size)
        fourth = float(np.mean((stopped_units - mean) ** 4))
        sd_se = math.sqrt(max(fourth - sd ** 4, 0.0) / stopped_units.size) / (2 * sd) if sd > 0 else 0.0
    else:
        mean = sd = mean_se = sd_se = math.nan
    quantiles, quantiles_se = _sample_quantiles(units, plan.n_max)
    return OperatingCharacteristics(
        method=plan.method, exact=False, probability=plan.probability, n_star=n_star, pilot=plan.pilot,
        n_max=plan.n_max, confidence=float(confidence), stop_z=stop_z, expected_units=mean, sd_units=sd,
        quantiles=quantiles, beyond=float(beyond), coverage=coverage, replications=int(replications), seed=seed,
        expected_units_se=mean_se, sd_units_se=sd_se, quantiles_se=quantiles_se,
        beyond_se=math.sqrt(beyond * (1 - beyond) / replications),
        coverage_se=math.sqrt(coverage * (1 - coverage) / replications), units=units, covered=covered,
    )


def _sample_quantiles(units, n_max):
    """Quantiles of N (inf beyond n_max) and order-statistic standard errors."""
    ordered = np.sort(units)
    count = ordered.size
    quantiles, errors = {}, {}
    for level in QUANTILE_LEVELS:
        rank = math.ceil(level * count) - 1  # smallest n with empirical P(N <= n) >= level
        value = float(ordered[max(rank, 0)])
        quantiles[level] = value if value <= n_max else math.inf
        spread = math.sqrt(count * level * (1 - level))
        low = ordered[max(0, math.floor(level * count - spread) - 1)]
        high = ordered[min(count - 1, math.ceil(level * count + spread) - 1)]
        errors[level] = float(high - low) / 2.0 if high <= n_max else math.inf
    return quantiles, errors
