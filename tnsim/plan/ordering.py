"""Sweep orders by recursive min-cut bisection with terminals.

A *sweep* contracts the tensors one at a time into a growing result, in a
linear order; its intermediates are the *fronts*: the labels between the
tensors absorbed so far and the rest.  On grid-like networks (2D circuits of
moderate depth) the best trees are of this kind, with every front near the
network's narrowest cut.

:func:`cut_order` finds such orders by recursive bisection with terminal
propagation (Dunlop and Kernighan, "A procedure for placement of
standard-cell VLSI circuits", IEEE Trans. CAD 4, 92, 1985): a group of
consecutive tensors is split in two by :func:`tnsim.plan.hypergraph.bisect`,
with two fixed terminal vertices standing for the tensors placed before the
group (fixed to the first part) and after it (fixed to the second part).  The
cut of that split is then exactly the front between the two parts, labels to
earlier and later tensors included; each part is ordered the same way, the
first part first.  So every front of the order is a small cut of its group,
given what lies on either side.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

import numpy as np

from tnsim.plan.builder import PathBuilder
from tnsim.plan.hypergraph import Hypergraph, bisect

__all__ = ["cut_order", "cut_path", "front_sizes", "order_path"]


def cut_order(
    inputs: Sequence[Sequence[int]],
    output: Sequence[int],
    size: Mapping[int, int],
    *,
    imbalance: float = 0.3,
    leaf_size: int = 6,
    seed: int | np.random.Generator | None = 0,
) -> list[int]:
    """Order the tensors for a sweep by recursive bisection with terminals (module notes).

    Parameters
    ----------
    inputs, output, size
        The network: labels of each tensor, open labels, label dimensions.
    imbalance : float
        In ``[0, 1)``: balance allowed at each split (see
        :func:`tnsim.plan.hypergraph.bisect`); uneven splits let a front settle
        where the network is narrowest.
    leaf_size : int
        Groups of at most this many tensors are ordered greedily (the tensor adding
        the fewest label bits to the front first).
    seed : int or numpy.random.Generator
        Source of the random choices.

    Returns
    -------
    list of int
        Every tensor once.

    Examples
    --------
    >>> chain = [(k, k + 1) for k in range(8)]
    >>> order = cut_order(chain[::-1], (), {k: 2 for k in range(9)}, leaf_size=2)
    >>> max(front_sizes(chain[::-1], (), {k: 2 for k in range(9)}, order))
    1.0
    """
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    labels = [tuple(ix) for ix in inputs]
    n = len(labels)
    holders: dict[int, list[int]] = {}
    for t, ix in enumerate(labels):
        for i in ix:
            holders.setdefault(i, []).append(t)
    out = set(output)
    weight = {i: math.log2(size[i]) for i in holders}
    state = [1] * n  # 0: placed, 1: after the group, 2: in the group
    order: list[int] = []

    def leaf(group: list[int]) -> None:
        left = list(group)
        while left:
            best = min(left, key=lambda t: (_growth(labels[t], holders, state, out, weight), t))
            left.remove(best)
            state[best] = 0
            order.append(best)

    stack: list[list[int]] = [list(range(n))]
    while stack:
        group = stack.pop()
        if len(group) <= leaf_size:
            for t in group:
                state[t] = 2
            leaf(group)
            continue
        for t in group:
            state[t] = 2
        first, second = _split(group, labels, holders, state, out, weight, imbalance, rng)
        for t in group:
            state[t] = 1
        stack.append(second)
        stack.append(first)
    return order


def _growth(ix, holders, state, out, weight) -> float:
    """Bits a tensor adds to the front (labels it opens, less the labels it closes)."""
    g = 0.0
    for i in ix:
        hs = holders[i]
        placed = sum(1 for u in hs if state[u] == 0)
        if placed == len(hs) - 1 and i not in out:
            if placed:
                g -= weight[i]
        elif not placed:
            g += weight[i]
    return g


def _split(group, labels, holders, state, out, weight, imbalance, rng):
    """Split a group in two; placed tensors pull to the first part, later ones to the second."""
    index = {t: k for k, t in enumerate(group)}
    before, after = len(group), len(group) + 1
    pins: list[list[int]] = []
    weights: list[float] = []
    seen: set[int] = set()
    for t in group:
        for i in labels[t]:
            if i in seen:
                continue
            seen.add(i)
            inside = [index[u] for u in holders[i] if state[u] == 2]
            left = any(state[u] == 0 for u in holders[i])
            right = i in out or any(state[u] == 1 for u in holders[i])
            if left and right:
                continue  # in every front of the group: no split changes it
            p = inside + ([before] if left else []) + ([after] if right else [])
            if len(p) > 1 and weight[i] > 0:
                pins.append(p)
                weights.append(weight[i])
    hg = Hypergraph(len(group) + 2, pins, weights, [1.0] * len(group) + [0.0, 0.0])
    part = bisect(hg, imbalance, rng, fixed=[-1] * len(group) + [0, 1])
    first = [t for t in group if part[index[t]] == 0]
    second = [t for t in group if part[index[t]] == 1]
    if not first or not second:
        half = len(group) // 2
        return group[:half], group[half:]
    return first, second


def front_sizes(
    inputs: Sequence[Sequence[int]],
    output: Sequence[int],
    size: Mapping[int, int],
    order: Sequence[int],
) -> list[float]:
    """Log2 size of the front after each tensor of a sweep order.

    Examples
    --------
    >>> front_sizes([(0, 1), (1, 2), (2,)], (0,), {0: 2, 1: 2, 2: 2}, [2, 1, 0])
    [1.0, 1.0, 1.0]
    """
    count: dict[int, int] = {}
    for ix in inputs:
        for i in ix:
            count[i] = count.get(i, 0) + 1
    out = set(output)
    seen: dict[int, int] = {}
    front = 0.0
    sizes = []
    for t in order:
        for i in inputs[t]:
            c = seen.get(i, 0)
            w = math.log2(size[i])
            if c == 0 and (count[i] > 1 or i in out):
                front += w
            if c + 1 == count[i] and i not in out and count[i] > 1:
                front -= w
            seen[i] = c + 1
        sizes.append(front)
    return sizes


def order_path(
    inputs: Sequence[Sequence[int]],
    output: Sequence[int],
    size: Mapping[int, int],
    order: Sequence[int],
) -> tuple[tuple[int, int], ...]:
    """The sweep of an order as an SSA path: each tensor joins what it touches.

    Each tensor in turn is joined to the live nodes sharing a label with it
    (smallest first); one touching none starts a node of its own, so no step
    is an outer product that a later tensor would have connected.  Nodes left
    at the end (disconnected parts) are joined greedily.

    Examples
    --------
    >>> order_path([(0, 1), (2, 3), (1, 2)], (), {i: 2 for i in range(4)}, [0, 1, 2])
    ((0, 2), (1, 3))
    """
    b = PathBuilder(inputs, output, size)
    n = len(inputs)
    done: set[int] = set()
    for t in order:
        # Live nodes made of tensors already swept: ids past the leaves, or leaves swept alone.
        touched = {u for i in b.labels[t] for u in b.holders[i] if u != t and (u >= n or u in done)}
        cur = t
        for u in sorted(touched, key=lambda u: (b.numel(b.labels[u]), u)):
            cur = b.join(u, cur)
        done.add(cur)
    return b.finish_greedy()


def cut_path(
    inputs: Sequence[Sequence[int]],
    output: Sequence[int],
    size: Mapping[int, int],
    **options,
) -> tuple[tuple[int, int], ...]:
    """Plan a sweep: :func:`cut_order` (keyword options go to it), then :func:`order_path`.

    Examples
    --------
    >>> ring = [(k, (k + 1) % 8) for k in range(8)]
    >>> len(cut_path(ring, (), {k: 2 for k in range(8)}, leaf_size=2, seed=3))
    7
    """
    return order_path(inputs, output, size, cut_order(inputs, output, size, **options))
