"""The ``calibrate`` subcommand: measure this machine's matmul rates again.

Forecasts (``tnsim cost``) divide FLOPs by the measured rate of a dense complex
matrix product (:mod:`tnsim.execution.rate`); the rate is cached, refreshed
when stale or implausible, and measured afresh here.
"""

from __future__ import annotations

import argparse
import json

from tnsim.cli.common import add_output_arguments, write_output

__all__ = ["register"]


def _cmd_calibrate(args: argparse.Namespace) -> int:
    from tnsim.execution.rate import cache_file, calibrate
    from tnsim.execution.stepcost import step_seconds

    rates = calibrate()
    steps = {name: step_seconds(name, refresh=True) for name in rates}
    if args.json:
        doc = {
            "matmul_flop_rate": rates,
            "step_seconds": steps,
            "units": "real FLOP/s of a 384x384 complex matrix product (multiply-add = 8); "
            "seconds of fixed cost per pairwise step of a sliced contraction",
            "cache_file": cache_file(),
        }
        write_output(json.dumps(doc) + "\n", args.output)
        return 0
    lines = [
        f"{name:<10}  {rate / 1e9:8.2f} GFLOP/s  {steps[name] * 1e6:7.2f} us per step"
        for name, rate in rates.items()
    ]
    lines.append(
        "(real FLOP/s of a 384x384 complex matrix product, and the fixed cost of one "
        f"pairwise step of a sliced contraction; stored in {cache_file()})"
    )
    write_output("\n".join(lines) + "\n", args.output)
    return 0


def register(sub) -> None:
    """Add ``calibrate`` to a subparsers object."""
    cal = sub.add_parser(
        "calibrate",
        help="measure this machine's matrix-multiply rates and step cost again (for forecasts)",
        description="Measure the real FLOP/s of dense complex64 and complex128 matrix "
        "products (best of five after a warm-up) and the fixed cost of one pairwise step of a "
        "sliced contraction, and store them for forecasts. Stored figures "
        "are also measured again on their own when older than 30 days, taken on another "
        "machine or numpy, or implausible (complex64 slower than 0.8x complex128).",
    )
    add_output_arguments(cal)
    cal.set_defaults(func=_cmd_calibrate)
