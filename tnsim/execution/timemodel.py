"""The time model: how long a plan will run on this machine, and planning for many runs.

A forecast has two parts (:func:`forecast_run`):

* *compute*: the FLOPs run, plus a fitted cost per element of intermediates
  written (:data:`tnsim.fitted.WRITE_FLOPS`), at this machine's measured
  matmul rate (:func:`tnsim.execution.rate.matmul_rate`);
* *fixed*: the steps run -- every step of the tree once per slice, less the
  slice-invariant ones done once (:mod:`tnsim.execution.invariant`) -- times
  the fixed cost of a step measured here (:func:`tnsim.execution.stepcost.step_seconds`:
  Python, numpy calls, tiny products).  With thousands of slices of small
  intermediates this part can be most of the run.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from tnsim.execution.invariant import choose_frontier, reduced_cost, steps_below
from tnsim.execution.memory import default_memory_limit
from tnsim.execution.rate import matmul_rate
from tnsim.execution.stepcost import step_seconds
from tnsim.execution.steps import compile_tree
from tnsim.fitted import WRITE_FLOPS
from tnsim.network.graph import TensorGraph
from tnsim.plan.driver import Plan, make_plan
from tnsim.plan.tree import PairTree
from tnsim.units import parse_memory

__all__ = [
    "RunForecast",
    "elements_written",
    "fixed_seconds",
    "forecast_run",
    "forecast_seconds",
    "plan_for_runs",
]


@dataclass(frozen=True)
class RunForecast:
    """What running a plan will take here, its two parts apart (see the module notes).

    Attributes
    ----------
    flops : int
        Real FLOPs run: ``once_flops + slice_flops * num_slices``.
    once_flops : int
        FLOPs of the slice-invariant subtrees, contracted once.
    slice_flops : int
        FLOPs run per slice.
    num_slices : int
        Slices.
    steps_per_slice : int
        Pairwise steps run per slice.
    written : int
        Elements of intermediates written in all.
    flop_rate : float
        Measured matmul rate, real FLOP/s.
    step_seconds : float
        Measured fixed cost of one step, seconds.
    compute_seconds : float
        ``(flops + WRITE_FLOPS * written) / flop_rate``.
    fixed_seconds : float
        ``num_slices * steps_per_slice * step_seconds`` (plus the once-run steps).
    """

    flops: int
    once_flops: int
    slice_flops: int
    num_slices: int
    steps_per_slice: int
    written: int
    flop_rate: float
    step_seconds: float
    compute_seconds: float
    fixed_seconds: float

    @property
    def seconds(self) -> float:
        """The forecast run time: compute plus fixed cost."""
        return self.compute_seconds + self.fixed_seconds


def forecast_run(
    tree: PairTree,
    sliced: Sequence[int] = (),
    dtype=np.complex128,
    *,
    memory_limit: int | str | None = None,
    reuse: bool = True,
) -> RunForecast:
    """Forecast one serial run of a plan as :func:`tnsim.execution.slices.execute` runs it.

    The slice-invariant subtrees kept are chosen as the run chooses them,
    under ``memory_limit`` (default: half of the available memory).

    Examples
    --------
    Slicing label 0 leaves the first step (tensors 1 and 2) the same in both slices:

    >>> tree = PairTree(((0, 1), (1, 2), (2, 3)), (), dict.fromkeys(range(4), 2), ((1, 2), (0, 3)))
    >>> r = forecast_run(tree, [0])
    >>> r.num_slices, r.steps_per_slice, r.once_flops, r.slice_flops
    (2, 1, 32, 16)
    """
    dt = np.dtype(dtype)
    sliced = tuple(sliced)
    steps = compile_tree(tree, sliced)
    num_slices = math.prod(tree.size[i] for i in sliced)
    limit = default_memory_limit() if memory_limit is None else parse_memory(memory_limit)
    nodes = []
    if reuse and sliced:
        nodes = choose_frontier(tree, steps, sliced, dt.itemsize, limit)
    once, per_slice, count = reduced_cost(tree, steps, nodes)
    sizes = [math.prod(s.out_shape) for s in steps]
    once_steps = len(steps) - count
    per_written = sum(sizes)
    if nodes:
        kept = set(steps_below(tree, nodes))
        per_written = sum(v for k, v in enumerate(sizes) if k not in kept)
    once_written = sum(sizes) - per_written
    flops = once + per_slice * num_slices
    written = once_written + per_written * num_slices
    rate = matmul_rate(dt)
    each = step_seconds(dt)
    return RunForecast(
        flops=flops,
        once_flops=once,
        slice_flops=per_slice,
        num_slices=num_slices,
        steps_per_slice=count,
        written=written,
        flop_rate=rate,
        step_seconds=each,
        compute_seconds=forecast_seconds(flops, written, rate),
        fixed_seconds=(count * num_slices + once_steps) * each,
    )


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
    """The fixed time of a plan's steps: every step once per slice, at the cost measured here.

    (:func:`tnsim.execution.stepcost.step_seconds`; an upper bound when slices share
    slice-invariant work, which :func:`forecast_run` counts once.)

    Examples
    --------
    >>> from tnsim.circuits import Circuit
    >>> from tnsim.network.builders import amplitude_network
    >>> p = make_plan(amplitude_network(Circuit(2).h(0).cx(0, 1), "11"))
    >>> fixed_seconds(p) == step_seconds() * len(p.tree.path)
    True
    """
    dtype = np.complex64 if p.itemsize == 8 else np.complex128
    return step_seconds(dtype) * len(p.tree.path) * p.num_slices


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
