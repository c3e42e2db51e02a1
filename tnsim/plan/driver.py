"""The planning driver: a network in, a :class:`Plan` (tree, sliced labels, cost) out.

:func:`make_plan` is the one entry point the queries use.  Small networks are
planned exactly, cheap ones greedily, the rest by the seeded search
(:mod:`tnsim.plan.search`); under a memory limit the candidate trees are
sliced (:mod:`tnsim.plan.slicing`) and the cheapest sliced plan is kept.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import opt_einsum.paths as oe_paths

from tnsim.errors import InputError, ResourceLimitError
from tnsim.fitted import WRITE_FLOPS
from tnsim.network.graph import TensorGraph
from tnsim.plan import clock
from tnsim.plan.builder import absorb
from tnsim.plan.clock import Deadline, TimeLog
from tnsim.plan.greedy import greedy_tree
from tnsim.plan.reoptimize import reoptimize_path
from tnsim.plan.search import SearchResult, score, search_path
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
    timings : tuple of (str, float)
        Seconds spent per planning stage: ``"search"`` (planner trials, each
        tree sliced and scored under a limit), ``"re-slicing"`` (under a limit:
        the search's best trees sliced again with their sub-trees re-planned
        after each label), ``"re-planning"`` (exact re-planning of sub-trees),
        ``"slicing"`` (the final choice of labels, with re-planning around them).
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
    timings: tuple[tuple[str, float], ...] = ()

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
    :func:`tnsim.plan.search.score`).  Tensors that add no size to a neighbour
    are joined to it first (:func:`tnsim.plan.builder.absorb`).  The
    alternatives are the best trees of the search's other planners: a tree of
    another shape may slice better.  With ``memory_limit``, trees are scored by
    their cost once sliced to it (the labels are not returned here; see
    :func:`make_plan`).

    Examples
    --------
    >>> plan_candidates([(0, 1), (1, 2), (2,)], (0,), {0: 2, 1: 2, 2: 2})
    [(((1, 2), (0, 3)), 'exact')]
    """
    found = _candidates(
        inputs,
        output,
        size,
        time_budget=time_budget,
        seed=seed,
        memory_limit=memory_limit,
        itemsize=itemsize,
        max_trials=max_trials,
        progress=progress,
        objective=objective,
    )
    return [(path, name) for path, name, _ in found]


def _candidates(
    inputs,
    output,
    size,
    *,
    time_budget,
    seed,
    memory_limit,
    itemsize,
    max_trials,
    progress,
    objective,
    deadline: Deadline | None = None,
    log: TimeLog | None = None,
) -> list[tuple[tuple[tuple[int, int], ...], str, tuple[int, ...]]]:
    """:func:`plan_candidates` with each tree's sliced labels (empty without a limit)."""
    n = len(inputs)
    if n <= 1:
        return [((), "trivial", ())]
    if n <= EXACT_MAX_TENSORS and time_budget is None:
        return [(_exact_path(inputs, output, size), "exact", ())]
    greedy = greedy_tree(inputs, output, size).path
    cost = tree_cost(inputs, output, size, greedy, itemsize=itemsize)
    fits = memory_limit is None or cost.peak_bytes <= memory_limit
    if time_budget is None and max_trials is None and cost.flops < SEARCH_THRESHOLD_FLOPS and fits:
        return [(greedy, "greedy", ())]
    untimed = _untimed(time_budget, max_trials)
    budget = _default_budget(cost.flops) if time_budget is None else time_budget
    if untimed:
        budget = None
    merged = absorb(inputs, output, size)
    if len(merged.nodes) < 3:
        ins, out, _ = merged.network()
        return [(merged.extend(greedy_tree(ins, out, size).path), "greedy", ())]
    result = search_path(
        *merged.network(),
        time_budget=budget,
        max_trials=max_trials,
        seed=seed,
        memory_limit=memory_limit,
        itemsize=itemsize,
        progress=progress,
        stop_rate=STOP_RATE if time_budget is None and not untimed else None,
        objective=objective,
        deadline=deadline,
        log=log,
    )
    return _extend(merged, result)


def _extend(merged, result: SearchResult):
    """The search's trees over the absorbed network, extended to the original leaves."""
    rows = [(merged.extend(result.path), result.method, result.sliced)]
    cuts = result.alternative_sliced or ((),) * len(result.alternatives)
    rows += [(merged.extend(p), name, c) for (p, name), c in zip(result.alternatives, cuts)]
    return rows


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
    if not isinstance(network, TensorGraph):
        raise InputError(f"make_plan needs a TensorGraph, got {type(network).__name__}")
    start = clock.now()
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
    log = TimeLog()
    # The whole of planning ends within the budget: the search gets most of it, the
    # final slicing and re-planning the rest (a share kept back for the exact costs).
    whole = Deadline(time_budget, start=start)
    search_end = whole.part(SEARCH_SHARE if limit is not None else 1.0 - FINISH_RESERVE)
    candidates = _candidates(
        inputs,
        network.output,
        size,
        time_budget=time_budget,
        seed=seed,
        memory_limit=limit,
        itemsize=itemsize,
        max_trials=max_trials,
        progress=progress,
        objective=objective,
        deadline=search_end,
        log=log,
    )
    search = {
        "time_budget": time_budget,
        "seed": seed,
        "max_trials": max_trials,
        "objective": objective,
    }
    finish_end = Deadline(None)
    if whole.timed:
        finish_end.end = whole.end - FINISH_RESERVE * (whole.end - start)
    elif not _untimed(time_budget, max_trials):
        # Default budget: the final slicing gets half as long as the search took (1 s at least).
        finish_end = Deadline(max(1.0, 0.5 * (clock.now() - start)))
    with log.stage("slicing"):
        plan = _finish(network, candidates, limit, itemsize, start, search, finish_end)
    plan = dataclasses.replace(plan, seconds=clock.now() - start, timings=log.items())
    if len(_PLAN_CACHE) >= PLAN_CACHE_SIZE:
        _PLAN_CACHE.pop(next(iter(_PLAN_CACHE)))
    _PLAN_CACHE[key] = plan
    return plan


SEARCH_SHARE = 0.9


"""Under a time budget and a memory limit, the search (trials, each tree sliced and scored,
the best trees sliced again with re-planning, and local re-planning) ends by this share of
the budget; the final slicing uses the rest."""


FINISH_RESERVE = 0.03


"""Share of a time budget kept back for the exact costs of the chosen plan."""


PLAN_CACHE_SIZE = 64


"""Plans kept for reuse: a network with the same labels, sizes and options gets the same plan."""


_PLAN_CACHE: dict[tuple, Plan] = {}


def _finish(network, candidates, limit, itemsize, start, search, deadline: Deadline) -> Plan:
    """Fit the best candidate (or another that slices cheaper) to ``limit``; fill in its costs.

    ``candidates`` are ``(path, planner, sliced labels)`` rows, the search's best
    first; the overhead is counted against the best tree before slicing (the
    first unsliced candidate).  ``search`` holds the search's options.
    """
    objective = search["objective"]
    write = WRITE_FLOPS if objective == "runtime" else 0.0
    args = (tuple(tuple(ix) for ix in network.indices), tuple(network.output), dict(network.size))
    trees = [(PairTree(*args, tuple(p)), name, tuple(cut)) for p, name, cut in candidates]
    plain = next((t for t, _, cut in trees if not cut), trees[0][0])
    full = plain.cost(itemsize=itemsize)
    tree, method, sliced = trees[0]
    cost, num = tree.cost(sliced=sliced, itemsize=itemsize), math.prod(tree.size[i] for i in sliced)
    if limit is not None and (sliced or cost.peak_bytes > limit):
        best = _slice_candidates(trees, limit, itemsize, objective, write, deadline)
        _, tree, method, (sliced, cost, num) = best
        if num > 1 and not deadline.passed():
            seconds = deadline.seconds()
            tree, cost = _reoptimize_sliced(
                tree,
                sliced,
                cost,
                limit,
                itemsize,
                objective,
                None if seconds is None else min(2.0, seconds),
            )
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
        seconds=clock.now() - start,
    )


def _slice_candidates(trees, limit, itemsize, objective, write, deadline: Deadline):
    """The cheapest way found to slice one of ``trees`` to fit ``limit``.

    Each candidate keeps the labels the search chose for it and gets more where
    its exact peak is still over the limit (:func:`choose_slices`; a tree
    without labels is put in memory order first); then, cheapest first and
    while ``deadline`` allows (at least one), candidates are sliced again one
    label at a time with their sub-trees re-planned after each label
    (:func:`slice_with_replanning`; neither way wins everywhere).  Returns
    ``(score, tree, method, (sliced, cost, num_slices))``.
    """
    fixed: list[tuple] = []
    error, plain_best = None, None
    for cand, name, cut in trees:
        if fixed and deadline.passed():
            break
        path = cand.path if cut else memory_order(*_args(cand), cand.path)
        try:
            sliced, cost, num = choose_slices(
                *_args(cand), path, limit, itemsize=itemsize, write_flops=write, preset=cut
            )
        except ResourceLimitError as exc:
            error = error or exc
            continue
        tree = PairTree(*_args(cand), path)
        fixed.append((score(cost, objective) * num, tree, name, (sliced, cost, num)))
        if not cut and plain_best is None:
            plain_best = fixed[-1]
    if not fixed:
        raise ResourceLimitError(f"no plan fits a memory limit of {limit} bytes: {error}")
    plain_best = plain_best or fixed[0]  # the best tree before slicing
    fixed.sort(key=lambda row: row[0])
    best = fixed[0]
    # Re-planned while the deadline allows: the cheapest, then the best tree before slicing
    # (under a mild limit, slicing it afterwards often wins), then the rest cheapest first,
    # each with at most half the time left; without a deadline, the best tree before slicing
    # first, REPLANNED in all (so that the result is never costlier than that tree sliced
    # afterwards, whatever the machine).
    rest = [row for row in fixed if row is not plain_best]
    order = [*rest[:1], plain_best, *rest[1:]] if deadline.timed else [plain_best, *rest]
    for rank, (_, cand, name, _) in enumerate(order):
        if deadline.passed() or (not deadline.timed and rank >= REPLANNED):
            break
        left = deadline.seconds()
        if left is not None:
            left *= 0.5
        seconds = None if left is None else max(0.02, min(1.0, left / 8))
        # From scratch: the adapted tree may want other labels than the search's.
        sliced, path, cost, num = slice_with_replanning(
            *_args(cand),
            cand.path,
            limit,
            itemsize=itemsize,
            time_budget=seconds,
            write_flops=write,
            total_budget=left,
        )
        total = score(cost, objective) * num
        if total < best[0]:
            best = (total, PairTree(*_args(cand), path), name, (sliced, cost, num))
    return best


REPLANNED = 3


"""Without a time budget, how many candidate trees the final slicing re-plans label by label."""


def _args(
    tree: PairTree,
) -> tuple[tuple[tuple[int, ...], ...], tuple[int, ...], Mapping[int, int]]:
    """``(inputs, output, size)`` of a tree, the first arguments of the slicers."""
    return tree.inputs, tree.output, tree.size


def _reoptimize_sliced(tree, sliced, cost, limit, itemsize, objective, seconds):
    """Re-plan sub-trees of the sliced tree; keep the result if it still fits."""
    ins, out = without_labels(tree.inputs, tree.output, sliced)
    new = reoptimize_path(ins, out, tree.size, tree.path, frontier=8, passes=1, time_budget=seconds)
    new_cost = tree_cost(ins, out, tree.size, new, itemsize=itemsize)
    if score(new_cost, objective) < score(cost, objective) and new_cost.peak_bytes <= limit:
        return PairTree(tree.inputs, tree.output, tree.size, new), new_cost
    return tree, cost
