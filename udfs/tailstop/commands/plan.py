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

__all__ = ["ProgressBar", "add_arguments", "run", "METHODS"]


class ProgressBar:
    """Progress of a long computation on the terminal (tqdm), with the time left; silent off a terminal.

    Call it with the fraction done (0..1); ``close()`` ends the line. The bar
    appears only once the task has run for ``delay`` seconds, and never when
    the stream is not a terminal (a file, a pipe, a test's captured output).
    """

    def __init__(self, label, stream=None, delay=2.0, refresh=0.5):
        from tqdm import tqdm

        self.stream = stream or sys.stderr
        quiet = not (hasattr(self.stream, "isatty") and self.stream.isatty())
        self.bar = tqdm(total=1000, desc=label, file=self.stream, disable=quiet, delay=delay, leave=False,
                        mininterval=refresh, miniters=1,
                        bar_format="{desc} {percentage:3.0f}%|{bar:30}| {elapsed} elapsed, about {remaining} left")
        self._done = 0

    @property
    def shown(self):
        return not self.bar.disable

    def __call__(self, fraction):
        done = int(1000 * min(max(fraction, 0.0), 1.0))
        if done > self._done:
            self.bar.update(done - self._done)
            self._done = done

    def close(self):
        self.bar.close()


HELP = "What the sequential stopping rule will do under a planning guess: the three methods side by side."
METHODS = ("pass-fail", "pass-fail-exact", "known-shape", "fitted-shape")
EXACT_METHODS = ("pass-fail", "pass-fail-exact")


def add_arguments(parser):
    parser.add_argument("--threshold", type=float, help="the threshold c (mission time, warranty limit)")
    parser.add_argument("--shape", type=float,
                        help="guessed shape > 0 of the model (gamma a, Weibull beta, lognormal sigma)")
    parser.add_argument("--scale", type=float,
                        help="guessed scale > 0 of the model, unit of the lifetimes (gamma s, Weibull eta, "
                             "lognormal median)")
    parser.add_argument("--model", default="gamma", type=str.lower, choices=("gamma", "weibull", "lognormal"),
                        help="lifetime model of the guess (default gamma); pass-fail stays exact")
    parser.add_argument("--p-guess", type=float, metavar="P",
                        help="plan pass-fail from a guessed probability of outlasting the threshold instead of a "
                             "gamma guess (exact, as PLAN_SUMMARY_FROM_P)")
    parser.add_argument("--accuracy", type=float, required=True, help="odds to be known within this factor d > 1")
    parser.add_argument("--confidence", type=float, default=0.95, help="confidence level, e.g. 0.95 (default)")
    parser.add_argument("--pilot", type=int, default=10, help="pilot sample, units before the rule is consulted (default 10)")
    parser.add_argument("--method", nargs="+", choices=METHODS, metavar="METHOD",
                        help="one or more of pass-fail, pass-fail-exact, known-shape, fitted-shape (default: all; "
                             "with --p-guess the two exact ones)")
    parser.add_argument("--replications", type=int, default=10_000, help="simulated runs for known-shape (default 10,000)")
    parser.add_argument("--fitted-replications", type=int, default=10_000,
                        help="simulated runs for fitted-shape (default 10,000)")
    parser.add_argument("--seed", type=int, help="seed of the simulation (default: the fixed seed of every "
                                                 "tailstop simulation, so that runs repeat)")
    parser.add_argument("--test-time", type=float, metavar="T",
                        help="every unit still running at T is stopped there (a time-terminated test); "
                             "pass-fail needs T at or beyond the threshold")
    parser.add_argument("--calibrate", action="store_true",
                        help="also find the smallest critical value that reaches the nominal coverage for every "
                             "method (it is found anyway for a method whose coverage falls short)")
    parser.add_argument("--png", metavar="FILE", help="write a plot of the distribution of N and of coverage "
                                                      "against the true probability (needs matplotlib)")
    parser.add_argument("--force", action="store_true", help="let --png replace an existing file")
    return run


def _methods_and_plan(args):
    """(methods, plan tuple or None, p or None) after checking the arguments together; ValueError in words."""
    from ..core import guaranteed

    default = METHODS if args.p_guess is None else EXACT_METHODS
    if not guaranteed.tunable(args.accuracy, args.confidence):
        default = tuple(m for m in default if m != "pass-fail-exact")  # refused this close to d = 1
    methods = tuple(dict.fromkeys(args.method or default))
    if args.p_guess is not None:
        if not 0 < args.p_guess < 1:
            raise ValueError(f"--p-guess must be strictly between 0 and 1 (got {args.p_guess:g})")
        if any(v is not None for v in (args.threshold, args.shape, args.scale)):
            raise ValueError("give either --p-guess or --threshold, --shape and --scale, not both")
        if not set(methods) <= set(EXACT_METHODS):
            raise ValueError("--p-guess plans pass-fail and pass-fail-exact only (known-shape and fitted-shape "
                             "need a model guess: --threshold, --shape, --scale)")
        return methods, None, args.p_guess
    missing = [name for name in ("threshold", "shape", "scale") if getattr(args, name) is None]
    if missing:
        raise ValueError(f"give --{', --'.join(missing)} (the model guess), or --p-guess for pass-fail alone")
    return methods, (args.threshold, args.shape, args.scale, args.accuracy, args.confidence, args.pilot), None


def _beyond_any_test(plan):
    """The refusal of a plan whose pass-fail unit count is beyond any test (UNITS_REQUIRED's text), or None."""
    if plan is None:
        return None
    from ..sheet import FORMULAS
    from ..sheet.cells import ERROR_PREFIX

    threshold, shape, scale, accuracy, confidence, _ = plan
    units = FORMULAS["UNITS_REQUIRED"](threshold, shape, scale, accuracy, confidence, "pass-fail")
    if isinstance(units, str) and units.startswith(ERROR_PREFIX) and "more than any test can run" in units:
        return units.removeprefix(ERROR_PREFIX).strip()
    return None


def _check_png(path, force):
    """Refuse a --png target before any computation: an existing file (without --force), a missing folder."""
    from pathlib import Path

    target = Path(path)
    if target.is_dir():
        raise ValueError(f"--png {path}: that is a folder; name a file such as plan.png")
    if target.exists() and not force:
        raise ValueError(f"--png {path}: the file exists; choose another name or add --force to replace it")
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.is_dir():
        raise ValueError(f"--png {path}: the folder {folder} does not exist")
    import os

    if not os.access(folder, os.W_OK):
        raise ValueError(f"--png {path}: the folder {folder} cannot be written to")


def _compute(method, args, plan, p, counts, bar, kept_runs=None):
    """The operating characteristics of one method, or the refusal text when the plan is beyond the bound.

    Under a test time the simulated runs of a method are left in ``kept_runs`` for the calibration.
    """
    from ..core import operating

    try:
        if plan is None:
            return operating.pass_fail_exact(p, args.accuracy, args.confidence, args.pilot, progress=bar, method=method)
        if args.test_time is not None:
            return _with_test_time(plan, args.test_time, method, counts, args.seed, bar, args.model, kept_runs)
        options = {"progress": bar, "model": args.model}
        if method not in EXACT_METHODS:
            options.update(replications=counts[method], seed=args.seed)
        return operating.operating_characteristics(*plan, method, **options)
    except operating.PlanTooLarge as refused:
        return str(refused)


def _with_test_time(plan, test_time, method, counts, seed, progress, model="gamma", kept_runs=None):
    """One method's figures when every unit is stopped at ``test_time``.

    The simulated runs are kept whole (``TimeTerminatedRuns``, the runs and figures of
    ``simulate_with_test_time``), so that a calibration asks them at other critical values.
    """
    from ..core import operating
    from ..core.operating.time_terminated import TimeTerminatedRuns

    if method in EXACT_METHODS:
        if test_time < plan[0]:
            return f"{method} cannot see past a test time below the threshold"
        return operating.operating_characteristics(*plan, method, model=model, progress=progress)
    runs = TimeTerminatedRuns(*plan, method, test_time, replications=counts[method], seed=seed, model=model,
                              progress=progress)
    if kept_runs is not None:
        kept_runs[method] = runs
    return runs.at()


def run(args, out=None, progress_stream=None):
    from ..core import operating
    from ..core.operating.results import falls_short

    out = out or sys.stdout
    if args.seed is None:
        args.seed = operating.DEFAULT_SEED
    args.test_time = getattr(args, "test_time", None)
    args.model = getattr(args, "model", "gamma")
    methods, plan, p = _methods_and_plan(args)
    beyond_any_test = _beyond_any_test(plan)
    if beyond_any_test:
        print(f"tailstop plan: {beyond_any_test}", file=sys.stderr)
        return 1
    left_out = args.test_time is not None and plan is not None and args.test_time < args.threshold
    if left_out:
        methods = tuple(m for m in methods if m not in EXACT_METHODS)
    if args.png:
        _require_matplotlib()
        _check_png(args.png, args.force)
    counts = {"known-shape": args.replications, "fitted-shape": args.fitted_replications}
    results, refused, kept_runs = {}, {}, {}
    for method in methods:
        bar = ProgressBar(f"{method}", progress_stream)
        try:
            outcome = _compute(method, args, plan, p, counts, bar, kept_runs)
        finally:
            bar.close()
        (refused if isinstance(outcome, str) else results)[method] = outcome
    if plan is None:
        print(f"Plan: pass-fail from a guessed probability p = {p:g}; odds within x{args.accuracy:g} at "
              f"{args.confidence:g} confidence; pilot {args.pilot}", file=out)
    else:
        from ..core.models import get_model

        print(f"Plan: threshold {args.threshold:g}, {args.model} shape {args.shape:g}, scale {args.scale:g}; "
              f"odds within x{args.accuracy:g} at {args.confidence:g} confidence; pilot {args.pilot}", file=out)
        if args.test_time is not None:
            print(f"Every unit still running at {args.test_time:g} is stopped there (a time-terminated test)"
                  + ("; pass-fail is left out: it cannot see past a test time below the threshold" if left_out else ""),
                  file=out)
        print(f"True probability beyond the threshold under the guess: "
              f"p = {float(get_model(args.model).tail_probability(args.threshold, args.shape, args.scale).p):.6g}",
              file=out)
    if results:
        print(file=out)
        print(_aligned(operating.MethodComparison(results).table()), file=out)
    if "pass-fail-exact" in results:
        print(_guarantee_line(args.accuracy, args.confidence, args.pilot), file=out)
    for method, text in refused.items():
        print(f"\n{method}: not computed — {text}.", file=out)
    calibratable = [m for m in results if m != "pass-fail-exact"]
    short = [m for m in calibratable if falls_short(results[m])]
    to_calibrate = calibratable if args.calibrate else short
    for method in short:
        result = results[method]
        gap = "more than 0.005" if result.exact else "more than two Monte Carlo standard errors"
        print(f"\n{method}: the real coverage {result.coverage:.4f} is below the nominal {result.confidence:g} "
              f"by {result.confidence - result.coverage:.4f} ({gap}); the calibrated critical value below "
              "restores it at this guess.", file=out)
    if to_calibrate:
        print(file=out)
        print(_aligned(_calibration_table(plan, p, args, to_calibrate, counts, progress_stream, kept_runs)), file=out)
        for method in to_calibrate:
            if method in kept_runs:
                print(f"{method}: calibrated on the {kept_runs[method].replications:,} runs of the table above, every "
                      f"unit stopped at {args.test_time:g}; each run is kept whole, so every z' sees the same units.",
                      file=out)
        print("To run a calibrated plan, give the decision formulas the confidence 2Φ(z') - 1 shown "
              "(docs/method.md). Calibration simulates on common random numbers (every run sees the same "
              "lifetimes at every z'), so its coverage at z can differ from the table above within Monte Carlo "
              "error; (a..b): the z' where coverage + 2 s.e. and coverage - 2 s.e. reach the nominal level.",
              file=out)
    if args.png and results:
        _plot(args.png, plan, p, results, counts, args.seed, progress_stream,
              (args.accuracy, args.confidence, args.pilot), args.model, args.test_time)
        print(f"\nPlot written to {args.png}", file=out)
    bound = (f"every computation is bounded to about {operating.COMMAND_SECONDS:g} s by an estimate made "
             "before it starts")
    if args.test_time is not None and any(m not in EXACT_METHODS for m in results):
        bound += (f", except the simulated runs of the test stopped at {args.test_time:g}: each run refits every "
                  "censored prefix, and their time is not estimated beforehand (fewer --replications or "
                  "--fitted-replications make them quicker)")
    print(f"\nFigures assume independent units with {args.model} lifetimes at the guessed parameters "
          f"(pass-fail: only the probability). Simulated figures: ± one Monte Carlo standard error; {bound}.",
          file=out)
    return 0


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


def _evaluator(plan, p, args, method, counts):
    from ..core import operating

    if plan is None:
        return lambda z: operating.pass_fail_exact(p, args.accuracy, args.confidence, args.pilot, stop_z=z)
    if method == "pass-fail":
        return lambda z: operating.operating_characteristics(*plan, method, stop_z=z, model=args.model)
    return lambda z: operating.operating_characteristics(*plan, method, replications=counts[method], seed=args.seed,
                                                         stop_z=z, common_numbers=True, model=args.model)


class _OutOfTime(Exception):
    pass


def _calibration_table(plan, p, args, methods, counts, progress_stream, kept_runs=None):
    """The calibration rows; a method with runs in ``kept_runs`` (a test time) is calibrated on those runs."""
    from ..core import operating

    kept_runs = kept_runs or {}
    rows = [["calibrated critical value", *methods]]
    found = {}
    for method in methods:
        evaluate = kept_runs[method].at if method in kept_runs else _evaluator(plan, p, args, method, counts)
        bar = ProgressBar(f"calibrating {method}", progress_stream)
        start = time.monotonic()

        def bounded(z, evaluate=evaluate, start=start):
            if time.monotonic() - start > operating.COMMAND_SECONDS:
                raise _OutOfTime
            return evaluate(z)

        try:
            found[method] = operating.calibrate(bounded, args.confidence, progress=bar)
        except (_OutOfTime, operating.PlanTooLarge):
            found[method] = None
        finally:
            bar.close()

    def cell(method, figure):
        calibration = found[method]
        if calibration is None:
            return f"not found within {operating.COMMAND_SECONDS:g} s"
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

    rows.append(["z", *(cell(m, lambda c: f"{c.z:.4f}") for m in methods)])
    rows.append(["coverage at z", *(cell(m, lambda c: with_se(c.at_z.coverage, c.at_z.coverage_se, 4)) for m in methods)])
    rows.append(["calibrated z'", *(cell(m, z_text) for m in methods)])
    rows.append(["confidence 2Φ(z')-1", *(cell(m, lambda c: f"{c.confidence_calibrated:.4f}") for m in methods)])
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


def _curve_point(plan, rule_settings, p, method, counts, seed, bound, model, test_time=None):
    """The plan's figures when the true probability is p (the model's shape held at the guess).

    With a test time (at or beyond the threshold for the exact methods, which it then leaves unchanged) the
    simulated methods run the censored test, as many runs as fit in the point's share of the time bound.
    """
    from ..core import operating
    from ..core.operating.time_terminated import TimeTerminatedRuns

    if method in EXACT_METHODS:
        return operating.pass_fail_exact(p, *rule_settings, work_bound=bound, method=method)
    threshold, shape, _, accuracy, confidence, pilot = plan
    truth = (threshold, shape, _scale_for(p, threshold, shape, model), accuracy, confidence, pilot)
    share = {"known-shape": 5, "fitted-shape": 4}
    replications = max(200, counts[method] // share[method])
    if test_time is not None:
        return TimeTerminatedRuns(*truth, method, test_time, replications=replications, seed=seed, model=model,
                            seconds=bound, least=50).at()
    return operating.operating_characteristics(*truth, method, replications=replications, seed=seed,
                                               work_bound=bound, model=model)


def _coverage_curves(plan, p_guess, rule_settings, methods, counts, seed, progress, model="gamma", test_time=None):
    """Coverage against the true probability (odds of the guess × 1/3 .. 3), shape held at the guess.

    Each point is bounded to its share of the command's time bound; a point
    beyond it is left out (NaN).
    """
    import numpy as np

    from ..core import operating
    from ..core.models import get_model

    if plan is not None:
        threshold, shape, scale = plan[:3]
        p_guess = float(get_model(model).tail_probability(threshold, shape, scale).p)
    odds = p_guess / (1 - p_guess)
    curves = {}
    points = {m: n for m, n in {"pass-fail": 25, "pass-fail-exact": 25, "known-shape": 9, "fitted-shape": 5}.items()
              if m in methods}
    total = sum(points.values())
    bound = operating.COMMAND_SECONDS / total
    done = 0
    for method, count in points.items():
        grid = odds * np.exp(np.linspace(-math.log(3), math.log(3), count))
        probabilities = grid / (1 + grid)
        values, errors = [], []
        for p in probabilities:
            try:
                result = _curve_point(plan, rule_settings, p, method, counts, seed, bound, model, test_time)
                values.append(result.coverage)
                errors.append(result.coverage_se)
            except operating.PlanTooLarge:
                values.append(math.nan)
                errors.append(math.nan)
            done += 1
            progress(done / total)
        curves[method] = (probabilities, np.array(values), np.array(errors))
    return curves


def _plot(path, plan, p_guess, results, counts, seed, progress_stream, rule_settings, model="gamma", test_time=None):
    import numpy as np
    from matplotlib.figure import Figure
    from matplotlib.ticker import FuncFormatter

    bar = ProgressBar("plotting", progress_stream)
    try:
        curves = _coverage_curves(plan, p_guess, rule_settings, tuple(results), counts, seed, bar, model, test_time)
    finally:
        bar.close()
    figure = Figure(figsize=(12.5, 4.5), layout="constrained")
    left, right = figure.subplots(1, 2)
    colours = {"pass-fail": "tab:blue", "pass-fail-exact": "tab:purple", "known-shape": "tab:green",
               "fitted-shape": "tab:orange"}
    for method, result in results.items():
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
    left.legend(loc="upper center", bbox_to_anchor=(0.5, -0.14), ncol=3, fontsize="small")  # below, off the curves
    confidence = rule_settings[1]
    for method, (probabilities, values, errors) in curves.items():
        if method in EXACT_METHODS:
            right.plot(probabilities, values, color=colours[method], marker=".", label=f"{method} (exact)")
        else:
            right.errorbar(probabilities, values, yerr=2 * errors, color=colours[method], marker="o", capsize=3,
                           label=f"{method} (± 2 s.e.)")
    right.axhline(confidence, color="black", linestyle="--", linewidth=1, label=f"nominal {confidence:g}")
    right.axvline(next(iter(results.values())).probability, color="grey", linestyle=":", linewidth=1)
    right.set_xscale("log")
    plain = FuncFormatter(lambda value, _: f"{value:.3g}")
    right.xaxis.set_major_formatter(plain)
    right.xaxis.set_minor_formatter(plain)
    right.set_xlabel("true probability beyond the threshold (dotted: the guess)")
    right.set_ylabel("coverage of the final interval")
    right.set_title("Coverage against the true probability"
                    + (f"\n(every unit stopped at {test_time:g})" if test_time is not None else ""))
    # beside the axes, never over a curve
    right.legend(loc="upper left", bbox_to_anchor=(1.02, 1.0), fontsize="small", borderaxespad=0.0)
    figure.savefig(path, dpi=110)
