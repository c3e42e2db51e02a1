"""Running one contraction tree: pairwise steps as batched matmul, with a running scale.

Intermediates are rescaled by exact powers of two (:mod:`tnsim.network.scaled`)
so the result keeps its log-magnitude however small it is; a large
intermediate is read for its scale only where a bound on it leaves a rescale
possible (:func:`~tnsim.network.scaled.rescale_bounded`).  numpy runs the
compiled steps directly; other array libraries go through opt_einsum's
backend dispatch (:mod:`tnsim.execution.backends`).
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from tnsim.execution.backends import ArrayBackend, get_backend
from tnsim.execution.blas import blas_threads, set_blas_threads
from tnsim.execution.steps import PairStep, apply_owned, compile_tree
from tnsim.execution.workspace import Workspace
from tnsim.fitted import SMALL_PRODUCT
from tnsim.network.scaled import (
    SLACK,
    Scaled,
    normalize,
    normalize_owned,
    peak_log2,
    rescale_bounded,
)
from tnsim.plan.tree import PairTree

__all__ = ["contract_tree", "run_steps"]


def contract_tree(
    arrays: Sequence[np.ndarray],
    tree: PairTree,
    steps: Sequence[PairStep] | None = None,
    labels: Sequence[Sequence[int]] | None = None,
    *,
    backend: ArrayBackend | str | None = None,
    workspace: Workspace | None = None,
) -> Scaled:
    """Contract ``arrays`` along ``tree`` with a running power-of-two scale.

    Parameters
    ----------
    arrays : sequence of numpy.ndarray
        One per leaf of the tree (already sliced if the steps were compiled
        with removed labels).
    tree : PairTree
        The order of pairwise contractions.
    steps : sequence of PairStep, optional
        From :func:`compile_tree`; computed if omitted.
    labels : sequence of sequence of int, optional
        Labels of ``arrays`` when they differ from ``tree.inputs`` (sliced).
    backend : str or ArrayBackend, optional
        Array library of the pairwise contractions (default numpy, see
        :mod:`tnsim.execution.backends`).
    workspace : Workspace, optional
        Slots for the large intermediates (:func:`tnsim.execution.workspace.plan_workspace`
        for these ``steps``; numpy only): the run writes them there instead of
        into fresh memory.  The result is the same.

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
        root, exponent = _run_numpy(arrays, tree, steps, workspace)
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


#: Results of at least this many elements are rescaled by :func:`rescale_bounded` from a
#: bound on their largest component (the whole array is read only where a rescale may
#: be due); smaller ones are always scanned, which gives their bound exactly.
BOUNDED_MIN = 1 << 15


def _run_numpy(arrays, tree, steps, workspace: Workspace | None) -> tuple[np.ndarray, int]:
    nodes: list[np.ndarray | None] = list(arrays)
    # Upper bounds on log2 of each node's largest component (inf: not known yet).
    bounds = [math.inf] * (len(nodes) + len(steps))
    exponent = 0
    full = blas_threads()
    current = full
    try:
        for s, ((x, y), step) in enumerate(zip(tree.path, steps)):
            (nb, nl, nk), nr = step.mat_a, step.mat_b[2]
            want = 1 if nb * nl * nk * nr < SMALL_PRODUCT else full
            if want != current:
                set_blas_threads(want)
                current = want
            pair = [nodes[x], nodes[y]]
            bound = math.inf
            if nb * nl * nr >= BOUNDED_MIN:
                bound = _product_bound(pair, step, bounds[x], bounds[y])
            nodes[x] = nodes[y] = None
            if workspace is None:
                c = apply_owned(step, pair)
            else:
                c = apply_owned(step, pair, workspace.into(s))
            c, e, bounds[len(nodes)] = rescale_bounded(c, bound, SLACK)
            exponent += e
            nodes.append(c)
    finally:
        if current != full:
            set_blas_threads(full)
    root = nodes[-1]
    if root is None:  # every step's result is appended: the last node is never cleared
        raise AssertionError("the contraction lost its root")
    return root, exponent


def _product_bound(pair: list, step: PairStep, bound_a: float, bound_b: float) -> float:
    """An upper bound on ``log2`` of the largest component of ``apply_owned(step, pair)``.

    Each component of the result sums ``K`` products of operand entries (``K``: the
    summed dimension times what each operand sums out first), and a component of
    a complex product is at most twice the product of the largest components, so
    the peak is at most ``2 K`` times the operands' peaks, with room for rounding.
    Unknown bounds (``inf``) of leaves are measured here.
    """
    a, b = pair
    (nb, nl, nk), nr = step.mat_a, step.mat_b[2]
    if math.isinf(bound_a) and bound_a > 0:
        bound_a = peak_log2(a)
    if math.isinf(bound_b) and bound_b > 0:
        bound_b = peak_log2(b)
    terms = nk * (a.size // (nb * nl * nk)) * (b.size // (nb * nk * nr))
    eps = float(np.finfo(a.dtype).eps)
    return bound_a + bound_b + math.log2(2 * terms) + math.log2(1 + 4 * terms * eps)


def run_steps(
    nodes: dict[int, np.ndarray],
    pairs: Sequence[tuple[int, int]],
    steps: Sequence[PairStep],
    results: Sequence[int],
) -> tuple[np.ndarray, int]:
    """Run compiled steps on arrays kept by node id; return the last result and its exponent.

    Step ``k`` joins nodes ``pairs[k]`` (taken out of ``nodes``) into node
    ``results[k]``, exactly as :func:`contract_tree` runs its steps (same
    products, same rescaling, same BLAS threads), so the arrays match bit for bit.
    """
    if not steps:
        raise ValueError("run_steps needs at least one step")
    exponent = 0
    full = blas_threads()
    current = full
    c = np.empty(0)
    try:
        for (x, y), step, node in zip(pairs, steps, results):
            (nb, nl, nk), nr = step.mat_a, step.mat_b[2]
            want = 1 if nb * nl * nk * nr < SMALL_PRODUCT else full
            if want != current:
                set_blas_threads(want)
                current = want
            c = apply_owned(step, [nodes.pop(x), nodes.pop(y)])
            c, e = normalize_owned(c, SLACK)
            exponent += e
            nodes[node] = c
    finally:
        if current != full:
            set_blas_threads(full)
    return c, exponent


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
