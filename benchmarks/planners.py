"""Planner benchmark: opt_einsum greedy, opt_einsum random-greedy (128 trials) and tnsim.

Every planner plans the same network: the simplified amplitude network
(``absorb_small``) of one bitstring.  Printed side by side, per instance and
planner: opt_einsum's own cost count of the path (``contract_path(...).opt_cost``,
log10), tnsim's real FLOPs (complex multiply-add = 8, log10), width (log2 of
the largest intermediate, elements), planning seconds, and the ratio of each
baseline's opt_einsum cost to tnsim's.

Families: 2D grid random circuits (CZ as hyperedges, four rotating edge
layers), QAOA p = 1..3 on random 3-regular graphs, 1D brickwork.

``--door`` instead plans networks built *outside* tnsim, written the way another tool
would write a grid circuit (one tensor per gate: |0> and <0| vectors, 2x2 single-qubit
matrices, CZ as a rank-2 diagonal tensor on the two wires' current labels; tensors in a
random order, labels with random names; :func:`outside_grid`, which uses no tnsim builder),
through opt_einsum's door: ``opt_einsum.contract_path(eq, *arrays,
optimize=tnsim.Planner(time_budget=...))``, one line per presentation seed, with
opt_einsum's own cost count (its ``opt_cost``) and the planning seconds.

Run::

    python benchmarks/planners.py              # the full table (long)
    python benchmarks/planners.py --quick      # small instances, short budgets
    python benchmarks/planners.py --only grid --budget-scale 1
    python benchmarks/planners.py --slicing --objective runtime   # slicing of run-time plans
    python benchmarks/planners.py --door --rows 10 --cycles 12 --budget 120 --orders 3
"""

from __future__ import annotations

import argparse
import math
import os
import platform
import time

import numpy as np
import opt_einsum
from opt_einsum.path_random import RandomGreedy

from tnsim.circuits.families import brickwork, grid_circuit, qaoa_maxcut
from tnsim.network.builders import amplitude_network
from tnsim.network.simplify import absorb_small
from tnsim.plan.driver import make_plan
from tnsim.plan.tree import PairTree


def instances(quick: bool):
    """(family, name, circuit, tnsim time budget in seconds)."""
    if quick:
        yield "grid", "grid 5x5x8", grid_circuit(5, 5, 8, seed=0), 5.0
        yield "qaoa", "qaoa n=30 p=1", qaoa_maxcut(num_nodes=30, seed=0)[0], 5.0
        yield "brickwork", "brickwork n=100 d=8", brickwork(100, 8, seed=0), 5.0
        return
    for r, c, d, budget in [
        (6, 6, 8, 20.0),
        (8, 8, 8, 30.0),
        (10, 10, 8, 60.0),
        (10, 10, 12, 120.0),
    ]:
        yield "grid", f"grid {r}x{c}x{d}", grid_circuit(r, c, d, seed=0), budget
    for p in (1, 2, 3):
        gammas, betas = [0.4] * p, [0.3] * p
        circuit = qaoa_maxcut(gammas=gammas, betas=betas, num_nodes=40, seed=p)[0]
        yield "qaoa", f"qaoa n=40 p={p}", circuit, 20.0
    for n, d in [(100, 12), (1000, 8)]:
        yield "brickwork", f"brickwork n={n} d={d}", brickwork(n, d, seed=0), 20.0


def network_of(circuit):
    rng = np.random.default_rng(1)
    bits = "".join(str(b) for b in rng.integers(0, 2, circuit.num_qubits))
    return absorb_small(amplitude_network(circuit, bits))


def equation(net):
    sym = {i: opt_einsum.get_symbol(k) for k, i in enumerate(sorted(net.size))}
    eq = ",".join("".join(sym[i] for i in ix) for ix in net.indices)
    return eq + "->" + "".join(sym[i] for i in net.output)


def oe_cost(net, eq, linear) -> float:
    shapes = [tuple(net.size[i] for i in ix) for ix in net.indices]
    _, info = opt_einsum.contract_path(eq, *shapes, shapes=True, optimize=linear)
    return float(info.opt_cost)


def run_baseline(net, eq, optimize):
    shapes = [tuple(net.size[i] for i in ix) for ix in net.indices]
    t0 = time.perf_counter()
    linear, info = opt_einsum.contract_path(eq, *shapes, shapes=True, optimize=optimize)
    seconds = time.perf_counter() - t0
    tree = PairTree.from_linear(net.indices, net.output, net.size, linear)
    cost = tree.cost()
    return float(info.opt_cost), cost.flops, cost.width, seconds


def outside_grid(rows: int, cols: int, cycles: int, seed: int, sequence: str = "rotation"):
    """A grid circuit's amplitude network written as another tool would: one tensor per gate.

    Each cycle: a random single-qubit unitary (a 2x2 matrix) on every qubit, then CZ on
    the pairs of one layer, as a rank-2 diagonal tensor on the two wires' current labels
    (so each wire label of a CZ is a hyperedge).  ``rotation``: the four aligned layers
    (horizontal pairs from even, then odd columns; vertical pairs from even, then odd
    rows) in turn.  |0> vectors start the wires and <0| vectors end them.  The tensors
    come in a random order and the labels have random names (``seed``).

    Returns ``(equation, arrays)`` for opt_einsum.
    """
    if sequence != "rotation":
        raise ValueError("only the four-layer rotation is written here")
    rng = np.random.default_rng(seed)
    n = rows * cols
    layers = [
        [(r * cols + c, r * cols + c + 1) for r in range(rows) for c in range(p, cols - 1, 2)]
        for p in (0, 1)
    ]
    layers += [
        [(r * cols + c, (r + 1) * cols + c) for r in range(p, rows - 1, 2) for c in range(cols)]
        for p in (0, 1)
    ]
    zero = np.array([1.0, 0.0], dtype=complex)
    cz = np.array([[1, 1], [1, -1]], dtype=complex)
    wire = list(range(n))
    nxt = n
    inputs: list[tuple[int, ...]] = [(q,) for q in range(n)]
    arrays: list[np.ndarray] = [zero] * n
    for k in range(cycles):
        for q in range(n):
            u = np.linalg.qr(rng.standard_normal((2, 2)) + 1j * rng.standard_normal((2, 2)))[0]
            inputs.append((wire[q], nxt))
            arrays.append(u.T)
            wire[q] = nxt
            nxt += 1
        for a, b in layers[k % 4]:
            inputs.append((wire[a], wire[b]))
            arrays.append(cz)
    inputs += [(wire[q],) for q in range(n)]
    arrays += [zero] * n
    order = rng.permutation(len(inputs))
    names = rng.permutation(nxt)
    sym = [opt_einsum.get_symbol(int(k)) for k in names]
    eq = ",".join("".join(sym[i] for i in inputs[t]) for t in order) + "->"
    return eq, [arrays[t] for t in order]


def door_table(args) -> None:
    """Plan outside-built grid networks through opt_einsum's door, one line per presentation."""
    import tnsim

    print(
        f"# {args.rows}x{args.rows} grid, {args.cycles} cycles, rotation, outside-built; "
        f"Planner(time_budget={args.budget:g}); oe = opt_einsum's cost count (log10); "
        f"{os.cpu_count()} cores, load {os.getloadavg()[0]:.1f}"
    )
    print(f"{'order seed':>10} {'tensors':>7} {'oe':>6} {'seconds':>8} {'planner':>10}")
    for seed in range(args.orders):
        eq, arrays = outside_grid(args.rows, args.rows, args.cycles, seed)
        planner = tnsim.Planner(time_budget=args.budget, seed=args.seed)
        t0 = time.perf_counter()
        _, info = opt_einsum.contract_path(eq, *arrays, optimize=planner)
        seconds = time.perf_counter() - t0
        print(
            f"{seed:>10} {len(arrays):>7} {math.log10(float(info.opt_cost)):6.2f} "
            f"{seconds:8.1f} {planner.last_method:>10}  (load {os.getloadavg()[0]:.1f})",
            flush=True,
        )


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--quick", action="store_true", help="small instances, short budgets")
    ap.add_argument("--only", help="family: grid, qaoa or brickwork")
    ap.add_argument("--budget-scale", type=float, default=1.0, help="multiply tnsim budgets")
    ap.add_argument("--seed", type=int, default=0)
    ap.add_argument("--no-random-greedy", action="store_true")
    ap.add_argument(
        "--objective",
        choices=("operations", "runtime"),
        default="operations",
        help="what tnsim minimises (default operations: the targets are FLOP counts)",
    )
    ap.add_argument(
        "--slicing",
        action="store_true",
        help="instead: slicing overhead at 1/16 of the unsliced peak (grids)",
    )
    ap.add_argument(
        "--door",
        action="store_true",
        help="instead: outside-built grid networks through opt_einsum's door",
    )
    ap.add_argument("--rows", type=int, default=10, help="--door: grid side")
    ap.add_argument("--cycles", type=int, default=12, help="--door: cycles")
    ap.add_argument("--budget", type=float, default=120.0, help="--door: planning seconds")
    ap.add_argument("--orders", type=int, default=3, help="--door: presentations (seeds)")
    args = ap.parse_args()
    if args.slicing:
        slicing_table(args)
        return
    if args.door:
        door_table(args)
        return
    print(
        f"# machine: {platform.processor() or platform.machine()}, python "
        f"{platform.python_version()}, opt_einsum {opt_einsum.__version__}"
    )
    print(
        "# oe = opt_einsum's cost count of the path (log10); flops = tnsim real FLOPs "
        "(complex multiply-add = 8, log10); width = log2 largest intermediate"
    )
    head = (
        f"{'instance':<22} {'tensors':>7}  {'planner':<18} {'oe':>6} {'flops':>6} "
        f"{'width':>5} {'seconds':>8} {'oe ratio vs tnsim':>17}"
    )
    print(head)
    print("-" * len(head))
    for family, name, circuit, budget in instances(args.quick):
        if args.only and family != args.only:
            continue
        net = network_of(circuit)
        eq = equation(net)
        rows = [("oe greedy", *run_baseline(net, eq, "greedy"))]
        if not args.no_random_greedy:
            rows.append(
                ("oe random-greedy128", *run_baseline(net, eq, RandomGreedy(max_repeats=128)))
            )
        t0 = time.perf_counter()
        plan = make_plan(
            net, time_budget=budget * args.budget_scale, seed=args.seed, objective=args.objective
        )
        seconds = time.perf_counter() - t0
        ours = oe_cost(net, eq, plan.tree.linear_path()) if len(net) > 1 else 0.0
        rows.append((f"tnsim ({plan.method})", ours, plan.flops, plan.width, seconds))
        for planner, oe, flops, width, sec in rows:
            ratio = oe / ours if ours else float("nan")
            print(
                f"{name:<22} {len(net):>7}  {planner:<18} {math.log10(max(oe, 1)):6.2f} "
                f"{math.log10(max(flops, 1)):6.2f} {width:5.0f} {sec:8.1f} {ratio:17.3g}",
                flush=True,
            )


def slicing_table(args) -> None:
    """Plan each grid unsliced, then under 1/16 of that plan's peak; print the overhead."""
    print("# overhead = sliced plan's total real FLOPs / the unsliced plan's FLOPs")
    print(
        f"{'instance':<22} {'unsliced flops':>14} {'peak':>10} {'limit':>10} "
        f"{'slices':>7} {'sliced flops':>12} {'overhead':>8}"
    )
    for family, name, circuit, budget in instances(args.quick):
        if family != "grid":
            continue
        net = network_of(circuit)
        half = budget * args.budget_scale / 2
        full = make_plan(net, time_budget=half, seed=args.seed, objective=args.objective)
        limit = full.peak_bytes // 16
        cut = make_plan(
            net, time_budget=half, seed=args.seed, memory_limit=limit, objective=args.objective
        )
        print(
            f"{name:<22} {math.log10(full.flops):14.2f} {full.peak_bytes:10.3g} "
            f"{limit:10.3g} {cut.num_slices:7d} {math.log10(cut.flops):12.2f} "
            f"{cut.flops / full.flops:8.2f}",
            flush=True,
        )


if __name__ == "__main__":
    main()
