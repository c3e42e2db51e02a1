"""Plans that fit the executor's memory accounting.

The planner (:func:`tnsim.plan.make_plan`) slices a plan until its live
intermediates fit a memory limit.  The executor also holds, within a step, the
reordered copy of an operand next to the operand itself
(:func:`tnsim.execute.peak_memory`), so its peak is somewhat above the
planner's count.  :func:`fit_plan` asks the planner for a smaller limit until
the executor's own count fits, so the plan it returns runs under the limit.
"""

from __future__ import annotations

import numpy as np

from .errors import ResourceLimitError
from .execute import compile_tree, peak_memory
from .memory import format_bytes
from .network import TensorNetwork
from .plan import Plan, make_plan
from .runconfig import slice_memory_limit

__all__ = ["fit_plan", "plan_peak_memory"]

#: Attempts at shrinking the planner's limit before giving up.
ATTEMPTS = 6


def plan_peak_memory(network: TensorNetwork, plan: Plan) -> int:
    """Bytes of intermediates the executor needs for one slice of ``plan``."""
    steps = compile_tree(plan.tree, plan.sliced)
    return peak_memory(plan.tree, steps, np.dtype(network.dtype).itemsize)


def fit_plan(
    network: TensorNetwork, memory_limit: int | str | None = None, *, seed: int = 0
) -> Plan:
    """Return a plan whose slices run within ``memory_limit`` by the executor's count.

    Parameters
    ----------
    network : TensorNetwork
        The (simplified) network.
    memory_limit : int or str, optional
        Bytes or text such as ``"4GiB"``; default the enclosing
        :func:`tnsim.runconfig.run_options` block's, else half of the available
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
    >>> from tnsim.network import amplitude_network
    >>> tn = amplitude_network(Circuit(2).h(0).cx(0, 1), "11")
    >>> plan_peak_memory(tn, fit_plan(tn, "1MiB")) <= 2**20
    True
    """
    limit = slice_memory_limit(memory_limit)
    budget, best = limit, None
    for _ in range(ATTEMPTS):
        try:
            plan = make_plan(network, memory_limit=budget, seed=seed)
        except ResourceLimitError:
            if best is None:
                raise
            break
        need = plan_peak_memory(network, plan)
        if need <= limit:
            return plan
        best = need if best is None else min(best, need)
        budget = min(budget - 1, budget * limit // need)
        if budget < 1:
            break
    raise ResourceLimitError(
        f"no plan fits the memory limit of {format_bytes(limit)} ({limit} bytes) once the "
        f"executor's reordering copies are counted; the best plan found needs "
        f"{format_bytes(best)} ({best} bytes) per running slice: give at least that"
    )
