"""Running the chunks of a sliced contraction on an executor.

The slices of a sliced contraction are independent.  They are grouped into
*chunks* of consecutive slices (:func:`chunk_bounds`), and each chunk is one
task that returns the sum of its slices.  The chunking depends only on the
number of slices and their cost, never on the executor or the number of
workers, so the same plan gives bit-for-bit the same result everywhere.

Where the work runs:

- serially in this process (small work, or ``workers=1``);
- a local process pool (``workers=N``, one BLAS thread per process; forked
  when this process runs no other thread, else started with ``spawn``): the
  job (network arrays and plan) is shipped once per worker process through
  the pool's initializer;
- any :class:`concurrent.futures.Executor` given by the caller.  A Dask
  ``Client.get_executor()`` gets the job scattered to every worker once
  (``Client.scatter(..., broadcast=True)``); other executors receive it with each
  task (free for thread pools).
"""

from __future__ import annotations

import contextlib
import math
import multiprocessing
import os
import threading
from collections.abc import Callable, Sequence
from concurrent.futures import Executor, ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool
from typing import Any

from tnsim.errors import TnsimError
from tnsim.execution.blas import set_blas_threads
from tnsim.fitted import CHUNK_FLOPS

__all__ = ["SliceError", "chunk_bounds", "local_workers", "run_chunks"]

#: The most chunks a contraction is split into.
MAX_CHUNKS = 4096


class SliceError(TnsimError):
    """A slice of a contraction failed; the message names the slice."""


def chunk_bounds(
    num_slices: int, slice_flops: float, chunk_size: int | None = None
) -> list[tuple[int, int]]:
    """Split slices ``0 .. num_slices-1`` into chunks of consecutive slices.

    Parameters
    ----------
    num_slices : int
        Number of slices.
    slice_flops : float
        FLOPs of one slice; chunks aim at :data:`~tnsim.fitted.CHUNK_FLOPS` each.
    chunk_size : int, optional
        Slices per chunk, overriding the automatic choice.

    Returns
    -------
    list of (start, stop)

    Examples
    --------
    >>> chunk_bounds(10, 1e9)
    [(0, 2), (2, 4), (4, 6), (6, 8), (8, 10)]
    >>> chunk_bounds(5, 1.0, chunk_size=2)
    [(0, 2), (2, 4), (4, 5)]
    """
    if chunk_size is None:
        chunk_size = math.ceil(CHUNK_FLOPS / max(slice_flops, 1.0))
        chunk_size = max(chunk_size, math.ceil(num_slices / MAX_CHUNKS))
    size = max(1, min(int(chunk_size), max(num_slices, 1)))
    return [(s, min(s + size, num_slices)) for s in range(0, num_slices, size)]


def local_workers() -> int:
    """Return the number of CPU cores this process may use."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:
        return os.cpu_count() or 1


_WORKER_JOB: Any = None


def _install(job: Any) -> None:
    """Process-pool initializer: keep the job for every task of this worker."""
    global _WORKER_JOB
    _WORKER_JOB = job
    set_blas_threads(1)


def _call(fn: Callable, job: Any, start: int, stop: int) -> Any:
    return fn(_WORKER_JOB if job is None else job, start, stop)


def _dask_client(executor: Executor) -> Any:
    client = getattr(executor, "_client", None)
    return client if client is not None and hasattr(client, "scatter") else None


#: Environment of local worker processes: one BLAS thread each, so that
#: ``workers`` processes use ``workers`` cores (as Dask's nanny does).
WORKER_ENV = {"OMP_NUM_THREADS": "1", "MKL_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1"}


def _pool(workers: int, job: Any) -> ProcessPoolExecutor:
    """A pool of ``workers`` processes holding ``job``.

    Forked (instant, nothing to import or pickle) when this process runs no
    other thread, so forking is safe; started with ``spawn`` otherwise.
    """
    forkable = "fork" in multiprocessing.get_all_start_methods()
    method = "fork" if forkable and threading.active_count() == 1 else "spawn"
    ctx = multiprocessing.get_context(method)
    return ProcessPoolExecutor(workers, mp_context=ctx, initializer=_install, initargs=(job,))


@contextlib.contextmanager
def _worker_environment():
    """Set :data:`WORKER_ENV` while worker processes are started (spawned on submit)."""
    saved = {k: os.environ.get(k) for k in WORKER_ENV}
    os.environ.update(WORKER_ENV)
    try:
        yield
    finally:
        for key, value in saved.items():
            if value is None:
                os.environ.pop(key, None)
            else:
                os.environ[key] = value


def _result(future, local: bool) -> Any:
    try:
        return future.result()
    except BrokenProcessPool as exc:
        if not local:
            raise
        raise SliceError(
            f"a local worker process stopped abruptly ({exc}); if this runs from a script, "
            'put the script\'s code under `if __name__ == "__main__":` (worker processes '
            "are started with 'spawn' and import the main module), or use workers=1"
        ) from exc


def run_chunks(
    fn: Callable[[Any, int, int], Any],
    job: Any,
    bounds: Sequence[tuple[int, int]],
    todo: Sequence[int],
    on_result: Callable[[int, Any], None],
    *,
    executor: Executor | None = None,
    workers: int = 1,
) -> None:
    """Run ``fn(job, start, stop)`` for each chunk in ``todo``; report each result.

    Parameters
    ----------
    fn : callable
        A module-level function (it is sent to worker processes by reference).
    job : object
        The data every chunk needs; sent to each worker once where possible.
    bounds : sequence of (start, stop)
        All chunks.
    todo : sequence of int
        Indices into ``bounds`` still to run.
    on_result : callable
        Called in this process as ``on_result(index, value)`` when a chunk ends
        (in completion order, which may differ from chunk order).
    executor : concurrent.futures.Executor, optional
        Where to run; ``None`` means serially (``workers <= 1``) or a local
        process pool of ``workers`` processes.
    workers : int
        Size of the local process pool when no executor is given.
    """
    if executor is None and workers <= 1:
        for i in todo:
            on_result(i, fn(job, *bounds[i]))
        return
    own = None
    if executor is None:
        own = executor = _pool(workers, job)
        ref = None
    elif (client := _dask_client(executor)) is not None:
        ref = client.scatter(job, broadcast=True, hash=False)
    else:
        ref = job
    futures = {}
    failed = True
    try:
        with _worker_environment() if own is not None else contextlib.nullcontext():
            futures = {executor.submit(_call, fn, ref, *bounds[i]): i for i in todo}
        for fut in as_completed(futures):
            on_result(futures[fut], _result(fut, own is not None))
        failed = False
    finally:
        if failed:
            for fut in futures:
                fut.cancel()
        if own is not None:
            own.shutdown(wait=not failed, cancel_futures=True)
