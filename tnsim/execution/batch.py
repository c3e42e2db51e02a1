"""One network, many fixings of some of its legs: contract the common part once.

A batch of questions that differ only in the values of a few legs (the
output bits of a batch of bitstrings, the sampled bits of a batch of shots)
is one network with a *batch label* ``s``: each varying leg ``l`` gets a
one-hot tensor ``E[s, l]`` holding the chosen bit of every member of the
batch.  The network is simplified and planned once; the steps of the tree
that do not depend on any ``E`` are contracted once and kept, and only the
steps above the ``E`` leaves are redone for each chunk of the batch.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable, Sequence

import numpy as np

from tnsim.execution.options import ContractionRecord, QueryOptions, resolve_options
from tnsim.execution.slices import execute
from tnsim.execution.steps import apply_step, compile_tree, count_flops, largest_intermediate
from tnsim.execution.timemodel import plan_for_runs
from tnsim.fitted import BATCH_ELEMENTS
from tnsim.network.graph import TensorGraph
from tnsim.network.scaled import SLACK, Scaled, normalize, normalize_owned
from tnsim.network.simplify import absorb_small
from tnsim.plan.driver import PairTree, Plan, make_plan
from tnsim.plan.vectors import plan_vectors_first

__all__ = ["BatchContraction", "fitted_engine"]


class BatchContraction:
    """Plan a network once with some legs fixed per batch member; run chunk by chunk.

    Parameters
    ----------
    network : TensorGraph
        The network with every varying leg and every kept leg in its output.
    batch_labels : sequence of int
        Output labels whose values are given per batch member (each size 2).
    open_labels : sequence of int
        Output labels kept open in the result.
    chunk : int
        Batch members per run (shorter runs are padded).
    options : QueryOptions, optional
        The query's resolved options (default :func:`~tnsim.execution.options.resolve_options`
        ``()``): plans are made for ``options.slice_limit``, sliced runs checked
        against ``options.memory_limit``.
    plan : Plan, optional
        The plan of one batch member, from an engine built on the same network
        (its ``plan`` attribute), to change ``chunk`` without planning again.
    runs : float, optional
        Batch members expected in all: the plan search grows with their
        forecast run time (:func:`tnsim.execution.timemodel.plan_for_runs`).

    Examples
    --------
    >>> from tnsim import Circuit
    >>> from tnsim.network.builders import amplitude_network
    >>> c = Circuit(2).h(0).cx(0, 1)
    >>> tn = amplitude_network(c, None, open_qubits=[0, 1])
    >>> engine = BatchContraction(tn, tn.output, (), chunk=4)
    >>> np.round(engine.run(np.array([[0, 0], [1, 1], [0, 1]])).value(), 6)
    array([0.707107+0.j, 0.707107+0.j, 0.      +0.j])
    """

    def __init__(
        self,
        network: TensorGraph,
        batch_labels: Sequence[int],
        open_labels: Sequence[int],
        chunk: int,
        options: QueryOptions | None = None,
        plan: Plan | None = None,
        runs: float | None = None,
    ):
        self.options = resolve_options() if options is None else options
        self.batch_labels = tuple(batch_labels)
        self.chunk = int(chunk)
        base = absorb_small(network)
        self.dtype = base.dtype
        labels = set(base.size) | set(network.output)
        s = max(labels, default=-1) + 1
        inputs = list(base.indices) + [(s, lab) for lab in self.batch_labels]
        size = dict(base.size)
        size[s] = self.chunk
        for lab in self.batch_labels:
            size[lab] = 2
        eye = np.eye(2, dtype=self.dtype)
        leaves = [eye[np.zeros(self.chunk, np.intp)] for _ in self.batch_labels]
        self.network = TensorGraph(
            list(base.arrays) + leaves,
            inputs,
            size,
            (s, *tuple(open_labels)),
            base.exponent,
            self.dtype,
        )
        self.num_fixed = len(base.arrays)
        # Plan the network of one batch member (the E leaves as plain vectors): a planner
        # that saw the batch label shared by every E leaf would join those leaves first.
        single = TensorGraph(
            self.network.arrays,
            [tuple(i for i in ix if i != s) for ix in inputs],
            base.size | dict.fromkeys(self.batch_labels, 2),
            tuple(open_labels),
            base.exponent,
            self.dtype,
        )
        if plan is None:
            vectors = range(self.num_fixed, self.num_fixed + len(self.batch_labels))
            plan = plan_vectors_first(single, vectors, _planner(self.options.slice_limit, runs))
        self.plan = plan
        self.tree = PairTree(tuple(inputs), self.network.output, size, plan.tree.path)
        self.sliced = tuple(plan.sliced)
        self.cached: dict[int, tuple[np.ndarray, int]] | None = None
        self.steps = compile_tree(self.tree, self.sliced)
        n = self.tree.num_leaves
        self.varying = [k >= self.num_fixed for k in range(n)]
        for x, y in self.tree.path:
            self.varying.append(self.varying[x] or self.varying[y])

    def flops(self) -> tuple[int, int]:
        """Real FLOPs of the part done once and of the part redone per run (per slice)."""
        if self.sliced:  # sliced plans redo every step for every slice of every run
            return 0, count_flops(self.steps) << len(self.sliced)
        n = self.tree.num_leaves
        fixed = [s for s, v in zip(self.steps, self.varying[n:]) if not v]
        per_run = [s for s, v in zip(self.steps, self.varying[n:]) if v]
        return count_flops(fixed), count_flops(per_run)

    def written_per_run(self) -> int:
        """Elements of intermediates written per run (every slice), for the time model."""
        n = self.tree.num_leaves
        if self.sliced:
            return sum(math.prod(s.out_shape) for s in self.steps) << len(self.sliced)
        varying = zip(self.steps, self.varying[n:])
        return sum(math.prod(s.out_shape) for s, v in varying if v)

    def _contract_fixed(self) -> dict[int, tuple[np.ndarray, int]]:
        """Contract every step that no batch leaf feeds; keep what later steps need."""
        tree = self.tree
        n = tree.num_leaves
        nodes: dict[int, tuple[np.ndarray, int]] = {
            k: (self.network.arrays[k], 0) for k in range(self.num_fixed)
        }
        for k, ((x, y), step) in enumerate(zip(tree.path, self.steps)):
            if not self.varying[n + k]:
                (a, ea), (b, eb) = nodes.pop(x), nodes.pop(y)
                c, e = normalize_owned(apply_step(step, a, b), SLACK)
                nodes[n + k] = (c, ea + eb + e)
        self.cached = nodes
        return nodes

    def _leaves(self, values: np.ndarray) -> list[np.ndarray]:
        eye = np.eye(2, dtype=self.dtype)
        padded = np.zeros((self.chunk, len(self.batch_labels)), dtype=np.intp)
        padded[: len(values)] = values
        return [eye[padded[:, j]] for j in range(len(self.batch_labels))]

    def run(self, values: np.ndarray) -> Scaled:
        """Contract for up to ``chunk`` batch members.

        Parameters
        ----------
        values : numpy.ndarray
            ``(count, len(batch_labels))`` array of 0/1, ``count <= chunk``.

        Returns
        -------
        Scaled
            Axes: the batch member (``count`` long), then the open labels.
        """
        values = np.asarray(values)
        count = len(values)
        if count > self.chunk:
            raise ValueError(f"at most {self.chunk} batch members per run, got {count}")
        leaves = self._leaves(values)
        if self.sliced:
            net = self.network
            full = TensorGraph(
                list(net.arrays[: self.num_fixed]) + leaves,
                net.indices,
                net.size,
                net.output,
                net.exponent,
                net.dtype,
            )
            out = execute(full, self.tree, self.sliced, memory_limit=self.options.memory_limit)
            return Scaled(out.mantissa[:count], out.exponent)
        return self._run_cached(leaves, count)

    def _run_cached(self, leaves: list[np.ndarray], count: int) -> Scaled:
        began = time.perf_counter()
        first = self.cached is None
        cached = self._contract_fixed() if self.cached is None else self.cached
        result = self._contract_varying(cached, leaves, count)
        if self.options.log is not None:  # run statistics (tnsim ... --stats)
            fixed, per_run = self.flops()
            self.options.log.append(
                ContractionRecord(
                    flops=per_run + (fixed if first else 0),
                    num_slices=1,
                    slices_run=1,
                    peak_bytes=largest_intermediate(self.steps) * self.dtype.itemsize * 3,
                    memory_limit=self.options.slice_limit,
                    workers=1,
                    seconds=time.perf_counter() - began,
                    itemsize=self.dtype.itemsize,
                )
            )
        return result

    def _contract_varying(self, cached: dict, leaves: list[np.ndarray], count: int) -> Scaled:
        """The steps a batch leaf feeds, on the cached values of the others."""
        tree = self.tree
        n = tree.num_leaves
        nodes = dict(cached)
        for k, leaf in enumerate(leaves):
            nodes[self.num_fixed + k] = (leaf, 0)
        labels = list(tree.inputs)
        for k, ((x, y), step) in enumerate(zip(tree.path, self.steps)):
            labels.append(step.out_labels)
            if not self.varying[n + k]:
                continue
            (a, ea), (b, eb) = nodes.pop(x), nodes.pop(y)
            c, e = normalize_owned(apply_step(step, a, b), SLACK)
            nodes[n + k] = (c, ea + eb + e)
        root_id = n + len(tree.path) - 1 if tree.path else 0
        root, exponent = nodes[root_id]
        final = labels[root_id]
        extra = tuple(k for k, i in enumerate(final) if i not in tree.output)
        if extra:
            root = root.sum(axis=extra)
            final = tuple(i for i in final if i in tree.output)
        root = root.transpose([final.index(i) for i in tree.output])
        root, e = normalize(np.ascontiguousarray(root[:count]))
        return Scaled(root, exponent + e + self.network.exponent)


def _planner(memory_limit: int, runs: float | None) -> Callable[[TensorGraph], Plan]:
    """The planner of a batch member's network: searched longer for many ``runs``."""
    if runs is not None:
        return lambda net: plan_for_runs(net, runs, memory_limit=memory_limit)
    return lambda net: make_plan(net, memory_limit=memory_limit)


def fitted_engine(
    network: TensorGraph,
    batch_labels: Sequence[int],
    open_labels: Sequence[int],
    chunk: int,
    options: QueryOptions,
    *,
    least: int = 1,
    plan: Plan | None = None,
    runs: float | None = None,
) -> BatchContraction:
    """A :class:`BatchContraction` whose chunk is halved (not below ``least``) to fit.

    The chunk shrinks until three copies of the largest intermediate of a run
    (operands' copies and the result) fit ``options.memory_limit`` bytes and the
    largest intermediate redone per run has at most :data:`~tnsim.fitted.BATCH_ELEMENTS`
    elements; the plan of one batch member is made once and reused.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> from tnsim.network.builders import amplitude_network
    >>> tn = amplitude_network(Circuit(3).h(0).cx(0, 1).cx(1, 2), None, open_qubits=[0, 1, 2])
    >>> fitted_engine(tn, tn.output, (), 64, resolve_options(16 * 3 * 64)).chunk
    16
    """
    while True:
        engine = BatchContraction(network, batch_labels, open_labels, chunk, options, plan, runs)
        need = largest_intermediate(engine.steps) * engine.dtype.itemsize * 3
        n = engine.tree.num_leaves
        redone = [s for s, v in zip(engine.steps, engine.varying[n:]) if v]
        if chunk <= least or (
            need <= options.memory_limit and largest_intermediate(redone) <= BATCH_ELEMENTS
        ):
            return engine
        chunk, plan = max(least, chunk // 2), engine.plan
