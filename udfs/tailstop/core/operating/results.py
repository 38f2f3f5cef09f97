"""What the operating characteristics report: the result objects and the checked plan inputs."""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from scipy import stats

from .. import accuracy as _accuracy
from .. import rule

DEFAULT_SEED = 20261201
QUANTILE_LEVELS = (0.05, 0.5, 0.95)


# --------------------------------------------------------------------------- results


@dataclass(frozen=True)
class OperatingCharacteristics:
    """What the stopping rule does under a planning guess.

    Attributes
    ----------
    method : str
    exact : bool
        True for the exact pass-fail propagation, False for Monte Carlo.
    probability : float
        The true p = P(X > threshold) under the guess.
    n_star : float
        Fixed-size plan n* = (z / log d)² σ² (real-valued; METHOD.md §4).
    pilot, n_max : int
        Pilot size and the last n examined.
    confidence : float
        Nominal confidence 1 - γ of the final interval.
    stop_z : float
        Critical value used in the stopping boundary (z itself unless calibrating).
    expected_units, sd_units : float
        Mean and standard deviation of N among the runs that stop by ``n_max``.
    quantiles : dict
        {0.05: ..., 0.5: ..., 0.95: ...}: the smallest n with P(N <= n) >= level;
        ``inf`` when that is beyond ``n_max``.
    beyond : float
        P(N > n_max): runs that had not stopped by n_max.
    coverage : float
        P(N <= n_max and p lies in the final interval [q̂/(d+q̂), d q̂/(1+d q̂)]);
        a run that has not stopped counts as not covered, so the true
        coverage lies in [coverage, coverage + beyond].
    replications, seed : int or None
        Monte Carlo only.
    *_se : float or dict
        Monte Carlo standard errors (0 for exact figures).
    distribution : ndarray or None
        Exact only: P(N = n) for n = 0 .. n_max.
    units, covered : ndarray or None
        Monte Carlo only: N of each replication (n_max + 1 = did not stop) and
        whether its final interval covered p.
    """

    method: str
    exact: bool
    probability: float
    n_star: float
    pilot: int
    n_max: int
    confidence: float
    stop_z: float
    expected_units: float
    sd_units: float
    quantiles: dict
    beyond: float
    coverage: float
    replications: int | None = None
    seed: int | None = None
    expected_units_se: float = 0.0
    sd_units_se: float = 0.0
    quantiles_se: dict = field(default_factory=dict)
    beyond_se: float = 0.0
    coverage_se: float = 0.0
    distribution: np.ndarray | None = field(default=None, repr=False)
    units: np.ndarray | None = field(default=None, repr=False)
    covered: np.ndarray | None = field(default=None, repr=False)

    @property
    def fixed_units(self) -> int:
        """ceil(n*): the unit count of the fixed-size plan."""
        return int(_accuracy.whole_units(self.n_star))

    @property
    def kind(self) -> str:
        """'exact' or 'simulated (R replications, seed S)'."""
        if self.exact:
            return "exact"
        return f"simulated ({self.replications:,} replications, seed {self.seed})"

    def figures(self):
        """(label, value, standard error or None) for every figure, in display order."""
        se = (lambda value: None) if self.exact else (lambda value: value)
        rows = [
            ("fixed-size units n*", self.fixed_units, None),
            ("expected units E[N]", self.expected_units, se(self.expected_units_se)),
            ("sd of N", self.sd_units, se(self.sd_units_se)),
        ]
        for level in QUANTILE_LEVELS:
            rows.append((f"N {level:.0%} quantile", self.quantiles[level], se(self.quantiles_se.get(level, 0.0))))
        rows.append(("P(N > n_max)", self.beyond, se(self.beyond_se)))
        rows.append(("n_max (units examined)", self.n_max, None))
        rows.append(("coverage", self.coverage, se(self.coverage_se)))
        return rows


@dataclass(frozen=True)
class Calibration:
    """Smallest critical value z' >= z whose coverage reaches the nominal level.

    Attributes
    ----------
    z, z_calibrated : float
        The nominal critical value and the calibrated one (used only in the
        stopping boundary; the final interval is q̂/d .. q̂·d either way).
    inflation : float
        z_calibrated / z.
    confidence_calibrated : float
        The confidence level whose z is z_calibrated, 2 Φ(z') - 1.
    nominal, at_z, calibrated : OperatingCharacteristics
        ``at_z`` the plan as given, ``calibrated`` with the calibrated boundary.
    step : float
        Resolution of the search in z (z' - step falls short of nominal).
    z_range : tuple or None
        Monte Carlo only: the z' where coverage ± 2 standard errors reaches the
        nominal level, the uncertainty of z_calibrated.
    reached : bool
        False when no z' up to the search limit reaches the nominal coverage.
    """

    z: float
    z_calibrated: float
    confidence_calibrated: float
    at_z: OperatingCharacteristics
    calibrated: OperatingCharacteristics
    step: float
    z_range: tuple | None
    reached: bool

    @property
    def inflation(self) -> float:
        return self.z_calibrated / self.z

    @property
    def extra_units(self) -> float:
        """Price of the calibration: E[N] calibrated - E[N] as planned."""
        return self.calibrated.expected_units - self.at_z.expected_units


@dataclass(frozen=True)
class MethodComparison:
    """The three methods side by side at one planning guess (``results[method]``)."""

    results: dict

    def table(self):
        """Rows [label, value per method...], '± se' where a simulated figure's standard error means something.

        A quantile of N is a whole number whose order-statistic spread is
        often 0: it is shown without an error. A simulated coverage from
        fewer runs than a standard error of ±0.01 needs is flagged as rough.
        """
        methods = list(self.results)
        rows = [["", *methods], ["figures", *(self.results[m].kind for m in methods)]]
        labels = [label for label, _, _ in self.results[methods[0]].figures()]
        by_method = {m: self.results[m].figures() for m in methods}
        for i, label in enumerate(labels):
            row = [label]
            for m in methods:
                _, value, se = by_method[m][i]
                if label.endswith("quantile"):
                    se = None
                text = _format_figure(value, se)
                if label == "coverage" and rough_coverage(self.results[m]):
                    text += f" (rough: {self.results[m].replications:,} runs)"
                row.append(text)
            rows.append(row)
        return rows


def rough_coverage(result) -> bool:
    """True for a simulated coverage whose standard error exceeds ±0.01 (too few runs).

    The standard error is √(c (1 - c) / R) with c held inside [0.05, 0.95], so
    that a coverage of exactly 1 (or 0) from a handful of runs, whose plain
    standard error is 0, is flagged too (10 runs all covering: ±0.069).
    """
    if result.exact:
        return False
    c = min(max(result.coverage, 0.05), 0.95)
    return math.sqrt(c * (1.0 - c) / result.replications) > 0.01


def falls_short(result) -> bool:
    """True when the coverage is below nominal by more than 0.005 (exact) or two standard errors (simulated)."""
    margin = 0.005 if result.exact else 2.0 * result.coverage_se
    return result.coverage < result.confidence - margin


def _format_figure(value, se):
    if isinstance(value, (int, np.integer)) or (math.isfinite(value) and float(value).is_integer()):
        text = f"{int(value):,}"
    elif not math.isfinite(value):
        text = "beyond n_max"
    elif abs(value) >= 100:
        text = f"{value:,.1f}"
    else:
        text = f"{value:.4g}"
    if se is not None and math.isfinite(value):
        text += f" ± {se:.2g}"
    return text


# --------------------------------------------------------------------------- inputs


def confidence_for_z(z):
    """The two-sided confidence level whose critical value is z: 2 Φ(z) - 1."""
    return float(1.0 - 2.0 * stats.norm.sf(z))


def planned_units(p, sigma2, accuracy, confidence, pilot, n_max=None):
    """(n*, n_max) of a simulated plan at the guess's p and σ²; ValueError where no finite plan exists."""
    if not (0 < p < 1 and 0 < sigma2 < math.inf):
        raise ValueError("the guess puts (almost) every unit on one side of the threshold; no finite plan exists")
    n_star = float(_accuracy.units_for_accuracy(sigma2, accuracy, confidence))
    n_max = default_n_max(n_star, pilot) if n_max is None else int(n_max)
    if n_max < pilot:
        raise ValueError(f"n_max must be at least the pilot ({pilot}, got {n_max})")
    return n_star, n_max


def default_n_max(n_star, pilot):
    """A generous cap on N: 5 n* + 100 units, and never below the pilot."""
    return int(max(pilot, 5 * math.ceil(n_star)) + 100)


def _check_plan(accuracy, confidence, pilot, check_every=1):
    if not (float(check_every) == int(check_every) and check_every >= 1):
        raise ValueError(f"check_every must be a whole number >= 1 (got {check_every!r})")
    if not (np.isfinite(accuracy) and accuracy > 1):
        raise ValueError(f"accuracy must be > 1 (got {accuracy!r})")
    if not (np.isfinite(confidence) and 0 < confidence < 1):
        raise ValueError(f"confidence must be between 0 and 1 (got {confidence!r})")
    if not (float(pilot) == int(pilot) and pilot >= rule.MIN_PILOT):
        raise ValueError(f"pilot must be a whole number >= {rule.MIN_PILOT}: fewer units cannot estimate σ² (got {pilot!r})")


def _stop_confidence(confidence, stop_z):
    return confidence if stop_z is None else confidence_for_z(stop_z)


def _stop_z(confidence, stop_z):
    return float(_accuracy.critical_value(confidence)) if stop_z is None else float(stop_z)
