"""The fixed cost of one pairwise step on this machine: Python, numpy calls, tiny products.

A sliced contraction runs every remaining step once per slice; with
thousands of slices of small intermediates this fixed cost -- not the FLOPs --
can be most of the run.  :func:`step_seconds` measures it here, once per
machine (a few milliseconds; kept in the cache file of the matmul rates, so
every process forecasts alike; ``tnsim calibrate`` measures it again): the
seconds per step of contracting the slices of a small sliced network of tiny
tensors through the executor's own code
(:func:`tnsim.execution.slices.contract_slices`: slicing the leaves, the
steps, rescaling, adding the slices).
"""

from __future__ import annotations

import time

import numpy as np

from tnsim.execution.rate import stored_measurement
from tnsim.execution.slices import SliceJob, contract_slices
from tnsim.execution.steps import compile_tree
from tnsim.network.graph import TensorGraph
from tnsim.plan.greedy import greedy_tree

__all__ = ["step_seconds"]


def _ladder(length: int, dtype) -> TensorGraph:
    """Two rows of rank-3 tensors of dimension 2 joined by rungs: small tensors as in circuits."""
    rng = np.random.default_rng(0)
    indices: list[tuple[int, ...]] = []
    for k in range(length):
        indices.append((k, k + 1, 2 * length + k))  # top row, rung k
        indices.append((length + 1 + k, length + 2 + k, 2 * length + k))  # bottom row
    arrays = [
        ((rng.standard_normal((2, 2, 2)) + 1j * rng.standard_normal((2, 2, 2))) / 2).astype(dtype)
        for _ in indices
    ]
    labels = {i for ix in indices for i in ix}
    return TensorGraph(arrays, indices, dict.fromkeys(labels, 2), (), 0, np.dtype(dtype))


def step_seconds(dtype=np.complex128, *, refresh: bool = False) -> float:
    """Seconds of fixed cost per pairwise step of a sliced contraction, measured here.

    Best of five runs over the 8 slices of a 120-tensor network (about a
    thousand steps in all); measured once per machine and dtype and kept with
    the matmul rates (:func:`tnsim.execution.rate.stored_measurement`).

    Examples
    --------
    >>> 0 < step_seconds() < 0.01
    True
    >>> step_seconds() == step_seconds("complex128")
    True
    """
    name = np.dtype(dtype).name
    return stored_measurement(f"step-seconds-{name}", lambda: _measure(name), refresh=refresh)


def _measure(dtype: str) -> float:
    network = _ladder(60, np.dtype(dtype))  # 120 tensors
    tree = greedy_tree(network.indices, network.output, network.size)
    sliced = (20, 40, 121)  # two bonds of the top row and a rung
    steps = len(compile_tree(tree, sliced))
    job = SliceJob(tuple(network.arrays), tree, sliced)
    slices = 2 ** len(sliced)
    contract_slices(job, 0, 1)  # compile once, as a worker does
    best = float("inf")
    for _ in range(5):
        start = time.perf_counter()
        contract_slices(job, 0, slices)
        best = min(best, time.perf_counter() - start)
    return best / (slices * max(steps, 1))
