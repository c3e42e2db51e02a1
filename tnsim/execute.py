"""Run a contraction tree: pairwise contractions as batched matrix products.

Every intermediate is kept with a power-of-two scale: when the largest component
of a pairwise contraction's result leaves ``[2**-32, 2**32]``, the array is divided
by ``2**e`` (exactly: a power-of-two scaling) so that component lies in
``[0.5, 1)``, and ``e`` is added to a running exponent; the final result is always
brought to ``[0.5, 1)``.  Floating-point products are unchanged by exact
power-of-two scalings, so the rescaling rule does not alter a result's bits.
Amplitudes of very wide circuits (``|a|`` near ``2**(-n/2)``) therefore keep
their log-magnitude and phase even when the value itself underflows.
"""

from __future__ import annotations

import itertools
import math
import os
from collections import Counter
from collections.abc import Callable, Iterable, Sequence
from concurrent.futures import Executor
from dataclasses import dataclass

import numpy as np

from .backends import ArrayBackend, get_backend
from .blas import SMALL_PRODUCT, blas_threads, set_blas_threads
from .checkpoint import Checkpoint, OrderedSum, run_fingerprint
from .errors import InputError, ResourceLimitError
from .executors import SliceError, chunk_bounds, local_workers, run_chunks
from .memory import default_memory_limit, format_bytes, parse_memory
from .network import TensorNetwork
from .plan.tree import ContractionTree
from .progress import SliceProgress
from .runconfig import current_options

__all__ = [
    "Scaled",
    "PairStep",
    "pair_step",
    "apply_step",
    "normalize",
    "compile_tree",
    "contract_tree",
    "count_flops",
    "largest_intermediate",
    "peak_memory",
    "SliceJob",
    "contract_slices",
    "execute",
]


@dataclass(frozen=True)
class Scaled:
    """A value stored as ``mantissa * 2**exponent``.

    Attributes
    ----------
    mantissa : numpy.ndarray
        Array (0-d for a scalar) whose largest component is below 1 in magnitude.
    exponent : int
        Power of two.
    """

    mantissa: np.ndarray
    exponent: int

    def value(self) -> np.ndarray:
        """Return ``mantissa * 2**exponent`` as complex128 (may under/overflow)."""
        m = np.asarray(self.mantissa, dtype=np.complex128)
        return np.ldexp(m.real, self.exponent) + 1j * np.ldexp(m.imag, self.exponent)

    def log10_abs(self) -> np.ndarray | float:
        """Return ``log10 |value|`` exactly, even where the value underflows."""
        with np.errstate(divide="ignore"):
            mag = np.abs(self.mantissa.astype(np.complex128))
            out = np.log10(mag) + self.exponent * math.log10(2)
        return float(out) if np.ndim(out) == 0 else out

    def phase(self) -> np.ndarray | float:
        """Return the complex argument of the value in radians."""
        out = np.angle(self.mantissa)
        return float(out) if np.ndim(out) == 0 else out

    def __complex__(self) -> complex:
        return complex(self.value())

    def __add__(self, other: Scaled) -> Scaled:
        if not np.any(self.mantissa):
            return other
        if not np.any(other.mantissa):
            return self
        e = max(self.exponent, other.exponent)
        total = np.ldexp(1.0, self.exponent - e) * self.mantissa
        total = total + np.ldexp(1.0, other.exponent - e) * other.mantissa
        m, de = normalize(total.astype(self.mantissa.dtype, copy=False))
        return Scaled(m, e + de)


def normalize(array: np.ndarray) -> tuple[np.ndarray, int]:
    """Scale ``array`` by a power of two so its largest component lies in [0.5, 1).

    Returns the scaled array and the exponent ``e`` with ``array = scaled * 2**e``.
    An all-zero array is returned unchanged with ``e = 0``.

    Examples
    --------
    >>> normalize(np.array([3.0, -1.0]))
    (array([ 0.75, -0.25]), 2)
    """
    if array.size == 0:
        return array, 0
    flat = array.reshape(-1)
    if np.iscomplexobj(flat):
        flat = flat.view(flat.real.dtype)
    peak = float(np.max(np.abs(flat)))
    if peak == 0.0 or not math.isfinite(peak):
        return array, 0
    e = math.frexp(peak)[1]
    if e == 0:
        return array, 0
    return np.ldexp(flat, -e).view(array.dtype).reshape(array.shape), e


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
    return _apply_owned(step, [a, b])


def _apply_owned(step: PairStep, pair: list) -> np.ndarray:
    """:func:`apply_step` on operands handed over in a list, which is emptied.

    Holding the only references, it lets each operand go as soon as its
    reordered copy exists, so the step never holds an operand and its copy
    together with the other operand's copy (see :func:`peak_memory`).
    """
    a, b = pair
    pair.clear()
    if step.pre_a:
        a = a.sum(axis=step.pre_a)
    if step.pre_b:
        b = b.sum(axis=step.pre_b)
    nb, nl, nk = step.mat_a
    a = a.reshape(step.view_a).transpose(step.perm_a)
    a = a.reshape(nb, nk, nl).swapaxes(1, 2) if step.trans_a else a.reshape(step.mat_a)
    b = b.reshape(step.view_b).transpose(step.perm_b)
    b = b.reshape(nb, step.mat_b[2], nk).swapaxes(1, 2) if step.trans_b else b.reshape(step.mat_b)
    return np.matmul(a, b).reshape(step.out_shape)


def compile_tree(tree: ContractionTree, removed: Iterable[int] = ()) -> list[PairStep]:
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
    >>> from tnsim.plan import greedy_tree
    >>> tree = greedy_tree([(0, 1), (1, 2)], (0, 2), {0: 4, 1: 5, 2: 6})
    >>> count_flops(compile_tree(tree))
    960
    """
    return sum(8 * s.mat_a[0] * s.mat_a[1] * s.mat_a[2] * s.mat_b[2] for s in steps)


def largest_intermediate(steps: Sequence[PairStep]) -> int:
    """Elements of the largest result among compiled steps (1 without steps).

    Examples
    --------
    >>> from tnsim.plan import greedy_tree
    >>> tree = greedy_tree([(0, 1), (1, 2)], (0, 2), {0: 4, 1: 5, 2: 6})
    >>> largest_intermediate(compile_tree(tree))
    24
    """
    return max((math.prod(s.out_shape) for s in steps), default=1)


def peak_memory(tree: ContractionTree, steps: Sequence[PairStep], itemsize: int) -> int:
    """Return the most bytes of intermediates alive at once while contracting ``tree``.

    Follows what the executor allocates: every intermediate not yet consumed;
    within a step, an operand's summed or reordered copy is made while the
    operand still exists and the operand is let go right after; then the
    result.  Input arrays are not counted, except the copies made of them.

    Parameters
    ----------
    tree : ContractionTree
        The tree the steps were compiled from.
    steps : sequence of PairStep
        From :func:`compile_tree` (with the sliced labels removed).
    itemsize : int
        Bytes per element of the dtype (16 for complex128).

    Examples
    --------
    >>> from tnsim.plan import greedy_tree
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


def contract_tree(
    arrays: Sequence[np.ndarray],
    tree: ContractionTree,
    steps: Sequence[PairStep] | None = None,
    labels: Sequence[Sequence[int]] | None = None,
    *,
    backend: ArrayBackend | str | None = None,
) -> Scaled:
    """Contract ``arrays`` along ``tree`` with a running power-of-two scale.

    Parameters
    ----------
    arrays : sequence of numpy.ndarray
        One per leaf of the tree (already sliced if the steps were compiled
        with removed labels).
    tree : ContractionTree
        The order of pairwise contractions.
    steps : sequence of PairStep, optional
        From :func:`compile_tree`; computed if omitted.
    labels : sequence of sequence of int, optional
        Labels of ``arrays`` when they differ from ``tree.inputs`` (sliced).
    backend : str or ArrayBackend, optional
        Array library of the pairwise contractions (default numpy, see
        :mod:`tnsim.backends`).

    Returns
    -------
    Scaled
        The result, axes in the order of ``tree.output``.
    """
    if steps is None:
        steps = compile_tree(tree)
    labels = list(tree.inputs if labels is None else labels)
    ops = get_backend(backend)
    if ops.is_numpy:
        root, exponent = _run_numpy(arrays, tree, steps)
    else:
        root, exponent = _run_other(ops, arrays, tree, steps, labels)
    final = steps[-1].out_labels if steps else tuple(labels[0])
    extra = tuple(k for k, i in enumerate(final) if i not in tree.output)
    if extra:
        root = root.sum(axis=extra)
        final = tuple(i for i in final if i in tree.output)
    root = root.transpose([final.index(i) for i in tree.output if i in final])
    root, e = normalize(np.asarray(root))
    return Scaled(root, exponent + e)


#: Intermediates whose largest component lies in ``[2**-SLACK, 2**SLACK]`` are not rescaled.
SLACK = 32


def normalize_owned(array: np.ndarray, slack: int = 0) -> tuple[np.ndarray, int]:
    """:func:`normalize` in place, for a freshly computed intermediate.

    With ``slack``, an array whose peak exponent ``e`` has ``|e| <= slack`` is
    left as it is (``e = 0`` is returned).
    """
    flat = array.reshape(-1)
    if np.iscomplexobj(flat):
        flat = flat.view(flat.real.dtype)
    if flat.size == 0:
        return array, 0
    peak = float(max(flat.max(), -flat.min()))
    if peak == 0.0 or not math.isfinite(peak):
        return array, 0
    e = math.frexp(peak)[1]
    if abs(e) <= slack:
        return array, 0
    if -100 <= e <= 100:  # 2**-e is a normal number even in float32: multiply (SIMD, exact)
        np.multiply(flat, flat.dtype.type(math.ldexp(1.0, -e)), out=flat)
    elif e:
        np.ldexp(flat, -e, out=flat)
    return array, e


def _run_numpy(arrays, tree, steps) -> tuple[np.ndarray, int]:
    nodes: list[np.ndarray | None] = list(arrays)
    exponent = 0
    full = blas_threads()
    current = full
    try:
        for (x, y), step in zip(tree.path, steps):
            (nb, nl, nk), nr = step.mat_a, step.mat_b[2]
            want = 1 if nb * nl * nk * nr < SMALL_PRODUCT else full
            if want != current:
                set_blas_threads(want)
                current = want
            pair = [nodes[x], nodes[y]]
            nodes[x] = nodes[y] = None
            c = _apply_owned(step, pair)
            c, e = normalize_owned(c, SLACK)
            exponent += e
            nodes.append(c)
    finally:
        if current != full:
            set_blas_threads(full)
    return nodes[-1], exponent


def _run_other(ops: ArrayBackend, arrays, tree, steps, labels) -> tuple[np.ndarray, int]:
    nodes = [ops.to_backend(a) for a in arrays]
    labels = list(labels)
    exponent = 0
    for (x, y), step in zip(tree.path, steps):
        c = ops.contract_pair(nodes[x], labels[x], nodes[y], labels[y], step.out_labels)
        nodes[x] = nodes[y] = None
        c, e = ops.normalize(c)
        exponent += e
        nodes.append(c)
        labels.append(step.out_labels)
    return ops.to_numpy(nodes[-1]), exponent


def _slice_arrays(
    arrays: Sequence[np.ndarray],
    indices: Sequence[Sequence[int]],
    sliced: Sequence[int],
    values: Sequence[int],
) -> list[np.ndarray]:
    fixed = dict(zip(sliced, values))
    out = []
    for arr, ix in zip(arrays, indices):
        if any(i in fixed for i in ix):
            arr = arr[tuple(fixed.get(i, slice(None)) for i in ix)]
        out.append(arr)
    return out


@dataclass(frozen=True)
class SliceJob:
    """Everything a worker needs to contract slices: arrays, tree, sliced labels.

    Sent once to each worker process; :func:`contract_slices` runs a chunk of it.
    """

    arrays: tuple[np.ndarray, ...]
    tree: ContractionTree
    sliced: tuple[int, ...]
    backend: str = "numpy"

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


def _compiled(job: SliceJob) -> tuple[list[PairStep], list[tuple[int, ...]]]:
    """Steps and sliced labels of ``job``, compiled once per worker."""
    if _COMPILED.get("job") is not job:
        gone = set(job.sliced)
        labels = [tuple(i for i in ix if i not in gone) for ix in job.tree.inputs]
        _COMPILED.update(job=job, steps=compile_tree(job.tree, job.sliced), labels=labels)
    return _COMPILED["steps"], _COMPILED["labels"]


def contract_slices(job: SliceJob, start: int, stop: int) -> Scaled:
    """Return the sum of slices ``start .. stop-1`` of ``job``, added in slice order.

    Raises
    ------
    SliceError
        If a slice fails; the message names the slice.
    """
    steps, labels = _compiled(job)
    total: Scaled | None = None
    for k in range(start, stop):
        try:
            values = np.unravel_index(k, job.dims) if job.sliced else ()
            arrays = _slice_arrays(job.arrays, job.tree.inputs, job.sliced, values)
            part = contract_tree(arrays, job.tree, steps, labels, backend=job.backend)
        except Exception as exc:
            raise SliceError(f"{job.describe(k)} failed: {type(exc).__name__}: {exc}") from exc
        total = part if total is None else total + part
    return total


def _check_sliced(network: TensorNetwork, sliced: tuple[int, ...]) -> None:
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


def _fingerprint(network: TensorNetwork, job: SliceJob, bounds) -> str:
    tree = job.tree
    description = {
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
    return run_fingerprint(job.arrays, description)


def execute(
    network: TensorNetwork,
    tree: ContractionTree,
    sliced: Sequence[int] = (),
    *,
    memory_limit: int | str | None = None,
    executor: Executor | None = None,
    workers: int | None = None,
    checkpoint: str | os.PathLike | None = None,
    progress: bool | None | Callable[[int, int], None] = None,
    backend: str | None = None,
    chunk_size: int | None = None,
) -> Scaled:
    """Contract a network along a tree, summing over the ``sliced`` labels one value at a time.

    Slices are grouped into chunks of consecutive slices
    (:func:`tnsim.executors.chunk_bounds`); each chunk sums its slices in order
    and chunk sums are added in chunk order, so the result is bit-for-bit the
    same for the same plan whatever runs it (serially, a process pool, Dask)
    and however often it was stopped and resumed.

    Options left at ``None`` come from the enclosing
    :func:`tnsim.runconfig.run_options` block, if any.

    Parameters
    ----------
    network : TensorNetwork
        The network; ``tree.inputs`` must equal ``network.indices``.
    tree : ContractionTree
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
        resumes from it (see :mod:`tnsim.checkpoint`).
    progress : bool, None or callable
        Show a progress bar (``None``: only on a terminal, for large work); a
        callable is called as ``progress(chunks_done, num_chunks)`` instead.
    backend : str, optional
        Array library of the contractions (default ``"numpy"``; see :mod:`tnsim.backends`).
    chunk_size : int, optional
        Slices per chunk, overriding the automatic choice (changes the rounding
        of the sum, hence the checkpoint fingerprint).

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
    >>> from tnsim.plan import greedy_tree
    >>> tn = TensorNetwork([np.ones((2, 2)), np.ones((2, 2))], [(0, 1), (1, 2)], {0: 2, 1: 2, 2: 2})
    >>> tree = greedy_tree(tn.indices, tn.output, tn.size)
    >>> complex(execute(tn, tree)), complex(execute(tn, tree, sliced=[1, 2]))
    ((8+0j), (8+0j))
    """
    if len(network.arrays) == 0:
        return Scaled(np.asarray(np.ones((), network.dtype)), network.exponent)
    sliced = tuple(int(i) for i in sliced)
    _check_sliced(network, sliced)
    opts = current_options()
    ops = get_backend(backend if backend is not None else opts.backend)
    memory_limit = memory_limit if memory_limit is not None else opts.memory_limit
    limit = default_memory_limit() if memory_limit is None else parse_memory(memory_limit)
    if executor is None and workers is None:
        executor, workers = opts.executor, opts.workers
    progress = opts.progress if progress is None else progress
    if checkpoint is None:
        checkpoint = opts.next_checkpoint()
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
    bounds = chunk_bounds(num_slices, slice_flops, chunk_size)
    if executor is None and workers is None:
        big = slice_flops * num_slices >= 1e11 and len(bounds) > 1
        workers = min(local_workers(), len(bounds), max(1, limit // max(need, 1))) if big else 1
    pool = 1 if executor is not None else max(1, int(workers))
    _check_memory(need, limit, pool)
    if checkpoint is not None:
        store = Checkpoint(checkpoint, _fingerprint(network, job, bounds), len(bounds), Scaled)
        sums, record = store.sums, store.add
    else:
        sums = OrderedSum(len(bounds))
        record = sums.add
    done = sums.done()
    todo = [i for i in range(len(bounds)) if i not in done]
    done_slices = sum(bounds[i][1] - bounds[i][0] for i in done)
    bar = SliceProgress(progress, num_slices, len(bounds), slice_flops, done_slices, len(done))

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
    total = sums.total()
    return Scaled(total.mantissa, total.exponent + network.exponent)
