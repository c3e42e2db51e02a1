"""The ``tnsim`` command line: one module per command family, each adding its subcommands.

:func:`main` parses the arguments, enters the run options the flags ask for
(:func:`tnsim.cli.common.options_from_args`) and runs the subcommand.  A
user's mistake (any :class:`~tnsim.errors.TnsimError`, or a bad option)
prints one line on stderr and exits with status 2; nothing is written then.
A closed output pipe (``tnsim ... | head``) ends the command quietly with
status 0.  Only the parser is built at start-up: each command imports what it
needs when it runs, so ``tnsim --help`` is quick.

Modules: :mod:`.queries` (amp, marginal, expect, sample, xeb), :mod:`.cost`,
:mod:`.gen`, :mod:`.bench`, :mod:`.calibrate`, :mod:`.demo`; shared:
:mod:`.common` (parser type, checked argument types, the common flags —
:func:`~tnsim.cli.common.add_query_arguments` gives a new query command all of
them), :mod:`.inputs` (bitstrings, qubit lists, observables a command is asked
about) and :mod:`.numbers` (exact decimal text of scaled values, strict JSON).
"""

from __future__ import annotations

import argparse
import os
import sys
import warnings
from collections.abc import Sequence

from tnsim.cli import bench, calibrate, cost, demo, gen, optimize, queries, run, serve
from tnsim.cli.common import BITS_HELP, CommandParser, OptionError, options_from_args, reset_inputs
from tnsim.errors import TnsimError

__all__ = ["build_parser", "main"]

GLUED = ("--observable", "--seed", "--bits", "--qubits", "--param")
"""Options whose value may start with '-' (``--observable -Z0`` is read as ``--observable=-Z0``)."""


class _Version(argparse.Action):
    """``--version``: the installed package's version, looked up only when asked for."""

    def __init__(self, option_strings, dest=argparse.SUPPRESS, default=argparse.SUPPRESS, **kw):
        super().__init__(option_strings, dest, nargs=0, default=default, **kw)

    def __call__(self, parser, namespace, values, option_string=None):
        from tnsim import __version__

        print(f"tnsim {__version__}")
        parser.exit()


def build_parser() -> CommandParser:
    """Return the argument parser of the ``tnsim`` command."""
    parser = CommandParser(
        prog="tnsim",
        description="Exact amplitudes and more of wide, shallow quantum circuits by "
        f"tensor-network contraction. Bitstrings: {BITS_HELP}. Every command: --json for "
        "JSON on standard output, -o FILE for a file, - for standard input; an option value "
        "that starts with '-' is written --observable=-Z0 (or --observable -Z0).",
    )
    parser.add_argument("--version", action=_Version, help="print the version and exit")
    sub = parser.add_subparsers(dest="command", required=True, parser_class=CommandParser)
    for family in (queries, cost, gen, bench, calibrate, demo, optimize, run, serve):
        family.register(sub)
    parser.commands = tuple(sub.choices)  # for main's pointers to a subcommand's help
    return parser


def glue_values(argv: Sequence[str]) -> list[str]:
    """Join an option of :data:`GLUED` with a following value that starts with '-'.

    Examples
    --------
    >>> glue_values(["expect", "c.qasm", "--observable", "-Z0", "--json"])
    ['expect', 'c.qasm', '--observable=-Z0', '--json']
    >>> glue_values(["amp", "-", "--bits", "01"])
    ['amp', '-', '--bits', '01']
    """
    out: list[str] = []
    k = 0
    while k < len(argv):
        tok = argv[k]
        nxt = argv[k + 1] if k + 1 < len(argv) else None
        if tok in GLUED and nxt is not None and nxt.startswith("-") and _is_value(nxt):
            out.append(f"{tok}={nxt}")
            k += 2
            continue
        out.append(tok)
        k += 1
    return out


def _is_value(token: str) -> bool:
    """Whether a token after a :data:`GLUED` option is its value rather than another option."""
    if token == "-" or token.startswith("--"):
        return False
    return token not in ("-o", "-h")


def _show_warning(message, category, filename, lineno, file=None, line=None):
    print(f"tnsim: warning: {message}", file=sys.stderr)


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit status (2 for a user's mistake)."""
    argv = glue_values(sys.argv[1:] if argv is None else list(argv))
    reset_inputs()
    parser = build_parser()
    command = next((a for a in argv if a in parser.commands), None)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("default", FutureWarning)
            warnings.showwarning = _show_warning
            args = parser.parse_args(argv)
            command = args.command
            with options_from_args(args):
                status = args.func(args)
            sys.stdout.flush()
            return status
    except OptionError as exc:
        message = str(exc)
        if command:
            if "(see 'tnsim --help')" in message:  # e.g. an unknown option after the command
                message = message.replace("'tnsim --help'", f"'tnsim {command} --help'")
            elif "--help" not in message:
                message += f" (see 'tnsim {command} --help')"
        print(f"tnsim: error: {message}", file=sys.stderr)
        return 2
    except TnsimError as exc:
        print(f"tnsim: error: {exc}", file=sys.stderr)
        return 2
    except BrokenPipeError:
        # The reader went away (``tnsim ... | head``): not an error.  Point stdout at
        # /dev/null so the interpreter's final flush does not complain again.
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 0
    except KeyboardInterrupt:
        print("tnsim: interrupted", file=sys.stderr)
        return 130
