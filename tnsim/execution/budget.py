"""Plans that fit the memory limit of a run.

The planner counts memory as the executor allocates it (operand copies
included, :func:`tnsim.plan.tree.tree_cost`), so a plan sliced to a limit runs
under it.  :func:`fit_plan` plans for the per-slice limit of a query's
resolved options (:func:`tnsim.execution.options.resolve_options`: the
argument, else the enclosing ``run_options`` block's, else half of the
available memory, divided among local workers).
"""

from __future__ import annotations

import numpy as np

from tnsim.execution.options import QueryOptions
from tnsim.execution.steps import compile_tree, peak_memory
from tnsim.network.graph import TensorGraph
from tnsim.plan.driver import Plan, make_plan

__all__ = ["fit_plan", "plan_peak_memory"]


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
    return make_plan(network, memory_limit=options.slice_limit, seed=seed)
