"""``tnsim demo``: the main job on built-in, invented examples."""

from __future__ import annotations

import time
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from tnsim.circuits.circuit import Circuit

__all__ = ["run_demo"]


def _line(bits: str, a, seconds: float) -> str:
    value = complex(a)
    shown = bits if len(bits) <= 24 else f"{bits[:10]}...{bits[-10:]}"
    return (
        f"  {shown:<26} a = {value.real:+.6e}{value.imag:+.6e}j   "
        f"log10|a| = {a.log10_abs():10.4f}   phase = {a.phase():+.4f}   ({seconds:.2f} s)"
    )


def _show(circuit: Circuit, bitstrings: list[str], dtype="complex128") -> None:
    from tnsim.queries.amplitudes import amplitude

    for bits in bitstrings:
        t0 = time.perf_counter()
        a = amplitude(circuit, bits, dtype=dtype, scaled=True)
        print(_line(bits, a, time.perf_counter() - t0))


def run_demo(quick: bool = False) -> int:
    """Print the demo; return the exit status.

    Scenario (invented): a lab links ``n`` memory qubits down a relay chain
    and checks the entangled state, then checks a shallow random brickwork
    circuit on a 1,000-qubit line; both are far past what a state vector can hold.
    Then a QAOA MaxCut energy on a 20,000-node graph from light-cone networks,
    and last the scoring of a (simulated) chip's samples by cross-entropy.
    Bitstrings: character i is qubit i (leftmost is qubit 0).
    """
    import numpy as np

    from tnsim.circuits.families import brickwork
    from tnsim.circuits.families import ghz as relay_chain

    n_chain = 500 if quick else 5000
    print(f"1. Relay chain of {n_chain} qubits (h, then cx down the line).")
    print(f"   A state vector would need 16 * 2^{n_chain} bytes; tnsim contracts only")
    print("   the network of each requested amplitude. Exact values: 1/sqrt(2), 1/sqrt(2), 0.")
    _show(relay_chain(n_chain), ["0" * n_chain, "1" * n_chain, "1" * (n_chain - 1) + "0"])

    n, depth = (200, 4) if quick else (1000, 6)
    circuit = brickwork(n, depth, seed=2026)
    print(f"\n2. Random brickwork: {n} qubits, depth {depth}, {len(circuit)} gates, complex64.")
    print("   |a| is near 2^(-n/2), far below the smallest complex64 number; tnsim carries")
    print("   a power-of-two scale, so log10|a| and the phase stay exact.")
    rng = np.random.default_rng(1)
    picks = ["0" * n] + ["".join(rng.choice(["0", "1"], n)) for _ in range(2)]
    _show(circuit, picks, dtype="complex64")
    _qaoa_step(quick)
    _xeb_step(quick)
    return 0


def _qaoa_step(quick: bool) -> None:
    """Step 3: a QAOA MaxCut energy on a large random 3-regular graph."""
    import networkx as nx

    from tnsim.queries.expectation import maxcut_energy

    nodes = 2000 if quick else 20000
    graph = nx.random_regular_graph(3, nodes, seed=7)
    gamma, beta = -0.3, 0.35
    print(f"\n3. QAOA (p = 1) for MaxCut on a random 3-regular graph with {nodes} nodes.")
    print("   Each edge's <Z_u Z_v> needs only its light cone (about 6 qubits); cones that")
    print("   match up to renaming are contracted once.")
    t0 = time.perf_counter()
    energy = maxcut_energy(graph, [gamma], [beta])
    edges = graph.number_of_edges()
    print(
        f"   gamma = {gamma}, beta = {beta}: expected cut {energy:.3f} of {edges} edges "
        f"(fraction {energy / edges:.4f}; {time.perf_counter() - t0:.2f} s)"
    )


def _xeb_step(quick: bool) -> None:
    """Step 4: score samples of a grid chip by linear cross-entropy (XEB)."""
    import numpy as np

    from tnsim.circuits.families import grid_circuit
    from tnsim.queries.sampling import sample
    from tnsim.queries.xeb import xeb

    rows, cols, cycles, shots = (3, 4, 10, 200) if quick else (4, 5, 12, 500)
    circuit = grid_circuit(rows, cols, cycles, seed=11)
    n = circuit.num_qubits
    print(f"\n4. Scoring a {rows}x{cols}-qubit chip running a {cycles}-cycle random circuit.")
    print("   A perfect chip's samples (drawn exactly by tnsim) score F near 1; a chip")
    print("   that outputs uniform noise scores F near 0 (F = 2^n <p(x)> - 1).")
    t0 = time.perf_counter()
    good = sample(circuit, shots, seed=5)
    noise = np.random.default_rng(6).integers(0, 2, size=(shots, n), dtype=np.uint8)
    for label, bits in (("perfect chip", good), ("uniform noise", noise)):
        r = xeb(circuit, bits)
        print(f"   {label:<14} F = {r.fidelity:+.3f} +/- {r.standard_error:.3f}  ({shots} samples)")
    print(f"   ({time.perf_counter() - t0:.2f} s)")


def register(sub) -> None:
    """Add ``demo`` to a subparsers object."""
    demo = sub.add_parser("demo", help="run a built-in example end to end")
    demo.add_argument("--quick", action="store_true", help="smaller instances")
    demo.set_defaults(func=lambda args: run_demo(quick=args.quick))
