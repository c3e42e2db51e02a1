"""Local improvement of a contraction tree: re-plan small sub-trees exactly.

For an internal node, its sub-tree is cut at a frontier of at most
``frontier`` nodes (the largest nodes are expanded first); the frontier is a
small self-contained network whose output is the node's labels.  An exact
planner (:func:`tnsim.plan.exact.exact_path` up to its size, opt_einsum's
``dp`` beyond) re-orders it and the new sub-tree replaces the old one when it
costs fewer FLOPs under :mod:`tnsim.plan.tree`'s model.  With a size cap, re-planned sub-trees keep
every intermediate within ``max(cap, the sub-tree's largest before)``, so
re-planning never makes a sliced tree need more memory than the cap allows.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

import opt_einsum.paths as oe_paths

from tnsim.plan import clock
from tnsim.plan.exact import MAX_LEAVES, exact_plan
from tnsim.plan.tree import linear_to_ssa, step_flops, step_labels, tree_cost

__all__ = ["reoptimize_path"]


class _Tree:
    def __init__(self, inputs, output, size, path):
        self.n = len(inputs)
        self.size = size
        self.labels = step_labels(inputs, output, path)
        self.children: dict[int, tuple[int, int]] = {}
        for s, (x, y) in enumerate(path):
            self.children[self.n + s] = (x, y)
        self.root = self.n + len(path) - 1 if path else None
        self._numel: dict[int, int] = {}
        self.flops = {
            v: step_flops(self.labels[x], self.labels[y], self.labels[v], size)
            for v, (x, y) in self.children.items()
        }

    def numel(self, v: int) -> int:
        # A node id keeps its labels for good (new nodes get new ids): cache the size.
        got = self._numel.get(v)
        if got is None:
            got = self._numel[v] = math.prod(self.size[i] for i in self.labels[v])
        return got

    def frontier(self, v: int, k: int) -> tuple[list[int], list[int]]:
        """Frontier of at most ``k`` nodes under ``v`` and the internal nodes above it."""
        front = list(self.children[v])
        inner = [v]
        while len(front) < k:
            cand = [u for u in front if u in self.children]
            if not cand:
                break
            u = max(cand, key=lambda t: (self.numel(t), t))
            front.remove(u)
            front.extend(self.children[u])
            inner.append(u)
        return front, inner

    def replace(self, v: int, front: list[int], inner: list[int], ssa) -> None:
        """Rebuild ``v``'s sub-tree over ``front`` from an SSA path over it."""
        for u in inner[1:]:
            del self.children[u]
            del self.flops[u]
        ids = list(front)
        k = len(front)
        for s, (x, y) in enumerate(ssa):
            last = s == len(ssa) - 1
            node = v if last else len(self.labels)
            a, b = ids[x], ids[y]
            if last:
                keep = self.labels[v]
            else:
                keep = _keep(self.labels, front, ssa, s, k, self.labels[v])
                self.labels.append(keep)
            self.children[node] = (a, b)
            self.flops[node] = step_flops(self.labels[a], self.labels[b], keep, self.size)
            ids.append(node)

    def path(self) -> tuple[tuple[int, int], ...]:
        """Post-order SSA path (renumbered) of the current tree."""
        if self.root is None:
            return ()
        order: list[int] = []
        stack = [(self.root, False)]
        while stack:
            v, seen = stack.pop()
            if v not in self.children:
                continue
            if seen:
                order.append(v)
            else:
                stack.append((v, True))
                x, y = self.children[v]
                stack.append((y, False))
                stack.append((x, False))
        new_id = {v: self.n + s for s, v in enumerate(order)}
        return tuple(
            (
                new_id.get(self.children[v][0], self.children[v][0]),
                new_id.get(self.children[v][1], self.children[v][1]),
            )
            for v in order
        )


def _best_order(sub_in, sub_out, sizes, cap):
    """An exact order of a small sub-network and its FLOPs, or ``None`` if none fits ``cap``.

    :func:`~tnsim.plan.exact.exact_plan` up to its size (its cost is the sub-tree's
    FLOPs: every label of a frontier node is held by another or by the result, so no
    leaf sums a label of its own), opt_einsum's ``dp`` beyond (costed exactly).
    """
    if len(sub_in) <= MAX_LEAVES and len(set().union(*sub_in)) <= 64:
        return exact_plan(sub_in, sub_out, sizes, max_numel=cap)
    try:
        linear = oe_paths.dynamic_programming(list(sub_in), sub_out, sizes, memory_limit=cap)
    except (ValueError, RuntimeError):
        return None
    ssa = linear_to_ssa(linear, len(sub_in))
    new = tree_cost(sub_in, sub_out, sizes, ssa)
    if cap is not None and new.largest > cap:
        return None
    return ssa, float(new.flops)


def _keep(labels, front, ssa, s, k, out) -> frozenset:
    """Labels of step ``s``'s result in a sub-network over ``front`` with output ``out``."""
    node_labels = [labels[t] for t in front]
    for x, y in ssa[: s + 1]:
        a, b = node_labels[x], node_labels[y]
        node_labels.append(None)
        node_labels[x] = node_labels[y] = None
        rest = set().union(*(ls for ls in node_labels if ls is not None))
        node_labels[-1] = frozenset(i for i in a | b if i in rest or i in out)
    return node_labels[-1]


def reoptimize_path(
    inputs: Sequence[Sequence[int]],
    output: Sequence[int],
    size: Mapping[int, int],
    path: Sequence[tuple[int, int]],
    *,
    frontier: int = 8,
    passes: int = 2,
    time_budget: float | None = None,
    min_fraction: float = 1e-6,
    max_numel: int | None = None,
) -> tuple[tuple[int, int], ...]:
    """Improve an SSA path by re-planning sub-trees of up to ``frontier`` leaves exactly.

    Nodes are visited from the most expensive down, skipping steps cheaper
    than ``min_fraction`` of the total; a pass stops early once
    ``time_budget`` seconds are spent.  The result never costs more FLOPs.
    With ``max_numel``, a re-planned sub-tree may not hold an intermediate of
    more elements than ``max_numel`` or than the largest it replaces.

    Examples
    --------
    >>> size = {i: 2 for i in range(5)}
    >>> size[4] = 64
    >>> ins = [(0, 4), (1, 4), (0, 1), (2,)]
    >>> bad = ((0, 1), (2, 3), (4, 5))
    >>> tree_cost(ins, (), size, reoptimize_path(ins, (), size, bad)).flops < tree_cost(
    ...     ins, (), size, bad).flops
    True
    """
    path = tuple((int(x), int(y)) for x, y in path)
    if len(path) < 2:
        return path
    start = clock.now()
    t = _Tree(inputs, output, size, path)
    for _ in range(passes):
        improved = False
        floor = min_fraction * sum(t.flops.values())
        for v in sorted(t.children, key=lambda u: -t.flops[u]):
            if t.flops.get(v, 0) < floor:
                break
            if time_budget is not None and clock.now() - start > time_budget:
                break
            if v not in t.children:
                continue
            front, inner = t.frontier(v, frontier)
            if len(front) < 3:
                continue
            old = sum(t.flops[u] for u in inner)
            sub_in = [t.labels[u] for u in front]
            sub_out = t.labels[v]
            sizes = {i: size[i] for ix in sub_in for i in ix}
            cap = None
            if max_numel is not None:
                cap = max(max_numel, max(t.numel(u) for u in inner))
            found = _best_order(sub_in, sub_out, sizes, cap)
            # (Floats: a rounding difference is no improvement.)
            if found is not None and found[1] < old * (1 - 1e-9):
                t.replace(v, front, inner, found[0])
                improved = True
        if not improved:
            break
    return t.path()
