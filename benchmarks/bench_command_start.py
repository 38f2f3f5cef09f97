"""CPU time of the `tailstop` command's start: `--help` of the command and of every verb, against a bare interpreter.

    python benchmarks/bench_command_start.py

Each figure is the CPU time (user + system) of a fresh process, the best of
five, printed beside the baseline measured in the same run: a process that
starts Python and imports argparse, the least a command line can cost. Target:
every `--help` under 0.5 s of CPU. For scale, the first line also gives a
process that imports the spreadsheet module `tailstop.sheet` (numpy, scipy,
xlwings), which the command line no longer pays for before it parses its
arguments.
"""
from __future__ import annotations

import os
import resource
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
REPEAT = 5


def best_cpu(arguments):
    best = float("inf")
    env = dict(os.environ, PYTHONPATH=str(ROOT / "udfs"))
    for _ in range(REPEAT):
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        subprocess.run([sys.executable, *arguments], env=env, stdout=subprocess.DEVNULL, check=False)
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        best = min(best, (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime))
    return best


def main():
    sys.path.insert(0, str(ROOT / "udfs"))
    from tailstop.commands import VERBS

    baseline = best_cpu(["-c", "import argparse"])
    print(f"baseline (python -c 'import argparse'): {baseline * 1e3:.0f} ms CPU")
    sheet = best_cpu(["-c", "import tailstop.sheet"])
    print(f"for scale, import tailstop.sheet: {sheet * 1e3:.0f} ms CPU (ratio {sheet / baseline:.1f})")
    print(f"{'command':28s} {'CPU':>8s} {'ratio':>7s}  target < 0.5 s")
    for words in (["--help"], *([verb, "--help"] for verb in VERBS)):
        seconds = best_cpu(["-m", "tailstop.commands", *words])
        label = "tailstop " + " ".join(words)
        print(f"{label:28s} {seconds * 1e3:5.0f} ms {seconds / baseline:7.1f}  {'met' if seconds < 0.5 else 'NOT MET'}")


if __name__ == "__main__":
    main()
