"""Buffers planned once and reused by every slice: no fresh memory for large intermediates.

Every slice of a plan runs the same steps on arrays of the same shapes.  Left
to numpy, each large intermediate (a step's result, an operand's reordered
copy) is a fresh allocation, which the operating system backs page by page on
first touch: on the development machine writing a fresh 512 MiB array took
three times as long as writing an existing one, and a slice of the 10x10 grid
amplitude under 2 GiB (65,536 slices) ran in 4.6-4.9 s against 1.5-1.8 s with the
slots below (``benchmarks/scaling.py workspace`` measures both side by side).

:func:`plan_workspace` walks the compiled steps once, in the executor's order,
and gives every large array a *slot*: a buffer it shares with arrays whose
lifetimes do not overlap (best fit among the free slots, else the largest
free slot grown, else a new one).  The slots are allocated on first use and
kept by the worker for all its slices.  Memory stays within the limit: the
plan is used only when the slots plus the largest total of the small arrays
alive beside them (made by numpy as before) fit the bytes given, and is
refused otherwise (the run then allocates as before).

The values computed are the same bits: the same products (``numpy.matmul``
with ``out=``) and the same copies, into other memory.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np

from tnsim.execution.steps import PairStep
from tnsim.plan.tree import PairTree

__all__ = [
    "MIN_SLOT_BYTES",
    "StepSlots",
    "Workspace",
    "plan_workspace",
    "reorder_copies",
]

MIN_SLOT_BYTES = 1 << 20
"""Arrays of at least this many bytes get slots; smaller ones come from numpy as before
(the allocator recycles them cheaply)."""


@dataclass(frozen=True)
class StepSlots:
    """Slots of one step: its operands' reordered copies and its result (``-1``: none)."""

    copy_a: int = -1
    copy_b: int = -1
    out: int = -1


@dataclass
class Workspace:
    """Slot sizes (elements) of a plan's steps, and the buffers once allocated.

    Attributes
    ----------
    sizes : list of int
        Elements of each slot.
    steps : list of StepSlots
        One per step of the plan.
    peak_bytes : int
        Bytes of the slots plus the most bytes of small arrays alive beside them.
    dtype : numpy.dtype
        Element type of the buffers.
    """

    sizes: list[int]
    steps: list[StepSlots]
    peak_bytes: int
    dtype: np.dtype
    buffers: list[np.ndarray] = field(default_factory=list, repr=False)

    def into(self, step: int) -> tuple[np.ndarray | None, ...]:
        """Flat buffers of step ``step``'s copies and result, for ``apply_owned``.

        All slots are allocated at the first call (see
        :func:`~tnsim.execution.steps.apply_owned`).
        """
        if not self.buffers:
            self.buffers = [np.empty(n, self.dtype) for n in self.sizes]
        slots = self.steps[step]
        return tuple(
            None if k < 0 else self.buffers[k] for k in (slots.copy_a, slots.copy_b, slots.out)
        )


class _Slots:
    """Best-fit assignment of arrays to reusable slots (sizes grow to the largest use)."""

    def __init__(self) -> None:
        self.sizes: list[int] = []
        self.free: set[int] = set()

    def take(self, numel: int) -> int:
        fits = [s for s in self.free if self.sizes[s] >= numel]
        if fits:
            slot = min(fits, key=lambda s: (self.sizes[s], s))
        elif self.free:
            slot = max(self.free, key=lambda s: (self.sizes[s], -s))
            self.sizes[slot] = numel
        else:
            self.sizes.append(numel)
            return len(self.sizes) - 1
        self.free.discard(slot)
        return slot

    def give(self, slot: int) -> None:
        self.free.add(slot)


def plan_workspace(
    tree: PairTree,
    steps: Sequence[PairStep],
    dtype,
    room: int,
    *,
    min_bytes: int | None = None,
) -> Workspace | None:
    """Slots for the large arrays of ``steps``, or ``None`` if they do not fit ``room`` bytes.

    Follows :func:`~tnsim.execution.steps.apply_owned`: an intermediate
    operand that must be reordered gets its copy in a slot (and gives its own
    slot back once copied); a result gets a slot, except the root's (it outlives the slice).  Leaves
    (inputs, sliced views, kept slice-invariant arrays) and pre-summed
    operands are handled by numpy as before, and counted beside the slots.

    ``min_bytes`` (default :data:`MIN_SLOT_BYTES`) is the smallest array given
    a slot.  Returns ``None`` when no array is that large.

    Examples
    --------
    >>> from tnsim.execution.steps import compile_tree
    >>> tree = PairTree(((0, 1), (1, 2), (2, 3)), (0, 3), {0: 512, 1: 2, 2: 2, 3: 512},
    ...                 ((0, 1), (3, 2)))
    >>> ws = plan_workspace(tree, compile_tree(tree), np.complex128, 2**30, min_bytes=1024)
    >>> ws.sizes, ws.steps[0], ws.steps[1]
    ([1024], StepSlots(copy_a=-1, copy_b=-1, out=0), StepSlots(copy_a=-1, copy_b=-1, out=-1))
    """
    itemsize = np.dtype(dtype).itemsize
    least = max(1, -(-(MIN_SLOT_BYTES if min_bytes is None else min_bytes) // itemsize))
    n = tree.num_leaves
    slots = _Slots()
    memory = _NumpyMemory()
    # Per node: its slot, or -1 and the elements it holds in numpy's memory (leaves: none).
    where: list[int] = [-1] * (n + len(steps))
    held: list[int] = [0] * (n + len(steps))
    plan: list[StepSlots] = []
    last = len(steps) - 1
    for s, ((x, y), step) in enumerate(zip(tree.path, steps)):
        copies, direct = [], []
        for node, pre, view, perm, target in (
            (x, step.pre_a, step.view_a, step.perm_a, _target(step, 0)),
            (y, step.pre_b, step.view_b, step.perm_b, _target(step, 1)),
        ):
            numel = math.prod(target)
            source = (where[node], held[node])
            if pre:  # numpy's sum, made while the operand exists; then the operand goes
                memory.add(numel)
                _let_go(source, slots, memory)
                source = (-1, numel)
            copy = -1
            if node < n or reorder_copies(view, perm, target):
                if node >= n and numel >= least:
                    copy = slots.take(numel)
                else:  # numpy's copy (of a leaf or of a small operand)
                    memory.add(numel)
                _let_go(source, slots, memory)
                source = (copy, 0) if copy >= 0 else (-1, numel)
            direct.append(source)
            copies.append(copy)
        numel = math.prod(step.out_shape)
        out = slots.take(numel) if s != last and numel >= least else -1
        if out < 0:
            memory.add(numel)
        for source in direct:  # the operands (or their copies) go after the product
            _let_go(source, slots, memory)
        where[n + s], held[n + s] = out, (0 if out >= 0 else numel)
        plan.append(StepSlots(copies[0], copies[1], out))
    if not slots.sizes:
        return None
    need = (sum(slots.sizes) + memory.peak) * itemsize
    if need > room:
        return None
    return Workspace(slots.sizes, plan, need, np.dtype(dtype))


def _target(step: PairStep, k: int) -> tuple[int, ...]:
    """The shape operand ``k`` (0: left, 1: right) is reshaped to before the product."""
    nb, nl, nk = step.mat_a
    nr = step.mat_b[2]
    if k == 0:
        return (nb, nk, nl) if step.trans_a else step.mat_a
    return (nb, nr, nk) if step.trans_b else step.mat_b


def reorder_copies(view: Sequence[int], perm: Sequence[int], target: Sequence[int]) -> bool:
    """Whether numpy copies a C-ordered array of shape ``view`` permuted by ``perm``, reshaped.

    numpy reshapes a strided array without copying when every group of its
    axes merged into one target axis lies evenly in memory (its
    ``_attempt_nocopy_reshape``, re-stated here for C order); otherwise it copies.

    Examples
    --------
    >>> reorder_copies((2, 3), (1, 0), (6,)), reorder_copies((6, 9), (1, 0), (3, 3, 6))
    (True, False)
    """
    stride = [1] * len(view)
    for k in range(len(view) - 2, -1, -1):
        stride[k] = stride[k + 1] * view[k + 1]
    old = [(view[p], stride[p]) for p in perm if view[p] != 1]
    new = [m for m in target if m != 1]
    oi = ni = 0
    while oi < len(old) and ni < len(new):
        np_, op = new[ni], old[oi][0]
        nj, oj = ni + 1, oi + 1
        while np_ != op:
            if np_ < op:
                np_ *= new[nj]
                nj += 1
            else:
                op *= old[oj][0]
                oj += 1
        if any(old[k][1] != old[k + 1][0] * old[k + 1][1] for k in range(oi, oj - 1)):
            return True
        oi, ni = oj, nj
    return False


class _NumpyMemory:
    """Elements alive in numpy's own memory, and their most at once."""

    def __init__(self) -> None:
        self.live = self.peak = 0

    def add(self, numel: int) -> None:
        self.live += numel
        self.peak = max(self.peak, self.live)


def _let_go(source: tuple[int, int], slots: _Slots, memory: _NumpyMemory) -> None:
    """Free an array: give its slot back, or its elements to numpy."""
    slot, numel = source
    if slot >= 0:
        slots.give(slot)
    else:
        memory.live -= numel
