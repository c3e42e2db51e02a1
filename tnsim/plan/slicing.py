"""Slicing: fix labels to each of their values so the intermediates fit a memory limit.

Fixing (slicing) a label removes it from every tensor; the network's value is
the sum over the label's values of the smaller networks, so the FLOPs grow by
the *overhead factor* ``num_slices * sliced_flops / unsliced_flops`` (at
least 1 for a fixed tree; re-planning can find a cheaper tree) while the peak
memory shrinks.  Labels are chosen greedily: each time, among
the labels of the largest intermediates, the one with the smallest growth of
total FLOPs per unit of peak reduction (both in log) is added, until the peak
fits (:func:`slice_profile`: all candidates of a step are costed at once by
:class:`~tnsim.plan.slicecost.TreeProfile`; the candidates are the labels of
the largest intermediates, so labels alive across many of the biggest
intermediates, which remove the most width along the whole tree, win).
:func:`choose_slices` slices a fixed tree; :func:`slice_with_replanning`
re-plans the tree's sub-trees after each label, so the tree and the slices
adapt to each other (slicing interleaved with local re-planning, as in Huang
et al., "Efficient parallelization of tensor network contraction for
simulating quantum computation", Nature Computational Science 1, 578, 2021; cited from memory).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from typing import NamedTuple

import numpy as np

from tnsim.errors import ResourceLimitError
from tnsim.plan import clock
from tnsim.plan.reoptimize import reoptimize_path
from tnsim.plan.slicecost import TreeProfile
from tnsim.plan.tree import TreeCost, memory_order, step_labels, tree_cost, without_labels

__all__ = ["SlicedFigures", "choose_slices", "slice_profile", "slice_with_replanning"]


class SlicedFigures(NamedTuple):
    """Figures of a sliced tree (floats)."""

    flops: float
    """Real FLOPs of all slices."""
    peak_bytes: float
    """Bytes of live intermediates of one slice."""
    written: float
    """Elements written, all slices."""
    num_slices: float
    """Number of slices."""


def slice_profile(
    profile: TreeProfile,
    memory_limit: float,
    *,
    write_flops: float = 0.0,
    candidates: int = 32,
) -> SlicedFigures:
    """Slice labels greedily (added to ``profile``) until one slice fits ``memory_limit`` bytes.

    Each time, the labels of the largest intermediates (at least ``candidates``
    of them) are costed at once, and the one adding the least cost (FLOPs plus
    ``write_flops`` per element written, all slices) per unit of peak removed
    (both in log) is sliced.  Labels sliced in ``profile`` before stay.

    Returns
    -------
    SlicedFigures
        The figures of the sliced tree (floats).

    Raises
    ------
    ResourceLimitError
        If the peak is over the limit with every non-output label sliced (the
        message gives that peak: the smallest limit slicing this tree can meet).

    Examples
    --------
    >>> prof = TreeProfile([(0, 1), (1, 2), (2, 0)], (), {0: 4, 1: 4, 2: 4}, [(0, 1), (2, 3)])
    >>> fig = slice_profile(prof, 16 * 24)
    >>> prof.sliced, fig.num_slices, fig.peak_bytes <= 16 * 24
    ([0], 4.0, True)
    """
    flops, peak, written, _ = profile.cost()
    num = float(math.prod(profile.size[i] for i in profile.sliced))
    while peak > memory_limit:
        label, (flops, peak, written) = _pick(profile, memory_limit, write_flops, candidates, peak)
        profile.add(label)
        num *= float(profile.size[label])
    return SlicedFigures(flops * num, peak, written * num, num)


def _pick(profile: TreeProfile, limit: float, write_flops: float, candidates: int, peak: float):
    """The next label to slice in ``profile`` and the figures of one slice with it sliced too."""
    flops, _, written, _ = profile.cost()
    cands = profile.labels_of_largest(candidates)
    if not cands:
        raise ResourceLimitError(
            f"the intermediates need {peak:.0f} bytes even with every non-output label "
            f"sliced ({len(profile.sliced)} labels); the memory limit is "
            f"{limit:.0f} bytes: give at least {peak:.0f} bytes"
        )
    f, p, w, _ = profile.cost_with(cands)
    dims = np.array([profile.size[i] for i in cands], dtype=float)
    base = max(flops + write_flops * written, 1.0)
    growth = np.maximum(np.log(np.maximum((f + write_flops * w) * dims, 1.0) / base), 1e-9)
    gain = np.log(peak / np.maximum(p, 1.0))
    ratio = np.where(gain > 1e-12, growth / np.where(gain > 1e-12, gain, 1.0), np.inf)
    j = int(np.argmin(ratio))
    if not np.isfinite(ratio[j]):
        # No single label lowers the peak (equal peaks elsewhere): slice the label of the
        # largest intermediate that adds the least cost, and go on.
        first = [cands.index(i) for i in profile.labels_of_largest(1)] or range(len(cands))
        j = min(first, key=lambda k: growth[k])
    return cands[j], (float(f[j]), float(p[j]), float(w[j]))


def choose_slices(
    inputs: Sequence[Sequence[int]],
    output: Sequence[int],
    size: Mapping[int, int],
    path: Sequence[tuple[int, int]],
    memory_limit: int,
    *,
    itemsize: int = 16,
    candidates: int = 32,
    write_flops: float = 0.0,
    preset: Sequence[int] = (),
) -> tuple[tuple[int, ...], TreeCost, int]:
    """Choose labels to slice so one slice's intermediates fit ``memory_limit`` bytes.

    Labels are picked by :func:`slice_profile` (``write_flops``: the cost of an
    element written, in FLOPs), after the ``preset`` ones.

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
    profile = _profile(inputs, output, size, path, preset, itemsize)
    slice_profile(profile, memory_limit, candidates=candidates, write_flops=write_flops)
    sliced = list(profile.sliced)
    cost = tree_cost(inputs, output, size, path, sliced=sliced, itemsize=itemsize)
    while cost.peak_bytes > memory_limit:  # rounding in the float figures: finish exactly
        i, cost = _next_label(
            inputs, output, size, path, sliced, cost, itemsize, candidates, memory_limit
        )
        sliced.append(i)
    return tuple(sliced), cost, math.prod(size[j] for j in sliced)


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
    assert best is not None
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
    frontier: int = 8,
    passes: int = 3,
    time_budget: float | None = None,
    write_flops: float = 0.0,
    preset: Sequence[int] = (),
    total_budget: float | None = None,
) -> tuple[tuple[int, ...], tuple[tuple[int, int], ...], TreeCost, int]:
    """Slice one label at a time, re-planning the tree's sub-trees after each.

    After each label is fixed, sub-trees of up to ``frontier`` leaves are
    re-planned exactly in up to ``passes`` passes
    (:func:`~tnsim.plan.reoptimize.reoptimize_path`) with no new intermediate
    above a third of the limit, then the steps are put in memory order: the
    tree adapts to the slices as they are chosen, and the next label is chosen
    on the adapted tree.  On 8-cycle grid circuits at 1/16 of the peak this
    often slices far cheaper than :func:`choose_slices` on the fixed tree,
    but not always (``benchmarks/planners.py --slicing``).
    ``time_budget`` bounds each re-planning (seconds; none by default),
    ``total_budget`` all of them together (labels chosen once it is spent are
    sliced without re-planning).  Labels
    are picked as by :func:`slice_profile` (``write_flops``: the cost of an element
    written, in FLOPs); ``preset`` labels are sliced from the start.

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
    sliced: list[int] = list(preset)
    profile = _profile(inputs, output, size, path, sliced, itemsize)
    peak = profile.cost()[1]
    end = None if total_budget is None else clock.now() + total_budget
    while peak > memory_limit:
        i, _ = _pick(profile, memory_limit, write_flops, candidates, peak)
        sliced.append(i)
        ins, out = without_labels(inputs, output, sliced)
        seconds = time_budget
        if end is not None:
            seconds = min(seconds if seconds is not None else math.inf, end - clock.now())
        if seconds is None or seconds > 0:
            path = reoptimize_path(
                ins,
                out,
                size,
                path,
                frontier=frontier,
                passes=passes,
                time_budget=seconds,
                max_numel=cap,
            )
        path = memory_order(ins, out, size, path)
        profile = _profile(inputs, output, size, path, sliced, itemsize)
        peak = profile.cost()[1]
    cost = tree_cost(inputs, output, size, path, sliced=sliced, itemsize=itemsize)
    while cost.peak_bytes > memory_limit:  # rounding in the float figures: finish exactly
        i, cost = _next_label(
            inputs, output, size, path, sliced, cost, itemsize, candidates, memory_limit
        )
        sliced.append(i)
    return tuple(sliced), path, cost, math.prod(size[j] for j in sliced)


def _profile(inputs, output, size, path, sliced, itemsize) -> TreeProfile:
    profile = TreeProfile(inputs, output, size, path, itemsize=itemsize)
    for i in sliced:
        profile.add(i)
    return profile
