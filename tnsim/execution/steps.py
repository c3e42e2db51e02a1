"""Pairwise contractions prepared once: permutations, matrix shapes, FLOPs and peak memory.

:func:`compile_tree` turns every step of a :class:`~tnsim.plan.tree.PairTree`
into a :class:`PairStep` (a batched matrix product with its reorderings);
:func:`count_flops` and :func:`peak_memory` count what running them costs, as
the executor allocates it.
"""

from __future__ import annotations

import itertools
import math
from collections import Counter
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np

from tnsim.plan.tree import PairTree

__all__ = [
    "PairStep",
    "apply_step",
    "compile_tree",
    "count_flops",
    "largest_intermediate",
    "pair_step",
    "peak_memory",
]


@dataclass(frozen=True)
class PairStep:
    """A pairwise contraction prepared once: permutations and matrix shapes.

    The left operand is permuted to ``(batch, left, summed)`` and reshaped to
    ``(B, L, K)``, the right one to ``(batch, summed, right)`` → ``(B, K, R)``;
    ``matmul`` gives ``(B, L, R)``, reshaped to the result's axes
    ``batch + left + right``.  Axes found only in one operand and needed by no
    one else are summed out first (``pre_a``, ``pre_b``).  An operand whose
    axes already lie as ``(batch, summed, left)`` (``trans_a``) or
    ``(batch, right, summed)`` (``trans_b``) is passed to ``matmul`` as a
    transposed view instead of being copied.  Axes that stay next to each
    other are merged before the permutation (``view_a`` is the merged shape,
    ``perm_a`` permutes the merged axes), so reordering copies move long runs.
    """

    pre_a: tuple[int, ...]
    pre_b: tuple[int, ...]
    view_a: tuple[int, ...]
    perm_a: tuple[int, ...]
    view_b: tuple[int, ...]
    perm_b: tuple[int, ...]
    mat_a: tuple[int, int, int]
    mat_b: tuple[int, int, int]
    out_shape: tuple[int, ...]
    out_labels: tuple[int, ...]
    trans_a: bool = False
    trans_b: bool = False


def pair_step(
    ia: Sequence[int], ib: Sequence[int], keep: set[int] | frozenset[int], size
) -> PairStep:
    """Prepare the contraction of tensors labelled ``ia`` and ``ib``.

    Shared labels are ordered as they lie in the larger operand, so that its
    data needs no reordering when it is already grouped.

    Parameters
    ----------
    ia, ib : sequence of int
        Labels of the two operands.
    keep : set of int
        Labels still needed after this step (by other tensors or the output).
    size : mapping
        Dimension of every label.
    """
    sb, sa = set(ib), set(ia)
    pre_a = tuple(k for k, i in enumerate(ia) if i not in sb and i not in keep)
    pre_b = tuple(k for k, i in enumerate(ib) if i not in sa and i not in keep)
    ia2 = [i for k, i in enumerate(ia) if k not in pre_a]
    ib2 = [i for k, i in enumerate(ib) if k not in pre_b]

    def dim(labels):
        return math.prod(size[i] for i in labels)

    lead = ia2 if dim(ia2) >= dim(ib2) else ib2
    batch = [i for i in lead if i in sa and i in sb and i in keep]
    summed = [i for i in lead if i in sa and i in sb and i not in keep]
    left = [i for i in ia2 if i not in sb]
    right = [i for i in ib2 if i not in sa]
    trans_a = len(left) > 0 and ia2 == batch + summed + left and ia2 != batch + left + summed
    trans_b = len(right) > 0 and ib2 == batch + right + summed and ib2 != batch + summed + right
    order_a = batch + summed + left if trans_a else batch + left + summed
    order_b = batch + right + summed if trans_b else batch + summed + right
    nb, nl, nk, nr = dim(batch), dim(left), dim(summed), dim(right)
    return PairStep(
        pre_a,
        pre_b,
        *_merged_permutation(ia2, order_a, size),
        *_merged_permutation(ib2, order_b, size),
        (nb, nl, nk),
        (nb, nk, nr),
        tuple(size[i] for i in batch + left + right),
        tuple(batch + left + right),
        trans_a,
        trans_b,
    )


def _merged_permutation(
    labels: Sequence[int], order: Sequence[int], size
) -> tuple[tuple[int, ...], tuple[int, ...]]:
    """Shape of ``labels`` with runs kept together by ``order`` merged, and their permutation.

    Examples
    --------
    >>> _merged_permutation([0, 1, 2, 3], [2, 3, 0, 1], dict.fromkeys(range(4), 2))
    ((4, 4), (1, 0))
    """
    pos = {i: k for k, i in enumerate(labels)}
    runs: list[list[int]] = []
    for i in order:
        if runs and pos[i] == pos[runs[-1][-1]] + 1:
            runs[-1].append(i)
        else:
            runs.append([i])
    by_source = sorted(range(len(runs)), key=lambda r: pos[runs[r][0]])
    shape = tuple(math.prod(size[i] for i in runs[r]) for r in by_source)
    rank = {r: k for k, r in enumerate(by_source)}
    return shape, tuple(rank[r] for r in range(len(runs)))


def apply_step(step: PairStep, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Contract two arrays as prepared by :func:`pair_step` (no rescaling)."""
    return apply_owned(step, [a, b])


def apply_owned(
    step: PairStep, pair: list, into: tuple[np.ndarray | None, ...] | None = None
) -> np.ndarray:
    """:func:`apply_step` on operands handed over in a list, which is emptied.

    Holding the only references, it lets each operand go as soon as its
    reordered copy exists, so the step never holds an operand and its copy
    together with the other operand's copy (see :func:`peak_memory`).
    ``into`` gives flat buffers for the left operand's reordered copy, the
    right one's and the result (``None`` for any of them: numpy's memory; see
    :mod:`tnsim.execution.workspace`); a buffer is given for a copy only where
    numpy would copy, so the values are the same bits either way.
    """
    a, b = pair
    pair.clear()
    buf_a, buf_b, buf_out = (None, None, None) if into is None else into
    nb, nl, nk = step.mat_a
    nr = step.mat_b[2]
    a = _reordered(a, step.pre_a, step.view_a, step.perm_a, buf_a)
    a = a.reshape(nb, nk, nl).swapaxes(1, 2) if step.trans_a else a.reshape(step.mat_a)
    b = _reordered(b, step.pre_b, step.view_b, step.perm_b, buf_b)
    b = b.reshape(nb, nr, nk).swapaxes(1, 2) if step.trans_b else b.reshape(step.mat_b)
    out = None if buf_out is None else buf_out[: nb * nl * nr].reshape(nb, nl, nr)
    return np.matmul(a, b, out=out).reshape(step.out_shape)


def _reordered(a: np.ndarray, pre, view, perm, buf: np.ndarray | None) -> np.ndarray:
    """An operand summed over ``pre`` and permuted (copied into ``buf`` when one is given)."""
    if pre:
        a = a.sum(axis=pre)
    a = a.reshape(view).transpose(perm)
    if buf is None:
        return a
    dst = buf[: a.size].reshape(a.shape)
    np.copyto(dst, a)
    return dst


def compile_tree(tree: PairTree, removed: Iterable[int] = ()) -> list[PairStep]:
    """Prepare every step of ``tree``; labels in ``removed`` (sliced) are dropped.

    Returns
    -------
    list of PairStep
        One per entry of ``tree.path``.
    """
    gone = set(removed)
    labels = [tuple(i for i in ix if i not in gone) for ix in tree.inputs]
    count = Counter(itertools.chain.from_iterable(labels))
    out = set(tree.output)
    steps = []
    for x, y in tree.path:
        ia, ib = labels[x], labels[y]
        for i in set(ia) | set(ib):
            count[i] -= (i in ia) + (i in ib)
        keep = {i for i in set(ia) | set(ib) if count[i] > 0 or i in out}
        step = pair_step(ia, ib, keep, tree.size)
        steps.append(step)
        labels.append(step.out_labels)
        for i in step.out_labels:
            count[i] += 1
    return steps


def count_flops(steps: Sequence[PairStep]) -> int:
    """Return the real FLOPs of compiled steps: ``8*B*L*K*R`` per pairwise contraction.

    A complex multiply-add is 8 real floating-point operations; the summations
    of axes only one operand holds (``pre_a``, ``pre_b``) are not counted.

    Examples
    --------
    >>> from tnsim.plan.driver import greedy_tree
    >>> tree = greedy_tree([(0, 1), (1, 2)], (0, 2), {0: 4, 1: 5, 2: 6})
    >>> count_flops(compile_tree(tree))
    960
    """
    return sum(8 * s.mat_a[0] * s.mat_a[1] * s.mat_a[2] * s.mat_b[2] for s in steps)


def largest_intermediate(steps: Sequence[PairStep]) -> int:
    """Elements of the largest result among compiled steps (1 without steps).

    Examples
    --------
    >>> from tnsim.plan.driver import greedy_tree
    >>> tree = greedy_tree([(0, 1), (1, 2)], (0, 2), {0: 4, 1: 5, 2: 6})
    >>> largest_intermediate(compile_tree(tree))
    24
    """
    return max((math.prod(s.out_shape) for s in steps), default=1)


def peak_memory(tree: PairTree, steps: Sequence[PairStep], itemsize: int) -> int:
    """Return the most bytes of intermediates alive at once while contracting ``tree``.

    Follows what the executor allocates: every intermediate not yet consumed;
    within a step, an operand's summed or reordered copy is made while the
    operand still exists and the operand is let go right after; then the
    result.  Input arrays are not counted, except the copies made of them.

    Parameters
    ----------
    tree : PairTree
        The tree the steps were compiled from.
    steps : sequence of PairStep
        From :func:`compile_tree` (with the sliced labels removed).
    itemsize : int
        Bytes per element of the dtype (16 for complex128).

    Examples
    --------
    >>> from tnsim.plan.driver import greedy_tree
    >>> tree = greedy_tree([(0, 1), (1, 2)], (0, 2), {0: 4, 1: 5, 2: 6})
    >>> peak_memory(tree, compile_tree(tree), 16)  # copies of both inputs (4*5 + 5*6) + result
    1184
    """
    n = tree.num_leaves
    held: list[int] = [0] * n
    live = peak = 0
    for (x, y), step in zip(tree.path, steps):
        others = live - held[x] - held[y]
        cur = [held[x], held[y]]
        for k, (pre, perm, mat, leaf) in enumerate(
            [
                (step.pre_a, step.perm_a, step.mat_a, x < n),
                (step.pre_b, step.perm_b, step.mat_b, y < n),
            ]
        ):
            if pre:  # the sum is a new array, made while the operand exists
                peak = max(peak, others + sum(cur) + math.prod(mat))
                cur[k] = math.prod(mat)
            if leaf or perm != tuple(range(len(perm))):  # reordered (or sliced) copy
                peak = max(peak, others + sum(cur) + math.prod(mat))
                cur[k] = math.prod(mat)
        out = math.prod(step.out_shape)
        peak = max(peak, others + sum(cur) + out)
        live = others + out
        held.append(out)
    if steps:
        peak = max(peak, live + held[-1])  # the result's final transposed copy
    return peak * itemsize
