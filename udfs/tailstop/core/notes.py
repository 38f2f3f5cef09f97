"""Which warnings apply to an estimate, as data (no spreadsheet knowledge).

The estimate formulas always return their number; this module says where
that number is weak, so that a companion formula and the headless tools can
show it next to the estimate. Each warning is a ``Note``: a stable ``code``
for programs and tests, and one short line of ``text`` for people.

Warnings, in the order they are listed:

``gamma-fit-fails`` (``weibull-fit-fails``, ``lognormal-fit-fails``)
    A model-based method (known-shape, fitted-shape) is used and the fit
    check of its model (``LifetimeModel.fit_pvalue``) gives p < 0.05.
    Points to pass-fail.
``gamma-fit-skipped`` (and the other models')
    A model-based method on a log longer than the fit check handles
    (``fit.GOF_VALUE_BUDGET``): the check is not run, and the note says so.
``gamma-fit-impossible`` (and the other models')
    known-shape on a log whose lifetimes are all equal: the fit check cannot
    run, and equal lifetimes are not what a lifetime model produces.
``shape-disagrees``
    known-shape, and a likelihood-ratio test of "shape = the given shape"
    against a freely fitted shape of the same model rejects at the 5 % level.
``other-model-fits-better``
    A model-based method, and another of the three models has an AIC lower
    by 4 or more (``models.compare.CLEARLY_BETTER``) on the same complete log.
``one-side-only``
    pass-fail with every unit on the same side of the threshold: there is no
    estimate with bounds yet, and the stopping rule cannot stop.
``few-on-a-side``
    Fewer than 5 units on one side of the threshold (for pass-fail this note
    gives way to ``one-side-only`` when that side is empty).
``too-few-failures``, ``none-seen-beyond``
    A log with suspended units (``censored.censoring_notes``) from which the
    method cannot estimate yet: fewer failures than it needs (saying how
    many), or (pass-fail) no unit seen past the threshold. Only these notes
    are listed then, and the stopping rule says CONTINUE.
``gamma-fit-skipped`` (suspended units)
    The fit check needs every unit's failure time; it is not run on a log
    with suspended units.
``suspended-units``, ``many-suspended``
    The log has units the method reads as censored: the independent-censoring
    assumption, and a warning when more than 30 % of the units are suspended.
``accuracy-needs-more``
    Only when an accuracy and a confidence are given: the plug-in unit count
    (z / log d)² σ̂²_n, with σ̂²_n as the stopping rule uses it
    (``sequential.units_needed_now``, the figure of UNITS_NEEDED_NOW), is
    larger than the number of units in the log — the rule would say CONTINUE.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy import special, stats

from . import guaranteed
from .methods import METHOD_NAMES, PASS_FAIL_METHODS, SufficientStatistics, estimate_tail
from .models.gamma.fit import shape_from_log_ratio
from .censored import NOT_YET_CODES, censoring_notes
from .models import DEFAULT_MODEL, get_model
from .models.compare import better_model, fit_model
from .sequential import units_needed_now

__all__ = [
    "Note",
    "FIT_LEVEL",
    "SHAPE_LEVEL",
    "MIN_PER_SIDE",
    "NO_NOTES_TEXT",
    "method_notes",
    "note_lines",
    "shape_likelihood_ratio",
]

FIT_LEVEL = 0.05        # the gamma fit check fails below this p-value
SHAPE_LEVEL = 0.05      # the given shape is rejected below this p-value
MIN_PER_SIDE = 5        # fewer units than this on a side of the threshold is a warning
NO_NOTES_TEXT = "no warnings for this log and method"

GAMMA_METHODS = ("known-shape", "fitted-shape")
# log(mean) - mean(log) at or below this means the lifetimes are all equal
_EQUAL_LIFETIMES = 1e-13


@dataclass(frozen=True)
class Note:
    """One warning.

    Attributes
    ----------
    code : str
        Stable identifier, e.g. ``'gamma-fit-fails'``.
    text : str
        One short line saying what is wrong and what to do.
    figures : dict
        The numbers behind the text (p-values, counts, units), for programs.
    """

    code: str
    text: str
    figures: dict = field(default_factory=dict)


@dataclass(frozen=True)
class ShapeTest:
    """Likelihood-ratio test of a given gamma shape against the fitted one."""

    given: float
    fitted: float
    statistic: float
    pvalue: float


def shape_likelihood_ratio(values, shape) -> ShapeTest:
    """Test H0: gamma shape = ``shape`` (scale free) against a free shape.

    With ``s = log(mean x) - mean(log x)`` and the scale profiled out
    (ŝ = mean / a), the log-likelihood is n·g(a) plus a constant, with
    g(a) = a log a - log Γ(a) - a (1 + s). The statistic
    2 n (g(â) - g(shape)) is compared with a chi-square with 1 degree of
    freedom (Wilks' theorem).

    Raises
    ------
    ValueError
        If the lifetimes are all equal (no fitted shape exists).
    """
    x = np.asarray(values, dtype=float).ravel()
    log_ratio = float(SufficientStatistics.of(x, np.inf).log_ratio)
    if not log_ratio > _EQUAL_LIFETIMES:
        raise ValueError("all lifetimes are equal (or nearly): the gamma shape cannot be estimated")
    fitted = float(shape_from_log_ratio(log_ratio))

    def profile(a):
        return a * np.log(a) - special.gammaln(a) - a * (1.0 + log_ratio)

    statistic = max(0.0, 2.0 * x.size * float(profile(fitted) - profile(float(shape))))
    return ShapeTest(given=float(shape), fitted=fitted, statistic=statistic, pvalue=float(stats.chi2.sf(statistic, 1)))


def method_notes(values, threshold, method="pass-fail", shape=None, accuracy=None, confidence=None,
                 survivors=None, model=DEFAULT_MODEL) -> list:
    """The warnings that apply to estimating P(X > threshold) from ``values`` by ``method``.

    Parameters
    ----------
    values : array_like
        Positive lifetimes, one per unit (at least 2).
    threshold : float
        The threshold c > 0.
    method : {'pass-fail', 'known-shape', 'fitted-shape'}
    shape : float, optional
        The given shape of the model (known-shape only).
    accuracy, confidence : float, optional
        The requested accuracy factor d > 1 and confidence; give both to get
        the ``accuracy-needs-more`` check, or neither to skip it.
    survivors : array_like of bool, optional
        pass-fail only: units taken off test at or beyond the threshold
        without failing; they count as beyond it.
    model : str
        The lifetime model of known-shape and fitted-shape (gamma, weibull,
        lognormal): its own fit check, its own shape test, and a note when
        another model fits clearly better by AIC.

    Returns
    -------
    list of Note
        Empty when nothing applies.

    Raises
    ------
    ValueError
        When the inputs are not valid for the method (the same checks, and
        the same texts, as ``methods.estimate_tail``).
    """
    if method not in METHOD_NAMES:
        raise ValueError(f"method must be one of {', '.join(METHOD_NAMES)} (got {method!r})")
    check_accuracy = _check_requested_accuracy(accuracy, confidence)
    x = np.asarray(values, dtype=float).ravel()
    censoring = [Note(*item) for item in censoring_notes(x, survivors, threshold, method)]
    if any(note.code in NOT_YET_CODES for note in censoring):
        return censoring  # nothing to estimate yet; the rule continues
    lifetime = get_model(model)
    estimate_tail(x, threshold, method, shape, survivors, model=lifetime.name)  # validates, and fails where the estimate does
    notes = []
    if method in GAMMA_METHODS:
        notes += _fit_notes(x, lifetime) if not censoring else [_fit_skipped(censoring[-1].figures, lifetime)]
    if method == "known-shape" and not censoring:
        notes += _shape_notes(x, shape, lifetime)
    if method in GAMMA_METHODS and not censoring:
        notes += _better_model_notes(x, lifetime)
    notes += _side_notes(x.size, *_sides(x, threshold, survivors), method, lifetime)
    notes += censoring
    if check_accuracy:
        notes += _accuracy_notes(x, threshold, method, shape, accuracy, confidence, survivors, lifetime)
        if method == guaranteed.METHOD:
            notes += _guarantee_notes(accuracy, confidence)
    return notes


def _guarantee_notes(accuracy, confidence):
    """What pass-fail-exact guarantees at this accuracy and confidence (pilot 2, every unit checked)."""
    tuned = guaranteed.tuning(accuracy, confidence, 2, 1)
    return [Note("exact-guarantee",
                 f"pass-fail-exact: the exact coverage of its final interval is at least {confidence * 100:g} % "
                 f"for every true probability from {tuned.p_low:.2g} to {1 - tuned.p_low:.6g} "
                 f"(boundary x{tuned.factor:.3f} of pass-fail's; pilot 2, every unit checked)",
                 {"factor": tuned.factor, "p_low": tuned.p_low, "coverage_bound": tuned.coverage_bound})]


def note_lines(notes) -> list:
    """The text of each note; one line saying so when there are none."""
    return [note.text for note in notes] or [NO_NOTES_TEXT]


def _fit_notes(x, lifetime):
    name = lifetime.name
    if not float(SufficientStatistics.of(x, np.inf).log_ratio) > _EQUAL_LIFETIMES:
        return [Note(f"{name}-fit-impossible",
                     f"{name} fit check cannot run: all lifetimes are equal; use pass-fail")]
    try:
        pvalue = lifetime.fit_pvalue(x)
    except ValueError as reason:
        return [Note(f"{name}-fit-skipped", f"{name} fit check not run: {reason}")]
    if pvalue >= FIT_LEVEL:
        return []
    return [Note(f"{name}-fit-fails",
                 f"{name} fit check fails (p = {pvalue:.3g} < {FIT_LEVEL:g}): the {lifetime.title} model is "
                 "doubtful for this log; use pass-fail",
                 {"pvalue": pvalue})]


def _better_model_notes(x, lifetime):
    """A note when another model's AIC is lower by CLEARLY_BETTER or more (complete data only)."""
    if not float(SufficientStatistics.of(x, np.inf).log_ratio) > _EQUAL_LIFETIMES:
        return []
    better = better_model(x, lifetime.name)
    if better is None:
        return []
    mine = fit_model(x, lifetime.name)
    gap = mine.aic - better.aic
    return [Note("other-model-fits-better",
                 f"the {get_model(better.model).title} model fits this log clearly better than the "
                 f"{lifetime.title} model (AIC lower by {gap:.3g}); compare them with FIT_COMPARE",
                 {"better": better.model, "aic_gap": gap})]


def model_shape_likelihood_ratio(values, shape, model) -> ShapeTest:
    """Test H0: shape = ``shape`` (scale free) against a free shape, for any model (Wilks' theorem, 1 df).

    The statistic is 2 (log L(fitted shape, scale) - log L(shape, ML scale at that shape)).
    """
    lifetime = get_model(model)
    if lifetime.name == DEFAULT_MODEL:
        return shape_likelihood_ratio(values, shape)
    x = np.asarray(values, dtype=float).ravel()
    fitted = fit_model(x, lifetime.name)
    statistics = SufficientStatistics.of(x, np.inf, model=lifetime.name, method="known-shape", shape=shape)
    scale = float(lifetime.scale_for_shape(statistics, float(shape)))
    restricted = float(np.sum(lifetime.log_pdf(x, float(shape), scale)))
    statistic = max(0.0, 2.0 * (fitted.log_likelihood - restricted))
    return ShapeTest(given=float(shape), fitted=fitted.shape, statistic=statistic,
                     pvalue=float(stats.chi2.sf(statistic, 1)))


def _shape_notes(x, shape, lifetime):
    if not float(SufficientStatistics.of(x, np.inf).log_ratio) > _EQUAL_LIFETIMES:
        return []  # already said by gamma-fit-impossible
    test = model_shape_likelihood_ratio(x, shape, lifetime.name)
    if test.pvalue >= SHAPE_LEVEL:
        return []
    return [Note("shape-disagrees",
                 f"the log disagrees with the given shape {test.given:.4g} (fitted {test.fitted:.3g}, "
                 f"likelihood-ratio p = {test.pvalue:.2g}); check the shape or use fitted-shape",
                 {"given": test.given, "fitted": test.fitted, "pvalue": test.pvalue})]


def _sides(x, threshold, survivors):
    """(units seen beyond the threshold, failures at or below it); a suspension below it is neither."""
    flags = np.zeros(x.size, dtype=bool) if survivors is None else np.asarray(survivors, dtype=bool).ravel()
    return int(np.sum((x > threshold) | (flags & (x >= threshold)))), int(np.sum(~flags & (x <= threshold)))


def _fit_skipped(figures, lifetime):
    return Note(f"{lifetime.name}-fit-skipped", f"{lifetime.name} fit check not run: it needs every unit's failure time "
                                     f"({figures['suspended']} units are suspended)", figures)


def _side_notes(n, beyond, below, method, lifetime):
    figures = {"units": n, "beyond": beyond, "below": below}
    if method in PASS_FAIL_METHODS and (beyond == 0 or below == 0):
        side = "outlasted" if below == 0 else "failed at or before"
        return [Note("one-side-only",
                     f"all {n} units {side} the threshold: no pass-fail bounds yet, and the rule cannot stop",
                     figures)]
    if min(beyond, below) >= MIN_PER_SIDE:
        return []
    if beyond < MIN_PER_SIDE:
        count = f"{beyond} of {n} units outlasted the threshold"
    else:
        count = f"{below} of {n} units failed at or before the threshold"
    consequence = ("the bounds are unreliable at such counts" if method in PASS_FAIL_METHODS
                   else f"the estimate rests on the {lifetime.title} model, not on observed units")
    return [Note("few-on-a-side", f"{count} (fewer than {MIN_PER_SIDE}): {consequence}", figures)]


def _check_requested_accuracy(accuracy, confidence):
    """True when the accuracy check is asked for (both given and valid); ValueError if half given."""
    if accuracy is None and confidence is None:
        return False
    if accuracy is None or confidence is None:
        raise ValueError("give both accuracy and confidence, or neither")
    if not accuracy > 1:
        raise ValueError(f"accuracy must be > 1 (got {accuracy:g})")
    if not 0 < confidence < 1:
        raise ValueError(f"confidence must be between 0 and 1 (got {confidence:g})")
    return True


def _accuracy_notes(x, threshold, method, shape, accuracy, confidence, survivors, lifetime):
    n = int(x.size)
    try:
        plan = units_needed_now(x, threshold, accuracy, confidence, method, shape, survivors=survivors,
                                model=lifetime.name)
    except ValueError:
        return []  # pass-fail with every unit on one side: the one-side-only note already says the rule cannot stop
    wanted = f"odds within a factor {accuracy:g} at {confidence * 100:g} % confidence"
    if not np.isfinite(plan.needed):
        return [Note("accuracy-needs-more",
                     f"{wanted} cannot be planned from this log: the estimate is too close to 0 or 1",
                     {"units_needed": plan.needed, "units": n})]
    if not plan.needed > n:
        return []
    return [Note("accuracy-needs-more",
                 f"{wanted} need about {plan.whole:,} units; the log holds {n}",
                 {"units_needed": plan.whole, "units": n})]
