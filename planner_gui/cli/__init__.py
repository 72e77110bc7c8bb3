"""The ``acqplan`` command line.

One module per command (or pair of related commands), each with a ``register(sub)`` that
adds its sub-parser; :data:`COMMANDS` lists them in the order ``--help`` shows. Commands
that need no window never import Qt; ``gui`` and ``sheet`` import it only when run. Every
command prints ``--help``; bad input ends with exit code 2 and ONE line on stderr naming
file, line and field.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence

from core.api import AcqplanError, InputError
from planner_gui import version

from . import bins, compare, demo, geometry, plan, route, sweep, window
from ._common import (
    EXIT_BAD_INPUT,
    EXIT_FAILURE,
    EXIT_OK,
    Parser,
    format_rows,
    join_signed_values,
    one_line,
    parse_pair,
    parse_site,
)

COMMANDS = (geometry, bins, plan, route, sweep, compare, demo, window)

__all__ = ["EXIT_BAD_INPUT", "EXIT_FAILURE", "EXIT_OK", "build_parser", "format_rows", "main",
           "one_line", "parse_pair", "parse_site"]


class _VersionAction(argparse.Action):
    """``--version``: the version is looked up only when asked for (importlib.metadata
    costs every other command about 17 ms at start-up)."""

    def __init__(self, option_strings, dest=argparse.SUPPRESS, default=argparse.SUPPRESS,
                 help="show program's version number and exit"):
        super().__init__(option_strings=option_strings, dest=dest, default=default, nargs=0,
                         help=help)

    def __call__(self, parser, namespace, values, option_string=None):
        parser._print_message(f"acqplan {version()}\n", sys.stdout)
        parser.exit()


def build_parser() -> argparse.ArgumentParser:
    p = Parser(prog="acqplan", description="Plan GNSS acquisition searches from almanac, TLE or broadcast-ephemeris files.")
    p.add_argument("--version", action=_VersionAction)
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=Parser)
    for command in COMMANDS:
        command.register(sub)
    return p


def main(argv: Sequence[str] | None = None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser()
    try:
        args = parser.parse_args(join_signed_values(argv))
    except SystemExit as stop:      # usage error (one line already printed) or --help
        return stop.code if isinstance(stop.code, int) else EXIT_BAD_INPUT
    if not getattr(args, "func", None):
        parser.print_help()
        return EXIT_BAD_INPUT
    try:
        return args.func(args)
    except InputError as err:
        print(f"acqplan {args.command}: {one_line(err)}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except AcqplanError as err:
        print(f"acqplan {args.command}: {err}", file=sys.stderr)
        return EXIT_FAILURE
    except BrokenPipeError:
        # the reader went away (``acqplan plan ... | head``): not an error of the command.
        # Point stdout at devnull so the interpreter's final flush does not complain.
        import os

        try:
            os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        except OSError:
            pass
        return EXIT_OK
    except OSError as err:
        name = getattr(err, "filename", None)
        where = f"{name}: " if name else ""
        print(f"acqplan {args.command}: {where}{err.strerror or err}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except Exception as err:  # a defect, not bad input: still one line, no traceback
        print(f"acqplan {args.command}: internal error ({type(err).__name__}: {err}); "
              "please report it with the command line used", file=sys.stderr)
        return EXIT_FAILURE
