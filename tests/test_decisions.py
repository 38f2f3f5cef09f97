"""Stop/continue decisions: the formulas on openpyxl fixture logs, and the O(n) core against direct computation."""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from conftest import range_values, write_log
from tailstop.core import sequential
from tailstop.core.models.gamma.fit import shape_from_log_ratio
from tailstop.core.methods import SufficientStatistics
from tailstop.core.rule import stops
from tailstop.sheet.decisions import STOP_DECISION, STOP_DECISION_COLUMN, TWO_STAGE_UNITS, UNITS_NEEDED_NOW
from tailstop.core.models.gamma.variance import sigma2_fitted_shape, sigma2_known_shape

# check value: NIST/SEMATECH e-Handbook §1.3.6.7.1, z for 95 % two-sided
Z95 = 1.959964
STATES = {"PILOT", "CONTINUE", "STOP", "PAST STOP"}


def is_message(value):
    return isinstance(value, str) and value.startswith("#TAILSTOP! ")


def per_row(rows, *args):
    """STOP_DECISION filled down: the range $B$2:B{r} for every row r, as a spreadsheet passes it."""
    return [STOP_DECISION(rows[: r + 1], *args) for r in range(len(rows))]


def column(rows, *args):
    return [cell for (cell,) in STOP_DECISION_COLUMN(rows, *args)]


def direct_first_stop(x, threshold, accuracy, confidence, pilot, method, shape=None, check_every=1):
    """The first STOP by the straightforward computation: rule.stops on the statistics of every prefix."""
    statistics = SufficientStatistics.running(np.asarray(x, dtype=float), threshold)
    hits = stops(statistics, threshold, accuracy, confidence, pilot, method, shape, check_every)
    return int(np.argmax(hits)) + 1 if hits.any() else None


@pytest.fixture
def bench_log(tmp_path):
    """An invented log of 240 units with a header, blank rows inside, and rows left blank below it."""
    rng = np.random.default_rng(11)
    values = [float(v) for v in np.round(rng.gamma(2.4, 520.0, size=240), 1)]
    for blank in (3, 57, 58, 140):
        values[blank] = None
    path = write_log(tmp_path / "bench.xlsx", values)
    return range_values(path, "Log", "B2:B300")  # 59 blank rows below the log, as a longer reference


# ----------------------------------------------------------------- per-row formula == column formula


@pytest.mark.parametrize("method, shape", [("pass-fail", None), ("known-shape", 2.4), ("fitted-shape", None)])
@pytest.mark.parametrize("check_every", [None, 3])
def test_column_equals_the_formula_filled_down(bench_log, method, shape, check_every):
    args = (1500.0, 1.5, 0.95, 10, method, shape, check_every)
    filled_down = per_row(bench_log, *args)
    spilled = column(bench_log, *args)
    last_filled = max(r for r, (v,) in enumerate(bench_log) if v is not None)
    assert len(spilled) == last_filled + 1  # the column ends at the last filled row
    assert spilled == filled_down[: last_filled + 1]
    assert set(filled_down[last_filled + 1:]) == {""}  # below the log: nothing shown either way
    assert [spilled[r] for r in (3, 57, 58, 140)] == [""] * 4  # a blank row is not a unit
    assert spilled.count("STOP") == 1 and "PAST STOP" in spilled  # the rule stops inside this log


def test_column_equals_filled_down_with_survivor_marks(tmp_path):
    rng = np.random.default_rng(5)
    lifetimes = rng.gamma(2.4, 520.0, size=150)
    # an invented pass-fail log: units still running at the threshold were taken off and written 1500+
    values = [f"{1500 + int(v) % 7}+" if v > 1500 else round(float(v), 1) for v in lifetimes]
    values[20] = None
    path = write_log(tmp_path / "survivors.xlsx", values)
    rows = range_values(path, "Log", "B2:B151")
    args = (1500.0, 1.5, 0.95, 10)
    spilled = column(rows, *args)
    assert spilled == per_row(rows, *args)
    # check value: the regularized rule by hand (METHOD.md §5), with survivors counted beyond the threshold
    beyond = lifetimes > 1500
    expected = _pass_fail_stop_by_hand(np.delete(beyond, 20), 1.5, 10)
    units_at_stop = sum(1 for cell in rows[: spilled.index("STOP") + 1] if cell[0] is not None)
    assert units_at_stop == expected


def test_a_bad_cell_shows_downwards_in_both_formulas(bench_log):
    rows = [list(r) for r in bench_log[:120]]
    rows[80] = ["n/a"]
    args = (1500.0, 1.5, 0.95, 10, "fitted-shape")
    spilled = column(rows, *args)
    assert spilled == per_row(rows, *args)
    assert spilled[:80] == column(bench_log[:80], *args)  # the rows above keep their decisions
    assert set(spilled[80:]) == {"#TAILSTOP! observations: row 81 holds text 'n/a'"}


def test_whole_column_reference_is_trimmed_to_the_log():
    rows = [[float(v)] for v in np.random.default_rng(3).gamma(2.0, 300.0, size=400)] + [[None]] * 1_048_175
    spilled = STOP_DECISION_COLUMN(rows, 500.0, 1.5, 0.95, 10)
    assert len(spilled) == 400
    assert STOP_DECISION(rows, 500.0, 1.5, 0.95, 10) == ""  # the last row of the range is blank
    assert STOP_DECISION_COLUMN([[None]] * 10, 500.0, 1.5, 0.95, 10) == [[""]]


# ----------------------------------------------------------------- the pilot


def test_no_stop_before_the_pilot():
    rng = np.random.default_rng(8)
    for pilot in (2, 5, 17, 40):
        for method, shape in (("pass-fail", None), ("known-shape", 1.7), ("fitted-shape", None)):
            x = rng.gamma(1.7, 100.0, size=80)
            # d = 20 makes (z/log d)^2 about 0.43: every check point from the pilot on meets the size condition
            result = sequential.decision_column(x, np.median(x), 20.0, 0.95, pilot, method, shape)
            labels = list(result.labels)
            assert labels[: pilot - 1] == ["PILOT"] * (pilot - 1)
            assert "STOP" not in labels[: pilot - 1]
            if method != "pass-fail" or 0 < np.sum(x[:pilot] > np.median(x)) < pilot:
                assert result.stop_units == pilot


def test_pilot_larger_than_the_log_is_all_pilot():
    rows = [[100.0], [200.0], [300.0]]
    assert column(rows, 150.0, 1.5, 0.95, 10) == ["PILOT"] * 3


# ----------------------------------------------------------------- by-hand cases

# An invented exponential log (known-shape, shape 1), threshold c = 100 h, d = 2, 95 %, pilot 5.
# With shape 1, ŝ = x̄, t̂ = c/x̄, p̂ = exp(-t̂) and σ̂² = t̂²/(1 - p̂)² (METHOD.md §3);
# (z / ln d)² = (1.959964 / 0.693147)² = 7.9955. By hand, n: x̄, t̂, σ̂², 7.9955·σ̂² (stop if n >= it):
#    5: 217.00 0.4608 1.5576 12.45     9: 216.11 0.4627 1.5604 12.48    13: 211.54 0.4727 1.5748 12.59  STOP
#    6: 196.67 0.5085 1.6274 13.01    10: 206.50 0.4843 1.5916 12.73    14: 207.86 0.4811 1.5870 12.69
#    7: 205.71 0.4861 1.5943 12.75    11: 207.27 0.4825 1.5890 12.70    15: 209.33 0.4777 1.5821 12.65
#    8: 201.88 0.4954 1.6079 12.86    12: 205.83 0.4858 1.5939 12.74
# so the rule stops at unit 13; consulted every 3rd unit (n = 5, 8, 11, 14) it stops at 14;
# every 4th (5, 9, 13) at 13.
EXPONENTIAL_LOG = [180, 240, 150, 310, 205, 95, 260, 175, 330, 120, 215, 190, 280, 160, 230, 205, 185]


def _exponential_stop_from_closed_form(values, threshold, accuracy, pilot, check_every=1):
    boundary = (Z95 / math.log(accuracy)) ** 2
    total = 0.0
    for n, value in enumerate(values, start=1):
        total += value
        t = threshold / (total / n)
        sigma2 = t * t / (1.0 - math.exp(-t)) ** 2
        if n >= pilot and (n - pilot) % check_every == 0 and n >= boundary * sigma2:
            return n
    return None


@pytest.mark.parametrize("check_every, by_hand", [(None, 13), (3, 14), (4, 13)])
def test_exponential_known_shape_stops_where_the_hand_calculation_says(tmp_path, check_every, by_hand):
    assert _exponential_stop_from_closed_form(EXPONENTIAL_LOG, 100.0, 2.0, 5, check_every or 1) == by_hand
    path = write_log(tmp_path / "exponential.xlsx", EXPONENTIAL_LOG)
    rows = range_values(path, "Log", "B2:B18")
    decisions = column(rows, 100.0, 2.0, 0.95, 5, "known-shape", 1.0, check_every)
    assert decisions.index("STOP") + 1 == by_hand
    assert decisions[:4] == ["PILOT"] * 4
    assert decisions[4:by_hand - 1] == ["CONTINUE"] * (by_hand - 5)
    assert decisions[by_hand:] == ["PAST STOP"] * (len(rows) - by_hand)


# An invented pass-fail log with survivors, threshold 1000 cycles, d = 3, 95 %, pilot 4.
# σ̃² = (n+1)² / ((S+½)(n−S+½)) (p̃ = (S+½)/(n+1), METHOD.md §5); (z/ln 3)² = 3.1828. By hand:
#   n  cell   S  σ̃²     3.1828·σ̃²       n  cell   S  σ̃²     3.1828·σ̃²
#   4  1000+  2  4.0000  12.73          9  700    4  4.0404  12.86
#   5  1240   3  4.1143  13.09         10  1000+  5  4.0000  12.73
#   6  990    3  4.0000  12.73         11  1100+  6  4.0280  12.82
#   7  1000   3  4.0635  12.93         12  450    6  4.0000  12.73
#   8  1000+  4  4.0000  12.73         13  1000+  7  4.0205  12.80   STOP
# A failure at exactly 1000 is not beyond the threshold; a survivor taken off at 1000 is.
PASS_FAIL_LOG = ["850", "1000+", 620, "1000+", 1240, 990, 1000, "1000+", 700, "1000+", "1100+", 450, "1000+", 880,
                 "1000+", 930]


def test_pass_fail_with_survivors_stops_where_the_hand_calculation_says(tmp_path):
    path = write_log(tmp_path / "passfail.xlsx", PASS_FAIL_LOG)
    rows = range_values(path, "Log", "B2:B17")
    decisions = column(rows, 1000.0, 3.0, 0.95, 4)
    assert decisions.index("STOP") + 1 == 13
    assert decisions == per_row(rows, 1000.0, 3.0, 0.95, 4)
    # counted the wrong way, the failure at exactly 1000 would make S = 8 at n = 13: 3.1828·196/(8.5·5.5) = 13.34
    assert UNITS_NEEDED_NOW(rows[:13], 1000.0, 3.0, 0.95) == 13  # ceil(12.80)
    assert UNITS_NEEDED_NOW(rows[:12], 1000.0, 3.0, 0.95) == 13  # ceil(12.73): 12 units are not enough


def _pass_fail_stop_by_hand(beyond, accuracy, pilot, check_every=1):
    boundary = (Z95 / math.log(accuracy)) ** 2
    s = 0
    for n, passed in enumerate(beyond, start=1):
        s += bool(passed)
        sigma2 = (n + 1) ** 2 / ((s + 0.5) * (n - s + 0.5))
        if n >= pilot and (n - pilot) % check_every == 0 and 0 < s < n and n >= boundary * sigma2:
            return n
    return None


def test_survivor_mark_equals_a_pass_and_a_failure_time_beyond_the_threshold():
    marked = [[v] for v in PASS_FAIL_LOG]
    as_times = [["1000.5"] if str(v).endswith("+") else [v] for v in PASS_FAIL_LOG]
    assert column(marked, 1000.0, 3.0, 0.95, 4) == column(as_times, 1000.0, 3.0, 0.95, 4)


# ----------------------------------------------------------------- suspended units


def test_a_suspension_in_a_gamma_method_is_read_as_censored():
    rows = [[v] for v in (700.0, 1300.0, 900.0, "1500+", 1100.0)]
    for method, shape in (("known-shape", 2.0), ("fitted-shape", None)):
        decisions = column(rows, 1000.0, 1.5, 0.95, 2, method, shape)
        assert decisions == ["PILOT", "CONTINUE", "CONTINUE", "CONTINUE", "CONTINUE"]
        assert decisions == per_row(rows, 1000.0, 1.5, 0.95, 2, method, shape)
        needed = sequential.units_needed_now([700.0, 1300.0, 900.0, 1500.0, 1100.0], 1000.0, 1.5, 0.95, method,
                                             shape, survivors=[0, 0, 0, 1, 0])
        assert UNITS_NEEDED_NOW(rows, 1000.0, 1.5, 0.95, method, shape) == needed.whole
        assert TWO_STAGE_UNITS(rows, 1000.0, 1.5, 0.95, method, shape) == max(5, needed.whole)


def test_a_suspension_below_the_threshold_takes_the_product_limit_estimate():
    rows = [[v] for v in (700.0, 1300.0, "900+", 1100.0)]
    decisions = column(rows, 1000.0, 1.5, 0.95, 2)
    assert decisions == ["PILOT", "CONTINUE", "CONTINUE", "CONTINUE"]
    assert decisions == per_row(rows, 1000.0, 1.5, 0.95, 2)
    # check value: by hand, product limit at 1000: one failure (700) among 4 at risk, Ŝ = 3/4;
    # Greenwood G = 1/(4·3); σ̂² = n G / (1 - Ŝ)² = 4 · (1/12) / (1/16) = 16/3 (docs/method.md)
    factor = (1.959963984540054 / np.log(1.5)) ** 2
    assert UNITS_NEEDED_NOW(rows, 1000.0, 1.5, 0.95) == int(np.ceil(factor * 16 / 3))
    # a survivor at the threshold is a pass
    assert not is_message(STOP_DECISION([[700.0], ["1000+"]], 1000.0, 1.5, 0.95, 2))


def test_a_log_without_failures_continues_and_says_how_many_it_needs():
    rows = [[v] for v in ("700+", "1300+", "900+", "1100+")]
    assert column(rows, 1000.0, 50.0, 0.5, 2, "fitted-shape") == ["PILOT", "CONTINUE", "CONTINUE", "CONTINUE"]
    message = UNITS_NEEDED_NOW(rows, 1000.0, 1.5, 0.95, "fitted-shape")
    assert is_message(message) and "needs at least 2 failures" in message and "found 0" in message


def test_core_refuses_survivor_flags_of_the_wrong_length():
    with pytest.raises(ValueError, match="one flag per lifetime"):
        sequential.decision_column([1.0, 2.0, 3.0], 1.5, 1.5, 0.95, 2, "fitted-shape", survivors=[0, 1])


# ----------------------------------------------------------------- degenerate logs


@pytest.mark.parametrize("side", ["below", "beyond"])
def test_pass_fail_never_stops_while_every_unit_is_on_one_side(side):
    x = np.full(5000, 10.0) if side == "below" else np.full(5000, 1e4)
    # d = 50 would stop on any two-sided log at the pilot
    result = sequential.decision_column(x, 100.0, 50.0, 0.95, 2)
    assert result.stop_units is None
    assert set(result.labels[1:]) == {"CONTINUE"}
    message = UNITS_NEEDED_NOW([[v] for v in x[:50]], 100.0, 1.5, 0.95)
    assert is_message(message) and ("no unit has outlasted" in message or "every unit so far" in message)
    assert is_message(TWO_STAGE_UNITS([[v] for v in x[:10]], 100.0, 1.5, 0.95))


def test_fitted_shape_does_not_stop_while_all_lifetimes_are_equal():
    rows = [[250.0]] * 30 + [[260.0], [240.0]]
    decisions = column(rows, 250.0, 50.0, 0.95, 2, "fitted-shape")
    assert decisions[:30] == ["PILOT"] + ["CONTINUE"] * 29
    assert decisions[30] == "STOP"  # the first unequal value makes the ML exist; d = 50 then stops at once
    assert "equal" in UNITS_NEEDED_NOW(rows[:30], 250.0, 1.5, 0.95, "fitted-shape")


def test_non_positive_lifetime_is_named():
    rows = [[120.0], [0], [90.0]]
    assert STOP_DECISION(rows, 100.0, 1.5, 0.95, 2, "known-shape", 2.0) == (
        "#TAILSTOP! observations: row 2 holds 0; lifetimes must be > 0")
    assert column(rows, 100.0, 1.5, 0.95, 2, "known-shape", 2.0)[0] == "PILOT"


@pytest.mark.parametrize("arguments, says", [
    ((100.0, 1.5, 0.95, 1), "pilot must be at least 2"),
    ((100.0, 1.5, 0.95, 2.5), "pilot must be a whole number"),
    ((100.0, 1.5, 0.95, "ten"), "pilot"),
    ((100.0, 1.5, 0.95, 5, None, None, 0), "check_every must be at least 1"),
    ((100.0, 1.5, 0.95, 5, None, None, 1.5), "check_every must be a whole number"),
    ((100.0, 1.0, 0.95, 5), "accuracy must be > 1"),
    ((100.0, 0.9, 0.95, 5), "accuracy must be > 1"),
    ((100.0, 1.5, 0.0, 5), "confidence"),
    ((100.0, 1.5, 1.0, 5), "confidence"),
    ((100.0, 1.5, 95, 5), "enter 0.95"),
    ((-1.0, 1.5, 0.95, 5), "threshold must be > 0"),
    (("abc", 1.5, 0.95, 5), "threshold"),
    ((100.0, 1.5, 0.95, 5, "known-shape"), "known-shape needs the gamma shape"),
    ((100.0, 1.5, 0.95, 5, "weibull"), "method must be one of"),
])
def test_bad_arguments_give_a_message_naming_what_to_fix(arguments, says):
    rows = [[120.0], [80.0], [150.0], [60.0], [95.0], [210.0]]
    for formula in (STOP_DECISION, STOP_DECISION_COLUMN):
        result = formula(rows, *arguments)
        assert is_message(result) and says in result, (formula.__name__, result)


def test_decision_formulas_want_one_column():
    result = STOP_DECISION_COLUMN([[1.0, 2.0], [3.0, 4.0]], 2.5, 1.5, 0.95, 2)
    assert is_message(result) and "single column" in result
    # the count formulas read a block in reading order, like the estimate formulas
    assert UNITS_NEEDED_NOW([[1.0, 2.0], [3.0, 4.0]], 2.5, 1.5, 0.95) == UNITS_NEEDED_NOW(
        [[1.0], [2.0], [3.0], [4.0]], 2.5, 1.5, 0.95)


# ----------------------------------------------------------------- UNITS_NEEDED_NOW and TWO_STAGE_UNITS


@pytest.mark.parametrize("method, shape", [("pass-fail", None), ("known-shape", 2.4), ("fitted-shape", None)])
def test_the_rule_stops_exactly_when_the_units_reach_units_needed_now(bench_log, method, shape):
    rows = [r for r in bench_log if r[0] is not None][:200]
    decisions = column(rows, 1500.0, 1.5, 0.95, 10, method, shape)
    stop = decisions.index("STOP") + 1
    for n in range(10, stop + 1):
        needed = UNITS_NEEDED_NOW(rows[:n], 1500.0, 1.5, 0.95, method, shape)
        assert (n >= needed) == (n == stop), (n, needed)


def test_two_stage_pass_fail_by_hand():
    # pilot of 20 units, 6 beyond the threshold: p̂ = 6/20 = 0.3, σ̂² = 1/(0.3·0.7) = 4.7619;
    # (z / ln 1.5)² = (1.959964 / 0.405465)² = 23.366; 23.366 · 4.7619 = 111.27 -> 112 units in all
    pilot = [[1600.0]] * 6 + [[900.0]] * 14
    assert TWO_STAGE_UNITS(pilot, 1500.0, 1.5, 0.95) == 112
    assert TWO_STAGE_UNITS(pilot, 1500.0, 1.5, 0.95) == max(20, UNITS_NEEDED_NOW(pilot, 1500.0, 1.5, 0.95))
    # a loose accuracy is reached by the pilot itself: no final batch
    assert TWO_STAGE_UNITS(pilot, 1500.0, 30.0, 0.95) == 20


def test_two_stage_exponential_by_hand():
    # the first 5 units of EXPONENTIAL_LOG: x̄ = 217, t̂ = 0.46083, σ̂² = 1.5576 (table above),
    # 7.9955 · 1.5576 = 12.45 -> 13 units in all; known-shape, shape 1, d = 2
    pilot = [[v] for v in EXPONENTIAL_LOG[:5]]
    assert TWO_STAGE_UNITS(pilot, 100.0, 2.0, 0.95, "known-shape", 1) == 13
    plan = sequential.two_stage_plan(EXPONENTIAL_LOG[:5], 100.0, 2.0, 0.95, "known-shape", 1.0)
    assert plan.final_batch == 8
    t = 100.0 / 217.0
    # check value: closed form; tolerance 1e-12, a few roundings of the same exp
    assert plan.sigma2 == pytest.approx(t * t / (1.0 - math.exp(-t)) ** 2, rel=1e-12)


def test_count_formulas_need_two_units():
    assert "at least 2" in UNITS_NEEDED_NOW([[5.0]], 3.0, 1.5, 0.95)
    assert "at least 2" in TWO_STAGE_UNITS([[5.0], [None]], 3.0, 1.5, 0.95)


# ----------------------------------------------------------------- the O(n) core against direct computation


def _logs(seed):
    """Invented logs whose rule stops early, late or never, for every method."""
    rng = np.random.default_rng(seed)
    for _ in range(12):
        a = rng.uniform(0.4, 8.0)
        x = rng.gamma(a, 100.0, size=int(rng.integers(300, 6000)))
        c = float(np.quantile(x, rng.uniform(0.03, 0.97)))
        for method, shape in (("pass-fail", None), ("known-shape", a * rng.uniform(0.8, 1.25)), ("fitted-shape", None)):
            sigma2 = float(sequential.units_needed_now(x, c, 2.0, 0.95, method, shape).sigma2)
            # accuracies whose plan is a tenth of the log, 90 % of it, and twice the log
            for share in (0.1, 0.9, 2.0):
                d = math.exp(1.96 * math.sqrt(sigma2 / (share * x.size)))
                yield x, c, d, method, shape, int(rng.integers(2, 30)), int(rng.integers(1, 4))


def test_core_decisions_equal_the_direct_computation():
    for x, c, d, method, shape, pilot, k in _logs(21):
        direct = direct_first_stop(x, c, d, 0.95, pilot, method, shape, k)
        assert sequential.stopping_units(x, c, d, 0.95, pilot, method, shape, check_every=k) == direct, method


def test_fitted_shape_against_refitting_every_prefix_with_scipy():
    # reference: scipy.stats.gamma.fit (floc=0) on every prefix, a general-purpose ML fit
    rng = np.random.default_rng(4)
    x = np.round(rng.gamma(3.0, 200.0, size=160), 1)
    c, d, pilot = 900.0, 1.6, 10
    boundary = (Z95 / math.log(d)) ** 2
    stop = None
    for n in range(pilot, x.size + 1):
        a, _, s = stats.gamma.fit(x[:n], floc=0)
        sigma2 = float(sigma2_fitted_shape(a, c / s))
        ours = sequential.units_needed_now(x[:n], c, d, 0.95, "fitted-shape").sigma2
        # check value: scipy.stats.gamma.fit on the prefix (above); tolerance 1e-5: scipy's optimiser agrees with
        # the ML to about 6 digits, and σ² follows the shape smoothly
        assert ours == pytest.approx(sigma2, rel=1e-5)
        if stop is None and n >= boundary * sigma2:
            stop = n
    assert stop is not None
    assert sequential.stopping_units(x, c, d, 0.95, pilot, "fitted-shape") == stop


def test_shapes_of_all_prefixes_do_not_depend_on_each_other():
    s = np.logspace(-11, 3, 4001)
    shapes = shape_from_log_ratio(s)
    # each element on its own: a prefix gets the same bits whatever it is solved with
    assert all(shape_from_log_ratio(s[i:i + 1])[0] == shapes[i] for i in range(0, s.size, 97))
    assert np.isnan(shape_from_log_ratio([0.0, -1.0, np.nan])).all()


def test_known_shape_floor_is_below_sigma2_on_its_interval():
    # the bound behind skipping blocks of check points (log-concavity of the log-gamma density)
    for a in (0.2, 0.5, 1.0, 2.4, 7.0, 30.0, 200.0):
        for low, high in ((0.01 * a, 0.05 * a), (0.3 * a, 3.0 * a), (0.9 * a, 1.1 * a), (2.0 * a, 9.0 * a)):
            t = np.linspace(low, high, 400)
            floor = sequential.known_shape_sigma2_floor(a, low, high)
            assert np.all(sigma2_known_shape(a, t) >= floor * (1 - 1e-12)), (a, low, high)
        assert sequential.known_shape_sigma2_floor(a, a, a) == pytest.approx(float(sigma2_known_shape(a, a)))


def test_fitted_sigma2_is_at_least_the_known_shape_sigma2():
    # σ²_fitted − σ²_known = (√a u − v/√a)² / (a ψ'(a) − 1) ≥ 0, and the screen's margin covers rounding
    for a in np.logspace(-1, 5, 25):
        t = a * np.logspace(-1.5, 1.0, 60) if a < 1e3 else a * np.linspace(0.9, 1.1, 60)
        known = sigma2_known_shape(a, t)
        fitted = sigma2_fitted_shape(a, t)
        finite = np.isfinite(known) & np.isfinite(fitted)
        assert np.all(fitted[finite] >= known[finite] * (1 - 1e-6 * max(1.0, a))), a


def test_check_points_follow_check_every():
    rng = np.random.default_rng(9)
    for k in (2, 5, 8):
        x = rng.gamma(2.0, 100.0, size=3000)
        beyond = x > 150.0
        expected = _pass_fail_stop_by_hand(beyond, 1.3, 8, k)
        got = sequential.stopping_units(x, 150.0, 1.3, 0.95, 8, check_every=k)
        assert got == expected
        assert (got - 8) % k == 0


# ----------------------------------------------------------------- reading a log column


def _is_caption(cell):
    """Text that is not a number, a survivor mark (…+), an error text or a formula."""
    if not isinstance(cell, str) or cell.strip().endswith("+") or cell.strip().upper() == "#N/A":
        return False
    try:
        float(cell)
    except ValueError:
        return not cell.startswith("=")
    return False


def _read_cell_by_cell(column):
    """A plain reading of a log column, cell by cell: (values, survivors, rows, first bad row, filled rows)."""
    values, survivors, rows = [], [], []
    filled = 0
    for r, cell in enumerate(column):
        if not (cell is None or (isinstance(cell, str) and not cell.strip())):
            filled = r + 1
    units_seen = False
    for r, cell in enumerate(column[:filled]):
        if cell is None or (isinstance(cell, str) and not cell.strip()):
            continue
        if not units_seen and _is_caption(cell):
            continue  # a header above the first unit
        units_seen = True
        survivor = isinstance(cell, str) and cell.strip().endswith("+")
        text = cell.strip()[:-1] if survivor else cell
        try:
            number = float(text) if not isinstance(text, bool) else math.nan
        except (TypeError, ValueError):
            number = math.nan
        if not (math.isfinite(number) and number > 0):
            return values, survivors, rows, r, filled
        values.append(number)
        survivors.append(survivor)
        rows.append(r)
    return values, survivors, rows, None, filled


def test_read_log_cells_matches_a_cell_by_cell_reading():
    from tailstop.sheet.cells import read_log_cells

    rng = np.random.default_rng(13)
    kinds = [lambda: float(rng.gamma(2.0, 100.0)), lambda: int(rng.integers(1, 900)), lambda: None, lambda: "",
             lambda: "  ", lambda: f"{rng.integers(1, 900)}+", lambda: f" {rng.integers(1, 900)} + ",
             lambda: str(round(float(rng.gamma(2.0, 100.0)), 2)), lambda: "n/a", lambda: 0, lambda: -5.0,
             lambda: True, lambda: "#N/A", lambda: "+", lambda: "0+", lambda: math.nan]
    weights = np.array([30, 10, 8, 3, 2, 4, 1, 3, 0.3, 0.2, 0.2, 0.2, 0.2, 0.2, 0.2, 0.2])
    for _ in range(400):
        length = int(rng.integers(0, 120))
        column = [kinds[i]() for i in rng.choice(len(kinds), size=length, p=weights / weights.sum())]
        column += [None] * int(rng.integers(0, 300))
        log = read_log_cells([[cell] for cell in column])
        values, survivors, rows, bad, filled = _read_cell_by_cell(column)
        assert log.values.tolist() == values
        assert log.survivors.tolist() == survivors
        assert log.rows.tolist() == rows
        assert log.problem_row == bad and (log.problem is None) == (bad is None)
        assert log.filled_rows == filled
        if bad is not None:
            assert log.problem.startswith(f"observations: row {bad + 1} ")
