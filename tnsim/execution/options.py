"""How contractions run: memory limit, executor, workers, checkpoints, progress, backend.

Every query ends in :func:`tnsim.execution.slices.execute` calls.  Rather than passing
the same six options through every query, a caller sets them for a block of
code; each ``execute`` call inside uses them unless given its own::

    with run_options(executor=client.get_executor(), checkpoint="ckpt"):
        value = amplitude(circuit, bits)

The options are held in a :class:`contextvars.ContextVar`, so threads and
asyncio tasks each see their own.  With ``checkpoint`` set here (a folder),
contraction number ``k`` of the block records its progress in
``<folder>/part-<k>.ckpt``; rerunning the same code resumes each part, and a
part from another circuit or plan is refused.
"""

from __future__ import annotations

import contextlib
import os
from collections.abc import Callable, Iterator
from concurrent.futures import Executor
from contextvars import ContextVar
from dataclasses import dataclass, field, replace

from tnsim.errors import InputError
from tnsim.execution.memory import default_memory_limit
from tnsim.units import parse_memory

__all__ = [
    "ContractionRecord",
    "RunOptions",
    "current_options",
    "run_options",
    "slice_memory_limit",
]


@dataclass(frozen=True)
class RunOptions:
    """Options of the contractions run inside a :func:`run_options` block.

    Attributes
    ----------
    memory_limit : int, optional
        Bytes for live intermediates (default: half of the available memory).
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
    """

    memory_limit: int | None = None
    executor: Executor | None = None
    workers: int | None = None
    checkpoint: str | None = None
    progress: bool | Callable[[int, int], None] | None = None
    backend: str = "numpy"
    log: list[ContractionRecord] | None = None
    counter: list = field(default_factory=lambda: [0], compare=False, repr=False)

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
def run_options(**changes) -> Iterator[RunOptions]:
    """Set run options for the contractions inside a ``with`` block.

    Parameters
    ----------
    **changes
        Fields of :class:`RunOptions`; ``memory_limit`` may be text such as ``"4GiB"``.

    Examples
    --------
    >>> with run_options(memory_limit="1GiB", workers=1) as opts:
    ...     current_options().memory_limit
    1073741824
    >>> current_options().memory_limit is None
    True
    """
    unknown = set(changes) - {f for f in RunOptions.__dataclass_fields__ if f != "counter"}
    if unknown:
        raise InputError(f"unknown run options {sorted(unknown)}")
    if changes.get("memory_limit") is not None:
        changes["memory_limit"] = parse_memory(changes["memory_limit"])
    workers = changes.get("workers")
    if workers is not None and (isinstance(workers, bool) or int(workers) < 1):
        raise InputError(f"workers must be a positive integer, got {workers!r}")
    if changes.get("checkpoint") is not None:
        folder = os.fspath(changes["checkpoint"])
        if os.path.exists(folder) and not os.path.isdir(folder):
            raise InputError(f"checkpoint {folder!r} exists and is not a folder; give a folder")
        os.makedirs(folder, exist_ok=True)
        changes["checkpoint"] = folder
    options = replace(current_options(), counter=[0], **changes)
    token = _CURRENT.set(options)
    try:
        yield options
    finally:
        _CURRENT.reset(token)


def slice_memory_limit(memory_limit: int | str | None = None) -> int:
    """Return the bytes one running slice may use: what a planner should plan for.

    ``memory_limit`` (or the block's, or the default: half of the available
    memory) divided by the number of local worker processes that run slices
    at the same time.

    Examples
    --------
    >>> with run_options(memory_limit="8GiB", workers=4):
    ...     slice_memory_limit() == 2 * 1024**3
    True
    """
    opts = current_options()
    value = memory_limit if memory_limit is not None else opts.memory_limit
    limit = default_memory_limit() if value is None else parse_memory(value)
    local = opts.executor is None and opts.workers is not None and opts.workers > 1
    return max(1, limit // opts.workers) if local else limit
