"""The planning driver: a network in, a :class:`Plan` (tree, sliced labels, cost) out.

:func:`make_plan` is the one entry point the queries use.  Small networks are
planned exactly, cheap ones greedily, the rest by the seeded search
(:mod:`tnsim.plan.search`); under a memory limit the candidate trees are
sliced (:mod:`tnsim.plan.slicing`) and the cheapest sliced plan is kept.
"""

from __future__ import annotations

import math
import time
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import opt_einsum.paths as oe_paths

from tnsim.errors import ResourceLimitError
from tnsim.network.graph import TensorGraph
from tnsim.plan.greedy import greedy_tree
from tnsim.plan.reoptimize import reoptimize_path
from tnsim.plan.search import score, search_path
from tnsim.plan.slicing import choose_slices, slice_with_replanning
from tnsim.plan.tree import PairTree, linear_to_ssa, memory_order, tree_cost, without_labels
from tnsim.units import parse_memory

__all__ = ["Plan", "make_plan", "plan_candidates", "plan_path"]


EXACT_MAX_TENSORS = 14


"""Networks with at most this many tensors are planned exactly (opt_einsum ``dp``)."""


SEARCH_THRESHOLD_FLOPS = 1e9


"""A greedy tree cheaper than this many FLOPs is kept without further search."""


@dataclass(frozen=True)
class Plan:
    """A contraction tree plus the labels to slice over, with the plan's cost.

    Attributes
    ----------
    tree : PairTree
        Order of pairwise contractions over the network's tensors.
    sliced : tuple of int
        Labels fixed to each of their values in turn; the slices are summed.
    flops : int
        Real FLOPs of the whole plan (every slice, plus summing the slices;
        a complex multiply-add is 8).
    peak_bytes : int
        Largest total bytes of intermediates alive at once within one slice
        (inputs not counted).
    width : float
        ``log2`` of the largest intermediate of one slice, in elements.
    num_slices : int
        Number of slices (1 if none).
    overhead : float
        ``flops / unsliced_flops`` (1.0 without slicing).
    unsliced_flops, unsliced_peak_bytes : int
        The same tree's figures without slicing.
    itemsize : int
        Bytes per element used for the byte figures.
    method : str
        Planner that produced the tree.
    seconds : float
        Planning time.
    """

    tree: PairTree
    sliced: tuple[int, ...] = ()
    flops: int = 0
    peak_bytes: int = 0
    width: float = 0.0
    num_slices: int = 1
    overhead: float = 1.0
    unsliced_flops: int = 0
    unsliced_peak_bytes: int = 0
    itemsize: int = 16
    method: str = ""
    seconds: float = 0.0

    @property
    def largest_bytes(self) -> int:
        """Bytes of the largest intermediate of one slice."""
        return round(2.0**self.width) * self.itemsize if self.width else 0


def _exact_path(inputs, output, size) -> tuple[tuple[int, int], ...]:
    """opt_einsum's exact dynamic programming on a small network.

    Outer products are searched too on at most 8 tensors (exhaustive optimum);
    on more, only products of connected parts (much faster; optimal among such
    paths, opt_einsum docs "Dynamic Programming").
    """
    ins = [frozenset(ix) for ix in inputs]
    opt = oe_paths.DynamicProgramming(minimize="flops", search_outer=len(ins) <= 8)
    linear = opt(ins, frozenset(output), dict(size))
    return linear_to_ssa(linear, len(ins))


STOP_RATE = 1e10


"""FLOP/s: with the default budget, the search stops once it has spent as long as its best
tree would take to contract at this (deliberately low) rate; see :func:`search_path`."""


def _untimed(time_budget: float | None, max_trials: int | None) -> bool:
    """Whether planning runs with no time limit anywhere: a trial budget and no time budget.

    Then the same seed gives the same plan on any machine and under any load.
    """
    return time_budget is None and max_trials is not None


def _default_budget(flops: int) -> float:
    """Seconds of search worth spending on a tree whose greedy cost is ``flops``.

    Grows with the cost (between 0.3 and 30 s): greedy's trees of costly
    networks are often far from the best, and searching is cheap next to them.
    """
    return float(min(30.0, max(0.3, flops / 1e11)))


def plan_path(
    inputs: Sequence[Sequence[int]],
    output: Sequence[int],
    size: Mapping[int, int],
    **options,
) -> tuple[tuple[tuple[int, int], ...], str]:
    """Choose an SSA path for a network given as label lists; return it and the planner's name.

    The options are those of :func:`plan_candidates`, which this calls.

    Examples
    --------
    >>> plan_path([(0, 1), (1, 2), (2,)], (0,), {0: 2, 1: 2, 2: 2})
    (((1, 2), (0, 3)), 'exact')
    """
    return plan_candidates(inputs, output, size, **options)[0]


def plan_candidates(
    inputs: Sequence[Sequence[int]],
    output: Sequence[int],
    size: Mapping[int, int],
    *,
    time_budget: float | None = None,
    seed: int = 0,
    memory_limit: int | None = None,
    itemsize: int = 16,
    max_trials: int | None = None,
    progress: bool = False,
    objective: str = "operations",
) -> list[tuple[tuple[tuple[int, int], ...], str]]:
    """Plan a network given as label lists: the best path and planner, then alternatives.

    Small networks (at most :data:`EXACT_MAX_TENSORS` tensors) are planned
    exactly; otherwise greedy is tried first and kept if it costs under
    :data:`SEARCH_THRESHOLD_FLOPS` (unless a ``time_budget`` is given), and the
    search driver runs for ``time_budget`` seconds (default: grows with the
    greedy cost, 0.3 to 30 s) and keeps the best tree by ``objective`` (see
    :func:`tnsim.plan.search.score`).  The alternatives are the best trees of
    the search's other planners: a tree of another shape may slice better.

    Examples
    --------
    >>> plan_candidates([(0, 1), (1, 2), (2,)], (0,), {0: 2, 1: 2, 2: 2})
    [(((1, 2), (0, 3)), 'exact')]
    """
    n = len(inputs)
    if n <= 1:
        return [((), "trivial")]
    if n <= EXACT_MAX_TENSORS and time_budget is None:
        return [(_exact_path(inputs, output, size), "exact")]
    greedy = greedy_tree(inputs, output, size).path
    cost = tree_cost(inputs, output, size, greedy, itemsize=itemsize)
    fits = memory_limit is None or cost.peak_bytes <= memory_limit
    if time_budget is None and max_trials is None and cost.flops < SEARCH_THRESHOLD_FLOPS and fits:
        return [(greedy, "greedy")]
    untimed = _untimed(time_budget, max_trials)
    budget = _default_budget(cost.flops) if time_budget is None else time_budget
    if untimed:
        budget = None
    result = search_path(
        inputs,
        output,
        size,
        time_budget=budget,
        max_trials=max_trials,
        seed=seed,
        memory_limit=memory_limit,
        itemsize=itemsize,
        progress=progress,
        stop_rate=STOP_RATE if time_budget is None and not untimed else None,
        objective=objective,
    )
    return [(result.path, result.method), *result.alternatives]


def make_plan(
    network: TensorGraph,
    *,
    memory_limit: int | str | None = None,
    time_budget: float | None = None,
    seed: int = 0,
    max_trials: int | None = None,
    progress: bool = False,
    objective: str = "runtime",
) -> Plan:
    """Choose a contraction plan for ``network``, sliced to fit ``memory_limit``.

    Parameters
    ----------
    network : TensorGraph
        The (simplified) network to plan.
    memory_limit : int or str, optional
        Bytes (or text such as ``"4GiB"``) that one slice's live intermediates
        may use; the plan is sliced to fit.  Inputs are not counted.
    time_budget : float, optional
        Seconds the planner may search (default: tiny networks are planned
        exactly and at once; larger ones get a budget growing with their
        greedy cost, see :func:`plan_path`).
    seed : int
        Seed of every random choice.
    max_trials : int, optional
        Limit on the search's trials.  Given without ``time_budget``, nothing
        in planning is limited by time, so the same seed gives the same plan
        on any machine and under any load.
    progress : bool
        Show a progress bar while searching.
    objective : {"runtime", "operations", "footprint"}
        What the search minimises (:func:`tnsim.plan.search.score`): by default
        a model of run time, FLOPs plus a cost per element written; ``"operations"``
        for the fewest operations.

    Returns
    -------
    Plan

    Raises
    ------
    ResourceLimitError
        If no slicing fits ``memory_limit``; nothing has been allocated.

    Examples
    --------
    >>> import numpy as np
    >>> tn = TensorGraph([np.ones((2, 2))] * 3, [(0, 1), (1, 2), (2, 0)], {0: 2, 1: 2, 2: 2})
    >>> p = make_plan(tn)
    >>> p.tree.path, p.flops, p.num_slices
    (((1, 2), (0, 3)), 96, 1)
    """
    start = time.perf_counter()
    limit = None if memory_limit is None else parse_memory(memory_limit)
    itemsize = int(network.dtype.itemsize)
    inputs = tuple(tuple(ix) for ix in network.indices)
    size = dict(network.size)
    key = (
        inputs,
        tuple(network.output),
        tuple(sorted(size.items())),
        limit,
        itemsize,
        time_budget,
        seed,
        max_trials,
        objective,
    )
    if key in _PLAN_CACHE:
        return _PLAN_CACHE[key]
    # Plan for FLOPs; the memory limit is met by slicing (and re-planning) below.
    candidates = plan_candidates(
        inputs,
        network.output,
        size,
        time_budget=time_budget,
        seed=seed,
        itemsize=itemsize,
        max_trials=max_trials,
        progress=progress,
        objective=objective,
    )
    trees = [PairTree(inputs, tuple(network.output), size, tuple(p)) for p, _ in candidates]
    search = {
        "time_budget": time_budget,
        "seed": seed,
        "max_trials": max_trials,
        "objective": objective,
    }
    plan = _finish(trees, [name for _, name in candidates], limit, itemsize, start, search)
    if len(_PLAN_CACHE) >= PLAN_CACHE_SIZE:
        _PLAN_CACHE.pop(next(iter(_PLAN_CACHE)))
    _PLAN_CACHE[key] = plan
    return plan


SLICING_SHARE = 0.25


"""Under a time budget, candidate trees after the first are re-sliced with re-planning
only while the slicing has taken less than this share of the budget."""


PLAN_CACHE_SIZE = 64


"""Plans kept for reuse: a network with the same labels, sizes and options gets the same plan."""


_PLAN_CACHE: dict[tuple, Plan] = {}


def _finish(
    trees: list[PairTree],
    methods: list[str],
    limit: int | None,
    itemsize: int,
    start: float,
    search: dict,
) -> Plan:
    """Slice the best tree (or an alternative that slices cheaper) to fit ``limit``; fill in costs.

    ``methods`` names each tree's planner; the overhead is counted against the
    best unsliced tree, ``trees[0]``; ``search`` holds the search's options
    (``time_budget``, ``seed``, ``max_trials``, ``objective``) for re-planning.
    """
    objective = search["objective"]
    tree, method = trees[0], methods[0]
    full = tree.cost(itemsize=itemsize)
    sliced: tuple[int, ...] = ()
    cost, num = full, 1
    if limit is not None and full.peak_bytes > limit:
        untimed = _untimed(search["time_budget"], search["max_trials"])
        ordered = [PairTree(*_args(t), memory_order(*_args(t), t.path)) for t in trees]
        full = ordered[0].cost(itemsize=itemsize)
        budget = None if untimed else search["time_budget"] or _default_budget(full.flops)
        best = _slice_candidates(ordered, methods, limit, itemsize, objective, budget)
        _, tree, method, (sliced, cost, num) = best
        if num > 1:
            seconds = None if untimed else 2.0
            tree, cost = _reoptimize_sliced(tree, sliced, cost, limit, itemsize, objective, seconds)
            tree, cost = _replan_sliced(tree, sliced, cost, limit, itemsize, **search)
    out_numel = math.prod(tree.size[i] for i in tree.output)
    flops = cost.flops * num + 2 * out_numel * (num - 1)
    return Plan(
        tree=tree,
        sliced=tuple(sliced),
        flops=flops,
        peak_bytes=cost.peak_bytes,
        width=cost.width,
        num_slices=num,
        overhead=flops / full.flops if full.flops else 1.0,
        unsliced_flops=full.flops,
        unsliced_peak_bytes=full.peak_bytes,
        itemsize=itemsize,
        method=method,
        seconds=time.perf_counter() - start,
    )


def _slice_candidates(trees, methods, limit, itemsize, objective, budget):
    """The cheapest way found to slice one of ``trees`` (memory-ordered) to fit ``limit``.

    Every tree is first sliced as it is (:func:`choose_slices`); then, from
    the cheapest of those on, trees are sliced again with re-planning along the
    way (:func:`slice_with_replanning`; neither way wins everywhere) -- all of them
    without a time ``budget``, else while the slicing has taken less than
    :data:`SLICING_SHARE` of it (at least one).  Returns ``(score, tree,
    method, (sliced, cost, num_slices))``.
    """
    began = time.perf_counter()
    fixed, error = [], None
    for cand, name in zip(trees, methods):
        try:
            sliced, cost, num = choose_slices(*_args(cand), cand.path, limit, itemsize=itemsize)
        except ResourceLimitError as exc:
            error = error or exc
            continue
        fixed.append((score(cost, objective) * num, cand, name, (sliced, cost, num)))
    if not fixed:
        raise ResourceLimitError(f"no plan fits a memory limit of {limit} bytes: {error}")
    fixed.sort(key=lambda row: row[0])
    best = fixed[0]
    for rank, (_, cand, name, _) in enumerate(fixed):
        if rank and budget is not None and time.perf_counter() - began > SLICING_SHARE * budget:
            break
        seconds = None if budget is None else 1.0
        sliced, path, cost, num = slice_with_replanning(
            *_args(cand), cand.path, limit, itemsize=itemsize, time_budget=seconds
        )
        total = score(cost, objective) * num
        if total < best[0]:
            best = (total, PairTree(*_args(cand), path), name, (sliced, cost, num))
    return best


def _args(tree: PairTree):
    """``(inputs, output, size)`` of a tree, the first arguments of the slicers."""
    return tree.inputs, tree.output, tree.size


def _reoptimize_sliced(tree, sliced, cost, limit, itemsize, objective, seconds):
    """Re-plan sub-trees of the sliced tree; keep the result if it still fits."""
    ins, out = without_labels(tree.inputs, tree.output, sliced)
    new = reoptimize_path(
        ins, out, tree.size, tree.path, max_leaves=8, passes=1, time_budget=seconds
    )
    new_cost = tree_cost(ins, out, tree.size, new, itemsize=itemsize)
    if score(new_cost, objective) < score(cost, objective) and new_cost.peak_bytes <= limit:
        return PairTree(tree.inputs, tree.output, tree.size, new), new_cost
    return tree, cost


def _replan_sliced(
    tree, sliced, cost, limit, itemsize, *, time_budget, seed, max_trials, objective
):
    """Search again on the network with the sliced labels removed; keep a cheaper tree that fits."""
    if len(tree.path) < 3:
        return tree, cost
    ins, out = without_labels(tree.inputs, tree.output, sliced)
    budget = 0.5 * time_budget if time_budget is not None else _default_budget(cost.flops)
    if _untimed(time_budget, max_trials):
        budget = None
    result = search_path(
        ins,
        out,
        tree.size,
        time_budget=budget,
        max_trials=max_trials,
        seed=seed,
        memory_limit=limit,
        itemsize=itemsize,
        objective=objective,
    )
    path = memory_order(ins, out, tree.size, result.path)
    new_cost = tree_cost(ins, out, tree.size, path, itemsize=itemsize)
    if score(new_cost, objective) < score(cost, objective) and new_cost.peak_bytes <= limit:
        return PairTree(tree.inputs, tree.output, tree.size, path), new_cost
    return tree, cost
