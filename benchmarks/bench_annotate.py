"""Speed of ``tailstop annotate`` on a 100,000-row log against an openpyxl load-and-save of the same file.

    python benchmarks/bench_annotate.py [--rows 100000] [--repeat 3]

The log is invented (a bench test of valves): unit number, serial text, start
date and time, cycles to leak, and a sparse remarks column, plus a small
second sheet. The baseline is what any openpyxl-based tool must pay at least:
``load_workbook`` and ``save`` of that file. Ours is the whole ``annotate``
call: the safety inspection, the load, the decisions and the estimate, the
in-memory save, the cell-by-cell check of every sheet against the original,
and the atomic write. A log this long is edited as a stream by default
(``tailstop.annotate_stream``); the openpyxl path is timed too. Both are timed ``--repeat`` times, alternating, and the
best time of each is compared (the machine is shared and noisy). Target:
ratio <= 1.5.

``--again`` times the weekly step instead: the annotated book annotated
again in place (its decision column and block written again where they are)
against the first run that wrote it, in the same run, for values and
``--live``. The book run again is larger than the log (the decision column
is one more cell a row, a live one a formula a row), so the sizes of the log
sheet's XML that each run reads are printed beside the ratio. Target: ratio
= again / first no more than the ratio of the sizes read.
"""
from __future__ import annotations

import argparse
import datetime as dt
import sys
import tempfile
import time
import zipfile
from pathlib import Path

import numpy as np
import openpyxl

from tailstop.workbooks.annotate import annotate
from tailstop.workbooks.log_layout import RulePlan

TARGET = 1.5


def write_log(path, rows, seed=20261201):
    """An invented valve bench log of ``rows`` units."""
    rng = np.random.default_rng(seed)
    cycles = np.round(rng.gamma(2.4, 520.0, size=rows), 1)
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "Bench log"
    sheet.append(["Unit", "Serial", "Started", "Cycles to leak (kcycles)", "Remarks"])
    start = dt.datetime(2026, 1, 5, 8, 0)
    for unit in range(1, rows + 1):
        remark = "seat replaced on rig 3" if unit % 997 == 0 else None
        sheet.append([unit, f"SV-{unit:06d}", start + dt.timedelta(minutes=7 * unit), float(cycles[unit - 1]), remark])
    notes = book.create_sheet("Rig notes")
    notes.append(["Rig", "Cycle rate (Hz)"])
    for rig in range(1, 5):
        notes.append([rig, 2.5])
    book.save(path)
    return path


def baseline(source, target):
    book = openpyxl.load_workbook(source)
    book.save(target)


def ours(source, target, live=False, streaming=None):
    plan = RulePlan.checked(1500, 1.5, 0.95, 10)
    annotate(source, column="Cycles to leak (kcycles)", plan=plan, out=target, live=live, streaming=streaming)


def ours_again(book, live=False):
    plan = RulePlan.checked(1500, 1.5, 0.95, 10)
    annotate(book, column="Cycles to leak (kcycles)", plan=plan, in_place=True, backup=False, live=live)


def run_again(source, folder, repeat):
    """Best times of the first run and of the run again on its output, values and live."""
    for live in (False, True):
        first, again = float("inf"), float("inf")
        for attempt in range(repeat):
            target = folder / f"first-{live}-{attempt}.xlsx"
            first = min(first, timed(ours, source, target, live=live))
            again = min(again, timed(ours_again, target, live=live))
        mode = "annotate --live" if live else "annotate"
        sizes = sheet_bytes(source), sheet_bytes(target)
        print(f"{mode}: first run {first:.2f} s, run again in place {again:.2f} s   "
              f"ratio = again / first = {again / first:.2f}   (sheet XML read: {sizes[0] / 2**20:.1f} MiB, "
              f"then {sizes[1] / 2**20:.1f} MiB; ratio {sizes[1] / sizes[0]:.2f})")


def sheet_bytes(path):
    with zipfile.ZipFile(path) as archive:
        return archive.getinfo("xl/worksheets/sheet1.xml").file_size


def timed(function, *arguments, **options):
    start = time.perf_counter()
    function(*arguments, **options)
    return time.perf_counter() - start


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=100_000)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--live", action="store_true", help="also time --live (tailstop formulas)")
    parser.add_argument("--again", action="store_true",
                        help="time annotating the annotated book again in place, against the first run")
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory(prefix="tailstop-bench-") as folder:
        folder = Path(folder)
        source = write_log(folder / "log.xlsx", args.rows)
        print(f"log: {args.rows:,} rows, {source.stat().st_size / 2**20:.1f} MiB")
        if args.again:
            run_again(source, folder, args.repeat)
            return 0
        modes = [("annotate", {}), ("annotate, through openpyxl", {"streaming": False})]
        modes += [("annotate --live", {"live": True}), ("annotate --live, through openpyxl",
                                                        {"live": True, "streaming": False})] if args.live else []
        best = {"baseline": float("inf"), **{name: float("inf") for name, _ in modes}}
        for attempt in range(args.repeat):
            target = folder / f"baseline-{attempt}.xlsx"
            best["baseline"] = min(best["baseline"], timed(baseline, source, target))
            for name, options in modes:
                target = folder / f"{name.replace(' ', '')}-{attempt}.xlsx"
                best[name] = min(best[name], timed(ours, source, target, **options))
        print(f"baseline (openpyxl load + save): {best['baseline']:.2f} s")
        for name, _ in modes:
            ratio = best[name] / best["baseline"]
            print(f"{name}: {best[name]:.2f} s   ratio = ours / baseline = {ratio:.2f}"
                  + (f"   (target <= {TARGET})" if name == "annotate" else ""))
    return 0


if __name__ == "__main__":
    sys.exit(main())
