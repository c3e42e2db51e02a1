"""Seeded circuit families for demos, tests and benchmarks."""

from __future__ import annotations

import networkx as nx

from .circuit import Circuit
from .errors import InputError

__all__ = ["qaoa_maxcut"]


def qaoa_maxcut(
    graph: nx.Graph | None = None,
    gammas: list[float] | tuple[float, ...] = (0.4,),
    betas: list[float] | tuple[float, ...] = (0.3,),
    *,
    num_nodes: int = 16,
    degree: int = 3,
    seed: int = 0,
) -> tuple[Circuit, nx.Graph]:
    """QAOA for MaxCut (Farhi, Goldstone, Gutmann, arXiv:1411.4028, 2014).

    The circuit is ``h`` on every qubit, then for each layer ``k``:
    ``rzz(2 γ_k)`` on every edge (``exp(-i γ Z_u Z_v)``) and ``rx(2 β_k)`` on every
    qubit (``exp(-i β X)``).  The graph's nodes are relabelled ``0..n-1`` in sorted order.

    Parameters
    ----------
    graph : networkx.Graph, optional
        The graph; default a random ``degree``-regular graph on ``num_nodes`` nodes.
    gammas, betas : sequence of float
        One angle of each kind per layer (``p = len(gammas)``).
    num_nodes, degree, seed : int
        Size, degree and seed of the default random regular graph.

    Returns
    -------
    circuit : Circuit
    graph : networkx.Graph
        The graph on nodes ``0..n-1`` that the circuit encodes.

    Examples
    --------
    >>> c, g = qaoa_maxcut(num_nodes=6, degree=3, seed=1)
    >>> c.num_qubits, g.number_of_edges(), len(c)
    (6, 9, 21)
    """
    if len(gammas) != len(betas) or not gammas:
        raise InputError("give the same positive number of gammas and betas (one per layer)")
    if graph is None:
        graph = nx.random_regular_graph(degree, num_nodes, seed=seed)
    if graph.number_of_nodes() == 0:
        raise InputError("the graph has no nodes")
    graph = nx.convert_node_labels_to_integers(graph, ordering="sorted")
    c = Circuit(graph.number_of_nodes())
    for q in range(c.num_qubits):
        c.h(q)
    for gamma, beta in zip(gammas, betas):
        for u, v in graph.edges():
            c.rzz(2 * float(gamma), u, v)
        for q in range(c.num_qubits):
            c.rx(2 * float(beta), q)
    return c, graph
