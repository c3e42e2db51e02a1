"""The ``cost`` subcommand: plan an amplitude and print the forecast.

Nothing big is allocated.  Also the text form of a forecast report.
"""

from __future__ import annotations

import argparse
import itertools
import json
import math
from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np

from tnsim.fitted import WRITE_FLOPS
from tnsim.units import format_bytes

if TYPE_CHECKING:
    from tnsim.queries.forecast import ForecastReport

__all__ = ["format_report", "register", "sparkline"]

_BITS_HELP = "character i is qubit i (the leftmost character is qubit 0)"


def _cmd_cost(args: argparse.Namespace) -> int:
    from tnsim.circuits.bits import format_bits, parse_bits
    from tnsim.cli.common import load_circuit
    from tnsim.errors import InputError
    from tnsim.queries.forecast import forecast
    from tnsim.units import parse_memory

    circuit = load_circuit(args.circuit)
    limit = None if args.memory is None else parse_memory(args.memory)
    if args.time_budget is not None and not args.time_budget > 0:
        raise InputError(
            f"--time-budget must be a positive number of seconds, got {args.time_budget}"
        )
    bits = "0" * circuit.num_qubits if args.bits is None else args.bits
    bits = format_bits(parse_bits(bits, circuit.num_qubits))
    report = forecast(
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


_BARS = " ▁▂▃▄▅▆▇█"


def sparkline(values: Sequence[float], width: int = 60) -> str:
    """A one-line text chart of ``values`` (bucketed to ``width`` columns by maximum).

    Examples
    --------
    >>> sparkline([0, 1, 2, 3, 4, 5, 6, 7, 8])
    ' ▁▂▃▄▅▆▇█'
    """
    if not values:
        return ""
    vals = list(values)
    if len(vals) > width:
        edges = np.linspace(0, len(vals), width + 1).astype(int)
        vals = [max(vals[a:b]) for a, b in itertools.pairwise(edges) if b > a]
    lo, hi = min(vals), max(vals)
    span = hi - lo or 1.0
    return "".join(_BARS[round((v - lo) / span * (len(_BARS) - 1))] for v in vals)


def _fmt_seconds(s: float) -> str:
    if s < 120:
        return f"{s:.3g} s"
    if s < 7200:
        return f"{s / 60:.3g} min"
    if s < 2 * 86400:
        return f"{s / 3600:.3g} h"
    if s < 2 * 365 * 86400:
        return f"{s / 86400:.3g} days"
    return f"{s / (365.25 * 86400):.3g} years"


def format_report(r: ForecastReport) -> str:
    """The report as a readable table, with a profile of intermediate sizes."""

    def lg(x: float) -> float:
        return math.log10(x) if x > 0 else float("-inf")

    rows = [
        ("qubits", f"{r.num_qubits}"),
        ("tensors (simplified)", f"{r.num_tensors} ({r.num_tensors_simplified})"),
        ("planner", f"{r.method} ({r.planning_seconds:.2f} s)"),
        ("FLOPs (real, all slices)", f"{r.flops:.4g}  (log10 {lg(r.flops):.2f})"),
        (
            "opt_einsum cost (unsliced)",
            f"{r.opt_einsum_cost:.4g}  (log10 {lg(r.opt_einsum_cost):.2f})",
        ),
        (
            "width (log2 elements)",
            f"{r.width:.1f}" + (f"  (unsliced {r.unsliced_width:.1f})" if r.num_slices > 1 else ""),
        ),
        (
            "peak intermediates",
            f"{format_bytes(r.peak_bytes, 1)} per slice ({r.itemsize} B/element)",
        ),
        ("slices", f"{r.num_slices} ({r.sliced_labels} labels), overhead x{r.overhead:.3f}"),
        ("elements written", f"{r.written:.4g}  (log10 {lg(r.written):.2f})"),
        (
            "forecast",
            f"{_fmt_seconds(r.seconds)} at {r.flop_rate / 1e9:.3g} GFLOP/s (matmul rate), "
            f"{WRITE_FLOPS} FLOPs' time per element written",
        ),
    ]
    if r.memory_limit is not None:
        verdict = (
            "fits"
            if r.fits_unsliced
            else (
                f"unsliced tree needs {format_bytes(r.unsliced_peak_bytes, 1)}: does NOT fit; "
                f"sliced into {r.num_slices} slices it does"
            )
        )
        rows.insert(7, ("memory limit", f"{format_bytes(r.memory_limit, 1)}: {verdict}"))
    key_w = max(len(k) for k, _ in rows)
    lines = [f"{k:<{key_w}}  {v}" for k, v in rows]
    if r.profile:
        lines.append("")
        lines.append(
            f"intermediate sizes along the contraction (log2 elements, "
            f"{min(r.profile):.0f} to {max(r.profile):.0f}):"
        )
        lines.append("  " + sparkline(r.profile))
        counts: dict[int, int] = {}
        for v in r.profile:
            counts[int(v)] = counts.get(int(v), 0) + 1
        top = max(counts.values())
        lines.append("histogram (log2 elements: count):")
        for k in sorted(counts):
            bar = "#" * max(1, round(40 * counts[k] / top))
            lines.append(f"  {k:>3}  {counts[k]:>6}  {bar}")
    return "\n".join(lines)


def register(sub) -> None:
    """Add ``cost`` to a subparsers object."""
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
        choices=("runtime", "operations"),
        default="runtime",
        help="what the planner minimises: a run-time model (FLOPs plus a cost per element "
        "written; default) or FLOPs alone",
    )
    cost.add_argument("--json", action="store_true", help="machine-readable output")
    cost.set_defaults(func=_cmd_cost)
