"""Passes that shrink a tensor network before planning, without changing its value."""

from __future__ import annotations

import math
from collections import deque

import numpy as np
import opt_einsum

from tnsim.network.graph import TensorGraph
from tnsim.network.scaled import normalize

__all__ = ["absorb_small"]


def _einsum_pair(a: np.ndarray, la, b: np.ndarray, lb, out) -> np.ndarray:
    """Contract two small arrays with ``numpy.einsum`` (labels renumbered for its sublists).

    Past numpy's 52 distinct sublist labels, opt_einsum's symbols are used instead.
    """
    table: dict[int, int] = {}
    sa = [table.setdefault(i, len(table)) for i in la]
    sb = [table.setdefault(i, len(table)) for i in lb]
    if len(table) > 52:
        sym = opt_einsum.get_symbol
        eq = "".join(map(sym, sa)) + "," + "".join(map(sym, sb))
        return opt_einsum.contract(eq + "->" + "".join(sym(table[i]) for i in out), a, b)
    return np.einsum(a, sa, b, sb, [table[i] for i in out], optimize=False)


class _Graph:
    """Mutable working copy of a network: tensors by id and which tensors hold each label."""

    def __init__(self, network: TensorGraph):
        self.arrays: list[np.ndarray | None] = list(network.arrays)
        self.labels: list[tuple[int, ...]] = list(network.indices)
        self.where: dict[int, set[int]] = {}
        for t, ix in enumerate(self.labels):
            for i in ix:
                self.where.setdefault(i, set()).add(t)
        self.size = network.size
        self.output = set(network.output)
        self.exponent = network.exponent

    def numel(self, labels) -> int:
        return math.prod(self.size[i] for i in labels)

    def result_labels(self, t: int, u: int) -> tuple[int, ...]:
        """Labels left after contracting ``t`` with ``u``."""
        lt, lu = self.labels[t], self.labels[u]
        union = list(lt) + [i for i in lu if i not in lt]
        where, out = self.where, self.output
        return tuple(
            i for i in union if i in out or len(where[i]) > (t in where[i]) + (u in where[i])
        )

    def array(self, t: int) -> np.ndarray:
        """The array of live tensor ``t`` (a contracted tensor has none)."""
        a = self.arrays[t]
        if a is None:
            raise AssertionError(f"tensor {t} was contracted away")
        return a

    def neighbours(self, t: int) -> list[int]:
        return sorted({u for i in self.labels[t] for u in self.where[i]} - {t})

    def contract(self, t: int, u: int) -> int:
        """Replace ``t`` and ``u`` by their contraction; return the new id."""
        lt, lu = self.labels[t], self.labels[u]
        out_labels = self.result_labels(t, u)
        c, e = normalize(_einsum_pair(self.array(t), lt, self.array(u), lu, out_labels))
        self.exponent += e
        new = len(self.arrays)
        self.arrays.append(c)
        self.labels.append(out_labels)
        for old in (t, u):
            for i in self.labels[old]:
                self.where[i].discard(old)
            self.arrays[old] = None
        for i in out_labels:
            self.where[i].add(new)
        return new

    def alive(self) -> list[int]:
        return [t for t, a in enumerate(self.arrays) if a is not None]


def absorb_small(network: TensorGraph) -> TensorGraph:
    """Contract neighbours whenever the result is no larger than the larger of the two.

    This folds the ``|0>`` and ``<x|`` vectors, single-qubit gates and every
    rank-1 or rank-2 tensor into its neighbours, and merges tensors joined by
    parallel labels, so a shallow circuit's network keeps only the tensors that
    the planner must order.  Scalars left over are folded into one tensor and
    the network's power-of-two exponent.

    Parameters
    ----------
    network : TensorGraph
        The network to shrink; it is not modified.

    Returns
    -------
    TensorGraph
        A network with the same value and output.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> from tnsim.network.builders import amplitude_network
    >>> tn = amplitude_network(Circuit(3).h(0).cx(0, 1).cx(1, 2), "111")
    >>> small = absorb_small(tn)
    >>> len(tn), len(small), round(abs(complex(small.dense())) ** 2, 12)
    (9, 1, 0.5)
    """
    g = _Graph(network)
    work = deque(range(len(g.arrays)))
    while work:
        t = work.popleft()
        a = g.arrays[t]
        if a is None:
            continue
        own = a.size
        for u in g.neighbours(t):
            limit = max(own, g.array(u).size)
            if g.numel(g.result_labels(t, u)) <= limit:
                work.append(g.contract(t, u))
                break
    return _fold_scalars(g, network)


def _fold_scalars(g: _Graph, network: TensorGraph) -> TensorGraph:
    """Collect the live tensors, merging rank-0 ones into the first other tensor."""
    alive = g.alive()
    scalars = [t for t in alive if g.array(t).ndim == 0]
    rest = [t for t in alive if g.array(t).ndim > 0]
    factor = np.ones((), dtype=network.dtype)
    for t in scalars:
        factor, e = normalize(factor * g.array(t))
        g.exponent += e
    arrays = [g.array(t) for t in rest]
    indices = [g.labels[t] for t in rest]
    if arrays:
        arrays[0] = arrays[0] * factor
    else:
        arrays, indices = [factor], [()]
    used = {i for ix in indices for i in ix} | set(network.output)
    size = {i: network.size[i] for i in used}
    return TensorGraph(arrays, indices, size, network.output, g.exponent, network.dtype)
