"""Peak memory of a full-sheet log (1,048,576 rows) through every decision formula and annotate.

A log this long is annotated by editing the sheet's XML as a stream
(``tailstop.annotate_stream``); openpyxl's cell model of it alone would take
about a gigabyte. Each case runs in a fresh child process; the figure reported is the child's
peak resident memory (VmHWM of /proc/self/status), which includes the interpreter,
numpy/scipy and the 1,048,576-row input as a spreadsheet passes it (a list of
one-element lists). The target is 1 GiB per case. Times are reported for
information only, with a ratio against building the input itself.

    python benchmarks/bench_big_logs.py [--rows N] [--skip-annotate] [--only-annotate] [--shapes two|six|both]

The annotate cases run on a two-column log (unit, hours) and on a six-column
one (with a serial text, a start time, remarks and a rig); their time is
compared with one read-only openpyxl pass over the same file, the least any
openpyxl-based tool pays to read the log once. Each annotated book is then
annotated again in place (the weekly step: its decision column and block
written again where they are), in a fresh process too.
"""
from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import textwrap
from pathlib import Path

ROWS = 1_048_576
LIMIT_MIB = 1024

CHILD = textwrap.dedent("""
    import json, sys, time
    import numpy as np
    rows, formula, method = int(sys.argv[1]), sys.argv[2], sys.argv[3]
    import tailstop.sheet as sheet
    start = time.perf_counter()
    # accuracy 1.002 needs millions of units: the decision column stays CONTINUE to the last row
    column = [[float(v)] for v in np.random.default_rng(1).gamma(2.0, 500.0, size=rows)]
    built = time.perf_counter() - start
    args = {
        "STOP_DECISION": (column, 2000.0, 1.002, 0.95, 10, method, 2.0),
        "STOP_DECISION_COLUMN": (column, 2000.0, 1.002, 0.95, 10, method, 2.0),
        "UNITS_NEEDED_NOW": (column, 2000.0, 1.01, 0.95, method, 2.0),
        "TWO_STAGE_UNITS": (column, 2000.0, 1.01, 0.95, method, 2.0),
        "TAIL_PROB_BOUNDS": (column, 2000.0, 1.01, method, 2.0),
        "TAIL_METHOD_NOTES": (column, 2000.0, method, 2.0),
        "GAMMA_FIT_PVALUE": (column,),
    }[formula]
    start = time.perf_counter()
    result = sheet.FORMULAS[formula](*args)
    elapsed = time.perf_counter() - start
    shape = f"{len(result)} rows" if isinstance(result, list) else repr(result)[:40]
    peak = next(int(line.split()[1]) for line in open("/proc/self/status") if line.startswith("VmHWM:")) / 1024
    print(json.dumps({"peak_mib": peak, "seconds": elapsed, "build_seconds": built, "result": shape}))
""")

ANNOTATE_CHILD = textwrap.dedent("""
    import json, sys, time
    from tailstop.commands import main
    path, out, extra = sys.argv[1], sys.argv[2], sys.argv[3:]
    where = ["--in-place", "--no-backup"] if out == "--in-place" else ["--out", out]
    start = time.perf_counter()
    code = main(["annotate", path, "--column", "B", "--threshold", "2000", "--accuracy", "1.01",
                 "--confidence", "0.95", "--pilot", "10", *where, *extra])
    elapsed = time.perf_counter() - start
    peak = next(int(line.split()[1]) for line in open("/proc/self/status") if line.startswith("VmHWM:")) / 1024
    print(json.dumps({"peak_mib": peak, "seconds": elapsed, "result": f"exit {code}"}))
""")


def run_child(script, *args):
    done = subprocess.run([sys.executable, "-c", script, *map(str, args)], capture_output=True, text=True)
    if done.returncode != 0:
        return {"error": done.stderr.strip().splitlines()[-1] if done.stderr.strip() else f"exit {done.returncode}"}
    return json.loads(done.stdout.strip().splitlines()[-1])


def write_log(path, rows, wide=False):
    """An invented log: unit and hours; ``wide`` adds a serial text, a start time, sparse remarks and a rig."""
    import datetime as dt

    import numpy as np
    import openpyxl

    book = openpyxl.Workbook(write_only=True)
    sheet = book.create_sheet("Log")
    sheet.append(["Unit", "Hours", "Serial", "Started", "Remarks", "Rig"] if wide else ["Unit", "Hours"])
    start = dt.datetime(2026, 1, 5, 8, 0)
    # hours to one decimal, as a log records them
    for unit, value in enumerate(np.round(np.random.default_rng(1).gamma(2.0, 500.0, size=rows - 1), 1), start=1):
        if wide:
            sheet.append([unit, float(value), f"SV-{unit:07d}", start + dt.timedelta(minutes=7 * unit),
                          "seat replaced" if unit % 997 == 0 else None, f"rig {unit % 4 + 1}"])
        else:
            sheet.append([unit, float(value)])
    book.save(path)


def read_once(path):
    """Seconds openpyxl's read-only mode takes to read every value of the log once: the annotate baseline."""
    import time

    import openpyxl

    start = time.perf_counter()
    book = openpyxl.load_workbook(path, read_only=True)
    for _ in book["Log"].iter_rows(values_only=True):
        pass
    book.close()
    return time.perf_counter() - start


def report(label, figures, baseline="building the input"):
    if "error" in figures:
        print(f"{label:44s} FAILED: {figures['error']}")
        return False
    ok = figures["peak_mib"] < LIMIT_MIB
    print(f"{label:44s} peak {figures['peak_mib']:7.0f} MiB  {'<' if ok else '>='} {LIMIT_MIB} MiB  "
          f"time {figures['seconds']:6.2f} s  (ratio = time / {baseline} "
          f"{figures['seconds'] / max(figures['build_seconds'], 1e-9):5.1f})  -> {figures['result']}")
    return ok


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=ROWS)
    parser.add_argument("--skip-annotate", action="store_true")
    parser.add_argument("--only-annotate", action="store_true", help="run the annotate cases only")
    parser.add_argument("--shapes", choices=("two", "six", "both"), default="both",
                        help="the logs the annotate cases run on: two columns, six, or both (default)")
    args = parser.parse_args()
    print(f"{args.rows:,} rows per case; peak resident memory of a fresh process per case")
    ok = True
    cases = [(f, m) for f in ("STOP_DECISION", "STOP_DECISION_COLUMN", "UNITS_NEEDED_NOW", "TWO_STAGE_UNITS")
             for m in ("pass-fail", "known-shape", "fitted-shape")]
    cases += [("TAIL_PROB_BOUNDS", "fitted-shape"), ("TAIL_METHOD_NOTES", "fitted-shape"), ("GAMMA_FIT_PVALUE", "-")]
    for formula, method in cases if not args.only_annotate else []:
        ok &= report(f"{formula} ({method})", run_child(CHILD, args.rows, formula, method))
    # the fit check's dearest sizes: the most units with all 999 samples, and the most units it takes at all
    from tailstop.core.models.gamma.fit import GOF_MIN_SAMPLES, GOF_VALUE_BUDGET

    for units in (GOF_VALUE_BUDGET // 999, GOF_VALUE_BUDGET // GOF_MIN_SAMPLES) if not args.only_annotate else ():
        ok &= report(f"GAMMA_FIT_PVALUE ({units:,} units)", run_child(CHILD, units, "GAMMA_FIT_PVALUE", "-"))
        ok &= report(f"TAIL_METHOD_NOTES (fitted-shape, {units:,} units)",
                     run_child(CHILD, units, "TAIL_METHOD_NOTES", "fitted-shape"))
    shapes = {"two": (False,), "six": (True,), "both": (False, True)}[args.shapes]
    if not args.skip_annotate:
        with tempfile.TemporaryDirectory() as folder:
            for wide in shapes:
                log = Path(folder) / f"big-log-{wide}.xlsx"
                write_log(log, args.rows, wide)
                shape = "six columns" if wide else "two columns"
                baseline = read_once(log)
                for live in (False, True):
                    out = Path(folder) / f"out-{wide}-{live}.xlsx"
                    mode = ["--live"] if live else []
                    figures = run_child(ANNOTATE_CHILD, log, out, *mode)
                    figures["build_seconds"] = baseline
                    ok &= report(f"annotate{' --live' if live else ''} ({shape})", figures,
                                 "one read-only openpyxl pass")
                    again = run_child(ANNOTATE_CHILD, out, "--in-place", *mode)
                    again["build_seconds"] = figures.get("seconds", float("nan"))
                    ok &= report(f"  again, in place{' --live' if live else ''} ({shape})", again, "the first run")
    print("all cases within the memory target" if ok else "SOME CASES EXCEEDED THE TARGET OR FAILED")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
