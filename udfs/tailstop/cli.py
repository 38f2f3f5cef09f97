"""Command line: ``tailstop demo`` and the headless tools (thin argument parsing only)."""
from __future__ import annotations

import argparse
import sys

__all__ = ["main", "build_parser"]

# Each subcommand module registers itself here: name -> (help, add_arguments, run).
_COMMANDS = {}


def command(name, help_text):
    """Register a subcommand: decorate ``add_arguments(parser)``; it returns ``run(args)``."""

    def register(add_arguments):
        _COMMANDS[name] = (help_text, add_arguments)
        return add_arguments

    return register


def build_parser():
    parser = argparse.ArgumentParser(
        prog="tailstop",
        description="Exceedance probabilities of gamma lifetimes to a guaranteed relative accuracy.",
    )
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name, (help_text, add_arguments) in _COMMANDS.items():
        sub_parser = sub.add_parser(name, help=help_text, description=help_text)
        sub_parser.set_defaults(run=add_arguments(sub_parser))
    return parser


def _load_commands():
    from . import annotate  # noqa: F401
    from . import demo  # noqa: F401
    from . import plan_command  # noqa: F401
    from . import recalc_command  # noqa: F401


def main(argv=None):
    _load_commands()
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


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
