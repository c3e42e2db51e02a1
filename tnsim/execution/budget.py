"""Plans that fit the memory limit of a run.

Every query gets its plans here (:func:`fit_plan`, :func:`kept_plan`), so a
checkpointed or plan-file run takes its kept plans instead of planning.
The planner counts memory as the executor allocates it (operand copies
included, :func:`tnsim.plan.tree.tree_cost`), so a plan sliced to a limit runs
under it.  :func:`fit_plan` plans for the per-slice limit of a query's
resolved options (:func:`tnsim.execution.options.resolve_options`: the
argument, else the enclosing ``run_options`` block's, else half of the
available memory, divided among local workers).
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np

from tnsim.errors import ResourceLimitError
from tnsim.execution.options import QueryOptions, current_options
from tnsim.execution.steps import compile_tree, peak_memory
from tnsim.network.graph import TensorGraph
from tnsim.plan.driver import Plan, make_plan
from tnsim.units import format_bytes

__all__ = [
    "MAX_SLICES",
    "check_slices",
    "fit_plan",
    "kept_plan",
    "plan_peak_memory",
    "smallest_limit",
]

MAX_SLICES = 2**24
"""Most slices a run may have: a plan sliced further is refused, naming the smallest memory
limit that keeps its tree within this many.  Each slice runs every step of its tree, a few
microseconds each at least (``benchmarks/scaling.py overhead``), so 2**24 slices of a
500-step tree already take about a day; the sliced runs measured in this project had at
most 2**13 slices."""


def plan_peak_memory(network: TensorGraph, plan: Plan) -> int:
    """Bytes of intermediates the executor needs for one slice of ``plan``."""
    steps = compile_tree(plan.tree, plan.sliced)
    return peak_memory(plan.tree, steps, np.dtype(network.dtype).itemsize)


def fit_plan(network: TensorGraph, options: QueryOptions, *, seed: int = 0) -> Plan:
    """Return a plan whose slices run within the options' limit by the executor's count.

    Parameters
    ----------
    network : TensorGraph
        The (simplified) network.
    options : QueryOptions
        The query's resolved options; the plan is made for ``options.slice_limit``
        (the memory limit divided among local worker processes running at once).
    seed : int
        Passed to the planner.

    Raises
    ------
    ResourceLimitError
        If no plan fits; the message gives a limit that works.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> from tnsim.execution.options import resolve_options
    >>> from tnsim.network.builders import amplitude_network
    >>> tn = amplitude_network(Circuit(2).h(0).cx(0, 1), "11")
    >>> plan_peak_memory(tn, fit_plan(tn, resolve_options("1MiB"))) <= 2**20
    True
    """
    budget = options.block.time_budget
    plan = kept_plan(
        network,
        lambda: make_plan(network, memory_limit=options.slice_limit, seed=seed, time_budget=budget),
    )
    check_slices(plan, options.slice_limit)
    return plan


def kept_plan(network: TensorGraph, make: Callable[[], Plan]) -> Plan:
    """The plan of ``network`` in the enclosing run-options block: kept, or ``make()``.

    Inside a :func:`tnsim.execution.options.run_options` block with a checkpoint
    folder or plan files, the plan is taken from them when they hold one for
    this very network (:class:`tnsim.execution.keptplans.PlanKeeper`) -- a
    resumed run never plans again -- and a new plan is kept there before it
    runs.  Elsewhere this is ``make()``.
    """
    keeper = current_options().plans
    return make() if keeper is None else keeper.plan(network, make)


def smallest_limit(plan: Plan, max_slices: int | None = None) -> int:
    """Bytes the executor needs for one slice of ``plan``'s tree cut into at most ``max_slices``.

    (Default :data:`MAX_SLICES`.)  The plan's sliced labels are taken in the
    order the slicer chose them, as many as keep the count within ``max_slices``.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> from tnsim.execution.options import resolve_options
    >>> from tnsim.network.builders import amplitude_network
    >>> tn = amplitude_network(Circuit(2).h(0).cx(0, 1), "11")
    >>> plan = fit_plan(tn, resolve_options())
    >>> smallest_limit(plan) == plan_peak_memory(tn, plan)
    True
    """
    max_slices = MAX_SLICES if max_slices is None else max_slices
    sliced: list[int] = []
    count = 1
    for label in plan.sliced:
        if count * plan.tree.size[label] > max_slices:
            break
        count *= plan.tree.size[label]
        sliced.append(label)
    return peak_memory(plan.tree, compile_tree(plan.tree, sliced), plan.itemsize)


def check_slices(plan: Plan, limit: int) -> None:
    """Refuse a plan with more than :data:`MAX_SLICES` slices, naming a limit that works."""
    if plan.num_slices <= MAX_SLICES:
        return
    need = smallest_limit(plan)
    raise ResourceLimitError(
        f"a memory limit of {format_bytes(limit)} would need {plan.num_slices:.3g} slices, more "
        f"than the {MAX_SLICES:,} tnsim runs; the smallest limit that keeps this plan within "
        f"that is {format_bytes(need)} ({need} bytes): raise --memory/memory_limit to at "
        f"least that (log2 of the slice count: {math.log2(plan.num_slices):.1f})"
    )
