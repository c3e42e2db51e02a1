"""The time model: how long a plan will run on this machine, and planning for many runs.

A forecast divides the plan's FLOPs, plus a fitted cost per element of
intermediates written (:data:`tnsim.fitted.WRITE_FLOPS`), by this
machine's measured matmul rate (:func:`tnsim.execution.rate.matmul_rate`).
"""

from __future__ import annotations

from tnsim.execution.rate import matmul_rate
from tnsim.fitted import STEP_SECONDS, WRITE_FLOPS
from tnsim.network.graph import TensorGraph
from tnsim.plan.driver import Plan, make_plan

__all__ = ["elements_written", "fixed_seconds", "forecast_seconds", "plan_for_runs"]


def elements_written(p: Plan) -> int:
    """Elements of intermediates a plan writes, all slices together."""
    return sum(p.tree.intermediate_sizes(p.sliced)) * p.num_slices


def forecast_seconds(flops: int, written: int, rate: float) -> float:
    """Forecast run time of ``flops`` and ``written`` elements at ``rate`` FLOP/s.

    The FLOPs plus :data:`~tnsim.fitted.WRITE_FLOPS` per element written,
    at the measured matmul rate (:func:`matmul_rate`).

    Examples
    --------
    >>> forecast_seconds(10**9, 10**6, 1e9) == 1 + WRITE_FLOPS / 1000
    True
    """
    return (flops + WRITE_FLOPS * written) / rate


def fixed_seconds(p: Plan) -> float:
    """The per-step Python time of a plan's run: :data:`~tnsim.fitted.STEP_SECONDS` per step.

    (Per step and slice.)

    Examples
    --------
    >>> from tnsim.circuits import Circuit
    >>> from tnsim.network.builders import amplitude_network
    >>> p = make_plan(amplitude_network(Circuit(2).h(0).cx(0, 1), "11"))
    >>> fixed_seconds(p) == STEP_SECONDS * len(p.tree.path)
    True
    """
    return STEP_SECONDS * len(p.tree.path) * p.num_slices


def plan_for_runs(network: TensorGraph, runs: float, *, memory_limit: int | None = None) -> Plan:
    """Plan a network that will be contracted about ``runs`` times.

    The planner's default plan is forecast (:func:`forecast_seconds` of its
    FLOPs and elements written) for ``runs`` contractions; when
    :data:`PLAN_SHARE` of that forecast exceeds :data:`MIN_PLAN_SECONDS`, the
    planner searches again for that long (at most :data:`MAX_PLAN_SECONDS`)
    and the plan with the shorter forecast is returned.

    Examples
    --------
    >>> from tnsim.circuits import Circuit
    >>> from tnsim.network.builders import amplitude_network
    >>> net = amplitude_network(Circuit(2).h(0).cx(0, 1), "11")
    >>> plan_for_runs(net, 1).flops > 0
    True
    """
    rate = matmul_rate(network.dtype)

    def forecast(p: Plan) -> float:
        return runs * forecast_seconds(p.flops, elements_written(p), rate)

    first = make_plan(network, memory_limit=memory_limit)
    seconds = PLAN_SHARE * forecast(first)
    if seconds <= MIN_PLAN_SECONDS:
        return first
    budget = min(seconds, MAX_PLAN_SECONDS)
    second = make_plan(network, memory_limit=memory_limit, time_budget=budget)
    return min(first, second, key=forecast)


PLAN_SHARE = 0.1


"""Share of the forecast run time of many contractions spent searching for a better plan."""


MIN_PLAN_SECONDS = 0.2


"""Below this search time the planner's default plan is kept."""


MAX_PLAN_SECONDS = 10.0


"""Longest search of :func:`plan_for_runs`."""
