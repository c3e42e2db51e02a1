"""How contractions run: memory limit, dtype, executor, workers, checkpoints, progress, backend.

Every query ends in :func:`tnsim.execution.slices.execute` calls.  Rather than passing
the same options through every query, a caller sets them for a block of
code; each query and each ``execute`` call inside uses them unless given its own::

    with run_options(executor=client.get_executor(), checkpoint="ckpt"):
        value = amplitude(circuit, bits)

The options are held in a :class:`contextvars.ContextVar`, so threads and
asyncio tasks each see their own.  With ``checkpoint`` set here (a folder),
contraction number ``k`` of the block records its progress in
``<folder>/part-<k>.ckpt``; rerunning the same code resumes each part, and a
part from another circuit or plan is refused.  The plans of the block are
kept in ``<folder>/plans.json`` before the first slice runs, and a rerun takes
them from there instead of planning (:mod:`tnsim.execution.keptplans`); the
folder is locked while the block runs.  ``plan_file`` and ``save_plans`` read
and write plans the same way in a plan file of their own.

:func:`resolve_options` is the one place where the options of a query are
worked out: an argument wins over the enclosing block, the block over the
default.  Every public query calls it once, at the door, and hands the
resolved values (a :class:`QueryOptions`) to the code below it.
"""

from __future__ import annotations

import contextlib
import os
from collections.abc import Callable, Iterator
from concurrent.futures import Executor
from contextvars import ContextVar
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from tnsim.errors import InputError
from tnsim.execution.keptplans import PlanKeeper
from tnsim.execution.memory import default_memory_limit
from tnsim.units import parse_memory
from tnsim.validate import path_like, quote, time_budget

__all__ = [
    "ContractionRecord",
    "DTypeLike",
    "MemoryLimit",
    "Progress",
    "QueryOptions",
    "RunOptions",
    "check_dtype",
    "current_options",
    "resolve_options",
    "run_options",
]

MemoryLimit = int | float | str
"""A memory limit as a user gives it: bytes, or text such as ``"4GiB"`` or ``"512MB"``."""

DTypeLike = type | np.dtype | str
"""A contraction dtype as a user gives it: ``numpy.complex128``, ``"complex64"`` ..."""

Progress = bool | Callable[[int, int], None] | None
"""A progress setting: ``True``/``False``, ``None`` (automatic) or ``progress(done, total)``."""

_DTYPES = (np.dtype(np.complex64), np.dtype(np.complex128))


def check_dtype(dtype: Any) -> np.dtype:
    """The dtype of a contraction: complex64 or complex128, else an :class:`InputError`.

    Examples
    --------
    >>> check_dtype("complex64")
    dtype('complex64')
    """
    try:
        dt = np.dtype(dtype)
    except (TypeError, ValueError):
        dt = None
    if dt not in _DTYPES:
        raise InputError(
            f"dtype must be complex64 or complex128, got {dtype!r}; pass numpy.complex128 "
            "(the default) or numpy.complex64 (half the memory, about 7 significant digits)"
        )
    return dt


def _check_workers(workers: Any) -> int | None:
    if workers is None:
        return None
    if isinstance(workers, bool) or not isinstance(workers, (int, np.integer)) or workers < 1:
        raise InputError(f"workers must be a positive integer, got {quote(workers)}")
    return int(workers)


@dataclass(frozen=True)
class RunOptions:
    """Options of the contractions run inside a :func:`run_options` block.

    Attributes
    ----------
    memory_limit : int, optional
        Bytes for live intermediates (default: half of the available memory).
    dtype : numpy.dtype, optional
        Contraction dtype of the queries (default: complex128).
    executor : concurrent.futures.Executor, optional
        Where chunks of slices run (e.g. ``distributed.Client.get_executor()``).
    workers : int, optional
        Local worker processes when no executor is given (1 = serial).
    checkpoint : str, optional
        Folder of checkpoint files, one per contraction.
    progress : bool, None or callable
        Progress bar (``None``: automatic, only on a terminal for large work).
    backend : str
        Array library (``"numpy"``, ``"cupy"``, ``"torch"`` ...).
    log : list, optional
        A list that every contraction of the block appends its
        :class:`ContractionRecord` to (what ran: FLOPs, slices, memory, seconds).
    time_budget : float, optional
        Seconds of planner search for the plans made in the block (default: automatic).
    plan_file : str, optional
        Plan file (:mod:`tnsim.plan.store`) every plan of the block is read
        from; a network it holds no plan for is refused, nothing is planned.
    save_plans : str, optional
        Plan file the plans of the block are written to.
    """

    memory_limit: int | None = None
    dtype: np.dtype | None = None
    executor: Executor | None = None
    workers: int | None = None
    checkpoint: str | None = None
    progress: Progress = None
    backend: str = "numpy"
    log: list[ContractionRecord] | None = None
    time_budget: float | None = None
    plan_file: str | None = None
    save_plans: str | None = None
    counter: list[int] = field(default_factory=lambda: [0], compare=False, repr=False)
    plans: PlanKeeper | None = field(default=None, compare=False, repr=False)

    def next_checkpoint(self) -> str | None:
        """Return the checkpoint file of the next contraction (``None`` without a folder)."""
        if self.checkpoint is None:
            return None
        k = self.counter[0]
        self.counter[0] += 1
        return os.path.join(self.checkpoint, f"part-{k:05d}.ckpt")


@dataclass(frozen=True)
class ContractionRecord:
    """What one contraction ran, appended to ``RunOptions.log`` when a block keeps a log.

    Attributes
    ----------
    flops : int
        Real FLOPs of all slices run (complex multiply-add = 8), counted from
        the compiled steps; chunks found in a checkpoint are not counted.
    num_slices : int
        Slices of the plan.
    slices_run : int
        Slices contracted by this call (fewer after a resume).
    peak_bytes : int
        Bytes of intermediates one slice needs, as the executor allocates them.
    memory_limit : int
        The limit the run was checked against, in bytes.
    workers : int
        Local worker processes (1 = serial; an executor counts as 1).
    seconds : float
        Wall time of the contraction (planning not included).
    itemsize : int
        Bytes per element of the dtype contracted.
    """

    flops: int
    num_slices: int
    slices_run: int
    peak_bytes: int
    memory_limit: int
    workers: int
    seconds: float
    itemsize: int


_CURRENT: ContextVar[RunOptions | None] = ContextVar("tnsim_run_options", default=None)


def current_options() -> RunOptions:
    """Return the options in force (the defaults outside any :func:`run_options` block)."""
    options = _CURRENT.get()
    return RunOptions() if options is None else options


@contextlib.contextmanager
def run_options(**changes: Any) -> Iterator[RunOptions]:
    """Set run options for the queries and contractions inside a ``with`` block.

    Parameters
    ----------
    **changes
        Fields of :class:`RunOptions`; ``memory_limit`` may be text such as
        ``"4GiB"``, ``dtype`` anything :func:`numpy.dtype` reads.

    Examples
    --------
    >>> with run_options(memory_limit="1GiB", workers=1) as opts:
    ...     current_options().memory_limit
    1073741824
    >>> current_options().memory_limit is None
    True
    """
    unknown = set(changes) - {
        f for f in RunOptions.__dataclass_fields__ if f not in ("counter", "plans")
    }
    if unknown:
        raise InputError(
            f"unknown run options {sorted(unknown)}; the options are memory_limit, dtype, "
            "executor, workers, checkpoint, progress, backend, log, time_budget, plan_file "
            "and save_plans"
        )
    if changes.get("memory_limit") is not None:
        changes["memory_limit"] = parse_memory(changes["memory_limit"])
    if changes.get("dtype") is not None:
        changes["dtype"] = check_dtype(changes["dtype"])
    if "workers" in changes:
        changes["workers"] = _check_workers(changes["workers"])
    for name in ("checkpoint", "plan_file", "save_plans"):
        if changes.get(name) is not None:
            changes[name] = path_like(changes[name], name)
    if changes.get("checkpoint") is not None:
        folder = changes["checkpoint"]
        if os.path.exists(folder) and not os.path.isdir(folder):
            raise InputError(f"checkpoint {folder!r} exists and is not a folder; give a folder")
        try:
            os.makedirs(folder, exist_ok=True)
        except OSError as exc:
            raise InputError(
                f"cannot make checkpoint folder {quote(folder)}: {exc.strerror}"
            ) from None
    if "time_budget" in changes:
        changes["time_budget"] = time_budget(changes["time_budget"])
    options = replace(current_options(), counter=[0], **changes)
    with contextlib.ExitStack() as stack:
        if {"checkpoint", "plan_file", "save_plans"} & set(changes):
            keeper = PlanKeeper(options.checkpoint, options.plan_file, options.save_plans)
            options = replace(options, plans=stack.enter_context(keeper))
        token = _CURRENT.set(options)
        try:
            yield options
        finally:
            _CURRENT.reset(token)


@dataclass(frozen=True)
class QueryOptions:
    """The options one query runs with, every one worked out (:func:`resolve_options`).

    Attributes
    ----------
    memory_limit : int
        Bytes the intermediates of all running slices may use together.
    slice_limit : int
        Bytes one running slice may use: ``memory_limit`` divided among the
        local worker processes that run slices at once.  Plans are made for it.
    dtype : numpy.dtype
        Contraction dtype (complex64 or complex128; for :func:`~tnsim.queries.contract.contract`
        also the operands' own).
    executor : concurrent.futures.Executor or None
        Where chunks of slices run (``None``: here or on local workers).
    workers : int or None
        Local worker processes (``None``: automatic, by the size of the work).
    checkpoint : str or None
        A checkpoint file given to this contraction; else the block's folder
        numbers one per contraction (:meth:`checkpoint_file`).
    progress : bool, None or callable
        Progress bar setting.
    backend : str
        Array library of the contractions.
    log : list or None
        Where each contraction appends its :class:`ContractionRecord`.
    """

    memory_limit: int
    slice_limit: int
    dtype: np.dtype
    executor: Executor | None
    workers: int | None
    checkpoint: str | None
    progress: Progress
    backend: str
    log: list[ContractionRecord] | None
    block: RunOptions = field(repr=False, compare=False)

    def checkpoint_file(self) -> str | None:
        """The checkpoint file of the next contraction: the one given, else the block's next."""
        if self.checkpoint is not None:
            return self.checkpoint
        return self.block.next_checkpoint()


def resolve_options(
    memory_limit: MemoryLimit | None = None,
    *,
    dtype: DTypeLike | None = None,
    default_dtype: DTypeLike = np.complex128,
    executor: Executor | None = None,
    workers: int | None = None,
    checkpoint: str | os.PathLike[str] | None = None,
    progress: Progress = None,
    backend: str | None = None,
) -> QueryOptions:
    """Work out the options of one query: the argument, else the block's, else the default.

    Parameters
    ----------
    memory_limit : int, float or str, optional
        Bytes or text such as ``"1GiB"``; default the enclosing
        :func:`run_options` block's, else half of the available memory.
    dtype : numpy dtype, optional
        complex64 or complex128; default the block's, else ``default_dtype``.
    default_dtype : numpy dtype
        The dtype when neither the argument nor the block gives one.
    executor, workers : optional
        Where slices run; given together they replace the block's pair (an
        executor given alone means no local workers).
    checkpoint : path, optional
        A checkpoint file for a single contraction.
    progress : bool or callable, optional
        Progress bar; default the block's (automatic outside a block).
    backend : str, optional
        Array library; default the block's (``"numpy"``).

    Returns
    -------
    QueryOptions

    Raises
    ------
    InputError
        For a memory limit, dtype or worker count that cannot be used.

    Examples
    --------
    >>> opts = resolve_options("1GiB", dtype="complex64")
    >>> opts.memory_limit, opts.dtype
    (1073741824, dtype('complex64'))
    >>> with run_options(memory_limit="8GiB", workers=4):
    ...     resolve_options().slice_limit == 2 * 1024**3
    True
    """
    block = current_options()
    if memory_limit is not None:
        limit = parse_memory(memory_limit)
    elif block.memory_limit is not None:
        limit = block.memory_limit
    else:
        limit = default_memory_limit()
    if dtype is not None:
        dt = check_dtype(dtype)
    elif block.dtype is not None:
        dt = block.dtype
    else:
        dt = np.dtype(default_dtype)
    if executor is None and workers is None:
        executor, workers = block.executor, block.workers
    workers = _check_workers(workers)
    # slices running at once on local worker processes share the limit
    share = workers if executor is None and workers is not None and workers > 1 else 1
    return QueryOptions(
        memory_limit=limit,
        slice_limit=max(1, limit // share),
        dtype=dt,
        executor=executor,
        workers=workers,
        checkpoint=None if checkpoint is None else os.fspath(checkpoint),
        progress=block.progress if progress is None else progress,
        backend=block.backend if backend is None else backend,
        log=block.log,
        block=block,
    )
