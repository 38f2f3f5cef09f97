"""The pass-fail-exact lattice against first-passage path counts enumerated here in whole numbers.

The rule as docs/method.md and core/guaranteed/lattice.py state it: with k units beyond the
threshold and f at or below it (n = k + f), stop at the first check point n >= pilot,
(n - pilot) a multiple of check_every, with k >= 1, f >= 1 and k·f >= F·n. A path of units
is a walk from (0, 0) one step right (k + 1) or up (f + 1) at a time; w(k, f) counts the walks that
reach (k, f) without passing a stop state before. Here w is counted with Python integers (exact)
by the plain recursion w(k, f) = alive(k - 1, f) + alive(k, f - 1), alive = w where the rule goes on.
"""
from __future__ import annotations

import math

import pytest

from tailstop.core.guaranteed import lattice


def stops(k, f, boundary, pilot, check_every):
    n = k + f
    return n >= pilot and (n - pilot) % check_every == 0 and k >= 1 and f >= 1 and k * f >= boundary * n


def counts_by_recursion(boundary, pilot, check_every, f_max, k_max):
    """{(k, f): w(k, f)} over the stop states of the box, in exact integers."""
    alive, found = {}, {}
    for n in range(k_max + f_max + 1):
        for k in range(max(0, n - f_max), min(n, k_max) + 1):
            f = n - k
            w = 1 if n == 0 else alive.get((k - 1, f), 0) + alive.get((k, f - 1), 0)
            if w == 0:
                continue
            if stops(k, f, boundary, pilot, check_every):
                found[(k, f)] = w
            else:
                alive[(k, f)] = w
    return found


@pytest.mark.parametrize("boundary, pilot, check_every", [
    (2.0, 2, 1),     # k f = 2 n exactly at (4, 4), (3, 6), (6, 3): the rule's ">=" decides them
    (3.0, 4, 2),     # (6, 6), (4, 12) on the boundary, checks every second unit
    (2.7, 3, 1),     # one state on the boundary, (3, 27): 2.7 · 30 = 81 in doubles too
])
def test_first_passage_counts_equal_the_recursion_in_whole_numbers(boundary, pilot, check_every):
    # check value: the integer recursion written above; log w compared to 1e-12 relative (the package
    # sums logs of counts that reach about 1e9 here, a few roundings each)
    f_max, k_max = 30, 12
    expected = counts_by_recursion(boundary, pilot, check_every, f_max, k_max)
    states = lattice.first_passage_counts(boundary, pilot, check_every, f_max, k_max)
    got = {(int(k), int(f)): float(w) for k, f, w in zip(states.k, states.f, states.log_count)}
    assert set(got) == set(expected)
    for state, count in expected.items():
        assert got[state] == pytest.approx(math.log(count), rel=1e-12, abs=1e-12)


def test_a_state_exactly_on_the_boundary_stops():
    # property: k·f >= F·n, so k = f = 4, n = 8 stops at F = 2 (16 >= 16) and not at the next double above 2
    assert bool(lattice.stop_condition(8, 4, 2.0, 2, 1))
    assert not bool(lattice.stop_condition(8, 4, math.nextafter(2.0, 3.0), 2, 1))
