"""``tailstop annotate``: add the decision column and the estimate block to a test log (.xlsx).

Argument parsing and the printed summary only; the work is ``workbooks.annotate``.
"""
from __future__ import annotations

import functools
import sys

# the workbook tools (openpyxl, numpy, the core) are imported where they are used:
# `tailstop annotate --help` needs none of them

__all__ = ["HELP", "add_arguments", "run", "summary"]


HELP = "Add the stop/continue decision column and the estimate block to a test log (.xlsx)."


def add_arguments(parser):
    parser.add_argument("log", metavar="LOG.xlsx", help="the test log, one unit per row below a header row")
    parser.add_argument("--sheet", help="the sheet holding the log (default: the active sheet)")
    parser.add_argument("--column", required=True,
                        help="the lifetime column: a letter (B) or its header text")
    parser.add_argument("--header-row", type=int, metavar="N",
                        help="the row holding the log's headers (default: the last text above the column's first "
                             "value; title rows and blank rows may stand above it)")
    parser.add_argument("--into", metavar="COLUMN",
                        help="the column for the decisions (default: where an earlier run put them, else the "
                             "first column right of the log with no value or formula in the log's rows; a format "
                             "there is kept); never a column holding a value or formula there")
    parser.add_argument("--threshold", required=True, help="the threshold c (mission time, warranty limit), "
                                                           "in the unit of the lifetimes")
    parser.add_argument("--accuracy", required=True, help="odds to be known within this factor d > 1, e.g. 1.5")
    parser.add_argument("--confidence", default="0.95", help="confidence level, e.g. 0.95 (default)")
    parser.add_argument("--pilot", required=True, help="units tested before the rule is first consulted (>= 2)")
    parser.add_argument("--method", default="pass-fail", help="pass-fail (default), known-shape, fitted-shape or pass-fail-exact")
    parser.add_argument("--shape", help="the shape of the model, for known-shape")
    parser.add_argument("--model", help="lifetime model of known-shape and fitted-shape: gamma (default), "
                                        "weibull or lognormal")
    parser.add_argument("--check-every", default="1", help="consult the rule every k-th unit after the pilot "
                                                          "(default 1)")
    parser.add_argument("--out", metavar="NEW.xlsx", help="where to write (default: LOG-tailstop.xlsx beside the "
                                                          "log); an existing file is never overwritten")
    parser.add_argument("--in-place", action="store_true", help="replace the log itself (a backup is kept)")
    parser.add_argument("--no-backup", action="store_true", help="with --in-place: keep no backup")
    parser.add_argument("--force", action="store_true", help="with --in-place: replace the log although a "
                                                            "spreadsheet program's lock file says it is open")
    parser.add_argument("--live", action="store_true",
                        help="write tailstop formulas (with their values stored) instead of values")
    parser.add_argument("--allow-lossy", action="store_true",
                        help="go on although openpyxl would drop some content of the book (listed); long "
                             "logs are edited as a stream, lose nothing and never need this")
    parser.error = functools.partial(_usage_error, parser)
    return run


def _usage_error(parser, message):
    """A missing or malformed option is bad input too: exit code 1, as for every refusal."""
    parser.print_usage(sys.stderr)
    parser.exit(1, f"tailstop annotate: {message}\n")


def run(args, out=None, err=None):
    from ..sheet import cells
    from ..workbooks.annotate import AnnotateRefused, annotate
    from ..workbooks.log_layout import LogProblem, RulePlan
    from ..workbooks.package import WorkbookRefused

    out, err = out or sys.stdout, err or sys.stderr
    try:
        if args.no_backup and not args.in_place:
            raise AnnotateRefused("--no-backup applies to --in-place only")
        if args.force and not args.in_place:
            raise AnnotateRefused("--force applies to --in-place only")
        plan = RulePlan.checked(args.threshold, args.accuracy, args.confidence, args.pilot, args.method,
                                args.shape, args.check_every, args.model)
        result = annotate(args.log, column=args.column, plan=plan, sheet=args.sheet, out=args.out,
                          in_place=args.in_place, backup=not args.no_backup, live=args.live,
                          allow_lossy=args.allow_lossy, force=args.force, header_row=args.header_row,
                          into=args.into)
    except (AnnotateRefused, WorkbookRefused, LogProblem, cells.InputError, FileExistsError) as problem:
        print(f"tailstop annotate: {_cli_text(problem)}", file=err)
        return 1
    except OSError as problem:
        print(f"tailstop annotate: {problem}", file=err)
        return 1
    print(summary(result), file=out)
    return 0


def _cli_text(problem):
    text = str(problem)
    return text.replace("accept the loss (allow_lossy)", "accept the loss with --allow-lossy")


def summary(result) -> str:
    """The lines ``tailstop annotate`` prints for an ``AnnotateResult``."""
    from openpyxl.utils.cell import get_column_letter

    from ..workbooks.log_layout import DECISION_HEADER, sheet_reference

    analysis, log = result.analysis, result.log
    figures = analysis.figures
    filled = log.last_row - result.margin
    lines = [f"Annotated {sheet_reference(log.sheet_title)}!{log.letter}{log.first_row}:{log.letter}{filled} "
             f"({analysis.units} units) -> {result.path}"]
    lines.append(f"  header: row {log.first_row - 1} ({result.header!r}); the log is rows {log.first_row} to "
                 f"{filled}")
    if result.margin:
        lines.append(f"  live: the decision formulas and the block's ranges reach row {log.last_row}, so units typed "
                     "below the log are decided and counted with the add-in installed")
    lines.append(f"  rule: {analysis.plan.describe()}")
    if analysis.stopped:
        row = log.first_row + analysis.stop_offset
        lines.append(f"  decision: STOP at row {row}, after {analysis.units_used} units")
    else:
        lines.append(f"  decision: {analysis.last_decision or 'CONTINUE'} - the rule has not stopped after "
                     f"{analysis.units} units; the estimate below uses them all and the accuracy is not reached yet")
    suspended = analysis.suspended_used
    lines.append(f"  units used: {analysis.units_used} ({analysis.units_used - suspended} failed, {suspended} "
                 f"suspended)")
    lines.append(_estimate_line(analysis.plan.threshold, figures))
    for note in analysis.notes:
        lines.append(f"  warning: {note}" if note != "no warnings for this log and method" else f"  {note}")
    column = f"{sheet_reference(log.sheet_title)}!{get_column_letter(result.decision_column)}"
    mode = "tailstop formulas with cached values" if result.live else "values"
    lines.append(f"  wrote: decision column {column} ({DECISION_HEADER!r}), estimate block {result.block}, as {mode}")
    if result.formats_kept:
        cells = f"{result.formats_kept} cell{'s' if result.formats_kept != 1 else ''}"
        lines.append(f"  kept: the format already on {cells} of the decision column (they held no value), under "
                     "the decisions written there")
    if result.copied_parts is None:
        lines.append(f"  checked: all {result.cells_checked:,} cells of {result.sheets_checked} sheet"
                     f"{'s' if result.sheets_checked != 1 else ''} kept their values and formulas")
    else:
        lines.append(f"  checked: all {result.cells_checked:,} cells of {sheet_reference(log.sheet_title)} kept "
                     f"their values and formulas; the other {result.copied_parts} parts of the book are copied "
                     "unchanged (long log: edited as a stream)")
    if result.backup is not None:
        lines.append(f"  backup of the original: {result.backup}")
    for loss in result.losses:
        lines.append(f"  given up (--allow-lossy): {loss}")
    return "\n".join(lines)


def _estimate_line(threshold, figures):
    """The summary's estimate in words; a figure the formulas could not give is said as a sentence."""
    start = f"  estimate: P(life > {threshold:g})"
    if _is_message(figures["estimate"]):
        return f"{start}: no estimate - {_message(figures['estimate'])}"
    line = f"{start} = {_figure(figures['estimate'])}"
    odds = f"odds {_figure(figures['odds'])}" if not _is_message(figures["odds"]) else "no odds"
    bounds = [figures[key] for key in ("p_low", "p_high", "odds_low", "odds_high")]
    problem = next((value for value in bounds if _is_message(value)), None)
    if problem is not None:
        return f"{line}, {odds}; no bounds yet: {_message(problem)}"
    return (f"{line}, bounds {_figure(bounds[0])} .. {_figure(bounds[1])}; {odds} "
            f"({_figure(bounds[2])} .. {_figure(bounds[3])})")


def _is_message(value):
    from ..sheet.cells import ERROR_PREFIX

    return isinstance(value, str) and value.startswith(ERROR_PREFIX)


def _message(value):
    from ..sheet.cells import ERROR_PREFIX

    return value.removeprefix(ERROR_PREFIX).strip()


def _figure(value):
    if isinstance(value, float):
        return f"{value:.4g}"
    return str(value) if value != "" else "-"


