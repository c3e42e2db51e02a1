"""Exact samples of a circuit's output distribution by the chain rule of marginals.

The qubits are split into blocks ``B_1, B_2, ...`` in index order.  For block
``j`` with earlier qubits ``A`` (already sampled), the conditional
distribution ``p(x_B | x_A)`` comes from the backward light cone of ``A ∪ B``
(:mod:`tnsim.lightcone`): with ``D`` the other qubits of that cone,
``p(x_A, x_B) = sum over x_D of |<x_A x_B x_D| C_cone |0>|²``.  It is computed
either from amplitudes with the legs of ``B ∪ D`` open (when ``B ∪ D`` is
small) or from the doubled network with ``B`` open and ``D`` summed.  Shots
that share ``x_A`` share the conditional distribution: the distinct
prefixes are one batch (:class:`tnsim.batch.BatchContraction`), so the part of
the network that does not depend on ``x_A`` is contracted once per block.
"""

from __future__ import annotations

import numbers

import numpy as np

from .batch import BatchContraction
from .circuit import Circuit
from .errors import InputError
from .lightcone import canonical_cone, cone_circuit, index_circuit
from .network import amplitude_network, doubled_network
from .queries import contract_network

__all__ = ["sample", "sample_blocks"]

OPEN_LIMIT = 16
"""Largest ``|B ∪ D|`` computed from amplitudes with open legs (else the doubled network)."""


def sample_blocks(num_qubits: int, block: int) -> list[list[int]]:
    """Split ``0..num_qubits-1`` into consecutive blocks of at most ``block`` qubits.

    Examples
    --------
    >>> sample_blocks(5, 2)
    [[0, 1], [2, 3], [4]]
    """
    return [list(range(k, min(k + block, num_qubits))) for k in range(0, num_qubits, block)]


def _conditional(index, prior, block, prefixes, dtype, chunk, memory_limit) -> np.ndarray:
    """``p(x_block | x_prior)`` for each row of ``prefixes``: shape ``(rows, 2**len(block))``."""
    targets = [(q, "P") for q in prior + block]
    _, gates, qubits = canonical_cone(index, targets)
    local = cone_circuit(index, gates, len(qubits))
    a, b = len(prior), len(block)
    rest = list(range(a + b, len(qubits)))
    use_amplitudes = b + len(rest) <= OPEN_LIMIT
    if use_amplitudes:
        network = amplitude_network(local, None, open_qubits=list(range(len(qubits))), dtype=dtype)
    else:
        network = doubled_network(local, open_qubits=list(range(a + b)), dtype=dtype)
    batch, kept = network.output[:a], network.output[a:]
    if a == 0:
        values = [contract_network(network, memory_limit=memory_limit).value()[None]]
    else:
        engine = BatchContraction(network, batch, kept, chunk=chunk, memory_limit=memory_limit)
        values = []
        for start in range(0, len(prefixes), chunk):
            part = engine.run(prefixes[start : start + chunk])
            values.append(np.asarray(part.mantissa, dtype=np.complex128))
    table = np.concatenate([v.reshape(len(v), -1) for v in values])
    if use_amplitudes:
        table = (np.abs(table) ** 2).reshape(len(table), 1 << b, -1).sum(axis=2)
    else:
        table = np.clip(table.real, 0.0, None)
    totals = table.sum(axis=1, keepdims=True)
    if np.any(totals <= 0):
        raise ArithmeticError("a sampled prefix has zero probability (numerical underflow)")
    return table / totals


def sample(
    circuit: Circuit,
    shots: int,
    *,
    seed: int | np.random.Generator | None = 0,
    block: int = 8,
    dtype: type | np.dtype = np.complex128,
    chunk: int = 64,
    memory_limit: int | None = None,
) -> np.ndarray:
    """Draw exact samples from ``p(x) = |<x|C|0...0>|²``.

    Parameters
    ----------
    circuit : Circuit
        The circuit.
    shots : int
        Number of samples.
    seed : int or numpy.random.Generator
        Source of randomness (same seed, same samples).
    block : int
        Qubits sampled together per chain-rule step (``2**block`` outcomes).
    dtype : numpy dtype
        Contraction dtype.
    chunk : int
        Distinct prefixes contracted together.
    memory_limit : int, optional
        Bytes for live intermediates (passed to the planner).

    Returns
    -------
    numpy.ndarray
        ``(shots, num_qubits)`` ``uint8``; column ``i`` is qubit ``i``.

    Examples
    --------
    >>> c = Circuit(3).h(0).cx(0, 1).cx(1, 2)
    >>> s = sample(c, 200, seed=1)
    >>> sorted({"".join(map(str, row)) for row in s})
    ['000', '111']
    """
    if not isinstance(circuit, Circuit):
        raise InputError(f"expected a tnsim.Circuit, got {type(circuit).__name__}")
    if isinstance(shots, bool) or not isinstance(shots, numbers.Integral) or shots < 0:
        raise InputError(f"shots must be a non-negative integer, got {shots!r}")
    if isinstance(block, bool) or not isinstance(block, numbers.Integral) or not 1 <= block <= 16:
        raise InputError(f"block must be an integer from 1 to 16, got {block!r}")
    rng = np.random.default_rng(seed)
    n = circuit.num_qubits
    out = np.zeros((shots, n), dtype=np.uint8)
    if shots == 0:
        return out
    index = index_circuit(circuit)
    prior: list[int] = []
    for qs in sample_blocks(n, int(block)):
        if prior:
            prefixes, group = np.unique(out[:, prior], axis=0, return_inverse=True)
            group = group.reshape(-1)
        else:
            prefixes, group = np.zeros((1, 0), np.uint8), np.zeros(shots, np.intp)
        table = _conditional(index, prior, qs, prefixes, dtype, chunk, memory_limit)
        cum = np.cumsum(table, axis=1)
        cum[:, -1] = 1.0
        u = rng.random(shots)
        outcome = (u[:, None] >= cum[group]).sum(axis=1)
        shifts = np.arange(len(qs) - 1, -1, -1)
        out[:, qs] = (outcome[:, None] >> shifts) & 1
        prior += qs
    return out
