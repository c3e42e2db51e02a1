"""Incremental construction of an SSA contraction path with label bookkeeping.

Planners that build a tree step by step (elimination orders, bisection,
sub-tree re-planning) share this helper: it knows, after any set of joins,
which labels each live node still carries.
"""

from __future__ import annotations

import heapq
import math
from collections.abc import Iterable, Mapping, Sequence

import opt_einsum.paths as oe_paths

__all__ = ["Absorbed", "PathBuilder", "absorb", "coarsen", "plan_coarse"]


class PathBuilder:
    """Live nodes of a partly contracted network.

    Parameters
    ----------
    inputs : sequence of sequence of int
        Labels of each leaf.
    output : iterable of int
        Open labels.
    size : mapping
        Dimension of every label.

    Examples
    --------
    >>> b = PathBuilder([(0, 1), (1, 2), (2,)], (0,), {0: 2, 1: 2, 2: 2})
    >>> sorted(b.labels[b.join(1, 2)])
    [1]
    >>> b.finish_greedy()
    ((1, 2), (0, 3))
    """

    def __init__(
        self, inputs: Sequence[Iterable[int]], output: Iterable[int], size: Mapping[int, int]
    ):
        self.n = len(inputs)
        self.labels: list[frozenset[int]] = [frozenset(ix) for ix in inputs]
        self.holders: dict[int, set[int]] = {}
        for t, ix in enumerate(self.labels):
            for i in ix:
                self.holders.setdefault(i, set()).add(t)
        self.out = frozenset(output)
        self.size = size
        self.path: list[tuple[int, int]] = []
        self.alive: set[int] = set(range(self.n))

    def numel(self, labels: Iterable[int]) -> int:
        """Number of elements of a tensor with these labels."""
        return math.prod(self.size[i] for i in labels)

    def merged(self, x: int, y: int) -> frozenset[int]:
        """Labels of the result of joining live nodes ``x`` and ``y``."""
        hold = self.holders
        out = self.out
        return frozenset(
            i
            for i in self.labels[x] | self.labels[y]
            if i in out or len(hold[i]) > (x in hold[i]) + (y in hold[i])
        )

    def join(self, x: int, y: int) -> int:
        """Contract live nodes ``x`` and ``y``; return the new node's id."""
        new = self.n + len(self.path)
        res = self.merged(x, y)
        for i in self.labels[x] | self.labels[y]:
            self.holders[i].discard(x)
            self.holders[i].discard(y)
        for i in res:
            self.holders[i].add(new)
        self.labels.append(res)
        self.path.append((x, y))
        self.alive -= {x, y}
        self.alive.add(new)
        return new

    def external(self, group: Iterable[int]) -> frozenset[int]:
        """Labels of ``group`` needed outside it (other live nodes or the output)."""
        g = set(group)
        both = set().union(*(self.labels[t] for t in g)) if g else set()
        return frozenset(i for i in both if i in self.out or self.holders[i] - g)

    def join_greedy(self, group: Sequence[int]) -> int:
        """Contract ``group`` into one node with opt_einsum's greedy order; return its id."""
        group = list(group)
        if len(group) == 1:
            return group[0]
        ins = [self.labels[t] for t in group]
        outs = self.external(group)
        sizes = {i: self.size[i] for ix in ins for i in ix}
        linear = oe_paths.greedy(ins, outs, sizes)
        return self.apply_linear(group, linear)

    def apply_linear(self, group: Sequence[int], linear: Sequence[Sequence[int]]) -> int:
        """Apply a linear path over ``group`` (positions index the current group list)."""
        ids = list(group)
        for step in linear:
            picked = [ids[p] for p in sorted(step)]
            for p in sorted(step, reverse=True):
                del ids[p]
            cur = picked[0]
            for other in picked[1:]:
                cur = self.join(cur, other)
            ids.append(cur)
        while len(ids) > 1:
            ids.append(self.join(ids.pop(0), ids.pop(0)))
        return ids[0]

    def finish_greedy(self) -> tuple[tuple[int, int], ...]:
        """Join every live node greedily and return the whole SSA path."""
        if len(self.alive) > 1:
            self.join_greedy(sorted(self.alive))
        return tuple(self.path)


def coarsen(
    inputs: Sequence[Iterable[int]],
    output: Iterable[int],
    size: Mapping[int, int],
    max_size: int,
) -> PathBuilder:
    """Join neighbouring tensors greedily while no result exceeds ``max_size`` elements.

    The pair whose join removes the most elements (``|a| + |b| - |ab|``,
    largest first) is joined first; only tensors sharing a label are paired.
    The returned builder holds the joins made; its live nodes form the
    coarse network that a planner then orders (see :func:`plan_coarse`).

    Examples
    --------
    >>> b = coarsen([(0, 1), (1, 2), (2, 3)], (0, 3), {i: 2 for i in range(4)}, 4)
    >>> sorted(b.alive), b.path
    ([4], [(0, 1), (2, 3)])
    """
    import heapq

    b = PathBuilder(inputs, output, size)
    heap: list[tuple[int, int, int]] = []

    def push(t: int) -> None:
        for i in b.labels[t]:
            for u in b.holders[i]:
                if u == t:
                    continue
                merged = b.numel(b.merged(t, u))
                if merged <= max_size:
                    gain = b.numel(b.labels[t]) + b.numel(b.labels[u]) - merged
                    heapq.heappush(heap, (-gain, min(t, u), max(t, u)))

    for t in range(b.n):
        push(t)
    while heap:
        _, x, y = heapq.heappop(heap)
        if x not in b.alive or y not in b.alive:
            continue
        push(b.join(x, y))
    return b


def plan_coarse(
    inputs: Sequence[Iterable[int]],
    output: Iterable[int],
    size: Mapping[int, int],
    max_size: int,
    planner,
) -> tuple[tuple[int, int], ...]:
    """Coarsen the network (:func:`coarsen`), plan the coarse network with ``planner``, combine.

    ``planner(inputs, output, size)`` must return an SSA path over its inputs.
    """
    b = coarsen(inputs, output, size, max_size)
    nodes = sorted(b.alive)
    if len(nodes) > 1:
        sub = planner([tuple(sorted(b.labels[t])) for t in nodes], tuple(output), size)
        ids = list(nodes)
        for x, y in sub:
            ids.append(b.join(ids[x], ids[y]))
    return b.finish_greedy()


class Absorbed:
    """A network with some tensors joined first, and the way back to the original leaves.

    Made by :func:`absorb`.  :meth:`network` is the smaller network (one leaf per
    live node); :meth:`extend` turns a path over it into a path over the original
    leaves that starts with the joins already made.
    """

    def __init__(self, builder: PathBuilder):
        self.builder = builder
        self.nodes = sorted(builder.alive)

    def network(self) -> tuple[list[tuple[int, ...]], tuple[int, ...], Mapping[int, int]]:
        """``(inputs, output, size)`` of the smaller network."""
        b = self.builder
        return [tuple(sorted(b.labels[t])) for t in self.nodes], tuple(sorted(b.out)), b.size

    def extend(self, path: Sequence[tuple[int, int]]) -> tuple[tuple[int, int], ...]:
        """An SSA path over the smaller network as a path over the original leaves."""
        b = self.builder
        first = b.n + len(b.path)
        ids = [*self.nodes, *range(first, first + len(path))]
        return tuple(b.path) + tuple((ids[x], ids[y]) for x, y in path)


def absorb(
    inputs: Sequence[Iterable[int]], output: Iterable[int], size: Mapping[int, int]
) -> Absorbed:
    """Join every tensor into a neighbour while the result is no larger than the neighbour.

    Vectors and matrices on a wire (initial states, single-qubit gates, a
    diagonal gate written as a matrix on its wires) disappear into their
    neighbours this way, whatever order the tensors come in: planners then see
    the same network however a circuit was written down.  Smallest tensors are
    joined first; of their neighbours, the one giving the smallest result
    (lowest id on a tie).

    Examples
    --------
    >>> a = absorb([(0,), (0, 1), (1, 2), (2, 3)], (3,), {i: 2 for i in range(4)})
    >>> a.network()[0], a.extend([])
    ([(3,)], ((1, 0), (2, 4), (3, 5)))
    """
    b = PathBuilder(inputs, output, size)
    heap = [(b.numel(b.labels[t]), t) for t in range(b.n)]
    heapq.heapify(heap)
    while heap:
        _, t = heapq.heappop(heap)
        if t not in b.alive:
            continue
        best = None
        for i in b.labels[t]:
            for u in b.holders[i]:
                if u == t:
                    continue
                merged = b.numel(b.merged(t, u))
                if merged <= b.numel(b.labels[u]) and (best is None or (merged, u) < best):
                    best = (merged, u)
        if best is not None:
            new = b.join(best[1], t)
            heapq.heappush(heap, (best[0], new))
    return Absorbed(b)
