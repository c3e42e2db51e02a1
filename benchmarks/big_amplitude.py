"""One big amplitude end to end under a memory limit: plan, forecast, contract, compare two seeds.

The headline job: ``<0...0|C|0...0>`` of a 10x10 grid circuit of 12 cycles (CZ, the
ABCDCDAB layer sequence, complex128) under 2 GiB.  For each planner seed the
script plans the simplified amplitude network (``make_plan`` with the memory limit
and ``--budget`` seconds), prints the plan and its time forecast (FLOPs at this
machine's matmul rate plus the fitted cost per element written), then contracts
it with a progress bar and a checkpoint folder per seed (a stopped run resumes: the
folder keeps the plan, so the rerun takes it instead of planning again),
and records the wall time beside the forecast.  With ``--workers`` local worker
processes (default 1: one process whose matrix products use every core) each slice
is planned for the limit divided among them.  Two plans from different seeds
must give the same amplitude to ``--rtol`` (there is no state vector to compare
with at 100 qubits).  ``--verify`` runs the same on a small instance (5x5, 12
cycles, 1 MiB) and also checks it against an unsliced contraction.

Run::

    python benchmarks/big_amplitude.py --verify            # small instance, about a minute
    python benchmarks/big_amplitude.py                     # 10x10x12 under 2 GiB (long)
    python benchmarks/big_amplitude.py --plan-only         # plans and forecasts only

The same amplitude from the command line::

    tnsim gen grid --param rows=10 --param cols=10 --param depth=12 \\
        --param sequence=abcdcdab -o grid.qasm
    tnsim amp grid.qasm --bits 0000...0 --memory 2GiB --checkpoint ck/
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
import time

import numpy as np

from tnsim.circuits.families import grid_circuit
from tnsim.execution.budget import kept_plan
from tnsim.execution.options import run_options
from tnsim.execution.rate import matmul_rate
from tnsim.execution.slices import execute
from tnsim.execution.timemodel import forecast_seconds
from tnsim.fileio import write_atomic
from tnsim.network.builders import amplitude_network
from tnsim.network.simplify import absorb_small
from tnsim.plan.driver import make_plan
from tnsim.units import parse_memory


def plan_and_forecast(net, limit: int, budget: float, seed: int):
    """The plan of one seed and its forecast seconds."""
    t = time.perf_counter()
    plan = kept_plan(net, lambda: make_plan(net, memory_limit=limit, time_budget=budget, seed=seed))
    seconds = time.perf_counter() - t
    written = sum(plan.tree.intermediate_sizes(plan.sliced)) * plan.num_slices
    rate = matmul_rate(np.dtype(net.dtype))
    return plan, seconds, forecast_seconds(plan.flops, written, rate)


def _one_seed(args, net, limit: int, per_worker: int, seed: int):
    """Plan (or take the kept plan), forecast and run one seed; return its row and value."""
    plan, plan_s, forecast = plan_and_forecast(net, per_worker, args.budget, seed)
    timings = getattr(plan, "timings", ())  # a kept plan has none: it was not planned now
    row = {
        "seed": seed,
        "flops": plan.flops,
        "log10_flops": math.log10(plan.flops),
        "slices": plan.num_slices,
        "peak_bytes": plan.peak_bytes,
        "overhead": plan.overhead,
        "planning_seconds": plan_s,
        "planning_stages": dict(timings),
        "forecast_seconds": forecast,
    }
    print(
        f"seed {seed}: 10^{row['log10_flops']:.2f} FLOPs in {plan.num_slices} slices, "
        f"peak {plan.peak_bytes / 2**30:.3g} GiB, planned in {plan_s:.1f} s "
        f"({', '.join(f'{k} {v:.1f} s' for k, v in timings)}); forecast "
        f"{forecast:.0f} s on one worker",
        flush=True,
    )
    if args.plan_only:
        return row, None
    t = time.perf_counter()
    value = execute(
        net, plan.tree, plan.sliced, memory_limit=limit, workers=args.workers, progress=True
    ).value()
    row["run_seconds"] = time.perf_counter() - t
    row["amplitude"] = [value.real, value.imag]
    print(
        f"seed {seed}: amplitude {value:.12e}, ran in {row['run_seconds']:.1f} s "
        f"({args.workers} workers) against a forecast of {forecast:.0f} s on one",
        flush=True,
    )
    return row, complex(value)


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--rows", type=int, default=10)
    parser.add_argument("--cols", type=int, default=10)
    parser.add_argument("--cycles", type=int, default=12)
    parser.add_argument("--sequence", default="abcdcdab")
    parser.add_argument("--memory", default="2GiB", help="memory limit of one slice")
    parser.add_argument("--budget", type=float, default=120.0, help="planning seconds per seed")
    parser.add_argument("--seeds", default="0,1", help="planner seeds (two or more)")
    parser.add_argument("--rtol", type=float, default=1e-10)
    parser.add_argument(
        "--workers", type=int, default=1, help="local worker processes (each gets limit/N)"
    )
    parser.add_argument("--checkpoint", default="big_amplitude_ck", help="checkpoint folder")
    parser.add_argument("--plan-only", action="store_true", help="plan and forecast, no run")
    parser.add_argument("--verify", action="store_true", help="small instance: 6x6x12, 1 MiB")
    parser.add_argument("--out", help="JSON file of the figures")
    args = parser.parse_args(argv)
    if args.verify:
        args.rows, args.cols, args.memory, args.budget = 5, 5, "1MiB", 3.0
    limit = parse_memory(args.memory)
    circuit = grid_circuit(args.rows, args.cols, args.cycles, seed=0, sequence=args.sequence)
    n = args.rows * args.cols
    net = absorb_small(amplitude_network(circuit, "0" * n))
    print(
        f"{args.rows}x{args.cols} grid, {args.cycles} cycles, {args.sequence}, CZ, complex128: "
        f"{len(net)} tensors; memory limit {args.memory}; {os.cpu_count()} cores, load "
        f"{os.getloadavg()[0]:.1f}",
        flush=True,
    )
    rows = []
    values = []
    # Local workers run slices at once: each gets its share of the limit.
    per_worker = limit // max(1, args.workers)
    for seed in [int(s) for s in args.seeds.split(",")]:
        folder = os.path.join(args.checkpoint, f"seed-{seed}")
        with run_options(checkpoint=folder):  # the folder keeps the plan and the finished chunks
            row, value = _one_seed(args, net, limit, per_worker, seed)
        rows.append(row)
        if value is not None:
            values.append(value)
    status = 0
    if len(values) >= 2:
        ref = values[0]
        worst = max(abs(v - ref) / abs(ref) for v in values[1:])
        print(f"largest relative difference between seeds: {worst:.2e} (limit {args.rtol:g})")
        status = 0 if worst <= args.rtol else 1
    if args.verify and values:
        full = execute(net, make_plan(net, max_trials=4).tree).value()
        diff = abs(values[0] - full) / abs(full)
        print(f"sliced against unsliced: relative difference {diff:.2e}")
        status = status or (0 if diff <= args.rtol else 1)
    if args.out:
        write_atomic(args.out, json.dumps(rows, indent=1))
    return status


if __name__ == "__main__":
    sys.exit(main())
