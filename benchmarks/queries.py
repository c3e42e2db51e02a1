"""Benchmarks of the queries: QAOA energies, batches of amplitudes, exact sampling, XEB.

Run ``python benchmarks/queries.py`` (all sections, full sizes) or choose
sections with ``--only qaoa,amplitudes,sampling,routes``; ``--quick`` runs small sizes
(a smoke test).  Every figure printed is measured in this run; ratios compare
timings taken side by side in the same process.

Targets (issue 4):

* QAOA p=1 MaxCut energy on a random 3-regular graph, 100,000 nodes: <= 30 s
  (p=2, 10,000 nodes: <= 60 s; p=3, 1,000 nodes: <= 120 s). Times include
  building the graph's circuit and indexing it, not drawing the graph.
* 10,000 amplitudes of a 7x7 grid circuit with 8 cycles in <= 10x the time of one.
* 1,000 exact samples of that circuit in <= 60 s.
"""

from __future__ import annotations

import argparse
import math
import sys
import time

import networkx as nx
import numpy as np

from tnsim.circuits.families import (
    brickwork,
    ghz,
    grid_circuit,
    hardware_efficient,
    iqp,
    qaoa_maxcut,
)
from tnsim.errors import ResourceLimitError
from tnsim.queries.amplitudes import amplitude, amplitudes
from tnsim.queries.expectation import maxcut_energy
from tnsim.queries.sampling import sample
from tnsim.queries.xeb import xeb


def _p1_closed_form(graph: nx.Graph, gamma: float, beta: float) -> float:
    """Sum over edges of Wang, Hadfield, Jiang, Rieffel, PRA 97, 022304 (2018), Theorem 1
    (their γ' = -2γ in tnsim's convention, see tests/test_qaoa.py)."""
    g, total = -2 * gamma, 0.0
    for u, v in graph.edges():
        du, dv = graph.degree(u) - 1, graph.degree(v) - 1
        lam = len(set(graph[u]) & set(graph[v]))
        total += (
            0.5
            + 0.25 * math.sin(4 * beta) * math.sin(g) * (math.cos(g) ** du + math.cos(g) ** dv)
            - 0.25
            * math.sin(2 * beta) ** 2
            * math.cos(g) ** (du + dv - 2 * lam)
            * (1 - math.cos(2 * g) ** lam)
        )
    return total


def bench_qaoa(quick: bool) -> None:
    cases = [(1, 2000), (2, 500), (3, 100)] if quick else [(1, 100_000), (2, 10_000), (3, 1000)]
    print(
        "## QAOA MaxCut energy, random 3-regular graphs (seed 1), gamma=-0.3, beta=0.35 per layer"
    )
    for p, nodes in cases:
        graph = nx.random_regular_graph(3, nodes, seed=1)
        t0 = time.perf_counter()
        energy = maxcut_energy(graph, [-0.3] * p, [0.35] * p)
        seconds = time.perf_counter() - t0
        line = (
            f"p={p} nodes={nodes:>7} edges={graph.number_of_edges():>7} "
            f"energy={energy:.6f} cut fraction={energy / graph.number_of_edges():.6f} "
            f"time={seconds:.2f} s"
        )
        if p == 1:
            ref = _p1_closed_form(
                nx.convert_node_labels_to_integers(graph, ordering="sorted"), -0.3, 0.35
            )
            line += f" |closed form - tnsim|={abs(ref - energy):.2e}"
        print(line, flush=True)


def bench_amplitudes(quick: bool) -> None:
    rows_, cols, cycles = (5, 5, 8) if quick else (7, 7, 8)
    count = 1000 if quick else 10_000
    c = grid_circuit(rows_, cols, cycles, seed=1)
    n = c.num_qubits
    rng = np.random.default_rng(0)
    print(f"## Amplitudes of a {rows_}x{cols} grid circuit, {cycles} cycles ({len(c)} gates)")
    t0 = time.perf_counter()
    amplitude(c, rng.integers(0, 2, n))
    one = time.perf_counter() - t0
    print(f"one amplitude: {one:.2f} s", flush=True)
    # Batch 1: bitstrings sharing their first n-14 bits (a block with 14 free qubits).
    base = rng.integers(0, 2, n)
    batch = np.tile(base, (count, 1))
    batch[:, n - 14 :] = rng.integers(0, 2, (count, 14))
    t0 = time.perf_counter()
    amplitudes(c, batch)
    shared = time.perf_counter() - t0
    print(
        f"{count} amplitudes differing on 14 qubits: {shared:.2f} s = {shared / one:.1f}x one",
        flush=True,
    )
    # Batch 2: independent random bitstrings (no shared output bits).
    free = rng.integers(0, 2, (count, n))
    t0 = time.perf_counter()
    amplitudes(c, free)
    seconds = time.perf_counter() - t0
    print(
        f"{count} independent random bitstrings: {seconds:.2f} s = {seconds / one:.1f}x one "
        f"({seconds / count * 1e3:.2f} ms each)",
        flush=True,
    )


def bench_sampling(quick: bool, block: int = 5) -> None:
    # 7x7x8 with 1,000 shots by the chain rule does not finish in minutes on a 2-core machine
    # (the conditionals of its middle rows need ~2^28-element doubled networks per prefix);
    # 3 shots show the cost.  The gate-by-gate route needs no doubled networks.
    if quick:
        cases = [(4, 4, 8, 200, "marginals"), (4, 4, 8, 200, "gates")]
    else:
        cases = [
            (4, 4, 8, 1000, "marginals"),
            (4, 4, 8, 1000, "gates"),
            (5, 5, 8, 1000, "marginals"),
            (5, 5, 8, 1000, "gates"),
            (7, 7, 8, 3, "marginals"),
            (7, 7, 8, 1000, "gates"),
            (7, 7, 8, 1000, "gates complex64"),
            (8, 8, 8, 100, "gates"),
        ]
    print(f"## Exact samples of grid circuits (seed 1; chain rule: block {block}), then XEB")
    for r, cc, cycles, shots, method in cases:
        c = grid_circuit(r, cc, cycles, seed=1)
        t0 = time.perf_counter()
        try:
            dtype = np.complex64 if method.endswith("complex64") else np.complex128
            s = sample(c, shots, seed=2, block=block, method=method.split()[0], dtype=dtype)
        except (ResourceLimitError, MemoryError) as exc:
            print(
                f"{r}x{cc}x{cycles}: {shots} samples ({method}) failed after "
                f"{time.perf_counter() - t0:.1f} s: {exc}",
                flush=True,
            )
            continue
        seconds = time.perf_counter() - t0
        t0 = time.perf_counter()
        f = xeb(c, s)
        print(
            f"{r}x{cc}x{cycles}: {shots} samples ({method}) in {seconds:.2f} s; XEB of them "
            f"{f.fidelity:.3f} +- {f.standard_error:.3f} ({time.perf_counter() - t0:.2f} s)",
            flush=True,
        )


def bench_routes(quick: bool) -> None:
    """Both sampling routes on circuit families wider than the direct width (sets the default)."""
    graph = nx.random_regular_graph(3, 100, seed=1)
    cases = [
        ("GHZ, 60 qubits", ghz(60)),
        ("brickwork, 60 qubits, depth 2", brickwork(60, 2, seed=1)),
        ("hardware-efficient, 30 qubits, 2 layers", hardware_efficient(30, 2, seed=1)),
        ("IQP, 24 qubits", iqp(24, seed=1)),
        ("brickwork, 100 qubits, depth 8", brickwork(100, 8, seed=1)),
        ("QAOA p=1, random 3-regular graph, 100 nodes", qaoa_maxcut(graph, [0.4], [0.3])[0]),
        ("brickwork, 1,000 qubits, depth 4", brickwork(1000, 4, seed=1)),
    ]
    shots = 20 if quick else 100
    print(f"## Sampling routes: {shots} shots, gate by gate / chain rule of marginals (seed 1)")
    for name, c in cases[: 3 if quick else None]:
        times = []
        for method in ("gates", "marginals"):
            t0 = time.perf_counter()
            sample(c, shots, seed=1, method=method)
            times.append(time.perf_counter() - t0)
        print(
            f"{name}: {times[0]:.2f} s / {times[1]:.2f} s (chain rule / gates: "
            f"{times[1] / times[0]:.2f})",
            flush=True,
        )
    if not quick:  # the chain rule is not run here: 120-151 s on the 1,000-qubit case
        t0 = time.perf_counter()
        sample(brickwork(5000, 4, seed=1), shots, seed=1, method="gates")
        print(f"brickwork, 5,000 qubits, depth 4: {time.perf_counter() - t0:.2f} s gate by gate")


SECTIONS = {
    "qaoa": bench_qaoa,
    "amplitudes": bench_amplitudes,
    "sampling": bench_sampling,
    "routes": bench_routes,
}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="small sizes (smoke test)")
    parser.add_argument("--only", default=",".join(SECTIONS), help="comma-separated sections")
    parser.add_argument("--block", type=int, default=5, help="sampling: qubits per step")
    args = parser.parse_args(argv)
    print(f"command: python benchmarks/queries.py {' '.join(argv or sys.argv[1:])}".rstrip())
    for name in args.only.split(","):
        if name.strip() == "sampling":
            bench_sampling(args.quick, args.block)
        else:
            SECTIONS[name.strip()](args.quick)
    return 0


if __name__ == "__main__":
    sys.exit(main())
