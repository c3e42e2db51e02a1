"""Run a contraction tree: pairwise contractions as batched matrix products.

Every intermediate is kept with a power-of-two scale: after each pairwise
contraction the array is divided by ``2**e`` (exactly, with ``numpy.ldexp``) so its
largest component lies in ``[0.5, 1)``, and ``e`` is added to a running exponent.
Amplitudes of very wide circuits (``|a|`` near ``2**(-n/2)``) therefore keep
their log-magnitude and phase even when the value itself underflows.
"""

from __future__ import annotations

import itertools
import math
from collections import Counter
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np

from .network import TensorNetwork
from .plan.tree import ContractionTree

__all__ = [
    "Scaled",
    "PairStep",
    "pair_step",
    "apply_step",
    "normalize",
    "compile_tree",
    "contract_tree",
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
    one else are summed out first (``pre_a``, ``pre_b``).
    """

    pre_a: tuple[int, ...]
    pre_b: tuple[int, ...]
    perm_a: tuple[int, ...]
    perm_b: tuple[int, ...]
    mat_a: tuple[int, int, int]
    mat_b: tuple[int, int, int]
    out_shape: tuple[int, ...]
    out_labels: tuple[int, ...]


def pair_step(
    ia: Sequence[int], ib: Sequence[int], keep: set[int] | frozenset[int], size
) -> PairStep:
    """Prepare the contraction of tensors labelled ``ia`` and ``ib``.

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
    batch = [i for i in ia2 if i in sb and i in keep]
    summed = [i for i in ia2 if i in sb and i not in keep]
    left = [i for i in ia2 if i not in sb]
    right = [i for i in ib2 if i not in sa]
    pos_a, pos_b = {i: k for k, i in enumerate(ia2)}, {i: k for k, i in enumerate(ib2)}

    def dim(labels):
        return math.prod(size[i] for i in labels)

    nb, nl, nk, nr = dim(batch), dim(left), dim(summed), dim(right)
    return PairStep(
        pre_a,
        pre_b,
        tuple(pos_a[i] for i in batch + left + summed),
        tuple(pos_b[i] for i in batch + summed + right),
        (nb, nl, nk),
        (nb, nk, nr),
        tuple(size[i] for i in batch + left + right),
        tuple(batch + left + right),
    )


def apply_step(step: PairStep, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Contract two arrays as prepared by :func:`pair_step` (no rescaling)."""
    if step.pre_a:
        a = a.sum(axis=step.pre_a)
    if step.pre_b:
        b = b.sum(axis=step.pre_b)
    a = a.transpose(step.perm_a).reshape(step.mat_a)
    b = b.transpose(step.perm_b).reshape(step.mat_b)
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


def contract_tree(
    arrays: Sequence[np.ndarray],
    tree: ContractionTree,
    steps: Sequence[PairStep] | None = None,
    labels: Sequence[Sequence[int]] | None = None,
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

    Returns
    -------
    Scaled
        The result, axes in the order of ``tree.output``.
    """
    if steps is None:
        steps = compile_tree(tree)
    labels = list(tree.inputs if labels is None else labels)
    nodes: list[np.ndarray | None] = list(arrays)
    exponent = 0
    for (x, y), step in zip(tree.path, steps):
        c = apply_step(step, nodes[x], nodes[y])
        nodes[x] = nodes[y] = None
        c, e = normalize(c)
        exponent += e
        nodes.append(c)
        labels.append(step.out_labels)
    root = nodes[-1]
    final = labels[-1]
    extra = tuple(k for k, i in enumerate(final) if i not in tree.output)
    if extra:
        root = root.sum(axis=extra)
        final = tuple(i for i in final if i in tree.output)
    root = root.transpose([final.index(i) for i in tree.output if i in final])
    root, e = normalize(np.asarray(root))
    return Scaled(root, exponent + e)


def _slice_arrays(
    network: TensorNetwork, sliced: Sequence[int], values: Sequence[int]
) -> list[np.ndarray]:
    fixed = dict(zip(sliced, values))
    out = []
    for arr, ix in zip(network.arrays, network.indices):
        if any(i in fixed for i in ix):
            arr = arr[tuple(fixed.get(i, slice(None)) for i in ix)]
        out.append(arr)
    return out


def execute(network: TensorNetwork, tree: ContractionTree, sliced: Sequence[int] = ()) -> Scaled:
    """Contract a network along a tree, summing over the ``sliced`` labels one value at a time.

    Parameters
    ----------
    network : TensorNetwork
        The network; ``tree.inputs`` must equal ``network.indices``.
    tree : ContractionTree
        The plan.
    sliced : sequence of int
        Labels fixed to each of their values in turn (not output labels).

    Returns
    -------
    Scaled
        The network's value, including ``network.exponent``.
    """
    if len(network.arrays) == 0:
        return Scaled(np.asarray(np.ones((), network.dtype)), network.exponent)
    sliced = tuple(sliced)
    steps = compile_tree(tree, sliced)
    labels = [tuple(i for i in ix if i not in sliced) for ix in tree.inputs]
    total: Scaled | None = None
    for values in itertools.product(*(range(network.size[i]) for i in sliced)):
        arrays = _slice_arrays(network, sliced, values) if sliced else network.arrays
        part = contract_tree(arrays, tree, steps, labels)
        total = part if total is None else total + part
    return Scaled(total.mantissa, total.exponent + network.exponent)
