"""Run time of contraction plans against their FLOPs and the elements they write.

Two parts, both measured in this run on this machine:

1. *fit*: trees from single planners (sweep, bisection, elimination,
   random-greedy) for grid-circuit amplitude networks are executed (best of 3)
   and their times fitted as ``a * FLOPs + b * written + c * steps`` (least
   squares on relative error).  ``b / a`` is the cost of writing one element in
   FLOPs at the contraction rate: ``tnsim.fitted.WRITE_FLOPS`` was set
   from this fit.
2. *objectives*: ``make_plan(objective="operations")`` against
   ``make_plan(objective="runtime")`` (same time budget), each plan executed,
   side by side.

Run::

    python benchmarks/time_model.py            # both parts (~4 minutes)
    python benchmarks/time_model.py --quick    # small grids (smoke test)
"""

from __future__ import annotations

import argparse
import math
import platform
import time

import numpy as np

from tnsim.circuits.families import grid_circuit
from tnsim.execution.slices import execute
from tnsim.fitted import WRITE_FLOPS
from tnsim.network.builders import amplitude_network
from tnsim.network.simplify import absorb_small
from tnsim.plan.driver import PairTree, make_plan
from tnsim.plan.search import search_path


def _network(rows: int, cols: int, cycles: int):
    circuit = grid_circuit(rows, cols, cycles, seed=0)
    bits = np.random.default_rng(1).integers(0, 2, rows * cols)
    return absorb_small(amplitude_network(circuit, bits))


def _seconds(network, tree, sliced=()) -> float:
    best = math.inf
    for _ in range(3):
        t0 = time.perf_counter()
        execute(network, tree, sliced)
        best = min(best, time.perf_counter() - t0)
    return best


def fit(grids, budget: float) -> None:
    """Part 1: execute single-planner trees and fit their times."""
    print("## fit: seconds = a*FLOPs + b*written + c*steps (best of 3 runs per tree)")
    print(f"{'grid':<10} {'planner':<14} {'log10 FLOPs':>11} {'log10 written':>13} {'seconds':>8}")
    rows = []
    for r, c, d in grids:
        net = _network(r, c, d)
        ins, out, size = net.indices, net.output, net.size
        for method in ("sweep", "bisection", "elimination", "random-greedy"):
            res = search_path(
                ins, out, size, time_budget=budget, methods=[method], seed=1, reoptimize=False
            )
            tree = PairTree(ins, out, size, res.path)
            cost = tree.cost()
            if cost.flops > 3e10:
                continue
            sec = _seconds(net, tree)
            rows.append((cost.flops, cost.written, len(res.path), sec))
            print(
                f"{r}x{c}x{d:<6} {method:<14} {math.log10(cost.flops):11.2f} "
                f"{math.log10(cost.written):13.2f} {sec:8.4f}",
                flush=True,
            )
    a = np.array([row[:3] for row in rows], dtype=float)
    y = np.array([row[3] for row in rows])
    coef, *_ = np.linalg.lstsq(a / y[:, None], np.ones_like(y), rcond=None)
    pred = a @ coef
    print(
        f"fit: {1 / coef[0] / 1e9:.1f} GFLOP/s, {coef[1] * 1e9:.2f} ns per element written "
        f"(= {coef[1] / coef[0]:.0f} FLOPs; WRITE_FLOPS is {WRITE_FLOPS}), "
        f"{coef[2] * 1e6:.1f} us per step; predicted/measured "
        f"{np.min(pred / y):.2f}-{np.max(pred / y):.2f}"
    )


def objectives(grids, budget: float) -> None:
    """Part 2: plans minimising FLOPs against plans minimising the time model, executed."""
    print(f"## objectives: make_plan(objective=...), time_budget={budget} s, best of 3 runs")
    print(
        f"{'grid':<10} {'objective':<9} {'planner':<14} {'log10 FLOPs':>11} "
        f"{'log10 written':>13} {'seconds':>8}"
    )
    for r, c, d in grids:
        net = _network(r, c, d)
        times = {}
        for objective in ("operations", "runtime"):
            plan = make_plan(net, time_budget=budget, seed=0, objective=objective)
            cost = plan.tree.cost()
            times[objective] = _seconds(net, plan.tree, plan.sliced)
            print(
                f"{r}x{c}x{d:<6} {objective:<9} {plan.method:<14} "
                f"{math.log10(cost.flops):11.2f} {math.log10(cost.written):13.2f} "
                f"{times[objective]:8.4f}",
                flush=True,
            )
        print(
            f"{r}x{c}x{d:<6} operations-plan seconds / runtime-plan seconds: "
            f"{times['operations'] / times['runtime']:.2f}"
        )


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--quick", action="store_true", help="small grids (smoke test)")
    args = ap.parse_args()
    print(
        f"# machine: {platform.processor() or platform.machine()}, python "
        f"{platform.python_version()}, numpy {np.__version__}"
    )
    if args.quick:
        fit([(4, 4, 8), (5, 5, 8)], 1.0)
        objectives([(5, 5, 8)], 2.0)
        return
    fit([(6, 6, 8), (7, 7, 8), (8, 8, 8), (6, 6, 12), (9, 9, 8)], 4.0)
    objectives([(7, 7, 8), (8, 8, 8), (9, 9, 8), (6, 6, 12)], 10.0)


if __name__ == "__main__":
    main()
