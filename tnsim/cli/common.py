"""What every subcommand shares: the parser type, checked argument types, common flags.

A leaf of the command-line package: the command modules import it, it
imports none of them.  Heavy modules (numpy, the planner, the queries) are
imported inside the functions that need them, so ``tnsim --help`` starts fast.

The flags every query command takes come from :func:`add_query_arguments`:
output (``--json``, ``-o``), ``--precision``, ``--stats``, ``--bit-order`` and the run
options (``--memory``, ``--workers``, ...).  A new query command (or a new common
flag) goes through it, so every command stays alike.
"""

from __future__ import annotations

import argparse
import contextlib
import math
import os
import sys
import time
from collections.abc import Callable, Iterator, Sequence

from tnsim.errors import InputError

__all__ = [
    "BITS_HELP",
    "MAX_SEED",
    "PRECISIONS",
    "QUBIT_BYTES",
    "CommandParser",
    "OptionError",
    "RunStats",
    "add_bit_order_argument",
    "add_input_argument",
    "add_limit_arguments",
    "add_output_arguments",
    "add_plan_arguments",
    "add_precision_argument",
    "add_query_arguments",
    "add_run_arguments",
    "add_stats_argument",
    "check_array",
    "check_file",
    "check_paths",
    "check_register",
    "count_type",
    "dtype_of",
    "emit_stats",
    "load_circuit",
    "options_from_args",
    "parse_inputs",
    "read_input_text",
    "reset_inputs",
    "seconds_type",
    "seed_type",
    "warn",
    "write_output",
]

BITS_HELP = "character i of a bitstring is qubit i (the leftmost character is qubit 0)"

PRECISIONS = {"single": "complex64", "double": "complex128"}
"""``--precision`` values and the dtype each contracts in (default ``double``)."""

MAX_SEED = 2**128 - 1
"""Largest ``--seed`` (any integer from 0 to this is accepted)."""

MAX_DIGITS = 18
"""Whole numbers on the command line have at most this many ASCII digits."""

QUBIT_BYTES = 2048
"""Bytes tnsim needs per qubit of a circuit before any contraction (network tensors and
bookkeeping; 0.5 KiB measured for the amplitude network of 200,000 qubits, with room for
simplification): a circuit whose register needs more than the memory limit is refused."""


class OptionError(InputError):
    """A mistake in the command line itself; the message points at the subcommand's help."""


def warn(message: str) -> None:
    """Print one warning line on standard error."""
    print(f"tnsim: warning: {message}", file=sys.stderr)


class CommandParser(argparse.ArgumentParser):
    """An argument parser whose errors are one line and exit status 2."""

    commands: tuple[str, ...] = ()
    """The subcommands' names (set on the top-level parser, for pointers to their help)."""

    def error(self, message: str):
        """Raise the message as an :class:`OptionError` (one line, status 2)."""
        raise OptionError(f"{self.prog}: {message} (see '{self.prog} --help')")


# --- argument types: checked at the door, one line on a mistake ---


def _whole(text: str, what: str) -> int:
    t = text.strip()
    if not (t.isascii() and t.isdigit()):
        raise argparse.ArgumentTypeError(
            f"{what} must be a whole number written with digits 0-9, got {t[:40]!r}"
        )
    if len(t) > MAX_DIGITS:
        raise argparse.ArgumentTypeError(f"{what} {t[:20]}... has too many digits")
    return int(t)


def count_type(what: str, minimum: int = 0, maximum: int = 10**15) -> Callable[[str], int]:
    """An argparse type: a whole number from ``minimum`` to ``maximum``.

    Examples
    --------
    >>> count_type("--shots")("12")
    12
    """

    def parse(text: str) -> int:
        value = _whole(text, what)
        if not minimum <= value <= maximum:
            raise argparse.ArgumentTypeError(
                f"{what} must be from {minimum:,} to {maximum:,}, got {value:,}"
            )
        return value

    parse.__name__ = what  # argparse names the type in its own messages
    return parse


def seed_type(text: str) -> int:
    """An argparse type: a seed, any whole number from 0 to :data:`MAX_SEED`.

    Examples
    --------
    >>> seed_type("7")
    7
    """
    t = text.strip()
    if t.startswith("-") and t[1:].isascii() and t[1:].isdigit():
        raise argparse.ArgumentTypeError(f"--seed must be 0 or more (any whole number), got {t}")
    if not (t.isascii() and t.isdigit()) or len(t) > 40 or int(t) > MAX_SEED:
        raise argparse.ArgumentTypeError(
            f"--seed must be a whole number from 0 to 2**128-1 written with digits 0-9, "
            f"got {t[:40]!r}"
        )
    return int(t)


def seconds_type(text: str) -> float:
    """An argparse type: a finite positive number of seconds (below 10**9).

    Examples
    --------
    >>> seconds_type("2.5")
    2.5
    """
    t = text.strip()
    try:
        value = float(t) if t.isascii() else -1.0
    except ValueError:
        value = -1.0
    if not 0 < value < 1e9:  # also refuses nan and inf
        raise argparse.ArgumentTypeError(
            f"--time-budget must be a finite positive number of seconds, got {t[:40]!r}"
        )
    return value


# --- the common flags ---


def add_output_arguments(parser, *, stream_note: str = "", legacy_json_file: bool = False) -> None:
    """Add ``--json`` (JSON instead of text) and ``-o/--output FILE`` (default standard output).

    With ``legacy_json_file``, ``--json FILE`` (a former spelling) is also
    accepted: ``args.json`` is then the file name, for the command to warn about.
    """
    group = parser.add_argument_group("output")
    json_help = "machine-readable JSON instead of text (strict JSON: no NaN or Infinity)"
    if legacy_json_file:
        group.add_argument("--json", nargs="?", const=True, default=False, help=json_help)
    else:
        group.add_argument("--json", action="store_true", help=json_help)
    group.add_argument(
        "-o",
        "--output",
        metavar="FILE",
        help="write the output to FILE instead of standard output" + stream_note,
    )


def add_precision_argument(parser) -> None:
    """Add ``--precision {single,double}`` (default double)."""
    parser.add_argument(
        "--precision",
        choices=tuple(PRECISIONS),
        default="double",
        help="contract in single (complex64) or double (complex128) precision (default double)",
    )


def add_bit_order_argument(parser) -> None:
    """Add ``--bit-order {qubit,classical}`` (default qubit)."""
    parser.add_argument(
        "--bit-order",
        choices=("qubit", "classical"),
        default="qubit",
        help="order of the characters of every bitstring read or written: qubit (default; "
        "character i is qubit i) or classical (character j is classical bit j, filled by the "
        "circuit's measure statements; cregs numbered in declaration order)",
    )


def add_stats_argument(parser) -> None:
    """Add ``--stats``: what the run did (contractions, slices, FLOPs, memory, seconds)."""
    parser.add_argument(
        "--stats",
        action="store_true",
        help="report what ran: contractions, slices, FLOPs, peak memory, seconds and "
        "GFLOP/s achieved (on standard error; inside the JSON with --json)",
    )


def add_limit_arguments(group) -> None:
    """Add ``--memory`` and ``--workers``: what a plan is made for (``cost`` takes these too)."""
    group.add_argument(
        "--memory",
        metavar="SIZE",
        help="memory limit for intermediates, e.g. 4GiB or 500MB (default: half of the "
        "available memory); larger plans are sliced, impossible ones refused",
    )
    group.add_argument(
        "--workers",
        type=count_type("--workers", 1, 4096),
        metavar="N",
        help="local worker processes for the slices (default: 1 for small work, "
        "every core for large); each gets memory/N",
    )


def add_run_arguments(parser) -> None:
    """Add the run options to an :mod:`argparse` (sub)parser.

    The options: ``--memory``, ``--workers``, ``--dask``, ``--checkpoint``,
    ``--quiet``, ``--array-backend``.

    :func:`tnsim.cli.main` runs the subcommand inside :func:`options_from_args`.
    """
    group = parser.add_argument_group("how the contraction runs")
    add_limit_arguments(group)
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


def add_plan_arguments(parser, *, time_budget: bool = True) -> None:
    """Add ``--plan FILE``, ``--save-plan FILE`` (and ``--time-budget S``) to a (sub)parser.

    :func:`options_from_args` hands them to :func:`run_options` (``plan_file``,
    ``save_plans``, ``time_budget``): plans are read from a file instead of made
    (a plan made for another network is refused), or saved for a later ``--plan``.
    """
    group = parser.add_argument_group("plans")
    group.add_argument(
        "--plan",
        metavar="FILE",
        help="use the plans saved in FILE instead of planning (a plan made for another "
        "circuit, bitstring, query or precision is refused)",
    )
    group.add_argument(
        "--save-plan", metavar="FILE", help="save the plans made to FILE (JSON) for --plan"
    )
    if time_budget:
        group.add_argument(
            "--time-budget",
            type=seconds_type,
            metavar="S",
            help="seconds of planner search (default: automatic); a checkpointed run that "
            "resumes takes its kept plan and does not plan",
        )


def add_query_arguments(parser, *, bit_order: bool = True, stream_note: str = "") -> None:
    """Add every flag a query command shares: output, precision, stats, bit order, run options."""
    add_output_arguments(parser, stream_note=stream_note)
    add_precision_argument(parser)
    add_stats_argument(parser)
    if bit_order:
        add_bit_order_argument(parser)
    add_run_arguments(parser)
    add_plan_arguments(parser)


def dtype_of(args: argparse.Namespace):
    """The numpy dtype ``--precision`` asks for."""
    import numpy as np

    return np.dtype(PRECISIONS[getattr(args, "precision", "double")])


# --- reading inputs ---

_STDIN_USED: list[str] = []


def reset_inputs() -> None:
    """Forget which input came from standard input (each command run starts afresh)."""
    _STDIN_USED.clear()


def check_file(path: str, what: str) -> None:
    """Refuse a path that is a folder or names nothing."""
    if os.path.isdir(path):
        raise InputError(f"{path}: is a folder; give the path of the {what}")
    if not os.path.isfile(path):
        raise InputError(f"{path}: no such file; give the path of the {what} (or - for stdin)")


def read_input_text(path: str, what: str) -> tuple[str, str]:
    """The text of ``path`` (``-``: standard input) and the name messages give it."""
    if path == "-":
        if _STDIN_USED:
            raise OptionError(
                f"both the {_STDIN_USED[0]} and the {what} are '-'; only one input can come "
                "from standard input"
            )
        _STDIN_USED.append(what)
        try:
            return sys.stdin.buffer.read().decode("utf-8"), "<stdin>"
        except UnicodeDecodeError as exc:
            raise InputError(f"<stdin>: the {what} is not UTF-8 text ({exc})") from None
    check_file(path, what)
    try:
        with open(path, encoding="utf-8", newline="") as fh:
            return fh.read(), path
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read the {what} {path!r}: {exc}") from None


def add_input_argument(parser) -> None:
    """Add ``--input NAME=VALUE`` (repeatable): values of an OpenQASM 3 program's inputs."""
    parser.add_argument(
        "--input",
        action="append",
        metavar="NAME=VALUE",
        help="value of an OpenQASM 3 'input' parameter, e.g. --input theta=0.3 (repeatable)",
    )


def parse_inputs(items: Sequence[str] | None) -> dict[str, float]:
    """Turn ``["theta=0.3", "n=4"]`` into ``{"theta": 0.3, "n": 4}``.

    Examples
    --------
    >>> parse_inputs(["theta=0.3", " n = 4 "])
    {'theta': 0.3, 'n': 4}
    """
    out: dict[str, float] = {}
    for item in items or ():
        name, sep, text = item.partition("=")
        name, text = name.strip(), text.strip()
        if not sep or not name.isidentifier():
            raise InputError(f"--input {item[:80]!r}: write NAME=VALUE, e.g. --input theta=0.3")
        if name in out:
            raise InputError(f"--input gives '{name}' twice; give each input once")
        digits = text.lstrip("+-")
        try:
            value: float = (
                int(text)
                if digits.isascii() and digits.isdigit() and len(text) < 19
                else float(text)
            )
        except ValueError:
            raise InputError(f"--input {name}={text[:80]!r}: the value is not a number") from None
        if not math.isfinite(value):
            raise InputError(f"--input {name}={text[:80]!r}: the value must be finite")
        out[name] = value
    return out


def load_circuit(path: str, inputs: Sequence[str] | None = None, *, unbound: str = "refuse"):
    """Read an OpenQASM 2.0 or 3 circuit for a subcommand (``-``: standard input).

    Errors name file:line:column.  ``inputs`` are ``--input NAME=VALUE`` items,
    bound to an OpenQASM 3 program's ``input`` declarations; an input given no
    value is refused (the query commands need numbers) unless ``unbound`` is
    ``"keep"`` (``tnsim optimize``: it becomes a named angle).  A register too
    large for the memory (:data:`QUBIT_BYTES` per qubit) is refused before
    anything is allocated.
    """
    from tnsim.circuits.qasm import read_qasm

    values = parse_inputs(inputs)
    if path == "-":
        text, name = read_input_text(path, "circuit")
        circuit = read_qasm(text, name=name, inputs=values, unbound=unbound)
    else:
        check_file(path, "OpenQASM circuit")
        circuit = read_qasm(path, inputs=values, unbound=unbound)
    check_register(circuit.num_qubits)
    return circuit


def _available() -> int:
    from tnsim.execution.memory import available_memory

    return available_memory()


def check_register(num_qubits: int) -> None:
    """Refuse a register whose bookkeeping alone exceeds the available memory.

    (``--memory`` bounds the intermediates of a contraction; the network's own
    tensors and the Python objects describing it come on top, about
    :data:`QUBIT_BYTES` per qubit.)
    """
    from tnsim.units import format_bytes

    have = _available()
    if num_qubits * QUBIT_BYTES > have:
        raise InputError(
            f"the circuit has {num_qubits:,} qubits; tnsim needs about "
            f"{format_bytes(QUBIT_BYTES)} per qubit ({format_bytes(num_qubits * QUBIT_BYTES)}), "
            f"more than the {format_bytes(have)} of memory available; use a smaller circuit"
        )


def check_array(count: int, width: int, what: str) -> None:
    """Refuse an output of ``count`` bitstrings of ``width`` bits beyond the available memory."""
    from tnsim.units import format_bytes

    have = _available()
    need = count * max(width, 1) * 2  # the 0/1 array and its text
    if need > have:
        raise InputError(
            f"{what}: {count:,} bitstrings of {width:,} bits need {format_bytes(need)}, more "
            f"than the {format_bytes(have)} of memory available; ask for fewer"
        )


def check_paths(args: argparse.Namespace) -> None:
    """Check ``-o``, ``--checkpoint`` and ``-`` inputs before any work.

    So a long run cannot fail at its end for a path it could have refused at once.
    """
    for option, path in (("-o", getattr(args, "output", None)),):
        if not path or path == "-":
            continue
        if os.path.isdir(path):
            raise OptionError(f"{option} {path}: is a folder; give a file name")
        folder = os.path.dirname(os.path.abspath(path))
        if not os.path.isdir(folder):
            raise OptionError(f"{option} {path}: folder {folder} does not exist")
    stdin = [
        name
        for name in ("circuit", "samples", "bits_file", "observable_file")
        if getattr(args, name, None) == "-"
    ]
    if len(stdin) > 1:
        raise OptionError(
            f"the {' and the '.join(n.replace('_', ' ') for n in stdin)} are both '-'; only one "
            "input can come from standard input"
        )
    ckpt = getattr(args, "checkpoint", None)
    if ckpt:
        probe = os.path.abspath(ckpt)
        while not os.path.exists(probe):
            probe = os.path.dirname(probe)
        if not os.path.isdir(probe):
            raise OptionError(
                f"--checkpoint {ckpt}: {probe} is a file, not a folder; give a folder path"
            )


# --- writing and run statistics ---


def write_output(text: str, path: str | None) -> None:
    """Write ``text`` to ``path``, or to standard output when ``path`` is empty or ``-``.

    Files go through :func:`tnsim.fileio.write_atomic` (regular files replaced
    whole, symbolic links written through, devices and FIFOs written
    directly, read-only files refused); standard output is checked by
    :func:`tnsim.cli.main` before it reports success.
    """
    from tnsim.fileio import write_atomic

    if path and path != "-":
        write_atomic(path, text)
    else:
        sys.stdout.write(text)


class RunStats:
    """What a command ran, from the :class:`~tnsim.execution.options.ContractionRecord` log."""

    def __init__(self) -> None:
        self.log: list = []
        self.began = time.perf_counter()

    def to_dict(self) -> dict:
        """Totals and one entry per contraction (at most 100 listed), JSON-ready."""
        log = self.log
        flops = sum(r.flops for r in log)
        seconds = sum(r.seconds for r in log)
        wall = time.perf_counter() - self.began
        return {
            "contractions": len(log),
            "flops": flops,
            "slices": sum(r.num_slices for r in log),
            "slices_run": sum(r.slices_run for r in log),
            "peak_bytes": max((r.peak_bytes for r in log), default=0),
            "memory_limit": max((r.memory_limit for r in log), default=None),
            "workers": max((r.workers for r in log), default=1),
            "contraction_seconds": seconds,
            "wall_seconds": wall,
            "gflops_per_second": flops / seconds / 1e9 if seconds > 0 else None,
            "units": "flops: real floating-point operations (complex multiply-add = 8); "
            "peak_bytes: largest intermediates of one slice; other seconds: planning, "
            "network building, reading and writing",
            "runs": [
                {
                    "flops": r.flops,
                    "slices": r.num_slices,
                    "slices_run": r.slices_run,
                    "peak_bytes": r.peak_bytes,
                    "seconds": r.seconds,
                }
                for r in log[:100]
            ],
        }

    def text(self) -> str:
        """A few lines for standard error."""
        from tnsim.units import format_bytes

        d = self.to_dict()
        rate = d["gflops_per_second"]
        limit = d["memory_limit"]
        lines = [
            f"stats: {d['contractions']} contraction(s), {d['slices']} slice(s) "
            f"({d['slices_run']} run), {d['flops']:.4g} FLOPs (real, complex multiply-add = 8)",
            f"stats: peak intermediates {format_bytes(d['peak_bytes'], 1)} per slice"
            + (f" (limit {format_bytes(limit, 1)})" if limit else "")
            + f", {d['workers']} worker(s)",
            f"stats: contraction {d['contraction_seconds']:.3g} s"
            + (f" at {rate:.3g} GFLOP/s" if rate is not None else "")
            + f"; wall {d['wall_seconds']:.3g} s (other: planning, network building, I/O)",
        ]
        return "\n".join(lines)


@contextlib.contextmanager
def options_from_args(args: argparse.Namespace) -> Iterator[object]:
    """Enter a :func:`run_options` block from parsed command-line arguments.

    Arguments the parser lacks are left at their defaults; ``--dask`` connects a
    ``distributed.Client`` for the block and closes it afterwards; with
    ``--stats`` the block keeps a log in ``args.run_stats``.
    """
    check_paths(args)
    if not hasattr(args, "memory") and not hasattr(args, "stats"):
        yield None  # commands that contract nothing
        return
    from tnsim.execution.backends import get_backend
    from tnsim.execution.options import run_options

    quiet = getattr(args, "quiet", False) or bool(getattr(args, "json", False))
    changes: dict = {"progress": False} if quiet else {}
    flags = {
        "memory_limit": "memory",
        "workers": "workers",
        "checkpoint": "checkpoint",
        "time_budget": "time_budget",
        "plan_file": "plan",
        "save_plans": "save_plan",
    }
    for name, flag in flags.items():
        value = getattr(args, flag, None)
        if value is not None:
            changes[name] = value
    backend = getattr(args, "array_backend", None)
    if backend is not None:
        changes["backend"] = get_backend(backend).name
    if getattr(args, "stats", False):
        args.run_stats = RunStats()
        changes["log"] = args.run_stats.log
    address = getattr(args, "dask", None)
    with contextlib.ExitStack() as stack:
        if address:
            client = stack.enter_context(_dask_client(address))
            changes["executor"] = client.get_executor()
        yield stack.enter_context(run_options(**changes))


def emit_stats(args: argparse.Namespace, doc: dict | None = None) -> None:
    """Put the run statistics into ``doc`` (JSON output) or print them on standard error."""
    stats = getattr(args, "run_stats", None)
    if stats is None:
        return
    if doc is not None:
        doc["stats"] = stats.to_dict()
    else:
        print(stats.text(), file=sys.stderr)


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
