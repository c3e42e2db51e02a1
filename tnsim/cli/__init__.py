"""The ``tnsim`` command line: one module per command family, each adding its subcommands.

:func:`main` parses the arguments, enters the run options the flags ask for
(:func:`tnsim.cli.common.options_from_args`) and runs the subcommand.  A
user's mistake (any :class:`~tnsim.errors.TnsimError`, or a bad option)
prints one line on stderr and exits with status 2; nothing is written then.
A closed output pipe (``tnsim ... | head``) ends the command quietly with
status 0; an output that cannot be written (full disk, I/O error) prints one
line and exits with status 1 (standard output is flushed and checked before
success is reported).  Only the parser is built at start-up: each command imports what it
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
import errno
import os
import sys
import warnings
from collections.abc import Sequence

from tnsim.cli import bench, calibrate, cost, demo, gen, optimize, queries, run, serve
from tnsim.cli.common import BITS_HELP, CommandParser, OptionError, options_from_args, reset_inputs
from tnsim.errors import OutputError, TnsimError

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
    real_stdout = sys.stdout
    sys.stdout = _CheckedStream(real_stdout)
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
    except OutputError as exc:
        print(f"tnsim: error: {exc}", file=sys.stderr)
        return 1
    except TnsimError as exc:
        print(f"tnsim: error: {exc}", file=sys.stderr)
        return 2
    except _StreamFailed as exc:
        return _stdout_failed(exc.error, real_stdout)
    except BrokenPipeError:
        return _stdout_failed(BrokenPipeError(errno.EPIPE, "Broken pipe"), real_stdout)
    except KeyboardInterrupt:
        print("tnsim: interrupted", file=sys.stderr)
        return 130
    finally:
        sys.stdout = real_stdout


class _StreamFailed(Exception):
    """A write to standard output failed; ``error`` is the operating system's error."""

    def __init__(self, error: OSError):
        super().__init__(str(error))
        self.error = error


class _CheckedStream:
    """Standard output whose failed writes are told apart from every other error."""

    def __init__(self, stream):
        self._stream = stream

    def write(self, text: str) -> int:
        try:
            return self._stream.write(text)
        except OSError as exc:
            raise _StreamFailed(exc) from None

    def flush(self) -> None:
        try:
            self._stream.flush()
        except OSError as exc:
            raise _StreamFailed(exc) from None

    def __getattr__(self, name: str):
        return getattr(self._stream, name)


def _stdout_failed(exc: OSError, stream) -> int:
    """End after a failed write to standard output: quietly for a closed pipe (status 0).

    The stream is pointed at the null device first, so what is left in its
    buffer cannot fail again at the interpreter's exit.
    """
    _silence(stream)
    if isinstance(exc, BrokenPipeError) or exc.errno == errno.EPIPE:
        return 0  # the reader went away (``tnsim ... | head``): not an error
    print(f"tnsim: error: cannot write to standard output: {exc.strerror or exc}", file=sys.stderr)
    return 1


def _silence(stream) -> None:
    try:
        fd = stream.fileno()
        null = os.open(os.devnull, os.O_WRONLY)
        os.dup2(null, fd)
        os.close(null)
    except (OSError, ValueError, AttributeError):
        pass
