"""The ``tnsim cost`` subcommand: plan an amplitude, print the forecast; nothing big allocated."""

from __future__ import annotations

import argparse
import json

__all__ = ["add_cost_command"]

_BITS_HELP = "character i is qubit i (the leftmost character is qubit 0)"


def _cmd_cost(args: argparse.Namespace) -> int:
    from ..bits import format_bits, parse_bits
    from ..cli import load_circuit
    from ..errors import InputError
    from ..memory import parse_memory
    from .forecast import format_report, plan

    circuit = load_circuit(args.circuit)
    limit = None if args.memory is None else parse_memory(args.memory)
    if args.time_budget is not None and not args.time_budget > 0:
        raise InputError(
            f"--time-budget must be a positive number of seconds, got {args.time_budget}"
        )
    bits = "0" * circuit.num_qubits if args.bits is None else args.bits
    bits = format_bits(parse_bits(bits, circuit.num_qubits))
    report = plan(
        circuit,
        bits,
        memory_limit=limit,
        time_budget=args.time_budget,
        seed=args.seed,
        objective=args.objective,
    )
    if args.json:
        data = report.to_dict()
        data["units"] = {
            "flops": "real floating-point operations, complex multiply-add = 8",
            "bytes": f"{report.itemsize} bytes per element (complex128)",
            "width": "log2 of the largest intermediate, in elements",
            "profile": "log2 elements of each intermediate, in contraction order",
        }
        print(json.dumps(data))
    else:
        print(format_report(report))
    return 0


def add_cost_command(sub) -> None:
    """Register ``tnsim cost`` on an argparse sub-parser collection."""
    cost = sub.add_parser(
        "cost",
        help="plan one amplitude and forecast FLOPs, memory, slices and seconds",
        description="Plan the amplitude <x|C|0...0> of a circuit and print its cost: real "
        "FLOPs (complex multiply-add = 8), peak bytes of intermediates, width (log2 "
        "elements), slices and their overhead, and a time forecast from this machine's "
        "measured matrix-multiply rate.  Nothing big is allocated.  Bitstrings: "
        f"{_BITS_HELP}.",
    )
    cost.add_argument("circuit", help="OpenQASM 2.0 file")
    cost.add_argument(
        "--bits", metavar="BITS", help=f"the bitstring x (default all zeros); {_BITS_HELP}"
    )
    cost.add_argument(
        "--memory",
        metavar="SIZE",
        help="memory limit for one slice's intermediates, e.g. 4GiB or 500MB",
    )
    cost.add_argument(
        "--time-budget",
        type=float,
        metavar="S",
        help="seconds of planner search (default: automatic)",
    )
    cost.add_argument("--seed", type=int, default=0, help="seed of the planner (default 0)")
    cost.add_argument(
        "--objective",
        choices=("time", "flops"),
        default="time",
        help="what the planner minimises: a run-time model (FLOPs plus a cost per element "
        "written; default) or FLOPs alone",
    )
    cost.add_argument("--json", action="store_true", help="machine-readable output")
    cost.set_defaults(func=_cmd_cost)
