"""The running scale: large intermediates are rescaled from a bound, read in full only when due."""

import dataclasses
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import tnsim.execution.treerun as treerun
from tnsim.execution.slices import execute
from tnsim.execution.steps import apply_owned, compile_tree
from tnsim.network.graph import TensorGraph
from tnsim.network.scaled import SLACK, normalize_owned, peak_log2, rescale_bounded
from tnsim.plan.driver import greedy_tree
from tnsim.plan.random_networks import random_arrays, random_network
from tnsim.testing import dense_state


def _bits(value) -> tuple:
    return value.exponent, value.mantissa.tobytes()


def _scaled_leaves(network: TensorGraph, seed: int, spread: int) -> TensorGraph:
    """``network`` with each leaf multiplied by a random power of two in ``2**±spread``."""
    rng = np.random.default_rng(seed)
    arrays = [a * 2.0 ** int(rng.integers(-spread, spread + 1)) for a in network.arrays]
    return dataclasses.replace(network, arrays=arrays)


@pytest.mark.parametrize("scale", [-140, -40, -33, -20, 0, 20, 31, 33, 90])
@pytest.mark.parametrize("dtype", [np.complex64, np.complex128])
def test_rescale_bounded_without_a_bound_is_normalize_owned(scale, dtype):
    x = ((np.arange(1, 40) - 20.5) * (1 + 0.5j) * 2.0**scale).astype(dtype)
    ref, e = normalize_owned(x.copy(), SLACK)
    got, e2, bound = rescale_bounded(x.copy(), math.inf, SLACK)
    assert (e, ref.tobytes()) == (e2, got.tobytes())
    assert peak_log2(got) <= bound


def test_rescale_bounded_trusts_the_bound_and_checks_the_head():
    # The bound is trusted: an array whose bound (falsely) says "in range" and whose
    # head is in range is not read further -- the mechanism that saves the full pass.
    x = np.full(3 * (1 << 12), 0.5)
    x[-1] = 2.0**80
    _, e, bound = rescale_bounded(x.copy(), 1.0, SLACK)
    assert (e, bound) == (0, 1.0)
    # A head far below the range is read in full and rescaled as without a bound.
    y = np.full(3 * (1 << 12), 2.0**-60)
    y[-1] = 2.0**-50
    got, e, bound = rescale_bounded(y.copy(), 1.0, SLACK)
    assert e == -49 and got[-1] == 0.5 and bound == 0.0
    # A bound at the slack cannot prove the peak below 2**slack.
    z = np.full(8, 2.0**SLACK)
    assert rescale_bounded(z.copy(), float(SLACK), SLACK)[1] == SLACK + 1


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 10_000), spread=st.sampled_from([0, 8, 30]))
def test_product_bound_holds_on_random_steps(seed, spread):
    # Each result's largest component never exceeds the bound computed before the step.
    inputs, output, size = random_network(8, num_labels=12, seed=seed, num_open=1)
    rng = np.random.default_rng(seed)
    arrays = [
        a * 2.0 ** int(rng.integers(-spread, spread + 1))
        for a in random_arrays(inputs, size, seed=seed)
    ]
    tree = greedy_tree(inputs, output, size)
    nodes = list(arrays)
    bounds = [peak_log2(a) for a in arrays]
    for (x, y), step in zip(tree.path, compile_tree(tree)):
        pair = [nodes[x], nodes[y]]
        bound = treerun._product_bound(pair, step, bounds[x], bounds[y])
        c = apply_owned(step, pair)
        assert peak_log2(c) <= bound
        nodes.append(c)
        bounds.append(peak_log2(c))


@settings(max_examples=20, deadline=None)
@given(
    seed=st.integers(0, 10_000),
    spread=st.sampled_from([0, 20, 60]),
    dtype=st.sampled_from([np.complex64, np.complex128]),
    num_sliced=st.integers(0, 3),
)
def test_bounded_rescaling_gives_the_bits_of_full_scans(seed, spread, dtype, num_sliced):
    # Every step through the bounded path (sliced views as leaves, hyperedges, open
    # labels, leaves from 2**-60 to 2**60) against every step scanned in full.
    inputs, output, size = random_network(10, num_labels=16, seed=seed, num_open=1, hyper=0.3)
    arrays = random_arrays(inputs, size, seed=seed, dtype=dtype)
    network = _scaled_leaves(TensorGraph(arrays, inputs, size, output), seed, spread)
    tree = greedy_tree(inputs, output, size)
    summed = sorted(set(size) - set(output))
    sliced = summed[:num_sliced]
    mp = pytest.MonkeyPatch()
    try:
        mp.setattr(treerun, "BOUNDED_MIN", 1)
        bounded = execute(network, tree, sliced, reuse=False)
        mp.setattr(treerun, "BOUNDED_MIN", 1 << 62)
        full = execute(network, tree, sliced, reuse=False)
    finally:
        mp.undo()
    assert _bits(bounded) == _bits(full)


def test_bounded_rescaling_keeps_tiny_amplitudes(sliced_case, monkeypatch):
    # Reference: the dense state vector of tnsim.testing (numpy.tensordot gate by gate);
    # leaves scaled by up to 2**±40 so intermediates leave [2**-32, 2**32] and are rescaled.
    circuit, bits, network, tree, sliced = sliced_case(12, 80, seed=6, num_sliced=3)
    scaled = _scaled_leaves(network, 6, 40)
    factor = math.prod(
        float(np.max(np.abs(b)) / np.max(np.abs(a))) for a, b in zip(network.arrays, scaled.arrays)
    )
    monkeypatch.setattr(treerun, "BOUNDED_MIN", 1)
    got = execute(scaled, tree, sliced)
    want = dense_state(circuit)[int(bits, 2)]
    assert got.exponent != 0
    assert complex(got.value()) == pytest.approx(want * factor, rel=1e-10)
