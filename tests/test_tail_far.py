"""Large shapes deep in either tail, where double precision underflows and the series take over.

Below 1e-290 a tail is computed in logs, by the power series (lower tail) or
the continued fraction (upper tail) times the density term f(a, t) =
t^a e^{-t} / Γ(a). For a large shape the logs of f are large numbers
(a·log t and log Γ(a) are in the tens of thousands), so their rounding alone
costs about 1e-11 in log p; what the series adds is checked apart from that,
as the ratio of the tail to f, an O(1) number that the series must get to
about 1e-13. A series stopped early (a convergence test loosened) shows up
there as an error of 1e-12 or more.
"""
from __future__ import annotations

import mpmath
import pytest

from tailstop.core.models.gamma.tail import log_density_term, tail_probability_standard

mpmath.mp.dps = 60

# tolerance on log(tail / f): rounding of the O(1) ratio is about 1e-15 per operation over a few
# hundred terms; 1e-12 is 10x the largest error seen on this grid (common practice, no published source)
RATIO_TOLERANCE = 1e-12
# tolerance on log p itself: a few hundred ulps of a·log t for a up to 6000 (about 5e4 · 2.2e-16 · 100)
LOG_TOLERANCE = 1e-9


def mp_log_density(a, t):
    a, t = mpmath.mpf(a), mpmath.mpf(t)
    return a * mpmath.log(t) - t - mpmath.loggamma(a)


# (shape, t / shape): every lower tail here is below 1e-290 (checked in the test); t/a closer to 1
# means a slower series (ratio of successive terms t/(a+i))
LOWER = [(1800.0, 0.3), (2000.0, 0.35), (2500.0, 0.4), (4000.0, 0.45), (6000.0, 0.5), (6000.0, 0.6)]
UPPER = [(100.0, 12.0), (300.0, 8.3), (1000.0, 3.0), (3000.0, 2.0)]


@pytest.mark.parametrize("shape, ratio", LOWER)
def test_lower_tail_of_large_shapes_by_the_series(shape, ratio):
    t = shape * ratio
    # check value: mpmath.gammainc (regularized lower incomplete gamma) at 60 digits
    exact = mpmath.gammainc(shape, 0, t, regularized=True)
    assert exact < mpmath.mpf("1e-290")
    tail = tail_probability_standard(shape, t)
    assert float(tail.log_cdf) == pytest.approx(float(mpmath.log(exact)), abs=LOG_TOLERANCE)
    series_part = float(tail.log_cdf) - float(log_density_term(shape, t))
    assert series_part == pytest.approx(float(mpmath.log(exact) - mp_log_density(shape, t)), abs=RATIO_TOLERANCE)
    assert float(tail.p) == 1.0 and float(tail.log_p) == pytest.approx(-float(exact), abs=1e-300)


@pytest.mark.parametrize("shape, ratio", UPPER)
def test_upper_tail_of_large_shapes_by_the_continued_fraction(shape, ratio):
    t = shape * ratio
    # check value: mpmath.gammainc (regularized upper incomplete gamma) at 60 digits
    exact = mpmath.gammainc(shape, t, mpmath.inf, regularized=True)
    assert exact < mpmath.mpf("1e-290")
    tail = tail_probability_standard(shape, t)
    assert float(tail.log_p) == pytest.approx(float(mpmath.log(exact)), abs=LOG_TOLERANCE)
    fraction_part = float(tail.log_p) - float(log_density_term(shape, t))
    assert fraction_part == pytest.approx(float(mpmath.log(exact) - mp_log_density(shape, t)), abs=RATIO_TOLERANCE)
    assert float(tail.log_odds) == pytest.approx(float(mpmath.log(exact / (1 - exact))), abs=LOG_TOLERANCE)


@pytest.mark.parametrize("shape, t", [(0.5, 687.0), (3.0, 703.0), (40.0, 847.0), (200.0, 1252.0)])
def test_p_just_below_the_switch_to_logs_keeps_its_digits(shape, t):
    # p near 1e-300 (t found with mpmath.findroot) is computed in logs, below the switch at 1e-290; it
    # keeps 12 significant digits (METHOD.md §1 asks for 10 at p = 1e-12)
    exact = mpmath.gammainc(shape, t, mpmath.inf, regularized=True)
    assert mpmath.mpf("1e-330") < exact < mpmath.mpf("1e-290")
    assert float(tail_probability_standard(shape, t).p) == pytest.approx(float(exact), rel=1e-12)


@pytest.mark.parametrize("shape, t", [(10.0, 3.0), (50.0, 61.0), (1e3, 1e3 + 1e-6), (1e4, 9000.0), (1e5, 112176.85724295325),
                                      (1e5, 98504.02706509772), (1e6, 1e6 + 2500.0), (1e7, 9.98e6)])
def test_log_density_term_of_huge_shapes(shape, t):
    # check value: mpmath at 60 digits. a log t, t and log Γ(a) are each about a log a; their
    # plain difference loses their rounding (1e-10 at a = 1e5), the Stirling form does not.
    assert float(log_density_term(shape, t)) == pytest.approx(float(mp_log_density(shape, t)), abs=1e-12)


def test_far_upper_tail_of_a_huge_shape():
    from tailstop.sheet import TAIL_PROB

    # check value: mpmath.gammainc at 60 digits, 1.000000000000579e-300
    exact = mpmath.gammainc(100000, mpmath.mpf(112176.85724295325), mpmath.inf, regularized=True)
    assert TAIL_PROB(112176.85724295325, 100000, 1) == pytest.approx(float(exact), rel=1e-12)


def test_shapes_beyond_the_guaranteed_range_are_refused():
    from tailstop.core.models.gamma.tail import LARGEST_SHAPE, tail_probability
    from tailstop.sheet import TAIL_PROB, UNITS_REQUIRED

    # property: the limit of the far-tail guarantee (LARGEST_SHAPE, 100,000) is the one enforced and the
    # cell text names it; inputs at the limit and twice beyond it
    assert LARGEST_SHAPE == 1e5
    assert TAIL_PROB(1e5, LARGEST_SHAPE, 1.0) > 0
    with pytest.raises(ValueError, match="shape above 100,000"):
        tail_probability(1e6, 2e5, 5.0)
    assert TAIL_PROB(1e6, 2e5, 5.0).startswith("#TAILSTOP! a gamma shape above 100,000 is beyond the range")
    assert UNITS_REQUIRED(1e6, 2e5, 5.0, 1.5, 0.95, "fitted-shape").startswith("#TAILSTOP! a gamma shape above")
