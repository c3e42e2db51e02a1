"""What every subcommand shares: the parser type, circuit loading, output, run options.

A leaf of the command-line package: the command modules import it, it
imports none of them.
"""

from __future__ import annotations

import argparse
import contextlib
import os
import sys
from collections.abc import Iterator

from tnsim.circuits.circuit import Circuit
from tnsim.errors import InputError
from tnsim.execution.options import RunOptions, run_options
from tnsim.fileio import write_atomic

__all__ = [
    "BITS_HELP",
    "CommandParser",
    "add_run_arguments",
    "load_circuit",
    "options_from_args",
    "write_output",
]


def add_run_arguments(parser) -> None:
    """Add the run options to an :mod:`argparse` (sub)parser.

    The options: ``--memory``, ``--workers``, ``--dask``, ``--checkpoint``,
    ``--quiet``, ``--array-backend``.

    :func:`tnsim.cli.main` runs the subcommand inside :func:`options_from_args`.
    """
    group = parser.add_argument_group("how the contraction runs")
    group.add_argument(
        "--memory",
        metavar="SIZE",
        help="memory limit for intermediates, e.g. 4GiB or 500MB (default: half of the "
        "available memory); larger plans are sliced, impossible ones refused",
    )
    group.add_argument(
        "--workers",
        type=int,
        metavar="N",
        help="local worker processes for the slices (default: 1 for small work, "
        "every core for large)",
    )
    group.add_argument(
        "--dask", metavar="ADDRESS", help="run slices on a Dask scheduler, e.g. tcp://host:8786"
    )
    group.add_argument(
        "--checkpoint",
        metavar="DIR",
        help="folder recording finished slices; rerunning the same command resumes",
    )
    group.add_argument("--quiet", action="store_true", help="no progress bar")
    group.add_argument(
        "--array-backend",
        default="numpy",
        metavar="NAME",
        help="array library of the contractions: numpy (default), cupy, torch, ...",
    )


@contextlib.contextmanager
def options_from_args(args) -> Iterator[RunOptions]:
    """Enter a :func:`run_options` block from parsed command-line arguments.

    Arguments the parser lacks are left at their defaults; ``--dask`` connects a
    ``distributed.Client`` for the block and closes it afterwards.
    """
    from tnsim.execution.backends import get_backend

    quiet = getattr(args, "quiet", False) or bool(getattr(args, "json", False))
    changes: dict = {"progress": False} if quiet else {}
    for name in ("memory_limit", "workers", "checkpoint"):
        value = getattr(args, "memory" if name == "memory_limit" else name, None)
        if value is not None:
            changes[name] = value
    backend = getattr(args, "array_backend", None)
    if backend is not None:
        changes["backend"] = get_backend(backend).name
    address = getattr(args, "dask", None)
    with contextlib.ExitStack() as stack:
        if address:
            client = stack.enter_context(_dask_client(address))
            changes["executor"] = client.get_executor()
        yield stack.enter_context(run_options(**changes))


@contextlib.contextmanager
def _dask_client(address: str):
    try:
        import distributed
    except ImportError:
        raise InputError(
            "--dask needs the dask extra: python -m pip install 'tnsim[dask]'"
        ) from None
    try:
        client = distributed.Client(address, timeout="20s")
    except (OSError, TimeoutError, ValueError) as exc:
        raise InputError(
            f"cannot reach the Dask scheduler at {address!r} ({exc}); check the address "
            "(tcp://HOST:PORT) and that the scheduler is running"
        ) from None
    try:
        yield client
    finally:
        client.close()


BITS_HELP = "character i of a bitstring is qubit i (the leftmost character is qubit 0)"


class CommandParser(argparse.ArgumentParser):
    """An argument parser whose errors are one line and exit status 2."""

    def error(self, message: str):
        """Raise the message as an :class:`InputError` (one line, status 2)."""
        raise InputError(f"{self.prog}: {message} (see '{self.prog} --help')")


def write_output(text: str, path: str | None) -> None:
    """Write ``text`` to ``path`` atomically, or to standard output when ``path`` is empty."""
    if path:
        write_atomic(path, text)
    else:
        sys.stdout.write(text)


def load_circuit(path: str) -> Circuit:
    """Read an OpenQASM 2.0 file for a subcommand (errors name file:line:column)."""
    from tnsim.circuits.qasm import read_qasm

    if not os.path.isfile(path):
        raise InputError(f"{path}: no such file; give the path of an OpenQASM 2.0 circuit")
    return read_qasm(path)
