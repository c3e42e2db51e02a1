"""Slicing: fix labels to each of their values so the intermediates fit a memory limit.

Fixing (slicing) a label removes it from every tensor; the network's value is
the sum over the label's values of the smaller networks, so the FLOPs grow by
the *overhead factor* ``num_slices * sliced_flops / unsliced_flops`` (at
least 1 for a fixed tree; re-planning can find a cheaper tree) while the peak
memory shrinks.  Labels are chosen greedily: each time, among
the labels of the largest intermediates, the one with the smallest growth of
total FLOPs per unit of peak reduction (both in log) is added, until the peak
fits.  :func:`choose_slices` slices a fixed tree; :func:`slice_with_replanning`
re-plans the tree's sub-trees after each label, so the tree and the slices
adapt to each other (slicing interleaved with local re-planning, as in Huang
et al., "Efficient parallelization of tensor network contraction for
simulating quantum computation", Nature Computational Science 1, 578, 2021; cited from memory).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

from tnsim.errors import ResourceLimitError
from tnsim.plan.reoptimize import reoptimize_path
from tnsim.plan.tree import TreeCost, memory_order, step_labels, tree_cost, without_labels

__all__ = ["choose_slices", "slice_with_replanning"]


def _candidates(inputs, output, size, path, sliced: set[int], top: int) -> list[int]:
    labels = step_labels(inputs, output, path, sliced)[len(inputs) :]
    if not labels:
        labels = [frozenset(ix) - sliced for ix in inputs]
    sizes = [math.prod(size[i] for i in ls) for ls in labels]
    order = sorted(range(len(labels)), key=lambda k: -sizes[k])
    out = set(output)
    seen: list[int] = []
    for k in order:
        for i in sorted(labels[k]):
            if i not in out and i not in sliced and i not in seen:
                seen.append(i)
        if len(seen) >= top:
            break
    return seen


def choose_slices(
    inputs: Sequence[Sequence[int]],
    output: Sequence[int],
    size: Mapping[int, int],
    path: Sequence[tuple[int, int]],
    memory_limit: int,
    *,
    itemsize: int = 16,
    candidates: int = 24,
) -> tuple[tuple[int, ...], TreeCost, int]:
    """Choose labels to slice so one slice's intermediates fit ``memory_limit`` bytes.

    Returns
    -------
    sliced : tuple of int
        The labels, in the order chosen.
    cost : TreeCost
        Cost of one slice.
    num_slices : int
        Product of the sliced labels' sizes.

    Raises
    ------
    ResourceLimitError
        If no slicing of this tree fits; the message gives the smallest peak
        reachable by slicing.

    Examples
    --------
    >>> ins, size = [(0, 1), (1, 2), (2, 0)], {0: 4, 1: 4, 2: 4}
    >>> sliced, cost, k = choose_slices(ins, (), size, [(0, 1), (2, 3)], 16 * 24)
    >>> len(sliced), cost.peak_bytes <= 16 * 24, k
    (1, True, 4)
    """
    sliced: list[int] = []
    cost = tree_cost(inputs, output, size, path, itemsize=itemsize)
    while cost.peak_bytes > memory_limit:
        i, cost = _next_label(
            inputs, output, size, path, sliced, cost, itemsize, candidates, memory_limit
        )
        sliced.append(i)
    return tuple(sliced), cost, math.prod(size[j] for j in sliced)


def _next_label(inputs, output, size, path, sliced, cost, itemsize, candidates, limit):
    """The label whose slicing adds the fewest FLOPs per unit of peak reduction, and its cost.

    ``cost`` is the tree's cost with ``sliced`` fixed; raises
    :class:`~tnsim.errors.ResourceLimitError` when no label is left to slice.
    """
    cands = _candidates(inputs, output, size, path, set(sliced), candidates)
    if not cands:
        raise ResourceLimitError(
            f"the intermediates need {cost.peak_bytes} bytes even with every "
            f"non-output label sliced ({len(sliced)} labels); the memory limit is "
            f"{limit} bytes: give at least {cost.peak_bytes} bytes"
        )
    best = None
    base = cost.flops * math.prod(size[j] for j in sliced)
    for i in cands:
        trial = tree_cost(inputs, output, size, path, sliced=[*sliced, i], itemsize=itemsize)
        k = math.prod(size[j] for j in sliced) * size[i]
        gain = math.log(cost.peak_bytes / max(trial.peak_bytes, 1))
        growth = math.log(max(trial.flops * k, 1) / max(base, 1))
        # FLOP growth per unit of peak reduction; labels that do not shrink the peak last.
        # (growth is clipped at ~0: a label that saves FLOPs is ranked by its peak gain.)
        ratio = max(growth, 1e-9) / gain if gain > 0 else growth
        key = (gain <= 0, ratio, trial.peak_bytes, i)
        if best is None or key < best[0]:
            best = (key, i, trial)
    return best[1], best[2]


def slice_with_replanning(
    inputs: Sequence[Sequence[int]],
    output: Sequence[int],
    size: Mapping[int, int],
    path: Sequence[tuple[int, int]],
    memory_limit: int,
    *,
    itemsize: int = 16,
    candidates: int = 24,
    max_leaves: int = 8,
    passes: int = 3,
    time_budget: float | None = None,
) -> tuple[tuple[int, ...], tuple[tuple[int, int], ...], TreeCost, int]:
    """Slice one label at a time, re-planning the tree's sub-trees after each.

    After each label is fixed, sub-trees of up to ``max_leaves`` leaves are
    re-planned exactly in up to ``passes`` passes
    (:func:`~tnsim.plan.reoptimize.reoptimize_path`) with no new intermediate
    above a third of the limit, then the steps are put in memory order: the
    tree adapts to the slices as they are chosen, and the next label is chosen
    on the adapted tree.  On 8-cycle grid circuits at 1/16 of the peak this
    often slices far cheaper than :func:`choose_slices` on the fixed tree,
    but not always (``benchmarks/planners.py --slicing``).
    ``time_budget`` bounds each re-planning (seconds; none by default).

    Returns
    -------
    sliced : tuple of int
        The labels, in the order chosen.
    path : tuple of (int, int)
        The adapted tree (SSA path over the same leaves).
    cost : TreeCost
        Cost of one slice.
    num_slices : int
        Product of the sliced labels' sizes.

    Raises
    ------
    ResourceLimitError
        If no slicing fits.

    Examples
    --------
    >>> ins, size = [(0, 1), (1, 2), (2, 0)], {0: 4, 1: 4, 2: 4}
    >>> sliced, path, cost, k = slice_with_replanning(ins, (), size, [(0, 1), (2, 3)], 16 * 24)
    >>> len(sliced), cost.peak_bytes <= 16 * 24, k
    (1, True, 4)
    """
    path = memory_order(inputs, output, size, path)
    cap = max(memory_limit // itemsize // 3, 1)
    sliced: list[int] = []
    cost = tree_cost(inputs, output, size, path, itemsize=itemsize)
    while cost.peak_bytes > memory_limit:
        i, _ = _next_label(
            inputs, output, size, path, sliced, cost, itemsize, candidates, memory_limit
        )
        sliced.append(i)
        ins, out = without_labels(inputs, output, sliced)
        new = reoptimize_path(
            ins,
            out,
            size,
            path,
            max_leaves=max_leaves,
            passes=passes,
            time_budget=time_budget,
            max_numel=cap,
        )
        path = memory_order(ins, out, size, new)
        cost = tree_cost(ins, out, size, path, itemsize=itemsize)
    return tuple(sliced), path, cost, math.prod(size[j] for j in sliced)
