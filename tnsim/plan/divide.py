"""Contraction trees by recursive multilevel hypergraph bisection.

The tensors are split in two with few (log-weighted) labels between the parts
(:func:`tnsim.plan.hypergraph.bisect`), each part is split again, down to
groups of a few tensors ordered exactly or greedily; the tree joins the parts
in the reverse order of the splits (Gray and Kourtis, "Hyper-optimized tensor
network contraction", Quantum 5, 410, 2021: recursive hypergraph bisection
with the balance drawn per trial).  Uneven splits matter on grid-like
networks: peeling a small part off a large one gives the sweep-like trees
whose intermediates stay near the network's narrowest cut.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np
import opt_einsum.paths as oe_paths

from tnsim.plan.builder import PathBuilder
from tnsim.plan.hypergraph import Hypergraph, bisect

__all__ = ["divide_path"]


def divide_path(
    inputs: Sequence[Sequence[int]],
    output: Sequence[int],
    size: Mapping[int, int],
    *,
    imbalance: float = 0.5,
    leaf_size: int = 8,
    seed: int | np.random.Generator | None = 0,
) -> tuple[tuple[int, int], ...]:
    """Plan by recursive multilevel bisection of the tensors' hypergraph.

    Parameters
    ----------
    inputs, output, size
        The network: labels of each tensor, open labels, label dimensions.
    imbalance : float
        In ``[0, 1)``: each part of a split holds between ``(1 - imbalance) / 2``
        and ``(1 + imbalance) / 2`` of the tensors being split.
    leaf_size : int
        Groups of at most this many tensors are ordered by opt_einsum
        (exactly up to 6, greedily above).
    seed : int or numpy.random.Generator
        Source of the random choices.

    Returns
    -------
    tuple of (int, int)
        SSA path.

    Examples
    --------
    >>> ring = [(k, (k + 1) % 8) for k in range(8)]
    >>> len(divide_path(ring, (), {k: 2 for k in range(8)}, leaf_size=2))
    7
    """
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    b = PathBuilder(inputs, output, size)
    labels = b.labels

    def leaf(group: list[int]) -> int:
        if len(group) <= 2:
            return b.join_greedy(group)
        ins = [labels[t] for t in group]
        outs = b.external(group)
        sizes = {i: size[i] for ix in ins for i in ix}
        opt = oe_paths.optimal if len(group) <= 6 else oe_paths.greedy
        return b.apply_linear(group, opt(ins, outs, sizes))

    def rec(group: list[int]) -> int:
        if len(group) <= leaf_size:
            return leaf(group)
        hg = Hypergraph.of_tensors(labels, size, group)
        part = _components(hg) or bisect(hg, imbalance, rng)
        a = [t for t, s in zip(group, part) if s == 0]
        c = [t for t, s in zip(group, part) if s == 1]
        if not a or not c:
            return leaf(group)
        return b.join(rec(a), rec(c))

    if b.n > 1:
        rec(list(range(b.n)))
    return b.finish_greedy()


def _components(hg: Hypergraph) -> list[int] | None:
    """A split along connected components (largest alone on side 0), or ``None`` if connected."""
    n = hg.num_vertices
    comp = [-1] * n
    count = 0
    for s in range(n):
        if comp[s] >= 0:
            continue
        comp[s] = count
        stack = [s]
        while stack:
            v = stack.pop()
            for e in hg.incident[v]:
                for u in hg.pins[e]:
                    if comp[u] < 0:
                        comp[u] = count
                        stack.append(u)
        count += 1
    if count == 1:
        return None
    sizes = np.bincount(comp)
    big = int(np.argmax(sizes))
    return [0 if c == big else 1 for c in comp]
