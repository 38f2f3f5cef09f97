"""Command line: ``tailstop demo`` and the headless tools (thin argument parsing only).

Each verb is a module of this package with ``HELP`` (one line), ``add_arguments(parser)``, which
returns ``run(args)``; ``VERBS`` lists them. The verbs never import this module back, and a verb
is imported only to build its parser (so heavy imports belong inside ``run``).
"""
from __future__ import annotations

import argparse
import importlib
import sys

__all__ = ["VERBS", "main", "build_parser"]

# verb -> module of this package
VERBS = {
    "annotate": "annotate",
    "demo": "demo",
    "extension": "extension",
    "plan": "plan",
    "recalc": "recalc",
}


def _verb(name):
    return importlib.import_module(f"{__name__}.{VERBS[name]}")


def build_parser():
    parser = argparse.ArgumentParser(
        prog="tailstop",
        description="Exceedance probabilities of gamma lifetimes to a guaranteed relative accuracy.",
    )
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in VERBS:
        verb = _verb(name)
        sub_parser = sub.add_parser(name, help=verb.HELP, description=verb.HELP)
        sub_parser.set_defaults(run=verb.add_arguments(sub_parser))
    return parser


def main(argv=None):
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "run", None):
        parser.print_help()
        return 2
    try:
        return args.run(args) or 0
    except (ValueError, OSError) as problem:
        print(f"tailstop {args.command}: {problem}", file=sys.stderr)
        return 1
    except Exception as problem:  # a bug or a file nobody foresaw: a message, not a traceback
        print(f"tailstop {args.command}: stopped by an unexpected {type(problem).__name__}: {problem}. "
              "Nothing was written; please report this with the file.", file=sys.stderr)
        return 1
