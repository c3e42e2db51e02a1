"""Marginal probabilities of a few qubits, from the light cone's doubled network.

The circuit is first cut to the backward light cone of the measured qubits
(:mod:`tnsim.network.lightcone`): gates outside it cancel against their mirror
images and are never built.  Narrow, deep cones are answered from all ``2**m``
amplitudes of the cone instead (:func:`all_amplitudes`).
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from tnsim.circuits.circuit import Circuit
from tnsim.execution.options import DTypeLike, MemoryLimit, QueryOptions, resolve_options
from tnsim.fitted import NARROW
from tnsim.network.builders import amplitude_network, doubled_network
from tnsim.network.graph import TensorGraph
from tnsim.network.lightcone import canonical_cone, cone_circuit, index_circuit
from tnsim.network.simplify import absorb_small
from tnsim.plan.driver import greedy_tree
from tnsim.queries.amplitudes import contract_network, contract_simplified
from tnsim.queries.checks import check_circuit, check_qubits

__all__ = ["marginal", "marginal_network"]


def marginal(
    circuit: Circuit,
    qubits: Sequence[int],
    *,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
) -> np.ndarray:
    """Return the outcome probabilities of a few qubits, summed over all others.

    Built from the doubled network ``<0|C† (|y><y| ⊗ I) C|0>`` with the circuit
    first reduced to the backward light cone of ``qubits``: the gates outside
    it cancel against their mirror images and are never built.

    Parameters
    ----------
    circuit : Circuit
        The circuit.
    qubits : sequence of int
        The measured qubits; the first is the most significant bit of the
        result's index.
    dtype : numpy dtype, optional
        Contraction dtype: complex128 or complex64; default the enclosing
        ``run_options`` block's, else complex128.
    memory_limit : int or str, optional
        Bytes, or text such as ``"4GiB"``, for live intermediates; default the
        enclosing ``run_options`` block's, else half of the available memory.

    Returns
    -------
    numpy.ndarray
        ``2**len(qubits)`` float64 probabilities.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> c = Circuit(3).h(0).cx(0, 1).x(2)
    >>> marginal(c, [2, 0]).round(6).tolist()
    [0.0, 0.0, 0.5, 0.5]
    """
    check_circuit(circuit)
    opts = resolve_options(memory_limit, dtype=dtype)
    qs = check_qubits(qubits, circuit.num_qubits, "marginal")
    local, small = marginal_network(circuit, qs, opts.dtype)
    if deep_and_narrow(local, small):
        every = all_probabilities(local, opts)
        return every.reshape(1 << len(qs), -1).sum(axis=1)
    result = contract_simplified(small, opts)
    probs = result.value().real.reshape(-1)
    return np.clip(probs, 0.0, None)


def marginal_network(
    circuit: Circuit, qubits: Sequence[int], dtype: np.dtype
) -> tuple[Circuit, TensorGraph]:
    """The light cone of ``qubits`` as a circuit, and its simplified doubled network.

    The doubled network has one open leg per listed qubit, in order (what
    :func:`marginal` contracts; also what ``tnsim cost --qubits`` plans).
    """
    index = index_circuit(circuit)
    _, gates, local_qubits = canonical_cone(index, [(q, "P") for q in qubits])
    local = cone_circuit(index, gates, len(local_qubits))
    small = absorb_small(doubled_network(local, open_qubits=range(len(qubits)), dtype=dtype))
    return local, small


def _greedy_flops(small: TensorGraph) -> int:
    """FLOPs of opt_einsum's greedy tree for a simplified network (a quick upper estimate)."""
    return greedy_tree(small.indices, small.output, small.size).cost().flops


def all_amplitudes(circuit: Circuit, options: QueryOptions | None = None) -> np.ndarray:
    """Return ``<x|C|0...0>`` for all ``2**n`` bitstrings (narrow circuits only).

    One contraction with every output leg open; index ``k`` is the bitstring
    whose qubit 0 is the most significant bit of ``k``; ``options`` as resolved
    by :func:`~tnsim.execution.options.resolve_options` (default: the block's).

    Examples
    --------
    >>> from tnsim import Circuit
    >>> (abs(all_amplitudes(Circuit(2).h(0).cx(0, 1))) ** 2).round(6).tolist()
    [0.5, 0.0, 0.0, 0.5]
    """
    opts = resolve_options() if options is None else options
    n = circuit.num_qubits
    network = amplitude_network(circuit, None, open_qubits=range(n), dtype=opts.dtype)
    return contract_network(network, opts).value().reshape(-1)


def all_probabilities(circuit: Circuit, options: QueryOptions | None = None) -> np.ndarray:
    """Return ``|<x|C|0...0>|²`` for all ``2**n`` bitstrings (see :func:`all_amplitudes`)."""
    return np.abs(all_amplitudes(circuit, options)) ** 2


def deep_and_narrow(local: Circuit, small: TensorGraph) -> bool:
    """Whether all ``2**m`` amplitudes of the cone cost less than greedy's plan of ``small``.

    ``small`` is the cone's doubled network, simplified (:func:`absorb_small`).

    Amplitudes in circuit order cost at most about 64 FLOPs per gate and amplitude.
    """
    m = local.num_qubits
    return m <= NARROW and _greedy_flops(small) > len(local.ops) * (64 << m)
