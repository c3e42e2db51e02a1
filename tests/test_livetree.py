"""LiveTree: cached values and environments must equal a fresh contraction after any changes.

The reference is numpy.einsum (through opt_einsum) on the whole network, recomputed from
scratch after every change.
"""

import numpy as np
import opt_einsum
import pytest

from tnsim.execution.livetree import LiveTree
from tnsim.plan.driver import PairTree
from tnsim.plan.random_networks import random_network


def _network(seed: int, n: int = 9, bits: int = 4):
    """A random closed network (hyperedges included) plus ``bits`` batched vectors.

    Each batched vector ``E[s, l]`` closes a new label ``l`` added to a random tensor.
    Returns label lists, sizes, the batch label, the vectors' leaves and a random tree.
    """
    rng = np.random.default_rng(seed)
    inputs, _, size = random_network(n, num_open=0, hyper=0.3, seed=seed)
    inputs = [list(ix) for ix in inputs]
    batch = max(size) + 1
    size[batch] = 3
    leaves = []
    for k in range(bits):
        label = batch + 1 + k
        size[label] = 2
        inputs[int(rng.integers(n))].append(label)
        leaves.append(len(inputs))
        inputs.append([batch, label])
    path, live, nxt = [], list(range(len(inputs))), len(inputs)
    while len(live) > 1:
        i, j = sorted(rng.choice(len(live), size=2, replace=False), reverse=True)
        path.append((live[i], live[j]))
        del live[i], live[j]
        live.append(nxt)
        nxt += 1
    tree = PairTree(tuple(tuple(ix) for ix in inputs), (batch,), size, tuple(path))
    return tree, batch, leaves, rng


def _random(rng, labels, size):
    shape = [size[i] for i in labels]
    return rng.standard_normal(shape) + 1j * rng.standard_normal(shape)


def _reference(tree, arrays, batch, opened=()):
    """einsum of the network with the ``opened`` leaves left open (axes: batch, then them)."""
    inputs = [tuple(ix) for ix in tree.inputs]
    arrays = list(arrays)
    out = [batch]
    for k, leaf in enumerate(opened):
        (leg,) = (i for i in inputs[leaf] if i != batch)
        fresh = 1000 + k
        inputs[leaf], arrays[leaf] = (leg, fresh), np.eye(tree.size[leg])
        out.append(fresh)
    operands = [x for pair in zip(arrays, inputs) for x in pair]
    return opt_einsum.contract(*operands, out)


@pytest.mark.parametrize("seed", range(10))
def test_values_and_probes_follow_every_change(seed):
    tree, batch, leaves, rng = _network(seed)
    arrays = [_random(rng, ix, tree.size) for ix in tree.inputs]
    live = LiveTree(tree, arrays, batch)
    np.testing.assert_allclose(live.value().value(), _reference(tree, arrays, batch), rtol=1e-10)
    for _ in range(30):
        leaf = int(rng.integers(tree.num_leaves))
        arrays[leaf] = _random(rng, tree.inputs[leaf], tree.size)
        live.replace(leaf, arrays[leaf])
        k = int(rng.integers(1, 3))
        opened = [int(v) for v in rng.choice(leaves, size=k, replace=False)]
        got = live.probe(opened).value()
        want = _reference(tree, arrays, batch, opened)
        np.testing.assert_allclose(got, want, rtol=1e-9, atol=1e-12 * np.abs(want).max())
    np.testing.assert_allclose(live.value().value(), _reference(tree, arrays, batch), rtol=1e-9)


def test_known_values_are_used_and_not_recomputed():
    tree, batch, leaves, rng = _network(3)
    arrays = [_random(rng, ix, tree.size) for ix in tree.inputs]
    below = [{k} for k in range(tree.num_leaves)]
    for x, y in tree.path:
        below.append(below[x] | below[y])
    # A step no batched vector feeds: given as known (here: zero), it is taken as it is.
    node = next(u for u in range(tree.num_leaves, len(below)) if not below[u] & set(leaves))
    fake = {node: (np.zeros(LiveTree(tree, arrays, batch).value(node).mantissa.shape), 0)}
    assert np.all(LiveTree(tree, arrays, batch, fake).value().value() == 0)


def test_the_tree_must_end_in_the_batch_label():
    tree, batch, _, rng = _network(1)
    wrong = PairTree(tree.inputs, (), tree.size, tree.path)
    with pytest.raises(ValueError, match="batch label"):
        LiveTree(wrong, [_random(rng, ix, tree.size) for ix in tree.inputs], batch)
