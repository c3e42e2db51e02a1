"""Elimination orderings of the index graph, turned into contraction trees.

The index graph has one vertex per label and an edge between two labels that
share a tensor (hyperedges are ordinary vertices here).  Eliminating a label
contracts every tensor holding it; the tensors' other labels become a clique.
The cost of a tree built this way is governed by the largest clique, so orders
that keep the elimination width small (treewidth heuristics: minimum degree,
minimum fill-in; Markov and Shi, SIAM J. Comput. 38, 963, 2008, relate
contraction cost to the treewidth of this graph) give good trees.
"""

from __future__ import annotations

import heapq
import math
from collections.abc import Mapping, Sequence

import numpy as np

from tnsim.plan.builder import PathBuilder

__all__ = ["elimination_order", "elimination_path", "tree_from_order"]


def _index_graph(inputs: Sequence[Sequence[int]]) -> dict[int, set[int]]:
    adj: dict[int, set[int]] = {}
    for ix in inputs:
        for i in ix:
            adj.setdefault(i, set()).update(ix)
    for i, nb in adj.items():
        nb.discard(i)
    return adj


def elimination_order(
    inputs: Sequence[Sequence[int]],
    output: Sequence[int],
    size: Mapping[int, int],
    *,
    heuristic: str = "min-fill",
    noise: float = 0.0,
    fill_weight: float = 1.0,
    seed: int | np.random.Generator | None = 0,
) -> list[int]:
    """Order the non-output labels for elimination, greedily by a treewidth heuristic.

    Parameters
    ----------
    inputs, output, size
        The network: labels of each tensor, open labels, label dimensions.
    heuristic : {"min-fill", "min-degree"}
        ``min-degree`` eliminates the label whose clique (itself and its
        neighbours) has the fewest elements, in log2; ``min-fill`` adds
        ``fill_weight`` times the number of edges the elimination would add.
        Fill-in is recomputed for the eliminated label's neighbours only.
    noise : float
        Scale of Gumbel noise added to each score (0 gives the plain heuristic).
    fill_weight : float
        Weight of the fill-in term for ``min-fill``.
    seed : int or numpy.random.Generator
        Source of the noise.

    Returns
    -------
    list of int

    Examples
    --------
    >>> elimination_order([(0, 1), (1, 2), (2, 3)], (0,), {i: 2 for i in range(4)})
    [3, 2, 1]
    """
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    adj = _index_graph(inputs)
    out = set(output)
    w = {i: math.log2(size[i]) for i in adj}
    use_fill = heuristic == "min-fill"
    if heuristic not in ("min-fill", "min-degree"):
        raise ValueError(f"unknown heuristic {heuristic!r}; use 'min-fill' or 'min-degree'")

    def score(v: int) -> float:
        nb = adj[v]
        s = w[v] + sum(w[u] for u in nb)
        if use_fill and len(nb) > 1:
            fill = 0
            for u in nb:
                fill += len(nb) - 1 - len(adj[u] & nb)
            s += fill_weight * fill / 2
        if noise:
            s += noise * float(rng.gumbel())
        return s

    version = dict.fromkeys(adj, 0)
    heap = [(score(v), v, 0) for v in sorted(adj) if v not in out]
    heapq.heapify(heap)
    order = []
    done: set[int] = set()
    while heap:
        _, v, ver = heapq.heappop(heap)
        if v in done or ver != version[v]:
            continue
        done.add(v)
        order.append(v)
        nb = adj.pop(v)
        for u in nb:
            adj[u].discard(v)
            adj[u] |= nb - {u}
        for u in nb:
            if u not in out:
                version[u] += 1
                heapq.heappush(heap, (score(u), u, version[u]))
    return order


def tree_from_order(
    inputs: Sequence[Sequence[int]],
    output: Sequence[int],
    size: Mapping[int, int],
    order: Sequence[int],
) -> tuple[tuple[int, int], ...]:
    """Turn an elimination order into an SSA contraction path.

    For each label in turn, the live tensors holding it are contracted pairwise,
    smallest result first; what is left at the end (tensors holding only open
    labels, or disconnected parts) is joined by opt_einsum's greedy heuristic.

    Examples
    --------
    >>> tree_from_order([(0, 1), (1, 2), (2, 3)], (0,), {i: 2 for i in range(4)}, [3, 2, 1])
    ((1, 2), (0, 3))
    """
    b = PathBuilder(inputs, output, size)
    for v in order:
        group = sorted(b.holders.get(v, ()))
        while len(group) > 1:
            best = None
            for i in range(len(group)):
                for j in range(i + 1, len(group)):
                    key = (b.numel(b.merged(group[i], group[j])), i, j)
                    if best is None or key < best:
                        best = key
            assert best is not None
            _, i, j = best
            x, y = group[i], group[j]
            group = [t for t in group if t not in (x, y)] + [b.join(x, y)]
    return b.finish_greedy()


def elimination_path(
    inputs: Sequence[Sequence[int]],
    output: Sequence[int],
    size: Mapping[int, int],
    **kwargs,
) -> tuple[tuple[int, int], ...]:
    """:func:`elimination_order` then :func:`tree_from_order` (keyword arguments go to the first).

    Examples
    --------
    >>> elimination_path([(0, 1), (1, 2), (2,)], (), {0: 2, 1: 2, 2: 2})
    ((0, 1), (2, 3))
    """
    order = elimination_order(inputs, output, size, **kwargs)
    return tree_from_order(inputs, output, size, order)
