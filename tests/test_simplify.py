"""Simplification passes keep the network's value (numpy.einsum reference) and shrink it."""

import numpy as np
import pytest

from tnsim import Circuit
from tnsim.network.builders import amplitude_network
from tnsim.network.graph import TensorGraph
from tnsim.network.simplify import _einsum_pair, absorb_small
from tnsim.plan.random_networks import random_arrays, random_network
from tnsim.testing import random_circuit


@pytest.mark.parametrize("seed", range(6))
def test_absorb_small_keeps_the_value_of_random_networks(seed):
    # Reference: the unsimplified network contracted by numpy.einsum (TensorGraph.dense).
    inputs, output, size = random_network(12, num_open=seed % 3, hyper=0.4, seed=seed)
    net = TensorGraph(random_arrays(inputs, size, seed=seed), inputs, size, output)
    small = absorb_small(net)
    assert len(small) <= len(net)
    np.testing.assert_allclose(small.dense(), net.dense(), rtol=1e-10, atol=1e-12)


@pytest.mark.parametrize("seed", range(3))
def test_absorb_small_keeps_circuit_amplitudes_and_never_grows_tensors(seed):
    c = random_circuit(6, 24, seed=seed)
    net = amplitude_network(c, "010011")
    small = absorb_small(net)
    assert max(a.size for a in small.arrays) <= max(a.size for a in net.arrays) or len(small) == 1
    assert complex(small.dense()) == pytest.approx(complex(net.dense()), abs=1e-12)


def test_ghz_network_folds_to_one_tensor():
    # GHZ amplitude <1..1|GHZ> = 1/sqrt(2) (Nielsen & Chuang, 2000, sec. 1.3.6).
    n = 2000
    c = Circuit(n).h(0)
    for q in range(n - 1):
        c.cx(q, q + 1)
    small = absorb_small(amplitude_network(c, "1" * n))
    assert len(small) == 1
    assert complex(small.dense()) == pytest.approx(2**-0.5, abs=1e-14)


def test_pair_contraction_with_more_labels_than_einsum_sublists_allow():
    # 60 labels of size 1 plus a shared one: numpy.einsum's sublist form takes 52 at most.
    la = (*tuple(range(30)), 100)
    lb = (*tuple(range(30, 60)), 100)
    a = np.full((1,) * 30 + (3,), 2.0)
    b = np.full((1,) * 30 + (3,), 5.0)
    out = tuple(range(60))
    got = _einsum_pair(a, la, b, lb, out)
    assert got.shape == (1,) * 60 and got.item() == 30.0
