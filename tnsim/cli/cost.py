"""The ``cost`` subcommand: forecast a query before running it.

One amplitude (the default), a batch of amplitudes, samples, a marginal or an
expectation value is planned the way the query would plan it, under the same
memory limit (:mod:`tnsim.queries.forecast`, :mod:`tnsim.queries.workload`);
nothing big is allocated.  Also the text form of a forecast report.
"""

from __future__ import annotations

import argparse
import itertools
import json
import math
from collections.abc import Sequence
from typing import TYPE_CHECKING

from tnsim.cli.common import (
    OptionError,
    add_bit_order_argument,
    add_input_argument,
    add_limit_arguments,
    add_output_arguments,
    add_plan_arguments,
    add_precision_argument,
    count_type,
    dtype_of,
    load_circuit,
    seconds_type,
    seed_type,
    write_output,
)
from tnsim.cli.inputs import gather_bits, observable_text, parse_qubit_list
from tnsim.units import format_bytes

if TYPE_CHECKING:
    from tnsim.queries.forecast import ForecastReport
    from tnsim.queries.workload import QueryForecast

__all__ = ["format_query_forecast", "format_report", "register", "sparkline"]

_UNITS = {
    "flops": "real floating-point operations, complex multiply-add = 8",
    "bytes": "bytes of intermediates of one slice (inputs not counted)",
    "width": "log2 of the largest intermediate, in elements",
    "profile": "log2 elements of each intermediate, in contraction order",
    "seconds": "forecast: FLOPs plus a cost per element written at the measured matmul "
    "rate, plus the fixed Python time per step (fixed_seconds)",
}


def _query_kind(args: argparse.Namespace) -> str:
    kinds = [
        name
        for name, given in (
            ("amplitudes", args.bits or args.bits_file),
            ("samples", args.shots is not None),
            ("marginal", args.qubits),
            ("expectation", args.observable or args.observable_file),
        )
        if given
    ]
    if len(kinds) > 1:
        raise OptionError(
            f"give one query to forecast, not {' and '.join(kinds)}: --bits/--bits-file, "
            "--shots, --qubits or --observable"
        )
    return kinds[0] if kinds else "amplitude"


def _cmd_cost(args: argparse.Namespace) -> int:
    circuit = load_circuit(args.circuit, args.input)
    kind = _query_kind(args)
    dtype = dtype_of(args)
    if kind == "amplitudes":
        rows, _ = gather_bits(args, circuit)
        if len(rows) == 1:
            return _one_amplitude(args, circuit, rows[0], dtype)
        from tnsim.queries.workload import forecast_amplitudes

        report = forecast_amplitudes(circuit, rows, dtype=dtype, memory_limit=args.memory)
    elif kind == "amplitude":
        return _one_amplitude(args, circuit, None, dtype)
    elif kind == "samples":
        from tnsim.queries.workload import forecast_samples

        report = forecast_samples(
            circuit,
            args.shots,
            dtype=dtype,
            memory_limit=args.memory,
            method=args.method,
            seed=args.seed,
        )
    elif kind == "marginal":
        from tnsim.queries.workload import forecast_marginal

        qubits = [q for text in args.qubits for q in parse_qubit_list(text)]
        report = forecast_marginal(circuit, qubits, dtype=dtype, memory_limit=args.memory)
    else:
        from tnsim.queries.workload import forecast_expectation

        text = observable_text(args)
        report = forecast_expectation(circuit, text, dtype=dtype, memory_limit=args.memory)
    if args.json:
        data = report.to_dict()
        data["units"] = {k: v for k, v in _UNITS.items() if k in ("flops", "bytes", "seconds")}
        write_output(json.dumps(data, allow_nan=False) + "\n", args.output)
    else:
        write_output(format_query_forecast(report) + "\n", args.output)
    return 0


def _one_amplitude(args, circuit, row, dtype) -> int:
    from tnsim.circuits.bits import format_bits
    from tnsim.queries.forecast import forecast

    bits = "0" * circuit.num_qubits if row is None else format_bits(row)
    report = forecast(
        circuit,
        bits,
        memory_limit=args.memory,
        time_budget=args.time_budget,
        seed=args.seed,
        objective=args.objective,
        dtype=dtype,
    )
    if args.json:
        data = report.to_dict()
        data["query"] = "amplitude"
        data["units"] = dict(_UNITS, bytes=f"{report.itemsize} bytes per element")
        write_output(json.dumps(_finite(data), allow_nan=False) + "\n", args.output)
    else:
        write_output(format_report(report) + "\n", args.output)
    return 0


def _finite(data: dict) -> dict:
    """Non-finite floats (a log of zero FLOPs) as ``None`` for strict JSON."""
    return {
        k: (None if isinstance(v, float) and not math.isfinite(v) else v) for k, v in data.items()
    }


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
        edges = [k * len(vals) // width for k in range(width + 1)]
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
    from tnsim.fitted import WRITE_FLOPS

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
            f"{_fmt_seconds(r.seconds)} = {_fmt_seconds(r.compute_seconds)} compute "
            f"({r.flops_run:.4g} FLOPs run at {r.flop_rate / 1e9:.3g} GFLOP/s, the matmul rate, "
            f"{WRITE_FLOPS} FLOPs' time per element written) + {_fmt_seconds(r.fixed_seconds)} "
            f"fixed ({r.steps_per_slice} steps per slice at {r.step_seconds * 1e6:.3g} us each, "
            "measured here)",
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


def format_query_forecast(r: QueryForecast) -> str:
    """A forecast of a whole query as a readable table."""

    def lg(x: float) -> str:
        return f"  (log10 {math.log10(x):.2f})" if x > 0 else ""

    rows = [
        ("query", f"{r.query}: {r.route}"),
        ("contractions", f"{r.contractions:,}" if r.contractions else "(measured)"),
        ("FLOPs (real, all runs)", f"{r.flops:.4g}{lg(r.flops)}"),
        ("elements written", f"{r.written:.4g}{lg(r.written)}" if r.written else "-"),
        ("peak intermediates", f"{format_bytes(r.peak_bytes, 1)} per slice"),
        ("memory limit", f"{format_bytes(r.memory_limit, 1)} per worker"),
        ("slices", f"{r.num_slices} (most of one contraction)"),
        (
            "forecast",
            f"{_fmt_seconds(r.seconds)} ({_fmt_seconds(r.compute_seconds)} at "
            f"{r.flop_rate / 1e9:.3g} GFLOP/s matmul rate + {_fmt_seconds(r.fixed_seconds)} "
            "fixed per-step time)"
            if r.method == "time model"
            else f"{_fmt_seconds(r.seconds)}",
        ),
        ("method", r.method),
        ("planning", f"{r.planning_seconds:.2f} s"),
    ]
    key_w = max(len(k) for k, _ in rows)
    return "\n".join(f"{k:<{key_w}}  {v}" for k, v in rows)


def register(sub) -> None:
    """Add ``cost`` to a subparsers object."""
    cost = sub.add_parser(
        "cost",
        help="forecast FLOPs, memory, slices and seconds of a query before running it",
        description="Plan a query the way it would run, under the same memory limit, and print "
        "its cost: real FLOPs (complex multiply-add = 8), peak bytes of intermediates, slices, "
        "and a time forecast from this machine's measured matrix-multiply rate plus the fixed "
        "time per step. Default: one amplitude of the all-zeros bitstring; or a batch "
        "(--bits, --bits-file), samples (--shots), a marginal (--qubits) or an expectation "
        "value (--observable). Nothing big is allocated; sampling wide circuits is forecast "
        "from two short pilot runs.",
    )
    cost.add_argument("circuit", help="OpenQASM 2.0 or 3 file, or - to read it from standard input")
    add_input_argument(cost)
    what = cost.add_argument_group("the query (one of)")
    what.add_argument(
        "--bits", action="append", metavar="BITS", help="a bitstring (repeatable: a batch)"
    )
    what.add_argument("--bits-file", metavar="FILE", help="a file of bitstrings (as amp reads)")
    what.add_argument(
        "--shots", type=count_type("--shots", 1, 10**12), metavar="N", help="N samples"
    )
    what.add_argument(
        "--method",
        choices=("auto", "gates", "marginals"),
        default="auto",
        help="sampling method (as sample takes it)",
    )
    what.add_argument("--qubits", action="append", metavar="LIST", help="marginal of e.g. 0,3,5")
    what.add_argument(
        "--observable", action="append", metavar="TEXT", help="expectation value (repeatable)"
    )
    what.add_argument("--observable-file", metavar="FILE", help="observable terms, one per line")
    plan = cost.add_argument_group("planning")
    add_limit_arguments(plan)
    plan.add_argument(
        "--time-budget",
        type=seconds_type,
        metavar="S",
        help="seconds of planner search for one amplitude (default: automatic, as amp plans)",
    )
    plan.add_argument(
        "--seed",
        type=seed_type,
        default=0,
        help="seed of the planner (and of the pilot samples), 0 or more (default 0)",
    )
    plan.add_argument(
        "--objective",
        choices=("runtime", "operations"),
        default="runtime",
        help="what the planner minimises for one amplitude: a run-time model (FLOPs plus a "
        "cost per element written; default, as amp plans) or FLOPs alone",
    )
    add_precision_argument(cost)
    add_bit_order_argument(cost)
    add_output_arguments(cost)
    add_plan_arguments(cost, time_budget=False)
    cost.set_defaults(func=_cmd_cost)
