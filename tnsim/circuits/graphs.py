"""Seeded graphs for QAOA workloads, and edge-list files as networkx writes and reads them.

Three families (:data:`GRAPH_FAMILIES`, written by ``tnsim gen`` as edge lists):
random ``d``-regular graphs, Erdős–Rényi graphs ``G(n, p)`` and 2D lattices.
Nodes are ``0 .. n-1``; the same arguments give the same graph.

:func:`read_graph` reads an edge list in the format of
:func:`networkx.read_edgelist` (``u v`` or ``u v {'weight': 2.0}`` per line,
``#`` comments) with the project's errors; :func:`edge_list_text` writes one.
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable
from dataclasses import dataclass

import networkx as nx

from tnsim.circuits.families import Param
from tnsim.errors import InputError

__all__ = [
    "GRAPH_FAMILIES",
    "GraphFamily",
    "edge_list_text",
    "erdos_renyi",
    "lattice_2d",
    "make_graph",
    "random_regular",
    "read_graph",
]


def _count(name: str, value, minimum: int = 0) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or value < minimum:
        raise InputError(f"{name} must be an integer >= {minimum}, got {value!r}")
    return value


def random_regular(nodes: int, degree: int = 3, seed: int = 0) -> nx.Graph:
    """A uniformly random ``degree``-regular graph on ``nodes`` nodes (seeded).

    Drawn by :func:`networkx.random_regular_graph` (Steger and Wormald's
    algorithm, "Generating random regular graphs quickly", Combinatorics,
    Probability and Computing 8, 377, 1999).

    Examples
    --------
    >>> g = random_regular(10, 3, seed=1)
    >>> sorted(set(dict(g.degree()).values())), g.number_of_edges()
    ([3], 15)
    """
    nodes, degree = _count("nodes", nodes, 1), _count("degree", degree)
    if nodes * degree % 2 or degree >= nodes:
        raise InputError(
            f"no {degree}-regular graph on {nodes} nodes: need degree < nodes and an even "
            "nodes * degree"
        )
    return nx.random_regular_graph(degree, nodes, seed=_count("seed", seed))


def erdos_renyi(nodes: int, probability: float = 0.1, seed: int = 0) -> nx.Graph:
    """An Erdős–Rényi graph ``G(n, p)``: each pair joined independently with ``probability``.

    Drawn by :func:`networkx.fast_gnp_random_graph` (time linear in nodes plus
    edges, so sparse graphs of 10⁵ nodes are quick).

    Examples
    --------
    >>> erdos_renyi(50, 0.1, seed=2).number_of_nodes()
    50
    """
    nodes = _count("nodes", nodes, 1)
    if isinstance(probability, bool) or not isinstance(probability, (int, float)):
        raise InputError(f"probability must be a number in [0, 1], got {probability!r}")
    if not 0.0 <= probability <= 1.0:
        raise InputError(f"probability must be in [0, 1], got {probability!r}")
    return nx.fast_gnp_random_graph(nodes, float(probability), seed=_count("seed", seed))


def lattice_2d(rows: int, cols: int, periodic: int = 0) -> nx.Graph:
    """The ``rows x cols`` square lattice; node ``r * cols + c`` is row ``r``, column ``c``.

    ``periodic=1`` joins opposite edges (a torus; needs at least 3 rows and 3 columns).

    Examples
    --------
    >>> g = lattice_2d(3, 4)
    >>> g.number_of_nodes(), g.number_of_edges(), g.has_edge(0, 4)
    (12, 17, True)
    >>> lattice_2d(3, 3, periodic=1).number_of_edges()
    18
    """
    rows, cols = _count("rows", rows, 1), _count("cols", cols, 1)
    if periodic not in (0, 1, True, False):
        raise InputError(f"periodic must be 0 or 1, got {periodic!r}")
    if periodic and (rows < 3 or cols < 3):
        raise InputError("a periodic lattice needs at least 3 rows and 3 columns")
    g = nx.grid_2d_graph(rows, cols, periodic=bool(periodic))
    return nx.relabel_nodes(g, {(r, c): r * cols + c for r, c in g.nodes()})


@dataclass(frozen=True)
class GraphFamily:
    """A graph family as the command line sees it (see :data:`GRAPH_FAMILIES`).

    Attributes
    ----------
    name : str
        Registry key.
    build : callable
        ``build(**params) -> networkx.Graph``.
    params : tuple of Param
        Every parameter, with its default.
    summary : str
        One line for help texts.
    """

    name: str
    build: Callable[..., nx.Graph]
    params: tuple[Param, ...]
    summary: str


_SEED = Param("seed", int, 0, "random seed")

GRAPH_FAMILIES: dict[str, GraphFamily] = {
    f.name: f
    for f in (
        GraphFamily(
            "regular-graph",
            random_regular,
            (Param("nodes", int, 100, "nodes"), Param("degree", int, 3, "degree"), _SEED),
            "random regular graph (edge list, for QAOA)",
        ),
        GraphFamily(
            "erdos-renyi-graph",
            erdos_renyi,
            (
                Param("nodes", int, 100, "nodes"),
                Param("probability", float, 0.05, "probability of each edge"),
                _SEED,
            ),
            "Erdős–Rényi graph G(n, p) (edge list, for QAOA)",
        ),
        GraphFamily(
            "lattice-graph",
            lattice_2d,
            (
                Param("rows", int, 10, "rows"),
                Param("cols", int, 10, "columns"),
                Param("periodic", int, 0, "1 joins opposite edges (torus)"),
            ),
            "2D square lattice (edge list, for QAOA)",
        ),
    )
}
"""Every graph family by command-line name."""


def make_graph(name: str, **params) -> nx.Graph:
    """Build a graph of the named family; unset parameters take their defaults.

    String values are converted to the parameter's type (for the command line).

    Examples
    --------
    >>> make_graph("lattice-graph", rows="2", cols="3").number_of_edges()
    7
    """
    family = GRAPH_FAMILIES.get(name)
    if family is None:
        raise InputError(f"unknown graph family {name!r}; known: {', '.join(GRAPH_FAMILIES)}")
    known = {p.name: p for p in family.params}
    unknown = sorted(set(params) - set(known))
    if unknown:
        raise InputError(
            f"graph family '{name}' has no parameter {unknown[0]!r}; its parameters: "
            f"{', '.join(known)}"
        )
    values = {}
    for p in family.params:
        value = params.get(p.name, p.default)
        if isinstance(value, str):
            try:
                value = p.kind(value)
            except ValueError:
                kind = "an integer" if p.kind is int else "a number"
                raise InputError(
                    f"graph family '{name}': parameter {p.name}={value!r} is not {kind}"
                ) from None
        values[p.name] = value
    return family.build(**values)


def edge_list_text(graph: nx.Graph) -> str:
    """The graph as an edge list, one ``u v`` line per edge (``u v {'weight': w}`` if weighted).

    :func:`networkx.read_edgelist` and :func:`read_graph` read it back.

    Examples
    --------
    >>> print(edge_list_text(nx.path_graph(3)), end="")
    0 1
    1 2
    """
    weighted = any("weight" in d for _, _, d in graph.edges(data=True))
    data = ["weight"] if weighted else False
    if weighted:
        lines = (
            f"{u} {v} {{'weight': {d.get('weight', 1.0)!r}}}" for u, v, d in graph.edges(data=True)
        )
    else:
        lines = nx.generate_edgelist(graph, data=data)
    return "".join(line + "\n" for line in lines)


def _bad_line(path: str) -> str:
    """Where in an edge-list file the first line networkx cannot read is (best effort)."""
    with open(path, encoding="utf-8", errors="replace") as fh:
        for number, raw in enumerate(fh, 1):
            line = raw.split("#", 1)[0].strip()
            if not line:
                continue
            parts = line.split(maxsplit=2)
            if len(parts) == 3 and not parts[2].startswith("{"):
                try:
                    float(parts[2])
                except ValueError:
                    return (
                        f"{path}:{number}:{raw.index(parts[2]) + 1}: edge data {parts[2][:40]!r} "
                        "is neither a number nor a {'key': value} dictionary"
                    )
    return f"{path}: not an edge list networkx can read"


def read_graph(path: str | os.PathLike) -> nx.Graph:
    """Read an edge list (as :func:`networkx.read_edgelist` does); nodes are kept as read.

    Node labels that are all integers are read as integers.  An edge's
    ``weight`` (``u v {'weight': 2.5}``, or a bare number as third column) must
    be a finite number; edges without one weigh 1.

    Raises
    ------
    InputError
        A missing or unreadable file, a malformed line (``file:line:column``),
        a self-loop, a non-finite weight, or a graph without edges.
    """
    path = os.fspath(path)
    if not os.path.isfile(path):
        raise InputError(f"{path}: no such file; give an edge list ('u v' per line)")
    graph = None
    for nodetype in (int, str):
        try:
            graph = _read(path, nodetype)
            break
        except _LineError as exc:
            raise InputError(f"{exc}; write one 'u v' (or 'u v weight') line per edge") from None
        except (OSError, UnicodeDecodeError) as exc:
            raise InputError(f"{path}: cannot read the edge list ({exc})") from None
        except (TypeError, ValueError, IndexError, SyntaxError):
            continue
    if graph is None:
        raise InputError(_bad_line(path) + "; write one 'u v' (or 'u v weight') line per edge")
    for u, v, d in graph.edges(data=True):
        if u == v:
            raise InputError(f"{path}: self-loop on node {u!r}; MaxCut needs edges between nodes")
        w = d.get("weight", 1.0)
        if isinstance(w, bool) or not isinstance(w, (int, float)) or not math.isfinite(w):
            raise InputError(f"{path}: edge {u!r} {v!r} has weight {w!r}; give a finite number")
    if graph.number_of_edges() == 0:
        raise InputError(f"{path}: the graph has no edges")
    return graph


class _LineError(Exception):
    """A line that is not an edge, with where it is."""


def _read(path: str, nodetype) -> nx.Graph:
    with open(path, encoding="utf-8") as fh:
        lines = fh.read().splitlines()
    three = [line.split("#", 1)[0].split() for line in lines]
    for number, parts in enumerate(three, 1):
        if len(parts) == 1:  # networkx would skip it silently; a truncated line is a mistake
            raise _LineError(
                f"{path}:{number}:1: expected 'u v' (two node labels), found {parts[0][:40]!r}"
            )
    bare_weight = any(len(p) == 3 and not p[2].startswith("{") for p in three)
    if bare_weight:
        return nx.parse_edgelist(lines, nodetype=nodetype, data=(("weight", float),))
    return nx.parse_edgelist(lines, nodetype=nodetype)
