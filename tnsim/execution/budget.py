"""Plans that fit the memory limit of a run.

The planner counts memory as the executor allocates it (operand copies
included, :func:`tnsim.plan.tree.tree_cost`), so a plan sliced to a limit runs
under it.  :func:`fit_plan` resolves the limit a query runs under (the
argument, else the enclosing :func:`tnsim.execution.options.run_options` block's, else
half of the available memory, divided among local workers) and plans for it.
"""

from __future__ import annotations

import numpy as np

from tnsim.execution.options import slice_memory_limit
from tnsim.execution.steps import compile_tree, peak_memory
from tnsim.network.graph import TensorGraph
from tnsim.plan.driver import Plan, make_plan

__all__ = ["fit_plan", "plan_peak_memory"]


def plan_peak_memory(network: TensorGraph, plan: Plan) -> int:
    """Bytes of intermediates the executor needs for one slice of ``plan``."""
    steps = compile_tree(plan.tree, plan.sliced)
    return peak_memory(plan.tree, steps, np.dtype(network.dtype).itemsize)


def fit_plan(network: TensorGraph, memory_limit: int | str | None = None, *, seed: int = 0) -> Plan:
    """Return a plan whose slices run within ``memory_limit`` by the executor's count.

    Parameters
    ----------
    network : TensorGraph
        The (simplified) network.
    memory_limit : int or str, optional
        Bytes or text such as ``"4GiB"``; default the enclosing
        :func:`tnsim.execution.options.run_options` block's, else half of the available
        memory.  Divided among local worker processes running at once.
    seed : int
        Passed to the planner.

    Raises
    ------
    ResourceLimitError
        If no plan fits; the message gives a limit that works.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> from tnsim.network.builders import amplitude_network
    >>> tn = amplitude_network(Circuit(2).h(0).cx(0, 1), "11")
    >>> plan_peak_memory(tn, fit_plan(tn, "1MiB")) <= 2**20
    True
    """
    return make_plan(network, memory_limit=slice_memory_limit(memory_limit), seed=seed)
