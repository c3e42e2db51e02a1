"""The ``tnsim`` command line: one module per command family, each adding its subcommands.

:func:`main` parses the arguments, enters the run options the flags ask for
(:func:`tnsim.cli.common.options_from_args`) and runs the subcommand.  A
user's mistake (any :class:`~tnsim.errors.TnsimError`, or a bad option)
prints one line on stderr and exits with status 2; nothing is written then.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Sequence

from tnsim.cli import bench, cost, demo, gen, optimize, queries
from tnsim.cli.common import BITS_HELP, CommandParser, options_from_args
from tnsim.errors import TnsimError

__all__ = ["build_parser", "main"]


def build_parser() -> argparse.ArgumentParser:
    """Return the argument parser of the ``tnsim`` command."""
    parser = CommandParser(
        prog="tnsim",
        description="Exact amplitudes and more of wide, shallow quantum circuits by "
        f"tensor-network contraction. Bitstrings: {BITS_HELP}.",
    )
    sub = parser.add_subparsers(dest="command", required=True, parser_class=CommandParser)
    for family in (queries, cost, gen, bench, demo, optimize):
        family.register(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit status (2 for a user's mistake)."""
    try:
        args = build_parser().parse_args(argv)
        with options_from_args(args):
            return args.func(args)
    except TnsimError as exc:
        print(f"tnsim: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("tnsim: interrupted", file=sys.stderr)
        return 130
