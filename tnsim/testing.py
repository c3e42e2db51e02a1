"""Seeded random circuits and a dense reference simulator, shared by tests and benchmarks.

The dense simulator holds all ``2**n`` amplitudes and is meant only for
checking tnsim on small circuits (and as the baseline the benchmarks compare
against); it is not part of the contraction pipeline.
"""

from __future__ import annotations

import numpy as np

from tnsim.circuits.circuit import Circuit
from tnsim.circuits.gates import GATES

__all__ = ["dense_state", "random_circuit"]


def random_circuit(
    num_qubits: int,
    num_gates: int,
    seed: int | np.random.Generator | None = 0,
    gates: list[str] | None = None,
) -> Circuit:
    """Return a circuit of ``num_gates`` gates drawn uniformly from ``gates``.

    Parameters
    ----------
    num_qubits : int
        Width; gates wider than the circuit are skipped.
    num_gates : int
        Number of gates.
    seed : int or numpy.random.Generator
        Source of randomness (same seed, same circuit).
    gates : list of str, optional
        Gate names to draw from (default: every gate tnsim knows).

    Examples
    --------
    >>> len(random_circuit(4, 10, seed=1))
    10
    """
    rng = np.random.default_rng(seed)
    names = [g for g in (gates or sorted(GATES)) if GATES[g].num_qubits <= num_qubits]
    c = Circuit(num_qubits)
    for _ in range(num_gates):
        spec = GATES[names[rng.integers(len(names))]]
        qubits = rng.choice(num_qubits, spec.num_qubits, replace=False).tolist()
        c.append(spec.name, qubits, rng.uniform(-np.pi, np.pi, spec.num_params).tolist())
    return c


def dense_state(circuit: Circuit) -> np.ndarray:
    """Return the full state vector ``C|0...0>`` (qubit 0 is the most significant bit).

    Examples
    --------
    >>> np.round(dense_state(Circuit(2).h(0).cx(0, 1)), 4)
    array([0.7071+0.j, 0.    +0.j, 0.    +0.j, 0.7071+0.j])
    """
    n = circuit.num_qubits
    psi = np.zeros((2,) * n, dtype=np.complex128)
    psi[(0,) * n] = 1
    for op in circuit.ops:
        k = len(op.qubits)
        u = op.matrix().reshape((2,) * (2 * k))
        psi = np.tensordot(u, psi, axes=(list(range(k, 2 * k)), list(op.qubits)))
        psi = np.moveaxis(psi, list(range(k)), list(op.qubits))
    return psi.reshape(-1)
