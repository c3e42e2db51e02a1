"""The QAOA MaxCut ansatz with named angles ``gamma0 .. gamma{p-1}``, ``beta0 .. beta{p-1}``.

Convention (the same as :func:`tnsim.circuits.families.qaoa_maxcut`): ``h`` on
every qubit, then per layer ``k`` the gate ``rzz(2 w γ_k) = exp(-i γ_k w Z_u Z_v)``
on every edge of weight ``w`` and ``rx(2 β_k) = exp(-i β_k X)`` on every qubit
(Farhi, Goldstone, Gutmann, arXiv:1411.4028, 2014).  Papers that write the
cost layer as ``exp(-i γ' C)`` with ``C = Σ w (1 - Z_u Z_v) / 2`` use
``γ' = -2 γ`` (up to a global phase); ``β`` is the same.
"""

from __future__ import annotations

import networkx as nx

from tnsim.circuits.circuit import Circuit
from tnsim.circuits.parameters import angle
from tnsim.errors import InputError

__all__ = ["maxcut_ansatz", "qaoa_names"]


def qaoa_names(p: int) -> tuple[str, ...]:
    """The angle names of a depth-``p`` ansatz: ``gamma0 .. gamma{p-1}, beta0 .. beta{p-1}``.

    Examples
    --------
    >>> qaoa_names(2)
    ('gamma0', 'gamma1', 'beta0', 'beta1')
    """
    return tuple(f"gamma{k}" for k in range(p)) + tuple(f"beta{k}" for k in range(p))


def maxcut_ansatz(graph: nx.Graph, p: int) -> tuple[Circuit, nx.Graph]:
    """The depth-``p`` QAOA MaxCut circuit on ``graph`` with named angles.

    Parameters
    ----------
    graph : networkx.Graph
        Nodes are relabelled ``0 .. n-1`` in sorted order; an edge's ``weight``
        (default 1) scales its cost angle.
    p : int
        Layers (at least 1).

    Returns
    -------
    circuit : Circuit
        Angles named as :func:`qaoa_names` says.
    graph : networkx.Graph
        The relabelled graph the circuit encodes.

    Examples
    --------
    >>> c, g = maxcut_ansatz(nx.cycle_graph(4), 1)
    >>> c.parameters(), len(c)
    (('beta0', 'gamma0'), 12)
    >>> c.ops[4]
    Operation(name='rzz', qubits=(0, 1), params=(AngleExpr(terms=(('gamma0', 2.0),), offset=0.0),))
    """
    if isinstance(p, bool) or not isinstance(p, int) or p < 1:
        raise InputError(f"p (QAOA layers) must be an integer >= 1, got {p!r}")
    if graph.number_of_nodes() == 0:
        raise InputError("the graph has no nodes")
    try:
        g = nx.convert_node_labels_to_integers(graph, ordering="sorted")
    except TypeError:  # node labels of mixed types: keep the file's order
        g = nx.convert_node_labels_to_integers(graph)
    c = Circuit(g.number_of_nodes())
    for q in range(c.num_qubits):
        c.h(q)
    for k in range(p):
        gamma, beta = angle(f"gamma{k}"), angle(f"beta{k}")
        cost = {}
        for u, v, d in g.edges(data=True):
            w = float(d.get("weight", 1.0))
            if w not in cost:
                cost[w] = 2 * w * gamma
            if cost[w] != 0.0:
                c.rzz(cost[w], u, v)
        mixer = 2 * beta
        for q in range(c.num_qubits):
            c.rx(mixer, q)
    return c, g
