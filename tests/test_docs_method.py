"""Numbers quoted in docs/method.md, docs/getting-started.md and docs/cautions.md come from the code.

Each figure a page quotes is recomputed here, so the pages and the code cannot
drift apart; links between the pages must resolve.
"""
from __future__ import annotations

import math
import re
from pathlib import Path

import numpy as np
import pytest

from tailstop.core import notes, operating
from tailstop.sheet import PLAN_SUMMARY_FROM_P, TAIL_PROB, UNITS_REQUIRED

DOCS = Path(__file__).resolve().parents[1] / "docs"
PAGES = ("method.md", "getting-started.md", "cautions.md")


def page(name):
    return (DOCS / name).read_text(encoding="utf-8")


def test_method_comparison_table_matches_units_required():
    """The page's table against the formula (regression guard); the σ² behind it against mpmath in
    tests/test_plugin_variance.py::test_planning_sigma2_and_unit_counts_against_mpmath."""
    text = page("method.md")
    call = re.search(r"`UNITS_REQUIRED\((\d+), (\d+), (\d+), ([\d.]+), ([\d.]+), method\)`", text)
    threshold, shape, scale, accuracy, confidence = (float(v) for v in call.groups())
    rows = dict(re.findall(r"^\| (known-shape|fitted-shape|pass-fail) \| (\d+) \|$", text, flags=re.MULTILINE))
    assert set(rows) == {"known-shape", "fitted-shape", "pass-fail"}
    for method, units in rows.items():
        assert UNITS_REQUIRED(threshold, shape, scale, accuracy, confidence, method) == int(units)
    quoted_p = float(re.search(r"p ≈ ([\d.]+)\)", text).group(1))
    # tolerance 5e-4: half a unit in the 3rd decimal the page prints p to
    assert TAIL_PROB(threshold, shape, scale) == pytest.approx(quoted_p, abs=5e-4)


def test_method_hand_check_of_the_sample_size():
    # check value: z = 1.959964, NIST/SEMATECH §1.3.6.7.1; σ² = 1/(p(1-p)) = 4 at p = 0.5
    text = page("method.md")
    assert "n* = (1.959964 / log 1.5)² · 4 = 93.5, that is 94 units" in text
    assert round((1.959964 / math.log(1.5)) ** 2 * 4, 1) == 93.5
    from tailstop.sheet import UNITS_REQUIRED_FROM_P

    assert UNITS_REQUIRED_FROM_P(0.5, 1.5, 0.95) == 94


def test_method_warning_thresholds_match_the_code():
    text = page("method.md")
    # property: the page and the code name the same levels (5 %: common practice significance level)
    assert notes.FIT_LEVEL == 0.05 and "fit check gives p < 0.05" in text
    assert notes.SHAPE_LEVEL == 0.05 and "rejects at the 5 % level" in text
    assert notes.MIN_PER_SIDE == 5 and "fewer than 5 units beyond the threshold" in text


def test_method_planning_example():
    text = " ".join(page("method.md").split())
    assert "`PLAN_SUMMARY_FROM_P(0.3, 1.5, 0.95, 10)` gives n* = 112, E[N] = 113.2 and an exact coverage of 0.947" in text
    table = dict(PLAN_SUMMARY_FROM_P(0.3, 1.5, 0.95, 10))
    # the quoted figures against the propagation written in the test (METHOD.md §5–6, not the package's rule)
    from test_planning_independent import pass_fail_plan_by_hand

    distribution, _, coverage = pass_fail_plan_by_hand(0.3, 1.5, 0.95, 10, 1500)
    assert round(float(np.dot(np.arange(distribution.size), distribution) / distribution.sum()), 1) == 113.2
    assert round(coverage, 3) == 0.947
    assert table["fixed-size units n*"] == 112
    assert round(table["expected units E[N]"], 1) == 113.2
    assert round(table["coverage"], 3) == 0.947
    assert "raises the critical value from 1.960 to 1.964; the coverage is then 0.952" in text
    assert "about half a unit on average (E[N] = 113.6)" in text
    calibration = operating.calibrate(lambda z: operating.pass_fail_exact(0.3, 1.5, 0.95, 10, stop_z=z), 0.95)
    # regression guard: the page's quoted figures (1.964, 0.952, 113.6) against the package; 1.960 is NIST's z
    # (§1.3.6.7.1). The coverage and E[N] at the calibrated z are checked below against the propagation
    # written in tests/test_planning_independent.py, at the confidence 2Φ(z) - 1 that z stands for (scipy)
    assert (round(calibration.z, 3), round(calibration.z_calibrated, 3)) == (1.960, 1.964)
    assert round(calibration.calibrated.coverage, 3) == 0.952
    assert round(calibration.calibrated.expected_units, 1) == 113.6
    # property: calibrating costs about half a unit (the page's words), 0.3 to 0.7
    assert 0.3 < calibration.calibrated.expected_units - table["expected units E[N]"] < 0.7
    from scipy import stats

    level = 2 * stats.norm.cdf(calibration.z_calibrated) - 1
    distribution, _, coverage = pass_fail_plan_by_hand(0.3, 1.5, level, 10, 1500)
    # check value: that propagation, to the 3 and 1 decimals the page quotes
    assert round(coverage, 3) == 0.952
    assert round(float(np.dot(np.arange(distribution.size), distribution) / distribution.sum()), 1) == 113.6


def _propagate(p, accuracy, confidence, pilot, regularize_everywhere):
    """Exact (E[N], coverage) of the pass-fail rule under one reading of σ̂², by plain propagation.

    Written from the text of docs/method.md, not from the package: stop at (n, S) when 0 < S < n
    and n >= (z / ln d)² / (r (1 - r)), r = S / n (the plain share) or r = (S + ½) / (n + 1)
    (p̃ at every n); the final interval [q̂/d, q̂ d] with q̂ = S / (n - S), closed, with ties on
    its ends decided in whole numbers (p = a/b and d = e/f as the decimals written).
    """
    from fractions import Fraction

    import numpy as np
    from scipy import stats

    a, b = Fraction(repr(p)).as_integer_ratio()
    e, f = Fraction(repr(accuracy)).as_integer_ratio()

    factor = (stats.norm.isf((1 - confidence) / 2) / math.log(accuracy)) ** 2
    running = stats.binom.pmf(np.arange(pilot + 1), pilot, p)
    mean = coverage = 0.0
    n = pilot
    while running.sum() > 1e-12:
        k = np.arange(n + 1)
        r = (k + 0.5) / (n + 1) if regularize_everywhere else k / n
        stop = (k > 0) & (k < n) & (n * r * (1 - r) >= factor)
        # q/d <= q^ <= q d with q = a/(b-a), q^ = k/(n-k), d = e/f, in whole numbers
        covers = (a * (n - k) * f <= k * (b - a) * e) & (k * (b - a) * f <= e * a * (n - k))
        mean += n * running[stop].sum()
        coverage += running[stop & covers].sum()
        running = np.where(stop, 0.0, running)
        running = np.append(running, 0.0) * (1 - p) + np.append(0.0, running) * p
        n += 1
    return mean, coverage


def test_method_table_of_the_two_readings_of_the_regularization():
    text = page("method.md")
    rows = re.findall(r"^\| ([\d.]+) \| ([\d.]+) \| (0\.9\d?) \| ([\d.]+) \(([\d.]+)\) \| ([\d.]+) \(([\d.]+)\) \|$",
                      text, flags=re.MULTILINE)
    assert len(rows) == 9
    for p, d, level, every, every_units, plain, plain_units in rows:
        p, d, level = float(p), float(d), float(level)
        if p < 0.005:
            continue  # the p = 0.001 rows take tens of thousands of units: the package checks them below
        for regularize, coverage, units in ((True, every, every_units), (False, plain, plain_units)):
            mean, covered = _propagate(p, d, level, 10, regularize)
            assert f"{covered:.3f}" == coverage and f"{mean:.1f}" == units, (p, d, level, regularize)
    for p, d, level, _, _, plain, plain_units in rows:
        result = operating.pass_fail_exact(float(p), float(d), float(level), 10)
        assert (f"{result.coverage:.3f}", f"{result.expected_units:.1f}") == (plain, plain_units)


def test_method_table_of_pass_fail_coverage():
    text = page("method.md")
    header = re.search(r"^\| nominal \| d \| p = ([\d.]+) \| (.*) \|$", text, flags=re.MULTILINE)
    ps = [float(header.group(1))] + [float(v) for v in header.group(2).split(" | ")]
    rows = re.findall(r"^\| (0\.90|0\.95|0\.90 or 0\.95) \| ([\d.]+) \| ((?:[\d.]+ \| )+[\d.]+) \|$", text,
                      flags=re.MULTILINE)
    assert len(rows) == 8
    for levels, d, figures in rows:
        for level in (0.90, 0.95) if "or" in levels else (float(levels),):
            for p, quoted in zip(ps, figures.split(" | ")):
                assert f"{operating.pass_fail_exact(p, float(d), level, 10).coverage:.3f}" == quoted, (level, d, p)


def test_getting_started_figures():
    text = page("getting-started.md")
    assert "=TAIL_PROB(1500, 2, 600)" in text and "returns 0.2873" in text
    # check value: the Erlang closed form below (0.287297…), to the 4 decimals the page prints
    assert round(TAIL_PROB(1500, 2, 600), 4) == 0.2873
    # check value: the Erlang closed form Q(2, t) = e^{-t}(1 + t) at t = 2.5 (JKB vol. 1): 0.287297…
    assert round(math.exp(-2.5) * 3.5, 4) == 0.2873
    assert "`=UNITS_REQUIRED(1500, 2, 600, 1.5, 0.95)`" in text and "(115)" in text
    # check value: by hand, pass-fail σ² = 1/(p(1-p)) = 4.8838 at that p; (1.959964 / ln 1.5)² · 4.8838
    # = 23.366 · 4.8838 = 114.12 -> 115 units (METHOD.md §3-§4, z from NIST/SEMATECH §1.3.6.7.1)
    assert UNITS_REQUIRED(1500, 2, 600, 1.5, 0.95) == 115


def _anchor(heading):
    """GitHub-style anchor of a Markdown heading."""
    return re.sub(r"[^\w\- ]", "", heading.strip().lower()).replace(" ", "-")


@pytest.mark.parametrize("name", PAGES)
def test_links_between_pages_resolve(name):
    for target in re.findall(r"\]\(([^)\s]+)\)", page(name)):
        if target.startswith(("http://", "https://")):
            continue
        path, _, anchor = target.partition("#")
        linked = DOCS / path if path else DOCS / name
        assert linked.exists(), f"{name} links to missing {target}"
        if anchor:
            headings = re.findall(r"^#+ (.+)$", linked.read_text(encoding="utf-8"), flags=re.MULTILINE)
            assert anchor in {_anchor(h) for h in headings}, f"{name} links to missing anchor {target}"


def test_getting_started_python_examples_run_and_say_what_the_comments_say(capsys):
    blocks = re.findall(r"```python\n(.*?)```", page("getting-started.md"), flags=re.DOTALL)
    assert len(blocks) == 2
    for block in blocks:
        exec(compile(block, "getting-started.md", "exec"), {})
    printed = capsys.readouterr().out.splitlines()
    decisions = eval(printed[0])  # noqa: S307 - our own printed list
    assert [row[0] for row in decisions] == ["PILOT"] * 9 + ["CONTINUE"] * 3
    # 1730, 2290, 1500+ (a survivor) and 1622 are beyond 1500; 1500 itself is not (hand count)
    assert float(printed[1]) == pytest.approx(4 / 12)
    assert "4 of 12 units outlasted the threshold" in printed[2]
    assert printed[3].startswith("few-on-a-side - 3 of 11")
    assert printed[4].startswith("accuracy-needs-more")


def test_cautions_quote_the_exact_shortfalls():
    text = " ".join(page("cautions.md").split())
    quoted = {
        "0.892 for a nominal 0.90 at d = 2, p = 0.03": (0.03, 2.0, 0.90),
        "0.945 for 0.95 at d = 3, p = 0.03": (0.03, 3.0, 0.95),
        "0.935 at d = 5, p = 0.03": (0.03, 5.0, 0.95),
        "0.904 at d = 10, p = 0.01": (0.01, 10.0, 0.95),
    }
    for phrase, (p, d, level) in quoted.items():
        assert phrase in text
        assert f"{operating.pass_fail_exact(p, d, level, 10).coverage:.3f}" == phrase.split()[0]
