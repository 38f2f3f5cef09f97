"""docs/worked-example.md is what the code writes, and its key numbers hold up on their own.

The page is generated (``python docs/tools/worked_example.py``) from the demo
scenario through the public formulas; the first test fails whenever the
scenario or the code moves a number and the page was not regenerated. The
other tests recompute the figures the page's argument rests on — the stop,
the estimate and its bounds, the true probability, the fixed-size count and
the exact pass-fail operating characteristics — from the scenario's log with
plain numpy/scipy/mpmath, independently of tailstop's code.
"""
from __future__ import annotations

import importlib.util
import math
import re
import sys
from pathlib import Path

import mpmath
import numpy as np
import pytest
from scipy import stats

from tailstop.workbooks import scenario

DOCS = Path(__file__).resolve().parents[1] / "docs"
PAGE = DOCS / "worked-example.md"


def _generator():
    """docs/tools/worked_example.py, the page's generator, imported from its file."""
    spec = importlib.util.spec_from_file_location("worked_example", DOCS / "tools" / "worked_example.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module  # its dataclasses look their module up
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def text():
    return PAGE.read_text(encoding="utf-8")


@pytest.fixture(scope="module")
def generated():
    return _generator().render()


def flat(text):
    """The page as one line of words (quote marks at line starts dropped), so wrapping does not matter."""
    lines = (re.sub(r"^> ?", "", line) for line in text.splitlines())
    return " ".join(" ".join(lines).split())


def number(pattern, text):
    match = re.search(pattern, flat(text))
    assert match, f"the page no longer says {pattern!r}"
    return match.group(1)


def z_value():
    # check value: z = 1.959964 for 95 % two-sided, NIST/SEMATECH §1.3.6.7.1 (scipy computes it for any level)
    return stats.norm.ppf(0.5 + scenario.CONFIDENCE / 2)


def pass_fail_stop(lifetimes):
    """N of METHOD.md §5 for pass-fail, from scratch: the plain share S/n in σ̂², no stop while S is 0 or n."""
    n = np.arange(1, lifetimes.size + 1)
    s = np.cumsum(lifetimes > scenario.THRESHOLD)
    stops = (n >= scenario.PILOT) & (s * (n - s) >= (z_value() / math.log(scenario.ACCURACY)) ** 2 * n) & (s > 0) & (s < n)
    return int(n[np.argmax(stops)]) if stops.any() else None


def test_committed_page_is_what_the_code_writes(text, generated):
    """Regression guard only: the page against the code that writes it (the figures' independent checks follow)."""
    assert text == generated, ("docs/worked-example.md is out of date: "
                               "python docs/tools/worked_example.py > docs/worked-example.md")


def test_the_stop_is_the_first_unit_that_meets_the_rule(text):
    log = scenario.bench_log()
    stop = int(number(r"After valve (\d+) the column reads `STOP`", text))
    assert stop == pass_fail_stop(log)
    assert f"| {stop - 1} | {int(np.sum(log[:stop - 1] > scenario.THRESHOLD))} |" in text
    assert f"Valves 1 to {scenario.PILOT - 1} read `PILOT`" in flat(text)


def test_final_estimate_and_bounds_by_hand(text):
    # METHOD.md §2: p_low = q/(d + q), p_high = d q/(1 + d q), q = S/(N - S) for pass-fail
    log = scenario.bench_log()
    stop = pass_fail_stop(log)
    beyond = int(np.sum(log[:stop] > scenario.THRESHOLD))
    q, d = beyond / (stop - beyond), scenario.ACCURACY
    said = flat(text)
    assert f"{beyond} of {stop} valves outlasted" in said
    assert f"p̂ = {beyond}/{stop} = {beyond / stop:.4f}" in said
    assert f"a probability between {q / (d + q):.4f} and {d * q / (1 + d * q):.4f}" in said
    assert f"is {q / (d + q):.3f} to {d * q / (1 + d * q):.3f}" in said


def test_true_probability_against_mpmath(text):
    # check value: mpmath.gammainc(a, t, inf, regularized=True) at 30 digits
    mpmath.mp.dps = 30
    truth = float(mpmath.gammainc(scenario.TRUE_SHAPE, scenario.THRESHOLD / scenario.TRUE_SCALE, mpmath.inf,
                                  regularized=True))
    call = f"=TAIL_PROB({scenario.THRESHOLD:g}, {scenario.TRUE_SHAPE:g}, {scenario.TRUE_SCALE:g})"
    assert number(re.escape(f"`{call}` = ") + r"([\d.]+)", text) == f"{truth:.4f}"


def test_fixed_size_count_by_hand(text):
    # METHOD.md §4: n* = (z / log d)² / (p (1 - p)) for pass-fail, p under the guess (mpmath)
    mpmath.mp.dps = 30
    p = float(mpmath.gammainc(scenario.GUESS_SHAPE, scenario.THRESHOLD / scenario.GUESS_SCALE, mpmath.inf,
                              regularized=True))
    n_star = (z_value() / math.log(scenario.ACCURACY)) ** 2 / (p * (1 - p))
    assert f"| pass-fail | {math.ceil(n_star):,} |" in text


def exact_pass_fail(p, accuracy, confidence, pilot, n_max):
    """P(N = n) and coverage of the pass-fail rule by plain forward propagation over (n, S) (METHOD.md §6)."""
    z = stats.norm.ppf(0.5 + confidence / 2)
    factor = (z / math.log(accuracy)) ** 2
    odds = p / (1 - p)
    running = np.array([1.0])  # P(S = k, not stopped) after n units, k = 0..n
    stopped_at, coverage = np.zeros(n_max + 1), 0.0
    for n in range(1, n_max + 1):
        running = np.append(running, 0.0) * (1 - p) + np.append(0.0, running) * p
        if n < pilot:
            continue
        k = np.arange(n + 1)
        # the plain share p^ = k / n in σ̂² (docs/method.md); no stop while k = 0 or k = n
        stop = (k * (n - k) >= factor * n) & (k > 0) & (k < n)
        with np.errstate(divide="ignore"):
            q_hat = k / (n - k)
        covers = (q_hat / accuracy <= odds) & (odds <= q_hat * accuracy)
        stopped_at[n] = running[stop].sum()
        coverage += running[stop & covers].sum()
        running = np.where(stop, 0.0, running)
    return stopped_at, coverage


def test_pass_fail_plan_figures_by_independent_propagation(text):
    call = f"=TAIL_PROB({scenario.THRESHOLD:g}, {scenario.GUESS_SHAPE:g}, {scenario.GUESS_SCALE:g})"
    story_p = float(number(re.escape(call) + r" → ([\d.]+)", text))
    mpmath.mp.dps = 30
    p = float(mpmath.gammainc(scenario.GUESS_SHAPE, scenario.THRESHOLD / scenario.GUESS_SCALE, mpmath.inf,
                              regularized=True))
    assert story_p == float(f"{p:.4f}")
    distribution, coverage = exact_pass_fail(p, scenario.ACCURACY, scenario.CONFIDENCE, scenario.PILOT, 600)
    expected = float(np.sum(np.arange(distribution.size) * distribution) / distribution.sum())
    said = flat(text)
    assert f"E[N] ≈ {expected:.1f} for pass-fail" in said
    assert f"The exact pass-fail coverage at the guess is {coverage:.4f}" in said


def test_the_page_carries_the_cautions(text):
    said = flat(text)
    for phrase in ("licensed engineering judgment take precedence", "The confidence is asymptotic",
                   "independently under identical conditions", "slightly biased", "nothing here extends beyond",
                   "[cautions.md](cautions.md)"):
        assert phrase in said, phrase


@pytest.mark.parametrize("name", ["worked-example.md", "formulas.md"])
def test_links_resolve(name):
    page = (DOCS / name).read_text(encoding="utf-8")
    for target in re.findall(r"\]\(([^)\s]+)\)", page):
        path, _, anchor = target.partition("#")
        linked = DOCS / path if path else DOCS / name
        assert linked.exists(), f"{name} links to missing {target}"
        if anchor:
            headings = re.findall(r"^#+ (.+)$", linked.read_text(encoding="utf-8"), flags=re.MULTILINE)
            anchors = {re.sub(r"[^\w\- ]", "", h.strip().lower()).replace(" ", "-") for h in headings}
            assert anchor in anchors, f"{name} links to missing anchor {target}"
