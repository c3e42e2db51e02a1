"""Slicing: fix labels to each of their values so the intermediates fit a memory limit.

Fixing (slicing) a label removes it from every tensor; the network's value is
the sum over the label's values of the smaller networks, so the FLOPs grow by
the *overhead factor* ``num_slices * sliced_flops / unsliced_flops >= 1``
while the peak memory shrinks.  Labels are chosen greedily: each time, among
the labels of the largest intermediates, the one with the smallest growth of
total FLOPs per unit of peak reduction (both in log) is added, until the peak
fits.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

from ..errors import ResourceLimitError
from .tree import TreeCost, step_labels, tree_cost

__all__ = ["choose_slices"]


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
        cands = _candidates(inputs, output, size, path, set(sliced), candidates)
        if not cands:
            raise ResourceLimitError(
                f"the intermediates need {cost.peak_bytes} bytes even with every "
                f"non-output label sliced ({len(sliced)} labels); the memory limit is "
                f"{memory_limit} bytes: give at least {cost.peak_bytes} bytes"
            )
        best = None
        base = cost.flops * math.prod(size[j] for j in sliced)
        for i in cands:
            trial = tree_cost(inputs, output, size, path, sliced=sliced + [i], itemsize=itemsize)
            k = math.prod(size[j] for j in sliced) * size[i]
            gain = math.log(cost.peak_bytes / max(trial.peak_bytes, 1))
            growth = math.log(max(trial.flops * k, 1) / max(base, 1))
            # FLOP growth per unit of peak reduction; labels that do not shrink the peak last.
            # (growth is clipped at ~0: a label that saves FLOPs is ranked by its peak gain.)
            ratio = max(growth, 1e-9) / gain if gain > 0 else growth
            key = (gain <= 0, ratio, trial.peak_bytes, i)
            if best is None or key < best[0]:
                best = (key, i, trial)
        _, i, cost = best
        sliced.append(i)
    return tuple(sliced), cost, math.prod(size[j] for j in sliced)
