"""The slice loop: contract a planned network one slice at a time, under a memory limit.

:func:`execute` checks the plan's peak memory against the limit before
anything large is allocated, splits the slices into chunks of consecutive
slices (:func:`tnsim.execution.executors.chunk_bounds`), runs the chunks
serially, on local worker processes or on any executor, records finished
chunks in a checkpoint, and adds the chunk sums in a fixed order -- so serial,
pooled, distributed and resumed runs agree bit for bit.
"""

from __future__ import annotations

import math
import os
import time
from collections.abc import Callable, Sequence
from concurrent.futures import Executor
from dataclasses import dataclass, replace

import numpy as np

from tnsim.errors import InputError, ResourceLimitError
from tnsim.execution.backends import get_backend
from tnsim.execution.checkpoint import Checkpoint, OrderedSum, run_fingerprint
from tnsim.execution.executors import SliceError, chunk_bounds, local_workers, run_chunks
from tnsim.execution.invariant import (
    choose_frontier,
    node_labels,
    precompute,
    reduce_tree,
    reduced_cost,
)
from tnsim.execution.keptplans import start_afresh
from tnsim.execution.options import ContractionRecord, MemoryLimit, Progress, resolve_options
from tnsim.execution.progress import SliceProgress
from tnsim.execution.steps import PairStep, compile_tree, count_flops, peak_memory
from tnsim.execution.treerun import contract_tree
from tnsim.execution.workspace import Workspace, plan_workspace
from tnsim.network.graph import TensorGraph
from tnsim.network.scaled import Scaled
from tnsim.plan.store import network_fingerprint
from tnsim.plan.tree import PairTree
from tnsim.units import format_bytes

__all__ = ["SliceJob", "contract_slices", "execute", "release_workspace"]


def _slicer(
    indices: Sequence[Sequence[int]], sliced: Sequence[int]
) -> list[tuple[int, int, tuple[tuple[int, int], ...]]]:
    """For each leaf holding sliced labels: (leaf, its rank, (axis, sliced position) pairs)."""
    where = {label: k for k, label in enumerate(sliced)}
    out = []
    for leaf, ix in enumerate(indices):
        axes = tuple((a, where[i]) for a, i in enumerate(ix) if i in where)
        if axes:
            out.append((leaf, len(ix), axes))
    return out


def _slice_arrays(
    arrays: Sequence[np.ndarray], slicer, values: Sequence[int | np.integer]
) -> list[np.ndarray]:
    """The leaves of one slice: views of the arrays with the sliced axes fixed to ``values``."""
    out = list(arrays)
    for leaf, rank, axes in slicer:
        key: list = [slice(None)] * rank
        for axis, k in axes:
            key[axis] = int(values[k])
        out[leaf] = arrays[leaf][tuple(key)]
    return out


@dataclass(frozen=True)
class SliceJob:
    """Everything a worker needs to contract slices: arrays, tree, sliced labels.

    Sent once to each worker process; :func:`contract_slices` runs a chunk of it.
    With slice-invariant reuse (:mod:`tnsim.execution.invariant`) the tree is
    the reduced one, some of its leaves are precomputed intermediates, and
    ``exponent`` is their power-of-two scale, added to every slice.  ``room``
    is the bytes a worker may keep for buffers its slices reuse
    (:mod:`tnsim.execution.workspace`; 0: none).
    """

    arrays: tuple[np.ndarray, ...]
    tree: PairTree
    sliced: tuple[int, ...]
    backend: str = "numpy"
    exponent: int = 0
    room: int = 0

    @property
    def dims(self) -> tuple[int, ...]:
        """Sizes of the sliced labels."""
        return tuple(self.tree.size[i] for i in self.sliced)

    def describe(self, k: int) -> str:
        """Name slice ``k``: its number and the value of each sliced label."""
        values = np.unravel_index(k, self.dims) if self.sliced else ()
        fixed = ", ".join(f"label {i}={int(v)}" for i, v in zip(self.sliced, values))
        return f"slice {k} of {math.prod(self.dims)}" + (f" ({fixed})" if fixed else "")


_COMPILED: dict = {}


def _compiled(
    job: SliceJob,
) -> tuple[list[PairStep], list[tuple[int, ...]], list, Workspace | None]:
    """Steps, sliced labels, leaf slicer and workspace of ``job``, made once per worker."""
    if _COMPILED.get("job") is not job:
        _COMPILED.clear()  # the last job's buffers go first
        gone = set(job.sliced)
        labels = [tuple(i for i in ix if i not in gone) for ix in job.tree.inputs]
        steps = compile_tree(job.tree, job.sliced)
        work = None
        if job.room > 0 and job.backend == "numpy" and steps:
            work = plan_workspace(job.tree, steps, job.arrays[0].dtype, job.room)
        _COMPILED.update(
            job=job,
            steps=steps,
            labels=labels,
            slicer=_slicer(job.tree.inputs, job.sliced),
            work=work,
        )
    return _COMPILED["steps"], _COMPILED["labels"], _COMPILED["slicer"], _COMPILED["work"]


def release_workspace() -> None:
    """Drop this process's compiled job and its buffers (after a run)."""
    _COMPILED.clear()


def contract_slices(job: SliceJob, start: int, stop: int) -> Scaled:
    """Return the sum of slices ``start .. stop-1`` of ``job``, added in slice order.

    Raises
    ------
    SliceError
        If a slice fails; the message names the slice.
    """
    steps, labels, slicer, work = _compiled(job)
    total: Scaled | None = None
    for k in range(start, stop):
        try:
            values = np.unravel_index(k, job.dims) if job.sliced else ()
            arrays = _slice_arrays(job.arrays, slicer, values)
            part = contract_tree(
                arrays, job.tree, steps, labels, backend=job.backend, workspace=work
            )
        except Exception as exc:
            raise SliceError(f"{job.describe(k)} failed: {type(exc).__name__}: {exc}") from exc
        if job.exponent:
            part = Scaled(part.mantissa, part.exponent + job.exponent)
        total = part if total is None else total + part
    if total is None:
        raise SliceError(f"empty chunk of slices {start}..{stop - 1}")
    return total


def _check_sliced(network: TensorGraph, sliced: tuple[int, ...]) -> None:
    out = set(network.output)
    for i in sliced:
        if i not in network.size or i in out:
            raise InputError(
                f"cannot slice label {i}: it is {'an output' if i in out else 'not a'} label "
                "of the network; slice only labels that are summed over"
            )
    if len(set(sliced)) != len(sliced):
        raise InputError(f"sliced labels {sliced} repeat a label; give each label once")


def _check_memory(need: int, limit: int, workers: int) -> None:
    if need * workers <= limit:
        return
    what = f"{workers} worker processes each need" if workers > 1 else "the contraction needs"
    smallest = need * workers
    raise ResourceLimitError(
        f"{what} {format_bytes(need)} of intermediates per slice, above the memory limit "
        f"of {format_bytes(limit)}; the smallest limit that works for this plan is "
        f"{smallest} bytes ({format_bytes(smallest)}): raise --memory/memory_limit to at least "
        "that, use fewer workers, or plan with a smaller limit so more labels are sliced"
    )


def with_reuse(
    job: SliceJob, steps: list[PairStep], itemsize: int, room: int
) -> tuple[SliceJob, int, int]:
    """``job`` with its slice-invariant subtrees contracted once (as many as fit ``room`` bytes).

    Returns the new job, the FLOPs spent on it once, and the FLOPs per slice
    left.  The job is returned unchanged when nothing is invariant, nothing
    fits, the backend is not numpy, or the reduced steps would differ from the
    original ones (then the bits could differ).
    """
    tree, sliced = job.tree, job.sliced
    plain = (job, 0, count_flops(steps))
    if not sliced or job.backend != "numpy":
        return plain
    nodes = choose_frontier(tree, steps, sliced, itemsize, room)
    if not nodes:
        return plain
    reduced = reduce_tree(tree, nodes, node_labels(tree, steps))
    if compile_tree(reduced.tree, sliced) != [steps[s] for s in reduced.steps]:
        return plain
    arrays, exponent = precompute(job.arrays, tree, steps, nodes)
    made = dict(zip(nodes, arrays))
    n = tree.num_leaves
    leaves = tuple(job.arrays[k] if k < n else made[k] for k in reduced.leaves)
    once, per_slice, _ = reduced_cost(tree, steps, nodes)
    return SliceJob(leaves, reduced.tree, sliced, job.backend, exponent), once, per_slice


def _fingerprint(network_key: str, network: TensorGraph, job: SliceJob, bounds) -> str:
    """SHA-256 of everything that fixes the bits of the result: network, plan, chunks, backend."""
    tree = job.tree
    description = {
        "network": network_key,
        "indices": [list(ix) for ix in tree.inputs],
        "output": list(tree.output),
        "size": sorted([int(k), int(v)] for k, v in tree.size.items()),
        "path": [list(p) for p in tree.path],
        "sliced": list(job.sliced),
        "chunks": [list(b) for b in bounds],
        "dtype": np.dtype(network.dtype).str,
        "exponent": int(network.exponent),
        "backend": job.backend,
    }
    return run_fingerprint((), description)


def execute(
    network: TensorGraph,
    tree: PairTree,
    sliced: Sequence[int] = (),
    *,
    memory_limit: MemoryLimit | None = None,
    executor: Executor | None = None,
    workers: int | None = None,
    checkpoint: str | os.PathLike[str] | None = None,
    progress: Progress = None,
    backend: str | None = None,
    chunk_size: int | None = None,
    reuse: bool = True,
) -> Scaled:
    """Contract a network along a tree, summing over the ``sliced`` labels one value at a time.

    Slices are grouped into chunks of consecutive slices
    (:func:`tnsim.execution.executors.chunk_bounds`); each chunk sums its slices in order
    and chunk sums are added in chunk order, so the result is bit-for-bit the
    same for the same plan whatever runs it (serially, a process pool, Dask)
    and however often it was stopped and resumed.

    Options left at ``None`` come from the enclosing
    :func:`tnsim.execution.options.run_options` block, if any
    (:func:`tnsim.execution.options.resolve_options`).

    Parameters
    ----------
    network : TensorGraph
        The network; ``tree.inputs`` must equal ``network.indices``.
    tree : PairTree
        The plan.
    sliced : sequence of int
        Labels fixed to each of their values in turn (not output labels).
    memory_limit : int or str, optional
        Bytes (or text such as ``"4GiB"``) the intermediates of the running
        slices may use; default half of the available memory.  A run that
        would exceed it is refused before it starts.
    executor : concurrent.futures.Executor, optional
        Where chunks run, e.g. ``distributed.Client.get_executor()``.
    workers : int, optional
        Without an executor: size of a local process pool (1 = serial).  By
        default work above 1e11 FLOPs uses every core the memory limit allows.
    checkpoint : path, optional
        File recording finished chunks; a rerun of the same network and plan
        resumes from it (see :mod:`tnsim.execution.checkpoint`).
    progress : bool, None or callable
        Show a progress bar (``None``: only on a terminal, for large work); a
        callable is called as ``progress(chunks_done, num_chunks)`` instead.
    backend : str, optional
        Array library of the contractions (default ``"numpy"``; see
        :mod:`tnsim.execution.backends`).
    chunk_size : int, optional
        Slices per chunk, overriding the automatic choice (changes the rounding
        of the sum, hence the checkpoint fingerprint).
    reuse : bool
        Contract the subtrees no sliced label reaches once, before the first
        slice, and start every slice from them (:mod:`tnsim.execution.invariant`;
        the result is bit for bit the same either way).

    Returns
    -------
    Scaled
        The network's value, including ``network.exponent``.

    Raises
    ------
    ResourceLimitError
        If a slice's intermediates exceed ``memory_limit``.
    CheckpointError
        If ``checkpoint`` is corrupt or belongs to another run.
    SliceError
        If a slice fails (finished chunks stay in the checkpoint).

    Examples
    --------
    >>> from tnsim.plan.driver import greedy_tree
    >>> tn = TensorGraph([np.ones((2, 2)), np.ones((2, 2))], [(0, 1), (1, 2)], {0: 2, 1: 2, 2: 2})
    >>> tree = greedy_tree(tn.indices, tn.output, tn.size)
    >>> complex(execute(tn, tree)), complex(execute(tn, tree, sliced=[1, 2]))
    ((8+0j), (8+0j))
    """
    if len(network.arrays) == 0:
        return Scaled(np.asarray(np.ones((), network.dtype)), network.exponent)
    sliced = tuple(int(i) for i in sliced)
    _check_sliced(network, sliced)
    opts = resolve_options(
        memory_limit,
        executor=executor,
        workers=workers,
        checkpoint=checkpoint,
        progress=progress,
        backend=backend,
    )
    ops = get_backend(opts.backend)
    limit, executor, workers, progress = (
        opts.memory_limit,
        opts.executor,
        opts.workers,
        opts.progress,
    )
    checkpoint = opts.checkpoint_file()
    fresh = None
    if opts.checkpoint is None and checkpoint is not None:
        fresh = start_afresh(opts.block.checkpoint)
    steps = compile_tree(tree, sliced)
    need = peak_memory(tree, steps, np.dtype(network.dtype).itemsize)
    job = SliceJob(tuple(network.arrays), tree, sliced, ops.name)
    num_slices = math.prod(job.dims)
    if num_slices >= 2**62:
        raise ResourceLimitError(
            f"the plan has {num_slices:.3g} slices, more than can be counted in 64 bits "
            "(and far more than can be run); plan with a larger memory limit"
        )
    slice_flops = count_flops(steps)
    run = _Run(network, job, steps, slice_flops, need, limit, executor, workers, progress, reuse)
    if checkpoint is None:
        return run.go(chunk_size, None, opts)
    with Checkpoint.open(checkpoint, fresh) as store:
        return run.go(chunk_size, store, opts)


@dataclass
class _Run:
    """One call of :func:`execute` once its plan is compiled: chunks, workers, the loop."""

    network: TensorGraph
    job: SliceJob
    steps: list[PairStep]
    slice_flops: int
    need: int
    limit: int
    executor: Executor | None
    workers: int | None
    progress: Progress
    reuse: bool

    def go(self, chunk_size: int | None, store: Checkpoint | None, opts) -> Scaled:
        """Chunk, pick the workers, restore the checkpoint, reuse shared work, run."""
        network, job = self.network, self.job
        num_slices = math.prod(job.dims)
        if chunk_size is None and store is not None:
            chunk_size = store.stored_chunk_size
        bounds = chunk_bounds(num_slices, self.slice_flops, chunk_size)
        executor, pool = self._workers(len(bounds), num_slices)
        sums, record = self._sums(store, bounds)
        done = sums.done()
        todo = [i for i in range(len(bounds)) if i not in done]
        began = time.perf_counter()
        once, per_slice = 0, self.slice_flops
        if todo and self.reuse:
            itemsize = np.dtype(network.dtype).itemsize
            job, once, per_slice = with_reuse(job, self.steps, itemsize, self.limit // pool)
        inputs = {id(a) for a in network.arrays}
        kept = sum(a.nbytes for a in job.arrays if id(a) not in inputs)
        job = replace(job, room=max(self.limit // pool - kept, 0))
        done_slices = sum(bounds[i][1] - bounds[i][0] for i in done)
        bar = SliceProgress(
            self.progress, num_slices, len(bounds), per_slice, done_slices, len(done)
        )

        def finished(index: int, value: Scaled) -> None:
            record(index, value)
            bar.advance(bounds[index][1] - bounds[index][0])

        try:
            run_chunks(
                contract_slices,
                job,
                bounds,
                todo,
                finished,
                executor=executor,
                workers=min(pool, max(len(todo), 1)),
            )
        finally:
            bar.close()
            release_workspace()
        total = sums.total()
        if opts.log is not None:
            ran = sum(bounds[i][1] - bounds[i][0] for i in todo)
            opts.log.append(
                ContractionRecord(
                    flops=once + per_slice * ran,
                    num_slices=num_slices,
                    slices_run=ran,
                    peak_bytes=self.need,
                    memory_limit=self.limit,
                    workers=pool,
                    seconds=time.perf_counter() - began,
                    itemsize=np.dtype(network.dtype).itemsize,
                )
            )
        return Scaled(total.mantissa, total.exponent + network.exponent)

    def _workers(self, num_chunks: int, num_slices: int) -> tuple[Executor | None, int]:
        """The executor and the number of processes running slices at once (memory checked)."""
        executor, workers = self.executor, self.workers
        if executor is None and workers is None:
            big = self.slice_flops * num_slices >= 1e11 and num_chunks > 1
            cap = max(1, self.limit // max(self.need, 1))
            workers = min(local_workers(), num_chunks, cap) if big else 1
        pool = 1 if executor is not None else max(1, int(workers or 1))
        _check_memory(self.need, self.limit, pool)
        return executor, pool

    def _sums(self, store: Checkpoint | None, bounds) -> tuple[OrderedSum, Callable]:
        """Where chunk sums go: the checkpoint (bound to this run, restored) or memory."""
        if store is None:
            sums = OrderedSum(len(bounds))
            return sums, sums.add
        key = network_fingerprint(self.network)
        size = bounds[0][1] - bounds[0][0] if bounds else 1
        fingerprint = _fingerprint(key, self.network, self.job, bounds)
        store.bind(fingerprint, key, size, len(bounds), Scaled)
        return store.sums, store.add
