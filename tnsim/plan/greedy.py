"""A baseline planner: opt_einsum's greedy heuristic turned into a contraction tree."""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import opt_einsum.paths as oe_paths

from tnsim.plan.tree import PairTree

__all__ = ["greedy_tree"]


def greedy_tree(
    inputs: Sequence[Sequence[int]], output: Sequence[int], size: Mapping[int, int]
) -> PairTree:
    """Plan with opt_einsum's greedy optimizer.

    Examples
    --------
    >>> greedy_tree([(0, 1), (1, 2), (2,)], (0,), {0: 2, 1: 2, 2: 2}).path
    ((0, 1), (2, 3))
    """
    ins = tuple(tuple(ix) for ix in inputs)
    out = tuple(output)
    if len(ins) == 1:
        return PairTree(ins, out, dict(size), ())
    linear = oe_paths.greedy([frozenset(ix) for ix in ins], frozenset(out), dict(size))
    return PairTree(ins, out, dict(size), tuple(oe_paths.linear_to_ssa(linear)))
