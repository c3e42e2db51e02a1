"""Slice-invariant work, done once: subtrees no sliced label reaches are shared by every slice.

A node of a contraction tree is *invariant* when none of the leaves below it
holds a sliced label: its value is the same in every slice.  The invariant
nodes whose parent is not invariant (the *frontier*) are contracted once,
before the first slice; every slice then starts from them.

:func:`reduce_tree` turns the tree into a smaller one whose leaves are the
network's variant leaves plus the frontier nodes.  Its steps are exactly the
original tree's remaining steps -- the same operands, the same labels kept,
the same compiled :class:`~tnsim.execution.steps.PairStep` -- and the running
power-of-two scale is additive, so a slice gives bit-for-bit the result it
gives without reuse (the frontier's exponents are added at the end).

The frontier's arrays stay in memory for the whole run (in each worker), so
they count against the memory limit (:func:`reuse_peak`): :func:`choose_frontier`
keeps as many of them (smallest first) as fit next to one slice's
intermediates, and leaves the rest to be recomputed per slice.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from tnsim.execution.steps import PairStep, count_flops, peak_memory
from tnsim.execution.treerun import run_steps
from tnsim.plan.tree import PairTree

__all__ = [
    "Reduced",
    "choose_frontier",
    "frontier",
    "node_labels",
    "precompute",
    "reduce_tree",
    "reduced_cost",
    "reuse_peak",
    "steps_below",
    "variant_nodes",
]


def variant_nodes(tree: PairTree, sliced: Sequence[int]) -> list[bool]:
    """For every node (leaves, then one per step): whether a sliced label reaches it.

    Examples
    --------
    >>> t = PairTree(((0, 1), (1, 2), (2, 3)), (0, 3), {0: 2, 1: 2, 2: 2, 3: 2}, ((0, 1), (3, 2)))
    >>> variant_nodes(t, [2])
    [False, True, True, True, True]
    """
    cut = set(sliced)
    flags = [any(i in cut for i in ix) for ix in tree.inputs]
    for x, y in tree.path:
        flags.append(flags[x] or flags[y])
    return flags


def frontier(tree: PairTree, variant: Sequence[bool]) -> list[int]:
    """Invariant steps' nodes whose parent is variant: what is worth computing once.

    Leaves are not in the frontier (they need no computing).
    """
    n = tree.num_leaves
    out: list[int] = []
    for s, (x, y) in enumerate(tree.path):
        if variant[n + s]:
            out.extend(node for node in (x, y) if node >= n and not variant[node])
    return sorted(out)


@dataclass(frozen=True)
class Reduced:
    """A tree whose leaves are the variant leaves of another plus computed nodes.

    Attributes
    ----------
    tree : PairTree
        The reduced tree (same labels, sizes and output).
    leaves : tuple of int
        For each leaf of ``tree``: the node of the original tree it stands for.
    steps : tuple of int
        For each step of ``tree``: the original step it is.
    """

    tree: PairTree
    leaves: tuple[int, ...]
    steps: tuple[int, ...]


def _below(tree: PairTree, nodes: Sequence[int]) -> set[int]:
    """Every node inside the subtrees of ``nodes`` (themselves excluded)."""
    n = tree.num_leaves
    inside: set[int] = set()
    stack = list(nodes)
    while stack:
        node = stack.pop()
        if node >= n:
            for child in tree.path[node - n]:
                inside.add(child)
                stack.append(child)
    return inside


def reduce_tree(
    tree: PairTree, computed: Sequence[int], labels: Sequence[Sequence[int]]
) -> Reduced:
    """The tree left to contract once the nodes ``computed`` are known.

    Parameters
    ----------
    tree : PairTree
        The original tree.
    computed : sequence of int
        Nodes (steps' results) whose values are given; none inside another's subtree.
    labels : sequence of sequence of int
        Labels of every node of ``tree`` as compiled (``labels[node]``).

    Returns
    -------
    Reduced
    """
    n = tree.num_leaves
    gone = _below(tree, computed)
    done = set(computed)
    leaves = [k for k in range(n) if k not in gone] + sorted(done)
    position = {node: k for k, node in enumerate(leaves)}
    path: list[tuple[int, int]] = []
    steps: list[int] = []
    for s, (x, y) in enumerate(tree.path):
        node = n + s
        if node in gone or node in done:
            continue
        path.append((position[x], position[y]))
        position[node] = len(leaves) + len(steps)
        steps.append(s)
    inputs = tuple(tuple(labels[node]) for node in leaves)
    reduced = PairTree(inputs, tuple(tree.output), tree.size, tuple(path))
    return Reduced(reduced, tuple(leaves), tuple(steps))


def node_labels(tree: PairTree, steps: Sequence[PairStep]) -> list[tuple[int, ...]]:
    """Labels of every node as the compiled steps lay them out (leaves, then step results)."""
    return [tuple(ix) for ix in tree.inputs] + [s.out_labels for s in steps]


def _subtree(tree: PairTree, node: int) -> tuple[PairTree, list[int]]:
    """The subtree below ``node`` as a tree of its own, and the original steps it runs."""
    n = tree.num_leaves
    inside = sorted(_below(tree, [node]) | {node})
    leaves = [k for k in inside if k < n]
    inner = [k - n for k in inside if k >= n]
    position = {k: p for p, k in enumerate(leaves)}
    path = []
    for s in inner:
        x, y = tree.path[s]
        path.append((position[x], position[y]))
        position[n + s] = len(leaves) + len(path) - 1
    sub = PairTree(tuple(tree.inputs[k] for k in leaves), (), tree.size, tuple(path))
    return sub, inner


def reuse_peak(
    tree: PairTree, steps: Sequence[PairStep], nodes: Sequence[int], itemsize: int
) -> int:
    """Bytes of intermediates a run needs when ``nodes`` are computed once and kept.

    The larger of: computing them (each subtree's own peak next to the ones
    already kept), and one slice of the reduced tree next to all of them.
    Counted as :func:`tnsim.execution.steps.peak_memory` counts.
    """
    n = tree.num_leaves
    kept = before = 0
    for node in nodes:
        sub, inner = _subtree(tree, node)
        before = max(before, kept + peak_memory(sub, [steps[s] for s in inner], itemsize))
        kept += math.prod(steps[node - n].out_shape) * itemsize
    reduced = reduce_tree(tree, nodes, node_labels(tree, steps))
    need = peak_memory(reduced.tree, [steps[s] for s in reduced.steps], itemsize)
    return max(before, kept + need)


def choose_frontier(
    tree: PairTree,
    steps: Sequence[PairStep],
    sliced: Sequence[int],
    itemsize: int,
    limit: int,
) -> list[int]:
    """Frontier nodes to compute once, smallest first, as many as fit ``limit`` bytes.

    Parameters
    ----------
    tree, steps : PairTree, sequence of PairStep
        The plan and its steps compiled without the sliced labels.
    sliced : sequence of int
        Sliced labels.
    itemsize : int
        Bytes per element.
    limit : int
        Bytes one worker's intermediates may use, kept nodes included (:func:`reuse_peak`).
    """
    n = tree.num_leaves
    nodes = frontier(tree, variant_nodes(tree, sliced))
    nodes.sort(key=lambda node: (math.prod(steps[node - n].out_shape), node))

    def fits(k: int) -> bool:
        return reuse_peak(tree, steps, sorted(nodes[:k]), itemsize) <= limit

    if not nodes or fits(len(nodes)):
        return sorted(nodes)
    low, high = 0, len(nodes)  # fits(low) holds (nothing kept: the plan itself fits)
    while high - low > 1:
        mid = (low + high) // 2
        low, high = (mid, high) if fits(mid) else (low, mid)
    return sorted(nodes[:low])


def precompute(
    arrays: Sequence[np.ndarray], tree: PairTree, steps: Sequence[PairStep], nodes: Sequence[int]
) -> tuple[list[np.ndarray], int]:
    """Contract the subtrees of ``nodes`` once; return their arrays and summed exponent.

    Each subtree's steps run as they would inside a slice (same compiled
    steps, same rescaling), so the arrays are bit for bit those a slice makes.
    """
    n = tree.num_leaves
    out, exponent = [], 0
    for node in nodes:
        order = sorted(_below(tree, [node]) | {node})
        inner = [s - n for s in order if s >= n]
        local: dict[int, np.ndarray] = {k: arrays[k] for k in order if k < n}
        pairs = [tree.path[s] for s in inner]
        value, e = run_steps(local, pairs, [steps[s] for s in inner], [n + s for s in inner])
        out.append(value)
        exponent += e
    return out, exponent


def steps_below(tree: PairTree, nodes: Sequence[int]) -> list[int]:
    """The steps run to compute ``nodes``: those inside their subtrees and their own."""
    n = tree.num_leaves
    return sorted(s - n for s in _below(tree, nodes) | set(nodes) if s >= n)


def reduced_cost(
    tree: PairTree, steps: Sequence[PairStep], nodes: Sequence[int]
) -> tuple[int, int, int]:
    """(FLOPs once, FLOPs per slice, steps per slice) when ``nodes`` are computed once."""
    once_steps = set(steps_below(tree, nodes))
    once = count_flops([steps[s] for s in sorted(once_steps)])
    per = [steps[s] for s in range(len(steps)) if s not in once_steps]
    return once, count_flops(per), len(per)
