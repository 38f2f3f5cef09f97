"""``tailstop plan``: the three methods side by side at one planning guess.

Prints n*, E[N], the spread of N and the real coverage of the final interval
for pass-fail (exact), known-shape and fitted-shape (simulated), optionally the
calibrated critical value of each method (``--calibrate``) and a plot
(``--png FILE``, needs the optional ``plot`` extra: matplotlib).
"""
from __future__ import annotations

import math
import sys
import time

# numpy, scipy and the core are imported where they are used: `tailstop plan --help` needs none of them

__all__ = ["ProgressBar", "add_arguments", "run", "PLAN_UNITS_LIMIT"]

# pass-fail is propagated exactly over some 20 n* units, in O(n_max²): beyond this no run finishes
PLAN_UNITS_LIMIT = 1_000_000


class ProgressBar:
    """A one-line text progress bar that appears only once a task has run for ``delay`` seconds.

    Call it with the fraction done (0..1); ``close()`` ends the line if the bar was shown.
    """

    width = 30

    def __init__(self, label, stream=None, delay=2.0, clock=time.monotonic):
        self.label, self.stream, self.delay, self.clock = label, stream or sys.stderr, delay, clock
        self.start = clock()
        self.shown = False
        self._last = -1

    def __call__(self, fraction):
        if self.clock() - self.start < self.delay:
            return
        percent = int(100 * min(max(fraction, 0.0), 1.0))
        if percent == self._last:
            return
        self._last = percent
        filled = self.width * percent // 100
        self.stream.write(f"\r{self.label} [{'#' * filled}{'.' * (self.width - filled)}] {percent:3d}%")
        self.stream.flush()
        self.shown = True

    def close(self):
        if self.shown:
            self.stream.write("\n")
            self.stream.flush()


HELP = "What the sequential stopping rule will do under a planning guess: the three methods side by side."


def add_arguments(parser):
    parser.add_argument("--threshold", type=float, required=True, help="the threshold c (mission time, warranty limit)")
    parser.add_argument("--shape", type=float, required=True,
                        help="guessed shape > 0 of the model (gamma a, Weibull beta, lognormal sigma)")
    parser.add_argument("--scale", type=float, required=True,
                        help="guessed scale > 0 of the model, unit of the lifetimes (gamma s, Weibull eta, "
                             "lognormal median)")
    parser.add_argument("--model", default="gamma", type=str.lower, choices=("gamma", "weibull", "lognormal"),
                        help="lifetime model of the guess (default gamma); pass-fail stays exact")
    parser.add_argument("--accuracy", type=float, required=True, help="odds to be known within this factor d > 1")
    parser.add_argument("--confidence", type=float, default=0.95, help="confidence level, e.g. 0.95 (default)")
    parser.add_argument("--pilot", type=int, default=10, help="pilot sample, units before the rule is consulted (default 10)")
    parser.add_argument("--replications", type=int, default=10_000, help="simulated runs for known-shape (default 10,000)")
    parser.add_argument("--fitted-replications", type=int, default=10_000,
                        help="simulated runs for fitted-shape (default 10,000)")
    parser.add_argument("--seed", type=int, help="seed of the simulation (default: the fixed seed of every "
                                                 "tailstop simulation, so that runs repeat)")
    parser.add_argument("--test-time", type=float, metavar="T",
                        help="every unit still running at T is stopped there (a time-terminated test); "
                             "pass-fail needs T at or beyond the threshold")
    parser.add_argument("--calibrate", action="store_true",
                        help="also find the smallest critical value that reaches the nominal coverage")
    parser.add_argument("--png", metavar="FILE", help="write a plot of the distribution of N and of coverage "
                                                      "against the true probability (needs matplotlib)")
    return run


def run(args, out=None, progress_stream=None):
    from ..core import operating

    out = out or sys.stdout
    if args.seed is None:
        args.seed = operating.DEFAULT_SEED
    if args.png:
        _require_matplotlib()
    plan = (args.threshold, args.shape, args.scale, args.accuracy, args.confidence, args.pilot)
    too_large = _too_large(plan)
    if too_large:
        print(f"tailstop plan: {too_large}", file=sys.stderr)
        return 1
    counts = {"known-shape": args.replications, "fitted-shape": args.fitted_replications}
    test_time = getattr(args, "test_time", None)
    if test_time is not None and (args.calibrate or args.png):
        raise ValueError("--test-time cannot be combined with --calibrate or --png yet")
    bar = ProgressBar("simulating", progress_stream)
    try:
        if test_time is None:
            comparison = operating.compare_methods(*plan, replications=args.replications, seed=args.seed,
                                                   fitted_replications=args.fitted_replications, progress=bar,
                                                   model=args.model)
        else:
            comparison = _with_test_time(plan, test_time, counts, args.seed, bar, args.model)
    finally:
        bar.close()
    first = next(iter(comparison.results.values()))
    print(f"Plan: threshold {args.threshold:g}, {args.model} shape {args.shape:g}, scale {args.scale:g}; "
          f"odds within x{args.accuracy:g} at {args.confidence:g} confidence; pilot {args.pilot}", file=out)
    if test_time is not None:
        print(f"Every unit still running at {test_time:g} is stopped there (a time-terminated test)"
              + ("" if "pass-fail" in comparison.results else
                 "; pass-fail is left out: it cannot see past a test time below the threshold"), file=out)
    print(f"True probability beyond the threshold under the guess: p = {first.probability:.6g}", file=out)
    print(file=out)
    print(_aligned(comparison.table()), file=out)
    if "pass-fail-exact" in comparison.results:
        print(_guarantee_line(args.accuracy, args.confidence, args.pilot), file=out)
    if args.calibrate:
        print(file=out)
        print(_aligned(_calibration_table(plan, counts, args.seed, progress_stream, args.model)), file=out)
        print("Calibration simulates on common random numbers (every run sees the same lifetimes at every z'), "
              "so its coverage at z can differ from the table above within Monte Carlo error; "
              "(a..b): the z' where coverage + 2 s.e. and coverage - 2 s.e. reach the nominal level.", file=out)
    if args.png:
        _plot(args.png, plan, comparison, counts, args.seed, progress_stream, args.model)
        print(f"\nPlot written to {args.png}", file=out)
    print(f"\nFigures assume independent units with {args.model} lifetimes at the guessed parameters "
          "(pass-fail: only the probability). Simulated figures: ± one Monte Carlo standard error.", file=out)
    return 0


def _too_large(plan):
    """Why the plan cannot be computed (its size, in words), or None."""
    from ..sheet import FORMULAS
    from ..sheet.cells import ERROR_PREFIX, units_text

    threshold, shape, scale, accuracy, confidence, _ = plan
    units = FORMULAS["UNITS_REQUIRED"](threshold, shape, scale, accuracy, confidence, "pass-fail")
    if isinstance(units, str):
        return units.removeprefix(ERROR_PREFIX).strip() if units.startswith(ERROR_PREFIX) else None
    if units > PLAN_UNITS_LIMIT:
        return (f"this plan needs {units_text(units)} by pass-fail; `tailstop plan` computes plans up to "
                f"{PLAN_UNITS_LIMIT:,} units: ask for a larger accuracy factor or choose a threshold nearer the "
                "typical life")
    return None


def _with_test_time(plan, test_time, counts, seed, progress, model="gamma"):
    """The methods side by side when every unit is stopped at ``test_time``."""
    from ..core import operating
    from ..core.operating.time_terminated import simulate_with_test_time

    threshold = plan[0]
    results = {}
    if test_time >= threshold:
        results["pass-fail"] = operating.operating_characteristics(*plan, "pass-fail", model=model)
    for share, method in ((0.3, "known-shape"), (0.7, "fitted-shape")):
        base = 0.0 if method == "known-shape" else 0.3
        results[method] = simulate_with_test_time(
            *plan, method, test_time, replications=counts[method], seed=seed, model=model,
            progress=lambda fraction, base=base, share=share: progress(base + share * fraction))
    return operating.MethodComparison(results)


EXACT_METHODS = ("pass-fail", "pass-fail-exact")


def _guarantee_line(accuracy, confidence, pilot):
    """What pass-fail-exact guarantees, and its price, in one sentence."""
    from ..core import guaranteed

    tuned = guaranteed.tuning(accuracy, confidence, pilot)
    return (f"pass-fail-exact: boundary x{tuned.factor:.3f} of pass-fail's; exact coverage >= {confidence:g} "
            f"(certified >= {tuned.coverage_bound:.4f}) for every p in [{tuned.p_low:.2g}, 1 - {tuned.p_low:.2g}]; "
            f"pass-fail's coverage is asymptotic.")


def _aligned(rows):
    widths = [max(len(str(row[i])) for row in rows) for i in range(len(rows[0]))]
    lines = []
    for row in rows:
        cells = [str(row[0]).ljust(widths[0])] + [str(v).rjust(w) for v, w in zip(row[1:], widths[1:])]
        lines.append("  ".join(cells))
    return "\n".join(lines)


def _evaluator(plan, method, counts, seed, model="gamma"):
    from ..core import operating

    if method == "pass-fail":
        return lambda z: operating.operating_characteristics(*plan, method, stop_z=z, model=model)
    return lambda z: operating.operating_characteristics(*plan, method, replications=counts[method], seed=seed,
                                                         stop_z=z, common_numbers=True, model=model)


def _calibration_table(plan, counts, seed, progress_stream, model="gamma"):
    from ..core import operating

    methods = ("pass-fail", "known-shape", "fitted-shape")
    rows = [["calibrated critical value", *methods]]
    found = {}
    for method in methods:
        bar = ProgressBar(f"calibrating {method}", progress_stream)
        try:
            found[method] = operating.calibrate(_evaluator(plan, method, counts, seed, model), plan[4], progress=bar)
        finally:
            bar.close()

    def cell(method, figure):
        calibration = found[method]
        if not calibration.reached:
            return "not reached"
        return figure(calibration)

    def z_text(c):
        text = f"{c.z_calibrated:.4f}"
        if c.z_range is not None:
            low, high = c.z_range
            text += f" ({low:.3f}..{high:.3f})" if math.isfinite(high) else f" ({low:.3f}..)"
        return text

    def with_se(value, se, digits):
        return f"{value:.{digits}f}" + (f" ± {se:.2g}" if se else "")

    rows.append(["z", *(f"{found[m].z:.4f}" for m in methods)])
    rows.append(["coverage at z", *(with_se(found[m].at_z.coverage, found[m].at_z.coverage_se, 4) for m in methods)])
    rows.append(["calibrated z'", *(cell(m, z_text) for m in methods)])
    rows.append(["inflation z'/z", *(cell(m, lambda c: f"{c.inflation:.4f}") for m in methods)])
    rows.append(["coverage at z'", *(cell(m, lambda c: with_se(c.calibrated.coverage, c.calibrated.coverage_se, 4))
                                     for m in methods)])
    rows.append(["E[N] at z'", *(cell(m, lambda c: with_se(c.calibrated.expected_units, c.calibrated.expected_units_se, 1))
                                 for m in methods)])
    rows.append(["extra expected units", *(cell(m, lambda c: f"{c.extra_units:+.1f}") for m in methods)])
    return rows


def _require_matplotlib():
    try:
        import matplotlib  # noqa: F401
    except ImportError:
        raise ValueError("--png needs matplotlib; install the plotting extra: pip install 'tailstop[plot]'") from None


def _scale_for(probability, threshold, shape, model="gamma"):
    """The scale of the model that gives P(X > threshold) = probability at this shape."""
    from scipy import special

    if model == "weibull":
        return threshold / (-math.log(probability)) ** (1.0 / shape)
    if model == "lognormal":
        return threshold / math.exp(shape * float(special.ndtri(1.0 - probability)))
    return threshold / special.gammainccinv(shape, probability)


def _coverage_curves(plan, counts, seed, progress, model="gamma"):
    """Coverage against the true probability (odds of the guess × 1/3 .. 3), shape held at the guess."""
    import numpy as np

    from ..core import operating
    from ..core.models import get_model

    threshold, shape, scale, accuracy, confidence, pilot = plan
    p_guess = float(get_model(model).tail_probability(threshold, shape, scale).p)
    odds = p_guess / (1 - p_guess)
    curves = {}
    points = {"pass-fail": 25, "pass-fail-exact": 25, "known-shape": 9, "fitted-shape": 5}
    share = {"known-shape": 5, "fitted-shape": 4}
    total = sum(points.values())
    done = 0
    for method, count in points.items():
        grid = odds * np.exp(np.linspace(-math.log(3), math.log(3), count))
        probabilities = grid / (1 + grid)
        values, errors = [], []
        for p in probabilities:
            truth = (threshold, shape, _scale_for(p, threshold, shape, model), accuracy, confidence, pilot)
            options = {"model": model}
            if method not in EXACT_METHODS:
                options.update(replications=max(200, counts[method] // share[method]), seed=seed)
            result = operating.operating_characteristics(*truth, method, **options)
            values.append(result.coverage)
            errors.append(result.coverage_se)
            done += 1
            progress(done / total)
        curves[method] = (probabilities, np.array(values), np.array(errors))
    return curves


def _plot(path, plan, comparison, counts, seed, progress_stream, model="gamma"):
    import numpy as np
    from matplotlib.figure import Figure
    from matplotlib.ticker import FuncFormatter

    bar = ProgressBar("plotting", progress_stream)
    try:
        curves = _coverage_curves(plan, counts, seed, bar, model)
    finally:
        bar.close()
    figure = Figure(figsize=(11, 4.5), layout="constrained")
    left, right = figure.subplots(1, 2)
    colours = {"pass-fail": "tab:blue", "pass-fail-exact": "tab:purple", "known-shape": "tab:green",
               "fitted-shape": "tab:orange"}
    for method, result in comparison.results.items():
        if result.exact:
            n = np.arange(result.distribution.size)
            left.plot(n, result.distribution, color=colours[method], label=f"{method} (exact)")
        else:
            stopped = result.units[result.units <= result.n_max]
            counts_n = np.bincount(stopped) / result.units.size
            left.step(np.arange(counts_n.size), counts_n, where="mid", color=colours[method],
                      label=f"{method} ({result.replications:,} runs)")
        left.axvline(result.n_star, color=colours[method], linestyle=":", linewidth=1)
    left.set_xlabel("units tested N")
    left.set_ylabel("P(N = n)")
    left.set_title("Distribution of N (dotted: fixed-size n*)")
    left.legend()
    confidence = plan[4]
    for method, (probabilities, values, errors) in curves.items():
        if method in EXACT_METHODS:
            right.plot(probabilities, values, color=colours[method], marker=".", label=f"{method} (exact)")
        else:
            right.errorbar(probabilities, values, yerr=2 * errors, color=colours[method], marker="o", capsize=3,
                           label=f"{method} (± 2 s.e.)")
    right.axhline(confidence, color="black", linestyle="--", linewidth=1, label=f"nominal {confidence:g}")
    right.axvline(comparison.results["pass-fail"].probability, color="grey", linestyle=":", linewidth=1)
    right.set_xscale("log")
    plain = FuncFormatter(lambda value, _: f"{value:.3g}")
    right.xaxis.set_major_formatter(plain)
    right.xaxis.set_minor_formatter(plain)
    right.set_xlabel("true probability beyond the threshold (dotted: the guess)")
    right.set_ylabel("coverage of the final interval")
    right.set_title("Coverage against the true probability")
    right.legend()
    figure.savefig(path, dpi=110)
