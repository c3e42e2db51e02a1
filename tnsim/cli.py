"""The ``tnsim`` command line.

Each subcommand is a function ``_cmd_<name>(args) -> int`` registered in
:func:`build_parser`.  A user's mistake (any :class:`~tnsim.errors.TnsimError`,
or a bad option) prints one line on stderr and exits with status 2; nothing is
written in that case.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import tempfile
from collections.abc import Sequence

import numpy as np

from .bits import format_bits, parse_many, read_bits_file
from .circuit import Circuit
from .errors import InputError, TnsimError
from .runconfig import add_run_arguments, options_from_args

__all__ = ["main", "build_parser"]

BITS_HELP = "character i of a bitstring is qubit i (the leftmost character is qubit 0)"


class _Parser(argparse.ArgumentParser):
    """An argument parser whose errors are one line and exit status 2."""

    def error(self, message: str):  # noqa: D401 - argparse API
        raise InputError(f"{self.prog}: {message} (see '{self.prog} --help')")


def write_atomic(path: str, text: str) -> None:
    """Write ``text`` to ``path`` through a temporary file and a rename.

    A failure leaves no partial file behind.
    """
    directory = os.path.dirname(os.path.abspath(path))
    try:
        fd, tmp = tempfile.mkstemp(prefix=".tnsim-", dir=directory)
    except OSError as exc:
        raise InputError(f"cannot write {path!r}: {exc.strerror}") from None
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        os.replace(tmp, path)
    except BaseException:
        os.unlink(tmp)
        raise


def write_output(text: str, path: str | None) -> None:
    """Write ``text`` to ``path`` atomically, or to standard output when ``path`` is empty."""
    if path:
        write_atomic(path, text)
    else:
        sys.stdout.write(text)


def load_circuit(path: str) -> Circuit:
    """Read an OpenQASM 2.0 file for a subcommand (errors name file:line:column)."""
    from .qasm import read_qasm

    if not os.path.isfile(path):
        raise InputError(f"{path}: no such file; give the path of an OpenQASM 2.0 circuit")
    return read_qasm(path)


def _gather_bits(args: argparse.Namespace, n: int) -> np.ndarray:
    rows = []
    if args.bits:
        rows.append(parse_many(args.bits, n))
    if args.bits_file:
        rows.append(read_bits_file(args.bits_file, n))
    if not rows:
        raise InputError("give at least one bitstring with --bits or --bits-file")
    return np.concatenate(rows)


def _amp_rows(circuit: Circuit, rows: np.ndarray, dtype):
    """Yield one record per bitstring, chunk by chunk as the batch is contracted."""
    from .execute import Scaled
    from .queries import iter_amplitudes

    for start, mantissa, exponent in iter_amplitudes(circuit, rows, dtype=dtype, chunk=64):
        for k in range(len(mantissa)):
            a = Scaled(np.asarray(mantissa[k]), int(exponent[k]))
            value = complex(a)
            yield {
                "bits": format_bits(rows[start + k]),
                "real": value.real,
                "imag": value.imag,
                "probability": abs(value) ** 2,
                "log10_abs": a.log10_abs(),
                "phase": a.phase(),
            }


def _print_amp_table(rows, num_bits: int, stream=None) -> None:
    """Print records as they come (flushing each), so long batches stream."""
    stream = stream or sys.stdout
    width = max(12, num_bits) if num_bits <= 64 else 12
    print(f"{'bitstring':<{width}}  {'amplitude':>34}  {'probability':>12}  log10|a|", file=stream)
    for r in rows:
        bits = r["bits"] if len(r["bits"]) <= 64 else r["bits"][:9] + "..."
        amp = f"{r['real']:+.10e}{r['imag']:+.10e}j"
        print(
            f"{bits:<{width}}  {amp:>34}  {r['probability']:12.6e}  {r['log10_abs']:.6f}",
            file=stream,
            flush=True,
        )


def _cmd_amp(args: argparse.Namespace) -> int:
    circuit = load_circuit(args.circuit)
    rows = _gather_bits(args, circuit.num_qubits)
    dtype = np.complex64 if args.single else np.complex128
    result = _amp_rows(circuit, rows, dtype)
    if args.json:
        print(json.dumps({"num_qubits": circuit.num_qubits, "amplitudes": list(result)}))
    else:
        _print_amp_table(result, circuit.num_qubits)
    return 0


def _cmd_demo(args: argparse.Namespace) -> int:
    from .demo import run_demo

    return run_demo(quick=args.quick)


def _cmd_gen(args: argparse.Namespace) -> int:
    from .families import describe_families, make_family, parse_params

    if args.list:
        print(describe_families())
        return 0
    if not args.family:
        raise InputError("give a family name (list them with 'tnsim gen --list')")
    write_output(make_family(args.family, **parse_params(args.param)).to_qasm(), args.output)
    return 0


def _cmd_bench(args: argparse.Namespace) -> int:
    from .bench import bench_command

    return bench_command(args, write_atomic)


def _add_gen_and_bench(sub) -> None:
    gen = sub.add_parser(
        "gen",
        help="write a circuit of a built-in family as OpenQASM 2.0",
        description="Write a circuit of a built-in family as OpenQASM 2.0 "
        "(e.g. tnsim gen grid --param rows=5 --param cols=5 -o grid.qasm).",
    )
    gen.add_argument("family", nargs="?", help="family name (see --list)")
    gen.add_argument("--param", action="append", metavar="KEY=VALUE", help="family parameter")
    gen.add_argument("-o", "--output", metavar="FILE", help="output file (default: stdout)")
    gen.add_argument("--list", action="store_true", help="list families and their parameters")
    gen.set_defaults(func=_cmd_gen)

    bench = sub.add_parser(
        "bench",
        help="sweep a circuit family: plan (and contract) one amplitude per size and planner",
        description="Sweep a circuit family over sizes; plan one amplitude of each instance "
        "with each planner, optionally contract it; record real FLOPs (complex "
        "multiply-add = 8), width, slices, seconds and memory.",
    )
    bench.add_argument("--family", default="grid", help="family name (default grid)")
    bench.add_argument("--sizes", required=True,
                       help="comma-separated sizes: RxC for grid/ising, N for the others")
    bench.add_argument("--cycles", type=int, help="the family's depth (cycles, layers, p, ...)")
    bench.add_argument("--param", action="append", metavar="KEY=VALUE",
                       help="other family parameter (repeatable)")
    bench.add_argument("--planners", default="tnsim,greedy,random-greedy",
                       help="comma-separated: tnsim, greedy, random-greedy")
    bench.add_argument("--execute", action="store_true", help="contract plans under --flop-cap")
    bench.add_argument("--flop-cap", type=float, default=1e10,
                       help="largest real-FLOP count contracted (default 1e10)")
    bench.add_argument("--time-budget", type=float, default=2.0,
                       help="seconds per instance for searching planners (default 2)")
    bench.add_argument("--double", action="store_true", help="complex128 (default complex64)")
    bench.add_argument("--csv", metavar="FILE", help="write the records as CSV")
    bench.add_argument("--json", metavar="FILE", help="write records, units and machine as JSON")
    bench.add_argument("--plot", metavar="FILE.png", help="plot cost against size (matplotlib)")
    bench.add_argument(
        "--seed", type=int, default=0, help="seed of bitstring, planners (family: --param seed=N)"
    )
    bench.add_argument("--quiet", action="store_true", help="no progress bar")
    bench.set_defaults(func=_cmd_bench)


def build_parser() -> argparse.ArgumentParser:
    """Return the argument parser of the ``tnsim`` command."""
    parser = _Parser(
        prog="tnsim",
        description="Exact amplitudes and more of wide, shallow quantum circuits by "
        f"tensor-network contraction. Bitstrings: {BITS_HELP}.",
    )
    sub = parser.add_subparsers(dest="command", required=True, parser_class=_Parser)

    amp = sub.add_parser(
        "amp",
        help="amplitudes <x|C|0...0> of bitstrings",
        description=f"Print amplitudes <x|C|0...0>. {BITS_HELP}.",
    )
    amp.add_argument("circuit", help="OpenQASM 2.0 file")
    amp.add_argument(
        "--bits", action="append", metavar="BITS", help=f"a bitstring (repeatable); {BITS_HELP}"
    )
    amp.add_argument(
        "--bits-file",
        metavar="FILE",
        help="file with one bitstring per line; rows are printed as they are computed",
    )
    amp.add_argument("--single", action="store_true", help="contract in complex64")
    amp.add_argument("--json", action="store_true", help="machine-readable output")
    add_run_arguments(amp)
    amp.set_defaults(func=_cmd_amp)

    demo = sub.add_parser("demo", help="run a built-in example end to end")
    demo.add_argument("--quick", action="store_true", help="smaller instances")
    demo.set_defaults(func=_cmd_demo)
    _add_gen_and_bench(sub)
    from .plan.cost_cli import add_cost_command

    add_cost_command(sub)
    from .cli_queries import add_query_commands

    add_query_commands(sub)
    for name in ("marginal", "expect", "sample", "xeb"):
        add_run_arguments(sub.choices[name])
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
