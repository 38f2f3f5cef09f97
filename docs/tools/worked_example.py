"""docs/worked-example.md, written from the demo scenario by the public formulas.

    python docs/tools/worked_example.py > docs/worked-example.md

Every number on the page is computed here from ``tailstop.workbooks.scenario`` (the
invented bench test of solenoid valves) through the spreadsheet formulas of
``tailstop.sheet`` and the ``tailstop plan`` command, the way an engineer
would get them; nothing is typed in. A test regenerates the page and compares
it with the committed file, so a change of the scenario or of the code that
moves a number fails until the page is regenerated.
"""
from __future__ import annotations

import argparse
import io
import re
import sys
import textwrap
from dataclasses import dataclass

import numpy as np

from tailstop.workbooks import scenario
from tailstop.core.accuracy import critical_value
from tailstop.core.notes import method_notes
from tailstop.core.rule import boundary_factor
from tailstop.core.sequential import units_needed_now

__all__ = ["Story", "tell", "render", "main"]

PLAN_METHODS = ("pass-fail", "known-shape", "fitted-shape")
DECISION_METHOD = "pass-fail"
CROSS_CHECK_METHOD = "fitted-shape"
# Units at which the progress table shows the state of the log (the pilot, the stop and the unit before it are added).
PROGRESS_UNITS = (25, 50, 75, 100, 150, 200, 300)
# The planning guess is also tried at these multiples of its odds.
ODDS_FACTORS = (0.5, 2.0)


@dataclass(frozen=True)
class Story:
    """The numbers of the worked example, computed once and then written out."""

    log: np.ndarray
    guess_p: float
    fixed_units: dict
    plan_output: str
    plan_coverage: float
    plan_expected: dict
    sensitivity: list
    pilot_beyond: int
    beyond_before: int
    pilot_needed: int
    two_stage: int
    pilot_fit: tuple
    pilot_notes: list
    decisions: list
    stop: int
    progress: list
    boundary: float
    needed_at_stop: float
    needed_before: float
    estimate: float
    odds: float
    probability_bounds: tuple
    odds_bounds: tuple
    notes: list
    headless_notes: list
    cross_estimate: float
    cross_bounds: tuple
    cross_fit: tuple
    cross_notes: list
    cross_stop: int | None
    true_p: float
    true_coverage: float


def _column(values):
    """A spreadsheet column: one row per unit."""
    return [[float(v)] for v in values]


def _plan_output(argv):
    """What `tailstop plan ARGV` prints (its progress bar discarded)."""
    from tailstop.commands import plan as plan_command

    parser = argparse.ArgumentParser(prog="tailstop plan")
    run = plan_command.add_arguments(parser)
    out = io.StringIO()
    run(parser.parse_args(argv), out=out, progress_stream=io.StringIO())
    return out.getvalue().rstrip("\n")


def plan_argv():
    """The arguments of the `tailstop plan` call of the planning meeting."""
    return ["--threshold", f"{scenario.THRESHOLD:g}", "--shape", f"{scenario.GUESS_SHAPE:g}",
            "--scale", f"{scenario.GUESS_SCALE:g}", "--accuracy", f"{scenario.ACCURACY:g}",
            "--confidence", f"{scenario.CONFIDENCE:g}", "--pilot", f"{scenario.PILOT:d}"]


def _first(cells):
    return cells[0][0]


def tell() -> Story:
    """Compute every number of the worked example from the scenario."""
    from tailstop.sheet import (GAMMA_FIT_PVALUE, GAMMA_FIT_SCALE, GAMMA_FIT_SHAPE, PLAN_SUMMARY, PLAN_SUMMARY_FROM_P,
                        STOP_DECISION_COLUMN, TAIL_METHOD_NOTES, TAIL_ODDS_BOUNDS, TAIL_PROB, TAIL_PROB_BOUNDS,
                        TAIL_PROB_EST, TWO_STAGE_UNITS, UNITS_NEEDED_NOW, UNITS_REQUIRED)

    c, d, level, m = scenario.THRESHOLD, scenario.ACCURACY, scenario.CONFIDENCE, scenario.PILOT
    guess = (scenario.GUESS_SHAPE, scenario.GUESS_SCALE)
    log = scenario.bench_log()
    column = _column(log)

    guess_p = TAIL_PROB(c, *guess)
    fixed = {method: UNITS_REQUIRED(c, *guess, d, level, method) for method in PLAN_METHODS}
    summary = dict(map(tuple, PLAN_SUMMARY(c, *guess, d, level, m, DECISION_METHOD)))
    sensitivity = []
    guess_odds = guess_p / (1 - guess_p)
    for factor in ODDS_FACTORS:
        p = factor * guess_odds / (1 + factor * guess_odds)
        table = dict(map(tuple, PLAN_SUMMARY_FROM_P(p, d, level, m)))
        sensitivity.append(_plan_row(f"{p:.3f} (odds × {factor:g})", table))
    sensitivity.insert(1, _plan_row(f"{guess_p:.3f} (the guess)", dict(map(tuple, PLAN_SUMMARY_FROM_P(guess_p, d, level, m)))))

    pilot = column[:m]
    decisions = [row[0] for row in STOP_DECISION_COLUMN(column, c, d, level, m, DECISION_METHOD)]
    if "STOP" not in decisions:
        raise ValueError(f"the demo log of {len(log)} units never reaches a STOP; lengthen it or loosen the accuracy")
    stop = decisions.index("STOP") + 1
    used = column[:stop]
    progress_at = sorted({m, *(n for n in PROGRESS_UNITS if m < n < stop - 1), stop - 1, stop})
    progress = [(n, int(np.sum(log[:n] > c)), TAIL_PROB_EST(column[:n], c),
                 UNITS_NEEDED_NOW(column[:n], c, d, level), decisions[n - 1]) for n in progress_at]

    cross_decisions = [row[0] for row in STOP_DECISION_COLUMN(column, c, d, level, m, CROSS_CHECK_METHOD)]
    return Story(
        log=log,
        guess_p=guess_p,
        fixed_units=fixed,
        plan_output=_plan_output(plan_argv()),
        plan_coverage=summary["coverage"],
        plan_expected={method: dict(map(tuple, PLAN_SUMMARY(c, *guess, d, level, m, method)))["expected units E[N]"]
                       for method in PLAN_METHODS},
        sensitivity=sensitivity,
        pilot_beyond=int(np.sum(log[:m] > c)),
        beyond_before=int(np.sum(log[:stop - 1] > c)),
        pilot_needed=UNITS_NEEDED_NOW(pilot, c, d, level),
        two_stage=TWO_STAGE_UNITS(pilot, c, d, level),
        pilot_fit=(GAMMA_FIT_SHAPE(pilot), GAMMA_FIT_SCALE(pilot), GAMMA_FIT_PVALUE(pilot)),
        pilot_notes=[row[0] for row in TAIL_METHOD_NOTES(pilot, c)],
        decisions=decisions,
        stop=stop,
        progress=progress,
        boundary=boundary_factor(d, level),
        needed_at_stop=units_needed_now(log[:stop], c, d, level).needed,
        needed_before=units_needed_now(log[:stop - 1], c, d, level).needed,
        estimate=TAIL_PROB_EST(used, c),
        odds=TAIL_PROB_EST(used, c) / (1 - TAIL_PROB_EST(used, c)),
        probability_bounds=tuple(_first_row(TAIL_PROB_BOUNDS(used, c, d))),
        odds_bounds=tuple(_first_row(TAIL_ODDS_BOUNDS(used, c, d))),
        notes=[row[0] for row in TAIL_METHOD_NOTES(used, c)],
        headless_notes=[note.text for note in method_notes(log[:stop], c, DECISION_METHOD,
                                                           accuracy=d, confidence=level)],
        cross_estimate=TAIL_PROB_EST(used, c, CROSS_CHECK_METHOD),
        cross_bounds=tuple(_first_row(TAIL_PROB_BOUNDS(used, c, d, CROSS_CHECK_METHOD))),
        cross_fit=(GAMMA_FIT_SHAPE(used), GAMMA_FIT_SCALE(used), GAMMA_FIT_PVALUE(used)),
        cross_notes=[row[0] for row in TAIL_METHOD_NOTES(used, c, CROSS_CHECK_METHOD)],
        cross_stop=cross_decisions.index("STOP") + 1 if "STOP" in cross_decisions else None,
        true_p=TAIL_PROB(c, scenario.TRUE_SHAPE, scenario.TRUE_SCALE),
        true_coverage=dict(map(tuple, PLAN_SUMMARY(c, scenario.TRUE_SHAPE, scenario.TRUE_SCALE, d, level, m,
                                                   DECISION_METHOD)))["coverage"],
    )


def _plan_row(label, table):
    """(label, n*, E[N], 95 % quantile of N, coverage) from a PLAN_SUMMARY table."""
    return (label, table["fixed-size units n*"], table["expected units E[N]"], table["N 95% quantile"],
            table["coverage"])


def _first_row(cells):
    if isinstance(cells, str):
        raise ValueError(cells)
    return cells[0]


# --------------------------------------------------------------------------- writing


def _g(value):
    """A scenario constant as typed into a cell: 1500, 1.5, 0.95."""
    return f"{value:g}"


def _units(value):
    """A whole number of units as a cell shows it; a cell's #TAILSTOP! text as it is."""
    return value if isinstance(value, str) else f"{int(value):,}"


def _fixed(value, digits):
    return value if isinstance(value, str) else f"{value:.{digits}f}"


def _p(value):
    return f"{value:.3f}"


def _quote(lines):
    return "\n".join(f"    {line}" for line in lines)


def _notes_text(lines):
    return "\n".join(f"- {line}" for line in lines)


def render(story: Story | None = None) -> str:
    """The Markdown of docs/worked-example.md."""
    s = story or tell()
    c, d, level, m, unit = (_g(scenario.THRESHOLD), _g(scenario.ACCURACY), _g(scenario.CONFIDENCE),
                            scenario.PILOT, scenario.UNIT)
    percent = f"{scenario.CONFIDENCE * 100:g} %"
    shape, scale = _g(scenario.GUESS_SHAPE), _g(scenario.GUESS_SCALE)
    beyond = int(np.sum(s.log[:s.stop] > scenario.THRESHOLD))
    low, high = s.probability_bounds
    odds_low, odds_high = s.odds_bounds
    z = float(critical_value(scenario.CONFIDENCE))
    saving = s.fixed_units["pass-fail"] - s.fixed_units["fitted-shape"]
    parts = []
    add = parts.append

    from tailstop.commands.demo import DEFAULT_FOLDER as folder
    from tailstop.workbooks.demo_books import LOG_BOOK as log_book, PLAN_BOOK as plan_book

    add(f"""# Worked example: solenoid valves on a cycling bench

This page follows one test from the planning meeting to the sentence that goes
into the report. The scenario is the demo that ships with tailstop; the
company, the valves and every lifetime are invented. `tailstop demo` writes it
as two books in `{folder}/`: `{log_book}` (the bench log with its
decision column, running estimate and charts) and `{plan_book}` (the
planning sheet). The cell addresses on this page are those of a log with the
lifetimes in column B from row 2 and the plan in F1:F4.
Every number below is computed by tailstop's formulas from that scenario
(`udfs/tailstop/workbooks/scenario.py`): the page is written by
`python docs/tools/worked_example.py`, and a test checks that it matches the
code. Read [cautions.md](cautions.md) alongside; the formulas are described
in [formulas.md](formulas.md), the method in [method.md](method.md).

## The question

A maker of irrigation solenoid valves runs valves on a cycling bench until the
seat leaks. The warranty covers {_units(scenario.THRESHOLD)} thousand switching
cycles ({unit}). Reliability wants the share of valves that outlast the
warranty, P(life > {c} {unit}), with the **odds known within a factor {d} at
{percent} confidence**. Lifetimes and threshold are both entered in {unit}.

## The planning meeting

Before any valve goes on the bench, the team fixes the plan and checks what it
will cost. An earlier valve of a similar design suggests gamma lifetimes with a
shape of about {shape} and a scale of about {scale} {unit} — a guess, not a
measurement. Under that guess

    =TAIL_PROB({c}, {shape}, {scale})      → {s.guess_p:.4f}

so roughly {s.guess_p * 100:.0f} % of valves would outlast the warranty. A fixed-size
test would need, by method:

| method | `=UNITS_REQUIRED({c}, {shape}, {scale}, {d}, {level}, method)` |
|---|---|
""")
    for method in PLAN_METHODS:
        add(f"| {method} | {_units(s.fixed_units[method])} |\n")
    add(f"""
Those counts assume the guess is right. The stopping rule does not need the
guess: it re-estimates as the valves come off the bench and stops when the
accuracy is reached. What it will probably do, under the same guess, for the
three methods side by side:

```
$ tailstop plan {" ".join(plan_argv())}
{s.plan_output}
```

In the planning sheet, `=PLAN_SUMMARY({c}, {shape}, {scale}, {d}, {level}, {m})`
gives the pass-fail column as a two-column table (the same exact figures), and
`=PLAN_SUMMARY({c}, {shape}, {scale}, {d}, {level}, {m}, "fitted-shape")` a
simulated fitted-shape table of its own.

On average the rule tests about as many units as the fixed-size plan
(E[N] ≈ {s.plan_expected["pass-fail"]:.1f} for pass-fail against n* =
{s.fixed_units["pass-fail"]}), without having to trust the guess. The exact
pass-fail coverage at the guess is {s.plan_coverage:.4f} against the nominal
{level}: {_coverage_verdict(s.plan_coverage, scenario.CONFIDENCE)}

The guess could be off. The same plan at half and at twice the guessed odds
(pass-fail, exact, `=PLAN_SUMMARY_FROM_P(p, {d}, {level}, {m})`):

| guessed p | n* | E[N] | 95 % of tests stop by | coverage |
|---|---|---|---|---|
""")
    for label, n_star, expected, late, coverage in s.sensitivity:
        add(f"| {label} | {_units(n_star)} | {expected:.1f} | {_units(late)} | {coverage:.4f} |\n")
    budget = max(row[3] for row in s.sensitivity)
    add(f"""
so the bench should be booked for up to about {_units(budget)} valves, and the
log prepared with room for more.

**The decision.** The shape of {shape} comes from a different design, so
known-shape is out: a wrong shape biases the estimate without widening the
interval. Fitted-shape would save about {saving} units on the fixed-size count,
but it rests on the gamma model holding in the tail beyond {c} {unit}, which a
pilot cannot confirm. The team chooses **pass-fail**, which needs no lifetime
model, and keeps fitted-shape as a cross-check at the end. Because of that
cross-check, every valve runs until it leaks (under pass-fail alone a valve
could come off the bench at {c} {unit} and be entered as `{c}+`).

The plan, written into the log before the first valve: threshold {c} {unit},
accuracy factor {d}, confidence {level}, pilot {m} valves, method pass-fail,
rule consulted after every valve. None of these changes once testing starts.

## The pilot

The first {m} valves, in the order they came off the bench:

| valve | {unit} to leak | beyond {c}? |
|---:|---:|:---:|
""")
    for i, value in enumerate(s.log[:m], start=1):
        add(f"| {i} | {value:.1f} | {'yes' if value > scenario.THRESHOLD else 'no'} |\n")
    shape_fit, scale_fit, pvalue = s.pilot_fit
    add(f"""
{_count(s.pilot_beyond, m)} of {m} outlasted {c} {unit}. With the lifetimes in
B2:B{m + 1} and the plan in F1:F4 (threshold, accuracy, confidence, pilot):

| cell | formula | shows |
|---|---|---|
| F6 | `=UNITS_NEEDED_NOW(B2:B{m + 1}, F1, F2, F3)` | {_units(s.pilot_needed)} |
| F7 | `=TWO_STAGE_UNITS(B2:B{m + 1}, F1, F2, F3)` | {_units(s.two_stage)} |
| F8 | `=GAMMA_FIT_PVALUE(B2:B{m + 1})` | {_fixed(pvalue, 3)} |
| F9 | `=TAIL_METHOD_NOTES(B2:B{m + 1}, F1)` | {"; ".join(s.pilot_notes)} |

{_pilot_reading(s, m, unit)}

## The decision column

In C2 of the log sheet:

    =STOP_DECISION_COLUMN(B2:B1048576, F1, F2, F3, F4)

Valves 1 to {m - 1} read `PILOT`; from valve {m} on the rule is consulted after
every valve. How the log developed:

| valves tested | beyond {c} | estimate `TAIL_PROB_EST` | units needed now `UNITS_NEEDED_NOW` | decision |
|---:|---:|---:|---:|---|
""")
    for n, k, p_hat, needed, decision in s.progress:
        add(f"| {n} | {k} | {p_hat:.3f} | {_units(needed)} | `{decision}` |\n")
    add(f"""
The number of units needed moves with the estimate; the test ends when the
count of valves tested catches up with it.

## The stop

After valve {s.stop} the column reads `STOP`. The rule stops at the first n ≥
{m} with n ≥ (z / ln d)² σ̂²ₙ, where z = {z:.4f} for {percent}, so
(z / ln {d})² = {s.boundary:.2f}, and for pass-fail σ̂²ₙ = 1 / (p̂ (1 − p̂)) with
the plain share p̂ = S / n:

- after valve {s.stop - 1}, with S = {s.beyond_before}: p̂ = {s.beyond_before} / {s.stop - 1} =
  {s.beyond_before / (s.stop - 1):.4f} and (z / ln d)² σ̂² = {s.needed_before:.1f} > {s.stop - 1}: continue;
- after valve {s.stop}, with S = {beyond}: p̂ = {beyond} / {s.stop} =
  {beyond / s.stop:.4f} and (z / ln d)² σ̂² = {s.needed_at_stop:.1f} ≤ {s.stop}: stop.

Testing ends with valve {s.stop}. (The demo's invented log runs on to valve
{_units(len(s.log))}; in a real test there are no rows after the stop. Here
they read `PAST STOP` and take no part in the estimate.)

## The final estimate

From the valves up to and including the STOP row — B2:B{s.stop + 1} — and from
none after it, with the same threshold, accuracy and method as the column:

| formula | shows |
|---|---|
| `=TAIL_PROB_EST($B$2:B{s.stop + 1}, F1)` | {s.estimate:.4f} |
| `=TAIL_PROB_BOUNDS($B$2:B{s.stop + 1}, F1, F2)` | {low:.4f} · {high:.4f} |
| `=TAIL_ODDS_BOUNDS($B$2:B{s.stop + 1}, F1, F2)` | {odds_low:.4f} · {odds_high:.4f} |
| `=TAIL_METHOD_NOTES($B$2:B{s.stop + 1}, F1)` | {"; ".join(s.notes)} |

{beyond} of {s.stop} valves outlasted {c} {unit}: p̂ = {beyond}/{s.stop} = {s.estimate:.4f},
odds {s.odds:.4f}, and the odds within a factor {d} give
{s.odds:.4f} / {d} = {odds_low:.4f} to {s.odds:.4f} × {d} = {odds_high:.4f}, that is a
probability between {low:.4f} and {high:.4f}.

The headless tools, which also know the accuracy and the confidence, check in
addition that the log holds the units the accuracy needs
(`tailstop.core.notes.method_notes(..., accuracy={d}, confidence={level})`):
{_headless_verdict(s.headless_notes)}

**The cross-check.** On the same {s.stop} valves, fitted-shape gives

| formula | shows |
|---|---|
| `=TAIL_PROB_EST($B$2:B{s.stop + 1}, F1, "fitted-shape")` | {s.cross_estimate:.4f} |
| `=TAIL_PROB_BOUNDS($B$2:B{s.stop + 1}, F1, F2, "fitted-shape")` | {s.cross_bounds[0]:.4f} · {s.cross_bounds[1]:.4f} |
| `=GAMMA_FIT_SHAPE($B$2:B{s.stop + 1})` | {s.cross_fit[0]:.2f} |
| `=GAMMA_FIT_SCALE($B$2:B{s.stop + 1})` | {s.cross_fit[1]:.0f} ({unit}) |
| `=GAMMA_FIT_PVALUE($B$2:B{s.stop + 1})` | {s.cross_fit[2]:.3f} |
| `=TAIL_METHOD_NOTES($B$2:B{s.stop + 1}, F1, "fitted-shape")` | {"; ".join(s.cross_notes)} |

{_cross_check_verdict(s)} The cross-check is not a second, better answer:
the method was fixed before the test, and the reported figure is the
pass-fail one. Picking whichever method looks better after the fact voids the
stated confidence.

## What goes into the report

State the figure with its bounds, the method and the plan, and the limits:

> Of {s.stop} valves of design X, drawn at random from lot Y and run to seat
> leakage on cycling bench Z under the conditions of test specification W,
> {beyond} outlasted {_units(scenario.THRESHOLD)} {unit}. The estimated
> probability that a valve outlasts {_units(scenario.THRESHOLD)} {unit} is
> {s.estimate:.3f}; the fixed-accuracy interval, odds within a factor {d},
> is {low:.3f} to {high:.3f}. Method: pass-fail (no lifetime model), with the
> purely sequential fixed-accuracy stopping rule (Banerjee & Mukhopadhyay
> 2016) at a nominal confidence of {percent}, a pilot of {m} valves, all plan
> parameters fixed before testing; the rule stopped at valve {s.stop}. Planned
> coverage, exact at the planning guess p = {s.guess_p:.3f}: {s.plan_coverage:.3f}.
> The confidence is asymptotic. The figure holds for this design, lot and
> bench conditions at {_units(scenario.THRESHOLD)} {unit} only.
> Computed with tailstop (version, workbook reference).

And, from [cautions.md](cautions.md), what a reader must be told or what the
engineer must have checked before signing:

- the valves are a random sample of the population the statement is about, tested
  independently under identical conditions, in the order they are logged;
- the confidence is asymptotic: at {s.stop} valves the real coverage can differ
  a little from {percent} (the planning figure above is the check);
- the estimate at a sequential stop is slightly biased (for pass-fail towards ½),
  and the plan was not changed after looking at the data;
- nothing here extends beyond {_units(scenario.THRESHOLD)} {unit}, this bench, this duty cycle
  or this failure definition;
- the governing standards, the customer's requirements and licensed engineering
  judgment take precedence over this figure.

## Behind the scenes

Only in an invented scenario can the answer be looked up. The demo's valves
were drawn from a gamma distribution with shape {_g(scenario.TRUE_SHAPE)} and
scale {_g(scenario.TRUE_SCALE)} {unit}, so the true probability is
`=TAIL_PROB({c}, {_g(scenario.TRUE_SHAPE)}, {_g(scenario.TRUE_SCALE)})` =
{s.true_p:.4f}; the planning guess ({s.guess_p:.4f}) was off, which the rule
did not need to know. The reported interval, {low:.4f} to {high:.4f},
{"covers" if low <= s.true_p <= high else "misses"} it. That is one test:
over many tests of these valves with this plan the interval would cover the
true value in a share `=PLAN_COVERAGE({c}, {_g(scenario.TRUE_SHAPE)}, {_g(scenario.TRUE_SCALE)}, {d}, {level}, {m})` =
{s.true_coverage:.4f} of them{_true_coverage_remark(s)}

{_cross_stop_text(s, m)}
""")
    return reflow("".join(parts))


def _true_coverage_remark(s):
    confidence = scenario.CONFIDENCE
    if s.true_coverage >= confidence:
        return "."
    text = f", a little short of the nominal {confidence * 100:g} %"
    if all(row[4] >= confidence for row in s.sensitivity):
        text += (", although the three planning points above all reached it: the exact pass-fail coverage moves up "
                 "and down with p in small steps, because a share of n units takes only whole counts, and three "
                 "points can miss a dip. `tailstop plan ... --png` plots the coverage against p around the guess, "
                 "which shows such dips before the test")
    return text + (". This is what \"asymptotic\" means at real sizes "
                   "([method.md](method.md#what-asymptotic-means-at-real-sizes)).")


def reflow(markdown, width=79):
    """Wrap the prose paragraphs, list items and quotes of a page; leave tables, code and headings alone."""
    out, paragraph, fenced = [], [], False

    def flush():
        if paragraph:
            out.extend(_wrap_paragraph(paragraph, width))
            paragraph.clear()

    for line in markdown.split("\n"):
        if line.startswith("```"):
            flush()
            fenced = not fenced
            out.append(line)
        elif fenced or line.startswith(("|", "#", "    ")) or not line.strip():
            flush()
            out.append(line)
        else:
            paragraph.append(line)
    flush()
    return "\n".join(out)


_KEEP = "\x00"  # stands in for a space inside `code`, so that a code span is never split across lines


def _wrap_paragraph(lines, width):
    return [line.replace(_KEEP, " ") for line in _wrap_kept(
        [re.sub(r"`[^`]*`", lambda span: span.group().replace(" ", _KEEP), line) for line in lines], width)]


def _wrap_kept(lines, width):
    wrap = dict(width=width, break_long_words=False, break_on_hyphens=False)
    if lines[0].startswith("> "):
        text = " ".join(line[2:].strip() for line in lines)
        return textwrap.wrap(text, initial_indent="> ", subsequent_indent="> ", **wrap)
    if lines[0].startswith("- "):
        items, wrapped = [], []
        for line in lines:
            if line.startswith("- "):
                items.append(line[2:].strip())
            else:
                items[-1] += " " + line.strip()
        for item in items:
            wrapped += textwrap.wrap(item, initial_indent="- ", subsequent_indent="  ", **wrap)
        return wrapped
    return textwrap.wrap(" ".join(line.strip() for line in lines), **wrap)


def _pilot_reading(s, m, unit):
    planned = s.fixed_units["pass-fail"]
    if isinstance(s.pilot_needed, str):
        reading = (f"The pilot cannot estimate the units needed yet — every pilot valve is on one side of the "
                   f"threshold, and the cell says so. A two-stage plan could not be set from this pilot at all; the "
                   f"sequential rule simply continues, valve by valve.")
    else:
        reading = (f"The pilot's estimate says about {_units(s.pilot_needed)} units, "
                   f"{'more' if s.pilot_needed > planned else 'no more'} than the {planned} planned: "
                   f"{s.pilot_beyond} of {m} valves says little about a share of this size. A two-stage plan would "
                   f"now order {_units(s.two_stage)} valves in all on the strength of those {m}. The sequential rule "
                   f"instead keeps re-estimating, valve by valve.")
    shape_fit, scale_fit, _ = s.pilot_fit
    if not isinstance(shape_fit, str):
        reading += (f" (The pilot's gamma fit, shape {shape_fit:.2f} and scale {scale_fit:.0f} {unit}, is noted for "
                    f"the cross-check; with {m} units it decides nothing.)")
    return reading


def _count(k, n):
    words = {0: "None", 1: "One", 2: "Two", 3: "Three", 4: "Four", 5: "Five", 6: "Six", 7: "Seven", 8: "Eight",
             9: "Nine", 10: "Ten"}
    return words.get(k, str(k)) if k <= n else str(k)


def _coverage_verdict(coverage, confidence):
    if coverage >= confidence:
        return "the plan reaches its nominal level at the guess, and no calibration is needed."
    return (f"the plan falls short of its nominal level by {confidence - coverage:.4f} at the guess; "
            "`tailstop plan ... --calibrate` gives the critical value that would close the gap "
            "([method.md](method.md#what-asymptotic-means-at-real-sizes)).")


def _headless_verdict(lines):
    if not lines:
        return "nothing to add — the log holds the units the accuracy needs."
    return "\n\n" + _notes_text(lines)


def _cross_check_verdict(s):
    low, high = s.probability_bounds
    inside = low <= s.cross_estimate <= high
    fit_ok = s.cross_fit[2] >= 0.05
    fit = (f"The gamma fit check passes (p = {s.cross_fit[2]:.3f})" if fit_ok
           else f"The gamma fit check fails (p = {s.cross_fit[2]:.3f}), so the fitted-shape figure is not to be used")
    where = ("and the fitted-shape estimate lies inside the pass-fail bounds." if inside
             else "and the fitted-shape estimate lies outside the pass-fail bounds: a reason to look for the "
                  "cause (a mix of failure modes, a change on the bench) before anything is reported.")
    return f"{fit}, {where}"


def _cross_stop_text(s, m):
    if s.cross_stop is None:
        return ""
    return (f"Had the team trusted the gamma model and run the column with fitted-shape, the rule would have "
            f"stopped at valve {s.cross_stop} instead of {s.stop} — the saving that the planning meeting "
            f"weighed against the risk of a wrong model.")


def main(argv=None):
    sys.stdout.write(render())
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
