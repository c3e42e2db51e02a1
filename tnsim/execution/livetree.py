"""A contraction tree kept alive while its leaves change a few at a time.

Gate-by-gate sampling asks, step after step, for the value of one network
whose leaves change in small groups (one gate, the bits of two qubits), with
the changed leaves' output legs left open.  Contracting the whole tree again
for every step repeats nearly all the work.  :class:`LiveTree` keeps

* the *value* of every node (the contraction of its subtree), dropped for
  the ancestors of a leaf when that leaf changes, and
* the *environment* of nodes (the contraction of everything outside the
  node's subtree, i.e. the derivative of the root by that node), dropped
  for every node whose outside holds a changed leaf (environments are kept
  along one chain of nested subtrees, so dropping them is a bisection),

and recomputes both lazily.  The value with some leaves opened is then the
contraction of the opened subtree (only its nodes above the opened leaves
are redone) with the environment of its top node.  When the groups of
leaves are taken in the order of the tree's leaves, consecutive groups lie
in the same subtrees and each node's value and environment are recomputed
about once per pass: a pass over all groups costs a few contractions of the
whole tree instead of one per group.

Every intermediate carries a power-of-two exponent, as in
:mod:`tnsim.execution.slices`.  One label, the *batch label*, is kept everywhere it
occurs and in every environment: the batch members (shots) are independent
networks sharing the tree.
"""

from __future__ import annotations

import copy
from collections.abc import Mapping, Sequence

import numpy as np

from tnsim.execution.steps import PairStep, apply_step, compile_tree, count_flops, pair_step
from tnsim.network.scaled import SLACK, Scaled, normalize_owned
from tnsim.plan.driver import PairTree

__all__ = ["LiveTree"]


class LiveTree:
    """Values and environments of a contraction tree, recomputed as leaves change.

    Parameters
    ----------
    tree : PairTree
        The tree; its output must be ``(batch_label,)``.
    arrays : sequence of numpy.ndarray
        The leaves, laid out as ``tree.inputs``.
    batch_label : int
        The label of the batch axis (in the output and in every environment).
    known : mapping of int to (numpy.ndarray, int), optional
        Values of nodes already computed elsewhere (see :meth:`values_of`),
        with their exponents; they must not depend on leaves replaced later.

    Examples
    --------
    Two batch members of ``sum_ij a_i M_ij b_sj``; then ``b``'s leaf opened:

    >>> a, m = np.array([1.0, 2.0]), np.array([[1.0, 0.0], [1.0, 1.0]])
    >>> b = np.array([[1.0, 0.0], [0.0, 1.0]])
    >>> tree = PairTree(((0,), (0, 1), (2, 1)), (2,), {0: 2, 1: 2, 2: 2}, ((0, 1), (2, 3)))
    >>> live = LiveTree(tree, [a, m, b], batch_label=2)
    >>> live.value().value().real
    array([3., 2.])
    >>> live.probe([2]).value().real
    array([[3., 2.],
           [3., 2.]])
    """

    def __init__(
        self,
        tree: PairTree,
        arrays: Sequence[np.ndarray],
        batch_label: int,
        known: Mapping[int, tuple[np.ndarray, int]] | None = None,
    ):
        if tuple(tree.output) != (batch_label,):
            raise ValueError(f"the tree's output must be the batch label alone, got {tree.output}")
        n = tree.num_leaves
        self.tree = tree
        self.batch = batch_label
        self.num_leaves = n
        self.steps = compile_tree(tree)
        self.labels: list[tuple[int, ...]] = [tuple(ix) for ix in tree.inputs]
        self.labels += [step.out_labels for step in self.steps]
        # children of each node; leaves (ids below n) have none: (-1, -1)
        self.children: list[tuple[int, int]] = [(-1, -1)] * n + [(x, y) for x, y in tree.path]
        self.parent = [-1] * len(self.children)
        for k, (x, y) in enumerate(tree.path):
            self.parent[x] = self.parent[y] = n + k
        self.root = len(self.children) - 1
        self._span = self._leaf_spans()
        self._size = dict(tree.size)  # with the opened axes of probes (labels above the tree's)
        self._fresh = max(self._size) + 1
        self.env_labels: dict[int, tuple[int, ...]] = {self.root: (batch_label,)}
        self._env_steps: dict[int, PairStep] = {}
        dtype = np.result_type(*arrays)
        self._root_env = (np.ones(tree.size[batch_label], dtype=dtype), 0)
        self.flops = 0
        """Real FLOPs of the pairwise contractions this tree has run (for run statistics)."""
        self._load(arrays, known)

    def _load(self, arrays, known) -> None:
        """Set the leaves and the known values; nothing else is cached."""
        self.fwd: dict[int, tuple[np.ndarray, int]] = dict(known or {})
        for k, array in enumerate(arrays):
            self.fwd[k] = (array, 0)
        # Environments kept: one chain of nodes from below the root downwards (``env_path``),
        # each node's subtree inside the one before; a change outside a subtree cuts the chain.
        self.env: dict[int, tuple[np.ndarray, int]] = {}
        self.env_path: list[int] = []

    def restart(
        self,
        arrays: Sequence[np.ndarray],
        known: Mapping[int, tuple[np.ndarray, int]] | None = None,
    ) -> LiveTree:
        """A LiveTree on the same tree (compiled steps shared) with new leaves, nothing cached."""
        other = copy.copy(self)
        other.flops = 0
        other._load(arrays, known)
        return other

    def _leaf_spans(self) -> list[tuple[int, int]]:
        """For every node, the range of depth-first leaf ranks of its subtree (leaves first)."""
        n = self.num_leaves
        span = [(0, 0)] * len(self.children)
        rank = 0
        stack = [(self.root, False)]
        while stack:
            u, done = stack.pop()
            if u < n:
                span[u] = (rank, rank + 1)
                rank += 1
            elif done:
                x, y = self.children[u]
                span[u] = (span[x][0], span[y][1])
            else:
                x, y = self.children[u]
                stack += [(u, True), (y, False), (x, False)]
        return span

    def _holds(self, node: int, other: int) -> bool:
        """Whether the subtree of ``other`` lies in the subtree of ``node``."""
        (lo, hi), (a, b) = self._span[node], self._span[other]
        return lo <= a and b <= hi

    def replace(self, leaf: int, array: np.ndarray) -> None:
        """Put ``array`` (same labels and shape) in place of leaf ``leaf``."""
        self.fwd[leaf] = (array, 0)
        u = self.parent[leaf]
        while u >= 0 and self.fwd.pop(u, None) is not None:
            u = self.parent[u]
        if self.env_path:
            self._cut_env(leaf)

    def _cut_env(self, node: int) -> None:
        """Drop the environments of the chain from its first node not holding ``node`` on."""
        path = self.env_path
        lo, hi = 0, len(path)
        while lo < hi:  # the chain's subtrees are nested: those holding ``node`` come first
            mid = (lo + hi) // 2
            if self._holds(path[mid], node):
                lo = mid + 1
            else:
                hi = mid
        for v in path[lo:]:
            del self.env[v]
        del path[lo:]

    def values_of(self, nodes: Sequence[int]) -> dict[int, tuple[np.ndarray, int]]:
        """The computed values among ``nodes`` (to pass as ``known`` to another LiveTree)."""
        return {u: self.fwd[u] for u in nodes if u in self.fwd}

    def value(self, node: int | None = None) -> Scaled:
        """The value of ``node`` (default: the root), computed from what is cached."""
        array, exponent = self._value(self.root if node is None else node)
        return Scaled(array, exponent)

    def _value(self, node: int) -> tuple[np.ndarray, int]:
        stack = [node]
        while stack:
            u = stack[-1]
            if u in self.fwd:
                stack.pop()
                continue
            x, y = self.children[u]
            missing = [c for c in (x, y) if c not in self.fwd]
            if missing:
                stack.extend(missing)
                continue
            stack.pop()
            self.fwd[u] = self._join(self.steps[u - self.num_leaves], self.fwd[x], self.fwd[y])
        return self.fwd[node]

    def _join(self, step: PairStep, a: tuple[np.ndarray, int], b: tuple[np.ndarray, int]):
        self.flops += count_flops((step,))
        c, e = normalize_owned(apply_step(step, a[0], b[0]), SLACK)
        return c, a[1] + b[1] + e

    def _env(self, node: int) -> tuple[np.ndarray, int]:
        """The environment of ``node``: its axes are ``env_labels[node]``."""
        if node == self.root:
            return self._root_env
        path = []
        u = node
        while u not in self.env and u != self.root:
            path.append(u)
            u = self.parent[u]
        if path:
            self._cut_env(node)  # the chain below ``u`` leads elsewhere
        for v in reversed(path):
            p = self.parent[v]
            x, y = self.children[p]
            sibling = y if x == v else x
            step = self._env_steps.get(v)
            if step is None:
                keep = set(self.labels[v]) | {self.batch}
                step = pair_step(self.env_labels[p], self.labels[sibling], keep, self.tree.size)
                self._env_steps[v] = step
                self.env_labels[v] = step.out_labels
            parent_env = self._root_env if p == self.root else self.env[p]
            self.env[v] = self._join(step, parent_env, self._value(sibling))
            self.env_path.append(v)
        return self.env[node]

    def lowest_common_ancestor(self, nodes: Sequence[int]) -> int:
        """The lowest node whose subtree holds every one of ``nodes``."""
        lo = min(self._span[u][0] for u in nodes)
        hi = max(self._span[u][1] for u in nodes)
        top = nodes[0]
        while not (self._span[top][0] <= lo and hi <= self._span[top][1]):
            top = self.parent[top]
        return top

    def probe(self, leaves: Sequence[int]) -> Scaled:
        """The batch's values with each of ``leaves`` opened, the tree left as it is.

        An opened leaf must have one label besides the batch label; for this
        call it is replaced by the identity from that label to a new axis of
        the result, i.e. the leg the leaf closed is left open.

        Returns
        -------
        Scaled
            Axes: the batch, then one axis per opened leaf, in the given order.
        """
        size, fresh = self._size, self._fresh
        top = self.lowest_common_ancestor(leaves)
        labels: dict[int, tuple[int, ...]] = {}
        values: dict[int, tuple[np.ndarray, int]] = {}
        opened: dict[int, set[int]] = {}
        new_axes = []
        for k, leaf in enumerate(leaves):
            (leg,) = (i for i in self.labels[leaf] if i != self.batch)
            size[fresh + k] = size[leg]
            new_axes.append(fresh + k)
            labels[leaf] = (leg, fresh + k)
            values[leaf] = (np.eye(size[leg], dtype=self._root_env[0].dtype), 0)
            u = leaf
            while True:
                opened.setdefault(u, set()).add(fresh + k)
                if u == top:
                    break
                u = self.parent[u]
        for u in sorted(v for v in opened if v >= self.num_leaves):
            x, y = self.children[u]
            keep = set(self.labels[u]) | opened[u] | {self.batch}
            ops = [
                (labels[c], values[c]) if c in values else (self.labels[c], self._value(c))
                for c in (x, y)
            ]
            step = pair_step(ops[0][0], ops[1][0], keep, size)
            labels[u] = step.out_labels
            values[u] = self._join(step, ops[0][1], ops[1][1])
        env_array = self._env(top)
        want = (self.batch, *new_axes)
        step = pair_step(self.env_labels[top], labels[top], set(want), size)
        array, exponent = self._join(step, env_array, values[top])
        array = array.transpose([step.out_labels.index(i) for i in want])
        return Scaled(array, exponent)
