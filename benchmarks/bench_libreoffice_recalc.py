"""`tailstop recalc` of filled-down logs: LibreOffice with the extension against the built-in engine.

The live logs of ``bench_recalc.py`` (N invented lifetimes; STOP_DECISION,
TAIL_PROB_EST and UNITS_NEEDED_NOW filled down over the growing range
$B$2:B<row>, reading a small settings block with blank optional settings).
Each engine is timed from the command's start (``tailstop recalc``, in this
process) to the written book; LibreOffice's time includes building and
installing the extension and starting soffice in a fresh profile.

    python benchmarks/bench_libreoffice_recalc.py [ROWS ...]     (default 300 1000)

Prints ``ratio = libreoffice / formulas`` per size; no asserts.
"""
from __future__ import annotations

import contextlib
import io
import math
import sys
import tempfile
import time
from pathlib import Path

import openpyxl
from bench_recalc import live_log

from tailstop.commands import main

def timed(arguments):
    start = time.perf_counter()
    with contextlib.redirect_stdout(io.StringIO()):
        assert main(arguments) == 0
    return time.perf_counter() - start


def differing_cells(first, second):
    """Cells whose stored values differ beyond LibreOffice's 15 significant digits."""
    one = openpyxl.load_workbook(first, data_only=True)["Log"]
    other = openpyxl.load_workbook(second, data_only=True)["Log"]
    differ = []
    for row_one, row_other in zip(one.iter_rows(), other.iter_rows()):
        for a, b in zip(row_one, row_other):
            if isinstance(a.value, float) and isinstance(b.value, (int, float)):
                same = math.isclose(a.value, b.value, rel_tol=1e-14)
            else:
                same = a.value == b.value
            if not same:
                differ.append(f"{a.coordinate} {a.value!r} / {b.value!r}")
    return f"{len(differ)}" + (f" (first: {differ[0]})" if differ else "")


def main_benchmark(sizes):
    with tempfile.TemporaryDirectory() as folder:
        for rows in sizes:
            log = Path(folder) / f"log-{rows}.xlsx"
            live_log(log, rows)
            by_engine = Path(folder) / f"formulas-{rows}.xlsx"
            by_office = Path(folder) / f"libreoffice-{rows}.xlsx"
            builtin = timed(["recalc", str(log), "--out", str(by_engine)])
            office = timed(["recalc", str(log), "--engine", "libreoffice", "--out", str(by_office)])
            print(f"{rows:>6} rows: formulas engine {builtin:7.2f} s, libreoffice {office:7.2f} s, "
                  f"ratio = libreoffice / formulas = {office / builtin:.3f}; "
                  f"cells that differ: {differing_cells(by_engine, by_office)}", flush=True)


if __name__ == "__main__":
    main_benchmark([int(size) for size in sys.argv[1:]] or [300, 1000])
