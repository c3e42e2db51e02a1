"""Expectation values of Pauli sums, one contraction per distinct light cone.

Each Pauli string's backward light cone is put in canonical form
(:func:`tnsim.network.lightcone.canonical_cone`); strings whose cones are the
same circuit up to renaming qubits share one contraction (:class:`TermCache`).
:func:`maxcut_energy` is the QAOA MaxCut energy built on it.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import networkx as nx
import numpy as np

from tnsim.circuits.circuit import Circuit
from tnsim.circuits.families import qaoa_maxcut
from tnsim.circuits.gates import gate_matrix
from tnsim.errors import InputError
from tnsim.execution.options import DTypeLike, MemoryLimit, resolve_options
from tnsim.fitted import NARROW
from tnsim.network.builders import doubled_network
from tnsim.network.graph import TensorGraph
from tnsim.network.lightcone import CircuitIndex, canonical_cone, cone_circuit, index_circuit
from tnsim.network.simplify import absorb_small
from tnsim.queries.amplitudes import contract_simplified
from tnsim.queries.checks import check_circuit
from tnsim.queries.marginals import all_amplitudes, deep_and_narrow
from tnsim.queries.observables import Observable, parse_observable
from tnsim.validate import quote, real_number, sequence

__all__ = ["TermCache", "expectation", "maxcut_energy"]


def _pauli_expectation(psi: np.ndarray, letters: Mapping[int, str]) -> float:
    """``<psi|P|psi>`` of a state vector (qubit 0 most significant) and a Pauli string."""
    m = int(psi.size).bit_length() - 1
    state = psi.reshape((2,) * m)
    out = state
    for q, letter in letters.items():
        out = np.moveaxis(np.tensordot(gate_matrix(letter.lower()), out, axes=(1, q)), 0, q)
    return float(np.vdot(state, out).real)


class TermCache:
    """Expectation values of Pauli strings on one circuit, one contraction per cone shape.

    Each Pauli string's light cone is put in canonical form
    (:func:`tnsim.network.lightcone.canonical_cone`); strings whose cones are the same
    circuit up to renaming qubits share one contraction.

    Parameters
    ----------
    circuit : Circuit
        The circuit.
    dtype : numpy dtype, optional
        Contraction dtype (default: the enclosing ``run_options`` block's, else complex128).
    memory_limit : int or str, optional
        Bytes or text such as ``"4GiB"`` for live intermediates (default: the
        block's, else half of the available memory).

    Attributes
    ----------
    hits, misses : int
        Terms answered from the cache, and contractions run.
    """

    def __init__(
        self,
        circuit: Circuit,
        dtype: DTypeLike | None = None,
        memory_limit: MemoryLimit | None = None,
    ):
        check_circuit(circuit)
        self.index: CircuitIndex = index_circuit(circuit)
        self.circuit = circuit
        self._psi: np.ndarray | None = None
        self.options = resolve_options(memory_limit, dtype=dtype)
        self.values: dict[tuple, float] = {}
        self.hits = 0
        self.misses = 0

    def _from_amplitudes(
        self, local: Circuit, letters: dict[int, str], paulis: Sequence[tuple[int, str]]
    ) -> float:
        """A deep, narrow cone's value from all amplitudes.

        Those of the whole circuit (computed once) when it is itself narrow,
        else those of the cone.
        """
        if self.circuit.num_qubits <= NARROW:
            if self._psi is None:
                self._psi = all_amplitudes(self.circuit, self.options)
            return _pauli_expectation(self._psi, dict(paulis))
        psi = all_amplitudes(local, self.options)
        return _pauli_expectation(psi, letters)

    def network(
        self,
        paulis: Sequence[tuple[int, str]],
        gates: list[tuple[int, tuple[int, ...]]],
        qubits: Sequence[int],
    ) -> tuple[Circuit, dict[int, str], TensorGraph]:
        """One Pauli string's light cone, its letters by cone qubit, its doubled network.

        ``gates`` and ``qubits`` come from :func:`canonical_cone`; the network is simplified.
        """
        local = cone_circuit(self.index, gates, len(qubits))
        letters = {k: letter for k, (_, letter) in enumerate(paulis)}
        small = absorb_small(doubled_network(local, paulis=letters, dtype=self.options.dtype))
        return local, letters, small

    def value(self, paulis: Sequence[tuple[int, str]]) -> float:
        """Return ``<0|C† P C|0>`` for ``paulis`` = ``((qubit, letter), ...)``."""
        if not paulis:
            return 1.0
        key, gates, qubits = canonical_cone(self.index, paulis)
        v = self.values.get(key)
        if v is not None:
            self.hits += 1
            return v
        self.misses += 1
        local, letters, small = self.network(paulis, gates, qubits)
        if deep_and_narrow(local, small):
            v = self._from_amplitudes(local, letters, paulis)
        else:
            v = float(complex(contract_simplified(small, self.options)).real)
        self.values[key] = v
        return v


def expectation(
    circuit: Circuit,
    observable: str | Mapping[int, str] | Observable,
    *,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
) -> float:
    """Return ``<0|C† H C|0>`` for a real-weighted sum ``H`` of Pauli strings.

    Parameters
    ----------
    circuit : Circuit
        The circuit.
    observable : str or mapping or Observable
        Text such as ``"0.5 Z0 Z1 - 1.2 X3 + 0.7"`` (see
        :mod:`tnsim.queries.observables`), or one Pauli string as ``{qubit: "X"|"Y"|"Z"}``.
    dtype : numpy dtype, optional
        Contraction dtype: complex128 or complex64; default the enclosing
        ``run_options`` block's, else complex128.
    memory_limit : int or str, optional
        Bytes, or text such as ``"4GiB"``, for live intermediates; default the
        enclosing ``run_options`` block's, else half of the available memory.

    Returns
    -------
    float

    Examples
    --------
    >>> from tnsim import Circuit
    >>> bell = Circuit(2).h(0).cx(0, 1)
    >>> round(expectation(bell, "Z0 Z1 + 0.5 X0 X1 - 2 Z0"), 12)
    1.5
    >>> round(expectation(bell, {0: "Y", 1: "Y"}), 12)
    -1.0
    """
    check_circuit(circuit)
    cache = TermCache(circuit, dtype, memory_limit)
    obs = parse_observable(observable, circuit.num_qubits)
    return float(sum(t.coefficient * cache.value(t.paulis) for t in obs.terms))


def _check_graph(graph) -> None:
    """A MaxCut graph: an undirected networkx graph, no parallel edges or self-loops."""
    if not isinstance(graph, nx.Graph):
        raise InputError(f"graph must be a networkx.Graph, got {quote(graph)}")
    if graph.is_directed():
        raise InputError(
            "graph is directed; MaxCut is defined on undirected graphs: pass "
            "graph.to_undirected() (each edge counted once)"
        )
    if graph.is_multigraph():
        raise InputError("graph has parallel edges (a MultiGraph); pass a networkx.Graph")
    if graph.number_of_nodes() == 0:
        raise InputError("the graph has no nodes")
    loops = nx.number_of_selfloops(graph)
    if loops:
        raise InputError(f"graph has {loops} self-loop(s); an edge (u, u) is never cut: drop it")


def maxcut_energy(
    graph: nx.Graph,
    gammas: Sequence[float],
    betas: Sequence[float],
    *,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
) -> float:
    """Expected cut size of the QAOA state for MaxCut on ``graph``.

    Builds :func:`tnsim.circuits.families.qaoa_maxcut` and returns
    ``sum over edges (u, v) of (1 - <Z_u Z_v>) / 2``, one light-cone network
    per distinct edge neighbourhood.

    Parameters
    ----------
    graph : networkx.Graph
        The graph (nodes are relabelled ``0..n-1`` in sorted order).
    gammas, betas : sequence of float
        The QAOA angles, one of each per layer.
    dtype : numpy dtype, optional
        Contraction dtype (as in :func:`expectation`).
    memory_limit : int or str, optional
        Bytes or text such as ``"4GiB"`` (as in :func:`expectation`).

    Returns
    -------
    float

    Examples
    --------
    >>> import networkx as nx
    >>> round(maxcut_energy(nx.cycle_graph(8), [0.0], [0.0]), 12)  # |+...+>: half of 8 edges
    4.0
    """
    _check_graph(graph)
    gammas = [real_number(g, "gamma") for g in sequence(gammas, "gammas")]
    betas = [real_number(b, "beta") for b in sequence(betas, "betas")]
    options = resolve_options(memory_limit, dtype=dtype)
    circuit, g = qaoa_maxcut(graph, gammas, betas)
    check_circuit(circuit)
    cache = TermCache(circuit, options.dtype, options.memory_limit)
    total = 0.0
    for u, v in g.edges():
        total += 0.5 * (1.0 - cache.value(((u, "Z"), (v, "Z")) if u < v else ((v, "Z"), (u, "Z"))))
    return float(total)
