"""Plan a network with many one-label vectors as if each were merged into a neighbour.

Networks with output bits given per batch member (:mod:`tnsim.execution.batch`,
:mod:`tnsim.queries.gatewise`) keep each bit as its own vector leaf, so that the leaf
can change.  Planners search such networks poorly: every vector is one more
leaf to place, and the time-limited searches found plans up to 4x costlier
than for the same network with the vectors merged into their neighbours (7x7
grid circuits, 1 s searches).  :func:`plan_vectors_first` plans the merged
network and puts each vector's merge at the start of the tree.
"""

from __future__ import annotations

import dataclasses
from collections import Counter
from collections.abc import Callable, Sequence

from tnsim.network.graph import TensorGraph
from tnsim.plan.driver import Plan
from tnsim.plan.tree import PairTree

__all__ = ["plan_vectors_first"]


def plan_vectors_first(
    network: TensorGraph, vectors: Sequence[int], planner: Callable[[TensorGraph], Plan]
) -> Plan:
    """Plan ``network`` with each leaf of ``vectors`` contracted first into a neighbour.

    Parameters
    ----------
    network : TensorGraph
        The network; each leaf in ``vectors`` has a single label.
    vectors : sequence of int
        Leaves to merge first, each into the first other leaf holding its label
        (a vector with no such leaf is planned as a leaf of its own).
    planner : callable
        Plans the network with the vectors merged (e.g. :func:`tnsim.plan.driver.make_plan`).

    Returns
    -------
    Plan
        The planner's plan, its tree extended to ``network``'s leaves.

    Examples
    --------
    >>> import numpy as np
    >>> from tnsim.plan.driver import make_plan
    >>> m, v = np.ones((2, 3)), np.ones(3)
    >>> net = TensorGraph([m, v, np.ones(2)], [(0, 1), (1,), (0,)], {0: 2, 1: 3})
    >>> plan_vectors_first(net, [1], make_plan).tree.path
    ((0, 1), (3, 2))
    """
    ins = [tuple(ix) for ix in network.indices]
    count = Counter(i for ix in ins for i in ix) + Counter(network.output)
    vector_set = set(vectors)
    kept = [k for k in range(len(ins)) if k not in vector_set]
    labels = {k: list(ins[k]) for k in kept}
    node = {k: k for k in kept}
    first: dict[int, int] = {}
    for k in reversed(kept):
        for i in ins[k]:
            first[i] = k
    path: list[tuple[int, int]] = []
    for v in vectors:
        (label,) = ins[v]
        holder = first.get(label)
        if holder is None or label not in labels[holder]:
            kept.append(v)
            labels[v], node[v] = list(ins[v]), v
            continue
        path.append((node[holder], v))
        node[holder] = len(ins) + len(path) - 1
        count[label] -= 1
        if count[label] == 1:  # only the holder has it now: summed in the merge
            labels[holder].remove(label)
    # Planners read only labels and sizes: the holders keep their own arrays here.
    reduced = TensorGraph(
        [network.arrays[k] for k in kept],
        [tuple(labels[k]) for k in kept],
        network.size,
        network.output,
        network.exponent,
        network.dtype,
    )
    plan = planner(reduced)
    ids = [node[k] for k in kept]
    start = len(ins) + len(path)
    for x, y in plan.tree.path:
        a, b = (ids[i] if i < len(kept) else start + i - len(kept) for i in (x, y))
        path.append((a, b))
    tree = PairTree(tuple(ins), tuple(network.output), dict(network.size), tuple(path))
    extended = tree.cost(sliced=plan.sliced, itemsize=plan.itemsize).flops
    merged = plan.tree.cost(sliced=plan.sliced, itemsize=plan.itemsize).flops
    return dataclasses.replace(
        plan, tree=tree, flops=plan.flops + (extended - merged) * plan.num_slices
    )
