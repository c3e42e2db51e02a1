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

    rates = calibrate()
    if args.json:
        doc = {
            "matmul_flop_rate": rates,
            "units": "real FLOP/s of a 384x384 complex matrix product (multiply-add = 8)",
            "cache_file": cache_file(),
        }
        write_output(json.dumps(doc) + "\n", args.output)
        return 0
    lines = [f"{name:<10}  {rate / 1e9:8.2f} GFLOP/s" for name, rate in rates.items()]
    lines.append(f"(real FLOP/s of a 384x384 complex matrix product; stored in {cache_file()})")
    write_output("\n".join(lines) + "\n", args.output)
    return 0


def register(sub) -> None:
    """Add ``calibrate`` to a subparsers object."""
    cal = sub.add_parser(
        "calibrate",
        help="measure this machine's matrix-multiply rates again (used by forecasts)",
        description="Measure the real FLOP/s of dense complex64 and complex128 matrix "
        "products (best of five after a warm-up) and store them for forecasts. Stored rates "
        "are also measured again on their own when older than 30 days, taken on another "
        "machine or numpy, or implausible (complex64 slower than 0.8x complex128).",
    )
    add_output_arguments(cal)
    cal.set_defaults(func=_cmd_calibrate)
