"""Speed of `tailstop recalc` on a live log, from the command's start, against a baseline of the same run.

    python benchmarks/bench_recalc.py [--cell-by-cell ROWS]

An invented live log of n rows (lifetimes in B; ``STOP_DECISION`` (guarded
by ``IF(IFERROR(LEN(TRIM(B<row>)),1)=0,"",…)`` as ``tailstop annotate --live`` writes it),
``TAIL_PROB_EST`` and ``UNITS_NEEDED_NOW`` filled down C:E over the growing
ranges ``$B$2:B<row>``, settings in a small block) is recalculated by the
command ``python -m tailstop.commands recalc`` at 1,000, 3,000 and 10,000
rows. Each figure is the CPU time of the command's process (user + system:
the shared 2-core machines make wall-clock time noisy) and is printed beside
the baseline, the CPU time of a process that only reads the same book with
openpyxl and writes it back (the least a tool that rewrites the book can
do), with their ratio. The growth exponent is fitted by least squares to
log(time) against log(rows).

Targets: 10,000 rows in under 60 s; growth exponent <= 1.3 (about linear).

``--cell-by-cell ROWS`` also times the engine evaluating every cell itself
(the way before filled-down columns were taken out of the engine's graph,
nearly quadratic) at that size, for comparison; it takes minutes beyond
1,000 rows.
"""
from __future__ import annotations

import argparse
import math
import os
import resource
import subprocess
import sys
import tempfile
from pathlib import Path

import numpy as np
import openpyxl

ROOT = Path(__file__).resolve().parents[1]
SIZES = (1_000, 3_000, 10_000)
SETTINGS = (("threshold", 1500.0), ("accuracy", 1.3), ("confidence", 0.95), ("pilot", 10), ("method", "pass-fail"),
            ("shape", None), ("check every", None))


def live_log(path, rows, seed=20261202):
    rng = np.random.default_rng(seed)
    lifetimes = np.round(rng.gamma(2.4, 520.0, size=rows), 1)
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "Log"
    sheet.append(["unit", "hours", "decision", "estimate", "units needed", "", "setting", "value"])
    for row, (label, value) in enumerate(SETTINGS, start=2):
        sheet.cell(row, 7, label)
        sheet.cell(row, 8, value)
    for index, value in enumerate(lifetimes):
        row = index + 2
        sheet.cell(row, 1, index + 1)
        sheet.cell(row, 2, float(value))
        # the decision as `tailstop annotate --live` writes it: guarded, so a blank row shows blank anywhere
        sheet.cell(row, 3, f'=IF(IFERROR(LEN(TRIM(B{row})),1)=0,"",STOP_DECISION($B$2:B{row},$H$2,$H$3,$H$4,$H$5,$H$6,'
                           '$H$7,$H$8))')
        sheet.cell(row, 4, f"=TAIL_PROB_EST($B$2:B{row},$H$2,$H$6,$H$7)")
        sheet.cell(row, 5, f"=UNITS_NEEDED_NOW($B$2:B{row},$H$2,$H$3,$H$4,$H$6,$H$7)")
    book.save(path)


def cpu_of(arguments):
    """CPU seconds (user + system) of a child process running ``python <arguments>``."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    env = dict(os.environ, PYTHONPATH=str(ROOT / "udfs"))
    subprocess.run([sys.executable, *arguments], check=True, env=env, stdout=subprocess.DEVNULL)
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


REWRITE = "import openpyxl, sys; openpyxl.load_workbook(sys.argv[1]).save(sys.argv[2])"
CELL_BY_CELL = """
import sys
from tailstop.workbooks import recalc
recalc._calculate_with_filled_down_columns = lambda path: None  # the engine evaluates every cell
recalc.recalc(sys.argv[1], sys.argv[2])
"""


def growth_exponent(sizes, seconds):
    slope, _ = np.polyfit(np.log(sizes), np.log(seconds), 1)
    return float(slope)


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cell-by-cell", type=int, metavar="ROWS", help="also time the engine cell by cell")
    args = parser.parse_args(argv)
    print("tailstop recalc of a live log (STOP_DECISION, TAIL_PROB_EST, UNITS_NEEDED_NOW filled down), "
          "CPU time from the command's start")
    print(f"{'rows':>7s} {'recalc':>10s} {'baseline (read + write)':>24s} {'ratio':>7s}")
    times = []
    with tempfile.TemporaryDirectory() as folder:
        folder = Path(folder)
        for rows in SIZES:
            book = folder / f"log-{rows}.xlsx"
            live_log(book, rows)
            base = cpu_of(["-c", REWRITE, str(book), str(folder / f"copy-{rows}.xlsx")])
            ours = cpu_of(["-m", "tailstop.commands", "recalc", str(book), "--out", str(folder / f"out-{rows}.xlsx")])
            times.append(ours)
            print(f"{rows:7,d} {ours:8.2f} s {base:22.2f} s {ours / base:7.1f}")
        exponent = growth_exponent(SIZES, times)
        print(f"fitted growth exponent (time ~ rows^k): k = {exponent:.2f}   target <= 1.3: "
              f"{'met' if exponent <= 1.3 else 'NOT MET'}")
        print(f"10,000 rows: {times[-1]:.1f} s CPU   target < 60 s: {'met' if times[-1] < 60 else 'NOT MET'}")
        if args.cell_by_cell:
            rows = args.cell_by_cell
            book = folder / f"cell-by-cell-{rows}.xlsx"
            live_log(book, rows)
            ours = cpu_of(["-m", "tailstop.commands", "recalc", str(book), "--out", str(folder / "fast.xlsx")])
            slow = cpu_of(["-c", CELL_BY_CELL, str(book), str(folder / "slow.xlsx")])
            print(f"at {rows:,} rows: cell by cell in the engine {slow:.1f} s, filled-down columns taken out "
                  f"{ours:.1f} s (ratio = {slow / ours:.1f})")
    if not math.isfinite(exponent):
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
